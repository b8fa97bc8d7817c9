//! One node of the emulated chain (started by `run-chain.sh`; see `kit::chain`).
#![no_std]
#![no_main]

use cortex_m_rt::{entry, exception};
use panic_semihosting as _;

#[entry]
fn main() -> ! {
    let Some(p) = cortex_m::Peripherals::take() else {
        kit::host::exit(false)
    };
    kit::host::exit(kit::chain::run(p.SYST, p.NVIC))
}

#[exception]
fn SysTick() {
    kit::chain::on_systick();
}

#[exception]
unsafe fn DefaultHandler(irqn: i16) {
    kit::chain::on_interrupt(irqn);
}
