//! The constants a firmware flashes, held fixed while the deployment varies.

use super::PropsError;
use crate::assess::NodeConstants;
use crate::scenario::{GainSetting, Gains, Scenario};
use crate::{Config, Gain, Law};

/// Counts per turn of the `u32` binary angle.
const TURN: f64 = 4_294_967_296.0;

/// The node-law constants a firmware flashes, with the firmware's timer rate and its
/// neighbour-table capacity `N` (the `N` of its `Node<N>`).
///
/// Build it from the `CONFIG` of the file `entrain tune --out` wrote (with `include!`), or
/// from that file's text with [`Firmware::from_constants_file`]. [`Firmware::fix`] writes
/// these constants into a scenario, exactly: the node law built from the scenario is this
/// `Config`, bit for bit.
#[derive(Clone, Copy, Debug, PartialEq, Eq)]
pub struct Firmware<const N: usize> {
    /// The node configuration as flashed.
    pub config: Config,
    /// The node timer's frequency, ticks per second (the constants are in its ticks).
    pub timer_hz: u32,
}

impl<const N: usize> Firmware<N> {
    /// The firmware running `config` on a `timer_hz` timer with `Node<N>`.
    #[must_use]
    pub const fn new(config: Config, timer_hz: u32) -> Firmware<N> {
        Firmware { config, timer_hz }
    }

    /// Read the `pub const` lines of a constants file written by `entrain tune --out`
    /// (`TICKS_PER_PERIOD`, `UPDATE_TICKS`, `KP_Q16`, `KI_Q16`, `SLEW_LIMIT_COUNTS`,
    /// `TRIM_LIMIT_PPB`, `TIMEOUT_TICKS`, `LAW`, and `LEAK_Q16` when present: files
    /// written before the leak existed have none, and run without one) for a `timer_hz`
    /// timer.
    ///
    /// # Errors
    /// [`PropsError::Constants`] for a missing or malformed constant, or values the node
    /// law refuses.
    pub fn from_constants_file(text: &str, timer_hz: u32) -> Result<Firmware<N>, PropsError> {
        let find = |name: &str, ty: &str| -> Result<&str, PropsError> {
            let prefix = format!("pub const {name}: {ty} = ");
            text.lines()
                .map(str::trim)
                .find_map(|l| l.strip_prefix(prefix.as_str()))
                .and_then(|rest| rest.strip_suffix(';'))
                .map(str::trim)
                .ok_or_else(|| {
                    PropsError::Constants(format!("no line `pub const {name}: {ty} = …;`"))
                })
        };
        let number = |name: &str| -> Result<u32, PropsError> {
            let v = find(name, "u32")?;
            v.replace('_', "").parse::<u32>().map_err(|_| {
                PropsError::Constants(format!("{name} = {v} is not a whole number (u32)"))
            })
        };
        let law = match find("LAW", "entrain::Law")? {
            "entrain::Law::Sine" => Law::Sine,
            "entrain::Law::Linear" => Law::Linear,
            other => {
                return Err(PropsError::Constants(format!(
                    "LAW = {other} is not one a scenario can state (entrain::Law::Sine or entrain::Law::Linear)"
                )));
            }
        };
        let config = Config::builder(number("TICKS_PER_PERIOD")?, number("UPDATE_TICKS")?)
            .kp(Gain::from_q16(number("KP_Q16")?))
            .ki(Gain::from_q16(number("KI_Q16")?))
            .leak(Gain::from_q16(if find("LEAK_Q16", "u32").is_ok() {
                number("LEAK_Q16")?
            } else {
                0
            }))
            .law(law)
            .slew_limit(number("SLEW_LIMIT_COUNTS")?)
            .trim_limit_ppb(number("TRIM_LIMIT_PPB")?)
            .timeout_ticks(number("TIMEOUT_TICKS")?)
            .build()
            .map_err(|e| PropsError::Constants(format!("the node law refuses them: {e}")))?;
        Ok(Firmware::new(config, timer_hz))
    }

    /// `base` with this firmware's constants in place of its timing and law: timer,
    /// update rate, phase period, coupling, gains (fixed), slew and trim limits,
    /// neighbour timeout. Everything else (layout, clock, link, lock, margins, Monte
    /// Carlo) stays as `base` has it.
    ///
    /// # Errors
    /// [`PropsError::Constants`] when the constants cannot be stated exactly in a scenario
    /// (a law other than sine or linear, a timeout that is not whole update intervals)
    /// or the result is a scenario the file reader refuses (for example a lock tolerance
    /// that no longer fits the phase period).
    pub fn fix(&self, base: &Scenario) -> Result<Scenario, PropsError> {
        let c = &self.config;
        let bad = |m: String| Err(PropsError::Constants(m));
        if !matches!(c.law(), Law::Sine | Law::Linear) {
            return bad(format!(
                "law {:?}: a scenario states sine or linear coupling only",
                c.law()
            ));
        }
        if !c.timeout_ticks().is_multiple_of(c.update_ticks()) {
            return bad(format!(
                "timeout {} ticks is not a whole number of update intervals ({} ticks)",
                c.timeout_ticks(),
                c.update_ticks()
            ));
        }
        let timer = f64::from(self.timer_hz);
        let mut s = base.clone();
        s.timer_hz = self.timer_hz;
        s.ticks_per_period = c.ticks_per_period();
        s.update_ticks = c.update_ticks();
        s.update_rate_hz = timer / f64::from(c.update_ticks());
        s.phase_period_s = f64::from(c.ticks_per_period()) / timer;
        s.law = c.law();
        s.gains = Gains {
            kp: GainSetting::Fixed(c.kp().to_f64()),
            ki: GainSetting::Fixed(c.ki().to_f64()),
        };
        s.slew_limit_turns = f64::from(c.slew_limit()) / TURN;
        s.trim_limit_ppm = f64::from(c.trim_limit_ppb()) / 1_000.0;
        s.neighbour_timeout_updates = c.timeout_ticks() / c.update_ticks();
        s.trim_leak = Some(c.leak().to_f64());
        // The file reader is the one judge of a valid scenario, and its rounding must land
        // on these constants again.
        let again = Scenario::from_toml(&s.path, &s.to_toml()).map_err(PropsError::Scenario)?;
        let (kp, ki) = (c.kp().to_f64(), c.ki().to_f64());
        let rebuilt = NodeConstants::new(&again, kp, ki)
            .and_then(|k| k.config())
            .map_err(|e| PropsError::Constants(format!("the node law refuses them: {e}")))?;
        if rebuilt != *c {
            return bad(format!(
                "the scenario's rounding does not give these constants back (got {rebuilt:?})"
            ));
        }
        Ok(again)
    }
}
