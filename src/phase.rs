//! Binary-angle phase: a `u32` where 2^32 counts make one full turn.
//!
//! Every phase the crate handles is a [`Phase`]. Differences are taken with wrapping
//! subtraction and read as `i32`, so the answer is always the shorter way round the circle
//! (in `[-½, ½)` turn) and the wrap of the counter — after one turn, or after days of
//! uptime — never breaks anything.

/// Counts in one full turn, as `f32` (2^32).
const TURN_F32: f32 = 4_294_967_296.0;
/// Counts in one full turn, as `u64`.
const TURN_U64: u64 = 1 << 32;
/// 2π as `f32`.
const TAU_F32: f32 = core::f32::consts::TAU;

/// A phase on the unit circle as a binary angle: `2^32` counts are one turn.
///
/// One count is 2^-32 turn; at a 1 s phase period that is about 0.23 ns.
///
/// ```
/// use entrain::Phase;
/// let a = Phase::from_counts(10);
/// let b = Phase::from_counts(u32::MAX - 9); // 20 counts behind `a`, across the wrap
/// assert_eq!(a.diff(b), 20);
/// assert_eq!(b.diff(a), -20);
/// assert_eq!(Phase::from_turns(0.25).counts(), 1 << 30);
/// ```
#[derive(Clone, Copy, PartialEq, Eq, Hash, Debug, Default)]
#[cfg_attr(feature = "defmt", derive(defmt::Format))]
pub struct Phase(u32);

impl Phase {
    /// Phase zero (the instant a node raises its sync pulse).
    pub const ZERO: Phase = Phase(0);
    /// Half a turn.
    pub const HALF: Phase = Phase(1 << 31);

    /// A phase from raw counts (2^32 counts = one turn).
    #[must_use]
    pub const fn from_counts(counts: u32) -> Phase {
        Phase(counts)
    }

    /// The raw counts of this phase.
    #[must_use]
    pub const fn counts(self) -> u32 {
        self.0
    }

    /// `self − other` the short way round the circle, in counts, in `[-2^31, 2^31)`.
    ///
    /// Exactly half a turn reads as `i32::MIN` (`-2^31`) from both sides.
    #[must_use]
    pub const fn diff(self, other: Phase) -> i32 {
        self.0.wrapping_sub(other.0) as i32
    }

    /// This phase moved by a signed number of counts, wrapping round the circle.
    #[must_use]
    pub const fn wrapping_add(self, counts: i32) -> Phase {
        Phase(self.0.wrapping_add(counts as u32))
    }

    /// A phase from a fraction of a turn. Any real value is accepted and wrapped onto the
    /// circle (`1.25` is the same phase as `0.25`); NaN gives [`Phase::ZERO`].
    ///
    /// Exact for multiples of 2^-24 turn within ±128 turns; otherwise within one `f32`
    /// rounding (a relative 6·10⁻⁸ of the value).
    #[must_use]
    pub fn from_turns(turns: f32) -> Phase {
        let frac = turns - trunc(turns);
        // `frac` is in (-1, 1); as i64 counts it fits easily; the cast saturates NaN to 0.
        let counts = (frac * TURN_F32) as i64;
        Phase(counts as u32)
    }

    /// This phase as a fraction of a turn in `[0, 1)`.
    #[must_use]
    pub fn to_turns(self) -> f32 {
        self.0 as f32 / TURN_F32
    }

    /// A signed difference in counts as a fraction of a turn, in `[-0.5, 0.5)`.
    #[must_use]
    pub fn diff_to_turns(diff: i32) -> f32 {
        diff as f32 / TURN_F32
    }

    /// A phase from an angle in radians (any real value, wrapped; NaN gives zero).
    #[must_use]
    pub fn from_radians(radians: f32) -> Phase {
        Phase::from_turns(radians / TAU_F32)
    }

    /// This phase as an angle in radians, in `[0, 2π)`.
    #[must_use]
    pub fn to_radians(self) -> f32 {
        self.to_turns() * TAU_F32
    }

    /// The phase reached `us` microseconds into a period of `period_us` microseconds.
    ///
    /// `us` is reduced modulo the period first. Exact integer arithmetic, rounded down
    /// (error below one count). A zero period gives [`Phase::ZERO`].
    #[must_use]
    pub const fn from_micros(us: u32, period_us: u32) -> Phase {
        if period_us == 0 {
            return Phase::ZERO;
        }
        let within = (us % period_us) as u64;
        // within < period_us ≤ 2^32 − 1, so the quotient is < 2^32.
        Phase(((within << 32) / period_us as u64) as u32)
    }

    /// Microseconds since the start of the period, for a period of `period_us`
    /// microseconds. Rounded down; result in `[0, period_us)` (0 for a zero period).
    #[must_use]
    pub const fn to_micros(self, period_us: u32) -> u32 {
        ((self.0 as u64 * period_us as u64) >> 32) as u32
    }

    /// A signed difference in counts expressed in microseconds of a `period_us` period,
    /// rounded toward zero. `|result| ≤ period_us / 2`.
    #[must_use]
    pub const fn diff_to_micros(diff: i32, period_us: u32) -> i32 {
        let mag = ((diff as i64).unsigned_abs() * period_us as u64) >> 32;
        // mag ≤ period_us / 2 < 2^31.
        if diff < 0 { -(mag as i32) } else { mag as i32 }
    }

    /// The phase reached `seconds` into a period of `period_s` seconds (both finite,
    /// `period_s > 0`; otherwise [`Phase::ZERO`]).
    #[must_use]
    pub fn from_seconds(seconds: f32, period_s: f32) -> Phase {
        if period_s > 0.0 && period_s.is_finite() {
            Phase::from_turns(seconds / period_s)
        } else {
            Phase::ZERO
        }
    }

    /// Seconds since the start of a period of `period_s` seconds, in `[0, period_s)`.
    #[must_use]
    pub fn to_seconds(self, period_s: f32) -> f32 {
        self.to_turns() * period_s
    }

    /// Counts per turn as `u64` (2^32), for callers doing their own fixed-point scaling.
    pub const COUNTS_PER_TURN: u64 = TURN_U64;
}

/// `f32::trunc` without `std` or `libm`: exact for every finite `f32`.
fn trunc(x: f32) -> f32 {
    // Above 2^23 every f32 is already an integer; i64 holds every value below 2^63.
    if x.is_nan() {
        0.0
    } else if x.abs() >= 8_388_608.0 {
        x
    } else {
        (x as i64) as f32
    }
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn differences_wrap_the_short_way() {
        let cases: [(u32, u32, i32); 6] = [
            (0, 0, 0),
            (5, 3, 2),
            (3, 5, -2),
            (0, u32::MAX, 1),
            (u32::MAX, 0, -1),
            (1 << 31, 0, i32::MIN),
        ];
        for (a, b, d) in cases {
            assert_eq!(
                Phase::from_counts(a).diff(Phase::from_counts(b)),
                d,
                "{a} - {b}"
            );
        }
    }

    #[test]
    fn turns_round_trip_and_wrap() {
        assert_eq!(Phase::from_turns(0.5), Phase::HALF);
        assert_eq!(Phase::from_turns(1.5), Phase::HALF);
        assert_eq!(Phase::from_turns(-0.25).counts(), 3 << 30);
        assert_eq!(Phase::from_turns(f32::NAN), Phase::ZERO);
        assert_eq!(Phase::from_turns(3.0e9), Phase::ZERO);
        assert!((Phase::from_counts(1 << 30).to_turns() - 0.25).abs() < 1e-7);
        assert!((Phase::diff_to_turns(-(1 << 29)) + 0.125).abs() < 1e-7);
    }

    #[test]
    fn radians_and_seconds() {
        let p = Phase::from_radians(core::f32::consts::PI);
        assert_eq!(p, Phase::HALF);
        assert!((Phase::HALF.to_radians() - core::f32::consts::PI).abs() < 1e-6);
        assert_eq!(Phase::from_seconds(0.025, 0.1), Phase::from_counts(1 << 30));
        assert_eq!(Phase::from_seconds(1.0, 0.0), Phase::ZERO);
        assert!((Phase::HALF.to_seconds(0.1) - 0.05).abs() < 1e-8);
    }

    #[test]
    fn micros_exact() {
        // A quarter of a 100 ms period is 25 ms.
        assert_eq!(Phase::from_micros(25_000, 100_000).counts(), 1 << 30);
        assert_eq!(Phase::from_micros(125_000, 100_000).counts(), 1 << 30);
        assert_eq!(Phase::from_micros(7, 0), Phase::ZERO);
        assert_eq!(Phase::from_counts(1 << 30).to_micros(100_000), 25_000);
        assert_eq!(Phase::from_counts(u32::MAX).to_micros(100_000), 99_999);
        assert_eq!(Phase::diff_to_micros(-(1 << 30), 100_000), -25_000);
        assert_eq!(Phase::diff_to_micros(i32::MIN, 100_000), -50_000);
        // (2^31 − 1)(2^32 − 1) / 2^32, rounded toward zero.
        assert_eq!(Phase::diff_to_micros(i32::MAX, u32::MAX), i32::MAX - 1);
    }
}
