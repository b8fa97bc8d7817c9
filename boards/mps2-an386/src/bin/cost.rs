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
        "mps2-an386 Cortex-M4F",
        &kit::cost::Goals {
            core: "M4F",
            fixed: 100,
            per_neighbour: 30,
        },
    );
    kit::host::exit(true)
}
