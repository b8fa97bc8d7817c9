//! Prints instructions per `Node::update` for every law (built with `--features f32-laws`).
#![no_std]
#![no_main]

use cortex_m_rt::entry;
use panic_semihosting as _;

#[entry]
fn main() -> ! {
    let Some(p) = cortex_m::Peripherals::take() else {
        kit::host::exit(false)
    };
    let mut counter = kit::icount::InstructionCounter::new(p.SYST);
    kit::cost::print_table(
        &mut counter,
        "microbit Cortex-M0",
        &kit::cost::Goals {
            core: "M0",
            fixed: 250,
            per_neighbour: 45,
        },
    );
    kit::host::exit(true)
}
