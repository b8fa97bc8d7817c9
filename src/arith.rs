//! Wide products of the node law from 32-bit pieces.
//!
//! A Cortex-M0 has no 32 × 32 → 64-bit multiply and a Cortex-M4F none wider, so a
//! `u128` product there is a chain of library calls. The law's products have one factor
//! that fits 32 bits (the elapsed ticks, a Q16 gain or weight) or almost always do (the
//! integral gain per tick), so they are built here from two 32 × 32 → 64-bit products.
//! Every function gives exactly the bits of the `u128` arithmetic it replaces; the tests
//! below hold each one against that arithmetic.
//!
//! On a 64-bit target a `u128` product is one instruction, and the pieces' branches only
//! cost time there, so [`mul_64_32`] and [`mul_q16_round`] take the `u128` form on such
//! targets and the 32-bit pieces elsewhere. The pieces are compiled for the tests on
//! every target, so the host checks the arithmetic the small cores run.

/// `a · b`, exact. Armv6-M (Cortex-M0/M0+/M1) has only a 32-bit multiply, and a 64-bit
/// product there is a library call of about forty instructions: the four 16 × 16-bit
/// products, inline, take about half. Other targets multiply natively.
#[cfg(any(test, not(target_pointer_width = "64")))]
#[inline(always)]
const fn mul_32_32(a: u32, b: u32) -> u64 {
    #[cfg(all(target_arch = "arm", not(target_has_atomic = "32")))]
    {
        mul_32_32_halves(a, b)
    }
    #[cfg(not(all(target_arch = "arm", not(target_has_atomic = "32"))))]
    {
        a as u64 * b as u64
    }
}

/// `a · b` from 16-bit halves and 32-bit products only.
#[cfg(any(test, all(target_arch = "arm", not(target_has_atomic = "32"))))]
#[inline(always)]
const fn mul_32_32_halves(a: u32, b: u32) -> u64 {
    let (a0, a1) = (a & 0xFFFF, a >> 16);
    let (b0, b1) = (b & 0xFFFF, b >> 16);
    // a·b = a1b1·2^32 + (a0b1 + a1b0)·2^16 + a0b0; the middle sum may carry into bit 32.
    let (mid, mid_carry) = (a0 * b1).overflowing_add(a1 * b0);
    let (low, carry) = (a0 * b0).overflowing_add(mid << 16);
    // a·b < 2^64: the high word fits 32 bits, and so does every partial sum of it.
    let high = a1 * b1 + (mid >> 16) + ((mid_carry as u32) << 16) + carry as u32;
    ((high as u64) << 32) | low as u64
}

/// `a · b` as a 96-bit value: `(low 64 bits, high 32 bits)`, exact: the `u128` product
/// on 64-bit targets, [`mul_64_32_pieces`] on others.
#[inline(always)]
pub(crate) const fn mul_64_32(a: u64, b: u32) -> (u64, u32) {
    #[cfg(target_pointer_width = "64")]
    {
        let p = a as u128 * b as u128;
        // a·b < 2^96: the high word fits 32 bits.
        (p as u64, (p >> 64) as u32)
    }
    #[cfg(not(target_pointer_width = "64"))]
    {
        mul_64_32_pieces(a, b)
    }
}

/// [`mul_64_32`] from 32 × 32 → 64-bit products.
#[cfg(any(test, not(target_pointer_width = "64")))]
#[inline]
const fn mul_64_32_pieces(a: u64, b: u32) -> (u64, u32) {
    // A factor that fits 32 bits (a sum of pulls near lock, a modest trim) takes one
    // product.
    if a >> 32 == 0 {
        return (mul_32_32(a as u32, b), 0);
    }
    // a·b = hi·2^32 + lo, with lo and hi products of 32-bit factors (each below 2^64).
    let lo = mul_32_32(a as u32, b);
    let hi = mul_32_32((a >> 32) as u32, b);
    let (low, carry) = lo.overflowing_add(hi << 32);
    // a·b < 2^96, so the high word (hi's top half plus the carry) fits 32 bits.
    (low, (hi >> 32) as u32 + carry as u32)
}

/// `min((a · b + 2^15) >> 16, i64::MAX)` for `b < 2^32`, exact.
#[cfg(any(test, not(target_pointer_width = "64")))]
#[inline]
const fn mul_q16_round_32(a: u64, b: u32) -> u64 {
    let (low, high) = mul_64_32_pieces(a, b);
    let (low, carry) = low.overflowing_add(1 << 15);
    // a·b + 2^15 < 2^96: the high word cannot overflow.
    let high = high + carry as u32;
    // The result is high·2^48 + low/2^16, at least 2^63 once high ≥ 2^15.
    if high >= 1 << 15 {
        i64::MAX as u64
    } else {
        ((high as u64) << 48) | (low >> 16)
    }
}

/// `min((a · b + 2^15) >> 16, i64::MAX)`, exact: the `u128` product on 64-bit targets,
/// [`mul_q16_round_pieces`] on others.
#[inline(always)]
pub(crate) const fn mul_q16_round(a: u64, b: u64) -> u64 {
    #[cfg(target_pointer_width = "64")]
    {
        mul_q16_round_u128(a, b)
    }
    #[cfg(not(target_pointer_width = "64"))]
    {
        mul_q16_round_pieces(a, b)
    }
}

/// [`mul_q16_round`]: the 96-bit path when either factor fits 32 bits, a `u128` product
/// otherwise.
#[cfg(any(test, not(target_pointer_width = "64")))]
#[inline]
const fn mul_q16_round_pieces(a: u64, b: u64) -> u64 {
    if b <= u32::MAX as u64 {
        mul_q16_round_32(a, b as u32)
    } else if a <= u32::MAX as u64 {
        mul_q16_round_32(b, a as u32)
    } else {
        mul_q16_round_wide(a, b)
    }
}

/// [`mul_q16_round`] with a `u128` product, for any factors (out of line on 32-bit
/// targets: rarely taken there, and long).
#[cfg(any(test, not(target_pointer_width = "64")))]
#[inline(never)]
const fn mul_q16_round_wide(a: u64, b: u64) -> u64 {
    mul_q16_round_u128(a, b)
}

/// [`mul_q16_round`] with a `u128` product, inline.
#[inline(always)]
const fn mul_q16_round_u128(a: u64, b: u64) -> u64 {
    let mag = (a as u128 * b as u128 + (1 << 15)) >> 16;
    if mag > i64::MAX as u128 {
        i64::MAX as u64
    } else {
        mag as u64
    }
}

/// `n · ppb / 10⁹` truncated toward zero, exactly the `i128` quotient, without a
/// 128-bit division (a library call on every target, and a long one on a small core).
///
/// Why it is exact for every `n` and `ppb`: write `n = a·10⁹ + b` with `b < 10⁹`. Then
/// `n·|ppb| = a·|ppb|·10⁹ + b·|ppb|`, and as the first term is a whole multiple of 10⁹,
/// `⌊n·|ppb| / 10⁹⌋ = a·|ppb| + ⌊b·|ppb| / 10⁹⌋`. Both pieces fit their types:
/// `a < 2^35` and `|ppb| ≤ 2^31`, so `a·|ppb| < 2^66` is taken in 96 bits, and
/// `b·|ppb| < 10⁹·2^31 < 2^61` fits a `u64`. `n ≥ 0`, so the signed product has the
/// sign of `ppb`, and division toward zero is that sign times the floor of the
/// magnitudes. The divisions are by a constant (no division-by-zero path).
#[inline]
pub(crate) const fn mul_ppb(n: u64, ppb: i32) -> i128 {
    const BILLION: u64 = 1_000_000_000;
    let p = ppb.unsigned_abs();
    let (low, high) = mul_64_32(n / BILLION, p);
    let rest = (n % BILLION) * p as u64 / BILLION;
    let mag = (((high as u128) << 64) | low as u128) + rest as u128;
    // mag < 2^67: the cast keeps it, and so does the negation.
    if ppb < 0 { -(mag as i128) } else { mag as i128 }
}

#[cfg(test)]
mod tests {
    use super::*;
    use proptest::prelude::*;

    /// Operands at and around every boundary the pieces split on.
    const EDGES: [u64; 16] = [
        0,
        1,
        2,
        (1 << 15) - 1,
        1 << 15,
        (1 << 16) + 1,
        u32::MAX as u64 - 1,
        u32::MAX as u64,
        1 << 32,
        (1 << 32) + 1,
        (1 << 47) - 1,
        1 << 48,
        i64::MAX as u64,
        1 << 63,
        u64::MAX - 1,
        u64::MAX,
    ];

    fn mul_wide(a: u64, b: u32) -> (u64, u32) {
        let p = u128::from(a) * u128::from(b);
        (p as u64, (p >> 64) as u32)
    }

    #[test]
    fn halves_give_the_64_bit_product() {
        let edges = [
            0,
            1,
            0xFFFF,
            0x1_0000,
            0x1_0001,
            0x8000_0000,
            u32::MAX - 1,
            u32::MAX,
        ];
        for a in edges {
            for b in edges {
                assert_eq!(
                    mul_32_32_halves(a, b),
                    u64::from(a) * u64::from(b),
                    "{a} × {b}"
                );
            }
        }
    }

    #[test]
    fn edges_agree_with_u128() {
        for a in EDGES {
            for b in EDGES {
                let b32 = b as u32;
                assert_eq!(mul_64_32_pieces(a, b32), mul_wide(a, b32), "{a} × {b32}");
                assert_eq!(
                    mul_q16_round_pieces(a, b),
                    mul_q16_round_wide(a, b),
                    "{a} × {b}"
                );
            }
        }
        // The saturation threshold: a·b + 2^15 just below and at 2^79.
        let a = 1u64 << 47;
        assert_eq!(
            mul_q16_round_pieces(a, (1 << 32) - 1),
            mul_q16_round_wide(a, (1 << 32) - 1)
        );
        assert_eq!(mul_q16_round_pieces(a, 1 << 32), i64::MAX as u64);
        assert_eq!(mul_q16_round_pieces((1 << 63) - 1, 1 << 16), (1 << 63) - 1);
    }

    /// The quotient [`mul_ppb`] replaces, in `i128` arithmetic.
    fn mul_ppb_wide(n: u64, ppb: i32) -> i128 {
        i128::from(n) * i128::from(ppb) / 1_000_000_000
    }

    #[test]
    fn mul_ppb_edges_agree_with_i128() {
        let ppbs = [
            0,
            1,
            -1,
            999_999_999,
            1_000_000_000,
            1_000_000_001,
            -1_000_000_000,
            i32::MAX,
            i32::MIN,
            i32::MIN + 1,
        ];
        let ns =
            EDGES
                .into_iter()
                .chain([999_999_999, 1_000_000_000, 1_000_000_001, 2_999_999_999]);
        for n in ns {
            for ppb in ppbs {
                assert_eq!(mul_ppb(n, ppb), mul_ppb_wide(n, ppb), "{n} × {ppb} ppb");
            }
        }
    }

    #[test]
    fn mul_ppb_truncates_toward_zero() {
        // Worked by hand: (7·10⁹ + 5)·3 = 21·10⁹ + 15, and 10⁹ − 1 ppb of 10⁹ − 1 is
        // 10⁹ − 2 and a fraction (10⁹ − 1)² = 10¹⁸ − 2·10⁹ + 1.
        assert_eq!(mul_ppb(7_000_000_005, 3), 21);
        assert_eq!(mul_ppb(7_000_000_005, -3), -21);
        assert_eq!(mul_ppb(999_999_999, 999_999_999), 999_999_998);
        assert_eq!(mul_ppb(999_999_999, -999_999_999), -999_999_998);
        // 2^64 − 1 = 18,446,744,073·10⁹ + 709,551,615; times 2^31 over 10⁹:
        // 18,446,744,073·2^31 + ⌊709,551,615·2^31 / 10⁹⌋ = 39,614,081,255,608,418,304
        // + 1,523,750,490 (sums done in Python integers, outside this crate).
        assert_eq!(mul_ppb(u64::MAX, i32::MIN), -39_614_081_257_132_168_794);
    }

    proptest! {
        #[test]
        fn halves_are_the_64_bit_product(a in any::<u32>(), b in any::<u32>()) {
            prop_assert_eq!(mul_32_32_halves(a, b), u64::from(a) * u64::from(b));
        }

        #[test]
        fn mul_64_32_is_the_u128_product(a in any::<u64>(), b in any::<u32>(), shift in 0u32..64) {
            // Shifted, `a` takes the one-product path below 2^32 as often as the other.
            let a = a >> shift;
            prop_assert_eq!(mul_64_32_pieces(a, b), mul_wide(a, b));
        }

        #[test]
        fn mul_q16_round_is_the_u128_rounding(
            a in any::<u64>(),
            b in any::<u64>(),
            shift_a in 0u32..64,
            shift_b in 0u32..64,
        ) {
            // Shifted operands cover every magnitude, not only those near 2^64.
            let (a, b) = (a >> shift_a, b >> shift_b);
            prop_assert_eq!(mul_q16_round_pieces(a, b), mul_q16_round_wide(a, b));
        }

        #[test]
        fn mul_ppb_is_the_i128_quotient(n in any::<u64>(), ppb in any::<i32>(), shift in 0u32..64) {
            // Shifted, `n` takes every magnitude, below 10⁹ as well as above.
            let n = n >> shift;
            prop_assert_eq!(mul_ppb(n, ppb), mul_ppb_wide(n, ppb));
        }
    }
}
