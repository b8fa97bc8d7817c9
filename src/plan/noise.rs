//! Steady-state phase jitter from timestamp jitter (network coherence).
//!
//! Each received neighbour phase carries an independent timestamp error of standard
//! deviation `σ` seconds, i.e. `σ/P` turns. Node i's update sums `deg_i` such errors, so
//! per Laplacian mode the injected variance is at most `max_degree·(σ/P)²` (exact for
//! regular graphs: ring, torus, complete). Each mode is a stable linear filter; its
//! steady variance is the discrete Lyapunov solution, and the per-node figure averages
//! the modes — the discrete form of the coherence of Bamieh, Jovanović, Mitra &
//! Patterson, IEEE TAC 57 (2012), whose continuous-time value `(σ²/2N)·Σ 1/λ_k`
//! ([`continuous_coherence`]) it approaches for small gains. Delay is not modelled here.

use super::error::{PlanError, non_negative};
use super::model::Model;
use super::roots::mode_radius;
use super::spectrum::Spectrum;

/// Steady phase jitter of the network.
#[derive(Clone, Copy, Debug, PartialEq)]
pub struct Noise {
    /// Standard deviation of one neighbour measurement, turns.
    pub measurement_sd_turns: f64,
    /// Root-mean-square over nodes of each node's steady deviation from the network mean
    /// (from the reference when pinned), turns. An upper bound for irregular graphs.
    pub phase_sd_turns: f64,
    /// [`Self::phase_sd_turns`] in seconds.
    pub phase_sd_s: f64,
}

/// Steady variance of one mode's phase for unit-variance white measurement noise η:
/// `θ⁺ = θ + v − kp(λθ − η)`, `v⁺ = v − ki(λθ − η)`. P-only: `kp²/(1 − (1 − kpλ)²)`;
/// PI: the (θ, θ) entry of the solution of `Σ = AΣAᵀ + BBᵀ`. Infinite when the mode is
/// not stable.
pub fn mode_variance(kp: f64, ki: f64, lambda: f64) -> f64 {
    if mode_radius(kp, ki, 0, lambda) >= 1.0 {
        return f64::INFINITY;
    }
    let a = 1.0 - kp * lambda;
    if ki == 0.0 {
        return kp * kp / (1.0 - a * a);
    }
    let c = -ki * lambda;
    // A = [[a, 1], [c, 1]], B = [kp, ki]; unknowns p11, p12, p22 of Σ:
    // p11 = a²p11 + 2a·p12 + p22 + kp²
    // p12 = ac·p11 + (a + c)p12 + p22 + kp·ki
    // 0   = c²p11 + 2c·p12 + ki²
    let m = [
        [1.0 - a * a, -2.0 * a, -1.0],
        [-a * c, 1.0 - a - c, -1.0],
        [c * c, 2.0 * c, 0.0],
    ];
    let rhs = [kp * kp, kp * ki, -ki * ki];
    let det3 = |m: &[[f64; 3]; 3]| {
        m[0][0] * (m[1][1] * m[2][2] - m[1][2] * m[2][1])
            - m[0][1] * (m[1][0] * m[2][2] - m[1][2] * m[2][0])
            + m[0][2] * (m[1][0] * m[2][1] - m[1][1] * m[2][0])
    };
    let det = det3(&m);
    let mut first = m;
    for (row, value) in first.iter_mut().zip(rhs) {
        row[0] = value;
    }
    let p11 = det3(&first) / det;
    if p11.is_finite() && p11 >= 0.0 {
        p11
    } else {
        f64::INFINITY
    }
}

/// Continuous-time coherence `(σ²/2N)·Σ 1/λ_k` (Bamieh et al. 2012): per-node steady
/// variance of `ẋ = −Lx + w` with white noise of intensity σ².
pub fn continuous_coherence(sigma: f64, node_count: usize, sum_inverse_eigenvalues: f64) -> f64 {
    sigma * sigma / (2.0 * node_count as f64) * sum_inverse_eigenvalues
}

/// Steady phase jitter of `model` on a network with `spectrum` whose non-zero modes are
/// `nonzero_modes` (e.g. [`crate::plan::Topology::nonzero_modes`]), for timestamp jitter
/// `jitter_s` seconds (standard deviation).
///
/// # Errors
/// [`PlanError::InvalidParameter`] for negative or NaN jitter or a non-finite mode;
/// [`PlanError::Unstable`] if a mode does not decay; model and spectrum errors.
pub fn phase_jitter(
    model: &Model,
    spectrum: &Spectrum,
    nonzero_modes: impl IntoIterator<Item = f64>,
    jitter_s: f64,
) -> Result<Noise, PlanError> {
    model.validate()?;
    spectrum.validate()?;
    non_negative(jitter_s, "jitter_s")?;
    let sd = model.seconds_to_turns(jitter_s);
    let q = spectrum.max_degree * sd * sd;
    let mut total = 0.0_f64;
    for lambda in nonzero_modes {
        if !lambda.is_finite() || lambda <= 0.0 {
            return Err(PlanError::InvalidParameter {
                name: "nonzero_modes",
                valid: "finite and > 0",
            });
        }
        let v = mode_variance(model.kp, model.ki, lambda);
        if !v.is_finite() {
            return Err(PlanError::Unstable);
        }
        total += v;
    }
    let variance = q * total / spectrum.node_count as f64;
    let phase_sd_turns = libm::sqrt(variance);
    Ok(Noise {
        measurement_sd_turns: sd,
        phase_sd_turns,
        phase_sd_s: phase_sd_turns * model.phase_period_s,
    })
}
