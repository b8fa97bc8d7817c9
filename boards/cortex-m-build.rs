//! Build script shared by the Cortex-M boards (each Cargo.toml points here): puts the
//! board's `memory.x` where the linker finds it and links with cortex-m-rt's `link.x`.
use std::{env, fs, path::PathBuf};

fn main() -> Result<(), Box<dyn std::error::Error>> {
    let out = PathBuf::from(env::var_os("OUT_DIR").ok_or("OUT_DIR not set")?);
    fs::copy("memory.x", out.join("memory.x"))?;
    println!("cargo:rustc-link-search={}", out.display());
    println!("cargo:rerun-if-changed=memory.x");
    println!("cargo:rustc-link-arg=-Tlink.x");
    // Only the pulse demo logs with defmt.
    if env::var_os("CARGO_FEATURE_PULSE").is_some() {
        println!("cargo:rustc-link-arg-bin=pulse=-Tdefmt.x");
    }
    Ok(())
}
