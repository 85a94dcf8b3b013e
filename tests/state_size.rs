//! RAM of the whole front-end state (sample history, FFT buffer, band
//! outputs, filter state, table view) for the reference preset, against the
//! targets in shared/DESIGN.md §4: fixed16 ≤ 2.5 KB, fixed32 ≤ 4 KB,
//! f32 ≤ 4 KB. Measured here with 64-bit pointers, an upper bound of the
//! 32-bit board's size (the firmware's size report gives the board figure).

use std::mem::size_of;

use stapes_core::FixedFrontEnd;
use stapes_core::FloatFrontEnd;
use stapes_core::fft::{Fixed16, Fixed32};

#[test]
fn the_reference_preset_state_fits_its_ram_targets() {
    let f32_state = size_of::<FloatFrontEnd<'static, 512, 352, 40>>();
    let fixed16 = size_of::<FixedFrontEnd<'static, Fixed16, 512, 352, 40>>();
    let fixed32 = size_of::<FixedFrontEnd<'static, Fixed32, 512, 352, 40>>();
    println!(
        "front-end state, speech16k-40: f32 {f32_state} B, fixed16 {fixed16} B, fixed32 {fixed32} B"
    );
    assert!(f32_state <= 4096, "f32 state {f32_state} B");
    assert!(fixed16 <= 2560, "fixed16 state {fixed16} B");
    assert!(fixed32 <= 4096, "fixed32 state {fixed32} B");
}
