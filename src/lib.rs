//! Neighbour-coupled phase alignment for microcontroller nodes.
#![cfg_attr(not(feature = "std"), no_std)]
#![forbid(unsafe_code)]
#![deny(missing_docs)]

#[cfg(feature = "beacon")]
pub mod beacon;
