//! What the planner predicts for one pair of gains on one network.

use super::AssessError;
use super::constants::NodeConstants;
use super::network::NetworkModel;
use super::simulation::setup;
use super::timer::TimerCheck;
use crate::forecast::{self, Forecast};
use crate::plan::{self, Budget, Locking, Margins, Model, Noise, Settling, Spread, Stability};
use crate::scenario::{LockQuantile, MAX_SIM_UPDATES, Scenario};

/// Sampled runs of the forecast behind the predicted settling distribution and noise
/// floor (nearest-rank p90 from 200 samples has a sampling spread of a few per cent).
pub const FORECAST_SAMPLES: usize = 200;

/// Most neighbour-updates the forecast spends on one prediction (its samples shrink to
/// fit, down to [`FORECAST_MIN_SAMPLES`]; below that the prediction rests on the bound).
pub const FORECAST_MAX_WORK: f64 = 4.0e8;

/// Fewest samples worth a forecast.
pub const FORECAST_MIN_SAMPLES: usize = 20;

/// Seed of the forecast's sampled runs (fixed, so a prediction repeats).
pub const FORECAST_SEED: u64 = 0x5E77_1E00;

/// The simulation horizon is at least this many times the worst-case settling bound.
pub const HORIZON_BOUND_FACTOR: f64 = 3.0;

/// The simulation horizon spans at least this many periods of the slowest oscillating
/// mode (so a swing back out of the band is seen).
pub const HORIZON_SLOW_PERIODS: f64 = 10.0;

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

/// Predicted settling (the instant after which the largest pairwise error stays within
/// the tolerance), seconds.
#[derive(Clone, Copy, Debug, PartialEq)]
pub struct SettlePrediction {
    /// Median over random power-up phases and crystal draws (forecast); `None` when the
    /// forecast could not run or half its runs never settle.
    pub p50_s: Option<f64>,
    /// 90th percentile (forecast), as [`Self::p50_s`].
    pub p90_s: Option<f64>,
    /// Worst-case bound ([`crate::plan::predicted_lock_s`]: the planner's bound, never
    /// below the slowest-mode estimate, times the loss slow-down).
    pub bound_s: f64,
    /// Fraction of the forecast's runs that never settle within the horizon.
    pub never_settled_fraction: f64,
    /// The figure the verdict compares with the budget: the scenario's quantile of the
    /// forecast, or the bound; infinite when more runs than the quantile allows never
    /// settle.
    pub compared_s: f64,
}

/// Predicted steady noise floor: the largest pairwise error after settling, seconds.
#[derive(Clone, Copy, Debug, PartialEq)]
pub struct NoiseFloorPrediction {
    /// Median.
    pub p50_s: f64,
    /// 99th percentile.
    pub p99_s: f64,
}

/// What the planner predicts at one pair of gains.
#[derive(Clone, Debug, PartialEq)]
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
    /// The predicted lock time compared with the budget, seconds (see
    /// [`SettlePrediction::compared_s`]); `None` when unstable.
    pub lock_s: Option<f64>,
    /// The timer as the node runs it.
    pub timer: TimerCheck,
    /// The simulation horizon the prediction and the Monte Carlo share, updates.
    pub horizon_updates: u64,
    /// The horizon was cut to the simulator's limit below what the settling needs.
    pub horizon_capped: bool,
    /// Predicted settling (when stable).
    pub settle: Option<SettlePrediction>,
    /// Predicted noise floor (when the forecast ran).
    pub noise_floor: Option<NoiseFloorPrediction>,
    /// The forecast itself (when it ran).
    pub forecast: Option<Forecast>,
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

/// How much work a prediction spends: forecast samples and the simulation horizon.
#[derive(Clone, Copy, Debug, PartialEq)]
pub struct PredictEffort {
    /// Sampled runs of the forecast (at most; fewer when the work would exceed
    /// [`FORECAST_MAX_WORK`], none below [`FORECAST_MIN_SAMPLES`]).
    pub forecast_samples: usize,
    /// `None`: the assessment's horizon (see [`HORIZON_BOUND_FACTOR`]). `Some(f)`: a
    /// shorter one, `f × budget` (`f × max(budget, worst-case bound)` with
    /// [`PredictEffort::horizon_covers_bound`]) plus the last reboot's return, never
    /// longer than the assessment's, for quick property runs that only ask whether
    /// settling came within the budget or the bound.
    pub horizon_factor: Option<f64>,
    /// With [`PredictEffort::horizon_factor`]: the short horizon also covers the
    /// worst-case bound.
    pub horizon_covers_bound: bool,
    /// Stop each forecast run once it has stayed deep inside the band long enough
    /// ([`forecast::forecast_early_stop`]; its noise floor is then a low estimate). For
    /// quick property runs that read only the settling.
    pub forecast_early_stop: bool,
    /// Skip the forecast when the planner's worst-case bound already meets the budget:
    /// the verdict's budget rule then passes on the prediction's side without it (the
    /// figure it compares is the bound, see [`SettlePrediction::compared_s`]), and the
    /// prediction carries no forecast quantiles or noise floor. For quick property runs
    /// that read only the budget rule; what it gives up is a forecast above the bound,
    /// which is the bound failing (the simulation against the bound checks that).
    pub forecast_only_over_budget: bool,
}

impl PredictEffort {
    /// What [`predict`] spends: [`FORECAST_SAMPLES`] and the assessment's horizon.
    pub const FULL: PredictEffort = PredictEffort {
        forecast_samples: FORECAST_SAMPLES,
        horizon_factor: None,
        horizon_covers_bound: true,
        forecast_early_stop: false,
        forecast_only_over_budget: false,
    };
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
    predict_with(scenario, network, kp, ki, PredictEffort::FULL)
}

/// [`predict`] with a chosen effort.
///
/// # Errors
/// As [`predict`].
pub fn predict_with(
    scenario: &Scenario,
    network: &NetworkModel,
    kp: f64,
    ki: f64,
    effort: PredictEffort,
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
    let timer = TimerCheck::of(scenario);
    let bound_s = settling.as_ref().map(plan::predicted_lock_s);
    let (mut horizon_updates, horizon_capped) = horizon(scenario, network, &m, bound_s);
    if let (Some(factor), Some(bound_s)) = (effort.horizon_factor, bound_s) {
        let rate = scenario.update_rate_hz;
        let span = if effort.horizon_covers_bound {
            scenario.lock_budget_s.max(bound_s)
        } else {
            scenario.lock_budget_s
        };
        let short = factor * span * rate + last_return_s(scenario) * rate;
        horizon_updates = horizon_updates.min((short.ceil() as u64).max(1));
    }
    // The forecast steps the same setup the Monte Carlo runs, with an independent model.
    let per_sample = 2.0
        * network.spectrum.max_degree.max(1.0)
        * network.spectrum.node_count as f64
        * horizon_updates as f64;
    let samples = ((FORECAST_MAX_WORK / per_sample) as usize).min(effort.forecast_samples);
    let forecast = match bound_s {
        Some(b) if effort.forecast_only_over_budget && b <= scenario.lock_budget_s => None,
        // The forecast steps a simulated setup: only within the simulation's node limit.
        Some(_)
            if samples >= FORECAST_MIN_SAMPLES
                && network.spectrum.node_count <= crate::scenario::MAX_SIMULATED_NODES =>
        {
            let mut s = setup(scenario, network, &constants, horizon_updates)?;
            // The forecast predicts settling from power-up; reboots are the simulation's.
            s.reboots.clear();
            if effort.forecast_early_stop {
                forecast::forecast_early_stop(&s, samples, FORECAST_SEED).ok()
            } else {
                forecast::forecast(&s, samples, FORECAST_SEED).ok()
            }
        }
        _ => None,
    };
    let period = scenario.update_period_s();
    let settle = bound_s.map(|bound_s| {
        let finite = |u: f64| (u.is_finite()).then_some(u * period);
        let at = |q: f64| {
            forecast
                .as_ref()
                .and_then(|f| finite(f.settle_quantile_updates(q)))
        };
        let compared_s = match (scenario.quantile, &forecast) {
            (LockQuantile::Fraction(q), Some(f)) => f.settle_quantile_updates(q) * period,
            // Without a forecast the bound is all there is.
            (LockQuantile::Fraction(_), None) | (LockQuantile::Bound, _) => bound_s,
        };
        SettlePrediction {
            p50_s: at(0.5),
            p90_s: at(0.9),
            bound_s,
            never_settled_fraction: forecast.as_ref().map_or(0.0, |f| f.never_settled_fraction),
            compared_s,
        }
    });
    let noise_floor = forecast.as_ref().map(|f| NoiseFloorPrediction {
        p50_s: f.noise_floor_turns.p50 * scenario.phase_period_s,
        p99_s: f.noise_floor_turns.p99 * scenario.phase_period_s,
    });
    Ok(Prediction {
        constants,
        model: m,
        stability,
        margins,
        settling,
        locking,
        noise,
        lock_s: settle.map(|s| s.compared_s),
        timer,
        horizon_updates,
        horizon_capped,
        settle,
        noise_floor,
        forecast,
    })
}

/// When the last rebooted node is back, seconds from power-up (0 without reboots).
fn last_return_s(scenario: &Scenario) -> f64 {
    scenario
        .reboots
        .iter()
        .map(crate::scenario::Reboot::back_s)
        .fold(0.0, f64::max)
}

/// The simulation horizon, updates: at least [`HORIZON_BOUND_FACTOR`] × the worst-case
/// bound, [`HORIZON_SLOW_PERIODS`] periods of the slowest oscillating mode, twice the
/// budget (each after the last reboot's return), and the scenario's own `duration_s`; at
/// most the simulator's limit (the second value says whether that cut it).
fn horizon(
    scenario: &Scenario,
    network: &NetworkModel,
    m: &Model,
    bound_s: Option<f64>,
) -> (u64, bool) {
    let rate = scenario.update_rate_hz;
    let period = network
        .eigenvalues
        .as_deref()
        .unwrap_or(&[network.spectrum.lambda_slow, network.spectrum.lambda_max])
        .iter()
        .filter(|&&l| l > 1e-12)
        .filter_map(|&l| forecast::mode_period(m.kp, m.ki, l))
        .fold(0.0_f64, f64::max);
    let settling = [
        bound_s.unwrap_or(0.0) * rate * HORIZON_BOUND_FACTOR,
        period * HORIZON_SLOW_PERIODS,
        2.0 * scenario.lock_budget_s * rate,
    ]
    .into_iter()
    .fold(0.0_f64, f64::max);
    let need = (settling + last_return_s(scenario) * rate)
        .max(scenario.duration_s.unwrap_or(0.0) * rate)
        .ceil();
    (need.min(MAX_SIM_UPDATES) as u64, need > MAX_SIM_UPDATES)
}
