//! The field plot: the phase error reconstructed from a network's logs, with the
//! tolerance, the budget, the predicted noise floor, the settling instant, and the decay
//! fitted over the transient beside the predicted decay from the same start.

use super::canvas::{self, Anchor, Area, Entry, Scale, Stroke, Svg, Swatch, duration};
use super::palette::{BUDGET, INK, NOISE_FLOOR, PREDICTION, RUNS, TOLERANCE};
use super::{PLOT_SIZE, PlotError, write};
use std::path::Path;

/// The fitted and predicted decay lines over the fit's window.
#[derive(Clone, Copy, Debug, PartialEq)]
pub struct DecayLines {
    /// Window start, seconds.
    pub from_s: f64,
    /// Window end, seconds.
    pub to_s: f64,
    /// The fitted line's error at the start, seconds of phase (both lines start there).
    pub start_error_s: f64,
    /// Fitted rate, ln of the factor per second (negative when decaying).
    pub fitted_per_s: f64,
    /// Predicted rate, ln of the factor per second.
    pub predicted_per_s: f64,
}

/// Everything the field plot shows.
#[derive(Clone, Debug, PartialEq)]
pub struct FieldPlot {
    /// Title.
    pub title: String,
    /// (seconds since power-up, phase error in seconds) per reconstructed round.
    pub error_s: Vec<(f64, f64)>,
    /// Observed settling instant, seconds.
    pub settle_s: Option<f64>,
    /// Lock tolerance, seconds of phase.
    pub tolerance_s: f64,
    /// Lock-time budget, seconds.
    pub budget_s: f64,
    /// Predicted noise floor (p50, p99), seconds of phase.
    pub predicted_floor_s: Option<(f64, f64)>,
    /// The decay lines.
    pub decay: Option<DecayLines>,
}

/// Draw the field plot to `path`.
///
/// # Errors
/// A [`PlotError`] when the file cannot be written.
pub fn field(path: &Path, p: &FieldPlot) -> Result<(), PlotError> {
    let (w, h) = PLOT_SIZE;
    let mut svg = Svg::new(w, h, &p.title);
    let end_s = p.error_s.last().map_or(0.0, |x| x.0).max(p.budget_s * 1.05);
    let mut positive: Vec<f64> = p
        .error_s
        .iter()
        .map(|x| x.1)
        .filter(|v| v.is_finite() && *v > 0.0)
        .collect();
    positive.sort_by(f64::total_cmp);
    let mut lo = p.tolerance_s.min(
        positive
            .get(positive.len() / 100)
            .copied()
            .unwrap_or(p.tolerance_s),
    );
    if let Some((f50, _)) = p.predicted_floor_s.filter(|f| f.0 > 0.0) {
        lo = lo.min(f50);
    }
    let hi = positive
        .last()
        .copied()
        .unwrap_or(p.tolerance_s)
        .max(p.tolerance_s);
    let (y_lo, y_hi) = ((lo / 2.5).max(hi * 1e-7), hi * 1.8);

    let facts = format!(
        "{} rounds reconstructed from the logs{}",
        p.error_s.len(),
        p.settle_s.map_or_else(
            || "; not settled".to_owned(),
            |s| format!("; settled at {}", duration(s))
        )
    );
    canvas::heading(&mut svg, &p.title, &facts);
    let mut entries = vec![Entry {
        key: "observed",
        swatch: Swatch::Line(Stroke::solid(RUNS, 1.5)),
        text: "phase error from the logs".into(),
    }];
    if p.settle_s.is_some() {
        entries.push(Entry {
            key: "settled",
            swatch: Swatch::Diamond(INK),
            text: "settled, after the last exit".into(),
        });
    }
    if p.decay.is_some() {
        entries.push(Entry {
            key: "decay-fitted",
            swatch: Swatch::Line(Stroke::solid(INK, 2.0)),
            text: "decay fitted over the transient".into(),
        });
        entries.push(Entry {
            key: "decay-predicted",
            swatch: Swatch::Line(Stroke::solid(PREDICTION, 2.5).dashed("7 4")),
            text: "predicted decay from the same start".into(),
        });
    }
    if let Some((a, b)) = p.predicted_floor_s {
        entries.push(Entry {
            key: "noise-floor",
            swatch: Swatch::Band(NOISE_FLOOR, 0.3),
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
    let x = Scale::linear(0.0, end_s.max(1e-9), area.left, area.right);
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
    if let Some((a, b)) = p.predicted_floor_s {
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
    let tol = Stroke::solid(TOLERANCE, 1.3).dashed("4 3");
    svg.group(
        "series mark",
        &[
            ("data-key", "tolerance".into()),
            ("data-value", format!("{}", p.tolerance_s)),
        ],
    );
    svg.line(
        (area.left, y.at(p.tolerance_s)),
        (area.right, y.at(p.tolerance_s)),
        &tol,
    );
    svg.end();
    let budget = Stroke::solid(BUDGET, 2.5);
    svg.group(
        "series mark",
        &[
            ("data-key", "budget".into()),
            ("data-value", format!("{}", p.budget_s)),
        ],
    );
    let bx = x.at(p.budget_s);
    svg.line((bx, area.top), (bx, area.bottom), &budget);
    svg.text(
        (bx + 4.0, area.top + 12.0),
        "budget",
        11.0,
        Anchor::Start,
        BUDGET,
        false,
    );
    svg.end();

    svg.group(
        "series",
        &[
            ("data-key", "observed".into()),
            ("data-count", p.error_s.len().to_string()),
        ],
    );
    let pts = super::phase::decimate(p.error_s.iter().map(|&(t, e)| (x.at(t), y.at(e.max(y_lo)))));
    svg.polyline(&pts, &Stroke::solid(RUNS, 1.2).faded(0.8));
    svg.end();

    if let Some(d) = p.decay {
        for (key, rate, s) in [
            ("decay-fitted", d.fitted_per_s, Stroke::solid(INK, 2.0)),
            (
                "decay-predicted",
                d.predicted_per_s,
                Stroke::solid(PREDICTION, 2.5).dashed("7 4"),
            ),
        ] {
            svg.group(
                "series",
                &[("data-key", key.into()), ("data-rate", format!("{rate}"))],
            );
            let line: Vec<(f64, f64)> = (0..=40)
                .map(|k| {
                    let t = d.from_s + (d.to_s - d.from_s) * f64::from(k) / 40.0;
                    let e = d.start_error_s * (rate * (t - d.from_s)).exp();
                    (x.at(t), y.at(e.clamp(y_lo, y_hi)))
                })
                .collect();
            svg.polyline(&line, &s);
            svg.end();
        }
    }
    if let Some(at) = p.settle_s {
        let v = p
            .error_s
            .iter()
            .find(|x| x.0 >= at)
            .map_or(p.tolerance_s, |x| x.1);
        svg.group(
            "series",
            &[
                ("data-key", "settled".into()),
                ("data-value", format!("{at}")),
            ],
        );
        canvas::diamond(&mut svg, (x.at(at), y.at(v.max(y_lo))), 5.5, INK);
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
