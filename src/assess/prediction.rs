//! What the planner predicts for one pair of gains on one network.

use super::AssessError;
use super::constants::NodeConstants;
use super::network::NetworkModel;
use crate::plan::{self, Budget, Locking, Margins, Model, Noise, Settling, Spread, Stability};
use crate::scenario::Scenario;

/// The planner's model of the node law for `scenario` at gains `kp`, `ki` (as the node
/// runs them) and slew limit `slew_limit_turns` (as the node runs it).
#[must_use]
pub fn model(scenario: &Scenario, kp: f64, ki: f64, slew_limit_turns: f64) -> Model {
    Model {
        law: scenario.law.into(),
        kp,
        ki,
        update_period_s: scenario.update_period_s(),
        phase_period_s: scenario.phase_period_s,
        delay_updates: scenario.delay_updates(),
        success_prob: 1.0 - scenario.loss_fraction,
        slew_limit_turns,
        trim_limit_ppm: scenario.trim_limit_ppm,
    }
}

/// The planner's budget for `scenario`, with its required margins.
#[must_use]
pub fn budget(scenario: &Scenario) -> Budget {
    Budget {
        lock_time_budget_s: scenario.lock_budget_s,
        spread: Spread {
            initial_spread_s: scenario.initial_spread_s,
            tolerance_s: scenario.lock_tolerance_s,
        },
        crystal_tolerance_ppm: scenario.crystal_tolerance_ppm,
        margins: scenario.margins,
    }
}

/// The margins one pair of gains has, beside the ones the scenario requires.
#[derive(Clone, Copy, Debug, PartialEq)]
pub struct MarginCheck {
    /// Factor both gains may grow by before some mode stops decaying.
    pub gain: f64,
    /// Extra whole updates of link delay these gains tolerate (0 when unstable).
    pub delay_updates: u32,
    /// What the scenario requires.
    pub required: Margins,
}

impl MarginCheck {
    /// The gain margin meets the requirement.
    #[must_use]
    pub fn gain_ok(&self) -> bool {
        self.gain >= self.required.gain
    }

    /// The delay margin meets the requirement.
    #[must_use]
    pub fn delay_ok(&self) -> bool {
        self.delay_updates >= self.required.delay_updates
    }
}

/// What the planner predicts at one pair of gains.
#[derive(Clone, Copy, Debug, PartialEq)]
pub struct Prediction {
    /// The node-law constants the gains round to.
    pub constants: NodeConstants,
    /// The planner's model at the gains as flashed.
    pub model: Model,
    /// Stability and convergence factors.
    pub stability: Stability,
    /// Margins found and required.
    pub margins: MarginCheck,
    /// Settling (only when stable).
    pub settling: Option<Settling>,
    /// Worst-case lock against the crystal tolerance (`None`: no flow factor known).
    pub locking: Option<Locking>,
    /// Steady phase jitter from timestamp jitter (only when stable and every mode is known).
    pub noise: Option<Noise>,
    /// The predicted lock time compared with the budget, seconds
    /// ([`crate::plan::predicted_lock_s`]); `None` when unstable.
    pub lock_s: Option<f64>,
}

impl Prediction {
    /// Proportional gain as the node runs it.
    #[must_use]
    pub fn kp(&self) -> f64 {
        self.model.kp
    }

    /// Integral gain as the node runs it.
    #[must_use]
    pub fn ki(&self) -> f64 {
        self.model.ki
    }
}

/// Predict the behaviour of `scenario` on `network` at gains `kp`, `ki` (rounded to the
/// node law's Q16.16 first).
///
/// # Errors
/// [`AssessError::Input`] for gains the node law refuses or values the planner refuses.
pub fn predict(
    scenario: &Scenario,
    network: &NetworkModel,
    kp: f64,
    ki: f64,
) -> Result<Prediction, AssessError> {
    let input = |message: String| AssessError::input(&scenario.path, message);
    let constants = NodeConstants::new(scenario, kp, ki).map_err(|e| input(format!("law: {e}")))?;
    constants
        .config()
        .map_err(|e| input(format!("law: the node law refuses these values: {e}")))?;
    let (kp, ki) = constants.gains();
    let m = model(scenario, kp, ki, constants.slew_limit_turns());
    let spectrum = &network.spectrum;
    let stability = plan::stability(&m, spectrum).map_err(|e| input(format!("prediction: {e}")))?;
    let margins = MarginCheck {
        gain: stability.gain_margin,
        delay_updates: if stability.stable {
            plan::delay_margin(&m, spectrum)
        } else {
            0
        },
        required: scenario.margins,
    };
    let settling = if stability.stable {
        Some(
            plan::settle(&m, spectrum, &budget(scenario).spread)
                .map_err(|e| input(format!("prediction: {e}")))?,
        )
    } else {
        None
    };
    let locking = match network.flow_factor {
        Some(f) => Some(
            plan::lock_worst_case(&m, spectrum, f, scenario.crystal_tolerance_ppm)
                .map_err(|e| input(format!("prediction: {e}")))?,
        ),
        None => None,
    };
    // The scenario gives the timestamp error as a uniform ±a; the planner wants its
    // standard deviation a/√3.
    let jitter_sd_s = scenario.timestamp_jitter_s / 3.0_f64.sqrt();
    let noise = match (stability.stable, network.nonzero_eigenvalues()) {
        (true, Some(modes)) => {
            plan::phase_jitter(&m, spectrum, modes.iter().copied(), jitter_sd_s).ok()
        }
        _ => None,
    };
    let lock_s = settling.as_ref().map(plan::predicted_lock_s);
    Ok(Prediction {
        constants,
        model: m,
        stability,
        margins,
        settling,
        locking,
        noise,
        lock_s,
    })
}
