//! SVG plots in the project's own style (see `docs/plots.md`), written by a small SVG
//! writer of our own ([`canvas`]) so that every element that carries meaning is marked
//! (`class`, `data-key`, `data-value`) and can be checked by a test.
//!
//! Each function draws figures it is handed; it computes nothing but axis ranges,
//! histogram bins ([`histogram::bins`]) and the drawing layout of a graph.

pub mod canvas;
pub mod field;
pub mod histogram;
pub mod mode;
pub mod palette;
pub mod phase;

pub use field::{DecayLines, FieldPlot, field};
pub use histogram::{LockHistogram, lock_histogram};
pub use mode::{ModeLayout, ModePlot, mode_shape};
pub use phase::{Envelope, PhaseErrorPlot, RunTrace, phase_error};

use std::path::Path;

/// Width and height of every plot, pixels.
pub const PLOT_SIZE: (f64, f64) = (980.0, 600.0);

/// A plot could not be written.
#[derive(Clone, Debug, PartialEq, Eq)]
pub struct PlotError {
    /// The file being written.
    pub file: String,
    /// What went wrong.
    pub message: String,
}

impl std::fmt::Display for PlotError {
    fn fmt(&self, f: &mut std::fmt::Formatter<'_>) -> std::fmt::Result {
        write!(f, "cannot write the plot {}: {}", self.file, self.message)
    }
}

impl std::error::Error for PlotError {}

/// Write `svg` to `path`.
fn write(path: &Path, svg: String) -> Result<(), PlotError> {
    std::fs::write(path, svg).map_err(|e| PlotError {
        file: path.display().to_string(),
        message: e.to_string(),
    })
}
