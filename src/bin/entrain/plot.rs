//! SVG plots through `plotters`' SVG backend alone (text is left to the viewer's fonts, so
//! no font files or system libraries are needed).
//!
//! Each function draws figures it is handed; it computes nothing but axis ranges and
//! histogram bins.

use entrain::assess::seconds;
use plotters::prelude::*;
use std::path::Path;

/// Width and height of every plot, pixels.
pub const PLOT_SIZE: (u32, u32) = (960, 560);

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

fn failed(path: &Path) -> impl Fn(String) -> PlotError + '_ {
    move |message| PlotError {
        file: path.display().to_string(),
        message,
    }
}

/// One simulated run's largest pairwise phase difference over time.
#[derive(Clone, Debug, PartialEq)]
pub struct ErrorTrace {
    /// Run number.
    pub run: u64,
    /// Time since power-up of sample `k` is `k × step_s`.
    pub step_s: f64,
    /// Largest pairwise wrapped phase difference per sample, seconds of phase.
    pub error_s: Vec<f64>,
}

/// The predicted decay the traces are drawn against: the planner's dominant-mode estimate
/// and worst-case bound, each drawn as the straight line (on the log axis) from the initial
/// spread at power-up to the tolerance at the predicted lock time.
#[derive(Clone, Copy, Debug, PartialEq)]
pub struct Envelope {
    /// Initial spread, seconds of phase.
    pub initial_spread_s: f64,
    /// Dominant-mode (asymptotic) lock time, seconds.
    pub asymptotic_s: f64,
    /// Worst-case bound on the lock time, seconds, where the planner gives one.
    pub bound_s: Option<f64>,
}

/// Sample runs are data, not categories: shades of one slate blue, dark to light, so the
/// saturated colours stay free for the prediction, the tolerance and the budget (own
/// choice; lightness alone separates them for colour-blind readers).
const TRACE_COLOURS: [RGBColor; 6] = [
    RGBColor(38, 70, 103),
    RGBColor(58, 96, 130),
    RGBColor(80, 120, 152),
    RGBColor(104, 144, 172),
    RGBColor(130, 166, 190),
    RGBColor(156, 186, 206),
];

/// Draw sample runs' largest phase difference against time, with the tolerance band, the
/// budget and the predicted envelope, on a logarithmic phase axis.
///
/// # Errors
/// A [`PlotError`] when the file cannot be written.
pub fn error_traces(
    path: &Path,
    title: &str,
    traces: &[ErrorTrace],
    envelope: Option<Envelope>,
    tolerance_s: f64,
    budget_s: f64,
) -> Result<(), PlotError> {
    let fail = failed(path);
    let end_s = traces
        .iter()
        .map(|t| t.step_s * t.error_s.len() as f64)
        .fold(budget_s * 1.1, f64::max);
    let positive = traces
        .iter()
        .flat_map(|t| t.error_s.iter().copied())
        .filter(|v| v.is_finite() && *v > 0.0);
    let (lo, hi) = positive.fold((tolerance_s, tolerance_s), |(lo, hi), v| {
        (lo.min(v), hi.max(v))
    });
    let hi = envelope.map_or(hi, |e| hi.max(e.initial_spread_s));
    let (y_lo, y_hi) = ((lo / 3.0).max(tolerance_s * 1e-4), hi * 2.0);

    let root = SVGBackend::new(path, PLOT_SIZE).into_drawing_area();
    root.fill(&WHITE).map_err(|e| fail(e.to_string()))?;
    let mut chart = ChartBuilder::on(&root)
        .caption(title, ("sans-serif", 20))
        .margin(16)
        .x_label_area_size(44)
        .y_label_area_size(80)
        .build_cartesian_2d(0.0..end_s, (y_lo..y_hi).log_scale())
        .map_err(|e| fail(e.to_string()))?;
    chart
        .configure_mesh()
        .x_desc("time since power-up, s")
        .y_desc("largest pairwise phase difference, s")
        .y_label_formatter(&|v| format!("{v:.0e}"))
        .draw()
        .map_err(|e| fail(e.to_string()))?;

    // Tolerance band: everything below the tolerance counts as locked.
    chart
        .draw_series(std::iter::once(Rectangle::new(
            [(0.0, y_lo), (end_s, tolerance_s)],
            RGBColor(44, 160, 44).mix(0.15).filled(),
        )))
        .map_err(|e| fail(e.to_string()))?
        .label(format!("lock tolerance ({})", seconds(tolerance_s)))
        .legend(|(x, y)| {
            Rectangle::new(
                [(x, y - 5), (x + 20, y + 5)],
                RGBColor(44, 160, 44).mix(0.3).filled(),
            )
        });
    chart
        .draw_series(LineSeries::new(
            [(budget_s, y_lo), (budget_s, y_hi)],
            RED.stroke_width(2),
        ))
        .map_err(|e| fail(e.to_string()))?
        .label(format!("lock-time budget ({})", seconds(budget_s)))
        .legend(|(x, y)| PathElement::new([(x, y), (x + 20, y)], RED.stroke_width(2)));

    for (i, trace) in traces.iter().enumerate() {
        let colour = TRACE_COLOURS
            .get(i % TRACE_COLOURS.len())
            .copied()
            .unwrap_or(BLUE);
        let points = trace
            .error_s
            .iter()
            .enumerate()
            .map(|(k, v)| (k as f64 * trace.step_s, v.max(y_lo)));
        let series = chart
            .draw_series(LineSeries::new(points, colour.stroke_width(1)))
            .map_err(|e| fail(e.to_string()))?;
        if i < 3 {
            series
                .label(format!("simulated run {}", trace.run))
                .legend(move |(x, y)| PathElement::new([(x, y), (x + 20, y)], colour));
        }
    }

    if let Some(env) = envelope {
        chart
            .draw_series(LineSeries::new(
                [(0.0, env.initial_spread_s), (env.asymptotic_s, tolerance_s)],
                BLACK.stroke_width(2),
            ))
            .map_err(|e| fail(e.to_string()))?
            .label("predicted, slowest mode")
            .legend(|(x, y)| PathElement::new([(x, y), (x + 20, y)], BLACK.stroke_width(2)));
        if let Some(bound) = env.bound_s {
            chart
                .draw_series(DashedLineSeries::new(
                    [(0.0, env.initial_spread_s), (bound, tolerance_s)],
                    8,
                    6,
                    BLACK.stroke_width(2),
                ))
                .map_err(|e| fail(e.to_string()))?
                .label("predicted, worst-case bound")
                .legend(|(x, y)| PathElement::new([(x, y), (x + 8, y)], BLACK.stroke_width(2)));
        }
    }
    chart
        .configure_series_labels()
        .position(SeriesLabelPosition::UpperRight)
        .background_style(WHITE.mix(0.85))
        .border_style(BLACK)
        .draw()
        .map_err(|e| fail(e.to_string()))?;
    root.present().map_err(|e| fail(e.to_string()))?;
    Ok(())
}

/// Number of bins of the lock-time histogram.
pub const HISTOGRAM_BINS: usize = 24;

/// Draw the histogram of lock times with the budget marked; runs that never locked are
/// counted in the caption.
///
/// # Errors
/// A [`PlotError`] when the file cannot be written.
pub fn lock_histogram(
    path: &Path,
    title: &str,
    lock_times_s: &[f64],
    never_locked: usize,
    budget_s: f64,
) -> Result<(), PlotError> {
    let fail = failed(path);
    let top = lock_times_s
        .iter()
        .copied()
        .filter(|v| v.is_finite())
        .fold(budget_s, f64::max)
        * 1.08;
    let width = top / HISTOGRAM_BINS as f64;
    let mut counts = [0u32; HISTOGRAM_BINS];
    for &t in lock_times_s.iter().filter(|v| v.is_finite() && **v >= 0.0) {
        let bin = ((t / width) as usize).min(HISTOGRAM_BINS - 1);
        if let Some(c) = counts.get_mut(bin) {
            *c += 1;
        }
    }
    let tallest = counts.iter().copied().max().unwrap_or(0).max(1);

    let root = SVGBackend::new(path, PLOT_SIZE).into_drawing_area();
    root.fill(&WHITE).map_err(|e| fail(e.to_string()))?;
    let caption = if never_locked > 0 {
        format!("{title} ({never_locked} runs never locked)")
    } else {
        title.to_owned()
    };
    let mut chart = ChartBuilder::on(&root)
        .caption(caption, ("sans-serif", 20))
        .margin(16)
        .x_label_area_size(44)
        .y_label_area_size(60)
        .build_cartesian_2d(0.0..top, 0u32..tallest + tallest / 5 + 1)
        .map_err(|e| fail(e.to_string()))?;
    chart
        .configure_mesh()
        .x_desc("lock time since power-up, s")
        .y_desc("runs")
        .draw()
        .map_err(|e| fail(e.to_string()))?;
    chart
        .draw_series(
            counts
                .iter()
                .enumerate()
                .filter(|(_, c)| **c > 0)
                .map(|(i, c)| {
                    let x0 = i as f64 * width;
                    Rectangle::new(
                        [(x0, 0), (x0 + width * 0.94, *c)],
                        RGBColor(58, 96, 130).filled(),
                    )
                }),
        )
        .map_err(|e| fail(e.to_string()))?
        .label(format!(
            "simulated runs that locked ({})",
            lock_times_s.len()
        ))
        .legend(|(x, y)| {
            Rectangle::new(
                [(x, y - 5), (x + 20, y + 5)],
                RGBColor(58, 96, 130).filled(),
            )
        });
    chart
        .draw_series(LineSeries::new(
            [(budget_s, 0), (budget_s, tallest + tallest / 5 + 1)],
            RED.stroke_width(2),
        ))
        .map_err(|e| fail(e.to_string()))?
        .label(format!("lock-time budget ({})", seconds(budget_s)))
        .legend(|(x, y)| PathElement::new([(x, y), (x + 20, y)], RED.stroke_width(2)));
    chart
        .configure_series_labels()
        .position(SeriesLabelPosition::UpperLeft)
        .background_style(WHITE.mix(0.85))
        .border_style(BLACK)
        .draw()
        .map_err(|e| fail(e.to_string()))?;
    root.present().map_err(|e| fail(e.to_string()))?;
    Ok(())
}

/// Draw the slowest mode's shape: its value at each node, scaled to a largest magnitude
/// of 1.
///
/// # Errors
/// A [`PlotError`] when the file cannot be written.
pub fn mode_shape(path: &Path, title: &str, shape: &[f64]) -> Result<(), PlotError> {
    let fail = failed(path);
    let last = shape.len().saturating_sub(1).max(1) as f64;
    let root = SVGBackend::new(path, PLOT_SIZE).into_drawing_area();
    root.fill(&WHITE).map_err(|e| fail(e.to_string()))?;
    let mut chart = ChartBuilder::on(&root)
        .caption(title, ("sans-serif", 20))
        .margin(16)
        .x_label_area_size(44)
        .y_label_area_size(60)
        .build_cartesian_2d(-0.5..last + 0.5, -1.15..1.15)
        .map_err(|e| fail(e.to_string()))?;
    chart
        .configure_mesh()
        .x_desc("node")
        .y_desc("slowest mode (largest magnitude 1)")
        .draw()
        .map_err(|e| fail(e.to_string()))?;
    chart
        .draw_series(LineSeries::new(
            [(-0.5, 0.0), (last + 0.5, 0.0)],
            BLACK.mix(0.4),
        ))
        .map_err(|e| fail(e.to_string()))?;
    let points: Vec<(f64, f64)> = shape
        .iter()
        .enumerate()
        .map(|(i, v)| (i as f64, *v))
        .collect();
    chart
        .draw_series(LineSeries::new(
            points.iter().copied(),
            BLUE.stroke_width(2),
        ))
        .map_err(|e| fail(e.to_string()))?;
    chart
        .draw_series(points.iter().map(|p| Circle::new(*p, 3, BLUE.filled())))
        .map_err(|e| fail(e.to_string()))?;
    root.present().map_err(|e| fail(e.to_string()))?;
    Ok(())
}
