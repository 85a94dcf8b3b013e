//! Build script: the board's memory layout, and the test clip stored in flash.
//!
//! * Cortex-M0 builds (thumbv6m) target QEMU's microbit, everything else its
//!   mps2-an386 (Cortex-M4F).
//! * The clip is raw little-endian `i16` from the file named by `STAPES_CLIP`
//!   (the host tests write the demo clip there); without it, one second of a
//!   deterministic integer test signal.
use std::{env, fs, path::PathBuf};

fn default_clip() -> Vec<u8> {
    // Two square-ish tones and a little LCG noise, integers only.
    let mut state: u32 = 0x1234_5678;
    (0..16_000u32)
        .flat_map(|n| {
            state = state.wrapping_mul(1_664_525).wrapping_add(1_013_904_223);
            let a: i32 = if (n / 16) % 2 == 0 { 6000 } else { -6000 };
            let b: i32 = if (n / 45) % 2 == 0 { 2500 } else { -2500 };
            let noise = ((state >> 16) as i32 & 0x3FF) - 512;
            ((a + b + noise) as i16).to_le_bytes()
        })
        .collect()
}

fn main() {
    let out = PathBuf::from(env::var_os("OUT_DIR").expect("cargo sets OUT_DIR"));
    let target = env::var("TARGET").unwrap_or_default();
    let m0 = target.starts_with("thumbv6m");
    let layout = if m0 {
        "memory-microbit.x"
    } else {
        "memory-mps2-an386.x"
    };
    println!(
        "cargo:rustc-env=STAPES_CORE={}",
        if m0 { "cortex-m0" } else { "cortex-m4f" }
    );
    fs::copy(layout, out.join("memory.x")).expect("memory layouts are next to Cargo.toml");
    println!("cargo:rustc-link-search={}", out.display());
    println!("cargo:rerun-if-changed=memory-microbit.x");
    println!("cargo:rerun-if-changed=memory-mps2-an386.x");
    println!("cargo:rerun-if-changed=../tables");
    println!("cargo:rerun-if-env-changed=STAPES_CLIP");
    let clip = match env::var_os("STAPES_CLIP") {
        Some(path) => {
            println!("cargo:rerun-if-changed={}", path.to_string_lossy());
            fs::read(&path)
                .unwrap_or_else(|e| panic!("STAPES_CLIP {}: {e}", path.to_string_lossy()))
        }
        None => default_clip(),
    };
    assert!(clip.len() % 2 == 0, "the clip must be whole 16-bit samples");
    fs::write(out.join("clip.raw"), clip).expect("write the clip");
}
