//! The size probe's skeleton without the node law (the baseline of the size figures).
#![no_std]
#![no_main]

use cortex_m_rt::entry;
use panic_semihosting as _;

#[entry]
fn main() -> ! {
    kit::host::exit(kit::size::empty_loop(16))
}
