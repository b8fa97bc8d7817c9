//! The `entrain` command-line checker, as a library: scenario files, the human report,
//! JSON, SVG plots and firmware constants (feature `cli`).
//!
//! The binary `src/bin/entrain.rs` only parses arguments and calls [`run`]. This module
//! reads and checks the scenario ([`scenario`]), hands it to the library's planner and
//! simulator, and renders what they answer ([`report`], [`json`], [`plot`],
//! [`firmware`]). No mathematics lives here.

pub mod scenario;
pub mod firmware;
pub mod plot;
