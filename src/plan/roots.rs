//! Convergence factor of one Laplacian mode: the largest root modulus of the mode's
//! characteristic polynomial, closed form without delay and Durand–Kerner with delay.

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
            let step = if denom.abs() == 0.0 {
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
            largest_step = largest_step.max(step.abs());
        }
        if largest_step < 1e-14 {
            break;
        }
    }
    roots.iter().fold(0.0_f64, |m, z| m.max(z.abs()))
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
    let a = kp * lambda;
    let b = ki * lambda;
    if !(a.is_finite() && b.is_finite()) || delay_updates > MAX_DELAY_UPDATES {
        return f64::NAN;
    }
    let d = delay_updates as usize;
    if d == 0 {
        if b == 0.0 {
            return libm::fabs(1.0 - a);
        }
        let half_trace = (2.0 - a) / 2.0;
        let product = 1.0 - a + b;
        let disc = half_trace * half_trace - product;
        return if disc >= 0.0 {
            let s = libm::sqrt(disc);
            libm::fabs(half_trace + s).max(libm::fabs(half_trace - s))
        } else {
            libm::sqrt(product)
        };
    }
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
    coeffs.get(..=degree).map_or(f64::NAN, largest_root_modulus)
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
}
