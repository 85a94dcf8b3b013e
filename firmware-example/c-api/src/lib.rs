//! The stapes core as a C static library.
//!
//! * **State** is caller-owned: `stapes_f32_state`, `stapes_fixed16_state`
//!   and `stapes_fixed32_state` are plain structs of the sizes the header
//!   states, declared wherever the firmware likes (static, stack, a pool).
//!   The library never allocates.
//! * **Initialisation** from a preset compiled into the library
//!   (`stapes_*_init_preset`) or from a table blob in flash
//!   (`stapes_*_init_blob`, checked: magic, version, length, CRC-32,
//!   sections, and the tables against the configuration). The caller names
//!   the stage whose output the frames carry: the filterbank's energies,
//!   any stage the configuration has, or the last (the model's input).
//! * **Streaming**: `stapes_*_next_frame` consumes 16-bit samples until a
//!   frame completes and hands it out; `stapes_*_reset` starts over.
//! * **The model's window**: `stapes_window_*` keeps the last frames in
//!   caller storage.
//! * **Status codes** are `int32_t` constants: 0 success, 1 a frame ready,
//!   negative an error, `stapes_status_message` says what to change.
//!
//! Every arithmetic's functions are separate symbols, so the linker keeps
//! only the arithmetic (and the preset tables) a firmware calls. Panics
//! never unwind into C: the library is built with `panic = "abort"`, its
//! per-frame path has no panicking operation the core's tests know of, and
//! the panic handler stops the core (a breakpoint, then a loop).
//!
//! The header `include/stapes.h` is generated from this crate by cbindgen
//! and committed; a host test fails when it drifts from the code.
#![no_std]
#![allow(non_camel_case_types)]
#![deny(unsafe_op_in_unsafe_fn)]

mod capacity;
mod engine;
mod presets;
mod status;
mod window;

use core::ffi::{CStr, c_char};
use core::mem::{MaybeUninit, align_of, size_of};

use stapes_core::blob::{BlobError, TableBlob};
use stapes_core::table::FilterbankForm;
use stapes_core::{F32, Fixed16, Fixed32};

pub use crate::capacity::{
    STAPES_CAPACITY_BANDS, STAPES_CAPACITY_FFT_POINTS, STAPES_CAPACITY_OVERLAP_SAMPLES,
    STAPES_CAPACITY_VALUES,
};
use crate::engine::{CArithmetic, Engine};
pub use crate::status::*;
pub use crate::window::{stapes_window, stapes_window_view};

/// 64-bit words of a `stapes_f32_state`.
pub const STAPES_F32_STATE_WORDS: usize = 993;
/// 64-bit words of a `stapes_fixed16_state`.
pub const STAPES_FIXED16_STATE_WORDS: usize = 600;
/// 64-bit words of a `stapes_fixed32_state`.
pub const STAPES_FIXED32_STATE_WORDS: usize = 856;
/// Alignment in bytes every state needs (its words give it).
pub const STAPES_STATE_ALIGN: usize = 8;

/// The f32 front end's state (for cores with an FPU). Its contents are
/// private; only its size and alignment matter to C.
#[repr(C)]
pub struct stapes_f32_state {
    words: [u64; STAPES_F32_STATE_WORDS],
}

/// The 16-bit fixed-point front end's state (integers only).
#[repr(C)]
pub struct stapes_fixed16_state {
    words: [u64; STAPES_FIXED16_STATE_WORDS],
}

/// The 32-bit fixed-point front end's state (integers only).
#[repr(C)]
pub struct stapes_fixed32_state {
    words: [u64; STAPES_FIXED32_STATE_WORDS],
}

// Each state struct must hold its engine exactly (the words rounded up):
// when the core's types change size, this names the constant to update.
macro_rules! state_fits {
    ($state:ty, $words:ident, $engine:ty) => {
        const _: () = {
            let need = size_of::<$engine>();
            assert!(
                $words == need.div_ceil(8),
                concat!(
                    stringify!($words),
                    " is stale: set it to size_of::<Engine>() / 8 rounded up, then regenerate the header"
                )
            );
            assert!(align_of::<$engine>() <= STAPES_STATE_ALIGN);
            assert!(size_of::<$state>() == 8 * $words);
        };
    };
}
state_fits!(stapes_f32_state, STAPES_F32_STATE_WORDS, Engine<F32>);
state_fits!(
    stapes_fixed16_state,
    STAPES_FIXED16_STATE_WORDS,
    Engine<Fixed16>
);
state_fits!(
    stapes_fixed32_state,
    STAPES_FIXED32_STATE_WORDS,
    Engine<Fixed32>
);

/// One frame as the library hands it out. `values` points into the state
/// and stays valid until the next call on that state.
#[repr(C)]
pub struct stapes_frame {
    /// Frame number from the start of the stream: frame `i` covers samples
    /// `[i·hop, i·hop + window)`.
    pub index: u64,
    /// `count` values of `value_type`.
    pub values: *const core::ffi::c_void,
    /// Values in the frame.
    pub count: u32,
    /// A `STAPES_VALUE_*` code.
    pub value_type: i32,
    /// The `STAPES_STAGE_*` whose output this is.
    pub stage: i32,
}

pub(crate) use stapes_frame as StapesFrame;

/// What a front end was initialised with.
#[repr(C)]
pub struct stapes_stream_info {
    /// Samples per second.
    pub sample_rate_hz: u32,
    /// Samples between frame starts.
    pub hop_samples: u32,
    /// Samples in a frame.
    pub window_samples: u32,
    /// FFT points.
    pub fft_points: u32,
    /// Mel bands.
    pub bands: u32,
    /// Frames the model reads at once (the configuration's model window; 0
    /// when it names none).
    pub model_window_frames: u32,
    /// The model runs every this many frames once its window is full.
    pub model_window_stride: u32,
    /// The `STAPES_STAGE_*` the frames carry.
    pub stage: i32,
}

// ---- shared implementation ----

/// # Safety
/// `state` is null or points to `words` writable, 8-aligned 64-bit words.
unsafe fn slot<'a, A: CArithmetic, S>(state: *mut S) -> Option<&'a mut MaybeUninit<Engine<A>>> {
    // SAFETY: the caller's contract; the size check is at compile time.
    unsafe { state.cast::<MaybeUninit<Engine<A>>>().as_mut() }
}

/// # Safety
/// As [`slot`], and initialised by an init function of the same arithmetic
/// when its first word holds the magic.
unsafe fn engine<'a, A: CArithmetic, S>(state: *mut S) -> Result<&'a mut Engine<A>, i32> {
    // SAFETY: the caller's contract.
    let slot = unsafe { slot::<A, S>(state) }.ok_or(STAPES_ERROR_NULL_ARGUMENT)?;
    if !Engine::<A>::is_initialised(slot) {
        return Err(STAPES_ERROR_NOT_INITIALISED);
    }
    // SAFETY: the magic says an init of this arithmetic wrote the engine.
    Ok(unsafe { slot.assume_init_mut() })
}

fn blob_status(e: BlobError) -> i32 {
    match e {
        BlobError::TooShort { .. } => STAPES_ERROR_BLOB_TOO_SHORT,
        BlobError::BadMagic => STAPES_ERROR_BLOB_NOT_A_BLOB,
        BlobError::UnsupportedVersion { .. } => STAPES_ERROR_BLOB_VERSION,
        BlobError::LengthMismatch { .. } => STAPES_ERROR_BLOB_LENGTH,
        BlobError::BadCrc { .. } => STAPES_ERROR_BLOB_CHECKSUM,
        BlobError::Misaligned => STAPES_ERROR_BLOB_ALIGNMENT,
        BlobError::MissingSection { .. } => STAPES_ERROR_BLOB_MISSING_SECTION,
        BlobError::Table(_) => STAPES_ERROR_TABLES,
        BlobError::StageTables(_) => STAPES_ERROR_STAGE_TABLES,
        _ => STAPES_ERROR_BLOB_MALFORMED,
    }
}

/// The sparse form when the blob has it, else the compact one.
fn either_form<T>(read: impl Fn(FilterbankForm) -> Result<T, BlobError>) -> Result<T, BlobError> {
    match read(FilterbankForm::Sparse) {
        Err(BlobError::MissingSection { .. }) => read(FilterbankForm::Compact),
        other => other,
    }
}

/// # Safety
/// `blob` is null or valid for `bytes` bytes for as long as the state is used.
unsafe fn init_blob<A: CArithmetic, S>(
    state: *mut S,
    blob: *const u8,
    bytes: usize,
    stage: i32,
    tables: impl Fn(&TableBlob<'static>) -> Result<A::Tables<'static>, BlobError>,
) -> i32 {
    // SAFETY: the caller's contract.
    let Some(slot) = (unsafe { slot::<A, S>(state) }) else {
        return STAPES_ERROR_NULL_ARGUMENT;
    };
    if blob.is_null() {
        return STAPES_ERROR_NULL_ARGUMENT;
    }
    forget(slot);
    // SAFETY: the caller's contract: the blob outlives the state.
    let bytes: &'static [u8] = unsafe { core::slice::from_raw_parts(blob, bytes) };
    let parsed = match TableBlob::parse(bytes) {
        Ok(b) => b,
        Err(e) => return blob_status(e),
    };
    let stages = match parsed.stage_tables() {
        Ok(s) => s,
        Err(e) => return blob_status(e),
    };
    match tables(&parsed) {
        Ok(t) => Engine::<A>::init(slot, parsed.config(), t, stages, stage),
        Err(e) => blob_status(e),
    }
}

/// Marks a slot as not initialised before an init that may fail.
fn forget<A: CArithmetic>(slot: &mut MaybeUninit<Engine<A>>) {
    Engine::<A>::forget(slot);
}

/// # Safety
/// As the public `*_next_frame` functions.
unsafe fn next_frame<A: CArithmetic, S>(
    state: *mut S,
    samples: *const i16,
    count: usize,
    consumed: *mut usize,
    frame: *mut stapes_frame,
) -> i32 {
    // SAFETY: the caller's contract.
    let e = match unsafe { engine::<A, S>(state) } {
        Ok(e) => e,
        Err(s) => return s,
    };
    if consumed.is_null() || frame.is_null() || (samples.is_null() && count > 0) {
        return STAPES_ERROR_NULL_ARGUMENT;
    }
    let samples: &[i16] = if count == 0 {
        &[]
    } else {
        // SAFETY: the caller's contract: `count` samples at `samples`.
        unsafe { core::slice::from_raw_parts(samples, count) }
    };
    // SAFETY: checked non-null; the caller's contract makes them writable.
    let (consumed, frame) = unsafe { (&mut *consumed, &mut *frame) };
    e.next_frame(samples, consumed, frame)
}

/// # Safety
/// As the public `*_info` functions.
unsafe fn info<A: CArithmetic, S>(state: *mut S, out: *mut stapes_stream_info) -> i32 {
    // SAFETY: the caller's contract.
    let e = match unsafe { engine::<A, S>(state) } {
        Ok(e) => e,
        Err(s) => return s,
    };
    // SAFETY: the caller's contract.
    let Some(out) = (unsafe { out.as_mut() }) else {
        return STAPES_ERROR_NULL_ARGUMENT;
    };
    let c = e.config();
    let (frames, stride) = c
        .stages
        .model_window
        .map_or((0, 0), |w| (w.frames, w.stride));
    *out = stapes_stream_info {
        sample_rate_hz: c.sample_rate_hz,
        hop_samples: c.hop_samples,
        window_samples: c.window_samples,
        fft_points: c.fft_points,
        bands: c.bands,
        model_window_frames: frames,
        model_window_stride: stride,
        stage: e.stage(),
    };
    STAPES_OK
}

/// # Safety
/// As the public `*_reset` functions.
unsafe fn reset<A: CArithmetic, S>(state: *mut S) -> i32 {
    // SAFETY: the caller's contract.
    match unsafe { engine::<A, S>(state) } {
        Ok(e) => {
            e.reset();
            STAPES_OK
        }
        Err(s) => s,
    }
}

// ---- f32 ----

/// Initialises `state` from a preset compiled into the library
/// (`STAPES_PRESET_*`); frames carry `output_stage`'s values
/// (`STAPES_STAGE_*`, `STAPES_STAGE_LAST` for the model's input).
///
/// # Safety
/// `state` is NULL or points to a writable `stapes_f32_state`.
#[unsafe(no_mangle)]
pub unsafe extern "C" fn stapes_f32_init_preset(
    state: *mut stapes_f32_state,
    preset: i32,
    output_stage: i32,
) -> i32 {
    // SAFETY: the caller's contract.
    let Some(slot) = (unsafe { slot::<F32, _>(state) }) else {
        return STAPES_ERROR_NULL_ARGUMENT;
    };
    forget(slot);
    match presets::f32(preset) {
        Some((config, tables, stages)) => {
            Engine::<F32>::init(slot, config, tables, stages, output_stage)
        }
        None => STAPES_ERROR_PRESET_NOT_COMPILED,
    }
}

/// Initialises `state` from a table blob (checked); frames carry
/// `output_stage`'s values.
///
/// # Safety
/// `state` is NULL or points to a writable `stapes_f32_state`; `blob` is
/// NULL or holds `blob_bytes` bytes that stay unchanged while the state is
/// used (the state reads its tables in place).
#[unsafe(no_mangle)]
pub unsafe extern "C" fn stapes_f32_init_blob(
    state: *mut stapes_f32_state,
    blob: *const u8,
    blob_bytes: usize,
    output_stage: i32,
) -> i32 {
    // SAFETY: the caller's contract.
    unsafe {
        init_blob::<F32, _>(state, blob, blob_bytes, output_stage, |b| {
            either_form(|f| b.view::<f32>(f))
        })
    }
}

/// Consumes samples from `samples[0 .. count)` until a frame completes:
/// returns `STAPES_FRAME_READY` with `*frame` filled and `*consumed` the
/// samples used (call again with the rest), or `STAPES_OK` with every
/// sample consumed.
///
/// # Safety
/// `state` as for init; `samples` holds `count` samples (NULL when 0);
/// `consumed` and `frame` are writable.
#[unsafe(no_mangle)]
pub unsafe extern "C" fn stapes_f32_next_frame(
    state: *mut stapes_f32_state,
    samples: *const i16,
    count: usize,
    consumed: *mut usize,
    frame: *mut stapes_frame,
) -> i32 {
    // SAFETY: the caller's contract.
    unsafe { next_frame::<F32, _>(state, samples, count, consumed, frame) }
}

/// Back to the state just after initialisation (no samples, zero filter
/// state, the stages' carried state cleared).
///
/// # Safety
/// `state` is NULL or points to a `stapes_f32_state`.
#[unsafe(no_mangle)]
pub unsafe extern "C" fn stapes_f32_reset(state: *mut stapes_f32_state) -> i32 {
    // SAFETY: the caller's contract.
    unsafe { reset::<F32, _>(state) }
}

/// What the state was initialised with.
///
/// # Safety
/// `state` is NULL or points to a `stapes_f32_state`; `info` is writable.
#[unsafe(no_mangle)]
pub unsafe extern "C" fn stapes_f32_info(
    state: *mut stapes_f32_state,
    info: *mut stapes_stream_info,
) -> i32 {
    // SAFETY: the caller's contract.
    unsafe { self::info::<F32, _>(state, info) }
}

// ---- fixed16 ----

/// As `stapes_f32_init_preset`, in 16-bit fixed point.
///
/// # Safety
/// `state` is NULL or points to a writable `stapes_fixed16_state`.
#[unsafe(no_mangle)]
pub unsafe extern "C" fn stapes_fixed16_init_preset(
    state: *mut stapes_fixed16_state,
    preset: i32,
    output_stage: i32,
) -> i32 {
    // SAFETY: the caller's contract.
    let Some(slot) = (unsafe { slot::<Fixed16, _>(state) }) else {
        return STAPES_ERROR_NULL_ARGUMENT;
    };
    forget(slot);
    match presets::fixed16(preset) {
        Some((config, tables, stages)) => {
            Engine::<Fixed16>::init(slot, config, tables, stages, output_stage)
        }
        None => STAPES_ERROR_PRESET_NOT_COMPILED,
    }
}

/// As `stapes_f32_init_blob`, in 16-bit fixed point.
///
/// # Safety
/// As `stapes_f32_init_blob`, with a `stapes_fixed16_state`.
#[unsafe(no_mangle)]
pub unsafe extern "C" fn stapes_fixed16_init_blob(
    state: *mut stapes_fixed16_state,
    blob: *const u8,
    blob_bytes: usize,
    output_stage: i32,
) -> i32 {
    // SAFETY: the caller's contract.
    unsafe {
        init_blob::<Fixed16, _>(state, blob, blob_bytes, output_stage, |b| {
            either_form(|f| b.fixed_tables(f))
        })
    }
}

/// As `stapes_f32_next_frame`, in 16-bit fixed point.
///
/// # Safety
/// As `stapes_f32_next_frame`, with a `stapes_fixed16_state`.
#[unsafe(no_mangle)]
pub unsafe extern "C" fn stapes_fixed16_next_frame(
    state: *mut stapes_fixed16_state,
    samples: *const i16,
    count: usize,
    consumed: *mut usize,
    frame: *mut stapes_frame,
) -> i32 {
    // SAFETY: the caller's contract.
    unsafe { next_frame::<Fixed16, _>(state, samples, count, consumed, frame) }
}

/// As `stapes_f32_reset`, in 16-bit fixed point.
///
/// # Safety
/// `state` is NULL or points to a `stapes_fixed16_state`.
#[unsafe(no_mangle)]
pub unsafe extern "C" fn stapes_fixed16_reset(state: *mut stapes_fixed16_state) -> i32 {
    // SAFETY: the caller's contract.
    unsafe { reset::<Fixed16, _>(state) }
}

/// As `stapes_f32_info`, in 16-bit fixed point.
///
/// # Safety
/// `state` is NULL or points to a `stapes_fixed16_state`; `info` is writable.
#[unsafe(no_mangle)]
pub unsafe extern "C" fn stapes_fixed16_info(
    state: *mut stapes_fixed16_state,
    info: *mut stapes_stream_info,
) -> i32 {
    // SAFETY: the caller's contract.
    unsafe { self::info::<Fixed16, _>(state, info) }
}

// ---- fixed32 ----

/// As `stapes_f32_init_preset`, in 32-bit fixed point.
///
/// # Safety
/// `state` is NULL or points to a writable `stapes_fixed32_state`.
#[unsafe(no_mangle)]
pub unsafe extern "C" fn stapes_fixed32_init_preset(
    state: *mut stapes_fixed32_state,
    preset: i32,
    output_stage: i32,
) -> i32 {
    // SAFETY: the caller's contract.
    let Some(slot) = (unsafe { slot::<Fixed32, _>(state) }) else {
        return STAPES_ERROR_NULL_ARGUMENT;
    };
    forget(slot);
    match presets::fixed32(preset) {
        Some((config, tables, stages)) => {
            Engine::<Fixed32>::init(slot, config, tables, stages, output_stage)
        }
        None => STAPES_ERROR_PRESET_NOT_COMPILED,
    }
}

/// As `stapes_f32_init_blob`, in 32-bit fixed point.
///
/// # Safety
/// As `stapes_f32_init_blob`, with a `stapes_fixed32_state`.
#[unsafe(no_mangle)]
pub unsafe extern "C" fn stapes_fixed32_init_blob(
    state: *mut stapes_fixed32_state,
    blob: *const u8,
    blob_bytes: usize,
    output_stage: i32,
) -> i32 {
    // SAFETY: the caller's contract.
    unsafe {
        init_blob::<Fixed32, _>(state, blob, blob_bytes, output_stage, |b| {
            either_form(|f| b.fixed_tables(f))
        })
    }
}

/// As `stapes_f32_next_frame`, in 32-bit fixed point.
///
/// # Safety
/// As `stapes_f32_next_frame`, with a `stapes_fixed32_state`.
#[unsafe(no_mangle)]
pub unsafe extern "C" fn stapes_fixed32_next_frame(
    state: *mut stapes_fixed32_state,
    samples: *const i16,
    count: usize,
    consumed: *mut usize,
    frame: *mut stapes_frame,
) -> i32 {
    // SAFETY: the caller's contract.
    unsafe { next_frame::<Fixed32, _>(state, samples, count, consumed, frame) }
}

/// As `stapes_f32_reset`, in 32-bit fixed point.
///
/// # Safety
/// `state` is NULL or points to a `stapes_fixed32_state`.
#[unsafe(no_mangle)]
pub unsafe extern "C" fn stapes_fixed32_reset(state: *mut stapes_fixed32_state) -> i32 {
    // SAFETY: the caller's contract.
    unsafe { reset::<Fixed32, _>(state) }
}

/// As `stapes_f32_info`, in 32-bit fixed point.
///
/// # Safety
/// `state` is NULL or points to a `stapes_fixed32_state`; `info` is writable.
#[unsafe(no_mangle)]
pub unsafe extern "C" fn stapes_fixed32_info(
    state: *mut stapes_fixed32_state,
    info: *mut stapes_stream_info,
) -> i32 {
    // SAFETY: the caller's contract.
    unsafe { self::info::<Fixed32, _>(state, info) }
}

// ---- common ----

/// Checks a table blob without initialising anything: `STAPES_OK`, or the
/// blob error that init would return.
///
/// # Safety
/// `blob` is NULL or holds `blob_bytes` bytes.
#[unsafe(no_mangle)]
pub unsafe extern "C" fn stapes_blob_check(blob: *const u8, blob_bytes: usize) -> i32 {
    if blob.is_null() {
        return STAPES_ERROR_NULL_ARGUMENT;
    }
    // SAFETY: the caller's contract.
    let bytes = unsafe { core::slice::from_raw_parts(blob, blob_bytes) };
    match TableBlob::parse(bytes).and_then(|b| b.stage_tables().map(|_| ())) {
        Ok(()) => STAPES_OK,
        Err(e) => blob_status(e),
    }
}

/// A short description of a status code that names what to change (a
/// static NUL-terminated string; never NULL).
#[unsafe(no_mangle)]
pub extern "C" fn stapes_status_message(status: i32) -> *const c_char {
    let m: &'static CStr = status::message(status);
    m.as_ptr()
}

/// Prepares a window of the last `frames` frames over `storage`
/// (`STAPES_WINDOW_STORAGE_BYTES(frames, values, value bytes)` bytes),
/// handed out every `stride` frames once full (0 counts as 1).
///
/// # Safety
/// `window` is NULL or writable; `storage` is NULL or holds `storage_bytes`
/// writable bytes for as long as the window is used.
#[unsafe(no_mangle)]
pub unsafe extern "C" fn stapes_window_init(
    window: *mut stapes_window,
    storage: *mut core::ffi::c_void,
    storage_bytes: usize,
    frames: u32,
    stride: u32,
) -> i32 {
    // SAFETY: the caller's contract.
    let Some(w) = (unsafe { window.as_mut() }) else {
        return STAPES_ERROR_NULL_ARGUMENT;
    };
    if storage.is_null() {
        return STAPES_ERROR_NULL_ARGUMENT;
    }
    w.init(storage.cast(), storage_bytes, frames, stride)
}

/// Adds a frame. Returns `STAPES_WINDOW_READY` with `*view` filled when the
/// window is full and the frame falls on the stride, `STAPES_OK` otherwise.
///
/// # Safety
/// `window` was initialised; `frame` is a frame a `*_next_frame` call
/// filled (its values still valid); `view` is writable.
#[unsafe(no_mangle)]
pub unsafe extern "C" fn stapes_window_push(
    window: *mut stapes_window,
    frame: *const stapes_frame,
    view: *mut stapes_window_view,
) -> i32 {
    // SAFETY: the caller's contract.
    let (Some(w), Some(f), Some(v)) = (unsafe { (window.as_mut(), frame.as_ref(), view.as_mut()) })
    else {
        return STAPES_ERROR_NULL_ARGUMENT;
    };
    if f.values.is_null() {
        return STAPES_ERROR_NULL_ARGUMENT;
    }
    // SAFETY: the caller's contract.
    unsafe { w.push(f.values.cast(), f.count, f.value_type, v) }
}

/// Forgets every frame (the next push starts a new window).
///
/// # Safety
/// `window` is NULL or was initialised.
#[unsafe(no_mangle)]
pub unsafe extern "C" fn stapes_window_reset(window: *mut stapes_window) -> i32 {
    // SAFETY: the caller's contract.
    match unsafe { window.as_mut() } {
        Some(w) => {
            w.reset();
            STAPES_OK
        }
        None => STAPES_ERROR_NULL_ARGUMENT,
    }
}

/// Stops the core: a panic never unwinds into C. The core's per-frame path
/// has no panicking operation its tests know of; reaching this is a bug.
#[panic_handler]
fn panic(_: &core::panic::PanicInfo) -> ! {
    loop {
        #[cfg(target_arch = "arm")]
        // SAFETY: a breakpoint instruction; a debugger stops here, and
        // without one the core takes the fault and stays in its handler.
        unsafe {
            core::arch::asm!("bkpt #0")
        };
    }
}
