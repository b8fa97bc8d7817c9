//! Checked node configuration.

use crate::{Gain, Law};
use core::fmt;

/// Largest accepted rate-trim range: ±10 % (10⁸ ppb). Real crystals need ±20..±200 ppm.
pub const MAX_TRIM_LIMIT_PPB: u32 = 100_000_000;

/// Why a [`ConfigBuilder`] refused to build.
#[derive(Clone, Copy, PartialEq, Eq, Hash, Debug)]
#[cfg_attr(feature = "defmt", derive(defmt::Format))]
#[non_exhaustive]
pub enum ConfigError {
    /// A gain outside `[0, 2)` (or NaN).
    GainOutOfRange,
    /// The proportional gain `kp` is zero: the node would never move.
    ZeroProportionalGain,
    /// The integral gain `ki` is not below `kp`; the PI law is then unstable on every
    /// topology (Jury test: `0 ≤ ki < kp` is necessary).
    IntegralGainNotBelowProportional,
    /// `ticks_per_period` below 2 (the phase would not advance).
    PeriodTooShort,
    /// `update_ticks` is zero or above `i32::MAX`.
    UpdateTicksOutOfRange,
    /// `slew_limit` is zero or above `i32::MAX` counts (half a turn).
    SlewLimitOutOfRange,
    /// `trim_limit_ppb` above [`MAX_TRIM_LIMIT_PPB`].
    TrimLimitOutOfRange,
    /// `timeout_ticks` is zero or above `i32::MAX`.
    TimeoutOutOfRange,
    /// The trim `leak` is not below `ki` (it must be a small fraction of the integral
    /// gain; zero turns it off).
    LeakNotBelowIntegral,
    /// `delay_smoothing` above [`MAX_DELAY_SMOOTHING`].
    DelaySmoothingOutOfRange,
}

/// Largest accepted [`ConfigBuilder::delay_smoothing`]: a sample weight of 2^-15.
pub const MAX_DELAY_SMOOTHING: u8 = 15;

impl fmt::Display for ConfigError {
    fn fmt(&self, f: &mut fmt::Formatter<'_>) -> fmt::Result {
        f.write_str(match self {
            ConfigError::GainOutOfRange => "gain out of range: must be at least 0 and below 2",
            ConfigError::ZeroProportionalGain => "proportional gain kp must be above 0",
            ConfigError::IntegralGainNotBelowProportional => {
                "integral gain ki must be below the proportional gain kp"
            }
            ConfigError::PeriodTooShort => "ticks_per_period must be at least 2",
            ConfigError::UpdateTicksOutOfRange => {
                "update_ticks must be from 1 to 2147483647 timer ticks"
            }
            ConfigError::SlewLimitOutOfRange => {
                "slew_limit must be from 1 to 2147483647 counts (just under half a turn)"
            }
            ConfigError::TrimLimitOutOfRange => "trim_limit_ppb must be at most 100000000 (10 %)",
            ConfigError::TimeoutOutOfRange => {
                "timeout_ticks must be from 1 to 2147483647 timer ticks"
            }
            ConfigError::LeakNotBelowIntegral => {
                "trim leak must be below the integral gain ki (or zero)"
            }
            ConfigError::DelaySmoothingOutOfRange => "delay_smoothing must be from 0 to 15",
        })
    }
}

impl core::error::Error for ConfigError {}

/// A validated node configuration; build one with [`Config::builder`].
///
/// Besides the values given, it holds the fixed-point constants the node law runs on,
/// derived once at build time so the update path needs no division.
///
/// ```
/// use entrain::{Config, Gain, Law};
/// // A 1 MHz timer, a 1 s phase period, ten updates per second.
/// const CONFIG: Config = match Config::builder(1_000_000, 100_000)
///     .kp(Gain::from_q16(16_384)) // 0.25
///     .ki(Gain::from_q16(2_048)) // 0.03125
///     .law(Law::Sine)
///     .build()
/// {
///     Ok(c) => c,
///     Err(_) => panic!("bad node configuration"),
/// };
/// assert_eq!(CONFIG.ticks_per_period(), 1_000_000);
/// assert_eq!(CONFIG.kp().to_f32(), 0.25);
/// ```
#[derive(Clone, Copy, PartialEq, Eq, Hash, Debug)]
#[cfg_attr(feature = "defmt", derive(defmt::Format))]
pub struct Config {
    ticks_per_period: u32,
    update_ticks: u32,
    kp: Gain,
    ki: Gain,
    law: Law,
    slew_limit: u32,
    trim_limit_ppb: u32,
    timeout_ticks: u32,
    leak: Gain,
    delay_smoothing: u8,
    /// Nominal phase advance per tick, Q32.32 counts (2^64 / ticks_per_period).
    rate_nominal: u64,
    /// Trim limit in Q32.32 counts per tick.
    trim_limit_raw: i64,
    /// Integral gain per tick: Δtrim(Q32.32 counts/tick) = (Σpull · ki_tick) >> 16.
    ki_tick: i64,
}

impl Config {
    /// Start a configuration for a timer with `ticks_per_period` ticks per phase turn
    /// and a nominal update interval of `update_ticks` ticks. Defaults: sine law,
    /// kp = 0.25, ki = 1/32, slew limit 1/16 turn, trim limit ±200 ppm, timeout five
    /// update intervals.
    pub const fn builder(ticks_per_period: u32, update_ticks: u32) -> ConfigBuilder {
        ConfigBuilder {
            ticks_per_period,
            update_ticks,
            kp: Gain::from_q16(16_384),
            ki: Gain::from_q16(2_048),
            law: Law::Sine,
            slew_limit: 1 << 28,
            trim_limit_ppb: 200_000,
            timeout_ticks: None,
            leak: Gain::ZERO,
            delay_smoothing: 3,
        }
    }

    /// Trim leak per update (see [`ConfigBuilder::leak`]).
    #[must_use]
    pub const fn leak(&self) -> Gain {
        self.leak
    }

    /// Smoothing shift of measured link delays (see [`ConfigBuilder::delay_smoothing`]).
    #[must_use]
    pub const fn delay_smoothing(&self) -> u8 {
        self.delay_smoothing
    }

    /// Timer ticks per phase turn.
    #[must_use]
    pub const fn ticks_per_period(&self) -> u32 {
        self.ticks_per_period
    }
    /// Nominal timer ticks between updates.
    #[must_use]
    pub const fn update_ticks(&self) -> u32 {
        self.update_ticks
    }
    /// Proportional gain per update.
    #[must_use]
    pub const fn kp(&self) -> Gain {
        self.kp
    }
    /// Integral gain per update (0: the P-only law).
    #[must_use]
    pub const fn ki(&self) -> Gain {
        self.ki
    }
    /// The coupling law.
    #[must_use]
    pub const fn law(&self) -> Law {
        self.law
    }
    /// Largest phase step one update may apply, counts.
    #[must_use]
    pub const fn slew_limit(&self) -> u32 {
        self.slew_limit
    }
    /// Largest rate trim either way, parts per billion.
    #[must_use]
    pub const fn trim_limit_ppb(&self) -> u32 {
        self.trim_limit_ppb
    }
    /// Ticks of silence after which a neighbour stops pulling and is evicted.
    #[must_use]
    pub const fn timeout_ticks(&self) -> u32 {
        self.timeout_ticks
    }
    /// Nominal phase advance per timer tick in Q32.32 counts.
    #[must_use]
    pub const fn rate_nominal(&self) -> u64 {
        self.rate_nominal
    }
    pub(crate) const fn trim_limit_raw(&self) -> i64 {
        self.trim_limit_raw
    }
    pub(crate) const fn ki_tick(&self) -> i64 {
        self.ki_tick
    }
}

/// Builder for [`Config`]; every setter is `const`, so a configuration can be checked at
/// compile time and live in a `const` or `static`.
#[derive(Clone, Copy, PartialEq, Eq, Debug)]
#[cfg_attr(feature = "defmt", derive(defmt::Format))]
#[must_use]
pub struct ConfigBuilder {
    ticks_per_period: u32,
    update_ticks: u32,
    kp: Gain,
    ki: Gain,
    law: Law,
    slew_limit: u32,
    trim_limit_ppb: u32,
    timeout_ticks: Option<u32>,
    leak: Gain,
    delay_smoothing: u8,
}

impl ConfigBuilder {
    /// Proportional gain per update, `0 < kp < 2`. For stability on a topology with
    /// largest Laplacian eigenvalue λmax it must also satisfy `kp·λmax < 2` (the planner
    /// checks that).
    pub const fn kp(mut self, kp: Gain) -> Self {
        self.kp = kp;
        self
    }
    /// Integral gain per update, `0 ≤ ki < kp`; 0 selects the P-only law.
    pub const fn ki(mut self, ki: Gain) -> Self {
        self.ki = ki;
        self
    }
    /// The coupling law.
    pub const fn law(mut self, law: Law) -> Self {
        self.law = law;
        self
    }
    /// Largest phase step per update, counts, `1 ..= 2^31 − 1`.
    pub const fn slew_limit(mut self, counts: u32) -> Self {
        self.slew_limit = counts;
        self
    }
    /// Largest rate trim either way, ppb, `0 ..= 10⁸` (0 disables rate trimming).
    pub const fn trim_limit_ppb(mut self, ppb: u32) -> Self {
        self.trim_limit_ppb = ppb;
        self
    }
    /// Ticks of silence before a neighbour is dropped, `1 ..= 2^31 − 1`
    /// (default: five update intervals, saturating).
    pub const fn timeout_ticks(mut self, ticks: u32) -> Self {
        self.timeout_ticks = Some(ticks);
        self
    }

    /// Trim leak per update, `0 ≤ leak < ki` (default 0, off): each update the trim
    /// loses this fraction of itself, which holds the network's common rate at the mean
    /// of its crystals instead of letting it wander with timestamp noise (see
    /// [`Node`](crate::Node)). A leak costs a steady phase offset of about
    /// `leak/ki` times the trim, in turns per update, across the node's links.
    pub const fn leak(mut self, leak: Gain) -> Self {
        self.leak = leak;
        self
    }

    /// Smoothing of measured link delays: each two-way sample moves the estimate by
    /// 2^-`shift` of its difference (default 3, an eight-sample time constant; 0 takes
    /// every sample whole; at most [`MAX_DELAY_SMOOTHING`]).
    pub const fn delay_smoothing(mut self, shift: u8) -> Self {
        self.delay_smoothing = shift;
        self
    }

    /// Check every value and derive the fixed-point constants.
    ///
    /// # Errors
    /// The first [`ConfigError`] found, checked in the order of the variants.
    pub const fn build(self) -> Result<Config, ConfigError> {
        const I32_MAX: u32 = i32::MAX as u32;
        if self.kp.q16() > Gain::MAX.q16() || self.ki.q16() > Gain::MAX.q16() {
            return Err(ConfigError::GainOutOfRange);
        }
        if self.kp.q16() == 0 {
            return Err(ConfigError::ZeroProportionalGain);
        }
        if self.ki.q16() >= self.kp.q16() {
            return Err(ConfigError::IntegralGainNotBelowProportional);
        }
        if self.ticks_per_period < 2 {
            return Err(ConfigError::PeriodTooShort);
        }
        if self.update_ticks == 0 || self.update_ticks > I32_MAX {
            return Err(ConfigError::UpdateTicksOutOfRange);
        }
        if self.slew_limit == 0 || self.slew_limit > I32_MAX {
            return Err(ConfigError::SlewLimitOutOfRange);
        }
        if self.leak.q16() != 0 && self.leak.q16() >= self.ki.q16() {
            return Err(ConfigError::LeakNotBelowIntegral);
        }
        if self.delay_smoothing > MAX_DELAY_SMOOTHING {
            return Err(ConfigError::DelaySmoothingOutOfRange);
        }
        if self.trim_limit_ppb > MAX_TRIM_LIMIT_PPB {
            return Err(ConfigError::TrimLimitOutOfRange);
        }
        let timeout_ticks = match self.timeout_ticks {
            Some(t) => t,
            None => {
                let t = self.update_ticks.saturating_mul(5);
                if t > I32_MAX { I32_MAX } else { t }
            }
        };
        if timeout_ticks == 0 || timeout_ticks > I32_MAX {
            return Err(ConfigError::TimeoutOutOfRange);
        }
        // 2^64 / T rounded to nearest; for T ≥ 2 it fits in u64.
        let t = self.ticks_per_period as u128;
        let rate_nominal = (((1u128 << 64) + t / 2) / t) as u64;
        // rate · ppb / 10⁹ ≤ 2^63 · 0.1: fits.
        let trim_limit_raw =
            (rate_nominal as u128 * self.trim_limit_ppb as u128 / 1_000_000_000) as i64;
        // ki · 2^32 / M in Q16: ki_q16 · 2^32 / M ≤ 2^49.
        let ki_tick = (((self.ki.q16() as u64) << 32) / self.update_ticks as u64) as i64;
        Ok(Config {
            ticks_per_period: self.ticks_per_period,
            update_ticks: self.update_ticks,
            kp: self.kp,
            ki: self.ki,
            law: self.law,
            slew_limit: self.slew_limit,
            trim_limit_ppb: self.trim_limit_ppb,
            timeout_ticks,
            leak: self.leak,
            delay_smoothing: self.delay_smoothing,
            rate_nominal,
            trim_limit_raw,
            ki_tick,
        })
    }
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn defaults_build() {
        let c = Config::builder(1_000_000, 100_000).build();
        let c = c.unwrap();
        assert_eq!(c.timeout_ticks(), 500_000);
        assert_eq!(c.slew_limit(), 1 << 28);
        // 2^64 / 10^6 = 18446744073709.551616 → nearest.
        assert_eq!(c.rate_nominal(), 18_446_744_073_710);
        // 200 ppm of that.
        assert_eq!(c.trim_limit_raw(), 3_689_348_814);
    }

    #[test]
    fn every_bad_value_is_named() {
        let b = Config::builder(1_000_000, 100_000);
        let cases = [
            (
                b.kp(Gain::ZERO).ki(Gain::ZERO),
                ConfigError::ZeroProportionalGain,
            ),
            (b.kp(Gain::from_q16(200_000)), ConfigError::GainOutOfRange),
            (
                b.kp(Gain::from_q16(100)).ki(Gain::from_q16(100)),
                ConfigError::IntegralGainNotBelowProportional,
            ),
            (Config::builder(1, 1), ConfigError::PeriodTooShort),
            (Config::builder(10, 0), ConfigError::UpdateTicksOutOfRange),
            (
                Config::builder(10, u32::MAX),
                ConfigError::UpdateTicksOutOfRange,
            ),
            (b.slew_limit(0), ConfigError::SlewLimitOutOfRange),
            (b.slew_limit(1 << 31), ConfigError::SlewLimitOutOfRange),
            (
                b.trim_limit_ppb(100_000_001),
                ConfigError::TrimLimitOutOfRange,
            ),
            (b.timeout_ticks(0), ConfigError::TimeoutOutOfRange),
        ];
        for (builder, want) in cases {
            assert_eq!(builder.build(), Err(want));
        }
    }

    #[test]
    fn default_timeout_saturates() {
        let c = Config::builder(1_000_000, i32::MAX as u32).build().unwrap();
        assert_eq!(c.timeout_ticks(), i32::MAX as u32);
    }

    #[test]
    fn errors_display_the_valid_range() {
        extern crate std;
        use std::string::ToString;
        assert!(
            ConfigError::TrimLimitOutOfRange
                .to_string()
                .contains("100000000")
        );
        assert!(ConfigError::GainOutOfRange.to_string().contains("below 2"));
    }
}
