//! The lock-time histogram: bins chosen from the data, the prediction and the budget
//! marked, and the runs that never settled counted in a bar of their own.

use super::canvas::{self, Anchor, Area, Entry, Scale, Stroke, Svg, Swatch, duration};
use super::palette::{BOUND, BUDGET, INK, NEVER, PREDICTION, RUNS};
use super::{PLOT_SIZE, PlotError, write};
use std::path::Path;

/// Most bins drawn; a wider bin is used beyond (own choice: a bar under 12 pixels wide
/// no longer reads as a bar on this plot's width).
pub const MAX_BINS: usize = 60;

/// How the bin width was chosen.
#[derive(Clone, Copy, Debug, PartialEq, Eq)]
pub enum BinRule {
    /// `2·IQR·n^(−1/3)` (Freedman & Diaconis, Z. Wahrscheinlichkeitstheorie verw.
    /// Gebiete 57, 1981).
    FreedmanDiaconis,
    /// The data's quartiles coincide (IQR = 0) but not all values: `⌈log₂ n⌉ + 1` bins
    /// over the range (Sturges, J. Am. Stat. Assoc. 21, 1926).
    Sturges,
    /// One value, or all values equal: one bin a tenth of the value wide (1 s at 0).
    Single,
    /// No values.
    Empty,
}

impl BinRule {
    /// How the plot names the rule.
    pub fn describe(self) -> &'static str {
        match self {
            BinRule::FreedmanDiaconis => "Freedman–Diaconis bins",
            BinRule::Sturges => "Sturges bins (quartiles coincide)",
            BinRule::Single => "one bin (all times equal)",
            BinRule::Empty => "no run settled",
        }
    }
}

/// Histogram bins: bin `i` spans `start + i·width ..< start + (i+1)·width` (the last
/// one closed).
#[derive(Clone, Debug, PartialEq)]
pub struct Bins {
    /// Left edge of the first bin.
    pub start: f64,
    /// Bin width.
    pub width: f64,
    /// Values per bin.
    pub counts: Vec<usize>,
    /// How the width was chosen.
    pub rule: BinRule,
}

/// Quantile `q` of ascending `sorted` by linear interpolation between order statistics
/// (definition 7 of Hyndman & Fan, Am. Stat. 50, 1996, the common default).
pub fn quantile(sorted: &[f64], q: f64) -> f64 {
    let Some(last) = sorted.len().checked_sub(1) else {
        return f64::NAN;
    };
    let h = last as f64 * q;
    let k = h.floor() as usize;
    let a = sorted.get(k).copied().unwrap_or(f64::NAN);
    let b = sorted.get((k + 1).min(last)).copied().unwrap_or(a);
    a + (h - k as f64) * (b - a)
}

/// Bin the finite `values` by the Freedman–Diaconis rule, with the fallbacks of
/// [`BinRule`] and at most [`MAX_BINS`] bins.
pub fn bins(values: &[f64]) -> Bins {
    let mut v: Vec<f64> = values.iter().copied().filter(|x| x.is_finite()).collect();
    v.sort_by(f64::total_cmp);
    let (Some(&min), Some(&max)) = (v.first(), v.last()) else {
        return Bins {
            start: 0.0,
            width: 1.0,
            counts: Vec::new(),
            rule: BinRule::Empty,
        };
    };
    let n = v.len();
    let range = max - min;
    if range <= 0.0 {
        let width = if min == 0.0 { 1.0 } else { min.abs() / 10.0 };
        return Bins {
            start: min - width / 2.0,
            width,
            counts: vec![n],
            rule: BinRule::Single,
        };
    }
    let iqr = quantile(&v, 0.75) - quantile(&v, 0.25);
    let (rule, mut width) = if iqr > 0.0 {
        (
            BinRule::FreedmanDiaconis,
            2.0 * iqr * (n as f64).powf(-1.0 / 3.0),
        )
    } else {
        let k = (n as f64).log2().ceil() + 1.0;
        (BinRule::Sturges, range / k)
    };
    if range / width > MAX_BINS as f64 {
        width = range / MAX_BINS as f64;
    }
    // The ratio is a whole number up to rounding for Sturges; do not let rounding add a bin.
    let k = ((range / width * (1.0 - 1e-12)).ceil() as usize).max(1);
    let mut counts = vec![0; k];
    for x in &v {
        let i = (((x - min) / width).floor() as usize).min(k - 1);
        if let Some(c) = counts.get_mut(i) {
            *c += 1;
        }
    }
    Bins {
        start: min,
        width,
        counts,
        rule,
    }
}

/// Everything the lock-time histogram shows.
#[derive(Clone, Debug, PartialEq)]
pub struct LockHistogram {
    /// Title.
    pub title: String,
    /// Settling time of every run that settled, seconds.
    pub settle_times_s: Vec<f64>,
    /// Runs in the Monte Carlo.
    pub runs: usize,
    /// Predicted settling p50 and p90, seconds (forecast).
    pub p50_s: Option<f64>,
    /// See [`Self::p50_s`].
    pub p90_s: Option<f64>,
    /// Worst-case settling bound, seconds.
    pub bound_s: Option<f64>,
    /// Lock-time budget, seconds.
    pub budget_s: f64,
}

/// Draw the lock-time histogram to `path`.
///
/// # Errors
/// A [`PlotError`] when the file cannot be written.
pub fn lock_histogram(path: &Path, p: &LockHistogram) -> Result<(), PlotError> {
    let (w, h) = PLOT_SIZE;
    let mut svg = Svg::new(w, h, &p.title);
    let b = bins(&p.settle_times_s);
    let settled = b.counts.iter().sum::<usize>();
    let never = p.runs.saturating_sub(settled);
    let data_end = b.start + b.width * b.counts.len() as f64;
    let base = [Some(data_end), p.p50_s, p.p90_s]
        .into_iter()
        .flatten()
        .filter(|v| v.is_finite())
        .fold(0.0, f64::max);
    // Nothing settled and nothing predicted: the axis is set by the budget and bound.
    let base = if base > 0.0 {
        base
    } else {
        [Some(p.budget_s), p.bound_s, Some(1.0)]
            .into_iter()
            .flatten()
            .filter(|v| v.is_finite())
            .fold(0.0, f64::max)
    };
    // The budget and the bound widen the axis unless that would squeeze the bars
    // below a third of it; then they are shown as off-scale arrows at the right.
    let x_max = [Some(base), Some(p.budget_s), p.bound_s]
        .into_iter()
        .flatten()
        .filter(|v| v.is_finite() && *v <= 3.0 * base)
        .fold(base, f64::max)
        * 1.06;
    let x_min = b.start.min(0.0);

    let bins_said = match b.rule {
        BinRule::Empty => b.rule.describe().to_owned(),
        rule => format!("{}, width {}", rule.describe(), duration(b.width)),
    };
    let predicted_said = if p.p50_s.is_none() && p.p90_s.is_none() {
        "; no predicted p50 or p90 (too few forecast runs settle, or no forecast)"
    } else {
        ""
    };
    canvas::heading(
        &mut svg,
        &p.title,
        &format!(
            "{settled} of {} runs settled, {never} never settled; {bins_said}{predicted_said}",
            p.runs
        ),
    );
    let mut entries = vec![Entry {
        key: "settled-runs",
        swatch: Swatch::Band(RUNS, 0.85),
        text: format!("settling time of runs that settled ({settled})"),
    }];
    entries.push(Entry {
        key: "never-settled",
        swatch: Swatch::Band(NEVER, 0.85),
        text: format!("never settled ({never})"),
    });
    let marks: Vec<(&'static str, f64, Stroke, String)> = [
        p.p50_s.map(|v| {
            (
                "prediction-p50",
                v,
                Stroke::solid(PREDICTION, 2.5),
                format!("predicted p50 ({})", duration(v)),
            )
        }),
        p.p90_s.map(|v| {
            (
                "prediction-p90",
                v,
                Stroke::solid(PREDICTION, 2.0).dashed("7 4"),
                format!("predicted p90 ({})", duration(v)),
            )
        }),
        p.bound_s.map(|v| {
            (
                "bound",
                v,
                Stroke::solid(BOUND, 2.0).dashed("9 3 2 3"),
                format!("worst-case bound ({})", duration(v)),
            )
        }),
        Some((
            "budget",
            p.budget_s,
            Stroke::solid(BUDGET, 2.5),
            format!("lock-time budget ({})", duration(p.budget_s)),
        )),
    ]
    .into_iter()
    .flatten()
    .collect();
    for (key, _, s, text) in &marks {
        entries.push(Entry {
            key,
            swatch: Swatch::Line(*s),
            text: text.clone(),
        });
    }
    let below = canvas::legend(&mut svg, (24.0, 78.0), w - 24.0, &entries);
    let area = Area {
        left: 100.0,
        top: below + 14.0,
        right: w - 170.0,
        bottom: h - 62.0,
    };
    let tallest = b
        .counts
        .iter()
        .copied()
        .chain([never])
        .max()
        .unwrap_or(0)
        .max(1);
    let y_step = canvas::nice_step(tallest as f64 / 5.0).max(1.0).round();
    let y_top = ((tallest as f64 * 1.12) / y_step).ceil() * y_step;
    let x = Scale::linear(x_min, x_max, area.left, area.right);
    let y = Scale::linear(0.0, y_top, area.bottom, area.top);
    let x_step = canvas::nice_step((x_max - x_min) / 8.0);
    let x_ticks: canvas::Ticks = x
        .ticks(8)
        .into_iter()
        .map(|v| (v, canvas::tick_label(v, x_step)))
        .collect();
    let y_ticks: canvas::Ticks = (0..=(y_top / y_step) as usize)
        .map(|k| k as f64 * y_step)
        .map(|v| (v, format!("{v:.0}")))
        .collect();
    canvas::axes(
        &mut svg,
        area,
        (&x, &x_ticks, "settling time since power-up, s"),
        (&y, &y_ticks, "runs"),
    );

    svg.group(
        "series",
        &[
            ("data-key", "settled-runs".into()),
            ("data-rule", format!("{:?}", b.rule)),
            ("data-width", format!("{}", b.width)),
        ],
    );
    for (i, c) in b.counts.iter().enumerate() {
        let lo = b.start + i as f64 * b.width;
        let hi = lo + b.width;
        svg.group(
            "bin",
            &[
                ("data-lo", format!("{lo}")),
                ("data-hi", format!("{hi}")),
                ("data-count", c.to_string()),
            ],
        );
        if *c > 0 {
            let (x0, x1) = (x.at(lo), x.at(hi));
            let gap = ((x1 - x0) * 0.08).min(2.0);
            let top = y.at(*c as f64);
            svg.rect(
                (x0 + gap / 2.0, top),
                (x1 - x0 - gap, area.bottom - top),
                Some((RUNS, 0.85)),
                None,
            );
            svg.text(
                ((x0 + x1) / 2.0, top - 4.0),
                &c.to_string(),
                11.0,
                Anchor::Middle,
                INK,
                false,
            );
        }
        svg.end();
    }
    if settled == 0 {
        svg.text(
            (
                (area.left + area.right) / 2.0,
                (area.top + area.bottom) / 2.0,
            ),
            "no run settled within the horizon",
            14.0,
            Anchor::Middle,
            INK,
            false,
        );
    }
    svg.end();

    // The never-settled bar stands apart, right of the time axis, on the same count scale.
    let (nx0, nx1) = (area.right + 50.0, area.right + 110.0);
    svg.group(
        "series",
        &[
            ("data-key", "never-settled".into()),
            ("data-count", never.to_string()),
        ],
    );
    let top = y.at(never as f64);
    svg.rect(
        (nx0, top),
        (nx1 - nx0, area.bottom - top),
        Some((NEVER, 0.85)),
        None,
    );
    svg.line(
        (nx0 - 8.0, area.bottom),
        (nx1 + 8.0, area.bottom),
        &Stroke::solid(INK, 1.2),
    );
    svg.text(
        ((nx0 + nx1) / 2.0, top - 4.0),
        &never.to_string(),
        12.0,
        Anchor::Middle,
        INK,
        true,
    );
    svg.text(
        ((nx0 + nx1) / 2.0, area.bottom + 20.0),
        "never",
        12.0,
        Anchor::Middle,
        INK,
        false,
    );
    svg.text(
        ((nx0 + nx1) / 2.0, area.bottom + 35.0),
        "settled",
        12.0,
        Anchor::Middle,
        INK,
        false,
    );
    svg.end();

    for (key, v, s, _) in &marks {
        if *v <= x_max {
            svg.group(
                "series mark",
                &[("data-key", (*key).into()), ("data-value", format!("{v}"))],
            );
            let px = x.at(*v);
            svg.line((px, area.top), (px, area.bottom), s);
            svg.end();
        } else {
            svg.group(
                "series mark offscale",
                &[("data-key", (*key).into()), ("data-value", format!("{v}"))],
            );
            let rows = marks.iter().position(|m| m.0 == *key).unwrap_or(0) as f64;
            let py = area.top + 14.0 + rows * 16.0;
            svg.line((area.right - 26.0, py - 4.0), (area.right, py - 4.0), s);
            svg.text(
                (area.right - 30.0, py),
                &format!("{} at {} →", key.replace('-', " "), duration(*v)),
                11.0,
                Anchor::End,
                s.colour,
                false,
            );
            svg.end();
        }
    }
    write(path, svg.finish())
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn freedman_diaconis_width_by_hand() {
        // 1..=8: quartiles (definition 7) at h = 1.75 and 5.25 → 2.75 and 6.25, IQR 3.5;
        // width 2·3.5·8^(−1/3) = 3.5; range 7 → 2 bins of 3.5: [1, 4.5) holds 1..=4.
        let v: Vec<f64> = (1..=8).map(f64::from).collect();
        let b = bins(&v);
        assert_eq!(b.rule, BinRule::FreedmanDiaconis);
        assert!((b.width - 3.5).abs() < 1e-12, "{}", b.width);
        assert_eq!(b.counts, vec![4, 4]);
        assert_eq!(b.start, 1.0);
    }

    #[test]
    fn fallbacks_for_coinciding_quartiles_and_one_value() {
        // Quartiles coincide (IQR 0), range 9: Sturges, ⌈log₂ 9⌉ + 1 = 5 bins.
        let v = [1.0, 1.0, 1.0, 1.0, 1.0, 1.0, 1.0, 1.0, 10.0];
        let b = bins(&v);
        assert_eq!(b.rule, BinRule::Sturges);
        assert_eq!(b.counts.len(), 5);
        assert_eq!(b.counts.iter().sum::<usize>(), 9);
        let one = bins(&[4.0]);
        assert_eq!((one.rule, one.counts.clone()), (BinRule::Single, vec![1]));
        assert!(one.start < 4.0 && one.start + one.width > 4.0);
        assert_eq!(bins(&[]).rule, BinRule::Empty);
    }

    #[test]
    fn many_values_are_capped_at_max_bins() {
        // A heavy tail: a narrow IQR over a wide range would ask for far more bins.
        let mut v: Vec<f64> = (0..1000).map(|i| f64::from(i) * 1e-3).collect();
        v.push(1e6);
        let b = bins(&v);
        assert_eq!(b.counts.len(), MAX_BINS);
        assert_eq!(b.counts.iter().sum::<usize>(), 1001);
    }
}
