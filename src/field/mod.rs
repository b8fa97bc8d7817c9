//! The field check (feature `field`): what a running network logged
//! ([`crate::telemetry`] lines, one log per node or any mix) compared with what the
//! scenario predicts.
//!
//! [`field_check`] is the one definition of what `entrain field` answers. It reads
//! nothing itself: the logs come in as a [`LogSet`] ([`LogSet::load`] reads a file under
//! the same rules as a scenario file: regular files only, a size cap, a line at a time).
//!
//! # What is reconstructed, and how
//!
//! - **Time axis.** Every node's records are merged onto one axis of update intervals
//!   ([`merge`]): duplicates dropped, gaps counted, counter wraps unwrapped, a reboot
//!   (the count goes back) placed by the neighbours' logs.
//! - **Links heard.** Node i heard j when j is in i's table in any record. A link of the
//!   scenario heard in neither direction (with at least one end logging) is *missing*; a
//!   pair heard that the scenario does not have is *unexpected*.
//! - **Loss.** Between two consecutive records of i (updates t and t+1 of one power-up),
//!   j's observation was renewed when j is in the table at t+1 and its age there is less
//!   than its age at t plus half an update interval (or j was absent at t); otherwise no
//!   beacon of j arrived in that interval. The fraction of intervals without one is the
//!   link's loss. The node takes one beacon per interval from each neighbour, so this
//!   counts every lost beacon (and, rarely, an interval that a clock-rate difference left
//!   without one: one in 10⁶/Δppm).
//! - **Phase error.** At each time t, the phases of the nodes are laid out from the
//!   differences they measured: along a breadth-first spanning tree of the links in that
//!   round's records, from the lowest node id, each link's difference the mean of what
//!   its two ends measured (common practice, no source). The error is the largest
//!   pairwise difference (for a pinned chain, the largest offset from the reference),
//!   as the checker defines it. A round where a logging node has no record, or the
//!   links of the round do not reach every node, is left out (counted).
//! - **Settling and noise floor** as the simulator defines them: settled at the round
//!   after the last one outside the tolerance, provided that lies before the final fifth
//!   of the rounds; the floor is the p50 and p99 of the error over the second half of
//!   the settled part (the steady window). The
//!   measured differences carry the nodes' stamping noise (timestamp jitter and tick
//!   rounding), which the reconstruction sums along the tree, so the tolerance is widened
//!   by [`STAMP_SIGMAS`] standard deviations of that sum: where the stamping noise is
//!   not small beside the tolerance, the observed settling is late and the floor high
//!   against the simulator's, which sees the true phases.
//! - **Decay rate.** A straight line fitted by least squares to the logarithm of the
//!   error against time (common practice, no source) over the transient: from the last
//!   round at or above half the largest error to the first round after it at or below
//!   twice the floor's p99 (the tolerance when there is no floor). Its slope is the
//!   observed decay per update, beside the predicted convergence factor of the mean
//!   dynamics with loss ([`crate::plan::Stability::mean_radius_with_loss`]).
//! - **Crystals from trims.** Locked nodes run at one common rate, so crystal plus trim
//!   is the same on every node. With the median crystal taken as nominal, node i's
//!   crystal is the median trim minus its own (median over its last quarter of records);
//!   for a pinned chain the reference is nominal and the crystal is minus the trim.
//!   Under the P law (`ki = 0`) no node trims, so the trims say nothing of the crystals:
//!   they are not estimated ([`FieldReport::crystals_estimated`] is false, every
//!   [`NodeReport::crystal_ppm`] is `None`) rather than reported as 0 ppm.
//! - **Common rate.** Without a reference node, the PI network's common rate is nominal
//!   plus the mean trim, and nothing but the trim leak γ holds that mean: summed over
//!   the nodes, the law's pulls cancel pair by pair except for a timing bias the links
//!   leave (a few µs after two-way timing), so the mean trim m obeys
//!   `m⁺ = (1 − γ)·m + ki·ē` (the common mode `z = 1 − γ` of the law's modes, see
//!   [`crate::Node::update`]). Over the second half of the settled part of the logs (of
//!   the whole when not settled: clear of the trims' pull-in, which outlasts the
//!   phases'), the mean trim of every complete round is fitted by least squares to that
//!   course, `m(t) = a + b·τ(1 − e^{−(t − t₀)/τ})` with τ the leak's time constant (a
//!   straight line without a leak): a level it heads for, or a ramp ([`CommonTrim`]).
//!   Each node's trim is carried along by the same course. The integrators' noise makes
//!   the mean trim wander as well (a random walk the leak pulls back over its time
//!   constant), so the trend is judged against that wander: the window is cut into
//!   [`DRIFT_BLOCKS`] blocks, and the mean step between block means is set against its
//!   standard error (common practice, no source), widened for the ¼ correlation of
//!   neighbouring steps between a random walk's block means (own derivation). When the
//!   fitted course moved by more than [`DRIFT_MIN_MOVE_PPM`] over the window and takes a
//!   trim to its limit, and either its trend stands [`DRIFT_MIN_T`] standard errors clear
//!   of the wander or there is no leak (then nothing pulls a wander back either, and the
//!   time the course gives is a guide, not a forecast), the warning `trim_limit_ahead`
//!   says which node and when. With a reference node the common rate is the
//!   reference's: not fitted.
//!
//! # Verdict
//!
//! [`FieldReason`] codes: `no_telemetry`, `node_silent`, `link_missing`,
//! `link_unexpected`, `link_lossy`, `crystal_out_of_tolerance`, `trim_at_limit`,
//! `not_settled`, `settled_over_budget`, `slower_than_predicted`,
//! `noise_floor_above_prediction`. Thresholds are constants of this module.

mod logs;

pub use logs::{
    LogError, LogRecord, LogSet, MAX_LOG_BYTES, MAX_MALFORMED_KEPT, Malformed, MergeCounts,
    NodeSeries, merge,
};

use std::collections::{BTreeMap, BTreeSet, HashMap, VecDeque};
use std::fmt;

use crate::assess::{self, AssessError, Assessment, Options};
use crate::scenario::Scenario;

/// Counts per turn.
const TURN: f64 = 4_294_967_296.0;

/// A link's loss is flagged when it exceeds the scenario's loss by more than this, and by
/// more than [`LOSS_SIGMAS`] binomial standard deviations.
pub const LOSS_MIN_EXCESS: f64 = 0.05;
/// Standard deviations of the binomial loss count allowed above the scenario's loss
/// (a three-sigma bound, common practice, no source).
pub const LOSS_SIGMAS: f64 = 3.0;
/// Fewest judged intervals before a link's loss is judged.
pub const LOSS_MIN_INTERVALS: u64 = 50;
/// The observed time constant of the decay may exceed the predicted one by this factor
/// before `slower_than_predicted`.
pub const SLOWER_FACTOR: f64 = 1.5;
/// The observed noise floor's p99 may exceed the predicted p99 by this factor (plus the
/// reconstruction's stamping allowance) before `noise_floor_above_prediction`.
pub const NOISE_FACTOR: f64 = 1.5;
/// Standard deviations of the reconstruction's stamping noise added to the tolerance
/// before a reconstructed error counts as outside it.
pub const STAMP_SIGMAS: f64 = 4.0;
/// Fewest rounds in the decay window for a fit.
pub const FIT_MIN_POINTS: usize = 8;
/// Fewest rounds after settling for a noise floor.
pub const FLOOR_MIN_ROUNDS: usize = 10;
/// The common trim's fitted course must move by more than this over its window, ppm,
/// before `trim_limit_ahead`: a smaller move is left alone whatever its trend (twice the
/// 1 ppm the crystal estimates are allowed, [`CRYSTAL_SLACK_PPM`]; a choice of ours, no
/// source).
pub const DRIFT_MIN_MOVE_PPM: f64 = 2.0;
/// The common trim's trend must stand this many standard errors clear of its wander
/// before `trim_limit_ahead` (see [`CommonTrim::trend_t`]). For a trend-free random walk
/// the statistic is roughly Student's t with 8 degrees of freedom (nine steps), beyond ±4
/// with probability 0.0039 (the t density integrated numerically when this was
/// written); `tests/field.rs` measures it on simulated random walks.
pub const DRIFT_MIN_T: f64 = 4.0;
/// Blocks the window is cut into for [`CommonTrim::trend_t`].
pub const DRIFT_BLOCKS: usize = 10;
/// A crystal estimate is out of tolerance beyond `2 × tolerance + this` ppm (non-pinned:
/// the median crystal, taken as nominal, may itself be off by the tolerance).
pub const CRYSTAL_SLACK_PPM: f64 = 1.0;

/// p50, p90 and max of a set of ages, seconds.
#[derive(Clone, Copy, Debug, PartialEq)]
pub struct AgeStats {
    /// Median.
    pub p50_s: f64,
    /// 90th percentile.
    pub p90_s: f64,
    /// Largest.
    pub max_s: f64,
}

/// One link (expected by the scenario, or heard), both directions.
#[derive(Clone, Debug, PartialEq)]
pub struct LinkReport {
    /// Lower node id.
    pub a: usize,
    /// Higher node id.
    pub b: usize,
    /// The scenario has this link.
    pub expected: bool,
    /// `a` heard `b` (b in a's table in some record).
    pub a_hears_b: bool,
    /// `b` heard `a`.
    pub b_hears_a: bool,
    /// Fraction of judged update intervals without a beacon, both directions together.
    pub loss: Option<f64>,
    /// Intervals judged.
    pub intervals: u64,
    /// Ages of the observations of this link in the records, seconds.
    pub age: Option<AgeStats>,
}

impl LinkReport {
    /// Heard in either direction.
    #[must_use]
    pub fn heard(&self) -> bool {
        self.a_hears_b || self.b_hears_a
    }
}

/// One node as its logs show it.
#[derive(Clone, Debug, PartialEq)]
pub struct NodeReport {
    /// Node id.
    pub id: usize,
    /// The scenario has this node.
    pub in_scenario: bool,
    /// What merging its records found.
    pub merge: MergeCounts,
    /// Median trim over its last quarter of records, ppm.
    pub trim_ppm: Option<f64>,
    /// Crystal error estimated from the trims, ppm (`None`: no records, not in the
    /// scenario, or not estimated at all, see [`FieldReport::crystals_estimated`]).
    pub crystal_ppm: Option<f64>,
    /// A trim at its limit in its last quarter of records.
    pub trim_at_limit: bool,
}

/// The decay rate fitted from the data beside the predicted one.
#[derive(Clone, Copy, Debug, PartialEq)]
pub struct Decay {
    /// Fitted factor per update (`exp(slope)`).
    pub fitted_per_update: f64,
    /// Predicted factor per update (mean dynamics with loss).
    pub predicted_per_update: f64,
    /// Fitted time constant (`−1/ln ρ` updates), seconds (infinite when not decaying).
    pub fitted_time_constant_s: f64,
    /// Predicted time constant, seconds.
    pub predicted_time_constant_s: f64,
    /// Window of the fit, seconds from power-up.
    pub from_s: f64,
    /// End of the window.
    pub to_s: f64,
    /// The fitted line's error at `from_s`, seconds of phase.
    pub start_error_s: f64,
    /// Rounds in the window.
    pub points: usize,
}

/// The network's common rate over the settled logs: the mean trim per complete round,
/// fitted to the course the trim leak gives it (see the module docs).
#[derive(Clone, Copy, Debug, PartialEq)]
pub struct CommonTrim {
    /// Window of the fit, seconds from power-up.
    pub from_s: f64,
    /// End of the window.
    pub to_s: f64,
    /// Rounds in the window.
    pub points: usize,
    /// The leak's time constant, seconds (`None`: no leak, the course is a line).
    pub leak_time_constant_s: Option<f64>,
    /// The fitted mean trim at `to_s`, ppm.
    pub end_ppm: f64,
    /// The fitted course's slope at `to_s`, ppm per minute.
    pub slope_ppm_per_min: f64,
    /// How far the fitted course moved over the window, ppm.
    pub moved_ppm: f64,
    /// The trend against the wander: the mean step between consecutive block means over
    /// its standard error (capped at ±10⁶, which a wander-free trend reaches; 0 with
    /// too few rounds).
    pub trend_t: f64,
    /// The level the course heads for, ppm (`None` without a leak).
    pub heading_to_ppm: Option<f64>,
    /// On this course, the node whose trim (in the window's last round) reaches its limit
    /// first, and the minutes after `to_s` until it does (`None`: none ever does).
    pub first_at_limit: Option<(usize, f64)>,
    /// The trim limit, ppm.
    pub limit_ppm: f64,
}

impl CommonTrim {
    /// The fitted course moved by more than [`DRIFT_MIN_MOVE_PPM`] over the window and
    /// takes a trim to its limit, and either its trend stands [`DRIFT_MIN_T`] standard
    /// errors clear of the wander or there is no leak (nothing pulls a wander back: trend
    /// and wander alike accumulate).
    #[must_use]
    pub fn limit_ahead(&self) -> bool {
        self.moved_ppm.abs() > DRIFT_MIN_MOVE_PPM
            && self.first_at_limit.is_some()
            && (self.trend_t.abs() > DRIFT_MIN_T || self.leak_time_constant_s.is_none())
    }
}

/// Why the field check fails, each with a stable code.
#[non_exhaustive]
#[derive(Clone, Debug, PartialEq)]
pub enum FieldReason {
    /// No telemetry record was read at all.
    NoTelemetry,
    /// Nodes of the scenario with no record.
    NodeSilent(Vec<usize>),
    /// Links of the scenario heard in neither direction.
    LinkMissing(Vec<(usize, usize)>),
    /// Pairs heard that the scenario does not have.
    LinkUnexpected(Vec<(usize, usize)>),
    /// Links losing more than the scenario allows: (a, b, loss), and the scenario's loss.
    LinkLossy(Vec<(usize, usize, f64)>, f64),
    /// Nodes whose crystal estimate is outside the tolerance: (id, ppm), and the
    /// tolerance.
    CrystalOutOfTolerance(Vec<(usize, f64)>, f64),
    /// Nodes with a trim at its limit (ids), and the limit in ppm.
    TrimAtLimit(Vec<usize>, f64),
    /// The error was outside the tolerance in the final fifth of the rounds.
    NotSettled,
    /// Settled later than the budget: (settled, budget), seconds.
    SettledOverBudget(f64, f64),
    /// The decay's time constant exceeds the predicted one by more than
    /// [`SLOWER_FACTOR`].
    SlowerThanPredicted(Decay),
    /// The floor's p99 exceeds its limit: (observed p99, limit), seconds.
    NoiseFloorAbovePrediction(f64, f64),
}

impl FieldReason {
    /// Every code, in the order of the variants.
    pub const CODES: [&'static str; 11] = [
        "no_telemetry",
        "node_silent",
        "link_missing",
        "link_unexpected",
        "link_lossy",
        "crystal_out_of_tolerance",
        "trim_at_limit",
        "not_settled",
        "settled_over_budget",
        "slower_than_predicted",
        "noise_floor_above_prediction",
    ];

    /// The stable code.
    #[must_use]
    pub fn code(&self) -> &'static str {
        let i = match self {
            FieldReason::NoTelemetry => 0,
            FieldReason::NodeSilent(_) => 1,
            FieldReason::LinkMissing(_) => 2,
            FieldReason::LinkUnexpected(_) => 3,
            FieldReason::LinkLossy(..) => 4,
            FieldReason::CrystalOutOfTolerance(..) => 5,
            FieldReason::TrimAtLimit(..) => 6,
            FieldReason::NotSettled => 7,
            FieldReason::SettledOverBudget(..) => 8,
            FieldReason::SlowerThanPredicted(_) => 9,
            FieldReason::NoiseFloorAbovePrediction(..) => 10,
        };
        Self::CODES[i]
    }
}

fn pairs(v: &[(usize, usize)]) -> String {
    v.iter()
        .map(|(a, b)| format!("{a}–{b}"))
        .collect::<Vec<_>>()
        .join(", ")
}

fn ids(v: &[usize]) -> String {
    v.iter()
        .map(usize::to_string)
        .collect::<Vec<_>>()
        .join(", ")
}

impl fmt::Display for FieldReason {
    fn fmt(&self, f: &mut fmt::Formatter<'_>) -> fmt::Result {
        match self {
            FieldReason::NoTelemetry => write!(f, "no telemetry record in the logs"),
            FieldReason::NodeSilent(v) => write!(f, "no record from node {}", ids(v)),
            FieldReason::LinkMissing(v) => write!(
                f,
                "link {} of the scenario never heard in either direction",
                pairs(v)
            ),
            FieldReason::LinkUnexpected(v) => {
                write!(f, "link {} heard but not in the scenario", pairs(v))
            }
            FieldReason::LinkLossy(v, p) => {
                let list: Vec<String> = v
                    .iter()
                    .map(|(a, b, l)| format!("{a}–{b} {:.1} %", l * 100.0))
                    .collect();
                write!(
                    f,
                    "link loss {} against {:.1} % in the scenario",
                    list.join(", "),
                    p * 100.0
                )
            }
            FieldReason::CrystalOutOfTolerance(v, tol) => {
                let list: Vec<String> = v
                    .iter()
                    .map(|(id, ppm)| format!("node {id} {ppm:+.1} ppm"))
                    .collect();
                write!(
                    f,
                    "crystal estimated from the trims outside ±{tol:.1} ppm: {}",
                    list.join(", ")
                )
            }
            FieldReason::TrimAtLimit(v, lim) => {
                write!(f, "rate trim at its ±{lim:.1} ppm limit on node {}", ids(v))
            }
            FieldReason::NotSettled => write!(
                f,
                "the phase error was outside the tolerance in the final fifth of the logs"
            ),
            FieldReason::SettledOverBudget(s, b) => write!(
                f,
                "settled after {} against a budget of {}",
                assess::seconds(*s),
                assess::seconds(*b)
            ),
            FieldReason::SlowerThanPredicted(d) => write!(
                f,
                "the error decays with time constant {} (×{:.6} per update), predicted {} (×{:.6}); more than {SLOWER_FACTOR}× slower",
                assess::seconds(d.fitted_time_constant_s),
                d.fitted_per_update,
                assess::seconds(d.predicted_time_constant_s),
                d.predicted_per_update
            ),
            FieldReason::NoiseFloorAbovePrediction(o, l) => write!(
                f,
                "noise floor p99 {} above its limit {} (the predicted p99 × {NOISE_FACTOR} plus the stamping allowance)",
                assess::seconds(*o),
                assess::seconds(*l)
            ),
        }
    }
}

/// Something the logs show that does not fail the check by itself.
#[non_exhaustive]
#[derive(Clone, Debug, PartialEq)]
pub enum FieldWarning {
    /// Lines with the telemetry prefix that were refused.
    MalformedLines(usize),
    /// Records dropped as repeats or conflicts.
    Duplicates(usize),
    /// Update counts missing from the logs.
    Gaps(u64),
    /// Reboots seen, and how many could be placed by the neighbours' logs.
    Reboots(usize, usize),
    /// Records from node ids the scenario does not have.
    UnknownNodes(Vec<usize>),
    /// Links heard in one direction only.
    OneWay(Vec<(usize, usize)>),
    /// Rounds left out of the phase error (a node without a record, or links not
    /// reaching every node).
    IncompleteRounds(u64, u64),
    /// No decay could be fitted (too few rounds in the transient).
    NoDecayFit,
    /// On the common trim's observed course a trim reaches its limit
    /// ([`CommonTrim::limit_ahead`]).
    TrimLimitAhead(CommonTrim),
}

impl FieldWarning {
    /// Every code.
    pub const CODES: [&'static str; 9] = [
        "malformed_lines",
        "duplicate_records",
        "log_gaps",
        "reboots",
        "unknown_nodes",
        "one_way_links",
        "incomplete_rounds",
        "no_decay_fit",
        "trim_limit_ahead",
    ];

    /// The stable code.
    #[must_use]
    pub fn code(&self) -> &'static str {
        match self {
            FieldWarning::MalformedLines(_) => "malformed_lines",
            FieldWarning::Duplicates(_) => "duplicate_records",
            FieldWarning::Gaps(_) => "log_gaps",
            FieldWarning::Reboots(..) => "reboots",
            FieldWarning::UnknownNodes(_) => "unknown_nodes",
            FieldWarning::OneWay(_) => "one_way_links",
            FieldWarning::IncompleteRounds(..) => "incomplete_rounds",
            FieldWarning::NoDecayFit => "no_decay_fit",
            FieldWarning::TrimLimitAhead(_) => "trim_limit_ahead",
        }
    }
}

impl fmt::Display for FieldWarning {
    fn fmt(&self, f: &mut fmt::Formatter<'_>) -> fmt::Result {
        match self {
            FieldWarning::MalformedLines(n) => {
                write!(f, "{n} telemetry lines refused (listed with file and line)")
            }
            FieldWarning::Duplicates(n) => {
                write!(f, "{n} records dropped as repeats of a record already read")
            }
            FieldWarning::Gaps(n) => write!(f, "{n} updates missing from the logs"),
            FieldWarning::Reboots(n, aligned) => write!(
                f,
                "{n} reboots, {aligned} placed in time by the neighbours' logs (the rest assumed to follow at once)"
            ),
            FieldWarning::UnknownNodes(v) => {
                write!(f, "records from node {} not in the scenario", ids(v))
            }
            FieldWarning::OneWay(v) => write!(f, "link {} heard in one direction only", pairs(v)),
            FieldWarning::IncompleteRounds(n, of) => write!(
                f,
                "{n} of {of} rounds left out of the phase error (a node without a record, or not every node reached)"
            ),
            FieldWarning::NoDecayFit => write!(
                f,
                "no decay rate fitted: fewer than {FIT_MIN_POINTS} rounds in the transient"
            ),
            FieldWarning::TrimLimitAhead(c) => {
                write!(
                    f,
                    "the common rate drifts {:+.2} ppm a minute ({:+.1} ppm between {} and {}; mean trim {:+.1} ppm at the end",
                    c.slope_ppm_per_min,
                    c.moved_ppm,
                    assess::seconds(c.from_s),
                    assess::seconds(c.to_s),
                    c.end_ppm
                )?;
                match c.heading_to_ppm {
                    Some(h) => write!(
                        f,
                        ", heading for {h:+.1} ppm; the trend {:.1} standard errors clear of the wander)",
                        c.trend_t.abs()
                    )?,
                    None => write!(
                        f,
                        ", no trim leak to hold it: trend and wander alike accumulate)"
                    )?,
                }
                if let Some((id, min)) = c.first_at_limit {
                    write!(
                        f,
                        "; on this course node {id}'s trim reaches its ±{:.1} ppm limit {:.0} min after the logs end",
                        c.limit_ppm, min
                    )?;
                }
                Ok(())
            }
        }
    }
}

/// What the logs as a whole contained.
#[derive(Clone, Debug, Default, PartialEq)]
pub struct LogSummary {
    /// Files read.
    pub files: usize,
    /// Lines read.
    pub lines: usize,
    /// Records kept after merging.
    pub records: usize,
    /// Lines without the telemetry prefix.
    pub other_lines: usize,
    /// Refused telemetry lines.
    pub malformed_count: usize,
    /// The first refused lines with file, line and message.
    pub malformed: Vec<Malformed>,
    /// Records dropped as repeats.
    pub duplicates: usize,
    /// Records dropped as conflicting with another of the same count.
    pub conflicts: usize,
    /// Update counts missing.
    pub missing_updates: u64,
    /// Reboots seen.
    pub reboots: usize,
    /// Reboots placed by the neighbours' logs.
    pub reboots_aligned: usize,
    /// Counter wraps.
    pub wraps: usize,
}

/// Everything the field check found.
#[derive(Clone, Debug, PartialEq)]
pub struct FieldReport {
    /// What the logs contained.
    pub log: LogSummary,
    /// Every expected or heard link, by (a, b).
    pub links: Vec<LinkReport>,
    /// Expected links heard in neither direction.
    pub missing: Vec<(usize, usize)>,
    /// Heard links not in the scenario.
    pub unexpected: Vec<(usize, usize)>,
    /// Every node with records, and every node of the scenario.
    pub nodes: Vec<NodeReport>,
    /// The crystals were estimated from the trims: false under the P law (`ki = 0`),
    /// whose nodes keep no rate trim.
    pub crystals_estimated: bool,
    /// Phase error per complete round: (seconds from power-up, seconds of phase).
    pub error_s: Vec<(f64, f64)>,
    /// Rounds spanned by the logs.
    pub rounds: u64,
    /// Rounds left out.
    pub incomplete_rounds: u64,
    /// Settling instant, seconds (`None`: not settled or no rounds).
    pub settle_s: Option<f64>,
    /// Noise floor after settling: (p50, p99), seconds of phase.
    pub noise_floor_s: Option<(f64, f64)>,
    /// The floor's p99 limit (predicted p99 × [`NOISE_FACTOR`] plus the allowance).
    pub noise_limit_s: Option<f64>,
    /// The decay fit.
    pub decay: Option<Decay>,
    /// The common rate's drift (`None` under the P law, or too few complete rounds).
    pub common_trim: Option<CommonTrim>,
    /// Why it fails (empty: pass).
    pub reasons: Vec<FieldReason>,
    /// Warnings.
    pub warnings: Vec<FieldWarning>,
}

impl FieldReport {
    /// No reason to fail.
    #[must_use]
    pub fn pass(&self) -> bool {
        self.reasons.is_empty()
    }
}

/// The prediction and the field report.
#[derive(Clone, Debug)]
pub struct FieldCheck {
    /// The scenario's assessment (prediction only, no Monte Carlo).
    pub assessment: Assessment,
    /// What the logs show against it.
    pub report: FieldReport,
}

/// Assess `scenario` (prediction only) and hold `logs` against it.
///
/// # Errors
/// The assessment's [`AssessError`] for a scenario the library refuses.
pub fn field_check(scenario: Scenario, logs: &LogSet) -> Result<FieldCheck, AssessError> {
    let options = Options::predict_only(&scenario);
    let assessment = assess::assess(scenario, &options, &|_| {})?;
    let report = analyse(&assessment, logs)?;
    Ok(FieldCheck { assessment, report })
}

/// Nearest-rank percentile of sorted values.
fn percentile(sorted: &[f64], q: f64) -> f64 {
    if sorted.is_empty() {
        return f64::NAN;
    }
    let rank = (q * sorted.len() as f64).ceil() as usize;
    sorted[rank.clamp(1, sorted.len()) - 1]
}

fn median(v: &mut [f64]) -> Option<f64> {
    if v.is_empty() {
        return None;
    }
    v.sort_by(f64::total_cmp);
    let n = v.len();
    Some(if n % 2 == 1 {
        v[n / 2]
    } else {
        0.5 * (v[n / 2 - 1] + v[n / 2])
    })
}

/// Least-squares line `y = a + b·x`; `None` for fewer than two distinct x.
#[must_use]
pub fn fit_line(points: &[(f64, f64)]) -> Option<(f64, f64)> {
    let n = points.len() as f64;
    if points.len() < 2 {
        return None;
    }
    let mx = points.iter().map(|p| p.0).sum::<f64>() / n;
    let my = points.iter().map(|p| p.1).sum::<f64>() / n;
    let sxx: f64 = points.iter().map(|p| (p.0 - mx).powi(2)).sum();
    let sxy: f64 = points.iter().map(|p| (p.0 - mx) * (p.1 - my)).sum();
    if sxx <= 0.0 {
        return None;
    }
    let b = sxy / sxx;
    Some((my - b * mx, b))
}

/// Hold `logs` against the assessment `a` of their scenario.
///
/// # Errors
/// [`AssessError::Input`] when the scenario's links cannot be built.
pub fn analyse(a: &Assessment, logs: &LogSet) -> Result<FieldReport, AssessError> {
    let s = &a.scenario;
    let setup = assess::setup(
        s,
        &a.network,
        &a.prediction.constants,
        a.prediction.horizon_updates,
    )?;
    let n = setup.links.nodes();
    // Every reference node holds the ideal phase: offsets are measured from the first.
    let reference = setup.links.references().first().copied();
    let expected: BTreeSet<(usize, usize)> = setup
        .links
        .pairs()
        .iter()
        .map(|&(x, y)| (x.min(y), x.max(y)))
        .collect();
    let c = &a.prediction.constants;
    let update_ticks = i64::from(c.update_ticks);
    let latency_ticks = (s.latency_s * f64::from(s.timer_hz)).round() as i64;
    let fresh = update_ticks * 3 / 2 + latency_ticks;
    let rate = s.update_rate_hz;
    let series = merge(logs, fresh);

    // Log summary.
    let mut log = LogSummary {
        files: logs.files.len(),
        lines: logs.lines,
        other_lines: logs.other_lines,
        malformed_count: logs.malformed_count,
        malformed: logs.malformed.clone(),
        ..LogSummary::default()
    };
    for se in series.values() {
        let m = &se.counts;
        log.records += se.at.len();
        log.duplicates += m.duplicates;
        log.conflicts += m.conflicts;
        log.missing_updates += m.missing;
        log.reboots += m.reboots;
        log.reboots_aligned += m.reboots_aligned;
        log.wraps += m.wraps;
    }
    let rec = |i: usize| &logs.records[i];
    let logging: BTreeSet<usize> = series
        .keys()
        .map(|&id| usize::from(id))
        .filter(|&id| id < n)
        .collect();

    // Links: per directed pair (hearer, heard).
    #[derive(Default)]
    struct Dir {
        heard: bool,
        judged: u64,
        lost: u64,
        ages: Vec<f64>,
    }
    let mut dirs: BTreeMap<(usize, usize), Dir> = BTreeMap::new();
    let tick_s = 1.0 / f64::from(s.timer_hz);
    for (&id, se) in &series {
        let i = usize::from(id);
        let mut prev: Option<(i64, &LogRecord)> = None;
        let seg_of = |t: i64| se.segments.iter().position(|&(a, b)| a <= t && t <= b);
        for (&t, &k) in &se.at {
            let r = rec(k);
            for nb in &r.neighbours {
                let d = dirs.entry((i, usize::from(nb.id))).or_default();
                d.heard = true;
                d.ages.push(f64::from(nb.age_ticks) * tick_s);
            }
            if let Some((pt, pr)) = prev
                && pt + 1 == t
                && seg_of(pt) == seg_of(t)
            {
                // Every neighbour known at either end of the interval, plus every
                // expected neighbour.
                let mut js: BTreeSet<usize> = pr
                    .neighbours
                    .iter()
                    .chain(&r.neighbours)
                    .map(|x| usize::from(x.id))
                    .collect();
                js.extend(
                    expected
                        .iter()
                        .filter_map(|&(x, y)| (x == i).then_some(y).or((y == i).then_some(x))),
                );
                for j in js {
                    let before = pr.neighbours.iter().find(|x| usize::from(x.id) == j);
                    let after = r.neighbours.iter().find(|x| usize::from(x.id) == j);
                    let renewed = match (before, after) {
                        (_, None) => false,
                        (None, Some(_)) => true,
                        (Some(b), Some(a)) => {
                            i64::from(a.age_ticks) < i64::from(b.age_ticks) + update_ticks / 2
                        }
                    };
                    let d = dirs.entry((i, j)).or_default();
                    d.judged += 1;
                    d.lost += u64::from(!renewed);
                }
            }
            prev = Some((t, r));
        }
    }
    let mut all_pairs: BTreeSet<(usize, usize)> = expected.clone();
    all_pairs.extend(
        dirs.iter()
            .filter(|(_, d)| d.heard)
            .map(|(&(x, y), _)| (x.min(y), x.max(y))),
    );
    let mut links = Vec::new();
    let mut missing = Vec::new();
    let mut unexpected = Vec::new();
    let mut lossy = Vec::new();
    let mut one_way = Vec::new();
    let p = s.loss_fraction;
    for &(x, y) in &all_pairs {
        let ab = dirs.get(&(x, y));
        let ba = dirs.get(&(y, x));
        let heard = |d: Option<&Dir>| d.is_some_and(|d| d.heard);
        let judged = ab.map_or(0, |d| d.judged) + ba.map_or(0, |d| d.judged);
        let lost = ab.map_or(0, |d| d.lost) + ba.map_or(0, |d| d.lost);
        let mut ages: Vec<f64> = ab
            .iter()
            .chain(ba.iter())
            .flat_map(|d| d.ages.iter().copied())
            .collect();
        ages.sort_by(f64::total_cmp);
        let age = (!ages.is_empty()).then(|| AgeStats {
            p50_s: percentile(&ages, 0.5),
            p90_s: percentile(&ages, 0.9),
            max_s: ages[ages.len() - 1],
        });
        let l = LinkReport {
            a: x,
            b: y,
            expected: expected.contains(&(x, y)),
            a_hears_b: heard(ab),
            b_hears_a: heard(ba),
            loss: (judged > 0).then(|| lost as f64 / judged as f64),
            intervals: judged,
            age,
        };
        let either_logs = logging.contains(&x) || logging.contains(&y);
        if l.expected && !l.heard() && either_logs {
            missing.push((x, y));
        }
        if !l.expected && l.heard() {
            unexpected.push((x, y));
        }
        // One way: both ends log, one hears the other, the other never does.
        if l.heard() && logging.contains(&x) && logging.contains(&y) && (l.a_hears_b != l.b_hears_a)
        {
            one_way.push((x, y));
        }
        if l.expected
            && l.heard()
            && judged >= LOSS_MIN_INTERVALS
            && let Some(loss) = l.loss
        {
            let sigma = (p * (1.0 - p) / judged as f64).sqrt();
            if loss > p + LOSS_MIN_EXCESS.max(LOSS_SIGMAS * sigma) {
                lossy.push((x, y, loss));
            }
        }
        links.push(l);
    }

    // Nodes: trims and crystals.
    let limit_ppb = f64::from(c.trim_limit_ppb);
    let mut nodes: Vec<NodeReport> = Vec::new();
    let mut trims: Vec<(usize, f64, bool)> = Vec::new();
    for (&id, se) in &series {
        let i = usize::from(id);
        let recs: Vec<&LogRecord> = se.at.values().map(|&k| rec(k)).collect();
        let tail = &recs[recs.len() - recs.len().div_ceil(4)..];
        let mut t: Vec<f64> = tail
            .iter()
            .map(|r| f64::from(r.head.trim_ppb) / 1000.0)
            .collect();
        // At the limit for at least half of the last quarter: held there, not a swing
        // of a noisy integrator touching it.
        let at_limit = 2 * tail
            .iter()
            .filter(|r| f64::from(r.head.trim_ppb.unsigned_abs()) >= limit_ppb - 1.0)
            .count()
            >= tail.len();
        let trim = median(&mut t);
        if let (Some(tr), true) = (trim, i < n) {
            trims.push((i, tr, at_limit));
        }
        nodes.push(NodeReport {
            id: i,
            in_scenario: i < n,
            merge: se.counts.clone(),
            trim_ppm: trim,
            crystal_ppm: None,
            trim_at_limit: at_limit,
        });
    }
    // The P law keeps no rate trim: every trim is 0 whatever the crystals are.
    let crystals_estimated = s.gains.is_pi();
    let common = if !crystals_estimated {
        None
    } else if reference.is_some() {
        Some(0.0)
    } else {
        median(&mut trims.iter().map(|t| t.1).collect::<Vec<_>>())
    };
    let tol = s.crystal_tolerance_ppm;
    let crystal_limit = if reference.is_some() {
        tol + CRYSTAL_SLACK_PPM
    } else {
        2.0 * tol + CRYSTAL_SLACK_PPM
    };
    let mut out_of_tol = Vec::new();
    for nr in &mut nodes {
        if let (Some(tr), Some(cm), true) = (nr.trim_ppm, common, nr.in_scenario) {
            let e = cm - tr;
            nr.crystal_ppm = Some(e);
            if e.abs() > crystal_limit {
                out_of_tol.push((nr.id, e));
            }
        }
    }
    let silent: Vec<usize> = (0..n)
        .filter(|&i| !setup.links.is_reference(i) && !logging.contains(&i))
        .collect();
    let unknown: Vec<usize> = series
        .keys()
        .map(|&id| usize::from(id))
        .filter(|&i| i >= n)
        .collect();
    for &i in &silent {
        nodes.push(NodeReport {
            id: i,
            in_scenario: true,
            merge: MergeCounts::default(),
            trim_ppm: None,
            crystal_ppm: None,
            trim_at_limit: false,
        });
    }
    nodes.sort_by_key(|x| x.id);
    let at_limit: Vec<usize> = trims.iter().filter(|t| t.2).map(|t| t.0).collect();

    // Phase error per round.
    let mut rounds: BTreeMap<i64, Vec<(usize, usize)>> = BTreeMap::new();
    for (&id, se) in &series {
        let i = usize::from(id);
        if i >= n {
            continue;
        }
        for (&t, &k) in &se.at {
            rounds.entry(t).or_default().push((i, k));
        }
    }
    let span = match (rounds.keys().next(), rounds.keys().next_back()) {
        (Some(&lo), Some(&hi)) => (hi - lo + 1) as u64,
        _ => 0,
    };
    let mut error_s: Vec<(f64, f64)> = Vec::new();
    let mut incomplete = span;
    let mut depth_max = 0usize;
    let period = s.phase_period_s;
    for (&t, present) in &rounds {
        if present.len() < logging.len() {
            continue;
        }
        // Mean of both ends' measurements per link, as θ_hi − θ_lo.
        let mut sum: HashMap<(usize, usize), (f64, u32)> = HashMap::new();
        for &(i, k) in present {
            for nb in &rec(k).neighbours {
                let j = usize::from(nb.id);
                if j >= n || j == i {
                    continue;
                }
                let d = f64::from(nb.diff);
                let (key, v) = if i < j { ((i, j), d) } else { ((j, i), -d) };
                let e = sum.entry(key).or_insert((0.0, 0));
                e.0 += v;
                e.1 += 1;
            }
        }
        let mut adj: HashMap<usize, Vec<(usize, f64)>> = HashMap::new();
        for (&(x, y), &(v, m)) in &sum {
            let d = v / f64::from(m);
            adj.entry(x).or_default().push((y, d));
            adj.entry(y).or_default().push((x, -d));
        }
        let Some(&root) = logging.iter().next() else {
            continue;
        };
        let mut theta: HashMap<usize, (f64, usize)> = HashMap::new();
        theta.insert(root, (0.0, 0));
        let mut queue = VecDeque::from([root]);
        while let Some(u) = queue.pop_front() {
            let (tu, du) = theta[&u];
            if let Some(list) = adj.get(&u) {
                let mut list = list.clone();
                list.sort_by_key(|e| e.0);
                for (v, d) in list {
                    if let std::collections::hash_map::Entry::Vacant(e) = theta.entry(v) {
                        e.insert((tu + d, du + 1));
                        queue.push_back(v);
                    }
                }
            }
        }
        if !logging.iter().all(|i| theta.contains_key(i))
            || reference.is_some_and(|r| !theta.contains_key(&r))
        {
            continue;
        }
        depth_max = depth_max.max(theta.values().map(|x| x.1).max().unwrap_or(0));
        let counts = match reference {
            Some(r) => {
                let tr = theta[&r].0;
                theta.values().map(|x| (x.0 - tr).abs()).fold(0.0, f64::max)
            }
            None => {
                let hi = theta.values().map(|x| x.0).fold(f64::MIN, f64::max);
                let lo = theta.values().map(|x| x.0).fold(f64::MAX, f64::min);
                hi - lo
            }
        };
        incomplete -= 1;
        error_s.push((t as f64 / rate, counts / TURN * period));
    }

    // Settling, floor, decay.
    // The band a reconstructed error is judged against: the tolerance widened by the
    // stamping noise of a reconstructed difference. One measured difference carries the
    // timestamp jitter (uniform, variance j²/3) and the tick rounding (uniform, q²/12,
    // Widrow, Kollár & Liu 1996); a node's reconstructed phase sums up to `depth` link
    // differences, each the mean of two ends' measurements. Four standard deviations of
    // that sum (common practice, no source).
    let stamp_var =
        s.timestamp_jitter_s.powi(2) / 3.0 + (1.0 / f64::from(s.timer_hz)).powi(2) / 12.0;
    let stamp_sd = (stamp_var * depth_max as f64 / 2.0).sqrt();
    let tol_s = s.lock_tolerance_s + STAMP_SIGMAS * stamp_sd;
    let mut settle_s = None;
    let mut noise_floor_s = None;
    let mut settle_index = None;
    if let (Some(first), Some(last)) = (error_s.first(), error_s.last()) {
        let fifth = first.0 + 0.8 * (last.0 - first.0);
        let last_exit = error_s.iter().rposition(|&(_, e)| e > tol_s);
        let idx = last_exit.map_or(0, |k| k + 1);
        let at = error_s.get(idx).map(|x| x.0);
        if let Some(at) = at
            && last_exit.is_none_or(|k| error_s[k].0 < fifth)
        {
            settle_s = Some(at);
            settle_index = Some(idx);
            // The steady window: the second half of the settled part, clear of the
            // transient's tail that the widened band lets in.
            let steady = idx + (error_s.len() - idx) / 2;
            let mut floor: Vec<f64> = error_s[steady..].iter().map(|x| x.1).collect();
            if floor.len() >= FLOOR_MIN_ROUNDS {
                floor.sort_by(f64::total_cmp);
                noise_floor_s = Some((percentile(&floor, 0.5), percentile(&floor, 0.99)));
            }
        }
    }
    // Each measured difference is off by at most the timestamp jitter plus half a tick;
    // a reconstructed pairwise difference runs along two tree paths.
    let allowance = 2.0 * depth_max as f64 * (s.timestamp_jitter_s + 0.5 / f64::from(s.timer_hz));
    let noise_limit_s = a
        .prediction
        .noise_floor
        .map(|nf| NOISE_FACTOR * nf.p99_s + allowance);
    let decay = fit_decay(a, &error_s, settle_index, noise_floor_s, tol_s);
    let common_trim = if crystals_estimated && reference.is_none() {
        let complete: Vec<(f64, Vec<(usize, f64)>)> = rounds
            .iter()
            .filter(|(_, present)| present.len() == logging.len())
            .map(|(&t, present)| {
                let trims = present
                    .iter()
                    .map(|&(i, k)| (i, f64::from(rec(k).head.trim_ppb) / 1000.0))
                    .collect();
                (t as f64 / rate, trims)
            })
            .collect();
        // The common mode's factor per update is 1 − γ.
        let tau_s = Some(time_constant_s(1.0 - c.leak(), rate)).filter(|t| t.is_finite());
        fit_common_trim(&complete, settle_s, limit_ppb / 1000.0, tau_s)
    } else {
        None
    };

    // Verdict.
    let mut reasons = Vec::new();
    let mut warnings = Vec::new();
    if logs.records.is_empty() {
        reasons.push(FieldReason::NoTelemetry);
    }
    if !silent.is_empty() && !logs.records.is_empty() {
        reasons.push(FieldReason::NodeSilent(silent));
    }
    if !missing.is_empty() {
        reasons.push(FieldReason::LinkMissing(missing.clone()));
    }
    if !unexpected.is_empty() {
        reasons.push(FieldReason::LinkUnexpected(unexpected.clone()));
    }
    if !lossy.is_empty() {
        reasons.push(FieldReason::LinkLossy(lossy, p));
    }
    if !out_of_tol.is_empty() {
        reasons.push(FieldReason::CrystalOutOfTolerance(out_of_tol, tol));
    }
    if !at_limit.is_empty() {
        reasons.push(FieldReason::TrimAtLimit(at_limit, limit_ppb / 1000.0));
    }
    if !error_s.is_empty() {
        match settle_s {
            None => reasons.push(FieldReason::NotSettled),
            Some(t) if t > s.lock_budget_s => {
                reasons.push(FieldReason::SettledOverBudget(t, s.lock_budget_s));
            }
            Some(_) => {}
        }
    }
    match decay {
        Some(d) if d.fitted_time_constant_s > SLOWER_FACTOR * d.predicted_time_constant_s => {
            reasons.push(FieldReason::SlowerThanPredicted(d));
        }
        Some(_) => {}
        None if !error_s.is_empty() => warnings.push(FieldWarning::NoDecayFit),
        None => {}
    }
    if let (Some((_, p99)), Some(limit)) = (noise_floor_s, noise_limit_s)
        && p99 > limit
    {
        reasons.push(FieldReason::NoiseFloorAbovePrediction(p99, limit));
    }
    if log.malformed_count > 0 {
        warnings.push(FieldWarning::MalformedLines(log.malformed_count));
    }
    if log.duplicates + log.conflicts > 0 {
        warnings.push(FieldWarning::Duplicates(log.duplicates + log.conflicts));
    }
    if log.missing_updates > 0 {
        warnings.push(FieldWarning::Gaps(log.missing_updates));
    }
    if log.reboots > 0 {
        warnings.push(FieldWarning::Reboots(log.reboots, log.reboots_aligned));
    }
    if !unknown.is_empty() {
        warnings.push(FieldWarning::UnknownNodes(unknown));
    }
    if !one_way.is_empty() {
        warnings.push(FieldWarning::OneWay(one_way));
    }
    if incomplete > 0 {
        warnings.push(FieldWarning::IncompleteRounds(incomplete, span));
    }
    if let Some(c) = common_trim
        && c.limit_ahead()
    {
        warnings.push(FieldWarning::TrimLimitAhead(c));
    }
    Ok(FieldReport {
        log,
        links,
        missing,
        unexpected,
        nodes,
        crystals_estimated,
        error_s,
        rounds: span,
        incomplete_rounds: incomplete,
        settle_s,
        noise_floor_s,
        noise_limit_s,
        decay,
        common_trim,
        reasons,
        warnings,
    })
}

/// The common trim's course over `rounds` (seconds from power-up, and each node's trim in
/// ppm), over the second half of the settled part (of the whole without settling), with
/// the leak's time constant `tau_s` (`None`: no leak); `None` with fewer than
/// [`FIT_MIN_POINTS`] rounds there. The course is `a + b·g(t)` with `g = τ(1 − e^{−(t − t₀)/τ})` (minutes;
/// `t − t₀` without a leak), fitted by least squares in `g`.
#[must_use]
pub fn fit_common_trim(
    rounds: &[(f64, Vec<(usize, f64)>)],
    settle_s: Option<f64>,
    limit_ppm: f64,
    tau_s: Option<f64>,
) -> Option<CommonTrim> {
    let (first, last) = (rounds.first()?.0, rounds.last()?.0);
    // The second half of the settled part (of the whole without settling): clear of the
    // trims' pull-in, which outlasts the phases'.
    let from = 0.5 * (settle_s.unwrap_or(first) + last);
    let window: Vec<&(f64, Vec<(usize, f64)>)> = rounds
        .iter()
        .filter(|(t, trims)| *t >= from && !trims.is_empty())
        .collect();
    if window.len() < FIT_MIN_POINTS {
        return None;
    }
    let (from_s, to_s) = (window[0].0, window[window.len() - 1].0);
    let tau_min = tau_s
        .filter(|t| t.is_finite() && *t > 0.0)
        .map(|t| t / 60.0);
    let g = |t_s: f64| {
        let x = (t_s - from_s) / 60.0;
        tau_min.map_or(x, |tau| tau * -(-x / tau).exp_m1())
    };
    let points: Vec<(f64, f64)> = window
        .iter()
        .map(|(t, trims)| {
            let mean = trims.iter().map(|x| x.1).sum::<f64>() / trims.len() as f64;
            (g(*t), mean)
        })
        .collect();
    let (a, b) = fit_line(&points)?;
    let trend_t = trend_t(&points.iter().map(|p| p.1).collect::<Vec<_>>());
    let end_ppm = a + b * g(to_s);
    let span_min = (to_s - from_s) / 60.0;
    let slope = tau_min.map_or(b, |tau| b * (-span_min / tau).exp());
    let heading_to_ppm = tau_min.map(|tau| a + b * tau);
    // Each node's trim is carried by the course from where it was in the last round.
    let headroom = |trim: f64| {
        if slope > 0.0 {
            limit_ppm - trim
        } else {
            limit_ppm + trim
        }
    };
    // Minutes until the course has moved by `room`: at the slope without a leak; with
    // one, while the level is farther away than `room`.
    let minutes = |room: f64| -> Option<f64> {
        let room = room.max(0.0);
        match (tau_min, heading_to_ppm) {
            (Some(tau), Some(h)) => {
                let still = (h - end_ppm).abs();
                (room < still).then(|| -tau * (-room / still).ln_1p())
            }
            _ => (slope != 0.0).then(|| room / slope.abs()),
        }
    };
    let first_at_limit = window[window.len() - 1]
        .1
        .iter()
        .filter_map(|&(id, trim)| minutes(headroom(trim)).map(|m| (id, m)))
        .min_by(|x, y| x.1.total_cmp(&y.1));
    Some(CommonTrim {
        from_s,
        to_s,
        points: points.len(),
        leak_time_constant_s: tau_min.map(|t| t * 60.0),
        end_ppm,
        slope_ppm_per_min: slope,
        moved_ppm: end_ppm - a,
        trend_t,
        heading_to_ppm,
        first_at_limit,
        limit_ppm,
    })
}

/// The mean step between the means of [`DRIFT_BLOCKS`] equal blocks of `y` over its
/// standard error, capped at ±10⁶ (every step equal and not 0); 0 for fewer than two
/// rounds a block.
fn trend_t(y: &[f64]) -> f64 {
    let per = y.len() / DRIFT_BLOCKS;
    if per < 2 {
        return 0.0;
    }
    let means: Vec<f64> = y
        .chunks_exact(per)
        .take(DRIFT_BLOCKS)
        .map(|c| c.iter().sum::<f64>() / per as f64)
        .collect();
    let steps: Vec<f64> = means.windows(2).map(|w| w[1] - w[0]).collect();
    let k = steps.len() as f64;
    let mean = steps.iter().sum::<f64>() / k;
    let var = steps.iter().map(|d| (d - mean).powi(2)).sum::<f64>() / (k - 1.0);
    // For a random walk, neighbouring steps between block means share a block and
    // correlate by ¼ (own derivation: triangular weights over the shared block, ∫u(1−u)
    // against 2∫u²); the variance of their mean grows by 1 + 2·¼·(k − 1)/k.
    let se = (var / k * (1.0 + 0.5 * (k - 1.0) / k)).sqrt();
    const CAP: f64 = 1e6;
    if mean == 0.0 {
        0.0
    } else if se * CAP > mean.abs() {
        mean / se
    } else {
        CAP.copysign(mean)
    }
}

/// The time constant, seconds, of a factor `rho` per update at `rate` updates a second:
/// `−1/ln ρ` updates; infinite outside 0 < ρ < 1 (not decaying).
fn time_constant_s(rho: f64, rate: f64) -> f64 {
    if rho < 1.0 && rho > 0.0 {
        -1.0 / rho.ln() / rate
    } else {
        f64::INFINITY
    }
}

/// The decay fit over the transient (see the module docs).
fn fit_decay(
    a: &Assessment,
    error_s: &[(f64, f64)],
    settle_index: Option<usize>,
    floor: Option<(f64, f64)>,
    tol_s: f64,
) -> Option<Decay> {
    let rate = a.scenario.update_rate_hz;
    let end = settle_index.unwrap_or(error_s.len()).min(error_s.len());
    let before = &error_s[..end];
    let e_max = before.iter().map(|x| x.1).fold(0.0, f64::max);
    let hi = 0.5 * e_max;
    let lo = floor.map_or(tol_s, |f| 2.0 * f.1);
    if !hi.is_finite() || !lo.is_finite() || hi <= lo {
        return None;
    }
    let start = before.iter().rposition(|x| x.1 >= hi)?;
    let stop = error_s[start..]
        .iter()
        .position(|x| x.1 <= lo)
        .map(|k| start + k)?;
    let window: Vec<(f64, f64)> = error_s[start..=stop]
        .iter()
        .filter(|x| x.1 > 0.0)
        .map(|&(t, e)| (t * rate, e.ln()))
        .collect();
    if window.len() < FIT_MIN_POINTS {
        return None;
    }
    let (icpt, slope) = fit_line(&window)?;
    let fitted = slope.exp();
    let predicted = a.prediction.stability.mean_radius_with_loss;
    let tau = |rho: f64| time_constant_s(rho, rate);
    let from_s = error_s[start].0;
    Some(Decay {
        fitted_per_update: fitted,
        predicted_per_update: predicted,
        fitted_time_constant_s: tau(fitted),
        predicted_time_constant_s: tau(predicted),
        from_s,
        to_s: error_s[stop].0,
        start_error_s: (icpt + slope * from_s * rate).exp(),
        points: window.len(),
    })
}

/// One node's log from a simulated run's recorded telemetry: its binary records (back to
/// back, as [`crate::sim::Network::take_telemetry`] gives them) as text lines.
///
/// # Panics
/// On bytes that are not whole records (the recorder writes only whole records).
#[must_use]
pub fn lines_of(binary: &[u8]) -> String {
    let mut out = String::new();
    let mut rest = binary;
    while !rest.is_empty() {
        let (r, len) = crate::telemetry::decode(rest).expect("the recorder writes whole records");
        crate::telemetry::write_line_parts(&mut out, &r.head, r.neighbours.iter().copied())
            .expect("writing to a String cannot fail");
        out.push('\n');
        rest = &rest[len..];
    }
    out
}

/// The telemetry of run `run` of `setup` (seed `seed`), one text log per node (index =
/// node id; a pinned chain's reference logs nothing), with optional per-link losses
/// `(a, b, loss)` replacing the setup's on those links.
///
/// # Errors
/// The simulator's error as [`AssessError::Input`] (naming `scenario`'s file).
pub fn simulate_logs(
    scenario: &Scenario,
    setup: &crate::sim::Setup,
    seed: u64,
    run: u64,
    link_loss: &[(usize, usize, f64)],
) -> Result<Vec<String>, AssessError> {
    fn go<const N: usize>(
        setup: &crate::sim::Setup,
        seed: u64,
        run: u64,
        link_loss: &[(usize, usize, f64)],
    ) -> Result<Vec<Vec<u8>>, crate::sim::SimError> {
        let mut net = crate::sim::Network::<N>::new(setup, seed, run)?.record_telemetry();
        for &(x, y, l) in link_loss {
            net = net.with_link_loss(x, y, l)?;
        }
        net.run(None);
        Ok(net.take_telemetry().unwrap_or_default())
    }
    let bins = match setup.links.max_degree() {
        0..=2 => go::<2>(setup, seed, run, link_loss),
        3..=4 => go::<4>(setup, seed, run, link_loss),
        5..=8 => go::<8>(setup, seed, run, link_loss),
        9..=32 => go::<32>(setup, seed, run, link_loss),
        _ => go::<255>(setup, seed, run, link_loss),
    }
    .map_err(|e| AssessError::input(&scenario.path, format!("simulation: {e}")))?;
    Ok(bins.iter().map(|b| lines_of(b)).collect())
}
