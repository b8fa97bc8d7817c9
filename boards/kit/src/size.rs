//! The smallest useful firmware around the node law, for `.text`/`.bss` figures.
//!
//! [`law_loop`] keeps one `Node<2>` in a `static` (so its state shows in `.bss`), hands
//! it an observation and updates it `iterations` times with inputs the optimiser cannot
//! see through. [`empty_loop`] is the same skeleton without the node; the difference of
//! the two firmware sizes is what the law costs in flash and RAM.

use core::hint::black_box;
use entrain::{Config, Node, Observation, Phase};

/// 1 MHz timer, 1 s period, ten updates a second; the default sine PI law.
const CONFIG: Config = match Config::builder(1_000_000, 100_000).build() {
    Ok(c) => c,
    Err(_) => panic!("bad size-probe configuration"),
};

/// Run the node law `iterations` times; true when it pulled every time.
pub fn law_loop(iterations: u32) -> bool {
    // A `static` taken once: its state sits in RAM the linker counts.
    let Some(node) = cortex_m::singleton!(: Node<2> = Node::new(CONFIG, Phase::ZERO, 0)) else {
        return false;
    };
    let mut pulled = 0u32;
    {
        let mut now = 0u32;
        for i in 0..iterations {
            let obs = Observation {
                from: black_box(1),
                phase: Phase::from_counts(black_box(i.wrapping_mul(0x0100_0000))),
                rx_ticks: now,
                delay_ticks: black_box(0),
            };
            if node.observe(obs).is_ok() {
                now = now.wrapping_add(100_000);
                let report = black_box(node.update(black_box(now)));
                pulled = pulled.wrapping_add(u32::from(report.used));
            }
        }
    }
    pulled == iterations
}

/// The same loop without the node.
pub fn empty_loop(iterations: u32) -> bool {
    let mut pulled = 0u32;
    for i in 0..iterations {
        pulled = pulled.wrapping_add(black_box(u32::from(black_box(i) < iterations)));
    }
    pulled == iterations
}
