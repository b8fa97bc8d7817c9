//! The worked example of discrete consensus (Xiao & Boyd 2004), reproduced by real nodes.
mod common;
use common::{Chain, config};
use entrain::{Law, Phase};

/// One "unit" of the example is 2^24 counts (1/256 turn), so every value in the example
/// (multiples of 1/8 unit) is exact in fixed point.
const UNIT: f64 = 16_777_216.0;

#[test]
fn p5_chain_half_gain_first_three_updates() {
    // P5, ε = 0.5, x0 = [0, 1, 2, 3, 4]: x⁺ = (I − εL)x gives
    // [0.5, 1, 2, 3, 3.5], [0.75, 1.25, 2, 2.75, 3.25], [1, 1.375, 2, 2.625, 3]
    // (discrete consensus, Xiao & Boyd 2004; the steps worked by hand).
    let start: Vec<Phase> = (0..5).map(|k| Phase::from_counts(k << 24)).collect();
    let mut chain = Chain::new(config(Law::Linear, 0.5, 0.0), &start, &[0; 5]);
    let want = [
        [0.5, 1.0, 2.0, 3.0, 3.5],
        [0.75, 1.25, 2.0, 2.75, 3.25],
        [1.0, 1.375, 2.0, 2.625, 3.0],
    ];
    // No time passes between these updates, so only the law moves the phases.
    for row in want {
        chain.exchange();
        for (node, &t) in chain.nodes.iter_mut().zip(&chain.ticks) {
            node.update(t);
        }
        let got: Vec<f64> = chain
            .nodes
            .iter()
            .map(|n| f64::from(n.phase().counts()) / UNIT)
            .collect();
        assert_eq!(got, row);
    }
}
