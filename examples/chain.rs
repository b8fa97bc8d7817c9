//! A string of eight nodes along a cable, each with its own crystal error, pulling into
//! step over beacons from its left and right neighbours. Prints the largest phase
//! difference between neighbours as it shrinks. (Invented demo scenario.)
//!
//! Run with `cargo run --example chain`.

use entrain::{Config, Gain, Law, Node, Observation, Phase};

const NODES: usize = 8;
/// 1 MHz timers, a 100 ms phase period, ten updates per period.
const TICKS_PER_PERIOD: u32 = 100_000;
const UPDATE_TICKS: u32 = 10_000;
/// Crystal errors in ppm, invented for the demo (within a typical ±20 ppm part).
const CRYSTAL_PPM: [i64; NODES] = [12, -7, 18, -15, 3, -19, 9, -2];

fn main() -> Result<(), entrain::ConfigError> {
    let config = Config::builder(TICKS_PER_PERIOD, UPDATE_TICKS)
        .law(Law::Sine)
        .kp(Gain::from_f32(0.3)?)
        .ki(Gain::from_f32(0.03)?)
        .build()?;
    // Start spread over a third of a turn.
    let mut nodes: Vec<Node<2>> = (0..NODES)
        .map(|i| Node::new(config, Phase::from_turns(i as f32 * 0.33 / NODES as f32), 0))
        .collect();
    let mut ticks = [0u32; NODES];
    println!("update   largest neighbour difference");
    for step in 1..=600u32 {
        // Each node's timer runs fast or slow by its crystal error.
        for (t, ppm) in ticks.iter_mut().zip(CRYSTAL_PPM) {
            *t = t.wrapping_add((i64::from(UPDATE_TICKS) * (1_000_000 + ppm) / 1_000_000) as u32);
        }
        // Every node beacons its phase to both neighbours (no delay in this demo).
        let phases: Vec<Phase> = nodes
            .iter()
            .zip(ticks)
            .map(|(n, t)| n.phase_at(t))
            .collect();
        for i in 0..NODES {
            for j in [i.wrapping_sub(1), i + 1] {
                if let Some(&phase) = phases.get(j) {
                    let obs = Observation {
                        from: j as u16,
                        phase,
                        rx_ticks: ticks[i],
                        delay_ticks: 0,
                    };
                    nodes[i].advance_to(ticks[i]);
                    if let Err(refused) = nodes[i].observe(obs) {
                        eprintln!("node {i}: {refused}");
                    }
                }
            }
        }
        for (n, t) in nodes.iter_mut().zip(ticks) {
            n.update(t);
        }
        if step % 50 == 0 || step == 1 {
            let worst = nodes
                .windows(2)
                .map(|w| w[0].phase().diff(w[1].phase()).unsigned_abs())
                .max()
                .unwrap_or(0);
            let turns = f64::from(worst) / 4_294_967_296.0;
            println!(
                "{step:6}   {turns:>11.8} turn  {:>10.3} µs",
                turns * 100_000.0
            );
        }
    }
    Ok(())
}
