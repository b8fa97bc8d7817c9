//! Which gains an assessment runs at: the scenario's own, or the tuner's for the gains
//! the scenario marks `"tune"` (a gain given as a number is never changed).

use super::AssessError;
use super::constants::NodeConstants;
use super::network::NetworkModel;
use super::prediction::{budget, model};
use crate::plan::{self, Search, Tuning};
use crate::scenario::{GainSetting, Scenario};

/// Where the gains of an assessment came from.
#[derive(Clone, Copy, Debug, PartialEq, Eq)]
pub enum GainsSource {
    /// Both gains are the scenario's numbers.
    Scenario,
    /// At least one gain was chosen by the tuner.
    Tuned,
}

impl GainsSource {
    /// Keyword used in reports and JSON.
    #[must_use]
    pub fn keyword(self) -> &'static str {
        match self {
            GainsSource::Scenario => "scenario",
            GainsSource::Tuned => "tuned",
        }
    }
}

/// The gains an assessment runs at (before rounding to the node law's Q16.16).
#[derive(Clone, Copy, Debug, PartialEq)]
pub struct ChosenGains {
    /// Proportional gain per update.
    pub kp: f64,
    /// Integral gain per update.
    pub ki: f64,
    /// Where they came from.
    pub source: GainsSource,
    /// The tuner's answer, when a gain was tuned.
    pub tuning: Option<Tuning>,
}

/// What the tuner must choose for `scenario`: `None` when both gains are numbers.
#[must_use]
pub fn search(scenario: &Scenario) -> Option<Search> {
    match (scenario.gains.kp, scenario.gains.ki) {
        (GainSetting::Tune, GainSetting::Tune) => Some(Search::Both),
        (GainSetting::Tune, GainSetting::Fixed(ki)) => Some(Search::Kp { ki }),
        (GainSetting::Fixed(kp), GainSetting::Tune) => Some(Search::Ki { kp }),
        (GainSetting::Fixed(_), GainSetting::Fixed(_)) => None,
    }
}

/// Run the tuner for `scenario` on `network`, choosing what `search` names.
///
/// # Errors
/// [`AssessError::Input`] for values the tuner refuses.
pub fn tune(
    scenario: &Scenario,
    network: &NetworkModel,
    search: Search,
) -> Result<Tuning, AssessError> {
    let slew = NodeConstants::new(scenario, 0.5, 0.0)
        .map(|c| c.slew_limit_turns())
        .unwrap_or(scenario.slew_limit_turns);
    let template = model(scenario, 1.0, 0.0, slew);
    let b = budget(scenario);
    let lock_time = &mut |_: &plan::Model, s: &plan::Settling| plan::predicted_lock_s(s);
    let result = match network.topology {
        Some(t) => plan::tune_topology(&template, &t, &b, search, lock_time),
        None => plan::tune_with(
            &template,
            &network.spectrum,
            network.flow_factor,
            &b,
            search,
            lock_time,
        ),
    };
    result.map_err(|e| AssessError::input(&scenario.path, format!("tuning: {e}")))
}

/// The gains `scenario` runs at: its own numbers, or for the gains it marks `"tune"` the
/// tuner's recommendation (its closest gains when nothing meets the budget with the
/// margins, so that the verdict says which requirement fails).
///
/// # Errors
/// As [`tune`]; and [`AssessError::Input`] when the tuner finds no stable, locking gains.
pub fn choose(scenario: &Scenario, network: &NetworkModel) -> Result<ChosenGains, AssessError> {
    let Some(search) = search(scenario) else {
        let (kp, ki) = scenario
            .gains
            .both_fixed()
            .unwrap_or_else(|| panic!("search() is None only when both gains are fixed"));
        return Ok(ChosenGains {
            kp,
            ki,
            source: GainsSource::Scenario,
            tuning: None,
        });
    };
    let tuning = tune(scenario, network, search)?;
    let pick = tuning.pick().ok_or_else(|| {
        AssessError::input(
            &scenario.path,
            "tuning: no stable gains lock this network against the crystal tolerance; raise law.slew_limit_turns or law.trim_limit_ppm, tighten clock.crystal_tolerance_ppm, or update faster".to_owned(),
        )
    })?;
    Ok(ChosenGains {
        kp: pick.kp,
        ki: pick.ki,
        source: GainsSource::Tuned,
        tuning: Some(tuning),
    })
}
