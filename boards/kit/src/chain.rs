//! One node of the emulated chain: beacons left and right over two UARTs, the node law in
//! between, and a verdict over semihosting at the end.
//!
//! Started by `boards/run-chain.sh`, one QEMU instance per node; the instance's
//! command line (`-append`) says who it is: `node=I nodes=N ppm=E` and optionally
//! `delay=D` (the link delay the receive path is told, µs; default 0, none), `run_ms=`,
//! `tol_us=`, `kp_q16=`, `ki_q16=` and `leak_q16=` (gains in 1/65536; default 0.25, 0
//! and 0: the P law), `version=` (the beacon frame version sent, 1 or 2; default 2),
//! `smoothing=` (the node's delay smoothing shift, default 3), `trim_limit_ppm=`
//! (default 200), `slew_us=` (the slew limit, µs of phase per update; default 62,500,
//! the law's default of 1/16 turn), `telemetry=K` (a telemetry line every K updates,
//! default 1; 0: none) and `reference=1` (the node beacons and echoes but never steers:
//! no update, trim 0, so the chain's common rate is its crystal's; default 0).
//! UART0 is the link to node I−1, UART1 the link to node I+1 (the script gives the end
//! nodes a null line on the missing side).
//!
//! Time: CMSDK timer 0, free-running at the 25 MHz system clock and extended past its
//! wrap, is true time (read to 1 µs); the node's timer is that true time through a
//! [`Crystal`] `E` ppm off, at a nominal 1 MHz. SysTick, every 10 ms, only wakes the
//! loop: counting its interrupts lost time whenever the host descheduled QEMU.
//!
//! The node law runs a 1 s period with an update at each tenth of a turn of the node's
//! own phase (so the chain's updates line up once its phases do) and a beacon to each
//! side 35 to 75 ms before each update, by node id, so that beacons arrive far from the
//! receivers' update instants. Beacons go through [`BeaconPort`]: with version 2 (the
//! default) each carries its send stamp and one echo, for the left and the right
//! neighbour in turn, so every node measures each link's delay by two-way exchange
//! instead of being told it.
//!
//! Telemetry: every K updates the node writes the crate's telemetry line of that update
//! ([`entrain::telemetry::write_line`], `ET1 …`, its update count from 0 at the first
//! update) on its semihosting console, between the other lines; `run-chain.sh` sorts
//! them into one log per node for `entrain field`.
//!
//! Verdict: over the judging window (from 60 % to 90 % of the run) the node records, for
//! each neighbour, the phase difference of every received beacon (the neighbour's phase
//! at its send instant, carried forward by the told delay plus the delay the node has
//! measured on that link, against this node's phase then). It passes when it heard every
//! neighbour it should have and the 90th percentile of each neighbour's |difference| is
//! within the tolerance; the median, the largest and the mean are printed as well. It
//! also prints its mean rate trim over the window beside its programmed crystal error
//! (`chain: law PI node K programmed P ppm trim T ppm`), which `run-chain.sh` holds
//! against the whole chain's crystals: a node whose timer runs `P` ppm fast must trim
//! by about `−(P − mean P)` when the network's common rate is the crystals' mean, which
//! the trim leak holds it to.

use crate::cmsdk_uart::Uart;
use crate::crystal::Crystal;
use crate::host;
use crate::line::LineBuf;
use crate::link::FrameReceiver;
use core::sync::atomic::{AtomicU32, Ordering};
use cortex_m::peripheral::syst::SystClkSource;
use cortex_m::peripheral::{NVIC, SCB, SYST};
use cortex_m_semihosting::{hprint, hprintln};
use entrain::beacon::{BeaconPort, FrameVersion, MAX_FRAME_LEN};
use entrain::{Config, Gain, Law, Node, NodeId, Phase, UpdateReport};

/// Core clock of the mps2-an386, Hz.
const CORE_HZ: u32 = 25_000_000;
/// SysTick period: 10 ms (it only wakes the loop and extends the count; time is read
/// from the counter itself to 40 ns).
const SYSTICK_MS: u32 = 10;
const TICKS_PER_SYSTICK: u32 = CORE_HZ / 1_000 * SYSTICK_MS;
/// Timer ticks (nominal µs) per phase turn: a 1 s period.
pub const PERIOD_TICKS: u32 = 1_000_000;
/// Timer ticks between updates (and beacons): ten a second.
pub const UPDATE_TICKS: u32 = 100_000;
/// Updates per phase turn.
const UPDATES_PER_TURN: u64 = (PERIOD_TICKS / UPDATE_TICKS) as u64;
const _: () = assert!(PERIOD_TICKS.is_multiple_of(UPDATE_TICKS));

/// How long before its update instant node `id` sends its beacon, timer ticks: 35 to
/// 75 ms, by the id modulo five.
///
/// Far from both update instants of the interval (a late send or a late update of up to
/// 25 ms still leaves the beacon in its interval), and spread over the interval rather
/// than all at once: five QEMU processes sharing two host cores that all send (and wake
/// all their neighbours) at one instant are descheduled in turn, which stamps receptions
/// late (per-beacon |diff| medians of 260 to 390 µs with every node sending mid-interval,
/// against 86 to 97 µs with free-running schedules).
fn beacon_lead(id: u16) -> u32 {
    UPDATE_TICKS * 3 / 4 - u32::from(id % 5) * (UPDATE_TICKS / 10)
}

/// Timer ticks from a node at `phase` to its next update instant: the next phase of
/// `k / UPDATES_PER_TURN` turn that lies at least half an update interval ahead, at the
/// nominal rate (between half and one and a half intervals).
///
/// Update instants on the node's own phase, not on its timer from power-up, line the
/// chain's updates up once the phases are: a neighbour's beacon, sent 25 to 65 ms after
/// its update ([`beacon_lead`]), then arrives 35 to 75 ms before this node's next one,
/// so an update or a send late by up to 25 ms (the loop wakes every 10 ms; the host
/// deschedules QEMU) still has a fresh observation. With schedules fixed at power-up, a
/// link whose beacons happened to land within such a delay of the receiver's update
/// instant missed up to a quarter of its intervals (12.6 % on one link of a CI run). The
/// rate trim is left out of the conversion: at most 200 ppm of 150 ms, 30 µs, and
/// recomputed at every update, so it does not accumulate.
fn ticks_to_next_update(phase: Phase) -> u32 {
    const TURN: u64 = 1 << 32;
    // In units of 1 / (2^32 · UPDATES_PER_TURN) turn: the phase, and the smallest grid
    // point at least half an interval past it.
    let p = u64::from(phase.counts()) * UPDATES_PER_TURN;
    let k = (p + TURN / 2).div_ceil(TURN);
    let ahead = k * TURN - p; // in [TURN / 2, 3 · TURN / 2)
    // ahead / TURN update intervals; under 2^50, no overflow.
    (ahead * u64::from(UPDATE_TICKS) / TURN) as u32
}
/// Beacons judged per neighbour at most (the window holds about 60).
const JUDGED: usize = 128;
/// The UARTs of the two links.
const UART_LEFT: usize = 0x4000_4000;
const UART_RIGHT: usize = 0x4000_5000;
/// Their receive interrupts on the mps2-an386 (UART0 RX is IRQ 0, UART1 RX is IRQ 2).
const IRQ_LEFT: u16 = 0;
const IRQ_RIGHT: u16 = 2;

static SYSTICKS: AtomicU32 = AtomicU32::new(0);
static RX_IRQS: AtomicU32 = AtomicU32::new(0);

/// Call from the SysTick exception handler.
pub fn on_systick() {
    SYSTICKS.fetch_add(1, Ordering::Relaxed);
}

/// Call from the default interrupt handler: acknowledges the UART receive interrupts
/// (the main loop reads the bytes).
pub fn on_interrupt(irqn: i16) {
    RX_IRQS.fetch_add(1, Ordering::Relaxed);
    // SAFETY: only the interrupt-clear register is touched, which the main loop never
    // writes; a clear is idempotent.
    match irqn {
        0 => unsafe { Uart::new(UART_LEFT) }.clear_rx_interrupt(),
        2 => unsafe { Uart::new(UART_RIGHT) }.clear_rx_interrupt(),
        _ => {}
    }
}

#[derive(Clone, Copy)]
struct Irq(u16);

// SAFETY: the numbers are device interrupts of the mps2-an386.
unsafe impl cortex_m::interrupt::InterruptNumber for Irq {
    fn number(self) -> u16 {
        self.0
    }
}

/// CMSDK APB timer 0 of the mps2-an386: a 32-bit down counter at the 25 MHz system
/// clock, free-running from 0xFFFF_FFFF (it wraps every 171.8 s).
const TIMER0: usize = 0x4000_0000;

fn timer0_start() {
    // SAFETY: timer 0's RELOAD, VALUE and CTRL registers; nothing else uses the timer.
    unsafe {
        core::ptr::write_volatile((TIMER0 + 0x08) as *mut u32, u32::MAX);
        core::ptr::write_volatile((TIMER0 + 0x04) as *mut u32, u32::MAX);
        core::ptr::write_volatile(TIMER0 as *mut u32, 1);
    }
}

/// Core clocks counted by timer 0 since it started (wrapping).
fn timer0_elapsed() -> u32 {
    // SAFETY: timer 0's VALUE register, read only.
    u32::MAX - unsafe { core::ptr::read_volatile((TIMER0 + 0x04) as *const u32) }
}

/// Timer 0's count at the last read and the wraps seen, for [`true_us`].
static TIMER0_LAST: AtomicU32 = AtomicU32::new(0);
static TIMER0_WRAPS: AtomicU32 = AtomicU32::new(0);

/// True microseconds since timer 0 started: its count of core clocks, extended past its
/// wrap (every 171.8 s; the loop reads it at least every SysTick, 10 ms). Not the SysTick
/// interrupts counted: when the host deschedules QEMU for longer than a SysTick period,
/// expiries that fall due together raise one exception, and each one lost would set the
/// node's timer back 10 ms (measured: 60 to 138 ms in 30 s, several thousand ppm, on a
/// loaded 2-core host; the `time check` line prints it).
fn true_us() -> u64 {
    let now = timer0_elapsed();
    let last = TIMER0_LAST.swap(now, Ordering::Relaxed);
    let wraps = if now < last {
        TIMER0_WRAPS.fetch_add(1, Ordering::Relaxed).wrapping_add(1)
    } else {
        TIMER0_WRAPS.load(Ordering::Relaxed)
    };
    ((u64::from(wraps) << 32) | u64::from(now)) / u64::from(CORE_HZ / 1_000_000)
}

/// Microseconds since SysTick started, counted from its interrupts (for the time check).
fn systick_us() -> u64 {
    loop {
        let n = SYSTICKS.load(Ordering::Acquire);
        let current = SYST::get_current();
        // A wrap between the reads shows as a changed count, or as a SysTick exception
        // still pending: then read again.
        if SYSTICKS.load(Ordering::Acquire) == n && !SCB::is_pendst_pending() {
            let into =
                TICKS_PER_SYSTICK.wrapping_sub(1).wrapping_sub(current) / (CORE_HZ / 1_000_000);
            return u64::from(n) * u64::from(SYSTICK_MS * 1_000) + u64::from(into);
        }
    }
}

/// What one node was told on its command line.
struct Args {
    id: NodeId,
    nodes: u16,
    ppm: i32,
    delay_us: u32,
    run_ms: u32,
    tol_us: u32,
    kp_q16: u32,
    ki_q16: u32,
    leak_q16: u32,
    version: u8,
    smoothing: u8,
    trim_limit_ppm: u32,
    slew_us: u32,
    telemetry_every: u32,
    /// A reference node: it beacons and echoes but never steers (no update, trim 0).
    reference: bool,
}

fn args() -> Option<Args> {
    let mut buf = [0u8; 256];
    let line = host::command_line(&mut buf)?;
    let num = |key: &str, default: Option<i32>| {
        host::arg(line, key).and_then(host::parse_i32).or(default)
    };
    Some(Args {
        id: u16::try_from(num("node", None)?).ok()?,
        nodes: u16::try_from(num("nodes", None)?).ok()?,
        ppm: num("ppm", Some(0))?,
        delay_us: u32::try_from(num("delay", Some(0))?).ok()?,
        run_ms: u32::try_from(num("run_ms", Some(12_000))?).ok()?,
        tol_us: u32::try_from(num("tol_us", Some(10_000))?).ok()?,
        kp_q16: u32::try_from(num("kp_q16", Some(16_384))?).ok()?,
        ki_q16: u32::try_from(num("ki_q16", Some(0))?).ok()?,
        leak_q16: u32::try_from(num("leak_q16", Some(0))?).ok()?,
        version: u8::try_from(num("version", Some(2))?).ok()?,
        smoothing: u8::try_from(num("smoothing", Some(3))?).ok()?,
        trim_limit_ppm: u32::try_from(num("trim_limit_ppm", Some(200))?).ok()?,
        slew_us: u32::try_from(num("slew_us", Some(62_500))?).ok()?,
        telemetry_every: u32::try_from(num("telemetry", Some(1))?).ok()?,
        reference: num("reference", Some(0))? != 0,
    })
}

/// What the node saw of one neighbour inside the judging window.
#[derive(Clone, Copy)]
struct Seen {
    id: Option<NodeId>,
    frames: u32,
    largest: u32,
    sum: i64,
    /// |diff| of each judged beacon (the first `JUDGED`).
    abs: [u32; JUDGED],
}

impl Seen {
    const fn new() -> Self {
        Seen {
            id: None,
            frames: 0,
            largest: 0,
            sum: 0,
            abs: [0; JUDGED],
        }
    }

    fn record(&mut self, diff: i32) {
        if let Some(slot) = self.abs.get_mut(self.frames as usize) {
            *slot = diff.unsigned_abs();
        }
        self.frames = self.frames.wrapping_add(1);
        self.largest = self.largest.max(diff.unsigned_abs());
        self.sum = self.sum.wrapping_add(i64::from(diff));
    }

    /// The `percent` percentile of |diff| (nearest rank), sorting the record.
    fn percentile(&mut self, percent: usize) -> u32 {
        let n = (self.frames as usize).min(JUDGED);
        let Some(judged) = self.abs.get_mut(..n) else {
            return u32::MAX;
        };
        judged.sort_unstable();
        let rank = (n * percent).div_ceil(100).max(1);
        judged.get(rank - 1).copied().unwrap_or(u32::MAX)
    }
}

/// Counts to microseconds of a 100 ms period, rounded.
fn counts_to_us(counts: u32) -> u32 {
    ((u64::from(counts) * u64::from(PERIOD_TICKS) + (1 << 31)) >> 32) as u32
}

/// Parts per billion as `±W.T` ppm (rounded to a tenth), for printing without floats.
struct Ppm(i64);

impl core::fmt::Display for Ppm {
    fn fmt(&self, f: &mut core::fmt::Formatter<'_>) -> core::fmt::Result {
        let tenths = (self.0.unsigned_abs() + 50) / 100;
        let sign = if self.0 < 0 && tenths > 0 { '-' } else { '+' };
        write!(f, "{sign}{}.{}", tenths / 10, tenths % 10)
    }
}

fn signed_counts_to_us(counts: i64) -> i64 {
    let mag = counts_to_us(counts.unsigned_abs().min(u64::from(u32::MAX)) as u32);
    if counts < 0 {
        -i64::from(mag)
    } else {
        i64::from(mag)
    }
}

/// Run one chain node; true when its verdict is a pass.
/// (`_nvic` is taken to show that this code owns the interrupt controller.)
pub fn run(mut syst: SYST, _nvic: NVIC) -> bool {
    let Some(a) = args() else {
        hprintln!(
            "chain: command line must say node=I nodes=N [ppm=E delay=D run_ms=T tol_us=U kp_q16= ki_q16= leak_q16= version=1|2 telemetry=K]"
        );
        return false;
    };
    let crystal = Crystal::new(a.ppm);
    timer0_start();
    syst.set_clock_source(SystClkSource::Core);
    syst.set_reload(TICKS_PER_SYSTICK - 1);
    syst.clear_current();
    syst.enable_interrupt();
    syst.enable_counter();
    // SAFETY: the two UARTs of the links, used by this loop only (the handler only
    // clears their interrupt flags).
    let mut uarts = unsafe { [Uart::new(UART_LEFT), Uart::new(UART_RIGHT)] };
    for u in &mut uarts {
        u.enable(16);
    }
    // SAFETY: unmasking interrupts whose handler (`on_interrupt`) is installed.
    unsafe {
        NVIC::unmask(Irq(IRQ_LEFT));
        NVIC::unmask(Irq(IRQ_RIGHT));
    }
    let Ok(config) = Config::builder(PERIOD_TICKS, UPDATE_TICKS)
        .law(Law::Sine)
        .kp(Gain::from_q16(a.kp_q16))
        .ki(Gain::from_q16(a.ki_q16))
        .leak(Gain::from_q16(a.leak_q16))
        .delay_smoothing(a.smoothing)
        .trim_limit_ppb(a.trim_limit_ppm.saturating_mul(1_000))
        .slew_limit(
            ((u64::from(a.slew_us) << 32) / u64::from(PERIOD_TICKS)).min(i32::MAX as u64) as u32,
        )
        .build()
    else {
        hprintln!("chain: gains refused (0 < ki < kp, leak < ki or 0)");
        return false;
    };
    let version = match a.version {
        1 => FrameVersion::V1,
        2 => FrameVersion::V2,
        other => {
            hprintln!("chain: version must be 1 or 2, not {}", other);
            return false;
        }
    };
    let law = if a.ki_q16 == 0 { "P" } else { "PI" };
    let now = crystal.ticks_at(true_us());
    // Start phases spread by 0.129 turn a node, so neighbours begin far apart.
    let start = Phase::from_counts(u32::from(a.id).wrapping_mul(0x2100_0000));
    let mut port: BeaconPort<2> = BeaconPort::new(Node::new(config, start, now), a.id, 0);
    port.set_send_version(version);
    let mut rx = [FrameReceiver::new(), FrameReceiver::new()];
    let mut seen = [Seen::new(), Seen::new()];
    // The link delay measured on each side (beyond the told one), ticks, latest.
    let mut delay_seen = [0i32; 2];
    let expect_left = a.id > 0;
    let expect_right = a.id.wrapping_add(1) < a.nodes;
    let run_us = u64::from(a.run_ms) * 1_000;
    let judge_from = run_us * 6 / 10;
    let judge_to = run_us * 9 / 10;
    hprintln!(
        "node {}: crystal {:+} ppm, law {}, kp {}/65536, ki {}/65536, leak {}/65536, delay smoothing 2^-{}, trim limit {} ppm, slew limit {} us, beacon version {}, told link delay {} us, running {} ms",
        a.id,
        a.ppm,
        law,
        a.kp_q16,
        a.ki_q16,
        a.leak_q16,
        a.smoothing,
        a.trim_limit_ppm,
        a.slew_us,
        a.version,
        a.delay_us,
        a.run_ms
    );
    let boot_us = true_us();
    let boot_systick_us = systick_us();
    let mut next_update = now.wrapping_add(ticks_to_next_update(port.node().phase_at(now)));
    // The beacon of an interval goes out 35 to 75 ms before the update that ends it.
    let mut next_beacon = Some(next_update.wrapping_sub(beacon_lead(a.id)));
    let mut wire = [0u8; MAX_FRAME_LEN];
    let mut updates = 0u32;
    // The telemetry line of the latest update (two neighbours: under 130 bytes).
    let mut telemetry: LineBuf<160> = LineBuf::new();
    // Rate trim over the judging window: sum (ppb) and count of updates.
    let mut trim_sum = 0i64;
    let mut trim_n = 0i64;
    let mut worst_update_diff = 0u32;
    let mut short_updates = 0u32;
    // Per side over the judging window, at each update: the sum of the law's Δ (counts)
    // and of the measured link delay (ticks), and how many updates.
    let mut at_updates = [(0i64, 0i64, 0i64); 2];
    loop {
        // Sleep until a byte or the next millisecond, unless a byte is already here.
        cortex_m::interrupt::free(|_| {
            if !uarts.iter().any(Uart::has_byte) {
                cortex_m::asm::wfi();
            }
        });
        let elapsed_us = true_us().wrapping_sub(boot_us);
        // A byte from each UART in turn: where beacons from both sides arrive together,
        // draining one side's frame and processing it first would stamp the other side's
        // first byte late.
        loop {
            let mut read_any = false;
            for (side, (uart, receiver)) in uarts.iter_mut().zip(rx.iter_mut()).enumerate() {
                let Some(byte) = uart.try_read() else {
                    continue;
                };
                read_any = true;
                let t = crystal.ticks_at(true_us());
                let Some(found) = receiver.push(byte, t) else {
                    continue;
                };
                let rx_ticks = found.rx_ticks;
                port.node_mut().advance_to(rx_ticks);
                // A refused frame is counted by the port (and reported at the end).
                let Ok(got) = port.receive(found.frame(), rx_ticks, a.delay_us) else {
                    continue;
                };
                // The delay this node now holds for the link: told plus measured.
                let measured = port
                    .node()
                    .links()
                    .find(|l| l.id == got.frame.from)
                    .and_then(|l| l.measured_delay_ticks)
                    .unwrap_or(0);
                if let Some(d) = delay_seen.get_mut(side) {
                    *d = measured;
                }
                let sent_at = rx_ticks
                    .wrapping_sub(a.delay_us)
                    .wrapping_add_signed(measured.wrapping_neg());
                let own = port.node().phase_at(sent_at);
                let diff = Phase::from_counts(got.frame.phase_counts).diff(own);
                if let Some(s) = seen.get_mut(side) {
                    s.id = Some(got.frame.from);
                    if elapsed_us >= judge_from && elapsed_us < judge_to {
                        s.record(diff);
                    }
                }
            }
            if !read_any {
                break;
            }
        }
        let now = crystal.ticks_at(true_us());
        if let Some(at) = next_beacon
            && now.wrapping_sub(at) as i32 >= 0
        {
            next_beacon = None;
            let tx = crystal.ticks_at(true_us());
            if let Ok(sent) = port.send(tx, &mut wire) {
                // Byte by byte to both sides, so neither frame's first byte (the instant
                // its phase is stamped for) waits for the whole other frame.
                for &b in wire.get(..sent.wire_len()).unwrap_or(&[]) {
                    for u in &mut uarts {
                        u.write_byte(b);
                    }
                }
            }
        }
        if now.wrapping_sub(next_update) as i32 >= 0 {
            if elapsed_us >= judge_from && elapsed_us < judge_to {
                // What the law is about to pull with, per side (left: the lower id).
                port.node_mut().advance_to(now);
                for l in port.node().links() {
                    let side = usize::from(l.id > a.id);
                    if let Some(s) = at_updates.get_mut(side) {
                        s.0 = s.0.wrapping_add(i64::from(l.diff));
                        s.1 =
                            s.1.wrapping_add(i64::from(l.measured_delay_ticks.unwrap_or(0)));
                        s.2 = s.2.wrapping_add(1);
                    }
                }
            }
            // A reference keeps its own clock: it runs to the update instant and beacons,
            // but takes no step and integrates no trim.
            let report = if a.reference {
                port.node_mut().advance_to(now);
                UpdateReport::default()
            } else {
                port.node_mut().update(now)
            };
            telemetry.clear();
            if a.telemetry_every > 0 && updates.is_multiple_of(a.telemetry_every) {
                // Formatted now, from the state the update left; written once the next
                // instants are set (the beacon goes out 25 ms or more later). A line that
                // does not fit is left out rather than cut.
                let written = entrain::telemetry::write_line(
                    &mut telemetry,
                    a.id,
                    updates,
                    &report,
                    port.node(),
                )
                .and_then(|()| core::fmt::Write::write_str(&mut telemetry, "\n"));
                if written.is_err() {
                    telemetry.clear();
                }
            }
            updates = updates.wrapping_add(1);
            if elapsed_us >= judge_from && elapsed_us < judge_to {
                trim_sum = trim_sum.wrapping_add(i64::from(port.node().trim_ppb()));
                trim_n = trim_n.wrapping_add(1);
                worst_update_diff = worst_update_diff.max(report.largest_diff);
                let want = u8::from(expect_left) + u8::from(expect_right);
                if !a.reference && report.used < want {
                    short_updates = short_updates.wrapping_add(1);
                }
            }
            // The next update on the phase the update left (after a long stall too: no
            // catching up update by update), and the beacon 35 to 75 ms before it.
            next_update = now.wrapping_add(ticks_to_next_update(port.node().phase_at(now)));
            next_beacon = Some(next_update.wrapping_sub(beacon_lead(a.id)));
            if !telemetry.is_empty() {
                hprint!("{}", telemetry.as_str());
            }
            if elapsed_us >= run_us {
                break;
            }
        }
    }
    // Verdict.
    let tol_counts = ((u64::from(a.tol_us) << 32) / u64::from(PERIOD_TICKS)) as u32;
    let mut pass = true;
    for (side, expected) in [(0usize, expect_left), (1, expect_right)] {
        let Some(s) = seen.get_mut(side) else {
            continue;
        };
        let name = if side == 0 { "left" } else { "right" };
        if !expected {
            continue;
        }
        let median = s.percentile(50);
        let p90 = s.percentile(90);
        let ok = s.frames > 0 && p90 <= tol_counts;
        pass &= ok;
        let mean = if s.frames > 0 {
            s.sum / i64::from(s.frames)
        } else {
            0
        };
        hprintln!(
            "node {}: {} neighbour {:?}: {} beacons judged, |diff| median {} us, 90th percentile {} us, largest {} us; mean diff {} us: {}",
            a.id,
            name,
            s.id,
            s.frames,
            counts_to_us(median),
            counts_to_us(p90),
            counts_to_us(s.largest),
            signed_counts_to_us(mean),
            if ok { "ok" } else { "OUT OF TOLERANCE" }
        );
    }
    let rejects = port.rejects().total();
    hprintln!(
        "node {}: {} updates, largest |diff| seen by the law in the window {} us, {} updates short of a neighbour, trim {} ppb, {} rejected frames, {} bytes skipped, {} rx interrupts",
        a.id,
        updates,
        counts_to_us(worst_update_diff),
        short_updates,
        port.node().trim_ppb(),
        rejects,
        rx.iter().map(FrameReceiver::skipped).sum::<u32>(),
        RX_IRQS.load(Ordering::Relaxed)
    );
    let [left_delay, right_delay] = delay_seen;
    hprintln!(
        "node {}: link delay measured by two-way timing: left {} us, right {} us",
        a.id,
        left_delay,
        right_delay
    );
    // Both ends of a link see each other's difference with opposite signs unless the
    // link is biased: the sum of the two ends' means is that bias, which the PI law's
    // integral turns into a drift of the common rate (boards/README.md, "The chain").
    for (side, (diff, delay, n)) in at_updates.iter().enumerate() {
        if *n > 0 {
            hprintln!(
                "node {}: {} link at updates: mean diff {} us, mean measured delay {} us, {} updates",
                a.id,
                if side == 0 { "left" } else { "right" },
                signed_counts_to_us(diff / n),
                delay / n,
                n
            );
        }
    }
    let counted_us = systick_us().wrapping_sub(boot_systick_us);
    let reference_us = true_us().wrapping_sub(boot_us);
    hprintln!(
        "node {}: time check: timer 0 {} us since boot, SysTick interrupts counted {} us ({} us lost)",
        a.id,
        reference_us,
        counted_us,
        reference_us as i64 - counted_us as i64
    );
    let trim_mean = if trim_n > 0 { trim_sum / trim_n } else { 0 };
    hprintln!(
        "chain: law {} node {} programmed {:+} ppm trim {} ppm",
        law,
        a.id,
        a.ppm,
        Ppm(trim_mean)
    );
    hprintln!(
        "node {}: {} (tolerance {} us)",
        a.id,
        if pass { "PASS" } else { "FAIL" },
        a.tol_us
    );
    pass
}
