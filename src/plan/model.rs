//! The discrete-time model of the node law, with its units.

use super::error::{PlanError, non_negative, positive};

/// Longest delay, in updates, the root finder handles (the delayed mode polynomial has
/// degree `d + 2`).
pub const MAX_DELAY_UPDATES: u32 = 30;

/// The shape of the coupling function `f(Δ)` applied to each wrapped neighbour difference
/// Δ (turns), as the planner sees it. Every node [`Law`](crate::Law) has one
/// (`From<crate::Law>`): the integer and `f32` sine laws are all [`Shape::Sine`].
#[non_exhaustive]
#[derive(Clone, Copy, Debug, PartialEq, Eq)]
pub enum Shape {
    /// `f(Δ) = Δ` with Δ wrapped into [−½, ½) turn.
    Linear,
    /// `f(Δ) = sin(2πΔ)/(2π)`: slope 1 at Δ = 0, largest value `1/(2π)` turn.
    Sine,
}

/// The node law as the planner sees it.
///
/// Per update of period `update_period_s`, node i adds `kp·Σ_j f(θ_j − θ_i)` (turns)
/// to its phase and `ki·Σ_j f(θ_j − θ_i)` (turns per update) to its rate trim; the
/// correction is clamped to `±slew_limit_turns`, the trim to `±trim_limit_ppm`. Neighbour
/// values are `delay_updates` updates old, and each message arrives with probability
/// `success_prob`. Small-signal, per Laplacian mode λ the law is
/// `z^d (z−1)² + λ(kp(z−1) + ki) = 0` (docs/design.md, PI row, for d = 0; `ki = 0` gives the
/// P-only law `z^{d+1} − z^d + kp·λ = 0`).
#[derive(Clone, Copy, Debug, PartialEq)]
pub struct Model {
    /// Shape of the coupling function (the node law's, see `From<crate::Law>`).
    pub law: Shape,
    /// Proportional gain per update (dimensionless; the consensus step ε), `> 0`.
    pub kp: f64,
    /// Integral (rate-trim) gain per update, `0 ≤ ki < kp`; 0 gives the P-only law.
    pub ki: f64,
    /// Time between two updates of one node, seconds, `> 0`.
    pub update_period_s: f64,
    /// Duration of one phase turn, seconds, `> 0`.
    pub phase_period_s: f64,
    /// Age of neighbour values when they are used, in updates, `0..=MAX_DELAY_UPDATES`.
    pub delay_updates: u32,
    /// Probability that a neighbour's message arrives in an update, `0 < p ≤ 1`.
    pub success_prob: f64,
    /// Largest phase correction per update, turns, `> 0` (use `f64::INFINITY` for none).
    pub slew_limit_turns: f64,
    /// Largest rate trim, ppm, `> 0` (use `f64::INFINITY` for none).
    pub trim_limit_ppm: f64,
}

impl Model {
    /// A P-only model with no delay, no loss and no clamps: the textbook consensus step.
    pub const fn p_only(law: Shape, kp: f64, update_period_s: f64, phase_period_s: f64) -> Self {
        Self {
            law,
            kp,
            ki: 0.0,
            update_period_s,
            phase_period_s,
            delay_updates: 0,
            success_prob: 1.0,
            slew_limit_turns: f64::INFINITY,
            trim_limit_ppm: f64::INFINITY,
        }
    }

    /// Check every field against its documented range.
    ///
    /// # Errors
    /// [`PlanError::InvalidParameter`] naming the first bad field, or
    /// [`PlanError::DelayTooLong`].
    pub fn validate(&self) -> Result<(), PlanError> {
        positive(self.kp, "kp")?;
        non_negative(self.ki, "ki")?;
        if self.ki >= self.kp {
            return Err(PlanError::InvalidParameter {
                name: "ki",
                valid: "< kp",
            });
        }
        positive(self.update_period_s, "update_period_s")?;
        positive(self.phase_period_s, "phase_period_s")?;
        if self.delay_updates > MAX_DELAY_UPDATES {
            return Err(PlanError::DelayTooLong {
                max: MAX_DELAY_UPDATES,
                got: self.delay_updates,
            });
        }
        if !(self.success_prob > 0.0 && self.success_prob <= 1.0) {
            return Err(PlanError::InvalidParameter {
                name: "success_prob",
                valid: "in (0, 1]",
            });
        }
        if self.slew_limit_turns.is_nan() || self.slew_limit_turns <= 0.0 {
            return Err(PlanError::InvalidParameter {
                name: "slew_limit_turns",
                valid: "> 0",
            });
        }
        if self.trim_limit_ppm.is_nan() || self.trim_limit_ppm <= 0.0 {
            return Err(PlanError::InvalidParameter {
                name: "trim_limit_ppm",
                valid: "> 0",
            });
        }
        Ok(())
    }

    /// Whether the rate-trim integrator is on (`ki > 0`).
    pub fn is_pi(&self) -> bool {
        self.ki > 0.0
    }

    /// The same law with both gains scaled by `factor` (used for margins and the
    /// mean dynamics under loss).
    pub fn scaled(&self, factor: f64) -> Self {
        Self {
            kp: self.kp * factor,
            ki: self.ki * factor,
            ..*self
        }
    }

    /// Phase drift per update, turns, of a crystal that is `error_ppm` fast:
    /// `error_ppm · 1e-6 · update_period_s / phase_period_s`.
    pub fn ppm_to_turns_per_update(&self, error_ppm: f64) -> f64 {
        error_ppm * 1e-6 * self.update_period_s / self.phase_period_s
    }

    /// Inverse of [`Self::ppm_to_turns_per_update`].
    pub fn turns_per_update_to_ppm(&self, turns_per_update: f64) -> f64 {
        turns_per_update * 1e6 * self.phase_period_s / self.update_period_s
    }

    /// Seconds to turns: `seconds / phase_period_s`.
    pub fn seconds_to_turns(&self, seconds: f64) -> f64 {
        seconds / self.phase_period_s
    }

    /// Steady phase offset across an edge carrying `flow_turns_per_update` (P-only law):
    /// `arcsin(2π·flow/kp)/(2π)` for the sine law, `flow/kp` for the linear law
    /// (Strogatz & Mirollo 1988), saturating at ±¼ turn (sine) or ±½ turn (linear) past the
    /// edge capacity. For a general graph use the flows of the numeric path; exact on trees.
    pub fn edge_lag_turns(&self, flow_turns_per_update: f64) -> f64 {
        let kp = self.kp;
        match self.law {
            Shape::Sine => {
                let x = (2.0 * core::f64::consts::PI * flow_turns_per_update / kp).clamp(-1.0, 1.0);
                libm::asin(x) / (2.0 * core::f64::consts::PI)
            }
            Shape::Linear => (flow_turns_per_update / kp).clamp(-0.5, 0.5),
        }
    }

    /// Largest per-edge steady flow the law can carry, turns per update: `kp/(2π)` for
    /// the sine law (the sine's peak), `kp/2` for the linear law (offset reaches the
    /// ½-turn wrap).
    pub fn edge_capacity_turns_per_update(&self) -> f64 {
        match self.law {
            Shape::Sine => self.kp / (2.0 * core::f64::consts::PI),
            Shape::Linear => self.kp / 2.0,
        }
    }
}

impl From<crate::Law> for Shape {
    /// The planner's view of a node law: the integer and `f32` sine laws are all the
    /// sine law; the linear law is the linear law.
    fn from(law: crate::Law) -> Shape {
        match law {
            crate::Law::Linear => Shape::Linear,
            _ => Shape::Sine,
        }
    }
}
