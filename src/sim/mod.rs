//! Monte-Carlo verification by simulating the real node code.
//!
//! A [`Setup`] says what is simulated (links, node law, crystals, update schedule,
//! beacon latency, timestamp jitter and loss, start phases, reboots, settling criterion,
//! horizon). A [`Network`] steps real [`crate::Node`] values through it in real time,
//! always to the horizon; a [`SettleTracker`] finds the settling instant, the first entry
//! and the steady window; [`monte_carlo`] repeats the run many times in parallel with
//! deterministic seeds; [`trace_run`] records one run for plotting.
//!
//! Phase error is the largest pairwise wrapped phase difference, in turns (times the
//! phase period for seconds), across the whole network and across links. A run has
//! *settled* at the sample after its last sample outside the tolerance band (settling
//! as control engineering defines it, common practice, no source), provided that last
//! exit lies before the final fifth of the horizon; the *first entry* into the band is
//! reported beside it, never as settling. Times are nominal update intervals from the
//! start (times the update period for seconds).
//!
//! ```
//! use entrain::sim::{Crystals, Links, Setup, Schedule, monte_carlo};
//! use entrain::{Config, Gain, Law};
//!
//! // A footbridge handrail string of 12 vibration sensors: 1 MHz timers, a 10 ms phase
//! // period, 100 updates per second, ±20 ppm crystals.
//! let config = Config::builder(10_000, 10_000)
//!     .law(Law::Sine)
//!     .kp(Gain::from_f32(0.4)?)
//!     .ki(Gain::from_f32(0.02)?)
//!     .build()?;
//! let mut scenario = Setup::new(Links::chain(12)?, config, 1e6);
//! scenario.crystals = Crystals::Uniform { tolerance_ppm: 20.0 };
//! scenario.schedule = Schedule { random_start: true, jitter_ticks: 50 };
//! scenario.horizon_updates = 3_000;
//! let summary = monte_carlo(&scenario, 16, 7, &|_| {})?;
//! assert_eq!(summary.never_settled_fraction, 0.0);
//! let settle = summary.settle_updates.unwrap();
//! let entry = summary.first_entry_updates.unwrap();
//! assert!(settle.p50 > 10.0 && settle.p50 <= settle.p90 && settle.p90 <= settle.max);
//! assert!(entry.p50 <= settle.p50);
//! let floor = summary.noise_floor_turns.unwrap();
//! assert!(floor.p50 <= floor.p99 && floor.p99 <= scenario.settle.tolerance_turns);
//! # Ok::<(), Box<dyn std::error::Error>>(())
//! ```

mod error;
mod monte_carlo;
mod network;
mod outcome;
mod settle;
mod setup;
mod telemetry;
mod trace;

pub use error::SimError;
pub use monte_carlo::{
    NoiseFloor, Percentiles, Progress, Summary, measure_rate, monte_carlo, run_once, trace_run,
};
pub use network::{Network, Sample, phase_from_turns};
pub use outcome::{RunOutcome, RunStats};
pub use settle::{
    STEADY_SAMPLES, Settle, SettleTracker, final_fifth_start, largest_neighbour_diff,
    largest_pairwise_diff, steady_stride, winding_number,
};
pub use setup::{
    Beacons, Crystals, Links, MAX_DEGREE, MAX_SIM_NODES, Reboot, Schedule, SettleCriterion, Setup,
    Stamping, StartPhases,
};
pub use telemetry::Recorder;
pub use trace::Trace;
