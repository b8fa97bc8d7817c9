//! Replays the host's bit-exactness vectors through the node law; exits 0 on pass.
#![no_std]
#![no_main]

use cortex_m_rt::entry;
use panic_semihosting as _;

#[entry]
fn main() -> ! {
    kit::host::exit(kit::vectors::report("mps2-an386 (Cortex-M4F)"))
}
