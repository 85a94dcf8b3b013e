//! PCEN, per-channel energy normalisation (Wang et al., "Trainable
//! frontend for robust and far-field keyword spotting", ICASSP 2017), as a
//! stage after the filterbank in place of the static log: [`FloatPcen`]
//! here, the fixed path's in [`crate::pcen_fixed`].
//!
//! Per band, with the band energy `E[t]` (linear, as the filterbank hands
//! it on):
//!
//! * smoother: `M[t] = (1 − s)·M[t−1] + s·E[t]`, with `s = 1 − exp(−hop/T)`
//!   for a time constant `T` (a one-pole smoother's coefficient, common
//!   practice); `M` starts at the first frame's energy (so the first frames
//!   are not normalised by a smoother still rising from zero);
//! * output: `P[t] = (E[t] / (ε + M[t])^α + δ)^r − δ^r`.
//!
//! Defaults α = 0.98, δ = 2, r = 0.5, ε = 1e-6 and T = 0.4 s (s ≈ 0.025 at a
//! 10 ms hop) are the paper's values **from memory of its text**: the copies
//! of the paper the project could reach give its abstract only, so they are
//! not checked against it (set them in `[stages.pcen]` if yours differ). ε and δ act on the energies' absolute scale:
//! these are the energies of full-scale-normalised samples with no `1/N`
//! (see the crate's conventions), so a model trained on another scaling
//! needs its ε and δ rescaled.
//!
//! ```
//! use stapes_core::pcen::{FloatPcen, PcenParams};
//! use stapes_core::stage::FrameStage;
//! let p = PcenParams::DEFAULT;
//! let mut pcen = FloatPcen::<2>::new(p, p.smoothing(0.010)).unwrap();
//! // A steady energy normalises towards (E/E^α + δ)^r − δ^r.
//! let mut frame = [100.0, 100.0];
//! let first = pcen.process(&mut frame)[0];
//! let want = (100f32 / (1e-6f32 + 100.0).powf(0.98) + 2.0).sqrt() - 2f32.sqrt();
//! assert!((first - want).abs() < 1e-5);
//! ```

/// PCEN's parameters.
#[derive(Clone, Copy, Debug, PartialEq)]
#[cfg_attr(feature = "defmt", derive(defmt::Format))]
pub struct PcenParams {
    /// Gain exponent α (0 < α ≤ 1).
    pub alpha: f32,
    /// Bias δ (> 0).
    pub delta: f32,
    /// Root r (0 < r ≤ 1).
    pub root: f32,
    /// ε (> 0) keeping the division finite.
    pub epsilon: f32,
    /// The smoother's time constant T in seconds (> 0).
    pub time_constant_s: f32,
}

impl PcenParams {
    /// α = 0.98, δ = 2, r = 0.5, ε = 1e-6, T = 0.4 s (from memory of the
    /// paper's text).
    pub const DEFAULT: PcenParams = PcenParams {
        alpha: 0.98,
        delta: 2.0,
        root: 0.5,
        epsilon: 1e-6,
        time_constant_s: 0.4,
    };

    /// The smoother's coefficient `s = 1 − exp(−hop/T)` for a hop in seconds.
    pub fn smoothing(&self, hop_s: f32) -> f32 {
        1.0 - libm::expf(-hop_s / self.time_constant_s)
    }

    fn check(&self, smoothing: f32) -> Result<(), PcenError> {
        let ok = |v: f32, lo: f32, hi: f32, lo_open: bool| {
            v.is_finite() && (if lo_open { v > lo } else { v >= lo }) && v <= hi
        };
        let fields = [
            ("alpha", self.alpha, 0.0, 1.0, true),
            ("delta", self.delta, 0.0, 1e6, true),
            ("root", self.root, 0.0, 1.0, true),
            ("epsilon", self.epsilon, 0.0, 1e6, true),
            ("time_constant_s", self.time_constant_s, 0.0, 1e4, true),
            ("smoothing", smoothing, 0.0, 1.0, true),
        ];
        for (field, value, lo, hi, open) in fields {
            if !ok(value, lo, hi, open) {
                return Err(PcenError {
                    field,
                    value,
                    min: lo,
                    max: hi,
                });
            }
        }
        Ok(())
    }
}

/// A PCEN parameter out of its range.
#[derive(Clone, Copy, Debug, PartialEq)]
#[cfg_attr(feature = "defmt", derive(defmt::Format))]
pub struct PcenError {
    /// The parameter.
    pub field: &'static str,
    /// Its value.
    pub value: f32,
    /// The lower bound (excluded).
    pub min: f32,
    /// The upper bound (included).
    pub max: f32,
}

impl core::fmt::Display for PcenError {
    fn fmt(&self, f: &mut core::fmt::Formatter<'_>) -> core::fmt::Result {
        write!(
            f,
            "PCEN {} = {} lies outside ({}, {}]: use a value in that range (the paper's: alpha \
             0.98, delta 2, root 0.5, epsilon 1e-6, time constant 0.4 s)",
            self.field, self.value, self.min, self.max
        )
    }
}

impl core::error::Error for PcenError {}

/// PCEN on the `f32` path, in place on the filterbank's energies, with the
/// smoother's state (`BANDS` values) carried from frame to frame.
#[derive(Clone, Debug)]
pub struct FloatPcen<const BANDS: usize> {
    params: PcenParams,
    smoothing: f32,
    /// `δ^r`, computed once.
    offset: f32,
    smoothed: [f32; BANDS],
    started: bool,
}

impl<const BANDS: usize> FloatPcen<BANDS> {
    /// A stage with `params` and the smoother's coefficient `smoothing`
    /// (see [`PcenParams::smoothing`]).
    pub fn new(params: PcenParams, smoothing: f32) -> Result<Self, PcenError> {
        params.check(smoothing)?;
        Ok(FloatPcen {
            params,
            smoothing,
            offset: libm::powf(params.delta, params.root),
            smoothed: [0.0; BANDS],
            started: false,
        })
    }
}

impl<const BANDS: usize> crate::stage::FrameStage<f32> for FloatPcen<BANDS> {
    type Out = f32;

    fn process<'a>(&'a mut self, input: &'a mut [f32]) -> &'a mut [f32] {
        let n = input.len().min(BANDS);
        let p = self.params;
        let s = self.smoothing;
        if !self.started {
            self.smoothed[..n].copy_from_slice(&input[..n]);
            self.started = true;
        }
        for (e, m) in input[..n].iter_mut().zip(&mut self.smoothed[..n]) {
            *m = (1.0 - s) * *m + s * *e;
            let gain = libm::powf(p.epsilon + *m, -p.alpha);
            *e = libm::powf(*e * gain + p.delta, p.root) - self.offset;
        }
        &mut input[..n]
    }

    fn reset(&mut self) {
        self.started = false;
    }
}
