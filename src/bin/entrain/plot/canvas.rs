//! A small SVG writer of our own: elements carry `class` and `data-*` attributes that
//! say what they mean (series, marks, legend entries, ticks), so a test can read a plot
//! back; scales, ticks, axes and the legend strip are drawn here in the project's style.

use super::palette::{GUIDE, INK, MUTED, Rgb};
use std::fmt::Write;

/// Escape text for XML content and attribute values.
fn escape(s: &str) -> String {
    let mut out = String::with_capacity(s.len());
    for c in s.chars() {
        match c {
            '&' => out.push_str("&amp;"),
            '<' => out.push_str("&lt;"),
            '>' => out.push_str("&gt;"),
            '"' => out.push_str("&quot;"),
            _ => out.push(c),
        }
    }
    out
}

/// A number for a coordinate attribute (one decimal is finer than a pixel).
fn px(v: f64) -> String {
    let r = (v * 10.0).round() / 10.0;
    if r == 0.0 {
        "0".to_owned()
    } else {
        format!("{r}")
    }
}

/// `x,y x,y …` for a `points` attribute.
fn point_list(points: &[(f64, f64)]) -> String {
    let pts: Vec<String> = points
        .iter()
        .map(|(x, y)| format!("{},{}", px(*x), px(*y)))
        .collect();
    pts.join(" ")
}

/// How a line is stroked.
#[derive(Clone, Copy, Debug)]
pub struct Stroke {
    /// Colour.
    pub colour: Rgb,
    /// Width, pixels.
    pub width: f64,
    /// SVG dash pattern, if dashed.
    pub dash: Option<&'static str>,
    /// Opacity, 0..=1.
    pub opacity: f64,
}

impl Stroke {
    /// A solid, opaque stroke.
    pub const fn solid(colour: Rgb, width: f64) -> Stroke {
        Stroke {
            colour,
            width,
            dash: None,
            opacity: 1.0,
        }
    }

    /// The same stroke dashed with `pattern`.
    pub const fn dashed(self, pattern: &'static str) -> Stroke {
        Stroke {
            dash: Some(pattern),
            ..self
        }
    }

    /// The same stroke at `opacity`.
    pub const fn faded(self, opacity: f64) -> Stroke {
        Stroke { opacity, ..self }
    }

    fn attrs(&self) -> String {
        let mut s = format!(
            r#"fill="none" stroke="{}" stroke-width="{}""#,
            self.colour.hex(),
            self.width
        );
        if let Some(d) = self.dash {
            let _ = write!(s, r#" stroke-dasharray="{d}""#);
        }
        if self.opacity < 1.0 {
            let _ = write!(s, r#" stroke-opacity="{}""#, self.opacity);
        }
        s
    }
}

/// Text placement.
#[derive(Clone, Copy, Debug, PartialEq, Eq)]
pub enum Anchor {
    /// Text starts at x.
    Start,
    /// Text is centred on x.
    Middle,
    /// Text ends at x.
    End,
}

impl Anchor {
    fn keyword(self) -> &'static str {
        match self {
            Anchor::Start => "start",
            Anchor::Middle => "middle",
            Anchor::End => "end",
        }
    }
}

/// An SVG document being written.
pub struct Svg {
    out: String,
    open: usize,
}

impl Svg {
    /// A new document of `width × height` pixels on white, titled `title` (the SVG
    /// `<title>` element, which viewers show as the document's name).
    pub fn new(width: f64, height: f64, title: &str) -> Svg {
        let mut out = String::new();
        let _ = write!(
            out,
            r#"<svg xmlns="http://www.w3.org/2000/svg" width="{w}" height="{h}" viewBox="0 0 {w} {h}" font-family="Verdana, 'DejaVu Sans', sans-serif">"#,
            w = px(width),
            h = px(height)
        );
        let _ = write!(out, "\n<title>{}</title>\n", escape(title));
        let _ = writeln!(
            out,
            r##"<rect x="0" y="0" width="{}" height="{}" fill="#ffffff"/>"##,
            px(width),
            px(height)
        );
        Svg { out, open: 0 }
    }

    /// Open a group with `class` and extra attributes (`data-*` mostly).
    pub fn group(&mut self, class: &str, attrs: &[(&str, String)]) {
        let _ = write!(self.out, r#"<g class="{}""#, escape(class));
        for (k, v) in attrs {
            let _ = write!(self.out, r#" {k}="{}""#, escape(v));
        }
        self.out.push_str(">\n");
        self.open += 1;
    }

    /// Close the innermost open group.
    pub fn end(&mut self) {
        if self.open > 0 {
            self.out.push_str("</g>\n");
            self.open -= 1;
        }
    }

    /// A straight line.
    pub fn line(&mut self, a: (f64, f64), b: (f64, f64), stroke: &Stroke) {
        let _ = writeln!(
            self.out,
            r#"<line x1="{}" y1="{}" x2="{}" y2="{}" {}/>"#,
            px(a.0),
            px(a.1),
            px(b.0),
            px(b.1),
            stroke.attrs()
        );
    }

    /// A polyline through `points` (nothing for fewer than 2).
    pub fn polyline(&mut self, points: &[(f64, f64)], stroke: &Stroke) {
        if points.len() < 2 {
            return;
        }
        let _ = writeln!(
            self.out,
            r#"<polyline points="{}" stroke-linejoin="round" {}/>"#,
            point_list(points),
            stroke.attrs()
        );
    }

    /// A filled polygon.
    pub fn polygon(&mut self, points: &[(f64, f64)], fill: Rgb, opacity: f64) {
        if points.len() < 3 {
            return;
        }
        let _ = writeln!(
            self.out,
            r#"<polygon points="{}" fill="{}" fill-opacity="{opacity}" stroke="none"/>"#,
            point_list(points),
            fill.hex()
        );
    }

    /// A rectangle from corner `(x, y)` of size `w × h`, filled and/or stroked.
    pub fn rect(
        &mut self,
        (x, y): (f64, f64),
        (w, h): (f64, f64),
        fill: Option<(Rgb, f64)>,
        stroke: Option<&Stroke>,
    ) {
        let fill = fill.map_or_else(
            || r#"fill="none""#.to_owned(),
            |(c, o)| format!(r#"fill="{}" fill-opacity="{o}""#, c.hex()),
        );
        let stroke = stroke.map_or_else(String::new, |s| {
            s.attrs().replacen(r#"fill="none" "#, "", 1)
        });
        let _ = writeln!(
            self.out,
            r#"<rect x="{}" y="{}" width="{}" height="{}" {fill} {stroke}/>"#,
            px(x),
            px(y),
            px(w.max(0.0)),
            px(h.max(0.0))
        );
    }

    /// A circle, filled and/or stroked.
    pub fn circle(
        &mut self,
        (cx, cy): (f64, f64),
        r: f64,
        fill: Option<Rgb>,
        stroke: Option<&Stroke>,
    ) {
        let fill = fill.map_or_else(|| "none".to_owned(), Rgb::hex);
        let stroke = stroke.map_or_else(String::new, |s| {
            s.attrs().replacen(r#"fill="none" "#, "", 1)
        });
        let _ = writeln!(
            self.out,
            r#"<circle cx="{}" cy="{}" r="{}" fill="{fill}" {stroke}/>"#,
            px(cx),
            px(cy),
            px(r)
        );
    }

    /// Text at `(x, y)` (baseline), `size` pixels, in `colour`, bold if `bold`.
    pub fn text(
        &mut self,
        (x, y): (f64, f64),
        text: &str,
        size: f64,
        anchor: Anchor,
        colour: Rgb,
        bold: bool,
    ) {
        let weight = if bold { r#" font-weight="bold""# } else { "" };
        let _ = writeln!(
            self.out,
            r#"<text x="{}" y="{}" font-size="{size}" text-anchor="{}" fill="{}"{weight}>{}</text>"#,
            px(x),
            px(y),
            anchor.keyword(),
            colour.hex(),
            escape(text)
        );
    }

    /// Text rotated a quarter turn anticlockwise about `(x, y)` (a vertical axis title).
    pub fn vertical_text(&mut self, (x, y): (f64, f64), text: &str, size: f64, colour: Rgb) {
        let _ = writeln!(
            self.out,
            r#"<text x="{}" y="{}" font-size="{size}" text-anchor="middle" fill="{}" transform="rotate(-90 {} {})">{}</text>"#,
            px(x),
            px(y),
            colour.hex(),
            px(x),
            px(y),
            escape(text)
        );
    }

    /// Raw markup (gradient definitions).
    pub fn raw(&mut self, markup: &str) {
        self.out.push_str(markup);
        self.out.push('\n');
    }

    /// The finished document.
    pub fn finish(mut self) -> String {
        while self.open > 0 {
            self.end();
        }
        self.out.push_str("</svg>\n");
        self.out
    }
}

/// A map from data values to pixels along one axis.
#[derive(Clone, Copy, Debug)]
pub struct Scale {
    lo: f64,
    hi: f64,
    from: f64,
    to: f64,
    log: bool,
}

impl Scale {
    /// Linear from `lo..hi` onto pixels `from..to`.
    pub fn linear(lo: f64, hi: f64, from: f64, to: f64) -> Scale {
        let hi = if hi > lo { hi } else { lo + 1.0 };
        Scale {
            lo,
            hi,
            from,
            to,
            log: false,
        }
    }

    /// Logarithmic from `lo..hi` (both positive) onto pixels `from..to`.
    pub fn log(lo: f64, hi: f64, from: f64, to: f64) -> Scale {
        let lo = lo.max(f64::MIN_POSITIVE);
        let hi = if hi > lo { hi } else { lo * 10.0 };
        Scale {
            lo,
            hi,
            from,
            to,
            log: true,
        }
    }

    /// Pixel of value `v` (clamped to the axis for a log scale's non-positive values).
    pub fn at(&self, v: f64) -> f64 {
        let f = if self.log {
            (v.max(self.lo).ln() - self.lo.ln()) / (self.hi.ln() - self.lo.ln())
        } else {
            (v - self.lo) / (self.hi - self.lo)
        };
        self.from + f * (self.to - self.from)
    }

    /// Whether `v` lies on the axis.
    pub fn contains(&self, v: f64) -> bool {
        v >= self.lo && v <= self.hi
    }

    /// Tick values: 1-2-5 steps (linear, about `target` of them) or decades (log, with
    /// 2 and 5 between when the axis spans under 3 decades).
    pub fn ticks(&self, target: usize) -> Vec<f64> {
        if self.log {
            let (a, b) = (
                self.lo.log10().floor() as i32,
                self.hi.log10().ceil() as i32,
            );
            let between: &[f64] = if b - a < 3 { &[1.0, 2.0, 5.0] } else { &[1.0] };
            (a..=b)
                .flat_map(|e| between.iter().map(move |m| m * 10f64.powi(e)))
                .filter(|v| self.contains(*v))
                .collect()
        } else {
            let step = nice_step((self.hi - self.lo) / target.max(1) as f64);
            let first = (self.lo / step).ceil() as i64;
            let last = (self.hi / step).floor() as i64;
            (first..=last).map(|k| k as f64 * step).collect()
        }
    }
}

/// The 1, 2 or 5 × 10ᵏ at or above `raw` (the usual "nice number" tick step, common
/// practice).
pub fn nice_step(raw: f64) -> f64 {
    if !(raw.is_finite() && raw > 0.0) {
        return 1.0;
    }
    let mag = 10f64.powf(raw.log10().floor());
    [1.0, 2.0, 5.0, 10.0]
        .into_iter()
        .map(|m| m * mag)
        .find(|s| *s >= raw * (1.0 - 1e-9))
        .unwrap_or(10.0 * mag)
}

/// A tick label with as many decimals as the step needs and no negative zero.
pub fn tick_label(v: f64, step: f64) -> String {
    let decimals = if step >= 1.0 {
        0
    } else {
        (-step.log10().floor()) as usize
    };
    let s = format!("{v:.decimals$}");
    let zero = s
        .trim_start_matches('-')
        .chars()
        .all(|c| c == '0' || c == '.');
    if zero {
        s.trim_start_matches('-').to_owned()
    } else {
        s.replacen('-', "−", 1)
    }
}

/// A duration in seconds, short: three significant digits in s, ms, µs or ns.
pub fn duration(s: f64) -> String {
    let a = s.abs();
    let (v, unit) = if a == 0.0 {
        return "0 s".to_owned();
    } else if a < 1e-6 {
        (s * 1e9, "ns")
    } else if a < 1e-3 {
        (s * 1e6, "µs")
    } else if a < 1.0 {
        (s * 1e3, "ms")
    } else {
        (s, "s")
    };
    let digits = if v.abs() >= 100.0 {
        0
    } else if v.abs() >= 10.0 {
        1
    } else {
        2
    };
    let t = format!("{v:.digits$}");
    let t = if t.contains('.') {
        t.trim_end_matches('0').trim_end_matches('.').to_owned()
    } else {
        t
    };
    format!("{t} {unit}")
}

/// The plot area of a chart, pixels.
#[derive(Clone, Copy, Debug)]
pub struct Area {
    /// Left edge.
    pub left: f64,
    /// Top edge.
    pub top: f64,
    /// Right edge.
    pub right: f64,
    /// Bottom edge.
    pub bottom: f64,
}

/// One axis's ticks: value and label.
pub type Ticks = Vec<(f64, String)>;

/// Draw the project's axes: a left and a bottom rule (no box), outward ticks, tick labels
/// in the muted ink, dotted horizontal guides at the y ticks only, and the axis titles.
/// Each tick is a group `class="tick" data-axis="x|y" data-value=…`.
pub fn axes(svg: &mut Svg, area: Area, x: (&Scale, &Ticks, &str), y: (&Scale, &Ticks, &str)) {
    let guide = Stroke::solid(GUIDE, 1.0).dashed("1 4");
    let rule = Stroke::solid(INK, 1.2);
    let tick = Stroke::solid(INK, 1.0);
    svg.group("axes", &[]);
    for (v, label) in y.1 {
        let py = y.0.at(*v);
        svg.group(
            "tick",
            &[("data-axis", "y".into()), ("data-value", format!("{v}"))],
        );
        svg.line((area.left, py), (area.right, py), &guide);
        svg.line((area.left - 6.0, py), (area.left, py), &tick);
        svg.text(
            (area.left - 9.0, py + 4.0),
            label,
            12.0,
            Anchor::End,
            MUTED,
            false,
        );
        svg.end();
    }
    for (v, label) in x.1 {
        let px_ = x.0.at(*v);
        svg.group(
            "tick",
            &[("data-axis", "x".into()), ("data-value", format!("{v}"))],
        );
        svg.line((px_, area.bottom), (px_, area.bottom + 6.0), &tick);
        svg.text(
            (px_, area.bottom + 20.0),
            label,
            12.0,
            Anchor::Middle,
            MUTED,
            false,
        );
        svg.end();
    }
    svg.line((area.left, area.top), (area.left, area.bottom), &rule);
    svg.line((area.left, area.bottom), (area.right, area.bottom), &rule);
    svg.text(
        ((area.left + area.right) / 2.0, area.bottom + 40.0),
        x.2,
        13.0,
        Anchor::Middle,
        INK,
        false,
    );
    svg.vertical_text(
        (area.left - 62.0, (area.top + area.bottom) / 2.0),
        y.2,
        13.0,
        INK,
    );
    svg.end();
}

/// What a legend entry's swatch looks like.
#[derive(Clone, Copy, Debug)]
pub enum Swatch {
    /// A short line.
    Line(Stroke),
    /// A filled band.
    Band(Rgb, f64),
    /// A round marker, filled or open.
    Dot(Rgb, bool),
    /// A diamond marker.
    Diamond(Rgb),
}

/// One legend entry: the key of the series it explains (`data-key`) and its text.
pub struct Entry {
    /// Key shared with the series' group.
    pub key: &'static str,
    /// Swatch.
    pub swatch: Swatch,
    /// Text.
    pub text: String,
}

/// A diamond marker centred at `c`.
pub fn diamond(svg: &mut Svg, c: (f64, f64), r: f64, fill: Rgb) {
    svg.polygon(
        &[
            (c.0, c.1 - r),
            (c.0 + r, c.1),
            (c.0, c.1 + r),
            (c.0 - r, c.1),
        ],
        fill,
        1.0,
    );
}

/// Draw the legend as rows of entries from `(x, y)`, wrapping at `right`, with no
/// frame (the project's look: a key strip under the title, outside the data). Returns
/// the y below the last row.
pub fn legend(svg: &mut Svg, (x, y): (f64, f64), right: f64, entries: &[Entry]) -> f64 {
    const ROW: f64 = 20.0;
    // Width of a character at 12 px (Verdana-like), pixels: a layout estimate.
    const CHAR: f64 = 6.8;
    svg.group("legend", &[]);
    let (mut cx, mut cy) = (x, y);
    for e in entries {
        let w = 30.0 + e.text.chars().count() as f64 * CHAR + 22.0;
        if cx + w > right && cx > x {
            cx = x;
            cy += ROW;
        }
        svg.group("legend-entry", &[("data-key", e.key.into())]);
        let mid = cy - 4.0;
        match e.swatch {
            Swatch::Line(s) => svg.line((cx, mid), (cx + 24.0, mid), &s),
            Swatch::Band(c, o) => svg.rect((cx, mid - 6.0), (24.0, 12.0), Some((c, o)), None),
            Swatch::Dot(c, filled) => svg.circle(
                (cx + 12.0, mid),
                4.0,
                Some(if filled { c } else { Rgb::WHITE }),
                Some(&Stroke::solid(c, 1.5)),
            ),
            Swatch::Diamond(c) => diamond(svg, (cx + 12.0, mid), 5.0, c),
        }
        svg.text((cx + 30.0, cy), &e.text, 12.0, Anchor::Start, INK, false);
        svg.end();
        cx += w;
    }
    svg.end();
    cy + ROW
}

/// The title block: a bold title at the left and a muted line of facts beneath.
pub fn heading(svg: &mut Svg, title: &str, facts: &str) {
    svg.group("heading", &[]);
    svg.text((24.0, 30.0), title, 17.0, Anchor::Start, INK, true);
    svg.text((24.0, 50.0), facts, 12.0, Anchor::Start, MUTED, false);
    svg.end();
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn labels_have_no_negative_zero_and_fit_the_step() {
        assert_eq!(tick_label(-0.0, 0.5), "0.0");
        assert_eq!(tick_label(-1e-17, 0.5), "0.0");
        assert_eq!(tick_label(5.0, 1.0), "5");
        assert_eq!(tick_label(-0.5, 0.5), "−0.5");
        assert_eq!(tick_label(0.25, 0.05), "0.25");
    }

    #[test]
    fn nice_steps_are_one_two_five() {
        assert_eq!(nice_step(0.7), 1.0);
        assert_eq!(nice_step(1.3), 2.0);
        assert_eq!(nice_step(3.0), 5.0);
        assert_eq!(nice_step(6.0), 10.0);
        assert!((nice_step(0.013) - 0.02).abs() < 1e-12);
    }

    #[test]
    fn durations_are_short() {
        assert_eq!(duration(0.0002), "200 µs");
        assert_eq!(duration(12.34), "12.3 s");
        assert_eq!(duration(1.5e-3), "1.5 ms");
        assert_eq!(duration(240.0), "240 s");
    }

    #[test]
    fn text_is_escaped() {
        let mut s = Svg::new(10.0, 10.0, "a < b & c");
        s.text((0.0, 0.0), "\"q\"", 10.0, Anchor::Start, INK, false);
        let out = s.finish();
        assert!(out.contains("a &lt; b &amp; c"));
        assert!(out.contains("&quot;q&quot;"));
    }
}
