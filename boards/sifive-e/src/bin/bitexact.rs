//! Replays the host's bit-exactness vectors through the node law; exits 0 on pass.
#![no_std]
#![no_main]

use semihosting::println;

#[riscv_rt::entry]
fn main() -> ! {
    let pass = match kit::vectors::replay(kit::NODE_LAW_VECTORS) {
        Ok(s) => {
            println!(
                "bitexact sifive_e (RISC-V, riscv32imc): PASS {} scenarios, {} events, {} updates, output digest {:08x}",
                s.scenarios, s.events, s.updates, s.digest
            );
            true
        }
        Err(e) => {
            println!("bitexact sifive_e (RISC-V, riscv32imc): FAIL {}", e);
            false
        }
    };
    semihosting::process::exit(if pass { 0 } else { 1 })
}

#[panic_handler]
fn panic(info: &core::panic::PanicInfo<'_>) -> ! {
    println!("panic: {}", info);
    semihosting::process::exit(101)
}
