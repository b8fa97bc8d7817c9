//! Counting instructions with SysTick under QEMU's `-icount shift=0`.
//!
//! With `-icount shift=0` QEMU advances virtual time by exactly 1 ns per instruction,
//! and SysTick, clocked from the core clock, counts virtual time: one tick is 40
//! instructions on the 25 MHz `mps2-an386` and 62.5 on the 16 MHz `microbit`. The
//! [`calibrate`](InstructionCounter::calibrate) loop measures that ratio instead of
//! trusting it. (The DWT cycle counter reads 0 under QEMU, so it is of no use here.)

use cortex_m::peripheral::SYST;
use cortex_m::peripheral::syst::SystClkSource;

/// SysTick as a free-running 24-bit down-counter.
pub struct InstructionCounter {
    _syst: SYST,
    /// Instructions per tick, Q16.16, from the calibration loop.
    per_tick_q16: u32,
}

const MASK: u32 = 0x00FF_FFFF;

impl InstructionCounter {
    /// Start SysTick from the core clock, no interrupt, full 24-bit reload.
    pub fn new(mut syst: SYST) -> Self {
        syst.disable_interrupt();
        syst.set_clock_source(SystClkSource::Core);
        syst.set_reload(MASK);
        syst.clear_current();
        syst.enable_counter();
        InstructionCounter {
            _syst: syst,
            per_tick_q16: 40 << 16,
        }
    }

    /// The counter now (counts down).
    #[inline(always)]
    pub fn now(&self) -> u32 {
        SYST::get_current()
    }

    /// Ticks from `start` to `end` (two [`now`](Self::now) readings less than 2^24
    /// ticks apart).
    #[inline(always)]
    pub fn ticks(start: u32, end: u32) -> u32 {
        start.wrapping_sub(end) & MASK
    }

    /// Run a loop of exactly `2·n` instructions and return the ticks it took.
    pub fn time_loop(&self, n: u32) -> u32 {
        let start = self.now();
        spin(n);
        Self::ticks(start, self.now())
    }

    /// Measure instructions per tick with loops of 200,000 and 400,000 instructions;
    /// the difference of the two cancels the cost of reading the counter. Returns the
    /// ticks of the 200,000 extra instructions.
    pub fn calibrate(&mut self) -> u32 {
        let short = self.time_loop(100_000);
        let long = self.time_loop(200_000);
        let ticks = long.wrapping_sub(short).max(1);
        self.per_tick_q16 = ((200_000u64 << 16) / u64::from(ticks)) as u32;
        ticks
    }

    /// Instructions per tick, Q16.16.
    pub fn per_tick_q16(&self) -> u32 {
        self.per_tick_q16
    }

    /// Instructions in `ticks`, Q16.16 (exact when the ratio is, as under icount).
    pub fn instructions_q16(&self, ticks: u64) -> u64 {
        ticks.wrapping_mul(u64::from(self.per_tick_q16))
    }
}

/// Exactly two instructions per iteration (`subs`, `bne`), `n` ≥ 1 iterations.
#[cfg(target_arch = "arm")]
#[inline(never)]
fn spin(n: u32) {
    // SAFETY: a register-only loop; no memory is touched.
    unsafe {
        core::arch::asm!(
            "2:",
            "subs r0, #1",
            "bne 2b",
            inout("r0") n.max(1) => _,
            options(nomem, nostack),
        );
    }
}

/// Host stand-in (no instruction-count promise), so the target-independent modules of
/// this crate can be unit-tested on the host.
#[cfg(not(target_arch = "arm"))]
fn spin(n: u32) {
    for i in 0..n {
        core::hint::black_box(i);
    }
}
