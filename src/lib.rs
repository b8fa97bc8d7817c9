#![doc = include_str!("../README.md")]
#![cfg_attr(not(feature = "std"), no_std)]
#![forbid(unsafe_code)]
#![deny(missing_docs)]
#![cfg_attr(
    not(test),
    deny(
        clippy::unwrap_used,
        clippy::expect_used,
        clippy::panic,
        clippy::indexing_slicing
    )
)]

#[cfg(feature = "beacon")]
pub mod beacon;
#[cfg(feature = "cli")]
pub mod cli;
mod config;
#[cfg(feature = "sim")]
pub mod forecast;
mod gain;
#[cfg(feature = "check")]
pub mod graph;
pub mod law;
mod node;
mod phase;
#[cfg(feature = "plan")]
pub mod plan;
#[cfg(feature = "hal")]
pub mod pulse;
#[cfg(feature = "sim")]
pub mod sim;

pub use config::{Config, ConfigBuilder, ConfigError, MAX_TRIM_LIMIT_PPB};
pub use gain::{GAIN_FRAC_BITS, Gain};
pub use law::Law;
pub use node::{Node, NodeId, Observation, TableFull, UpdateReport};
pub use phase::Phase;
