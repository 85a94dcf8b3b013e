"""Host speed of `stapes export` against an equivalent vectorised numpy/scipy
pipeline, on the same generated clips. A benchmark, not a test: it prints
figures and the ratios to the targets, and exits 0 either way.

Usage (from the repository root, after `cargo build --release`):
    .venv/bin/python tests/bench/export_speed.py [--clips 300] [--repeats 7]

The clips are the project's own: 300 one-second 16 kHz clips in three label
folders, each a gliding harmonic tone with noise at a level between -30 and
-6 dBFS (seeded, so every run measures the same input).

The numpy/scipy pipeline computes speech16k-40's log-mel frames in float64
from the formulas (periodic Hann window, |rfft|^2, one matrix multiply with
the triangular mel filterbank, 10·log10 with the -100 dB floor), framing
every clip and stacking all frames into one matrix, and writes the same
packed [clips, frames, bands] float32 array and int32 labels. BLAS runs on
one thread.

Each command runs as its own process; runs alternate between commands
(paired), and the median of the repeats is reported. Two figures per
command: wall time of the whole process (interpreter start and imports
included for numpy, process start and table generation included for
stapes), and for numpy also its own timing of the work after the imports.
Throughput ratios are clips per second relative to numpy.
"""
import argparse
import os
import resource
import pathlib
import shutil
import statistics
import subprocess
import sys
import tempfile
import time
import wave

import numpy as np

ROOT = pathlib.Path(__file__).resolve().parents[2]
STAPES = ROOT / "target" / "release" / "stapes"
RATE = 16000

NUMPY_PIPELINE = r'''
import sys, time
t0 = time.perf_counter()
import glob, numpy as np, scipy.io.wavfile, scipy.signal, scipy.fft
t1, c1 = time.perf_counter(), time.process_time()
RATE, WINDOW, FFT, HOP, BANDS = 16000, 512, 512, 160, 40
def mel(f): return 2595.0 * np.log10(1.0 + f / 700.0)   # O'Shaughnessy 1987
def imel(m): return 700.0 * (10.0 ** (m / 2595.0) - 1.0)
edges = imel(np.linspace(mel(20.0), mel(8000.0), BANDS + 2)); edges[0], edges[-1] = 20.0, 8000.0
freqs = np.arange(FFT // 2 + 1) * RATE / FFT
lo, mid, hi = edges[:-2, None], edges[1:-1, None], edges[2:, None]
bank = np.maximum(0.0, np.minimum((freqs - lo) / (mid - lo), (hi - freqs) / (hi - mid))).T
window = scipy.signal.get_window("hann", WINDOW)   # periodic Hann
labels_seen, frames, labels = {}, [], []
for path in sorted(glob.glob(sys.argv[1] + "/*/*.wav")):
    label = path.split("/")[-2]
    rate, x = scipy.io.wavfile.read(path)
    x = x.astype(np.float64) / 32768.0
    frames.append(np.lib.stride_tricks.sliding_window_view(x, WINDOW)[::HOP])
    labels.append(labels_seen.setdefault(label, len(labels_seen)))
counts = [len(f) for f in frames]
stack = np.concatenate(frames) * window
power = np.abs(scipy.fft.rfft(stack, axis=1)) ** 2
levels = 10.0 * np.log10(np.maximum(power @ bank, 1e-10))
out = levels.reshape(len(counts), counts[0], BANDS).astype(np.float32)
np.save(sys.argv[2] + "/features.npy", out)
np.save(sys.argv[2] + "/labels.npy", np.array(labels, dtype=np.int32))
print(time.perf_counter() - t1, time.process_time() - c1)
'''


def make_clips(folder, count):
    rng = np.random.default_rng(2026)
    labels = ["lights-on", "lights-off", "stop"]
    t = np.arange(RATE) / RATE
    for i in range(count):
        label = labels[i % 3]
        d = folder / label
        d.mkdir(parents=True, exist_ok=True)
        f0 = rng.uniform(90, 260)
        glide = rng.uniform(-60, 60)
        phase = 2 * np.pi * (f0 * t + glide * t * t / 2)
        x = sum(np.sin(k * phase) / k for k in range(1, 9))
        env = np.clip(np.sin(np.pi * np.clip((t - 0.15) / 0.6, 0, 1)), 0, 1)
        x = x * env + 0.05 * rng.standard_normal(RATE)
        x *= 10 ** (rng.uniform(-30, -6) / 20) / np.max(np.abs(x))
        with wave.open(str(d / f"clip{i:04d}.wav"), "wb") as w:
            w.setnchannels(1)
            w.setsampwidth(2)
            w.setframerate(RATE)
            w.writeframes(np.round(x * 32767).astype("<i2").tobytes())


def timed(cmd, env=None):
    """Wall time and CPU time (user + system) of one child process."""
    before = resource.getrusage(resource.RUSAGE_CHILDREN)
    start = time.perf_counter()
    r = subprocess.run(cmd, capture_output=True, text=True, env=env)
    wall = time.perf_counter() - start
    after = resource.getrusage(resource.RUSAGE_CHILDREN)
    if r.returncode != 0:
        sys.exit(f"{' '.join(map(str, cmd))} failed:\n{r.stderr}")
    cpu = (after.ru_utime - before.ru_utime) + (after.ru_stime - before.ru_stime)
    return wall, cpu, r.stdout


def main():
    ap = argparse.ArgumentParser()
    ap.add_argument("--clips", type=int, default=300)
    ap.add_argument("--repeats", type=int, default=7)
    args = ap.parse_args()
    if not STAPES.exists():
        sys.exit("build first: cargo build --release -p stapes-sim")
    work = pathlib.Path(tempfile.mkdtemp(prefix="stapes-bench-"))
    try:
        clips = work / "clips"
        make_clips(clips, args.clips)
        script = work / "numpy_pipeline.py"
        script.write_text(NUMPY_PIPELINE)
        env = dict(os.environ, OPENBLAS_NUM_THREADS="1", OMP_NUM_THREADS="1", MKL_NUM_THREADS="1")
        commands = {
            "numpy/scipy float64": None,
            "stapes f32, 1 thread": ("f32", 1),
            "stapes fixed16, 1 thread": ("fixed16", 1),
            "stapes fixed32, 1 thread": ("fixed32", 1),
            "stapes f32, 2 threads": ("f32", 2),
            "stapes fixed16, 2 threads": ("fixed16", 2),
        }
        walls = {k: [] for k in commands}
        cpus = {k: [] for k in commands}
        inner_cpu = []
        for rep in range(args.repeats):
            for name, spec in commands.items():
                out = work / f"out-{rep}-{abs(hash(name))}"
                out.mkdir()
                if spec is None:
                    wall, cpu, text = timed([sys.executable, str(script), str(clips), str(out)],
                                            env)
                    inner_cpu.append(float(text.split()[1]))
                else:
                    arith, threads = spec
                    wall, cpu, _ = timed([str(STAPES), "export", "--input-dir", str(clips),
                                          "--output-dir", str(out), "--arith", arith,
                                          "--threads", str(threads), "--frames", "97",
                                          "--quiet"])
                walls[name].append(wall)
                cpus[name].append(cpu)
                shutil.rmtree(out)
        wall = {k: statistics.median(v) for k, v in walls.items()}
        cpu = {k: statistics.median(v) for k, v in cpus.items()}
        np_cpu, np_work = cpu["numpy/scipy float64"], statistics.median(inner_cpu)
        n = args.clips
        print(f"host speed: {n} one-second 16 kHz clips, speech16k-40, median of "
              f"{args.repeats} paired runs ({os.cpu_count()} cores)")
        print("  CPU seconds (user + system) of the whole process; numpy's own work after its "
              f"imports: {np_work:.3f} s")
        print(f"  {'command':28s} {'CPU s':>7s} {'wall s':>7s} {'clips/CPU-s':>12s} "
              f"{'vs numpy whole':>15s} {'vs numpy work':>14s}")
        print(f"  {'numpy/scipy float64':28s} {np_cpu:7.3f} {wall['numpy/scipy float64']:7.3f} "
              f"{n / np_cpu:12.0f} {'1.00':>15s} {'1.00':>14s}")
        for name in list(commands)[1:]:
            c = cpu[name]
            print(f"  {name:28s} {c:7.3f} {wall[name]:7.3f} {n / c:12.0f} {np_cpu / c:15.2f} "
                  f"{np_work / c:14.2f}")
        one = lambda a: cpu[f"stapes {a}, 1 thread"]
        scale = lambda a: wall[f"stapes {a}, 1 thread"] / wall[f"stapes {a}, 2 threads"]
        print("targets, one core, throughput against numpy's work alone (the stricter "
              "comparison; against the whole numpy process the ratios are larger):")
        for a, target in (("f32", 4.0), ("fixed16", 1.5)):
            r = np_work / one(a)
            print(f"  {a} >= {target}x: {r:.2f}x {'met' if r >= target else 'NOT met'}")
        print("target, one core to two (wall time of the whole command):")
        for a in ("f32", "fixed16"):
            print(f"  {a} >= 1.8x: {scale(a):.2f}x {'met' if scale(a) >= 1.8 else 'NOT met'}")
    finally:
        shutil.rmtree(work, ignore_errors=True)


if __name__ == "__main__":
    main()
