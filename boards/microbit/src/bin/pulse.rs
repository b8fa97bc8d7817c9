//! Sync pulse on GPIO P0.13 (LED row 1), defmt logs over semihosting.
#![no_std]
#![no_main]

use cortex_m_rt::entry;
use defmt_semihosting as _;
use panic_semihosting as _;

/// nRF51 GPIO: the OUT register and the pin's configuration register.
const GPIO_OUT: usize = 0x5000_0504;
const GPIO_PIN_CNF_13: usize = 0x5000_0700 + 4 * 13;
/// The core clock, Hz.
const CORE_HZ: u32 = 16_000_000;

#[entry]
fn main() -> ! {
    let Some(p) = cortex_m::Peripherals::take() else {
        kit::host::exit(false)
    };
    // P0.13 as an output with its input buffer connected.
    // SAFETY: a GPIO configuration register of this chip.
    unsafe { core::ptr::write_volatile(GPIO_PIN_CNF_13 as *mut u32, 1) };
    // SAFETY: OUT reads back its latch and nothing else drives P0.13.
    let pin = unsafe { kit::pin::RegisterPin::new(GPIO_OUT, 13) };
    kit::host::exit(kit::pulse::run(pin, p.SYST, CORE_HZ))
}
