//! No float operation in the fixed-point path: the firmware example built for
//! Cortex-M0 (`thumbv6m-none-eabi`, no FPU) with a fixed arithmetic must link
//! no soft-float helper. Soft-float helpers are the compiler-rt / ARM RTABI
//! routines `__aeabi_f*`, `__aeabi_d*` and `__addsf3`, `__muldf3`,
//! `__fixsfsi`, `__floatsisf` and kin (ARM "Run-time ABI for the Arm
//! Architecture", §4.1; common practice). The same scan must find them in the
//! `f32` build, so the test can fail.

use std::path::Path;
use std::process::Command;

use object::{Object, ObjectSymbol};
use stapes_tests::repo_root;

fn is_soft_float(name: &str) -> bool {
    if name.starts_with("__aeabi_f") || name.starts_with("__aeabi_d") {
        // __aeabi_f* / __aeabi_d*: float and double arithmetic, compare, convert.
        return true;
    }
    let Some(rest) = name.strip_prefix("__") else {
        return false;
    };
    // __addsf3, __divdf3, __fixsfsi, __floatsidf, __extendsfdf2, __truncdfsf2, __eqsf2, …
    [
        "sf3", "df3", "sf2", "df2", "sfsi", "dfsi", "sfdi", "dfdi", "sisf", "sidf", "disf", "didf",
        "unsisf", "unsidf",
    ]
    .iter()
    .any(|suffix| rest.ends_with(suffix))
}

fn build_for_cortex_m0(feature: &str) -> Vec<String> {
    let dir = repo_root().join("firmware-example");
    let status = Command::new(std::env::var("CARGO").unwrap_or_else(|_| "cargo".into()))
        .current_dir(&dir)
        .args([
            "build",
            "--release",
            // Its own target folder whatever CARGO_TARGET_DIR says: the
            // ELF is read from there.
            "--target-dir",
            "target",
            "--target",
            "thumbv6m-none-eabi",
            "--no-default-features",
            "--features",
        ])
        .arg(if feature.contains("preset-") {
            feature.to_string()
        } else {
            format!("{feature},preset-speech16k-40")
        })
        .status()
        .expect("run cargo for the firmware example");
    assert!(
        status.success(),
        "the firmware example does not build for thumbv6m-none-eabi with {feature}"
    );
    let elf = dir.join("target/thumbv6m-none-eabi/release/stapes-firmware-example");
    symbols(&elf)
}

fn symbols(elf: &Path) -> Vec<String> {
    let data = std::fs::read(elf).unwrap_or_else(|e| panic!("{}: {e}", elf.display()));
    let file = object::File::parse(&*data).expect("an ELF file");
    file.symbols()
        .filter_map(|s| s.name().ok().map(str::to_string))
        .collect()
}

#[test]
fn the_fixed_paths_link_no_soft_float_helper_and_the_scan_can_see_them() {
    // Positive control first: the f32 path on a core without an FPU needs them.
    let f32_build = build_for_cortex_m0("f32");
    let found: Vec<&String> = f32_build.iter().filter(|s| is_soft_float(s)).collect();
    assert!(
        found.iter().any(|s| s.starts_with("__aeabi_f")),
        "the scan found no float helper in the f32 build: {found:?}"
    );
    // The model-input builds too, every kws16k chain (log and int8; range
    // floor and MFCC; PCEN) with the frame window, on Cortex-M0 without a float.
    for feature in [
        "fixed16",
        "fixed32",
        "fixed16,model-input,preset-kws16k-mel40",
        "fixed32,model-input,preset-kws16k-mel40",
        "fixed16,model-input,preset-kws16k-mfcc10",
        "fixed16,model-input,preset-kws16k-pcen40",
        "fixed32,model-input,preset-kws16k-pcen40",
    ] {
        let syms = build_for_cortex_m0(feature);
        assert!(
            syms.iter().any(|s| s.contains("spectrum_pairs")),
            "{feature}: the fixed path is not in the binary"
        );
        let floats: Vec<&String> = syms.iter().filter(|s| is_soft_float(s)).collect();
        assert!(
            floats.is_empty(),
            "{feature} links soft-float helpers: {floats:?}"
        );
    }
}
