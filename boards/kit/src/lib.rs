//! Shared helpers for the entrain board firmware.
//!
//! Everything here is `no_std` and allocation-free. The target-independent parts
//! ([`vectors`], [`crystal`]) are plain code; the rest touches Cortex-M core
//! peripherals ([`icount`]) or semihosting ([`host`]).
#![no_std]
#![deny(missing_docs)]

#[cfg(feature = "chain")]
pub mod chain;
#[cfg(feature = "chain")]
pub mod cmsdk_uart;
pub mod cost;
pub mod crystal;
pub mod host;
pub mod icount;
pub mod line;
#[cfg(feature = "chain")]
pub mod link;
#[cfg(feature = "pulse")]
pub mod pin;
#[cfg(feature = "pulse")]
pub mod pulse;
pub mod size;
pub mod vectors;

/// The vectors written by the root crate's `bitexact_vectors` example.
pub static NODE_LAW_VECTORS: &[u8] = include_bytes!("../../vectors/node_law.bin");
