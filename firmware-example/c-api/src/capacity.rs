//! The buffers compiled into the library's state. A configuration (a
//! preset or a blob) runs when it fits them; one that does not is refused
//! at initialisation with `STAPES_ERROR_CAPACITY`. Raising one raises every
//! state's size: change the numbers here and build (the library refuses to
//! build until the `STAPES_*_STATE_WORDS` it names are updated), then
//! regenerate the header
//! (`STAPES_BLESS_HEADER=1 cargo test -p stapes-tests --test c_header`).

/// FFT points the state holds (every shipped preset: 256, 512 or 1024).
pub const STAPES_CAPACITY_FFT_POINTS: usize = 1024;
/// Samples the state carries from one frame to the next (window minus hop).
pub const STAPES_CAPACITY_OVERLAP_SAMPLES: usize = 512;
/// Mel bands the state holds (one more with MFCC's log energy).
pub const STAPES_CAPACITY_BANDS: usize = 48;
/// Values per frame the stages hold.
pub const STAPES_CAPACITY_VALUES: usize = 48;

pub(crate) const FFT_POINTS: usize = STAPES_CAPACITY_FFT_POINTS;
pub(crate) const OVERLAP_SAMPLES: usize = STAPES_CAPACITY_OVERLAP_SAMPLES;
pub(crate) const BANDS: usize = STAPES_CAPACITY_BANDS;
pub(crate) const VALUES: usize = STAPES_CAPACITY_VALUES;
