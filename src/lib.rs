#![doc = include_str!("../README.md")]
#![cfg_attr(not(feature = "std"), no_std)]
#![forbid(unsafe_code)]
#![deny(missing_docs)]
#![cfg_attr(docsrs, feature(doc_cfg))]
// Panic-freedom of the node law, the beacon and the planner (the parts that run on a
// node): no unwrap, expect, panic or unchecked indexing outside tests. Host-only modules
// opt out below: there a broken internal invariant panics with a message instead of
// going on with a made-up number.
#![cfg_attr(
    not(test),
    deny(
        clippy::unwrap_used,
        clippy::expect_used,
        clippy::panic,
        clippy::indexing_slicing
    )
)]

mod arith;
#[cfg(feature = "assess")]
#[cfg_attr(docsrs, doc(cfg(feature = "assess")))]
#[allow(
    clippy::unwrap_used,
    clippy::expect_used,
    clippy::panic,
    clippy::indexing_slicing
)]
pub mod assess;
#[cfg(feature = "beacon")]
#[cfg_attr(docsrs, doc(cfg(feature = "beacon")))]
pub mod beacon;
mod config;
#[cfg(feature = "field")]
#[cfg_attr(docsrs, doc(cfg(feature = "field")))]
#[allow(
    clippy::unwrap_used,
    clippy::expect_used,
    clippy::panic,
    clippy::indexing_slicing
)]
pub mod field;
#[cfg(feature = "sim")]
#[cfg_attr(docsrs, doc(cfg(feature = "sim")))]
#[allow(
    clippy::unwrap_used,
    clippy::expect_used,
    clippy::panic,
    clippy::indexing_slicing
)]
pub mod forecast;
mod gain;
#[cfg(feature = "check")]
#[cfg_attr(docsrs, doc(cfg(feature = "check")))]
#[allow(
    clippy::unwrap_used,
    clippy::expect_used,
    clippy::panic,
    clippy::indexing_slicing
)]
pub mod graph;
pub mod law;
mod node;
mod phase;
#[cfg(feature = "plan")]
#[cfg_attr(docsrs, doc(cfg(feature = "plan")))]
pub mod plan;
#[cfg(feature = "proptest")]
#[cfg_attr(docsrs, doc(cfg(feature = "proptest")))]
#[allow(
    clippy::unwrap_used,
    clippy::expect_used,
    clippy::panic,
    clippy::indexing_slicing
)]
pub mod props;
#[cfg(feature = "hal")]
#[cfg_attr(docsrs, doc(cfg(feature = "hal")))]
pub mod pulse;
#[cfg(feature = "assess")]
#[cfg_attr(docsrs, doc(cfg(feature = "assess")))]
#[allow(
    clippy::unwrap_used,
    clippy::expect_used,
    clippy::panic,
    clippy::indexing_slicing
)]
pub mod scenario;
#[cfg(feature = "sim")]
#[cfg_attr(docsrs, doc(cfg(feature = "sim")))]
#[allow(
    clippy::unwrap_used,
    clippy::expect_used,
    clippy::panic,
    clippy::indexing_slicing
)]
pub mod sim;
#[cfg(feature = "telemetry")]
#[cfg_attr(docsrs, doc(cfg(feature = "telemetry")))]
pub mod telemetry;

pub use config::{Config, ConfigBuilder, ConfigError, MAX_DELAY_SMOOTHING, MAX_TRIM_LIMIT_PPB};
pub use gain::{GAIN_FRAC_BITS, Gain};
pub use law::Law;
pub use node::{
    Echo, LinkView, MAX_NEIGHBOURS, Node, NodeId, Observation, ObserveError, Timing, UpdateReport,
    WEIGHT_ONE,
};
pub use phase::Phase;
