//! Fixed-point loop gains.

use crate::ConfigError;
use crate::arith::mul_64_32;

/// Fractional bits of a [`Gain`].
pub const GAIN_FRAC_BITS: u32 = 16;

/// A non-negative loop gain in Q16.16 fixed point (resolution 2^-16 ≈ 1.5·10⁻⁵).
///
/// Gains here are *per update*: a proportional gain `kp` moves a node by `kp` times the
/// summed coupling of its neighbours each update, so `kp` plays the role of ε in the
/// discrete consensus step x⁺ = (I − εL)x.
///
/// ```
/// use entrain::Gain;
/// let half = Gain::from_f32(0.5).unwrap();
/// assert_eq!(half, Gain::from_q16(32_768));
/// assert_eq!(half.to_f32(), 0.5);
/// assert!(Gain::from_f32(-0.1).is_err());
/// ```
#[derive(Clone, Copy, PartialEq, Eq, PartialOrd, Ord, Hash, Debug, Default)]
#[cfg_attr(feature = "defmt", derive(defmt::Format))]
pub struct Gain(u32);

impl Gain {
    /// Zero gain (turns a term of the law off).
    pub const ZERO: Gain = Gain(0);
    /// The largest gain the node accepts, just under 2.0 (see [`ConfigError::GainOutOfRange`]).
    pub const MAX: Gain = Gain((2 << GAIN_FRAC_BITS) - 1);

    /// A gain from its raw Q16.16 value (`raw / 65536`).
    #[must_use]
    pub const fn from_q16(raw: u32) -> Gain {
        Gain(raw)
    }

    /// The raw Q16.16 value.
    #[must_use]
    pub const fn q16(self) -> u32 {
        self.0
    }

    /// A gain from a real value, rounded to the nearest 2^-16.
    ///
    /// # Errors
    /// [`ConfigError::GainOutOfRange`] unless `0 ≤ value < 2` (NaN included).
    pub const fn from_f32(value: f32) -> Result<Gain, ConfigError> {
        // `!(a && b)` also rejects NaN.
        if !(value >= 0.0 && value < 2.0) {
            return Err(ConfigError::GainOutOfRange);
        }
        let raw = (value * 65_536.0 + 0.5) as u32;
        if raw > Gain::MAX.0 {
            return Err(ConfigError::GainOutOfRange);
        }
        Ok(Gain(raw))
    }

    /// The gain as a real value (exact: every Q16.16 value below 2 is an `f32`).
    #[must_use]
    pub const fn to_f32(self) -> f32 {
        self.0 as f32 / 65_536.0
    }

    /// The gain as an `f64` (exact).
    #[must_use]
    pub const fn to_f64(self) -> f64 {
        self.0 as f64 / 65_536.0
    }

    /// `round(self · x)` with ties away from zero, so that `apply(-x) == -apply(x)`;
    /// saturates at the `i64` range.
    #[must_use]
    pub const fn apply(self, x: i64) -> i64 {
        let neg = x < 0;
        // min(|x|·g + 2^15, u64::MAX) >> 16, as a saturating multiply then a saturating
        // add give it, from a 96-bit product (a Q16 gain fits 32 bits).
        let (low, high) = mul_64_32(x.unsigned_abs(), self.0);
        let mag = if high != 0 { u64::MAX } else { low };
        let rounded = mag.saturating_add(1 << (GAIN_FRAC_BITS - 1)) >> GAIN_FRAC_BITS;
        // rounded ≤ u64::MAX >> 16 < i64::MAX.
        if neg {
            -(rounded as i64)
        } else {
            rounded as i64
        }
    }
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn conversions() {
        assert_eq!(Gain::from_f32(0.0), Ok(Gain::ZERO));
        assert_eq!(Gain::from_f32(0.25).map(Gain::q16), Ok(16_384));
        assert_eq!(Gain::from_f32(1.999_99), Ok(Gain::MAX));
        assert_eq!(Gain::from_f32(2.0), Err(ConfigError::GainOutOfRange));
        assert_eq!(Gain::from_f32(f32::NAN), Err(ConfigError::GainOutOfRange));
        assert_eq!(Gain::from_f32(-0.0), Ok(Gain::ZERO));
        assert_eq!(Gain::from_q16(3277).to_f64(), 3277.0 / 65_536.0);
    }

    #[test]
    fn apply_rounds_symmetrically() {
        let g = Gain::from_q16(32_768); // 0.5
        assert_eq!(g.apply(3), 2); // 1.5 → 2
        assert_eq!(g.apply(-3), -2);
        assert_eq!(g.apply(4), 2);
        let third = Gain::from_q16(21_845); // ≈ 0.333328
        assert_eq!(third.apply(300_000), 99_998);
        assert_eq!(third.apply(-300_000), -99_998);
        assert_eq!(Gain::MAX.apply(i64::MIN), -((u64::MAX >> 16) as i64));
    }

    /// `apply` as a `u64` saturating multiply and add, the arithmetic it replaces. (On a
    /// 64-bit host `apply` takes the `u128` product; the 32-bit pieces the small cores use
    /// instead are held against that product in `arith`'s tests.)
    fn apply_saturating(g: Gain, x: i64) -> i64 {
        let mag = x.unsigned_abs().saturating_mul(u64::from(g.0));
        let rounded = (mag.saturating_add(1 << 15) >> 16) as i64;
        if x < 0 { -rounded } else { rounded }
    }

    #[test]
    fn apply_is_the_saturating_arithmetic_at_the_edges() {
        let xs = [
            0,
            1,
            -1,
            i64::from(u32::MAX),
            1 << 32,
            -(1 << 47),
            (1 << 47) + 1,
            i64::MAX / 3,
            i64::MAX,
            i64::MIN + 1,
            i64::MIN,
        ];
        for g in [0, 1, 32_767, 32_768, 65_536, Gain::MAX.0] {
            for x in xs {
                let g = Gain(g);
                assert_eq!(g.apply(x), apply_saturating(g, x), "{g:?} · {x}");
            }
        }
    }

    proptest::proptest! {
        #[test]
        fn apply_is_the_saturating_arithmetic(
            g in 0..=Gain::MAX.0,
            x in proptest::prelude::any::<i64>(),
            shift in 0u32..64,
        ) {
            let (g, x) = (Gain(g), x >> shift);
            proptest::prop_assert_eq!(g.apply(x), apply_saturating(g, x));
        }
    }
}
