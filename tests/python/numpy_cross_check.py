"""Cross-check of the demo's features against numpy/scipy (general-purpose
reference libraries from the registry), written from the framing and
numeric conventions in README.md, not from the Rust code.

Usage: python numpy_cross_check.py DEMO_DIR
Reads DEMO_DIR/demo-clip.wav and DEMO_DIR/features.npy (from `stapes demo`)
and recomputes the speech16k-40 log-mel frames in float64; reads
DEMO_DIR/mfcc.npy and compares it with scipy's orthonormal DCT-II of those
frames.
"""
import sys

import numpy as np
import scipy.fft
import scipy.io.wavfile
import scipy.signal

RATE, WINDOW, FFT, HOP, BANDS = 16000, 512, 512, 160, 40
LOW_HZ, HIGH_HZ, FLOOR_DB = 20.0, 8000.0, -100.0
RANGE_DB, TOLERANCE_DB = 60.0, 0.01


def mel(f):
    # O'Shaughnessy 1987: 2595 log10(1 + f/700).
    return 2595.0 * np.log10(1.0 + f / 700.0)


def inverse_mel(m):
    return 700.0 * (10.0 ** (m / 2595.0) - 1.0)


def filterbank():
    edges = inverse_mel(np.linspace(mel(LOW_HZ), mel(HIGH_HZ), BANDS + 2))
    edges[0], edges[-1] = LOW_HZ, HIGH_HZ
    freqs = np.arange(FFT // 2 + 1) * RATE / FFT
    lo, mid, hi = edges[:-2, None], edges[1:-1, None], edges[2:, None]
    rising = (freqs - lo) / (mid - lo)
    falling = (hi - freqs) / (hi - mid)
    return np.maximum(0.0, np.minimum(rising, falling))


def main(demo_dir):
    rate, samples = scipy.io.wavfile.read(f"{demo_dir}/demo-clip.wav")
    assert rate == RATE and samples.dtype == np.int16
    x = samples.astype(np.float64) / 32768.0
    # scipy.signal.get_window('hann', N) is the periodic Hann window.
    window = scipy.signal.get_window("hann", WINDOW)
    count = (len(x) - WINDOW) // HOP + 1
    frames = np.stack([x[i * HOP:i * HOP + WINDOW] * window for i in range(count)])
    power = np.abs(np.fft.rfft(frames, n=FFT, axis=1)) ** 2
    energy = power @ filterbank().T
    reference = 10.0 * np.log10(np.maximum(energy, 10.0 ** (FLOOR_DB / 10.0)))

    core = np.load(f"{demo_dir}/features.npy")
    assert core.dtype == np.float32 and core.shape == reference.shape, (core.shape, reference.shape)
    loud = reference >= reference.max(axis=1, keepdims=True) - RANGE_DB
    error = np.abs(core.astype(np.float64) - reference)[loud]
    worst = float(error.max())
    print(f"numpy/scipy cross-check: {core.shape[0]} frames x {BANDS} bands, "
          f"max |error| {worst:.2e} dB, mean {error.mean():.2e} dB over {error.size} values "
          f"(tolerance {TOLERANCE_DB} dB within {RANGE_DB} dB)")
    passed = worst <= TOLERANCE_DB

    # MFCC: scipy's DCT-II with orthonormal scaling of the core's own frames
    # (the DCT alone; README: 13 coefficients, no lifter, mfcc.npy).
    mfcc = np.load(f"{demo_dir}/mfcc.npy")
    want = scipy.fft.dct(core.astype(np.float64), type=2, norm="ortho", axis=1)[:, :13]
    assert mfcc.shape == want.shape, (mfcc.shape, want.shape)
    # f32 sums of 40 products of values up to ~100: a few 1e-5 of rounding.
    mfcc_worst = float(np.abs(mfcc.astype(np.float64) - want).max())
    mfcc_ok = mfcc_worst <= 1e-3
    print(f"numpy/scipy cross-check: MFCC {mfcc.shape[0]} x 13 against scipy.fft.dct(type=2, "
          f"norm='ortho'): max |error| {mfcc_worst:.2e} (tolerance 1e-3)")
    passed = passed and mfcc_ok
    print("numpy/scipy cross-check:", "PASS" if passed else "FAIL")
    return 0 if passed else 1


if __name__ == "__main__":
    sys.exit(main(sys.argv[1]))
