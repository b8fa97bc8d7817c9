//! Regression tests of the hardening findings (issue 14), each with its reproduction:
//! an observation stamped far in the future, a receiver's reboot opening the door to
//! replays, the steady displacement a lying key holder holds its victim at, and the value
//! of `trim_ppb` after its division lost its panic path. (The two findings that live in
//! machine code, the tag comparison's branches and the reachable panic, are checked on
//! target by `boards/ct-check.sh` and `boards/panic-check.sh`.)

use entrain::law::SINE_AMPLITUDE;
use entrain::{Config, Gain, Law, Node, Observation, ObserveError, Phase};
use proptest::prelude::*;

/// A 1 MHz timer, a one-second period, ten updates per period, timeout 500 000 ticks.
fn config() -> Config {
    Config::builder(1_000_000, 100_000)
        .law(Law::Linear)
        .build()
        .unwrap()
}

fn obs(from: u16, phase: u32, rx_ticks: u32) -> Observation {
    Observation {
        from,
        phase: Phase::from_counts(phase),
        rx_ticks,
        delay_ticks: 0,
    }
}

/// The reproduction: an observation stamped about 2^31 ticks ahead used to be kept and,
/// as the newest from its neighbour, to shadow every genuine one for 2^31 ticks (36 min
/// at 1 MHz). It is refused now, and the genuine ones that follow are used.
#[test]
fn an_observation_from_the_future_is_refused_and_shadows_nothing() {
    let mut n: Node<2> = Node::new(config(), Phase::ZERO, 0);
    n.advance_to(1_000);
    let bogus = obs(7, 1 << 30, 1_000 + (1 << 31) - 1_000);
    assert_eq!(n.observe(bogus), Err(ObserveError::FromTheFuture(bogus)));
    assert_eq!(n.neighbour_count(), 0);
    // Genuine observations from the same neighbour, a few counts ahead, each update.
    for k in 1..=5u32 {
        let t = 1_000 + k * 100_000;
        let in_step = n.phase_at(t).counts().wrapping_add(2_000);
        n.advance_to(t);
        assert_eq!(n.observe(obs(7, in_step, t)), Ok(()));
        let r = n.update(t);
        assert_eq!(r.used, 1);
        // The genuine difference, not the bogus quarter turn.
        assert!(r.largest_diff <= 2_001, "update {k}: {r:?}");
    }
}

/// The bound is the timeout: a reception up to the timeout after the node's clock (a
/// frame heard between updates) is taken, one tick more is refused, and a reception
/// 2^31 + 1 ticks ahead reads as the past (old, evicted at the next update).
#[test]
fn the_future_bound_is_the_timeout() {
    let timeout = config().timeout_ticks();
    let mut n: Node<3> = Node::new(config(), Phase::ZERO, 10);
    assert_eq!(n.observe(obs(1, 0, 10 + timeout)), Ok(()));
    let over = obs(2, 0, 10 + timeout + 1);
    assert_eq!(n.observe(over), Err(ObserveError::FromTheFuture(over)));
    assert_eq!(
        n.observe(over).map_err(|e| e.observation()),
        Err(over),
        "the observation is handed back"
    );
    let half = obs(2, 0, 10u32.wrapping_add(1 << 31));
    assert_eq!(n.observe(half), Err(ObserveError::FromTheFuture(half)));
    assert_eq!(
        n.observe(obs(3, 0, 10u32.wrapping_add((1 << 31) + 1))),
        Ok(())
    );
    assert_eq!(n.update(10).evicted, 1);
}

proptest! {
    #![proptest_config(ProptestConfig::with_cases(256))]

    /// `trim_ppb` lost its `/` (a division-by-zero panic path in every firmware that
    /// sends a beacon) for `checked_div`; its value is the exact quotient, rounded toward
    /// zero, as before.
    #[test]
    fn trim_ppb_is_the_exact_quotient(ticks in 2u32.., ppb in -100_000_000i32..=100_000_000) {
        let c = Config::builder(ticks, 1_000).trim_limit_ppb(100_000_000).build().unwrap();
        let mut n: Node<1> = Node::new(c, Phase::ZERO, 0);
        n.set_trim_ppb(ppb);
        let exact = i128::from(n.trim_raw()) * 1_000_000_000 / i128::from(c.rate_nominal());
        prop_assert_eq!(i128::from(n.trim_ppb()), exact);
    }
}

/// The steady displacement of a victim with `h` honest neighbours and one liar, in turns,
/// as docs/design.md derives it: the phase x* where the liar's strongest pull balances
/// the honest ones, h · pull(−x*) + pull_max = 0, i.e. x* = pull⁻¹(pull_max / h):
/// asin(1/h) / 2π turn under the sine law, (2^31 − 1)/h counts under the linear law.
fn steady_displacement(law: Law, h: u32) -> f64 {
    match law {
        Law::Linear => f64::from(i32::MAX) / f64::from(h) / 4_294_967_296.0,
        _ => (1.0 / f64::from(h)).asin() / core::f64::consts::TAU,
    }
}

/// The liar's claim relative to the victim: the strongest pull of the law.
fn strongest_lie(law: Law) -> u32 {
    match law {
        Law::Linear => i32::MAX as u32,
        _ => 1 << 30,
    }
}

/// Runs the real `Node` against h honest neighbours that hold still at the reference
/// phase (as pinned nodes, or nodes with many other neighbours, do) and one liar that
/// hears the victim and always claims to be the law's strongest pull ahead of it. All
/// run at the nominal rate; links are compensated exactly. Returns the victim's final
/// displacement from the honest ones, in turns.
fn liar_run(law: Law, h: u16, kp: Gain, ki: Gain, slew: u32, updates: u32) -> f64 {
    let c = Config::builder(1_000_000, 100_000)
        .law(law)
        .kp(kp)
        .ki(ki)
        .slew_limit(slew)
        .build()
        .unwrap();
    let mut victim: Node<16> = Node::new(c, Phase::ZERO, 0);
    let honest = |t: u32| ((u64::from(t) << 32) / 1_000_000) as u32;
    let mut t = 0u32;
    for _ in 0..updates {
        t += 100_000;
        victim.advance_to(t);
        for j in 1..=h {
            victim.observe(obs(j, honest(t), t)).unwrap();
        }
        let lie = victim.phase_at(t).counts().wrapping_add(strongest_lie(law));
        victim.observe(obs(99, lie, t)).unwrap();
        victim.update(t);
    }
    f64::from(victim.phase_at(t).diff(Phase::from_counts(honest(t)))) / 4_294_967_296.0
}

/// The finding's figures, for the sine law: 1/12, 0.040 and 0.020 turn at h = 2, 4, 8.
#[test]
fn the_liar_holds_the_victim_where_the_formula_says() {
    for (h, want) in [(2u16, 1.0 / 12.0), (4, 0.0402), (8, 0.0199)] {
        let got = liar_run(
            Law::Sine,
            h,
            Gain::from_f32(0.1).unwrap(),
            Gain::ZERO,
            1 << 28,
            400,
        );
        assert!((got - want).abs() < 1e-4, "h = {h}: {got} turn");
        assert!((steady_displacement(Law::Sine, u32::from(h)) - want).abs() < 1e-4);
    }
}

proptest! {
    #![proptest_config(ProptestConfig::with_cases(48))]

    /// Over laws, h, gains and slew limits: the victim settles at x* within 2·10⁻⁵ turn
    /// (the integer sine's error, 5·10⁻⁵ of its peak, moves x* by less than 10⁻⁵ turn),
    /// independent of kp, ki and the slew limit, provided the loop at x* is stable:
    /// kp · h · pull'(x*) < 2, i.e. kp · √(h² − 1) < 2 (sine) and kp · h < 2 (linear).
    #[test]
    fn a_liars_steady_displacement_is_the_balance_of_pulls(
        sine in any::<bool>(),
        h in 2u16..=8,
        kp_per_h in 0.05f32..0.9,
        ki_share in prop_oneof![Just(None), (4u32..16).prop_map(Some)],
        slew_log2 in 22u32..30,
    ) {
        let law = if sine { Law::Sine } else { Law::Linear };
        let kp = Gain::from_f32(kp_per_h / f32::from(h)).unwrap();
        // No share: no integral term (P only).
        let ki = Gain::from_q16(ki_share.map_or(0, |share| kp.q16() / share));
        let got = liar_run(law, h, kp, ki, 1 << slew_log2, 3_000);
        let want = steady_displacement(law, u32::from(h));
        prop_assert!((got - want).abs() < 2e-5, "{law:?} h = {h}: got {got}, want {want}");
    }
}

/// The sine law's peak pull is its amplitude, 2^32/2π counts, at a quarter turn: the
/// liar's strongest claim used above.
#[test]
fn the_strongest_sine_lie_is_a_quarter_turn() {
    let peak = entrain::law::sine_pull(1 << 30);
    assert!((f64::from(peak) - SINE_AMPLITUDE).abs() <= f64::from(entrain::law::SINE_MAX_ERROR));
    for d in [(1 << 30) - (1 << 24), (1 << 30) + (1 << 24)] {
        assert!(entrain::law::sine_pull(d) < peak);
    }
}
