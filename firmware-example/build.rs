//! Puts the board's memory layout where the cortex-m-rt linker script finds
//! it: Cortex-M0 builds (thumbv6m) target QEMU's microbit, everything else
//! its mps2-an386 (Cortex-M4F).
use std::{env, fs, path::PathBuf};

fn main() {
    let out = PathBuf::from(env::var_os("OUT_DIR").expect("cargo sets OUT_DIR"));
    let target = env::var("TARGET").unwrap_or_default();
    let layout = if target.starts_with("thumbv6m") { "memory-microbit.x" } else { "memory-mps2-an386.x" };
    fs::copy(layout, out.join("memory.x")).expect("memory layouts are next to Cargo.toml");
    println!("cargo:rustc-link-search={}", out.display());
    println!("cargo:rerun-if-changed=memory-microbit.x");
    println!("cargo:rerun-if-changed=memory-mps2-an386.x");
    println!("cargo:rerun-if-changed=../tables");
}
