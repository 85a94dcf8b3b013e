"""Numpy models behind three fixed-point and f32 design choices in README.md
(not part of the test run; each prints the figures README quotes).

Usage: python fixed_point_models.py CORPUS_DIR
CORPUS_DIR is the folder tests/corpus/make_corpus.py writes.

1. 16-bit normalisation (speech16k-40): the windowed frame rounded to 16 bits
   after a shift chosen from the raw frame's range, from the windowed frame's
   exact peak, and from a per-segment bound (8 segments: largest |c - d| times
   largest window coefficient); exact FFT; worst |error| in dB at R = 40 and
   R = 60 against float64.
2. Magnitude bins of 16-bit data (dsr8k-23-like: DC removal 0.999,
   pre-emphasis 0.97, symmetric Hamming 200 in 256): floor of an integer root
   against a root with 8 fraction bits, after 16-bit windowed data and a
   16-bit FFT output (block exponent).
3. f32 DC removal: the textbook recursion against the compensated DC
   estimate (y = x - D, D += (1 - p)·y by Fast2Sum), on DC-offset speech.
"""
import glob
import sys

import numpy as np
import scipy.io.wavfile

f32 = np.float32


def load(path):
    rate, x = scipy.io.wavfile.read(path)
    return rate, x.astype(np.float64)


def mel(f):
    return 2595 * np.log10(1 + f / 700)


def imel(m):
    return 700 * (10 ** (m / 2595) - 1)


def filterbank(fs, n, lo, hi, bands):
    edges = imel(np.linspace(mel(lo), mel(hi), bands + 2))
    freqs = np.arange(n // 2 + 1) * fs / n
    return np.array([np.clip(np.minimum((freqs - edges[b]) / (edges[b + 1] - edges[b]),
                                        (edges[b + 2] - freqs) / (edges[b + 2] - edges[b + 1])), 0, None)
                     for b in range(bands)])


def worst_db(ref, est, floor, ranges, power=True):
    k = 10 if power else 20
    ok = ref > floor
    db = k * np.log10(np.maximum(ref, 1e-30))
    e = np.where(ok, np.abs(k * np.log10(np.maximum(est, 1e-30) / np.maximum(ref, 1e-30))), 0)
    out = []
    for r in ranges:
        m = (db > db.max() - r) & ok
        out.append(e[m].max() if m.any() else 0.0)
    return out


def normalisation(path, mode, segments=8):
    fs, x = load(path)
    n = length = 512
    hop, w = 160, filterbank(fs, n, 20, 8000, 40)
    win = 0.5 - 0.5 * np.cos(2 * np.pi * np.arange(length) / length)
    w1 = np.sum(win * np.exp(-2j * np.pi * np.arange(length) / n))
    worst = [0.0, 0.0]
    for s in range(0, len(x) - length + 1, hop):
        f = x[s:s + length]
        ref = w @ np.abs(np.fft.rfft(f * win, n)) ** 2
        d = np.sum(f * win) / np.sum(win)
        g = f - d
        if mode == "raw":
            peak = np.max(np.abs(g))
        elif mode == "windowed":
            peak = np.max(np.abs(g * win))
        else:
            seg = length // segments
            peak = max(np.max(np.abs(g[i * seg:(i + 1) * seg])) * np.max(win[i * seg:(i + 1) * seg])
                       for i in range(segments))
        if peak == 0:
            continue
        shift = 2.0 ** np.floor(np.log2(32767 / peak))
        q = np.round(g * win * shift) / shift
        spec = np.fft.rfft(q, n)
        spec[0] += d * np.sum(win)
        spec[1] += d * w1
        est = w @ np.abs(spec) ** 2
        floor = w.sum(axis=1) * np.sum(win ** 2) / 12
        worst = [max(a, b) for a, b in zip(worst, worst_db(ref, est, floor, (40, 60)))]
    return worst


def conditioned(x, p=0.999, a=0.97):
    y = np.zeros_like(x)
    xp = yp = 0.0
    for i in range(len(x)):
        y[i] = x[i] - xp + p * yp
        xp, yp = x[i], y[i]
    z = y.copy()
    z[1:] -= a * y[:-1]
    return z


def magnitudes(path, root):
    fs, x = load(path)
    x = conditioned(x)
    n, length, hop = 256, 200, 80
    w = filterbank(fs, n, 64, 4000, 23)
    win = np.hamming(length)
    worst = 0.0
    for s in range(0, len(x) - length + 1, hop):
        f = x[s:s + length]
        ref = w @ np.abs(np.fft.rfft(f * win, n))
        peak = np.max(np.abs(f))
        if peak == 0:
            continue
        shift = 2.0 ** np.floor(np.log2(32767 / peak))
        spec = np.fft.rfft(np.round(f * shift * win), n)
        top = max(np.abs(spec.real).max(), np.abs(spec.imag).max())
        block = 2.0 ** np.ceil(np.log2(top / 32767))
        power = np.round(spec.real / block) ** 2 + np.round(spec.imag / block) ** 2
        mag = np.floor(np.sqrt(power)) if root == "floor" else np.floor(np.sqrt(power) * 256) / 256
        est = w @ mag * block / shift
        floor = w.sum(axis=1) * np.sqrt(np.sum(win ** 2) / 12)
        worst = max(worst, worst_db(ref, est, floor, (40,), power=False)[0])
    return worst


def dc_removal(path, form, p=0.999):
    _, x = load(path)
    x = x / 32768.0
    p32, c32 = f32(p), f32(1) - f32(p)
    exact = np.zeros_like(x)
    xp = yp = 0.0
    for i in range(len(x)):
        exact[i] = x[i] - xp + float(p32) * yp
        xp, yp = x[i], exact[i]
    out = np.zeros(len(x), np.float32)
    if form == "textbook":
        xp, yp = f32(0), f32(0)
        for i in range(len(x)):
            xi = f32(x[i])
            out[i] = f32(f32(xi - xp) + f32(p32 * yp))
            xp, yp = xi, out[i]
    else:
        high, low = f32(0), f32(0)
        for i in range(len(x)):
            y = f32(f32(f32(x[i]) - high) - low)
            out[i] = y
            step = f32(f32(c32 * y) + low)
            s = f32(high + step)
            low = f32(step - f32(s - high))
            high = s
    n, length, hop = 256, 200, 80
    w = filterbank(8000, n, 64, 4000, 23)
    win = np.hamming(length)
    worst = 0.0
    for s in range(0, len(x) - length + 1, hop):
        ref = w @ np.abs(np.fft.rfft(exact[s:s + length] * win, n))
        est = w @ np.abs(np.fft.rfft(out[s:s + length].astype(np.float64) * win, n))
        worst = max(worst, worst_db(ref, est, 0.0, (60,), power=False)[0])
    return worst


def main(corpus):
    print("1. 16-bit normalisation, speech16k-40, worst |error| dB at R = 40 / R = 60:")
    for clip in ["speech-135-en-gb-x-rp-clean", "speech-119-en-clean", "speech-000-en-clean"]:
        path = f"{corpus}/16000/{clip}.wav"
        row = {m: normalisation(path, m) for m in ["raw", "windowed", "segments"]}
        print(f"   {clip}: " + ", ".join(f"{m} {v[0]:.3f} / {v[1]:.3f}" for m, v in row.items()))
    print("2. dsr8k-23-like magnitude bins, worst |error| dB at R = 40:")
    for clip in ["signal-step-minus-12000", "signal-const-minus-20000", "signal-tone-30hz-dc"]:
        path = f"{corpus}/8000/{clip}.wav"
        print(f"   {clip}: integer root {magnitudes(path, 'floor'):.3f}, "
              f"8 fraction bits {magnitudes(path, 'fraction'):.3f}")
    print("3. f32 DC removal (pole 0.999), worst |error| dB at R = 60 (magnitude spectrum):")
    for path in sorted(glob.glob(f"{corpus}/8000/*dc-offset*.wav"))[:4]:
        print(f"   {path.split('/')[-1]}: textbook {dc_removal(path, 'textbook'):.2e}, "
              f"compensated {dc_removal(path, 'compensated'):.2e}")


if __name__ == "__main__":
    main(sys.argv[1])
