//! Integer sine coupling: no FPU, identical results on every target.

use super::Coupling;

/// Peak pull of the sine law, in counts: 2^32 / (2π) ≈ 683,565,275.6 (reached at a
/// quarter turn).
pub const SINE_AMPLITUDE: f64 = 683_565_275.576_431_6;

/// Largest difference, in counts, between [`sine_pull`] and the exact
/// `SINE_AMPLITUDE · sin(2π·Δ/2^32)` over the whole circle: 36,000 counts, which is
/// 5.3·10⁻⁵ of the peak pull (8.4·10⁻⁶ turn). Within 1/16 turn of lock the error is
/// also below 4·10⁻⁵ of the exact pull itself, so the law's gain is right to that
/// fraction there. Measured against `libm::sin` by the tests
/// of this module (an exhaustive sweep at a stride of 4,093 counts, plus every breakpoint
/// region of the fixed-point steps).
pub const SINE_MAX_ERROR: u32 = 36_000;

// Coefficients of s(y) ≈ 1 + C1·y + C2·y² + C3·y³ in Q16, where y = u² and
// u ∈ [0, 1] is the fraction of a quarter turn, fitted (weighted least squares, then a
// small integer search for the least worst-case error of this exact arithmetic; our own
// fit) to s(y) = (2/π)·sin(πu/2)/u so that the pull is a·s(y) for a reduced angle a.
const C1: i32 = -26_948;
const C2: i32 = 3_316;
const C3: i32 = -182;

/// Sine coupling through an integer polynomial (see [`sine_pull`]).
///
/// ```
/// use entrain::law::{Coupling, Sine, SINE_MAX_ERROR};
/// // Small differences pull exactly linearly.
/// assert_eq!(Sine::pull(1_000_000), 1_000_000);
/// // A quarter turn pulls with the peak, 2^32/(2π).
/// assert!((Sine::pull(1 << 30) - 683_565_276).unsigned_abs() <= SINE_MAX_ERROR);
/// assert_eq!(Sine::pull(-(1 << 30)), -Sine::pull(1 << 30));
/// ```
#[derive(Clone, Copy, PartialEq, Eq, Debug, Default)]
pub struct Sine;

impl Coupling for Sine {
    #[inline(always)]
    fn pull(diff: i32) -> i32 {
        sine_pull(diff)
    }
}

/// `(2^32/2π)·sin(2π·diff/2^32)` in integer arithmetic, the pull of the sine law.
///
/// Error at most [`SINE_MAX_ERROR`] counts anywhere on the circle. Odd by construction
/// (computed on `|diff|`, then the sign is restored). For `|diff| < 2^22` counts
/// (1/1024 turn) the result is exactly `diff`, and the polynomial is skipped: near lock the
/// sine law is the linear law, bit for bit and nearly at its cost. Otherwise six 32-bit
/// multiplies and no 64-bit product, so it is cheap on a Cortex-M0.
#[must_use]
#[inline]
pub const fn sine_pull(diff: i32) -> i32 {
    let neg = diff < 0;
    // |diff| ∈ [0, 2^31]; fold the second quadrant onto the first: sin(π − x) = sin(x).
    let mut a = diff.unsigned_abs();
    if a > 1 << 30 {
        a = (1u32 << 31) - a;
    }
    // a ∈ [0, 2^30]; u = a / 2^30 in Q15, y = u² in Q16 (≤ 65,536).
    let u = a >> 15;
    let y = ((u * u) >> 14) as i32;
    // Below 2^22 counts y is 0 and the polynomial is exactly 1: skip it (same result).
    let mag = if y == 0 {
        a as i32
    } else {
        // Horner in Q16; every product stays below 2^31 in magnitude.
        let mut p = C3;
        p = C2 + ((p * y) >> 16);
        p = C1 + ((p * y) >> 16);
        let s = (65_536 + ((p * y) >> 16)) as u32;
        // a·s / 2^16 without a 64-bit product: a = hi·2^16 + lo.
        let hi = a >> 16;
        let lo = a & 0xFFFF;
        (hi * s + ((lo * s) >> 16)) as i32
    };
    if neg { -mag } else { mag }
}

#[cfg(test)]
mod tests {
    use super::*;

    fn exact(diff: i32) -> f64 {
        SINE_AMPLITUDE * libm::sin(core::f64::consts::TAU * f64::from(diff) / 4_294_967_296.0)
    }

    fn err(diff: i32) -> f64 {
        (f64::from(sine_pull(diff)) - exact(diff)).abs()
    }

    #[test]
    fn amplitude_constant_is_two_to_the_32_over_two_pi() {
        assert!((SINE_AMPLITUDE - 4_294_967_296.0 / core::f64::consts::TAU).abs() < 1e-6);
    }

    #[test]
    fn error_bound_holds_over_the_whole_circle() {
        let mut worst = 0.0f64;
        let mut d: i64 = i64::from(i32::MIN);
        while d <= i64::from(i32::MAX) {
            worst = worst.max(err(d as i32));
            d += 4_093;
        }
        // Dense around the quarter turns and the half turn, where the fold and the peak are.
        for centre in [
            0i64,
            1 << 30,
            -(1 << 30),
            i64::from(i32::MIN),
            i64::from(i32::MAX),
        ] {
            for k in -70_000..70_000i64 {
                let x = (centre + k).clamp(i64::from(i32::MIN), i64::from(i32::MAX));
                worst = worst.max(err(x as i32));
            }
        }
        assert!(
            worst <= f64::from(SINE_MAX_ERROR),
            "worst error {worst} counts"
        );
        // The bound is not loose by more than a factor of two (so the doc stays honest).
        assert!(
            worst > f64::from(SINE_MAX_ERROR) / 2.0,
            "worst error {worst} counts"
        );
    }

    #[test]
    fn odd_and_exact_near_zero() {
        for d in [0, 1, 2, 77, 4_194_303, 1 << 29, 1 << 30, i32::MAX] {
            assert_eq!(sine_pull(-d), -sine_pull(d), "{d}");
        }
        assert_eq!(sine_pull(i32::MIN), 0);
        for d in (0..(1 << 22)).step_by(997) {
            assert_eq!(sine_pull(d), d);
        }
    }

    #[test]
    fn gain_is_accurate_near_lock() {
        // Within 1/16 turn, the pull is within 4e-5 of the exact pull (plus one count).
        let mut d = 1i32;
        while d <= 1 << 28 {
            let e = exact(d);
            assert!(err(d) <= 4e-5 * e + 1.0, "at {d}: {} vs {e}", sine_pull(d));
            d = d.saturating_add(d / 97 + 1);
        }
    }
}
