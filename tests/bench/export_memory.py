"""Resident memory of `stapes export` on a large synthetic dataset: memory
must follow the shard, not the dataset. A measurement, not a test.

Usage (from the repository root, after `cargo build --release`):
    .venv/bin/python tests/bench/export_memory.py [--clips 100000]

Writes 100 distinct one-second clips (the speed benchmark's generator) and
links each into the dataset folder until it holds --clips clips (hard
links: the disk holds 100 clips), runs `stapes export` over it (f32,
speech16k-40, every core, 2048 clips per shard) and prints the child's
peak resident memory (getrusage), wall time and output size.
"""
import argparse
import os
import pathlib
import resource
import shutil
import subprocess
import sys
import tempfile
import time

sys.path.insert(0, str(pathlib.Path(__file__).resolve().parent))
from export_speed import STAPES, make_clips  # noqa: E402


def main():
    ap = argparse.ArgumentParser()
    ap.add_argument("--clips", type=int, default=100_000)
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
        start = time.perf_counter()
        r = subprocess.run([str(STAPES), "export", "--input-dir", str(data), "--output-dir",
                            str(out), "--frames", "97", "--quiet"], capture_output=True, text=True)
        wall = time.perf_counter() - start
        if r.returncode != 0:
            sys.exit(r.stderr)
        peak_kib = resource.getrusage(resource.RUSAGE_CHILDREN).ru_maxrss
        size = sum(f.stat().st_size for f in out.rglob("*") if f.is_file())
        print(r.stdout.strip().splitlines()[0])
        print(f"export memory: {args.clips} clips, peak resident {peak_kib / 1024:.1f} MiB, "
              f"wall {wall:.1f} s, output {size / 1e9:.2f} GB")
    finally:
        shutil.rmtree(work, ignore_errors=True)


if __name__ == "__main__":
    main()
