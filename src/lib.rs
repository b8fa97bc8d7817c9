//! Neighbour-coupled phase alignment for microcontroller nodes.
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

#[cfg(feature = "plan")]
pub mod plan;

#[cfg(feature = "check")]
pub mod graph;
