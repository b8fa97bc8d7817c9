//! The node-law constants a scenario and a pair of gains come to.

use crate::scenario::Scenario;
use crate::{Config, ConfigError, Gain, Law};

/// Counts per turn of the `u32` binary angle.
const TURN: f64 = 4_294_967_296.0;

/// The node-law values a scenario and a pair of gains come to, in the node law's own
/// units (timer ticks, Q16.16 raw gains, phase counts with 2^32 per turn, ppb).
#[derive(Clone, Copy, Debug, PartialEq, Eq)]
pub struct NodeConstants {
    /// Timer ticks per phase turn.
    pub ticks_per_period: u32,
    /// Timer ticks between updates.
    pub update_ticks: u32,
    /// Proportional gain, Q16.16 raw.
    pub kp_q16: u32,
    /// Integral gain, Q16.16 raw.
    pub ki_q16: u32,
    /// Trim leak per update, Q16.16 raw (the scenario's `trim_leak`, default `ki/64`).
    pub leak_q16: u32,
    /// Largest phase step per update, counts (2^32 = one turn).
    pub slew_limit_counts: u32,
    /// Largest rate trim either way, ppb.
    pub trim_limit_ppb: u32,
    /// Silence before a neighbour is dropped, timer ticks.
    pub timeout_ticks: u32,
    /// The coupling law.
    pub law: Law,
}

impl NodeConstants {
    /// Round the scenario's values and the gains `kp`, `ki` to the node law's units.
    ///
    /// # Errors
    /// [`ConfigError::GainOutOfRange`] for gains outside `[0, 2)`.
    pub fn new(scenario: &Scenario, kp: f64, ki: f64) -> Result<NodeConstants, ConfigError> {
        // Unit conversions only: turns → counts (× 2^32), ppm → ppb (× 1000).
        let slew = (scenario.slew_limit_turns * TURN).round();
        let slew_limit_counts = slew.clamp(1.0, f64::from(i32::MAX as u32)) as u32;
        let trim_limit_ppb = (scenario.trim_limit_ppm * 1_000.0).round() as u32;
        Ok(NodeConstants {
            ticks_per_period: scenario.ticks_per_period,
            update_ticks: scenario.update_ticks,
            kp_q16: Gain::from_f32(kp as f32)?.q16(),
            ki_q16: Gain::from_f32(ki as f32)?.q16(),
            leak_q16: Gain::from_f32(scenario.trim_leak(ki) as f32)?.q16(),
            slew_limit_counts,
            trim_limit_ppb,
            timeout_ticks: scenario
                .update_ticks
                .saturating_mul(scenario.neighbour_timeout_updates),
            law: scenario.law,
        })
    }

    /// The trim leak as the node runs it (after rounding to Q16.16).
    #[must_use]
    pub fn leak(&self) -> f64 {
        Gain::from_q16(self.leak_q16).to_f64()
    }

    /// The gains as the node runs them (after rounding to Q16.16).
    #[must_use]
    pub fn gains(&self) -> (f64, f64) {
        (
            Gain::from_q16(self.kp_q16).to_f64(),
            Gain::from_q16(self.ki_q16).to_f64(),
        )
    }

    /// The slew limit as the node runs it, turns.
    #[must_use]
    pub fn slew_limit_turns(&self) -> f64 {
        f64::from(self.slew_limit_counts) / TURN
    }

    /// The checked node configuration.
    ///
    /// # Errors
    /// The node law's [`ConfigError`] for any value it refuses.
    pub fn config(&self) -> Result<Config, ConfigError> {
        Config::builder(self.ticks_per_period, self.update_ticks)
            .kp(Gain::from_q16(self.kp_q16))
            .ki(Gain::from_q16(self.ki_q16))
            .leak(Gain::from_q16(self.leak_q16))
            .law(self.law)
            .slew_limit(self.slew_limit_counts)
            .trim_limit_ppb(self.trim_limit_ppb)
            .timeout_ticks(self.timeout_ticks)
            .build()
    }
}
