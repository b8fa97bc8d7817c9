//! The predictions the fidelity tests compare against.
#![allow(dead_code)]

use std::f64::consts::PI;

/// Settling of the P-only linear law on a chain.
pub struct Settling {
    pub asymptotic_updates: u64,
    pub bound_updates: u64,
    pub with_loss_updates: u64,
}

/// Per-edge steady offsets of the P-only sine law on a chain.
pub struct Offsets {
    pub locks: bool,
    pub offsets_turns: Vec<f64>,
}

pub fn chain_settling(n: usize, kp: f64, e0: f64, tol: f64) -> Settling {
    chain_settling_with_loss(n, kp, 1.0, e0, tol)
}

pub fn chain_settling_with_loss(n: usize, kp: f64, p: f64, e0: f64, tol: f64) -> Settling {
    // Path spectrum λ_k = 2 − 2cos(kπ/N) (Fiedler 1973; Brouwer & Haemers 2012 §1.4).
    let l2 = 2.0 - 2.0 * (PI / n as f64).cos();
    let lmax = 2.0 - 2.0 * (PI * (n as f64 - 1.0) / n as f64).cos();
    // ρ = max(|1 − ελ2|, |1 − ελmax|) (Xiao & Boyd 2004); with loss the mean factor
    // max|1 − εpλ| (Kar & Moura 2008).
    let rho = |eps: f64| (1.0 - eps * l2).abs().max((1.0 - eps * lmax).abs());
    let steps = |r: f64, target: f64| (target.ln() / r.ln()).ceil() as u64;
    // Bound: ‖x − x̄‖₂ shrinks by ρ per update; the spread is at most √2‖x − x̄‖₂ and
    // ‖x − x̄‖₂ ≤ √N·e0/2 at the start, so spread(t) ≤ √(N/2)·e0·ρ^t.
    let c = (n as f64 / 2.0).sqrt();
    Settling {
        asymptotic_updates: steps(rho(kp), tol / e0),
        bound_updates: steps(rho(kp), tol / (c * e0)),
        with_loss_updates: steps(rho(kp * p), tol / e0),
    }
}

/// Largest crystal gradient (ppm per node step) of `g·(i − (N−1)/2)` that an N-chain
/// still locks: max|S_k| = kp/(2π) (Strogatz & Mirollo 1988).
pub fn chain_critical_gradient_ppm(n: usize, kp: f64, period: u32, update: u32) -> f64 {
    let unit: Vec<f64> = (0..n).map(|i| i as f64 - (n as f64 - 1.0) / 2.0).collect();
    let mut s = 0.0f64;
    let mut worst = 0.0f64;
    for e in &unit {
        s += e * 1e-6 * f64::from(update) / f64::from(period);
        worst = worst.max(s.abs());
    }
    kp / (2.0 * PI) / worst
}

pub fn chain_offsets(ppm: &[f64], kp: f64, period: u32, update: u32) -> Offsets {
    // Drift per update ω_i = e_i·10⁻⁶·T/P turns; S_k = Σ_{i≤k}(ω_i − ω̄); offsets
    // Δ_k = θ_{k+1} − θ_k = −arcsin(2π·S_k/kp)/(2π); locks iff max|S_k| ≤ kp/(2π)
    // (Strogatz & Mirollo 1988).
    let w: Vec<f64> = ppm
        .iter()
        .map(|e| e * 1e-6 * f64::from(update) / f64::from(period))
        .collect();
    let mean = w.iter().sum::<f64>() / w.len() as f64;
    let mut s = 0.0;
    let mut offsets = Vec::new();
    let mut locks = true;
    for wi in &w[..w.len() - 1] {
        s += wi - mean;
        let x = 2.0 * PI * s / kp;
        locks &= x.abs() <= 1.0;
        offsets.push(-x.clamp(-1.0, 1.0).asin() / (2.0 * PI));
    }
    Offsets {
        locks,
        offsets_turns: offsets,
    }
}
