"""The table of `stapes match` over the test's combinations of conventions
(tests/python/test_match.py): for each, the verdict, what the command found
and the residual of the board's f32 core against the pipeline's features.

Usage (from the repository root, after `cargo build --release`):
    .venv/bin/python tests/python/match_table.py
"""
import pathlib
import subprocess
import sys
import tempfile
import wave

import numpy as np

sys.path.insert(0, str(pathlib.Path(__file__).resolve().parent))
import test_match as tm  # noqa: E402  (the pipelines and clips of the test)


def main():
    work = pathlib.Path(tempfile.mkdtemp(prefix="stapes-match-"))
    clips = tm.make_clips(work)
    print("| pipeline | verdict | found | residual, max over values (dB) | named as not reproducible "
          "| fixed32 | fixed16 |")
    print("|---|---|---|---|---|---|---|")
    for k, (name, rate, kwargs, expected) in enumerate(tm.COMBINATIONS):
        feats = []
        for i, w in enumerate(clips[rate]):
            with wave.open(str(w)) as f:
                x = np.frombuffer(f.readframes(f.getnframes()), dtype="<i2")
            p = work / f"f{k}-{i}.npy"
            np.save(p, tm.pipeline(x, rate, **kwargs).astype(np.float32))
            feats.append(p)
        out = work / f"out{k}"
        args = [tm.STAPES, "match", "--output-dir", str(out)]
        for w, f in zip(clips[rate], feats):
            args += ["--clip", str(w), "--features", str(f)]
        subprocess.run(args, capture_output=True, text=True)
        report = (out / "match-report.txt").read_text().splitlines()
        verdict = report[0].split(":")[0]
        residual = report[0].split("(")[1].split(" dB")[0] if "(" in report[0] else "-"
        found = next(l for l in report if l.startswith("found:"))[len("found: "):]
        named = [l.strip()[2:] for l in report if l.startswith("  - ")]
        fixed = []
        for arith in ("fixed32", "fixed16"):
            line = next(l for l in report if l.startswith(f"the board's {arith} core:"))
            fixed.append(line.split("(")[1].split(")")[0] if "residual" in line else "not run")
        print(f"| {name} | {verdict} | {found} | {residual} | {'; '.join(named) or '-'} "
              f"| {fixed[0]} | {fixed[1]} |")


if __name__ == "__main__":
    main()
