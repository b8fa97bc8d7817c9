//! The node law alone (one `Node<2>`, default sine PI law), for `.text`/`.bss` figures.
#![no_std]
#![no_main]

use cortex_m_rt::entry;
use panic_semihosting as _;

#[entry]
fn main() -> ! {
    kit::host::exit(kit::size::law_loop(16))
}
