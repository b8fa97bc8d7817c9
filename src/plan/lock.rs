//! Detuning and lock: can the law hold every node at one rate despite crystal errors,
//! and at what steady phase offsets?
//!
//! Crystal error `e_i` ppm makes node i drift `ω_i = e_i·1e-6·T/P` turns per update
//! (`T` update period, `P` phase period). The P-only law locks with steady offsets; the
//! PI law trims the drift away and locks with zero offset.

use core::f64::consts::PI;

use super::error::{PlanError, non_negative};
use super::model::{Model, Shape};
use super::spectrum::Spectrum;

/// Lock verdict for a crystal pattern or for the worst pattern within a tolerance.
#[derive(Clone, Copy, Debug, PartialEq)]
pub struct Locking {
    /// The law holds every node at one common rate.
    pub locks: bool,
    /// Largest steady flow over one edge, turns per update (`max_k |S_k|` on a chain).
    pub edge_flow_turns_per_update: f64,
    /// Largest flow an edge can carry, turns per update ([`Model::edge_capacity_turns_per_update`];
    /// infinite for the PI law, which trims the drift away).
    pub edge_capacity_turns_per_update: f64,
    /// `edge_capacity / edge_flow` (≥ 1 locks; infinite when there is no drift).
    pub lock_margin: f64,
    /// Largest steady phase offset across one edge, turns (0 for the PI law). Sine law:
    /// `arcsin(2π·flow/kp)/(2π)`; linear law: `flow/kp` (Strogatz & Mirollo 1988).
    pub max_edge_lag_turns: f64,
    /// [`Self::max_edge_lag_turns`] in seconds.
    pub max_edge_lag_s: f64,
    /// Largest steady correction one node applies per update, turns (its drift against
    /// the common rate; 0 for the PI law once trimmed).
    pub max_correction_turns_per_update: f64,
    /// The correction fits within `slew_limit_turns`.
    pub slew_ok: bool,
    /// Smallest rate trim a node needs, ppm (PI law: the common rate minus its own; 0 for P).
    pub trim_min_ppm: f64,
    /// Largest rate trim a node needs, ppm.
    pub trim_max_ppm: f64,
    /// The trims fit within `±trim_limit_ppm` (always true for the P-only law).
    pub trim_ok: bool,
}

fn edge_lag_turns(law: Shape, flow: f64, kp: f64) -> f64 {
    Model {
        law,
        ..Model::p_only(law, kp, 1.0, 1.0)
    }
    .edge_lag_turns(flow)
}

fn verdict(
    model: &Model,
    flow: f64,
    correction: f64,
    trim_min_ppm: f64,
    trim_max_ppm: f64,
) -> Locking {
    let pi = model.is_pi();
    let capacity = if pi {
        f64::INFINITY
    } else {
        model.edge_capacity_turns_per_update()
    };
    let fits = match model.law {
        Shape::Sine => flow <= capacity,
        Shape::Linear => flow < capacity,
    };
    let (offset, correction) = if pi {
        (0.0, 0.0)
    } else {
        (edge_lag_turns(model.law, flow, model.kp), correction)
    };
    let slew_ok = correction <= model.slew_limit_turns;
    let (trim_min_ppm, trim_max_ppm) = if pi {
        (trim_min_ppm, trim_max_ppm)
    } else {
        (0.0, 0.0)
    };
    let trim_ok = trim_min_ppm >= -model.trim_limit_ppm && trim_max_ppm <= model.trim_limit_ppm;
    let lock_margin = if flow > 0.0 {
        capacity / flow
    } else {
        f64::INFINITY
    };
    Locking {
        locks: fits && slew_ok && trim_ok,
        edge_flow_turns_per_update: flow,
        edge_capacity_turns_per_update: capacity,
        lock_margin,
        max_edge_lag_turns: libm::fabs(offset),
        max_edge_lag_s: libm::fabs(offset) * model.phase_period_s,
        max_correction_turns_per_update: correction,
        slew_ok,
        trim_min_ppm,
        trim_max_ppm,
        trim_ok,
    }
}

fn mean(values: &[f64]) -> f64 {
    values.iter().sum::<f64>() / values.len() as f64
}

fn check_crystals(crystal_ppm: &[f64], min: usize) -> Result<(), PlanError> {
    if crystal_ppm.len() < min {
        return Err(PlanError::TooFewNodes {
            min,
            got: crystal_ppm.len(),
        });
    }
    if crystal_ppm.iter().any(|e| !e.is_finite()) {
        return Err(PlanError::InvalidParameter {
            name: "crystal_ppm",
            valid: "finite",
        });
    }
    Ok(())
}

/// Exact lock test and steady offsets of an open chain for a given crystal pattern.
///
/// With `S_k = Σ_{i≤k}(ω_i − ω̄)` (turns per update), the edge from node k to node k+1
/// carries flow `S_k`; the steady offset `Δ_k = θ_{k+1} − θ_k` solves `f(Δ_k) = −S_k/kp`:
/// `−arcsin(2π·S_k/kp)/(2π)` for the sine law (locks iff `max|S_k| ≤ kp/(2π)`), `−S_k/kp`
/// for the linear law (locks iff below ½ turn). Strogatz & Mirollo, Physica D 31 (1988);
/// Ermentrout & Kopell 1984. `offsets_turns` (length N−1) receives `Δ_k`; past the lock
/// limit the values saturate at ±¼ turn (sine) or ±½ turn (linear). For the PI law the
/// offsets are 0 and the trims are `ē − e_i` ppm.
///
/// # Errors
/// [`PlanError::TooFewNodes`] for fewer than 2 crystals; [`PlanError::WrongLength`];
/// [`PlanError::InvalidParameter`] for non-finite values; model errors.
pub fn chain_lock(
    model: &Model,
    crystal_ppm: &[f64],
    offsets_turns: &mut [f64],
) -> Result<Locking, PlanError> {
    model.validate()?;
    check_crystals(crystal_ppm, 2)?;
    let n = crystal_ppm.len();
    if offsets_turns.len() != n - 1 {
        return Err(PlanError::WrongLength {
            needed: n - 1,
            got: offsets_turns.len(),
        });
    }
    let mean_ppm = mean(crystal_ppm);
    let mut partial = 0.0_f64;
    let mut flow = 0.0_f64;
    for (e, slot) in crystal_ppm.iter().zip(offsets_turns.iter_mut()) {
        partial += model.ppm_to_turns_per_update(e - mean_ppm);
        flow = flow.max(libm::fabs(partial));
        *slot = if model.is_pi() {
            0.0
        } else {
            -edge_lag_turns(model.law, partial, model.kp)
        };
    }
    Ok(pattern_verdict(model, crystal_ppm, mean_ppm, flow))
}

fn pattern_verdict(model: &Model, crystal_ppm: &[f64], reference_ppm: f64, flow: f64) -> Locking {
    let correction = crystal_ppm.iter().fold(0.0_f64, |m, e| {
        m.max(libm::fabs(model.ppm_to_turns_per_update(e - reference_ppm)))
    });
    let trims = crystal_ppm.iter().map(|e| reference_ppm - e);
    let trim_min = trims.clone().fold(f64::INFINITY, f64::min);
    let trim_max = trims.fold(f64::NEG_INFINITY, f64::max);
    verdict(model, flow, correction, trim_min, trim_max)
}

/// Exact lock test and steady offsets of a chain pinned to a reference at node 0's end.
///
/// The reference runs at the nominal rate (0 ppm). The link into node k carries the drift
/// of every node beyond it, `T_k = Σ_{i≥k} ω_i`, and its offset `Δ_k = θ_k − θ_{k−1}`
/// (`θ_{−1}` the reference) solves `f(Δ_k) = T_k/kp` (the open-chain argument of
/// Strogatz & Mirollo 1988 with the reference as a node that never moves).
/// `offsets_turns` has length N. PI law: offsets 0, trims `−e_i` ppm.
///
/// # Errors
/// As [`chain_lock`], with at least 1 crystal.
pub fn pinned_chain_lock(
    model: &Model,
    crystal_ppm: &[f64],
    offsets_turns: &mut [f64],
) -> Result<Locking, PlanError> {
    model.validate()?;
    check_crystals(crystal_ppm, 1)?;
    let n = crystal_ppm.len();
    if offsets_turns.len() != n {
        return Err(PlanError::WrongLength {
            needed: n,
            got: offsets_turns.len(),
        });
    }
    let mut tail = 0.0_f64;
    let mut flow = 0.0_f64;
    for (e, slot) in crystal_ppm.iter().zip(offsets_turns.iter_mut()).rev() {
        tail += model.ppm_to_turns_per_update(*e);
        flow = flow.max(libm::fabs(tail));
        *slot = if model.is_pi() {
            0.0
        } else {
            edge_lag_turns(model.law, tail, model.kp)
        };
    }
    Ok(pattern_verdict(model, crystal_ppm, 0.0, flow))
}

/// The crystal pattern within `±tolerance_ppm` that loads a chain most: the first
/// `⌊N/2⌋` nodes fast (+tolerance), the rest slow (maximises `max_k|S_k| = 2wk(N−k)/N`,
/// Strogatz & Mirollo 1988). For a pinned chain (`pinned = true`) every node is fast.
///
/// # Errors
/// [`PlanError::InvalidParameter`] for a negative or NaN tolerance; [`PlanError::TooFewNodes`]
/// for an empty slice.
pub fn worst_chain_pattern(
    tolerance_ppm: f64,
    pinned: bool,
    out_ppm: &mut [f64],
) -> Result<(), PlanError> {
    non_negative(tolerance_ppm, "tolerance_ppm")?;
    if out_ppm.is_empty() {
        return Err(PlanError::TooFewNodes { min: 1, got: 0 });
    }
    let half = out_ppm.len() / 2;
    for (i, slot) in out_ppm.iter_mut().enumerate() {
        *slot = if pinned || i < half {
            tolerance_ppm
        } else {
            -tolerance_ppm
        };
    }
    Ok(())
}

/// Worst-case lock verdict over every crystal pattern within `±tolerance_ppm`.
///
/// `flow_factor` is the topology's worst edge load per unit detuning
/// ([`crate::plan::Topology::worst_flow_factor`], or the numeric graph path's): the largest
/// edge flow is `w·flow_factor` with `w` the tolerance in turns per update. For general
/// graphs this is the Dörfler, Chertkov & Bullo (2013) test `‖Bᵀ L† ω‖∞ ≤ kp/(2π)`
/// (sufficient; exact on trees). The largest correction a node needs is `2w(N−1)/N`
/// (`w` pinned), and so is the largest PI trim.
///
/// # Errors
/// [`PlanError::InvalidParameter`] for a NaN or negative tolerance or flow factor; model
/// and spectrum errors.
pub fn lock_worst_case(
    model: &Model,
    spectrum: &Spectrum,
    flow_factor: f64,
    tolerance_ppm: f64,
) -> Result<Locking, PlanError> {
    model.validate()?;
    spectrum.validate()?;
    non_negative(tolerance_ppm, "tolerance_ppm")?;
    non_negative(flow_factor, "flow_factor")?;
    let w = model.ppm_to_turns_per_update(tolerance_ppm);
    let n = spectrum.node_count as f64;
    let spread_factor = if spectrum.pinned {
        1.0
    } else {
        2.0 * (n - 1.0) / n
    };
    let trim = tolerance_ppm * spread_factor;
    Ok(verdict(
        model,
        w * flow_factor,
        w * spread_factor,
        -trim,
        trim,
    ))
}

/// Smallest `kp` at which the P-only law still locks the worst crystal pattern:
/// `2π·w·flow_factor` (sine) or `2·w·flow_factor` (linear), with `w` the tolerance in
/// turns per update. Beyond this the slew limit must also hold
/// (see [`Locking::slew_ok`]).
pub fn kp_lock_minimum(model: &Model, flow_factor: f64, tolerance_ppm: f64) -> f64 {
    let flow = model.ppm_to_turns_per_update(tolerance_ppm) * flow_factor;
    match model.law {
        Shape::Sine => 2.0 * PI * flow,
        Shape::Linear => 2.0 * flow,
    }
}
