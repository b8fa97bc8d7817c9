//! Sync pulse on the FPGA I/O LED register (LED0), defmt logs over semihosting.
#![no_std]
#![no_main]

use cortex_m_rt::entry;
use defmt_semihosting as _;
use panic_semihosting as _;

/// The mps2 FPGA I/O block's LED register (bit 0 is LED0), as QEMU models it.
const FPGAIO_LED: usize = 0x4002_8000;
/// The core clock, Hz.
const CORE_HZ: u32 = 25_000_000;

#[entry]
fn main() -> ! {
    let Some(p) = cortex_m::Peripherals::take() else {
        kit::host::exit(false)
    };
    // SAFETY: the LED register reads back its latch and nothing else drives LED0.
    let pin = unsafe { kit::pin::RegisterPin::new(FPGAIO_LED, 0) };
    kit::host::exit(kit::pulse::run(pin, p.SYST, CORE_HZ))
}
