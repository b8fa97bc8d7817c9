//! The plots' colours, one per meaning. Hues are taken from the colour-blind-safe set of
//! Okabe & Ito, *Color Universal Design* (2008; values as commonly reproduced, from
//! memory), so that every role stays distinct under protanopia, deuteranopia and
//! tritanopia; each role also has its own line style, so the plots read in grey too.
//! The reasons for each choice are in `docs/plots.md`.

/// An sRGB colour.
#[derive(Clone, Copy, Debug, PartialEq, Eq)]
pub struct Rgb(pub u8, pub u8, pub u8);

impl Rgb {
    /// White.
    pub const WHITE: Rgb = Rgb(255, 255, 255);

    /// `#rrggbb`.
    pub fn hex(self) -> String {
        format!("#{:02x}{:02x}{:02x}", self.0, self.1, self.2)
    }

    /// The colour `t` of the way (0..=1) from `self` to `other`, in sRGB.
    pub fn toward(self, other: Rgb, t: f64) -> Rgb {
        let t = t.clamp(0.0, 1.0);
        let mix = |a: u8, b: u8| (f64::from(a) + (f64::from(b) - f64::from(a)) * t).round() as u8;
        Rgb(
            mix(self.0, other.0),
            mix(self.1, other.1),
            mix(self.2, other.2),
        )
    }
}

/// Simulated runs (measurements): Okabe–Ito blue. The one cool, dark hue is kept for
/// what was measured, so everything predicted or required is warm or black.
pub const RUNS: Rgb = Rgb(0, 114, 178);
/// The prediction (forecast p50 and p90): Okabe–Ito orange, p50 solid, p90 dashed.
pub const PREDICTION: Rgb = Rgb(230, 159, 0);
/// The worst-case bound: Okabe–Ito reddish purple, dash-dot.
pub const BOUND: Rgb = Rgb(204, 121, 167);
/// The predicted noise floor: Okabe–Ito bluish green, a pale band.
pub const NOISE_FLOOR: Rgb = Rgb(0, 158, 115);
/// The lock tolerance (a requirement): black, short dashes.
pub const TOLERANCE: Rgb = Rgb(0, 0, 0);
/// The lock-time budget (the limit): Okabe–Ito vermillion, solid and thick.
pub const BUDGET: Rgb = Rgb(213, 94, 0);
/// Runs that never settled: neutral grey (no verdict colour: counted, not judged).
pub const NEVER: Rgb = Rgb(120, 120, 120);
/// Text and axis rules.
pub const INK: Rgb = Rgb(34, 34, 34);
/// Tick labels and the line of facts.
pub const MUTED: Rgb = Rgb(100, 100, 100);
/// Guides at the y ticks.
pub const GUIDE: Rgb = Rgb(170, 170, 170);
/// Middle of the diverging mode map (a value of 0).
pub const MODE_ZERO: Rgb = Rgb(242, 240, 235);

/// Colour of a mode value in `-1..=1` on the diverging map blue (−1) → pale (0) →
/// vermillion (+1): two Okabe–Ito hues that stay apart for every common colour-vision
/// deficiency, with lightness rising toward 0 so the sign also reads in grey.
pub fn mode_colour(v: f64) -> Rgb {
    if v < 0.0 {
        MODE_ZERO.toward(RUNS, -v)
    } else {
        MODE_ZERO.toward(BUDGET, v)
    }
}
