//! How the fixed path's data types hold a frame: raw samples, FFT values
//! and spectrum bins in `i16` ([`Fixed16`](crate::fft::Fixed16)) or `i32`
//! ([`Fixed32`](crate::fft::Fixed32)) elements of the one frame buffer.
//!
//! This is plumbing shared by the fixed path's stages (each stage's own
//! per-type kernels live in the stage's module: `window`, `spectrum`,
//! `filterbank`); it is private to the crate.

use crate::fft::BfpSample;
use crate::framer::Framer;

/// Conversions between raw samples, the data type and wide values.
pub(crate) trait FrameData: BfpSample {
    /// Data bits available for a normalised sample and every FFT value (15 or 29).
    const SAMPLE_BITS: u32;
    /// Whether a conditioned sample (13 extra fraction bits) fits the type,
    /// so that the window's second pass can read it back instead of
    /// recomputing it.
    const HOLDS_CONDITIONED: bool;
    /// Whether unconditioned frames are normalised on a bound of the
    /// *windowed* frame (see [`crate::window::NORMALISATION_SEGMENTS`])
    /// rather than on the raw frame's range: 16-bit data, whose FFT input is
    /// the windowed frame rounded to 16 bits.
    const WINDOWED_NORMALISATION: bool;
    /// Whether the frame's offset is taken out before the FFT where the
    /// window allows ([`crate::spectrum::offset_spectrum`],
    /// [`FixedTables::window_spectrum`](crate::fixed_tables::FixedTables::window_spectrum)):
    /// 16-bit data only (32-bit data have the range to keep it).
    const OFFSET_COMPENSATION: bool;
    /// A raw sample stored in the frame buffer.
    fn from_raw(x: i16) -> Self;
    /// The raw sample back.
    fn to_raw(self) -> i16;
    /// A value known to fit the type.
    fn from_i32(v: i32) -> Self;
    /// The value as `i32`.
    fn get_i32(self) -> i32;
    /// Saves the raw samples the next frame shares, before the FFT.
    #[inline(always)]
    fn save_shared<const F: usize, const O: usize>(framer: &mut Framer<Self, i16, F, O>) {
        framer.begin_frame(Self::to_raw);
    }
    /// Puts the shared samples back, after the frame.
    #[inline(always)]
    fn restore_shared<const F: usize, const O: usize>(framer: &mut Framer<Self, i16, F, O>) {
        framer.end_frame(Self::from_raw);
    }
    /// Stores a bin value (a power `< 2^32` for 16-bit data, `< 2^64` for
    /// 32-bit data) in a pair of slots.
    fn store_bin(slot: &mut [Self], v: u64);
    /// The bin value back.
    fn load_bin(slot: &[Self]) -> u64;
}

impl FrameData for i16 {
    const SAMPLE_BITS: u32 = 15;
    const HOLDS_CONDITIONED: bool = false;
    const WINDOWED_NORMALISATION: bool = true;
    const OFFSET_COMPENSATION: bool = true;
    #[inline]
    fn from_raw(x: i16) -> i16 {
        x
    }
    #[inline]
    fn to_raw(self) -> i16 {
        self
    }
    #[inline(always)]
    fn from_i32(v: i32) -> i16 {
        v as i16
    }
    #[inline(always)]
    fn get_i32(self) -> i32 {
        self as i32
    }
    // Raw samples are the frame's own type: a block copy.
    #[inline(always)]
    fn save_shared<const F: usize, const O: usize>(framer: &mut Framer<i16, i16, F, O>) {
        framer.begin_frame_unconverted();
    }
    #[inline(always)]
    fn restore_shared<const F: usize, const O: usize>(framer: &mut Framer<i16, i16, F, O>) {
        framer.end_frame_unconverted();
    }
    #[inline(always)]
    fn store_bin(slot: &mut [i16], v: u64) {
        // Powers of 16-bit data are below 2^31 (and magnitudes below 2^16).
        slot[0] = v as u16 as i16;
        slot[1] = (v >> 16) as u16 as i16;
    }
    #[inline(always)]
    fn load_bin(slot: &[i16]) -> u64 {
        (slot[0] as u16 as u32 | (slot[1] as u16 as u32) << 16) as u64
    }
}

impl FrameData for i32 {
    // The FFT keeps 32-bit data within ±(2^29 − 2) (its guard bits); a
    // windowed sample beyond that is shifted into range by the FFT.
    const SAMPLE_BITS: u32 = 29;
    const HOLDS_CONDITIONED: bool = true;
    const WINDOWED_NORMALISATION: bool = false;
    const OFFSET_COMPENSATION: bool = false;
    #[inline]
    fn from_raw(x: i16) -> i32 {
        x as i32
    }
    #[inline]
    fn to_raw(self) -> i16 {
        self.clamp(i16::MIN as i32, i16::MAX as i32) as i16
    }
    #[inline(always)]
    fn from_i32(v: i32) -> i32 {
        v
    }
    #[inline(always)]
    fn get_i32(self) -> i32 {
        self
    }
    #[inline(always)]
    fn store_bin(slot: &mut [i32], v: u64) {
        slot[0] = v as u32 as i32;
        slot[1] = (v >> 32) as u32 as i32;
    }
    #[inline(always)]
    fn load_bin(slot: &[i32]) -> u64 {
        slot[0] as u32 as u64 | (slot[1] as u32 as u64) << 32
    }
}
