"""Tests of the Python module `stapes` (built by maturin from host-sim/python).

Bit-identity: the module's frames are compared with `stapes features` and
`stapes export` (the CLI), value for value, for every arithmetic, raw and
float output, and stages (log, MFCC, PCEN, int8 codes). The CLI's runner is
the one `tests/firmware_qemu.rs` compares with the board under QEMU, so the
module gives the board's bits.

Run by tests/run-all.sh with STAPES_BIN pointing at the release binary.
"""
import os
import pathlib
import subprocess
import tempfile
import threading
import time
import wave

import numpy as np
import pytest

import stapes

BIN = os.environ.get("STAPES_BIN", "target/release/stapes")
RATE = 16000


def clip(seed, seconds=1.0, level=0.2):
    """A synthetic clip: a gliding harmonic tone with noise (the project's own)."""
    rng = np.random.default_rng(seed)
    n = int(RATE * seconds)
    t = np.arange(n) / RATE
    f0 = 150 + 60 * seed
    x = level * np.sin(2 * np.pi * (f0 * t + 40 * t * t))
    x += 0.3 * level * np.sin(2 * np.pi * 3 * (f0 * t + 40 * t * t))
    x += 0.01 * rng.standard_normal(n)
    return np.clip(np.round(x * 32768), -32768, 32767).astype(np.int16)


def write_wav(path, samples):
    with wave.open(str(path), "wb") as w:
        w.setnchannels(1)
        w.setsampwidth(2)
        w.setframerate(RATE)
        w.writeframes(samples.astype("<i2").tobytes())


def cli(*args):
    r = subprocess.run([BIN, *args], capture_output=True, text=True)
    assert r.returncode == 0, r.stderr
    return r.stdout


CASES = [
    # (preset, arithmetic, raw, stage)
    ("speech16k-40", "f32", False, None),
    ("speech16k-40", "fixed16", False, None),
    ("speech16k-40", "fixed16", True, None),
    ("speech16k-40", "fixed32", True, None),
    ("dsr8k-23", "fixed16", False, None),
    ("kws16k-mfcc10", "f32", True, None),
    ("kws16k-mfcc10", "fixed16", True, None),
    ("kws16k-mfcc10", "fixed32", False, "mfcc"),
    ("kws16k-pcen40", "fixed16", True, "pcen"),
    ("kws16k-pcen40", "f32", False, None),
    ("kws16k-mel40", "fixed32", True, None),
]


@pytest.mark.parametrize("preset,arith,raw,stage", CASES)
def test_one_call_equals_the_cli(tmp_path, preset, arith, raw, stage):
    rate = 8000 if preset.startswith("dsr8k") else RATE
    x = clip(3)
    if rate != RATE:
        x = x[::2].copy()
    wav = tmp_path / "c.wav"
    with wave.open(str(wav), "wb") as w:
        w.setnchannels(1)
        w.setsampwidth(2)
        w.setframerate(rate)
        w.writeframes(x.astype("<i2").tobytes())
    out = tmp_path / "c.npy"
    args = ["features", "--input", str(wav), "--output", str(out), "--preset", preset,
            "--arith", arith]
    if raw:
        args.append("--raw")
    if stage:
        args += ["--stage", stage]
    cli(*args)
    want = np.load(out)
    got = stapes.features(x, rate, preset=preset, arithmetic=arith, raw=raw, stage=stage)
    assert got.dtype == want.dtype and got.shape == want.shape, (got.dtype, want.dtype,
                                                                 got.shape, want.shape)
    assert np.array_equal(got, want)


@pytest.mark.parametrize("arith", ["f32", "fixed16", "fixed32"])
def test_streaming_equals_one_call(arith):
    x = clip(5, seconds=2.0)
    whole = stapes.features(x, RATE, preset="kws16k-pcen40", arithmetic=arith)
    fe = stapes.StreamingFrontEnd(RATE, preset="kws16k-pcen40", arithmetic=arith)
    rng = np.random.default_rng(1)
    parts, at = [], 0
    while at < len(x):
        n = int(rng.integers(1, 700))
        parts.append(fe.push(x[at:at + n]))
        at += n
    streamed = np.concatenate(parts)
    assert np.array_equal(streamed, whole)
    # After a reset the stream starts again from the first frame.
    fe.reset()
    assert np.array_equal(fe.push(x), whole)
    assert fe.values_per_frame == whole.shape[1]
    assert fe.dtype == str(whole.dtype)


def test_float32_input_is_rounded_as_the_cli_rounds_it():
    x = clip(7).astype(np.float32) / 32768.0
    a = stapes.features(x, RATE, arithmetic="fixed16")
    b = stapes.features(clip(7), RATE, arithmetic="fixed16")
    assert np.array_equal(a, b)


def test_batch_equals_export_and_single_calls(tmp_path):
    data = tmp_path / "data"
    clips = {}
    for label, seeds in (("go", [1, 2, 3]), ("stop", [4, 5])):
        (data / label).mkdir(parents=True)
        for s in seeds:
            # Lengths differ: 0.7 to 1.1 s.
            x = clip(s, seconds=0.7 + 0.1 * s)
            write_wav(data / label / f"c{s}.wav", x)
            clips[f"{label}/c{s}.wav"] = x
    out = tmp_path / "out"
    cli("export", "--input-dir", str(data), "--output-dir", str(out), "--preset",
        "kws16k-mfcc10", "--arith", "fixed16", "--raw", "--frames", "98", "--align", "centre")
    packed = np.load(out / "train" / "features.npy")
    labels = np.load(out / "train" / "labels.npy")
    names = [line.split(",")[1] for line in
             (out / "train" / "manifest.csv").read_text().splitlines()[1:]]
    batch = stapes.features_batch([clips[n] for n in names], RATE, preset="kws16k-mfcc10",
                                  arithmetic="fixed16", raw=True, frames=98, align="centre")
    assert batch.dtype == packed.dtype == np.int8
    assert np.array_equal(batch, packed)
    assert list(labels) == [0 if n.startswith("go/") else 1 for n in names]
    # Without a length: one array per clip, each the one-call result.
    listed = stapes.features_batch([clips[n] for n in names], RATE, preset="kws16k-mfcc10",
                                   arithmetic="fixed16", raw=True, threads=2)
    for n, got in zip(names, listed):
        want = stapes.features(clips[n], RATE, preset="kws16k-mfcc10", arithmetic="fixed16",
                               raw=True)
        assert np.array_equal(got, want)


def test_batch_releases_the_interpreter_lock():
    xs = [clip(i % 7, seconds=2.0) for i in range(400)]
    ticks = []
    done = threading.Event()

    def tick():
        while not done.is_set():
            ticks.append(time.perf_counter())
            time.sleep(0.001)

    t = threading.Thread(target=tick)
    t.start()
    start = time.perf_counter()
    stapes.features_batch(xs, RATE, arithmetic="fixed32", threads=1)
    end = time.perf_counter()
    done.set()
    t.join()
    during = [v for v in ticks if start < v < end]
    # Holding the lock for the whole batch would leave the other thread
    # without a single tick while it ran.
    assert end - start > 0.05
    assert len(during) >= 5, (len(during), end - start)


def test_errors_name_the_problem():
    x = clip(1)
    with pytest.raises(TypeError, match="int16.*float32"):
        stapes.features(x.astype(np.float64), RATE)
    with pytest.raises(TypeError, match="1-D"):
        stapes.features(np.stack([x, x]), RATE)
    with pytest.raises(ValueError, match="C-contiguous"):
        stapes.features(x[::2], RATE)
    with pytest.raises(ValueError, match="8000 Hz.*16000 Hz"):
        stapes.features(x, 8000)
    with pytest.raises(ValueError, match="arithmetic"):
        stapes.features(x, RATE, arithmetic="fixed8")
    with pytest.raises(ValueError, match="not a stage"):
        stapes.features(x, RATE, preset="kws16k-mfcc10", stage="pcen")
    with pytest.raises(ValueError, match="fixed arithmetic"):
        stapes.features(x, RATE, raw=True)
    with pytest.raises(ValueError, match="preset"):
        stapes.features(x, RATE, preset="no-such-preset")
    with pytest.raises(TypeError, match="clip 1"):
        stapes.features_batch([x, [1, 2, 3]], RATE)
    with pytest.raises(ValueError, match="at 44100 Hz"):
        stapes.StreamingFrontEnd(44100)


def test_presets_are_listed():
    assert "speech16k-40" in stapes.presets()
