//! Property tests of the node law (proptest).
mod common;
use common::{Chain, config, path_lambda_2, path_lambda_max};
use entrain::{Gain, Law, Node, Observation, Phase};
use proptest::prelude::*;

fn law() -> impl Strategy<Value = Law> {
    prop_oneof![Just(Law::Linear), Just(Law::Sine)]
}

/// Corrections of a node at `own` hearing neighbours at `others` (delay 0, heard now).
fn corrections(law: Law, kp: f32, ki: f32, own: u32, others: &[u32]) -> (i32, i32) {
    let mut n: Node<8> = Node::new(config(law, kp, ki), Phase::from_counts(own), 0);
    for (k, &p) in others.iter().enumerate() {
        let obs = Observation {
            from: k as u16,
            phase: Phase::from_counts(p),
            rx_ticks: 0,
            delay_ticks: 0,
        };
        n.observe(obs).unwrap();
    }
    let c = n.update(0).correction;
    (c, n.trim_ppb())
}

proptest! {
    #![proptest_config(ProptestConfig { cases: 256, ..ProptestConfig::default() })]

    /// Adding one offset to every phase — including across the 2^32 wrap — changes no
    /// correction and no trim (the law sees only wrapped differences).
    #[test]
    fn common_offset_changes_nothing(
        law in law(), own in any::<u32>(), others in prop::collection::vec(any::<u32>(), 1..8),
        offset in any::<u32>(), kp in 0.01f32..1.9, ki_frac in 0.0f32..0.99,
    ) {
        let ki = kp * ki_frac;
        let base = corrections(law, kp, ki, own, &others);
        let moved: Vec<u32> = others.iter().map(|p| p.wrapping_add(offset)).collect();
        prop_assert_eq!(base, corrections(law, kp, ki, own.wrapping_add(offset), &moved));
    }

    /// Two nodes with equal gains pull each other by equal and opposite amounts.
    #[test]
    fn pairwise_corrections_are_antisymmetric(
        law in law(), a in any::<u32>(), b in any::<u32>(), kp in 0.01f32..1.9,
    ) {
        let (ca, _) = corrections(law, kp, 0.0, a, &[b]);
        let (cb, _) = corrections(law, kp, 0.0, b, &[a]);
        prop_assert_eq!(ca, -cb);
    }

    /// Xiao & Boyd (2004): x⁺ = (I − εL)x converges iff 0 < ελmax < 2, with λmax of the
    /// path graph 2 − 2cos((n−1)π/n) (Fiedler 1973). Every mode then shrinks by at least
    /// ρ = max(|1 − ελ2|, |1 − ελmax|) per update, so the disagreement Σ(x − x̄)² falls
    /// by ρ² per update; the sine law, whose slope never exceeds the linear law's,
    /// converges too from an open half circle (Dörfler & Bullo 2014).
    #[test]
    fn chain_converges_below_the_step_bound(
        law in law(), n in 2usize..=64, frac in 0.05f64..0.95,
        spread in 0.01f64..0.49, seeds in prop::collection::vec(0.0f64..1.0, 64),
    ) {
        let bound = 2.0 / path_lambda_max(n);
        let kp = (bound * frac).min(1.99) as f32;
        let phases: Vec<Phase> =
            seeds.iter().take(n).map(|s| Phase::from_turns((s * spread) as f32)).collect();
        let mut chain = Chain::new(config(law, kp, 0.0), &phases, &vec![0; n]);
        let start = chain.disagreement();
        let eps = f64::from(Gain::from_f32(kp).unwrap().to_f32());
        let rho = (1.0 - eps * path_lambda_2(n)).abs().max((1.0 - eps * path_lambda_max(n)).abs());
        let steps = 60;
        let mut last = start;
        for _ in 0..steps {
            chain.step();
            let now = chain.disagreement();
            // Rounding of each step to whole counts adds at most ~n counts².
            prop_assert!(now <= last + n as f64 * 4.0, "disagreement grew: {last} → {now}");
            last = now;
        }
        if law == Law::Linear {
            // The ideal affine map shrinks the disagreement's norm by ρ per update. Each
            // node's step is rounded to whole counts (correction and phase advance; one
            // count at most relative to node 0's, measured over 3,000 random chains of 2
            // to 64 nodes; `PER_STEP` doubles that), a vector of norm ≤ √n·PER_STEP that the
            // later updates shrink by ρ too; summed as a geometric series, the rounded
            // run stays within √n·PER_STEP/(1 − ρ) of the ideal one in that norm
            // (triangle inequality; projecting out the mean does not lengthen a vector).
            const PER_STEP: f64 = 2.0;
            let ideal = (start * rho.powi(2 * steps)).sqrt();
            let slack = (n as f64).sqrt() * PER_STEP / (1.0 - rho);
            prop_assert!(
                last.sqrt() <= ideal + slack,
                "norm {} > ideal {ideal} + rounding {slack}", last.sqrt()
            );
        }
        prop_assert!(last < start || start < 1e4);
    }

    /// Above the bound the linear law's disagreement grows (Xiao & Boyd 2004).
    #[test]
    fn linear_chain_diverges_above_the_step_bound(
        n in 2usize..=64, frac in 1.05f64..1.5, seeds in prop::collection::vec(-1.0f64..1.0, 64),
    ) {
        let bound = 2.0 / path_lambda_max(n);
        prop_assume!(bound * frac < 1.99);
        let kp = (bound * frac) as f32;
        // A small start (1e-4 turn) so growth shows long before the wrap bounds it.
        let phases: Vec<Phase> =
            seeds.iter().take(n).map(|s| Phase::from_turns((s * 1e-4) as f32)).collect();
        let mut chain = Chain::new(config(Law::Linear, kp, 0.0), &phases, &vec![0; n]);
        let start = chain.disagreement();
        for _ in 0..150 {
            chain.step();
        }
        prop_assert!(chain.disagreement() > 100.0 * start, "{} vs {start}", chain.disagreement());
    }

    /// With constant crystal offsets the PI law drives every neighbour difference to
    /// within two counts of zero (0.5 ns at a 1 s period): a limit cycle of one count from
    /// rounding each step to whole counts, plus one count from reading two phases
    /// rounded down; the P-only law instead settles at the chain offsets
    /// of Strogatz & Mirollo (1988): with S_k = Σ_{i≤k}(ω_i − ω̄), edge k holds
    /// kp·pull(θ_{k+1} − θ_k) = −S_k, read as the differences the law acts on (just
    /// before an update; just after it, each is smaller by the step itself).
    #[test]
    fn pi_cancels_drift_and_p_only_leaves_the_chain_offsets(
        law in law(), n in 2usize..=8, ppm in prop::collection::vec(-50i32..=50, 8),
    ) {
        let ppm = &ppm[..n];
        let start = vec![Phase::ZERO; n];
        // P-only.
        let kp = 0.3f32;
        let mut p_only = Chain::new(config(law, kp, 0.0), &start, ppm);
        for _ in 0..800 {
            p_only.step();
        }
        p_only.advance();
        // Detuning per update in counts: e ppm of one turn.
        let omega: Vec<f64> = ppm.iter().map(|e| f64::from(*e) * 1e-6 * 4_294_967_296.0).collect();
        let mean = omega.iter().sum::<f64>() / n as f64;
        let kpq = f64::from(Gain::from_f32(kp).unwrap().to_f32());
        let mut s = 0.0;
        for (k, d) in p_only.edge_diffs().into_iter().enumerate() {
            s += omega[k] - mean;
            let want = match law {
                Law::Linear => -s / kpq,
                _ => -(s / (kpq * entrain::law::SINE_AMPLITUDE)).asin() * entrain::law::SINE_AMPLITUDE,
            };
            prop_assert!((f64::from(d) - want).abs() <= 0.01 * want.abs() + 3.0, "edge {k}: {d} vs {want}");
        }
        // PI.
        let mut pi = Chain::new(config(law, kp, 0.03), &start, ppm);
        for _ in 0..4000 {
            pi.step();
        }
        let worst = pi.edge_diffs().into_iter().map(i32::unsigned_abs).max().unwrap_or(0);
        prop_assert!(worst <= 2, "PI residual {worst} counts, ppm {ppm:?}");
    }
}
