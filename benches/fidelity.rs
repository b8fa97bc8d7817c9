//! The fidelity table: forecast, planner bound and simulation side by side for every
//! scenario of the fidelity suite, with run times. `cargo bench --features sim --bench
//! fidelity`.
//!
//! Baseline, measured in the same run: the Monte Carlo of each scenario (`s.*` columns,
//! and its wall seconds `sim.s`); the forecast and the planner's bound are read against
//! it, figure by figure and in run time.

#[path = "../tests/fidelity_cases/mod.rs"]
mod fidelity_cases;

fn main() {
    let mut all = fidelity_cases::cases();
    let rows: Vec<fidelity_cases::Row> = all.iter_mut().map(fidelity_cases::evaluate).collect();
    println!("{}", fidelity_cases::table(&rows));
    println!(
        "columns: f.* forecast ({} samples), s.* simulation ({} runs), bound = planner's \
         worst-case settling, r50/r90 = forecast/simulated settling, bd/mx = bound/simulated \
         max, rN99 = forecast/simulated noise p99; f.s and sim.s wall seconds",
        fidelity_cases::SAMPLES,
        fidelity_cases::RUNS
    );
}
