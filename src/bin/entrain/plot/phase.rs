//! The phase-error plot: whole sample runs against the forecast's envelope, the bound,
//! the noise floor, the tolerance and the budget.

use super::canvas::{self, Anchor, Area, Entry, Scale, Stroke, Svg, Swatch, duration};
use super::palette::{BOUND, BUDGET, INK, NOISE_FLOOR, PREDICTION, RUNS, TOLERANCE};
use super::{PLOT_SIZE, PlotError, write};
use std::path::Path;

/// One simulated run's largest pairwise phase difference over the whole run.
#[derive(Clone, Debug, PartialEq)]
pub struct RunTrace {
    /// Run number (as in the Monte Carlo).
    pub run: u64,
    /// Time since power-up of sample `k` is `k × step_s`.
    pub step_s: f64,
    /// Largest pairwise wrapped phase difference per sample, seconds of phase.
    pub error_s: Vec<f64>,
    /// First entry into the tolerance band, seconds (`None`: never inside).
    pub first_entry_s: Option<f64>,
    /// Settling instant (after the last exit), seconds (`None`: never settled).
    pub settle_s: Option<f64>,
}

impl RunTrace {
    /// The error at time `t` (the sample at or before it).
    fn at(&self, t: f64) -> Option<f64> {
        let k = (t / self.step_s).round() as usize;
        self.error_s
            .get(k.min(self.error_s.len().saturating_sub(1)))
            .copied()
    }
}

/// The forecast's error over time: pointwise p50 and p90 over its sampled runs.
#[derive(Clone, Debug, PartialEq)]
pub struct Envelope {
    /// Seconds between points (point `k` is at `k × step_s`).
    pub step_s: f64,
    /// Median, seconds of phase.
    pub p50_s: Vec<f64>,
    /// 90th percentile, seconds of phase.
    pub p90_s: Vec<f64>,
    /// Sampled runs of the forecast.
    pub samples: usize,
}

/// Everything the phase-error plot shows.
#[derive(Clone, Debug, PartialEq)]
pub struct PhaseErrorPlot {
    /// Title.
    pub title: String,
    /// The runs drawn (whole, to the horizon).
    pub runs: Vec<RunTrace>,
    /// Runs in the Monte Carlo.
    pub runs_total: usize,
    /// The forecast's envelope, when the forecast ran.
    pub envelope: Option<Envelope>,
    /// Worst-case settling bound, seconds.
    pub bound_s: Option<f64>,
    /// Predicted noise floor (p50, p99), seconds of phase.
    pub noise_floor_s: Option<(f64, f64)>,
    /// Initial spread, seconds of phase.
    pub initial_spread_s: f64,
    /// Lock tolerance, seconds of phase.
    pub tolerance_s: f64,
    /// Lock-time budget, seconds.
    pub budget_s: f64,
}

/// Keep, per pixel column, the lowest and highest point in the order they occur (min/max
/// decimation, common practice): the drawn line keeps every swing and the file stays
/// small however long the run.
pub(super) fn decimate(points: impl Iterator<Item = (f64, f64)>) -> Vec<(f64, f64)> {
    // Per column: (column, (index, point) of the largest y, (index, point) of the
    // smallest y).
    type Column = (i64, (usize, (f64, f64)), (usize, (f64, f64)));
    fn flush(out: &mut Vec<(f64, f64)>, (_, big, small): Column) {
        if big.0 == small.0 {
            out.push(big.1);
        } else if big.0 < small.0 {
            out.extend([big.1, small.1]);
        } else {
            out.extend([small.1, big.1]);
        }
    }
    let mut out = Vec::new();
    let mut column: Option<Column> = None;
    for (i, p) in points.enumerate() {
        let col = p.0.floor() as i64;
        column = match column {
            Some(mut c) if c.0 == col => {
                if p.1 > c.1.1.1 {
                    c.1 = (i, p);
                }
                if p.1 < c.2.1.1 {
                    c.2 = (i, p);
                }
                Some(c)
            }
            other => {
                if let Some(c) = other {
                    flush(&mut out, c);
                }
                Some((col, (i, p), (i, p)))
            }
        };
    }
    if let Some(c) = column {
        flush(&mut out, c);
    }
    out
}

/// Draw the phase-error plot to `path`.
///
/// # Errors
/// A [`PlotError`] when the file cannot be written.
pub fn phase_error(path: &Path, p: &PhaseErrorPlot) -> Result<(), PlotError> {
    let (w, h) = PLOT_SIZE;
    let mut svg = Svg::new(w, h, &p.title);
    let end_s = p
        .runs
        .iter()
        .map(|t| t.step_s * t.error_s.len().saturating_sub(1) as f64)
        .fold(p.budget_s * 1.05, f64::max);
    let horizon_s = p
        .runs
        .iter()
        .map(|t| t.step_s * t.error_s.len().saturating_sub(1) as f64)
        .fold(0.0, f64::max);

    // Vertical range: from below the lowest of the noise floor, the tolerance and the
    // runs' 1st percentile to above the largest error.
    let mut positive: Vec<f64> = p
        .runs
        .iter()
        .flat_map(|t| t.error_s.iter().copied())
        .filter(|v| v.is_finite() && *v > 0.0)
        .collect();
    positive.sort_by(f64::total_cmp);
    let low_run = positive
        .get(positive.len() / 100)
        .copied()
        .unwrap_or(p.tolerance_s);
    let high_run = positive.last().copied().unwrap_or(p.initial_spread_s);
    let mut lo = p.tolerance_s.min(low_run);
    if let Some((f50, _)) = p.noise_floor_s.filter(|f| f.0 > 0.0) {
        lo = lo.min(f50);
    }
    let hi = high_run.max(p.initial_spread_s);
    let (y_lo, y_hi) = ((lo / 2.5).max(hi * 1e-7), hi * 1.8);

    // Header and legend first: the legend's height sets the plot area's top.
    let facts = format!(
        "{} of {} simulated runs drawn whole, to the {} horizon{}",
        p.runs.len(),
        p.runs_total,
        duration(horizon_s),
        p.envelope.as_ref().map_or_else(
            || "; no forecast ran, so no predicted envelope".to_owned(),
            |e| format!(
                "; prediction from {} sampled runs of the forecast model",
                e.samples
            )
        )
    );
    canvas::heading(&mut svg, &p.title, &facts);
    let band = |c, o| Swatch::Band(c, o);
    let mut entries = vec![Entry {
        key: "runs",
        swatch: Swatch::Line(Stroke::solid(RUNS, 1.5)),
        text: format!("simulated runs ({} drawn)", p.runs.len()),
    }];
    entries.push(Entry {
        key: "first-entry",
        swatch: Swatch::Dot(RUNS, false),
        text: format!(
            "first entry into tolerance ({} of {})",
            p.runs.iter().filter(|t| t.first_entry_s.is_some()).count(),
            p.runs.len()
        ),
    });
    entries.push(Entry {
        key: "settled",
        swatch: Swatch::Diamond(INK),
        text: format!(
            "settled, after the last exit ({} of {})",
            p.runs.iter().filter(|t| t.settle_s.is_some()).count(),
            p.runs.len()
        ),
    });
    if p.envelope.is_some() {
        entries.push(Entry {
            key: "prediction-p50",
            swatch: Swatch::Line(Stroke::solid(PREDICTION, 2.5)),
            text: "predicted p50".into(),
        });
        entries.push(Entry {
            key: "prediction-p90",
            swatch: Swatch::Line(Stroke::solid(PREDICTION, 2.0).dashed("7 4")),
            text: "predicted p90".into(),
        });
    }
    if let Some(b) = p.bound_s {
        entries.push(Entry {
            key: "bound",
            swatch: Swatch::Line(Stroke::solid(BOUND, 2.0).dashed("9 3 2 3")),
            text: format!("worst-case settling bound ({})", duration(b)),
        });
    }
    if let Some((a, b)) = p.noise_floor_s {
        entries.push(Entry {
            key: "noise-floor",
            swatch: band(NOISE_FLOOR, 0.3),
            text: format!(
                "predicted noise floor p50–p99 ({}–{})",
                duration(a),
                duration(b)
            ),
        });
    }
    entries.push(Entry {
        key: "tolerance",
        swatch: Swatch::Line(Stroke::solid(TOLERANCE, 1.3).dashed("4 3")),
        text: format!("lock tolerance ({})", duration(p.tolerance_s)),
    });
    entries.push(Entry {
        key: "budget",
        swatch: Swatch::Line(Stroke::solid(BUDGET, 2.5)),
        text: format!("lock-time budget ({})", duration(p.budget_s)),
    });
    let below = canvas::legend(&mut svg, (24.0, 78.0), w - 24.0, &entries);
    let area = Area {
        left: 100.0,
        top: below + 6.0,
        right: w - 28.0,
        bottom: h - 62.0,
    };
    let x = Scale::linear(0.0, end_s, area.left, area.right);
    let y = Scale::log(y_lo, y_hi, area.bottom, area.top);
    let x_step = canvas::nice_step(end_s / 8.0);
    let x_ticks: canvas::Ticks = x
        .ticks(8)
        .into_iter()
        .map(|v| (v, canvas::tick_label(v, x_step)))
        .collect();
    let y_ticks: canvas::Ticks = y.ticks(6).into_iter().map(|v| (v, duration(v))).collect();
    canvas::axes(
        &mut svg,
        area,
        (&x, &x_ticks, "time since power-up, s"),
        (&y, &y_ticks, "largest pairwise phase difference"),
    );

    // Back to front: bands, marked lines, runs, envelope lines, markers.
    if let Some((a, b)) = p.noise_floor_s {
        svg.group(
            "series band",
            &[
                ("data-key", "noise-floor".into()),
                ("data-lo", format!("{a}")),
                ("data-hi", format!("{b}")),
            ],
        );
        let (ya, yb) = (y.at(a.max(y_lo)), y.at(b.max(y_lo)));
        svg.rect(
            (area.left, yb.min(ya - 2.0)),
            (area.right - area.left, (ya - yb).max(2.0)),
            Some((NOISE_FLOOR, 0.22)),
            None,
        );
        svg.end();
    }
    // The envelope in pixels: p50 and p90 point by point.
    let envelope_px = p.envelope.as_ref().map(|e| {
        let pts = |v: &[f64]| -> Vec<(f64, f64)> {
            v.iter()
                .enumerate()
                .map(|(k, s)| (x.at(k as f64 * e.step_s), y.at(s.max(y_lo))))
                .collect()
        };
        (pts(&e.p50_s), pts(&e.p90_s))
    });
    if let Some((p50, p90)) = &envelope_px {
        let mut band_pts = p90.clone();
        band_pts.extend(p50.iter().rev());
        svg.group("envelope-band", &[]);
        svg.polygon(&band_pts, PREDICTION, 0.16);
        svg.end();
        // The lines themselves are drawn over the runs, below.
    }
    let hline = |svg: &mut Svg, key: &str, v: f64, s: Stroke| {
        svg.group(
            "series mark",
            &[("data-key", key.into()), ("data-value", format!("{v}"))],
        );
        svg.line((area.left, y.at(v)), (area.right, y.at(v)), &s);
        svg.end();
    };
    // Labels of the vertical lines on two rows, so that close lines stay readable.
    let vline = |svg: &mut Svg, key: &str, v: f64, s: Stroke, label: &str, row: f64| {
        svg.group(
            "series mark",
            &[("data-key", key.into()), ("data-value", format!("{v}"))],
        );
        let px = x.at(v);
        svg.line((px, area.top), (px, area.bottom), &s);
        svg.text(
            (px + 4.0, area.top + 12.0 + 14.0 * row),
            label,
            11.0,
            Anchor::Start,
            s.colour,
            false,
        );
        svg.end();
    };
    hline(
        &mut svg,
        "tolerance",
        p.tolerance_s,
        Stroke::solid(TOLERANCE, 1.3).dashed("4 3"),
    );
    if let Some(b) = p.bound_s {
        vline(
            &mut svg,
            "bound",
            b,
            Stroke::solid(BOUND, 2.0).dashed("9 3 2 3"),
            "bound",
            1.0,
        );
    }
    vline(
        &mut svg,
        "budget",
        p.budget_s,
        Stroke::solid(BUDGET, 2.5),
        "budget",
        0.0,
    );

    svg.group(
        "series",
        &[
            ("data-key", "runs".into()),
            ("data-count", p.runs.len().to_string()),
        ],
    );
    let run_stroke = Stroke::solid(RUNS, 1.0).faded(0.7);
    for t in &p.runs {
        let end = t.step_s * t.error_s.len().saturating_sub(1) as f64;
        svg.group(
            "run",
            &[
                ("data-run", t.run.to_string()),
                ("data-end-s", format!("{end}")),
            ],
        );
        let pts = decimate(
            t.error_s
                .iter()
                .enumerate()
                .map(|(k, v)| (x.at(k as f64 * t.step_s), y.at(v.max(y_lo)))),
        );
        svg.polyline(&pts, &run_stroke);
        svg.end();
    }
    svg.end();

    if let Some((p50, p90)) = &envelope_px {
        for (key, pts, s) in [
            (
                "prediction-p90",
                p90,
                Stroke::solid(PREDICTION, 2.0).dashed("7 4"),
            ),
            ("prediction-p50", p50, Stroke::solid(PREDICTION, 2.5)),
        ] {
            svg.group("series", &[("data-key", key.into())]);
            svg.polyline(pts, &s);
            svg.end();
        }
    }

    for (key, settled) in [("first-entry", false), ("settled", true)] {
        svg.group("series", &[("data-key", key.into())]);
        for t in &p.runs {
            let when = if settled { t.settle_s } else { t.first_entry_s };
            let Some((at, v)) = when.and_then(|a| t.at(a).map(|v| (a, v))) else {
                continue;
            };
            svg.group(
                "marker",
                &[
                    ("data-run", t.run.to_string()),
                    ("data-value", format!("{at}")),
                ],
            );
            let c = (x.at(at), y.at(v.max(y_lo)));
            if settled {
                canvas::diamond(&mut svg, c, 5.5, INK);
            } else {
                // A ring wider than the settled diamond: visible when both fall together.
                svg.circle(c, 7.0, None, Some(&Stroke::solid(RUNS, 1.6)));
            }
            svg.end();
        }
        svg.end();
    }
    svg.text(
        (area.right, area.bottom - 6.0),
        "errors below the axis are drawn on it",
        10.5,
        Anchor::End,
        super::palette::MUTED,
        false,
    );
    write(path, svg.finish())
}

#[cfg(test)]
mod tests {
    use super::decimate;

    #[test]
    fn decimation_keeps_each_columns_extremes_in_order() {
        let pts = [(0.1, 5.0), (0.5, 1.0), (0.9, 9.0), (1.2, 3.0), (1.7, 3.0)];
        let out = decimate(pts.into_iter());
        // Column 0: its smallest y (1.0) came before its largest (9.0); column 1 is
        // flat, so one point stands for it.
        assert_eq!(out, vec![(0.5, 1.0), (0.9, 9.0), (1.2, 3.0)]);
    }
}
