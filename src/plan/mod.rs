//! Desk planning from closed forms: spectra, stability, settling, locking, noise and gain
//! tuning for the node law — `no_std`, no allocation, only `libm`.
//!
//! The chain of reasoning: a [`Topology`] gives a [`Spectrum`] (λslow, λmax); a
//! [`Model`] of the node law (gains per update, update period, delay, loss, clamps) on
//! that spectrum gives [`Stability`] (convergence factor per update and margins),
//! [`Settling`] (updates and seconds from an initial spread to a tolerance), [`Locking`]
//! (does the law hold the crystals' drift, at what offsets) and [`Noise`] (phase jitter
//! from timestamp jitter); [`tune`] searches the gains for a lock-time [`Budget`].
//!
//! Phase error is measured as the largest pairwise wrapped phase difference between nodes
//! (for a pinned chain: the largest offset from the reference), in turns, or in seconds
//! given the phase period.
//!
//! # Example
//!
//! A footbridge handrail string of 24 vibration sensors, 10 updates per second, 1 ms
//! phase period, sine law with `kp = 0.2`:
//!
//! ```
//! use entrain::plan::{Shape, Model, Spread, Topology, settle, stability};
//!
//! let string = Topology::Chain { nodes: 24 };
//! let spectrum = string.spectrum()?;
//! let model = Model::p_only(Shape::Sine, 0.2, 0.1, 1e-3);
//! let st = stability(&model, &spectrum)?;
//! assert!(st.stable && st.gain_margin > 2.0);
//! let s = settle(&model, &spectrum, &Spread { initial_spread_s: 4e-4, tolerance_s: 1e-6 })?;
//! assert!(s.asymptotic_updates > 100 && s.bound_updates >= Some(s.asymptotic_updates));
//! # Ok::<(), entrain::plan::PlanError>(())
//! ```

mod error;
mod lock;
mod model;
mod noise;
mod roots;
mod settle;
mod spectrum;
mod stability;
mod topology;
mod tune;

pub use error::PlanError;
pub use lock::{
    Locking, chain_lock, kp_lock_minimum, lock_worst_case, pinned_chain_lock, worst_chain_pattern,
};
pub use model::{MAX_DELAY_UPDATES, Model, Shape};
pub use noise::{Noise, continuous_coherence, mode_variance, phase_jitter};
pub use roots::mode_radius;
pub use settle::{BOUND_ITERATION_CAP_UPDATES, SettleWarnings, Settling, Spread, settle};
pub use spectrum::Spectrum;
pub use stability::{Stability, delay_gain_bound, optimal_step, pi_jury_stable, stability};
pub use topology::{MAX_PLAN_NODES, Topology, tridiagonal_toeplitz_eigenvalue};
pub use tune::{
    Alternatives, Budget, GainChoice, GainRanges, Infeasibility, KP_SCAN_POINTS,
    MIN_DELAY_MARGIN_UPDATES, MIN_GAIN_MARGIN, Margins, PI_RATIOS, REFINE_POINTS, Search, Tuning,
    delay_margin, gain_choice, predicted_lock_s, tune, tune_topology, tune_with,
};
