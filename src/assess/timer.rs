//! The timer as the node actually runs it: whole ticks per phase turn and per update.

use crate::scenario::Scenario;

/// A timer tick must be at most this fraction of the lock tolerance. Two nodes each
/// stamping and scheduling to whole ticks can differ by up to about two ticks of pure
/// rounding (uniform rounding errors of ±½ tick at each end, Widrow, Kollár & Liu, IEEE
/// Trans. Instrum. Meas. 45 (1996)); a quarter of the tolerance keeps that rounding within
/// half the band, leaving the rest for jitter and dynamics (own choice, no source).
pub const MAX_TICK_FRACTION_OF_TOLERANCE: f64 = 0.25;

/// The period and update interval as the timer runs them.
#[derive(Clone, Copy, Debug, PartialEq)]
pub struct TimerCheck {
    /// One timer tick, seconds.
    pub tick_s: f64,
    /// Whole timer ticks per phase turn.
    pub ticks_per_period: u32,
    /// The phase period the node runs, seconds (`ticks_per_period / timer_hz`).
    pub period_s: f64,
    /// How far that is from the scenario's `phase_period_s`, ppm (positive: longer).
    pub period_error_ppm: f64,
    /// Whole timer ticks per update.
    pub update_ticks: u32,
    /// The update interval the node runs, seconds.
    pub update_period_s: f64,
    /// How far that is from `1 / update_rate_hz`, ppm.
    pub update_error_ppm: f64,
    /// The tick is at most [`MAX_TICK_FRACTION_OF_TOLERANCE`] of the lock tolerance.
    pub tick_ok: bool,
    /// Rounding moves the period by more than the crystal tolerance.
    pub rounding_beyond_crystal: bool,
}

impl TimerCheck {
    /// The timer of `scenario`.
    #[must_use]
    pub fn of(scenario: &Scenario) -> TimerCheck {
        let hz = f64::from(scenario.timer_hz);
        let tick_s = 1.0 / hz;
        let period_s = f64::from(scenario.ticks_per_period) / hz;
        let update_period_s = f64::from(scenario.update_ticks) / hz;
        let ppm = |actual: f64, nominal: f64| (actual / nominal - 1.0) * 1e6;
        let period_error_ppm = ppm(period_s, scenario.phase_period_s);
        TimerCheck {
            tick_s,
            ticks_per_period: scenario.ticks_per_period,
            period_s,
            period_error_ppm,
            update_ticks: scenario.update_ticks,
            update_period_s,
            update_error_ppm: ppm(update_period_s, 1.0 / scenario.update_rate_hz),
            tick_ok: tick_s <= MAX_TICK_FRACTION_OF_TOLERANCE * scenario.lock_tolerance_s,
            rounding_beyond_crystal: period_error_ppm.abs() > scenario.crystal_tolerance_ppm,
        }
    }
}
