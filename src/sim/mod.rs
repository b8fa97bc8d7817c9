//! Monte-Carlo verification by simulating the real node code.
//!
//! A [`Scenario`] says what is simulated (links, node law, crystals, update schedule,
//! beacon latency, timestamp jitter and loss, start phases, reboots, lock criterion).
//! A [`Network`] steps real [`crate::Node`] values through it in real time; a
//! [`LockTracker`] finds the lock instant; [`monte_carlo`] repeats the run many times in
//! parallel with deterministic seeds; [`trace_run`] records one run for plotting.
//!
//! Phase error is the largest pairwise wrapped phase difference, in turns (times the
//! phase period for seconds), across the whole network and across links.
//!
//! ```
//! use entrain::sim::{Crystals, Links, Scenario, Schedule, monte_carlo};
//! use entrain::{Config, Gain, Law};
//!
//! // A footbridge handrail string of 12 vibration sensors: 1 MHz timers, a 10 ms phase
//! // period, 100 updates per second, ±20 ppm crystals.
//! let config = Config::builder(10_000, 10_000)
//!     .law(Law::Sine)
//!     .kp(Gain::from_f32(0.4)?)
//!     .ki(Gain::from_f32(0.02)?)
//!     .build()?;
//! let mut scenario = Scenario::new(Links::chain(12)?, config, 1e6);
//! scenario.crystals = Crystals::Uniform { tolerance_ppm: 20.0 };
//! scenario.schedule = Schedule { random_start: true, jitter_ticks: 50 };
//! let summary = monte_carlo(&scenario, 16, 7, &|_| {})?;
//! assert_eq!(summary.never_locked_fraction, 0.0);
//! let p = summary.lock_updates.unwrap();
//! assert!(p.p50 > 10.0 && p.p50 <= p.p90 && p.p90 <= p.max);
//! # Ok::<(), Box<dyn std::error::Error>>(())
//! ```

mod error;
mod lock;
mod monte_carlo;
mod network;
mod outcome;
mod predict;
mod scenario;
mod trace;

pub use error::SimError;
pub use lock::{Lock, LockTracker, largest_neighbour_diff, largest_pairwise_diff, winding_number};
pub use monte_carlo::{Percentiles, Progress, Summary, monte_carlo, run_once, trace_run};
pub use network::{Network, Sample, phase_from_turns};
pub use outcome::{RunOutcome, RunStats};
pub use predict::{Prediction, chain_offsets, model_of, predict, start_spread_turns};
pub use scenario::{
    Beacons, Crystals, Links, LockCriterion, MAX_DEGREE, MAX_NODES, Reboot, Scenario, Schedule,
    StartPhases,
};
pub use trace::Trace;
