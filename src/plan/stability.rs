//! Stability of the node law on a given spectrum: convergence factors and margins.

use core::f64::consts::PI;

use super::error::{PlanError, positive};
use super::model::{MAX_DELAY_UPDATES, Model};
use super::roots::{mode_radius, mode_stable};
use super::spectrum::Spectrum;

/// Stability verdict, convergence factors and margins of a [`Model`] on a [`Spectrum`].
///
/// Convergence factors ρ are per update (the slowest mode's error shrinks by ρ each
/// update). The overall ρ is taken at the two ends of the spectrum, λslow and λmax: a
/// mode's factor is quasi-convex in λ for these laws, so an interior mode is never slower
/// (checked against every mode of chains in the tests).
#[derive(Clone, Copy, Debug, PartialEq)]
pub struct Stability {
    /// Every non-zero mode decays (ρ < 1).
    pub stable: bool,
    /// Overall convergence factor per update, `max(radius_slow, radius_fast)`.
    pub radius: f64,
    /// Convergence factor of the slowest mode (λslow).
    pub radius_slow: f64,
    /// Convergence factor of the fastest mode (λmax), the one that goes unstable first.
    pub radius_fast: f64,
    /// Convergence factor of the mean dynamics when each message arrives with probability
    /// `success_prob`: gains scaled by p (Kar & Moura, IEEE TSP 56, 2008).
    pub mean_radius_with_loss: f64,
    /// How many times longer the mean error takes to shrink by a given factor with loss
    /// than without: `ln(radius) / ln(mean_radius_with_loss)` (≥ 1; infinite if unstable).
    pub loss_slowdown: f64,
    /// Factor by which both gains can be multiplied before some mode stops decaying
    /// (> 1 when stable; e.g. 2 = 6 dB gain margin).
    pub gain_margin: f64,
    /// Largest stable `kp` at the present `ki/kp` ratio and delay: `kp · gain_margin`.
    pub kp_limit: f64,
    /// Largest delay, in updates, at which these gains are still stable (`None` if not
    /// stable even without delay; capped at [`MAX_DELAY_UPDATES`]).
    pub delay_limit_updates: Option<u32>,
}

/// `2·sin(π/(2(2d+1)))`: the largest stable `kp·λmax` for the P-only law with a
/// `d`-update delay (Levin & May 1976 for the scalar case; Kuruklis 1994). 2 for `d = 0`.
pub fn delay_gain_bound(delay_updates: u32) -> f64 {
    let d = f64::from(delay_updates);
    2.0 * libm::sin(PI / (2.0 * (2.0 * d + 1.0)))
}

/// The step that makes the undelayed P law `x⁺ = (I − εL)x` converge fastest on a
/// spectrum from `lambda_slow` to `lambda_max`, and the per-update convergence factor it
/// gives: `ε* = 2/(λslow + λmax)`, `ρ* = (λmax − λslow)/(λmax + λslow)` (Xiao & Boyd,
/// Systems & Control Letters 53 (2004), the best constant edge weight). It balances the
/// slowest and the fastest mode, `|1 − ε*λslow| = |1 − ε*λmax|`.
///
/// # Errors
/// [`PlanError::InvalidParameter`] unless `0 < lambda_slow ≤ lambda_max`, both finite.
///
/// ```
/// // Chain of 4: λ = 2 − 2cos(kπ/4), λslow = 2 − √2, λmax = 2 + √2, so ε* = 1/2.
/// let (step, rate) = entrain::plan::optimal_step(2.0 - 2f64.sqrt(), 2.0 + 2f64.sqrt())?;
/// assert!((step - 0.5).abs() < 1e-15);
/// assert!((rate - 2f64.sqrt() / 2.0).abs() < 1e-15);
/// # Ok::<(), entrain::plan::PlanError>(())
/// ```
pub fn optimal_step(lambda_slow: f64, lambda_max: f64) -> Result<(f64, f64), PlanError> {
    positive(lambda_slow, "lambda_slow")?;
    positive(lambda_max, "lambda_max")?;
    if lambda_slow > lambda_max {
        return Err(PlanError::InvalidParameter {
            name: "lambda_slow",
            valid: "at most lambda_max",
        });
    }
    let sum = lambda_slow + lambda_max;
    Ok((2.0 / sum, (lambda_max - lambda_slow) / sum))
}

/// The Jury conditions for the undelayed PI law on every mode `λ ∈ (0, lambda_max]`:
/// `0 < ki < kp`, `(kp − ki)·λmax < 2`, `(2kp − ki)·λmax < 4` (docs/design.md, PI row).
pub fn pi_jury_stable(kp: f64, ki: f64, lambda_max: f64) -> bool {
    ki > 0.0 && ki < kp && (kp - ki) * lambda_max < 2.0 && (2.0 * kp - ki) * lambda_max < 4.0
}

fn worst_radius(model: &Model, spectrum: &Spectrum, delay_updates: u32) -> f64 {
    let at = |lambda| mode_radius(model.kp, model.ki, delay_updates, lambda);
    at(spectrum.lambda_slow).max(at(spectrum.lambda_max))
}

/// Both ends of the spectrum decay (the quasi-convexity noted on [`Stability`]); with
/// delay by the Schur–Cohn test, not the root finder.
fn is_stable(model: &Model, spectrum: &Spectrum, delay_updates: u32) -> bool {
    let at = |lambda| mode_stable(model.kp, model.ki, delay_updates, lambda);
    at(spectrum.lambda_slow) && at(spectrum.lambda_max)
}

/// Largest factor `s` such that the gains `s·kp`, `s·ki` are stable (bisection on the
/// mode radius at the ends of the spectrum, to 1e-12 relative).
fn gain_margin(model: &Model, spectrum: &Spectrum) -> f64 {
    let d = model.delay_updates;
    let stable_at = |s: f64| is_stable(&model.scaled(s), spectrum, d);
    let (mut lo, mut hi) = (1.0_f64, 1.0_f64);
    if stable_at(1.0) {
        while stable_at(hi) && hi < 1e12 {
            lo = hi;
            hi *= 2.0;
        }
    } else {
        while !stable_at(lo) && lo > 1e-12 {
            hi = lo;
            lo /= 2.0;
        }
    }
    for _ in 0..80 {
        let mid = 0.5 * (lo + hi);
        if stable_at(mid) {
            lo = mid;
        } else {
            hi = mid;
        }
        if hi - lo <= 1e-10 * hi {
            break;
        }
    }
    lo
}

/// `(radius_slow, radius_fast, mean_radius_with_loss)` without the margin searches.
pub(crate) fn radii(model: &Model, spectrum: &Spectrum) -> (f64, f64, f64) {
    let d = model.delay_updates;
    let slow = mode_radius(model.kp, model.ki, d, spectrum.lambda_slow);
    let fast = mode_radius(model.kp, model.ki, d, spectrum.lambda_max);
    (
        slow,
        fast,
        worst_radius(&model.scaled(model.success_prob), spectrum, d),
    )
}

/// Whether `model` is stable on `spectrum` with `delay_updates` of delay.
pub(crate) fn stable_with_delay(model: &Model, spectrum: &Spectrum, delay_updates: u32) -> bool {
    is_stable(model, spectrum, delay_updates)
}

/// Largest gain factor that keeps `model` stable on `spectrum` (see [`Stability::gain_margin`]).
pub(crate) fn margin_of(model: &Model, spectrum: &Spectrum) -> f64 {
    gain_margin(model, spectrum)
}

/// Stability, convergence factors and margins of `model` on `spectrum`.
///
/// # Errors
/// The [`Model::validate`] and [`Spectrum::validate`] errors (a disconnected graph is
/// [`PlanError::Disconnected`]).
pub fn stability(model: &Model, spectrum: &Spectrum) -> Result<Stability, PlanError> {
    model.validate()?;
    spectrum.validate()?;
    let d = model.delay_updates;
    let radius_slow = mode_radius(model.kp, model.ki, d, spectrum.lambda_slow);
    let radius_fast = mode_radius(model.kp, model.ki, d, spectrum.lambda_max);
    let radius = radius_slow.max(radius_fast);
    let stable = radius < 1.0;
    let mean_radius_with_loss = worst_radius(&model.scaled(model.success_prob), spectrum, d);
    let loss_slowdown = if stable && mean_radius_with_loss < 1.0 {
        if radius == 0.0 {
            f64::INFINITY
        } else {
            libm::log(radius) / libm::log(mean_radius_with_loss)
        }
    } else {
        f64::INFINITY
    };
    let margin = gain_margin(model, spectrum);
    let delay_limit_updates = if is_stable(model, spectrum, 0) {
        let mut last = 0;
        for delay in 1..=MAX_DELAY_UPDATES {
            if is_stable(model, spectrum, delay) {
                last = delay;
            } else {
                break;
            }
        }
        Some(last)
    } else {
        None
    };
    Ok(Stability {
        stable,
        radius,
        radius_slow,
        radius_fast,
        mean_radius_with_loss,
        loss_slowdown,
        gain_margin: margin,
        kp_limit: model.kp * margin,
        delay_limit_updates,
    })
}
