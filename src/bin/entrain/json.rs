//! `--json` output: one JSON object per command, schema [`SCHEMA_VERSION`].
//!
//! The schema is documented in the README (section "JSON, schema version 2"). Within one schema version fields are only
//! ever added, never renamed or removed; a reader should ignore fields it does not know
//! and refuse a `schema_version` greater than the one it was written for. Non-finite
//! numbers (an unlimited margin, say) are written as `null`. Times are seconds, phase
//! errors seconds of phase unless the key ends in `_turns`.

use crate::report::{CAUTION, PHASE_ERROR_NOTE, infeasibility, infeasibility_code};
use entrain::assess::{Assessment, NetworkModel, Prediction, Warning};
use entrain::plan::{GainChoice, GainRanges, Search, Topology, Tuning};
use entrain::scenario::{
    GainSetting, Layout, LockQuantile, SCENARIO_VERSION, Scenario, law_keyword,
};
use serde_json::{Map, Value, json};
use std::path::{Path, PathBuf};

/// Version of the JSON schema this build writes.
pub const SCHEMA_VERSION: u32 = 2;

fn num(x: f64) -> Value {
    if x.is_finite() { json!(x) } else { Value::Null }
}

fn opt(x: Option<f64>) -> Value {
    x.map_or(Value::Null, num)
}

fn pretty(v: &Value) -> String {
    let mut s = serde_json::to_string_pretty(v).unwrap_or_else(|_| "{}".to_owned());
    s.push('\n');
    s
}

fn envelope(command: &str, scenario: &Scenario) -> Map<String, Value> {
    let mut m = Map::new();
    m.insert("schema_version".into(), json!(SCHEMA_VERSION));
    m.insert("command".into(), json!(command));
    m.insert("scenario".into(), scenario_json(scenario));
    m
}

fn scenario_json(s: &Scenario) -> Value {
    let (rows, cols) = match s.layout {
        Layout::Topology(Topology::Grid { rows, cols } | Topology::Torus { rows, cols }) => {
            (json!(rows), json!(cols))
        }
        _ => (Value::Null, Value::Null),
    };
    let gain = |g: GainSetting| match g {
        GainSetting::Fixed(v) => num(v),
        GainSetting::Tune => json!("tune"),
    };
    json!({
        "file": s.path.display().to_string(),
        "name": s.name,
        "version": SCENARIO_VERSION,
        "topology": s.layout.keyword(),
        "nodes": s.layout.node_count(),
        "rows": rows,
        "cols": cols,
        "reference_nodes": match &s.layout {
            Layout::EdgeList { references, .. } => json!(references),
            Layout::Topology(_) => Value::Null,
        },
        "update_rate_hz": num(s.update_rate_hz),
        "phase_period_s": num(s.phase_period_s),
        "timer_hz": s.timer_hz,
        "coupling": law_keyword(s.law),
        "kp": gain(s.gains.kp),
        "ki": gain(s.gains.ki),
        "margins": {
            "gain": num(s.margins.gain),
            "delay_updates": s.margins.delay_updates,
        },
        "slew_limit_turns": num(s.slew_limit_turns),
        "trim_limit_ppm": num(s.trim_limit_ppm),
        "neighbour_timeout_updates": s.neighbour_timeout_updates,
        "crystal_tolerance_ppm": num(s.crystal_tolerance_ppm),
        "timestamp_jitter_s": num(s.timestamp_jitter_s),
        "latency_s": num(s.latency_s),
        "latency_max_s": num(s.latency_max_s),
        "asymmetry_s": num(s.asymmetry_s),
        "latency_known": s.latency_known,
        "beacon_version": s.beacon_version,
        "stamping": match s.stamping {
            entrain::sim::Stamping::CompletedTicks => "completed_ticks",
            entrain::sim::Stamping::Nearest => "nearest",
        },
        "late_stamp_fraction": num(s.late_stamp_fraction),
        "late_stamp_max_s": num(s.late_stamp_max_s),
        "trim_leak": opt(s.trim_leak),
        "delay_updates": s.delay_updates(),
        "loss_fraction": num(s.loss_fraction),
        "initial_spread_s": num(s.initial_spread_s),
        "lock_tolerance_s": num(s.lock_tolerance_s),
        "lock_budget_s": num(s.lock_budget_s),
        "lock_quantile": match s.quantile {
            LockQuantile::Fraction(q) => num(q),
            LockQuantile::Bound => json!("bound"),
        },
        "runs": s.runs,
        "seed": s.seed,
        "duration_s": opt(s.duration_s),
    })
}

fn spectrum_json(r: &NetworkModel) -> Value {
    let sp = &r.spectrum;
    json!({
        "source": r.source.keyword(),
        "node_count": sp.node_count,
        "lambda_slow": num(sp.lambda_slow),
        "lambda_max": num(sp.lambda_max),
        "max_degree": num(sp.max_degree),
        "pinned": sp.pinned,
        "stable_twisted_states": sp.stable_twisted_states,
        "flow_factor": opt(r.flow_factor),
    })
}

fn prediction_json(p: &Prediction) -> Value {
    let st = &p.stability;
    let settling = p.settling.map_or(Value::Null, |s| {
        json!({
            "asymptotic_s": num(s.asymptotic_s),
            "asymptotic_updates": s.asymptotic_updates,
            "bound_s": opt(s.bound_s),
            "bound_updates": s.bound_updates,
            "with_loss_s": num(s.with_loss_s),
            "sine_s": opt(s.sine_s),
            "sine_rate_factor": opt(s.sine_rate_factor),
            "slew_floor_updates": s.slew_floor_updates,
        })
    });
    let locking = p.locking.map_or(Value::Null, |l| {
        json!({
            "locks": l.locks,
            "lock_margin": num(l.lock_margin),
            "edge_flow_turns_per_update": num(l.edge_flow_turns_per_update),
            "edge_capacity_turns_per_update": num(l.edge_capacity_turns_per_update),
            "max_edge_lag_s": num(l.max_edge_lag_s),
            "max_correction_turns_per_update": num(l.max_correction_turns_per_update),
            "slew_ok": l.slew_ok,
            "trim_min_ppm": num(l.trim_min_ppm),
            "trim_max_ppm": num(l.trim_max_ppm),
            "trim_ok": l.trim_ok,
        })
    });
    let noise = p.noise.map_or(Value::Null, |n| {
        json!({
            "phase_sd_s": num(n.phase_sd_s),
            "measurement_sd_turns": num(n.measurement_sd_turns),
        })
    });
    let c = &p.constants;
    json!({
        "gains": {
            "kp": num(p.kp()),
            "ki": num(p.ki()),
            "kp_q16": c.kp_q16,
            "ki_q16": c.ki_q16,
            "leak_q16": c.leak_q16,
        },
        "node_constants": constants_json(p),
        "stability": {
            "stable": st.stable,
            "radius": num(st.radius),
            "radius_slow": num(st.radius_slow),
            "radius_fast": num(st.radius_fast),
            "mean_radius_with_loss": num(st.mean_radius_with_loss),
            "loss_slowdown": num(st.loss_slowdown),
            "gain_margin": num(st.gain_margin),
            "kp_limit": num(st.kp_limit),
            "delay_limit_updates": st.delay_limit_updates,
        },
        "margins": {
            "gain": num(p.margins.gain),
            "gain_required": num(p.margins.required.gain),
            "delay_updates": p.margins.delay_updates,
            "delay_updates_required": p.margins.required.delay_updates,
        },
        "settling": settling,
        "locking": locking,
        "noise": noise,
        "lock_s": opt(p.lock_s),
        "timer": {
            "ticks_per_period": p.timer.ticks_per_period,
            "period_s": num(p.timer.period_s),
            "period_error_ppm": num(p.timer.period_error_ppm),
            "tick_s": num(p.timer.tick_s),
            "update_ticks": p.timer.update_ticks,
        },
        "horizon_updates": p.horizon_updates,
        "settle_s": p.settle.map_or(Value::Null, |t| json!({
            "p50": opt(t.p50_s),
            "p90": opt(t.p90_s),
            "bound": num(t.bound_s),
            "compared": num(t.compared_s),
            "never_settled_fraction": num(t.never_settled_fraction),
        })),
        "noise_floor_s": p.noise_floor.map_or(Value::Null, |n| json!({
            "p50": num(n.p50_s),
            "p99": num(n.p99_s),
        })),
    })
}

fn constants_json(p: &Prediction) -> Value {
    let c = &p.constants;
    json!({
        "ticks_per_period": c.ticks_per_period,
        "update_ticks": c.update_ticks,
        "kp_q16": c.kp_q16,
        "ki_q16": c.ki_q16,
        "leak_q16": c.leak_q16,
        "slew_limit_counts": c.slew_limit_counts,
        "trim_limit_ppb": c.trim_limit_ppb,
        "timeout_ticks": c.timeout_ticks,
        "law": law_keyword(c.law),
    })
}

fn warnings_json(list: &[Warning]) -> Value {
    Value::Array(
        list.iter()
            .map(|w| json!({ "code": w.code(), "message": w.to_string() }))
            .collect(),
    )
}

fn choice_json(c: &Option<GainChoice>) -> Value {
    c.as_ref().map_or(Value::Null, |c| {
        json!({
            "kp": num(c.kp),
            "ki": num(c.ki),
            "lock_s": num(c.lock_s),
            "gain_margin": num(c.gain_margin),
            "delay_margin_updates": c.delay_margin_updates,
            "locks": c.locking.map(|l| l.locks),
            "meets_budget": c.meets_budget,
            "meets_margins": c.meets_margins,
        })
    })
}

fn ranges_json(r: &GainRanges) -> Value {
    let range = |r: Option<(f64, f64)>| r.map_or(Value::Null, |(a, b)| json!([num(a), num(b)]));
    json!({
        "kp": range(r.kp),
        "ki": range(r.ki),
        "ki_over_kp": range(r.ki_over_kp),
    })
}

fn tuning_json(t: &Tuning) -> Value {
    let search = match t.search {
        Search::Kp { .. } => "kp",
        Search::Ki { .. } => "ki",
        Search::Both => "kp_and_ki",
    };
    json!({
        "tuned": search,
        "feasible": t.feasible,
        "infeasibility": t.infeasibility.map(infeasibility_code),
        "meeting_budget": ranges_json(&t.meeting_budget),
        "meeting_budget_and_margins": ranges_json(&t.meeting_budget_and_margins),
        "recommended": choice_json(&t.recommended),
        "closest": choice_json(&t.closest),
        "fastest": choice_json(&t.fastest),
        "alternatives": {
            "update_rate_factor": num(t.alternatives.update_rate_factor),
            "middle_reference_lock_s": opt(t.alternatives.middle_reference_lock_s),
            "split_in_two_lock_s": opt(t.alternatives.split_in_two_lock_s),
        },
    })
}

fn verdict_json(a: &Assessment) -> Value {
    json!({
        "pass": a.verdict.pass,
        "reasons": a.verdict.reasons.iter().map(|x| json!({
            "code": x.code(),
            "message": x.to_string(),
        })).collect::<Vec<_>>(),
    })
}

fn check_map(r: &Assessment, command: &str) -> Map<String, Value> {
    let mut m = envelope(command, &r.scenario);
    m.insert("verdict".into(), verdict_json(r));
    m.insert("spectrum".into(), spectrum_json(&r.network));
    m.insert("gains_source".into(), json!(r.gains.source.keyword()));
    m.insert(
        "tuning".into(),
        r.gains.tuning.as_ref().map_or(Value::Null, tuning_json),
    );
    m.insert("prediction".into(), prediction_json(&r.prediction));
    let sim = r.simulation.as_ref().map_or(Value::Null, |v| {
        let s = &v.summary;
        let pct = |p: Option<entrain::sim::Percentiles>| {
            p.map_or(Value::Null, |p| {
                json!({ "p50": num(p.p50), "p90": num(p.p90), "p99": num(p.p99), "max": num(p.max) })
            })
        };
        json!({
            "runs": s.runs,
            "seed": v.seed,
            "settled_runs": s.settled_runs,
            "never_settled_fraction": num(s.never_settled_fraction),
            "twisted_fraction": opt(s.twisted_fraction),
            "settle_s": pct(s.settle_s),
            "settle_updates": pct(s.settle_updates),
            "settle_times_s": v.settle_times_s.iter().map(|t| num(*t)).collect::<Vec<_>>(),
            "first_entry_s": s.first_entry_s.map_or(Value::Null, |p| json!({
                "p50": num(p.p50), "p90": num(p.p90), "max": num(p.max),
            })),
            "noise_floor_s": s.noise_floor_turns.map_or(Value::Null, |n| json!({
                "p50": num(n.p50 * r.scenario.phase_period_s),
                "p99": num(n.p99 * r.scenario.phase_period_s),
            })),
            "residual_turns": opt(s.residual_turns),
            "residual_link_turns": opt(s.residual_link_turns),
            "jitter_turns": opt(s.jitter_turns),
            "neighbour_updates": s.neighbour_updates,
            "common_rate_max_ppm": num(s.common_rate_max_ppm),
            "trim_at_limit_fraction": num(s.trim_at_limit_fraction),
            "trim_error_ppm": s.trim_error_ppm.map_or(Value::Null, |p| json!({
                "p50": num(p.p50), "max": num(p.max),
            })),
            "trim_error_relative_ppm": s.trim_spread_error_ppm.map_or(Value::Null, |p| json!({
                "p50": num(p.p50), "max": num(p.max),
            })),
        })
    });
    m.insert("simulation".into(), sim);
    m.insert("warnings".into(), warnings_json(&r.warnings));
    m.insert("phase_error".into(), json!(PHASE_ERROR_NOTE));
    m.insert("caution".into(), json!(CAUTION));
    m
}

/// JSON of `check`.
#[must_use]
pub fn check(r: &Assessment, command: &str) -> String {
    pretty(&Value::Object(check_map(r, command)))
}

fn paths(list: &[PathBuf]) -> Value {
    Value::Array(
        list.iter()
            .map(|p| json!(p.display().to_string()))
            .collect(),
    )
}

/// JSON of `simulate`: the check object plus the plots and telemetry logs written.
#[must_use]
pub fn simulate(
    r: &Assessment,
    plots: &[PathBuf],
    failed: &[String],
    telemetry: &[PathBuf],
) -> String {
    let mut m = check_map(r, "simulate");
    m.insert("plots".into(), paths(plots));
    m.insert(
        "plots_failed".into(),
        Value::Array(failed.iter().map(|f| json!(f)).collect()),
    );
    m.insert("telemetry".into(), paths(telemetry));
    pretty(&Value::Object(m))
}

fn pair_json(v: &[(usize, usize)]) -> Value {
    Value::Array(v.iter().map(|&(a, b)| json!([a, b])).collect())
}

/// JSON of `field`.
#[must_use]
pub fn field(
    c: &entrain::field::FieldCheck,
    logs: &entrain::field::LogSet,
    plot: Option<&Path>,
) -> String {
    let a = &c.assessment;
    let r = &c.report;
    let p = &a.prediction;
    let mut m = envelope("field", &a.scenario);
    m.insert(
        "verdict".into(),
        json!({
            "pass": r.pass(),
            "reasons": r.reasons.iter().map(|x| json!({"code": x.code(), "message": x.to_string()})).collect::<Vec<_>>(),
        }),
    );
    let l = &r.log;
    m.insert(
        "logs".into(),
        json!({
            "files": paths(&logs.files),
            "lines": l.lines,
            "records": l.records,
            "other_lines": l.other_lines,
            "malformed_lines": l.malformed_count,
            "malformed": l.malformed.iter().map(|x| json!({"file": x.file.display().to_string(), "line": x.line, "message": x.message})).collect::<Vec<_>>(),
            "duplicates": l.duplicates,
            "conflicts": l.conflicts,
            "missing_updates": l.missing_updates,
            "reboots": l.reboots,
            "reboots_aligned": l.reboots_aligned,
            "counter_wraps": l.wraps,
        }),
    );
    let age = |x: Option<entrain::field::AgeStats>| {
        x.map_or(
            Value::Null,
            |x| json!({"p50": num(x.p50_s), "p90": num(x.p90_s), "max": num(x.max_s)}),
        )
    };
    m.insert(
        "links".into(),
        json!({
            "expected": r.links.iter().filter(|k| k.expected).count(),
            "present": r.links.iter().filter(|k| k.expected && k.heard()).count(),
            "missing": pair_json(&r.missing),
            "unexpected": pair_json(&r.unexpected),
            "each": r.links.iter().map(|k| json!({
                "a": k.a,
                "b": k.b,
                "expected": k.expected,
                "a_hears_b": k.a_hears_b,
                "b_hears_a": k.b_hears_a,
                "loss": opt(k.loss),
                "intervals": k.intervals,
                "age_s": age(k.age),
            })).collect::<Vec<_>>(),
        }),
    );
    m.insert(
        "nodes".into(),
        Value::Array(
            r.nodes
                .iter()
                .map(|n| {
                    json!({
                        "id": n.id,
                        "in_scenario": n.in_scenario,
                        "records": n.merge.records,
                        "missing_updates": n.merge.missing,
                        "reboots": n.merge.reboots,
                        "trim_ppm": opt(n.trim_ppm),
                        "crystal_ppm": opt(n.crystal_ppm),
                        "trim_at_limit": n.trim_at_limit,
                    })
                })
                .collect(),
        ),
    );
    m.insert(
        "observed".into(),
        json!({
            "rounds": r.rounds,
            "incomplete_rounds": r.incomplete_rounds,
            "settle_s": opt(r.settle_s),
            "noise_floor_s": r.noise_floor_s.map_or(Value::Null, |(a, b)| json!({"p50": num(a), "p99": num(b)})),
            "noise_floor_limit_s": opt(r.noise_limit_s),
            "crystals_estimated": r.crystals_estimated,
            "decay": r.decay.map_or(Value::Null, |d| json!({
                "fitted_per_update": num(d.fitted_per_update),
                "predicted_per_update": num(d.predicted_per_update),
                "fitted_time_constant_s": num(d.fitted_time_constant_s),
                "predicted_time_constant_s": num(d.predicted_time_constant_s),
                "from_s": num(d.from_s),
                "to_s": num(d.to_s),
                "points": d.points,
            })),
            "common_trim": r.common_trim.map_or(Value::Null, |c| json!({
                "from_s": num(c.from_s),
                "to_s": num(c.to_s),
                "points": c.points,
                "end_ppm": num(c.end_ppm),
                "slope_ppm_per_min": num(c.slope_ppm_per_min),
                "moved_ppm": num(c.moved_ppm),
                "trend_t": num(c.trend_t),
                "leak_time_constant_s": opt(c.leak_time_constant_s),
                "heading_to_ppm": opt(c.heading_to_ppm),
                "limit_ahead": c.limit_ahead(),
                "first_at_limit_node": c.first_at_limit.map_or(Value::Null, |(id, _)| json!(id)),
                "minutes_to_limit": opt(c.first_at_limit.map(|(_, min)| min)),
                "limit_ppm": num(c.limit_ppm),
            })),
        }),
    );
    m.insert(
        "predicted".into(),
        json!({
            "settle_s": p.settle.map_or(Value::Null, |t| json!({"p50": opt(t.p50_s), "p90": opt(t.p90_s), "compared": num(t.compared_s)})),
            "noise_floor_s": p.noise_floor.map_or(Value::Null, |n| json!({"p50": num(n.p50_s), "p99": num(n.p99_s)})),
            "decay_per_update": num(p.stability.mean_radius_with_loss),
        }),
    );
    m.insert(
        "warnings".into(),
        Value::Array(
            r.warnings
                .iter()
                .map(|w| json!({"code": w.code(), "message": w.to_string()}))
                .collect(),
        ),
    );
    m.insert(
        "plot".into(),
        plot.map_or(Value::Null, |p| json!(p.display().to_string())),
    );
    m.insert("phase_error".into(), json!(PHASE_ERROR_NOTE));
    m.insert("caution".into(), json!(CAUTION));
    pretty(&Value::Object(m))
}

/// JSON of `tune`: the verdict at the tuned gains (prediction only), the tuner's answer,
/// and the constants file written. With nothing to tune it is the `check` object.
#[must_use]
pub fn tune(r: &Assessment, written: Option<&Path>) -> String {
    let mut m = check_map(r, "tune");
    if let Some(t) = &r.gains.tuning {
        if let (Some(i), Value::Object(v)) = (
            t.infeasibility,
            m.get_mut("verdict").unwrap_or(&mut Value::Null),
        ) {
            v.insert(
                "tuning".into(),
                json!({ "code": infeasibility_code(i), "message": infeasibility(i, &r.scenario) }),
            );
        }
    }
    m.insert(
        "firmware_constants_file".into(),
        written.map_or(Value::Null, |p| json!(p.display().to_string())),
    );
    pretty(&Value::Object(m))
}

/// JSON of `spectrum`.
#[must_use]
pub fn spectrum(scenario: &Scenario, network: &NetworkModel) -> String {
    let mut m = envelope("spectrum", scenario);
    m.insert("spectrum".into(), spectrum_json(network));
    m.insert(
        "eigenvalues".into(),
        network.eigenvalues.as_ref().map_or(Value::Null, |e| {
            Value::Array(e.iter().map(|v| num(*v)).collect())
        }),
    );
    m.insert(
        "smallest_eigenvalues".into(),
        Value::Array(
            network
                .smallest_eigenvalues
                .iter()
                .map(|v| num(*v))
                .collect(),
        ),
    );
    m.insert(
        "slow_mode".into(),
        Value::Array(network.slow_mode.iter().map(|v| num(*v)).collect()),
    );
    pretty(&Value::Object(m))
}
