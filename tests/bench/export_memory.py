"""Resident memory of `stapes export` on a large synthetic dataset: memory
must follow the shard, not the dataset. A measurement, not a test.

Usage (from the repository root, after `cargo build --release`):
    .venv/bin/python tests/bench/export_memory.py [--clips 100000]

Writes 100 distinct one-second clips (the speed benchmark's generator) and
links each into the dataset folder until it holds --clips clips (hard
links: the disk holds 100 clips), runs `stapes export` over it (f32,
speech16k-40, every core, 2048 clips per shard) and prints the child's
peak resident memory (getrusage), wall time and output size. Then writes one
long recording (--long-minutes, the same clips end to end) and runs `stapes
features` over it, which streams from disk to disk: its peak memory must not
grow with the recording.
"""
import argparse
import os
import pathlib
import shutil
import subprocess
import sys
import tempfile
import time

sys.path.insert(0, str(pathlib.Path(__file__).resolve().parent))
from export_speed import STAPES, make_clips  # noqa: E402


def run(cmd):
    """Runs `cmd`; returns its exit status, wall seconds, its own peak
    resident memory in MiB (os.wait4's rusage of that child alone) and its
    standard output."""
    start = time.perf_counter()
    with tempfile.TemporaryFile() as out, tempfile.TemporaryFile() as err:
        child = subprocess.Popen(cmd, stdout=out, stderr=err)
        _, status, usage = os.wait4(child.pid, 0)
        child.returncode = os.waitstatus_to_exitcode(status)
        wall = time.perf_counter() - start
        out.seek(0)
        err.seek(0)
        if child.returncode != 0:
            sys.exit(err.read().decode())
        return wall, usage.ru_maxrss / 1024, out.read().decode()


def main():
    ap = argparse.ArgumentParser()
    ap.add_argument("--clips", type=int, default=100_000)
    ap.add_argument("--long-minutes", type=int, default=60)
    args = ap.parse_args()
    if not STAPES.exists():
        sys.exit("build first: cargo build --release -p stapes-sim")
    work = pathlib.Path(tempfile.mkdtemp(prefix="stapes-memory-"))
    try:
        seed = work / "seed"
        make_clips(seed, 100)
        sources = sorted(seed.glob("*/*.wav"))
        data = work / "data"
        for i in range(args.clips):
            src = sources[i % len(sources)]
            d = data / src.parent.name
            d.mkdir(parents=True, exist_ok=True)
            os.link(src, d / f"{i:06d}.wav")
        out = work / "out"
        wall, peak, text = run([str(STAPES), "export", "--input-dir", str(data),
                                "--output-dir", str(out), "--frames", "97", "--quiet"])
        size = sum(f.stat().st_size for f in out.rglob("*") if f.is_file())
        print(text.strip().splitlines()[0])
        print(f"export memory: {args.clips} clips, peak resident {peak:.1f} MiB, "
              f"wall {wall:.1f} s, output {size / 1e9:.2f} GB")
        shutil.rmtree(out)

        import wave
        long = work / "long.wav"
        with wave.open(str(long), "wb") as w:
            w.setnchannels(1)
            w.setsampwidth(2)
            w.setframerate(16000)
            pieces = [wave.open(str(p), "rb").readframes(16000) for p in sources]
            for i in range(args.long_minutes * 60):
                w.writeframes(pieces[i % len(pieces)])
        npy = work / "long.npy"
        wall, peak, _ = run([str(STAPES), "features", "--input", str(long), "--output",
                             str(npy), "--arith", "fixed16"])
        print(f"features memory: a {args.long_minutes}-minute recording "
              f"({long.stat().st_size / 1e6:.0f} MB), peak resident {peak:.1f} MiB, "
              f"wall {wall:.1f} s, output {npy.stat().st_size / 1e6:.0f} MB")
    finally:
        shutil.rmtree(work, ignore_errors=True)


if __name__ == "__main__":
    main()
