//! Tells the core which multiply and bit instructions the target has. Stable
//! Rust exposes no `target_feature` for these Arm cores, so the target name
//! decides. Every choice gives the same bits; only the instructions differ.
fn main() {
    println!("cargo:rerun-if-changed=build.rs");
    println!("cargo:rustc-check-cfg=cfg(stapes_no_long_multiply)");
    println!("cargo:rustc-check-cfg=cfg(stapes_arm_dsp)");
    println!("cargo:rustc-check-cfg=cfg(stapes_arm_block_copy)");
    println!("cargo:rustc-check-cfg=cfg(stapes_arm_fpu)");
    let target = std::env::var("TARGET").unwrap_or_default();
    // Armv6-M (Cortex-M0/M0+) and Armv8-M baseline (Cortex-M23): a 32 × 32
    // multiply gives the low 32 bits only, and there is no bit reversal.
    if target.starts_with("thumbv6m") || target.starts_with("thumbv8m.base") {
        println!("cargo:rustc-cfg=stapes_no_long_multiply");
    }
    // Every Cortex-M (Thumb): load-multiple and store-multiple copy blocks.
    if target.starts_with("thumbv") {
        println!("cargo:rustc-cfg=stapes_arm_block_copy");
    }
    // A single-precision FPU in the hard-float ABI (Cortex-M4F/M7/M33):
    // VSQRT.F32, correctly rounded like every IEEE-754 square root.
    if (target.starts_with("thumbv7em") || target.starts_with("thumbv8m.main"))
        && target.ends_with("eabihf")
    {
        println!("cargo:rustc-cfg=stapes_arm_fpu");
    }
    // Armv7E-M (Cortex-M4/M7): the DSP extension (SMMULR).
    if target.starts_with("thumbv7em") {
        println!("cargo:rustc-cfg=stapes_arm_dsp");
    }
}
