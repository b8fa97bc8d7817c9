//! The checker's prediction for a scenario, side by side with the simulation: the same
//! network, law and gains handed to [`crate::plan`] (closed forms) or, for an arbitrary
//! graph, to [`crate::graph`] (numeric spectrum). Nothing here re-derives a prediction.

use super::error::SimError;
use super::lock::{TURN, largest_pairwise_diff};
use super::network::phase_from_turns;
use super::scenario::{Crystals, Scenario, StartPhases};
use crate::plan::{self, Locking, Model, Noise, Settling, Spectrum, Spread, Stability, Topology};
use crate::{Law, Phase};

/// What the checker predicts for a scenario.
#[derive(Clone, Copy, Debug, PartialEq)]
pub struct Prediction {
    /// The node law as the planner sees it.
    pub model: Model,
    /// The network's spectrum summary.
    pub spectrum: Spectrum,
    /// Stability and convergence factors.
    pub stability: Stability,
    /// Settling from the start spread to the lock tolerance.
    pub settling: Settling,
    /// The predicted lock time to set against the simulated median, updates: the
    /// asymptotic estimate (linear law) or the sine-law estimate with the large-spread
    /// weakening integrated (sine law), stretched by the loss slow-down
    /// (Kar & Moura's mean dynamics) when beacons are lost.
    pub lock_updates: u64,
    /// Whether the law holds the crystals' drift, and at what offsets (`None` for
    /// identical crystals: there is no drift to hold).
    pub locking: Option<Locking>,
    /// Steady phase jitter from timestamp jitter (`None` without timestamp jitter, or
    /// when the modes are not at hand).
    pub noise: Option<Noise>,
}

/// The planner's model of `scenario`'s node law.
#[must_use]
pub fn model_of(scenario: &Scenario) -> Model {
    let c = &scenario.config;
    let law = match c.law() {
        Law::Linear => plan::Law::Linear,
        _ => plan::Law::Sine,
    };
    let trim_ppm = f64::from(c.trim_limit_ppb()) / 1000.0;
    Model {
        law,
        kp: c.kp().to_f64(),
        ki: c.ki().to_f64(),
        update_period_s: scenario.update_period_s(),
        phase_period_s: scenario.phase_period_s(),
        delay_updates: scenario.beacons.latency_ticks / c.update_ticks(),
        success_prob: scenario.beacons.success_prob,
        slew_limit_turns: f64::from(c.slew_limit()) / TURN,
        // A zero trim range (trimming off) is the smallest positive range to the planner.
        trim_limit_ppm: if trim_ppm > 0.0 {
            trim_ppm
        } else {
            f64::MIN_POSITIVE
        },
    }
}

/// The widest start spread of `scenario`, turns: the interval width for uniform start
/// phases (the most a run can draw), the largest pairwise difference for given ones.
#[must_use]
pub fn start_spread_turns(scenario: &Scenario) -> f64 {
    match &scenario.start {
        StartPhases::Uniform { spread_turns } => *spread_turns,
        StartPhases::Fixed(v) => {
            let phases: Vec<Phase> = v.iter().map(|&t| phase_from_turns(t)).collect();
            f64::from(largest_pairwise_diff(&phases, &mut Vec::new())) / TURN
        }
    }
}

/// The checker's prediction for `scenario`.
///
/// # Errors
/// The scenario's [`Scenario::validate`] error; [`SimError::Plan`] or
/// [`SimError::Graph`] when the checker refuses (for example an unstable gain, or a
/// tolerance not below the start spread).
pub fn predict(scenario: &Scenario) -> Result<Prediction, SimError> {
    scenario.validate()?;
    let model = model_of(scenario);
    let links = &scenario.links;
    let topology = links.topology();
    let spectrum = match topology {
        Some(t) => t.spectrum().map_err(SimError::Plan)?,
        None => links.graph().spectrum().map_err(SimError::Graph)?,
    };
    let stability = plan::stability(&model, &spectrum).map_err(SimError::Plan)?;
    let period = scenario.phase_period_s();
    let spread = Spread {
        initial_spread_s: start_spread_turns(scenario) * period,
        tolerance_s: scenario.lock.tolerance_turns * period,
    };
    let settling = plan::settle(&model, &spectrum, &spread).map_err(SimError::Plan)?;
    let base = match (model.law, settling.sine_updates) {
        (plan::Law::Sine, Some(u)) => u,
        _ => settling.asymptotic_updates,
    };
    let lock_updates = if model.success_prob < 1.0 && settling.asymptotic_updates > 0 {
        let stretch = settling.with_loss_updates as f64 / settling.asymptotic_updates as f64;
        (base as f64 * stretch).ceil() as u64
    } else {
        base
    };
    let locking = locking_of(scenario, &model, &spectrum, topology)?;
    let jitter = scenario.beacons.timestamp_jitter_ticks;
    let noise = if jitter > 0 {
        // A uniform draw over ±J ticks has standard deviation J/√3.
        let sd_s = f64::from(jitter) / 3f64.sqrt() / scenario.tick_hz;
        let modes: Option<Vec<f64>> = match topology {
            Some(t) => Some(t.nonzero_modes().collect()),
            None => links
                .graph()
                .dense_spectrum()
                .ok()
                .map(|d| d.eigenvalues().iter().skip(1).copied().collect()),
        };
        match modes {
            Some(m) => {
                Some(plan::phase_jitter(&model, &spectrum, m, sd_s).map_err(SimError::Plan)?)
            }
            None => None,
        }
    } else {
        None
    };
    Ok(Prediction {
        model,
        spectrum,
        stability,
        settling,
        lock_updates,
        locking,
        noise,
    })
}

fn locking_of(
    scenario: &Scenario,
    model: &Model,
    spectrum: &Spectrum,
    topology: Option<Topology>,
) -> Result<Option<Locking>, SimError> {
    let flow_factor = || -> Result<f64, SimError> {
        match topology {
            Some(t) => t.worst_flow_factor().map_err(SimError::Plan),
            None => scenario
                .links
                .graph()
                .worst_flow_factor()
                .map_err(SimError::Graph),
        }
    };
    let worst = |tolerance_ppm: f64| -> Result<Option<Locking>, SimError> {
        plan::lock_worst_case(model, spectrum, flow_factor()?, tolerance_ppm)
            .map(Some)
            .map_err(SimError::Plan)
    };
    match &scenario.crystals {
        Crystals::Identical { .. } => Ok(None),
        Crystals::Uniform { tolerance_ppm } => worst(*tolerance_ppm),
        Crystals::Fixed(ppm) => match topology {
            Some(Topology::Chain { .. }) => {
                let mut offsets = vec![0.0; ppm.len().saturating_sub(1)];
                plan::chain_lock(model, ppm, &mut offsets)
                    .map(Some)
                    .map_err(SimError::Plan)
            }
            Some(Topology::PinnedChain { nodes }) => {
                // The last node is the reference (nominal rate); the planner takes the rest.
                let own = ppm.get(..nodes).unwrap_or(&[]);
                let mut offsets = vec![0.0; own.len()];
                plan::pinned_chain_lock(model, own, &mut offsets)
                    .map(Some)
                    .map_err(SimError::Plan)
            }
            _ => {
                // No exact pattern test off a chain: the worst case within the spread.
                let mean = ppm.iter().sum::<f64>() / ppm.len().max(1) as f64;
                worst(ppm.iter().map(|e| (e - mean).abs()).fold(0.0, f64::max))
            }
        },
    }
}

/// The per-edge steady offsets the checker predicts for a chain with given crystals
/// (`Δ_k = θ_{k+1} − θ_k`, turns), with the verdict.
///
/// # Errors
/// [`SimError::InvalidParameter`] unless the links are a chain and the crystals are
/// given per node; [`SimError::Plan`] from the checker.
pub fn chain_offsets(scenario: &Scenario) -> Result<(Locking, Vec<f64>), SimError> {
    let (Some(Topology::Chain { .. }), Crystals::Fixed(ppm)) =
        (scenario.links.topology(), &scenario.crystals)
    else {
        return Err(SimError::InvalidParameter {
            name: "scenario",
            valid: "a chain with crystals given per node",
        });
    };
    let model = model_of(scenario);
    let mut offsets = vec![0.0; ppm.len().saturating_sub(1)];
    let locking = plan::chain_lock(&model, ppm, &mut offsets).map_err(SimError::Plan)?;
    Ok((locking, offsets))
}
