//! Status codes, value types, stage and preset numbers: plain `int32_t`
//! constants in C (an enum's size is the compiler's choice in C, and GCC
//! warns when a Rust `repr(C)` enum meets code built with
//! `-fno-short-enums`).

/// Success; no frame completed (every sample was consumed).
pub const STAPES_OK: i32 = 0;
/// A frame completed: `frame` is filled, and samples after `*consumed` wait.
pub const STAPES_FRAME_READY: i32 = 1;
/// A window of frames is handed out (`stapes_window_push`).
pub const STAPES_WINDOW_READY: i32 = 2;

/// A pointer argument is NULL.
pub const STAPES_ERROR_NULL_ARGUMENT: i32 = -1;
/// The state was never initialised (or was initialised for another
/// arithmetic, or its initialisation failed).
pub const STAPES_ERROR_NOT_INITIALISED: i32 = -2;
/// The preset's tables are not compiled into this library.
pub const STAPES_ERROR_PRESET_NOT_COMPILED: i32 = -3;
/// The configuration needs larger buffers than this library's.
pub const STAPES_ERROR_CAPACITY: i32 = -4;
/// The f32 arithmetic has no FFT of the configuration's size compiled in.
pub const STAPES_ERROR_FFT_NOT_COMPILED: i32 = -5;
/// The configuration's sizes are impossible.
pub const STAPES_ERROR_CONFIG: i32 = -6;
/// The tables do not fit the configuration.
pub const STAPES_ERROR_TABLES: i32 = -7;
/// The stage tables do not fit, or lack one the configuration's stages need.
pub const STAPES_ERROR_STAGE_TABLES: i32 = -8;
/// A stage's parameters are out of range for this arithmetic.
pub const STAPES_ERROR_STAGE_PARAMETERS: i32 = -9;
/// The output stage number is not a `STAPES_STAGE_*` value.
pub const STAPES_ERROR_UNKNOWN_STAGE: i32 = -10;
/// The configuration has no such stage.
pub const STAPES_ERROR_STAGE_NOT_CONFIGURED: i32 = -11;
/// The blob is shorter than a header.
pub const STAPES_ERROR_BLOB_TOO_SHORT: i32 = -20;
/// The bytes are not a table blob (wrong magic).
pub const STAPES_ERROR_BLOB_NOT_A_BLOB: i32 = -21;
/// The blob's format version is not one this library reads.
pub const STAPES_ERROR_BLOB_VERSION: i32 = -22;
/// The blob's stated length differs from the bytes given.
pub const STAPES_ERROR_BLOB_LENGTH: i32 = -23;
/// The blob's CRC-32 does not match its contents.
pub const STAPES_ERROR_BLOB_CHECKSUM: i32 = -24;
/// The blob does not start on a 4-byte boundary.
pub const STAPES_ERROR_BLOB_ALIGNMENT: i32 = -25;
/// The blob lacks a section this arithmetic needs.
pub const STAPES_ERROR_BLOB_MISSING_SECTION: i32 = -26;
/// The blob's directory, sections or configuration are malformed.
pub const STAPES_ERROR_BLOB_MALFORMED: i32 = -27;
/// The window's storage is too small for its frames.
pub const STAPES_ERROR_WINDOW_STORAGE: i32 = -30;
/// A frame differs in size or value type from the window's earlier frames.
pub const STAPES_ERROR_WINDOW_FRAME: i32 = -31;
/// The window was asked for zero frames.
pub const STAPES_ERROR_WINDOW_FRAMES: i32 = -32;

/// `float` values.
pub const STAPES_VALUE_F32: i32 = 1;
/// The fixed filterbank's energy words (`int32_t`).
pub const STAPES_VALUE_ENERGY_WORD: i32 = 2;
/// `int16_t`, 1/256 per unit (fixed log levels).
pub const STAPES_VALUE_Q8_8: i32 = 3;
/// `int32_t`, 1/65536 per unit (fixed PCEN).
pub const STAPES_VALUE_Q16_16: i32 = 4;
/// `int32_t`, 1/256 per unit (fixed MFCC).
pub const STAPES_VALUE_Q24_8: i32 = 5;
/// `int8_t` codes.
pub const STAPES_VALUE_INT8: i32 = 6;
/// `uint8_t` codes.
pub const STAPES_VALUE_UINT8: i32 = 7;

/// The configuration's last stage (the model's input).
pub const STAPES_STAGE_LAST: i32 = 0;
/// The filterbank's linear energies (no stage after it).
pub const STAPES_STAGE_FILTERBANK: i32 = 1;
/// The log of each band's energy.
pub const STAPES_STAGE_LOG: i32 = 2;
/// Per-channel energy normalisation.
pub const STAPES_STAGE_PCEN: i32 = 3;
/// The range floor below each frame's peak.
pub const STAPES_STAGE_RANGE_FLOOR: i32 = 4;
/// The level map.
pub const STAPES_STAGE_LEVEL_MAP: i32 = 5;
/// MFCC (DCT-II of the levels).
pub const STAPES_STAGE_MFCC: i32 = 6;
/// Normalisation (f32 output).
pub const STAPES_STAGE_NORMALISE: i32 = 7;
/// The model's integer codes.
pub const STAPES_STAGE_QUANTISE: i32 = 8;

/// Shipped preset: 16 kHz, 40 bands, 512-point FFT.
pub const STAPES_PRESET_SPEECH16K_40: i32 = 1;
/// Shipped preset: 8 kHz, 23 bands, 256-point FFT.
pub const STAPES_PRESET_DSR8K_23: i32 = 2;
/// Shipped preset: 16 kHz, 10 bands, 256-point FFT.
pub const STAPES_PRESET_TINY16K_10: i32 = 3;
/// Shipped preset: keyword spotting, 40 log-mel bands to int8 codes.
pub const STAPES_PRESET_KWS16K_MEL40: i32 = 4;
/// Shipped preset: keyword spotting, 10 MFCC to int8 codes.
pub const STAPES_PRESET_KWS16K_MFCC10: i32 = 5;
/// Shipped preset: keyword spotting, 40 PCEN bands to int8 codes.
pub const STAPES_PRESET_KWS16K_PCEN40: i32 = 6;

/// A short description of a status code, naming what to change (a static,
/// NUL-terminated string).
pub fn message(status: i32) -> &'static core::ffi::CStr {
    match status {
        STAPES_OK => c"ok",
        STAPES_FRAME_READY => c"a frame is ready",
        STAPES_WINDOW_READY => c"a window of frames is ready",
        STAPES_ERROR_NULL_ARGUMENT => c"a pointer argument is NULL",
        STAPES_ERROR_NOT_INITIALISED => {
            c"the state is not initialised: call an init function of the same arithmetic first and check its status"
        }
        STAPES_ERROR_PRESET_NOT_COMPILED => {
            c"the preset's tables are not compiled into this library: build it with that preset's cargo feature, or load a blob"
        }
        STAPES_ERROR_CAPACITY => {
            c"the configuration needs larger buffers than this library's: raise the capacities in c-api/src/capacity.rs and rebuild"
        }
        STAPES_ERROR_FFT_NOT_COMPILED => {
            c"no f32 FFT of the configuration's size is compiled in: build the library with that fft-N feature, or use a fixed arithmetic"
        }
        STAPES_ERROR_CONFIG => c"the configuration's sizes are impossible: regenerate the tables",
        STAPES_ERROR_TABLES => {
            c"the tables do not fit the configuration: regenerate them from the same configuration"
        }
        STAPES_ERROR_STAGE_TABLES => {
            c"the stage tables do not fit the configuration's stages: regenerate the tables"
        }
        STAPES_ERROR_STAGE_PARAMETERS => {
            c"a stage's parameters are out of range for this arithmetic: check the configuration, or use f32"
        }
        STAPES_ERROR_UNKNOWN_STAGE => c"the output stage is not a STAPES_STAGE_* value",
        STAPES_ERROR_STAGE_NOT_CONFIGURED => {
            c"the configuration has no such stage: ask for one it has, or STAPES_STAGE_LAST"
        }
        STAPES_ERROR_BLOB_TOO_SHORT => c"the blob is shorter than a header: pass the whole file",
        STAPES_ERROR_BLOB_NOT_A_BLOB => {
            c"the bytes are not a table blob: pass the .bin the generator wrote"
        }
        STAPES_ERROR_BLOB_VERSION => {
            c"the blob's format version is not one this library reads: regenerate it with the same release"
        }
        STAPES_ERROR_BLOB_LENGTH => {
            c"the blob's stated length differs from the bytes given: pass exactly the file's bytes"
        }
        STAPES_ERROR_BLOB_CHECKSUM => {
            c"the blob's CRC-32 does not match its contents: the flash copy is corrupt, write it again"
        }
        STAPES_ERROR_BLOB_ALIGNMENT => {
            c"the blob does not start on a 4-byte boundary: align it (e.g. __attribute__((aligned(4))))"
        }
        STAPES_ERROR_BLOB_MISSING_SECTION => {
            c"the blob lacks a section this arithmetic needs: generate it with that arithmetic's tables"
        }
        STAPES_ERROR_BLOB_MALFORMED => {
            c"the blob's sections or configuration are malformed: regenerate it"
        }
        STAPES_ERROR_WINDOW_STORAGE => {
            c"the window's storage is too small: give it STAPES_WINDOW_STORAGE_BYTES(frames, values, value bytes)"
        }
        STAPES_ERROR_WINDOW_FRAME => {
            c"the frame differs in size or type from the window's earlier frames: reset the window first"
        }
        STAPES_ERROR_WINDOW_FRAMES => c"a window needs at least one frame",
        _ => c"unknown status code",
    }
}
