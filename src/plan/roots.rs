//! Convergence factor of one Laplacian mode: the largest root modulus of the mode's
//! characteristic polynomial, closed form without delay and Durand–Kerner with delay;
//! and whether every root lies inside the unit circle, closed form without delay and the
//! Schur–Cohn test with delay (no root is computed: the margin searches ask only this).

use super::model::MAX_DELAY_UPDATES;

/// Polynomial degree bound: `d + 2` for the PI law with the longest delay.
const MAX_DEGREE: usize = MAX_DELAY_UPDATES as usize + 2;

#[derive(Clone, Copy, Debug, PartialEq)]
struct Complex {
    re: f64,
    im: f64,
}

impl Complex {
    const ZERO: Self = Self { re: 0.0, im: 0.0 };
    const ONE: Self = Self { re: 1.0, im: 0.0 };

    fn add(self, o: Self) -> Self {
        Self {
            re: self.re + o.re,
            im: self.im + o.im,
        }
    }
    fn sub(self, o: Self) -> Self {
        Self {
            re: self.re - o.re,
            im: self.im - o.im,
        }
    }
    fn mul(self, o: Self) -> Self {
        Self {
            re: self.re * o.re - self.im * o.im,
            im: self.re * o.im + self.im * o.re,
        }
    }
    fn div(self, o: Self) -> Self {
        let d = o.re * o.re + o.im * o.im;
        Self {
            re: (self.re * o.re + self.im * o.im) / d,
            im: (self.im * o.re - self.re * o.im) / d,
        }
    }
    fn abs(self) -> f64 {
        libm::hypot(self.re, self.im)
    }
    /// `|z|²`, for comparisons where the modulus itself is not needed.
    fn norm_sqr(self) -> f64 {
        self.re * self.re + self.im * self.im
    }
}

/// Largest root modulus of the monic polynomial `Σ coeffs[i]·z^i` (with
/// `coeffs[degree] = 1`), by Durand–Kerner (Weierstrass) iteration.
fn largest_root_modulus(coeffs: &[f64]) -> f64 {
    let degree = coeffs.len().saturating_sub(1);
    let mut roots = [Complex::ZERO; MAX_DEGREE];
    let roots = match roots.get_mut(..degree) {
        Some(r) => r,
        None => return f64::NAN,
    };
    let eval = |z: Complex| {
        coeffs.iter().rev().fold(Complex::ZERO, |acc, &c| {
            acc.mul(z).add(Complex { re: c, im: 0.0 })
        })
    };
    // Start on a circle a little larger than the Cauchy bound, at non-symmetric angles.
    let bound = 1.0
        + coeffs
            .iter()
            .take(degree)
            .fold(0.0_f64, |m, c| m.max(libm::fabs(*c)));
    let seed = Complex { re: 0.4, im: 0.9 };
    let mut power = Complex {
        re: bound.min(2.0),
        im: 0.0,
    };
    for r in roots.iter_mut() {
        *r = power;
        power = power.mul(seed);
    }
    for _ in 0..600 {
        let mut largest_step = 0.0_f64;
        for i in 0..degree {
            let Some(&zi) = roots.get(i) else { break };
            let mut denom = Complex::ONE;
            for (j, zj) in roots.iter().enumerate() {
                if j != i {
                    denom = denom.mul(zi.sub(*zj));
                }
            }
            let step = if denom.norm_sqr() == 0.0 {
                Complex {
                    re: 1e-12,
                    im: 1e-12,
                }
            } else {
                eval(zi).div(denom)
            };
            if let Some(slot) = roots.get_mut(i) {
                *slot = zi.sub(step);
            }
            largest_step = largest_step.max(step.norm_sqr());
        }
        // |step| < 1e-14, compared squared (no square root per root per sweep).
        if largest_step < 1e-28 {
            break;
        }
    }
    roots.iter().fold(0.0_f64, |m, z| m.max(z.abs()))
}

/// Reflection coefficients closer to 1 in modulus than this leave the Schur–Cohn verdict
/// to the root finder: the step-down divides by `1 − k²`, so rounding grows as a root
/// nears the circle (the slow mode of a large network sits within 1e-8 of it).
const SCHUR_COHN_AMBIGUOUS: f64 = 1e-6;

/// Whether every root of the real polynomial `Σ coeffs[i]·z^i` (`coeffs[degree] ≠ 0`)
/// lies strictly inside the unit circle, by the Schur–Cohn step-down: with
/// `k = c₀/c_n`, all roots of `p` are inside iff `|k| < 1` and all roots of the degree
/// `n − 1` polynomial with coefficients `c_{i+1} − k·c_{n−1−i}` are inside (Schur 1917,
/// Cohn 1922; the reflection-coefficient test of a lattice filter, e.g. Henrici, *Applied
/// and Computational Complex Analysis* vol. 1 (1974) §6.8 — from memory). `n` steps of
/// `O(n)`, no root computed. `None` when some `|k|` is within
/// [`SCHUR_COHN_AMBIGUOUS`] of 1 (ask the root finder) or a coefficient is NaN.
fn schur_cohn_stable(coeffs: &[f64]) -> Option<bool> {
    let mut c = [0.0_f64; MAX_DEGREE + 1];
    let mut next = [0.0_f64; MAX_DEGREE + 1];
    c.get_mut(..coeffs.len())?.copy_from_slice(coeffs);
    let mut n = coeffs.len().saturating_sub(1);
    while n > 0 {
        let k = c.first()? / c.get(n)?;
        let size = libm::fabs(k);
        if size.is_nan() || libm::fabs(size - 1.0) <= SCHUR_COHN_AMBIGUOUS {
            return None;
        }
        if size > 1.0 {
            return Some(false);
        }
        for i in 0..n {
            *next.get_mut(i)? = c.get(i + 1)? - k * c.get(n - 1 - i)?;
        }
        c = next;
        n -= 1;
    }
    Some(true)
}

/// The mode polynomial's coefficients (ascending powers, monic) and degree for
/// `a = kp·λ`, `b = ki·λ` and `d ≥ 1` updates of delay: `z^d (z² − 2z + 1) + a z + (b − a)`
/// (PI), `z^{d+1} − z^d + a` (`b = 0`, the root `z = 1` divided out).
fn delayed_polynomial(a: f64, b: f64, d: usize) -> ([f64; MAX_DEGREE + 1], usize) {
    let mut coeffs = [0.0_f64; MAX_DEGREE + 1];
    let degree = if b == 0.0 {
        // z^{d+1} − z^d + a
        if let Some(c) = coeffs.get_mut(d + 1) {
            *c = 1.0;
        }
        if let Some(c) = coeffs.get_mut(d) {
            *c = -1.0;
        }
        if let Some(c) = coeffs.get_mut(0) {
            *c += a;
        }
        d + 1
    } else {
        // z^d (z² − 2z + 1) + a z + (b − a)
        for (offset, value) in [(2, 1.0), (1, -2.0), (0, 1.0)] {
            if let Some(c) = coeffs.get_mut(d + offset) {
                *c += value;
            }
        }
        if let Some(c) = coeffs.get_mut(1) {
            *c += a;
        }
        if let Some(c) = coeffs.get_mut(0) {
            *c += b - a;
        }
        d + 2
    };
    (coeffs, degree)
}

/// `(a, b)` = `(kp·λ, ki·λ)` when finite and the delay is in range.
fn scaled_gains(kp: f64, ki: f64, delay_updates: u32, lambda: f64) -> Option<(f64, f64)> {
    let a = kp * lambda;
    let b = ki * lambda;
    (a.is_finite() && b.is_finite() && delay_updates <= MAX_DELAY_UPDATES).then_some((a, b))
}

/// Largest root modulus of the undelayed mode, in closed form: `|1 − a|` for the P law
/// (`b = 0`, Xiao & Boyd 2004), else the roots of `z² − (2 − a)z + (1 − a + b)`. With
/// `h = (2 − a)/2` and `Δ = h² − (1 − a + b)`: real roots `h ± √Δ` when `Δ ≥ 0`, whose
/// larger modulus `|h| + √Δ` is a sum of non-negative terms (no cancellation, the
/// concern of the stable quadratic formula, Press et al., *Numerical Recipes* §5.6, only
/// touches the smaller root, which is not needed); a complex pair of modulus
/// `√(1 − a + b)` (the product of the roots) when `Δ < 0`.
fn undelayed_radius(a: f64, b: f64) -> f64 {
    if b == 0.0 {
        return libm::fabs(1.0 - a);
    }
    let half_trace = (2.0 - a) / 2.0;
    let product = 1.0 - a + b;
    let disc = half_trace * half_trace - product;
    if disc >= 0.0 {
        libm::fabs(half_trace) + libm::sqrt(disc)
    } else {
        libm::sqrt(product)
    }
}

/// Convergence factor (largest root modulus, per update) of one Laplacian mode with
/// eigenvalue `lambda` under gains `kp`, `ki` and a `delay_updates`-update delay.
///
/// The mode obeys `z^d (z−1)² + λ(kp(z−1) + ki) = 0`; for `ki = 0` the root `z = 1`
/// (the unused trim) is divided out, leaving `z^{d+1} − z^d + kp·λ = 0`. Closed forms
/// for `d = 0`: `|1 − kp·λ|` (Xiao & Boyd 2004) and the PI quadratic
/// `z² − (2 − kp·λ)z + (1 − kp·λ + ki·λ)` (docs/design.md, Jury criterion). For `d ≥ 1` the roots come
/// from Durand–Kerner iteration (accurate to about 1e-12). Returns NaN for a delay above
/// [`MAX_DELAY_UPDATES`] or non-finite input.
pub fn mode_radius(kp: f64, ki: f64, delay_updates: u32, lambda: f64) -> f64 {
    let Some((a, b)) = scaled_gains(kp, ki, delay_updates, lambda) else {
        return f64::NAN;
    };
    if delay_updates == 0 {
        return undelayed_radius(a, b);
    }
    let (coeffs, degree) = delayed_polynomial(a, b, delay_updates as usize);
    coeffs.get(..=degree).map_or(f64::NAN, largest_root_modulus)
}

/// Whether the mode of [`mode_radius`] decays (every root strictly inside the unit
/// circle), without computing the roots when delayed: the closed form for `d = 0`, the
/// Schur–Cohn test for `d ≥ 1` (the root finder where that test is too near the circle to
/// trust). False for a delay above [`MAX_DELAY_UPDATES`] or
/// non-finite input. Agrees with `mode_radius(..) < 1` except within rounding of the
/// boundary (checked against the iteration in the tests).
pub(crate) fn mode_stable(kp: f64, ki: f64, delay_updates: u32, lambda: f64) -> bool {
    let Some((a, b)) = scaled_gains(kp, ki, delay_updates, lambda) else {
        return false;
    };
    if delay_updates == 0 {
        return undelayed_radius(a, b) < 1.0;
    }
    let (coeffs, degree) = delayed_polynomial(a, b, delay_updates as usize);
    let Some(coeffs) = coeffs.get(..=degree) else {
        return false;
    };
    schur_cohn_stable(coeffs).unwrap_or_else(|| largest_root_modulus(coeffs) < 1.0)
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn durand_kerner_on_known_roots() {
        // (z − 0.5)(z + 0.3) = z² − 0.2z − 0.15: largest |root| 0.5.
        assert!((largest_root_modulus(&[-0.15, -0.2, 1.0]) - 0.5).abs() < 1e-12);
        // (z² + 0.81)(z − 0.2): roots ±0.9i and 0.2.
        assert!((largest_root_modulus(&[-0.162, 0.81, -0.2, 1.0]) - 0.9).abs() < 1e-12);
        // Double root (z − 0.7)²: converges, slower, to 0.7.
        assert!((largest_root_modulus(&[0.49, -1.4, 1.0]) - 0.7).abs() < 1e-6);
    }

    #[test]
    fn delay_zero_closed_forms_match_the_iteration() {
        // The d = 0 closed forms against the generic root finder on the same polynomials.
        for (a, b) in [(0.3, 0.0), (1.7, 0.0), (0.4, 0.05), (0.9, 0.4), (0.2, 0.01)] {
            let closed = mode_radius(a, b, 0, 1.0);
            let iterated = if b == 0.0 {
                libm::fabs(1.0 - a)
            } else {
                largest_root_modulus(&[1.0 - a + b, -(2.0 - a), 1.0])
            };
            assert!((closed - iterated).abs() < 1e-9, "a {a} b {b}");
        }
        assert!(mode_radius(f64::NAN, 0.0, 0, 1.0).is_nan());
        assert!(mode_radius(0.1, 0.0, MAX_DELAY_UPDATES + 1, 1.0).is_nan());
    }

    /// A small xorshift64* generator: the tests need many reproducible draws and the
    /// planner has no random source of its own.
    struct Draws(u64);
    impl Draws {
        fn unit(&mut self) -> f64 {
            self.0 ^= self.0 >> 12;
            self.0 ^= self.0 << 25;
            self.0 ^= self.0 >> 27;
            (self.0.wrapping_mul(0x2545_F491_4F6C_DD1D) >> 11) as f64 / (1u64 << 53) as f64
        }
    }

    #[test]
    fn undelayed_closed_form_matches_the_iteration_on_random_gains() {
        // 20,000 random (kp, ki, λ), stable and unstable, real and complex roots: the
        // closed form against Durand–Kerner on the same quadratic.
        let mut draws = Draws(0x9E37_79B9_7F4A_7C15);
        let (mut complex, mut real, mut near_double) = (0, 0, 0);
        for _ in 0..20_000 {
            let kp = 1.5 * draws.unit();
            let ki = kp * draws.unit();
            let lambda = 4.0 * draws.unit();
            let (a, b) = (kp * lambda, ki * lambda);
            let closed = mode_radius(kp, ki, 0, lambda);
            let iterated = if b == 0.0 {
                largest_root_modulus(&[a - 1.0, 1.0])
            } else {
                largest_root_modulus(&[1.0 - a + b, -(2.0 - a), 1.0])
            };
            let h = (2.0 - a) / 2.0;
            let disc = h * h - (1.0 - a + b);
            // Near a double root Durand–Kerner converges only linearly (about 1e-7).
            let tol = if disc.abs() < 1e-8 {
                near_double += 1;
                1e-6
            } else {
                1e-10
            };
            if disc < 0.0 {
                complex += 1;
            } else {
                real += 1;
            }
            assert!(
                (closed - iterated).abs() <= tol * iterated.max(1.0),
                "kp {kp} ki {ki} λ {lambda}: closed {closed} iterated {iterated}"
            );
            assert_eq!(mode_stable(kp, ki, 0, lambda), closed < 1.0);
        }
        assert!(
            complex > 1_000 && real > 1_000,
            "{complex} complex, {real} real"
        );
        assert!(near_double < 20);
    }

    #[test]
    fn schur_cohn_on_known_polynomials() {
        assert_eq!(schur_cohn_stable(&[-0.15, -0.2, 1.0]), Some(true)); // roots 0.5, −0.3
        assert_eq!(schur_cohn_stable(&[-0.162, 0.81, -0.2, 1.0]), Some(true)); // ±0.9i, 0.2
        assert_eq!(schur_cohn_stable(&[0.6, -1.7, 1.0]), Some(false)); // 0.5, 1.2
        assert_eq!(schur_cohn_stable(&[1.21, 0.0, 1.0]), Some(false)); // ±1.1i
        // 0.5 and 1, on the circle; ±(1 − 1e-9)i, just inside: too near to tell.
        assert_eq!(schur_cohn_stable(&[0.5, -1.5, 1.0]), None);
        assert_eq!(schur_cohn_stable(&[1.0 - 2e-9, 0.0, 1.0]), None);
        assert_eq!(schur_cohn_stable(&[f64::NAN, 1.0]), None);
        // (z − 0.99)^5: every root just inside.
        let c = [-0.950_990_049_9, 4.802_980_05, -9.702_99, 9.801, -4.95, 1.0];
        assert_eq!(schur_cohn_stable(&c), Some(true));
    }

    #[test]
    fn delayed_p_law_stability_follows_levin_and_may() {
        // The P law with d updates of delay, z^{d+1} − z^d + kp·λ, is stable iff
        // kp·λ < 2·sin(π/(2(2d+1))) (Levin & May 1976; Kuruklis 1994).
        for d in 1..=MAX_DELAY_UPDATES {
            let bound = 2.0 * libm::sin(core::f64::consts::PI / (2.0 * (2.0 * f64::from(d) + 1.0)));
            assert!(mode_stable(bound * (1.0 - 1e-9), 0.0, d, 1.0), "d {d}");
            assert!(!mode_stable(bound * (1.0 + 1e-9), 0.0, d, 1.0), "d {d}");
            assert!(mode_stable(1e-3, 0.0, d, 1.0), "d {d}");
        }
    }

    #[test]
    fn schur_cohn_agrees_with_the_iteration_on_random_delayed_modes() {
        // P and PI modes with 1 to 30 updates of delay: the Schur–Cohn verdict against
        // Durand–Kerner's largest root modulus, away from the circle by more than the
        // iteration's accuracy.
        let mut draws = Draws(0xD1B5_4A32_D192_ED03);
        let (mut stable, mut unstable) = (0, 0);
        let mut decided = 0;
        for k in 0..3_000 {
            let d = 1 + k % MAX_DELAY_UPDATES;
            let kp = 0.8 * draws.unit() / f64::from(d);
            let ki = if k % 3 == 0 { 0.0 } else { kp * draws.unit() };
            // λ log-uniform from 1e-9 to 4: the slow modes of large networks too.
            let lambda = 4.0 * libm::pow(10.0, -9.6 * draws.unit());
            let radius = mode_radius(kp, ki, d, lambda);
            if (radius - 1.0).abs() < 1e-8 {
                continue;
            }
            let verdict = mode_stable(kp, ki, d, lambda);
            let (coeffs, degree) = delayed_polynomial(kp * lambda, ki * lambda, d as usize);
            if schur_cohn_stable(&coeffs[..=degree]).is_some() {
                decided += 1;
            }
            assert_eq!(
                verdict,
                radius < 1.0,
                "d {d} kp {kp} ki {ki} λ {lambda}: radius {radius}"
            );
            if verdict {
                stable += 1;
            } else {
                unstable += 1;
            }
        }
        assert!(
            stable > 250 && unstable > 250,
            "{stable} stable, {unstable} unstable"
        );
        // The test itself, not the fallback to the root finder, decides most of them.
        assert!(decided > 1_500, "{decided} decided by Schur–Cohn");
        assert!(!mode_stable(f64::NAN, 0.0, 1, 1.0));
        assert!(!mode_stable(0.1, 0.0, MAX_DELAY_UPDATES + 1, 1.0));
        // The slowest mode of a 10,000-node chain, λ = 4·sin²(π/20,000) (Fiedler 1973),
        // one update of delay: a complex pair within 1e-8 of the circle, still inside.
        let lambda = 4.0 * libm::pow(libm::sin(core::f64::consts::PI / 20_000.0), 2.0);
        for (kp, ki) in [(0.23, 0.0115), (0.16, 0.008), (0.25, 0.005)] {
            assert!(mode_radius(kp, ki, 1, lambda) < 1.0);
            assert!(mode_stable(kp, ki, 1, lambda), "kp {kp} ki {ki}");
        }
    }
}
