//! A sync pulse on a board output pin: [`entrain::pulse::SyncPulse`] driven by a node
//! that pulls into step with a scripted leader, logged with `defmt`.
//!
//! The node's timer is SysTick (the core clock, extended to 32 bits by polling). The
//! leader runs 150 ppm fast and starts 0.3 turn ahead; the node hears it every update
//! (ten per period), steps toward it and trims its rate. Every edge of the pin is
//! checked against the pin's own register (read back through a second handle to the
//! same register, with [`StatefulOutputPin::is_set_high`]), and the run passes when the pulses kept one per turn, the
//! pin always read back what was written, and the node ended locked to the leader with
//! its trim near the leader's rate error.

use cortex_m::peripheral::SYST;
use cortex_m::peripheral::syst::SystClkSource;
use embedded_hal::digital::{OutputPin, StatefulOutputPin};
use entrain::pulse::{Edge, SyncPulse};
use entrain::{Config, Node, Observation, Phase};

/// Periods (turns) the demo runs.
pub const PERIODS: u32 = 40;
/// Updates per period.
pub const UPDATES_PER_PERIOD: u32 = 10;
/// The leader's rate error, ppm.
pub const LEADER_PPM: i64 = 150;
/// Largest phase difference to the leader accepted at the end: 1/1000 turn, counts.
pub const LOCK_TOLERANCE: u32 = 1 << 22;

/// SysTick extended to a wrapping 32-bit tick count (poll at least every 2^24 ticks).
struct Timer {
    _syst: SYST,
    last: u32,
    ticks: u32,
}

impl Timer {
    fn new(mut syst: SYST) -> Self {
        syst.disable_interrupt();
        syst.set_clock_source(SystClkSource::Core);
        syst.set_reload(0x00FF_FFFF);
        syst.clear_current();
        syst.enable_counter();
        Timer {
            _syst: syst,
            last: SYST::get_current(),
            ticks: 0,
        }
    }

    fn now(&mut self) -> u32 {
        let current = SYST::get_current();
        let elapsed = self.last.wrapping_sub(current) & 0x00FF_FFFF;
        self.last = current;
        self.ticks = self.ticks.wrapping_add(elapsed);
        self.ticks
    }
}

/// Run the demo on `pin` with SysTick at `core_hz`; true on pass.
pub fn run<P: OutputPin + StatefulOutputPin + Clone>(mut pin: P, syst: SYST, core_hz: u32) -> bool {
    // One turn per millisecond of the core clock, so the demo is short under icount.
    let period = core_hz / 1_000;
    let step = period / UPDATES_PER_PERIOD;
    let Ok(config) = Config::builder(period, step).build() else {
        defmt::error!("configuration refused");
        return false;
    };
    if pin.set_low().is_err() {
        return false;
    }
    let mut timer = Timer::new(syst);
    let start = timer.now();
    let mut node: Node<1> = Node::new(config, Phase::ZERO, start);
    // The leader's clock in Q32.32 counts, 150 ppm fast.
    let leader_rate =
        (u128::from(config.rate_nominal()) * (1_000_000 + LEADER_PPM) as u128 / 1_000_000) as u64;
    let mut leader: u64 = (Phase::from_turns(0.3).counts() as u64) << 32;
    let mut leader_at = start;
    let mut probe = pin.clone();
    let mut pulse = SyncPulse::new(pin, period / 10, &node);
    defmt::info!(
        "sync pulse: {=u32} ticks a turn, {=u32} per update, leader {=i64} ppm fast and 0.3 turn ahead",
        period,
        step,
        LEADER_PPM
    );
    let (mut rising, mut falling, mut readback_errors) = (0u32, 0u32, 0u32);
    let mut next = start.wrapping_add(step);
    let mut updates = 0u32;
    let mut last_diff = i32::MAX;
    while updates < PERIODS * UPDATES_PER_PERIOD {
        let now = timer.now();
        // Both clocks run to `now`.
        leader =
            leader.wrapping_add(u64::from(now.wrapping_sub(leader_at)).wrapping_mul(leader_rate));
        leader_at = now;
        if now.wrapping_sub(next) as i32 >= 0 {
            let obs = Observation {
                from: 1,
                phase: Phase::from_counts((leader >> 32) as u32),
                rx_ticks: now,
                delay_ticks: 0,
            };
            // The table holds the leader's one entry: a refusal cannot happen here.
            let _ = node.observe(obs);
            let report = node.update(now);
            last_diff = Phase::from_counts((leader >> 32) as u32).diff(node.phase());
            if report.slew_limited {
                defmt::debug!(
                    "update {=u32}: slew limited step {=i32}",
                    updates,
                    report.correction
                );
            }
            next = next.wrapping_add(step);
            updates = updates.wrapping_add(1);
        } else {
            node.advance_to(now);
        }
        match pulse.poll(&node) {
            Ok(Edge::Rising) => {
                rising = rising.wrapping_add(1);
                defmt::info!(
                    "pulse {=u32} up at tick {=u32}: leader {=i32} counts ahead, trim {=i32} ppb",
                    rising,
                    now.wrapping_sub(start),
                    last_diff,
                    node.trim_ppb()
                );
            }
            Ok(Edge::Falling) => falling = falling.wrapping_add(1),
            Ok(Edge::None) => continue,
            Err(_) => {
                defmt::error!("pin error");
                return false;
            }
        }
        // After every edge the pin's register must say what the driver did.
        if probe.is_set_high().ok() != Some(pulse.is_high()) {
            readback_errors = readback_errors.wrapping_add(1);
        }
    }
    let trim = node.trim_ppb();
    let trim_error = (i64::from(trim) - LEADER_PPM * 1_000).unsigned_abs();
    let locked = last_diff.unsigned_abs() <= LOCK_TOLERANCE;
    let one_per_turn = rising.abs_diff(PERIODS) <= 2 && rising.wrapping_sub(falling) <= 1;
    let pass = locked && one_per_turn && readback_errors == 0 && trim_error <= 20_000;
    defmt::info!(
        "{=u32} pulses up, {=u32} down over {=u32} turns; pin read back wrong {=u32} times; leader {=i32} counts ahead; trim {=i32} ppb (leader +{=i64} ppm)",
        rising,
        falling,
        PERIODS,
        readback_errors,
        last_diff,
        trim,
        LEADER_PPM
    );
    if pass {
        defmt::info!("sync pulse: PASS");
    } else {
        defmt::error!("sync pulse: FAIL");
    }
    pass
}
