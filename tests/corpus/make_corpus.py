#!/usr/bin/env python3
"""Builds the speech corpus the accuracy tests run on, deterministically.

    python3 tests/corpus/make_corpus.py OUT_DIR

Speech comes from espeak-ng (several voices, speaking rates and pitches),
resampled by sox to 16 kHz and 8 kHz; everything else (levels, background
noise, mains hum, DC offset, and the non-speech signals: constant,
near-constant, step, click, low tone) is done here with a seeded generator,
so the same packages give the same files. Layout:

    OUT_DIR/16000/*.wav   OUT_DIR/8000/*.wav   (16-bit PCM, mono)
    OUT_DIR/manifest.csv  (file, rate, voice, speed, pitch, peak dBFS, condition)

The sentences are the project's own; nothing here was designed around the
front end's numerics, which is the point of the corpus.
"""

import csv
import math
import os
import random
import struct
import subprocess
import sys
import tempfile
import wave
from concurrent.futures import ThreadPoolExecutor

RATES = (16000, 8000)

# espeak-ng voices and variants (Debian's espeak-ng-data): male, female and
# accented voices.
VOICES = ("en", "en-us", "en-gb-x-rp", "en+f3", "en+m7", "en-gb-scotland+f5", "en-029+f2")
SPEEDS = (120, 165, 215)  # words per minute
PITCHES = (25, 50, 75)

SENTENCES = (
    "Turn the left sprinkler on for ten minutes.",
    "The weather station reports light rain at dawn.",
    "Please check the pressure in line four.",
    "Seven rows of young trees need water today.",
    "Stop everything and wait for the technician.",
    "How much battery is left on the north gate?",
    "A fox walked past the shed just after midnight.",
    "Shut the main supply before the storm arrives.",
    "Soil moisture is twenty two percent and falling.",
    "Schedule a flush of the filter on Thursday.",
    "Is the backup pump still making that noise?",
    "Thirty litres went through meter six this hour.",
    "Cherry blocks first, then the pear orchard.",
    "The tank float switch looks stuck again.",
    "Yes, confirm the order for three new valves.",
    "Quiet please, the recording starts now.",
    "Sixty six, seventy seven, eighty eight, ninety nine.",
    "She sells fresh juice at the shop by the bridge.",
    "Zero zero one, send the status to the office.",
    "Whisper the numbers: four, five, six.",
    "Every evening the frogs get louder near the pond.",
    "Measure twice, and then cut the pipe once.",
    "The generator hums while the fuel runs low.",
    "Check it. Check it again. Then report back.",
)

# Peak levels in dBFS, from nearly full scale to quiet.
LEVELS = (-1.0, -3.0, -6.0, -10.0, -15.0, -20.0, -26.0, -32.0, -40.0)
CONDITIONS = ("clean", "noise-20db", "noise-5db", "hum", "dc-offset", "noise-hum-dc")
CLIPS_PER_RATE = 168


def write_wav_i16(path, rate, samples):
    """Full-scale floats, rounded to 16 bits."""
    write_wav_raw(path, rate, [max(-32768, min(32767, int(round(s * 32768.0)))) for s in samples])


def write_wav_raw(path, rate, ints):
    tmp = path + ".part"
    with wave.open(tmp, "wb") as w:
        w.setnchannels(1)
        w.setsampwidth(2)
        w.setframerate(rate)
        w.writeframes(struct.pack("<%dh" % len(ints), *ints))
    os.replace(tmp, path)


def speak(text, voice, speed, pitch, rates, workdir, stem):
    """espeak-ng to a WAV at its own rate, then sox to each rate (32-bit)."""
    src = os.path.join(workdir, stem + ".wav")
    subprocess.run(
        ["espeak-ng", "-v", voice, "-s", str(speed), "-p", str(pitch), "-w", src, text],
        check=True,
        stdout=subprocess.DEVNULL,
        stderr=subprocess.DEVNULL,
    )
    out = {}
    for rate in rates:
        # Raw little-endian 32-bit output: sox writes 32-bit WAVs in the
        # extensible format, which Python's wave module does not read.
        dst = os.path.join(workdir, "%s-%d.raw" % (stem, rate))
        subprocess.run(
            # Halve the level first: espeak-ng peaks near full scale and the
            # resampler's ringing would clip (the level is set later anyway).
            ["sox", src, "-b", "32", "-e", "signed-integer", "-L", "-t", "raw", dst,
             "vol", "0.5", "rate", str(rate)],
            check=True,
        )
        with open(dst, "rb") as f:
            raw = f.read()
        vals = struct.unpack("<%di" % (len(raw) // 4), raw)
        out[rate] = [v / 2147483648.0 for v in vals]
    return out


def condition_signal(x, rate, condition, rng):
    """Adds the condition to speech normalised to peak 1."""
    n = len(x)
    rms = math.sqrt(sum(v * v for v in x) / max(n, 1)) or 1e-9
    y = list(x)
    if "noise" in condition:
        snr_db = 5.0 if "5db" in condition else 20.0
        if condition == "noise-hum-dc":
            snr_db = 15.0
        sigma = rms / (10 ** (snr_db / 20.0))
        # Slightly coloured background: white noise through a one-pole low-pass.
        state = 0.0
        for i in range(n):
            state = 0.7 * state + rng.gauss(0.0, sigma)
            y[i] += state * 0.55
    if "hum" in condition:
        mains = 50.0 if rng.random() < 0.5 else 60.0
        amp = rms * 0.3
        phase = rng.random() * 2 * math.pi
        for i in range(n):
            t = i / rate
            y[i] += amp * (
                math.sin(2 * math.pi * mains * t + phase)
                + 0.4 * math.sin(2 * math.pi * 3 * mains * t + 2 * phase)
                + 0.15 * math.sin(2 * math.pi * 5 * mains * t + 3 * phase)
            )
    if "dc" in condition:
        offset = (0.05 + 0.2 * rng.random()) * (1 if rng.random() < 0.5 else -1)
        y = [v + offset for v in y]
    return y


def at_peak(y, level_db):
    peak = max(abs(v) for v in y) or 1.0
    g = (10 ** (level_db / 20.0)) * 32767.0 / 32768.0 / peak
    return [v * g for v in y]


def specials(rate, rng):
    """Non-speech signals that stress the conditioning and the block exponent."""
    n = rate  # one second each
    out = {}
    out["const-zero"] = [0] * n
    out["const-2lsb"] = [2] * n
    out["const-minus-3lsb"] = [-3] * n
    out["const-1000"] = [1000] * n
    out["const-minus-20000"] = [-20000] * n
    out["near-const-1000"] = [1000 + rng.choice((-1, 0, 1)) for _ in range(n)]
    out["lsb-noise"] = [rng.choice((-1, 0, 0, 1)) for _ in range(n)]
    out["step-0-8000"] = [0] * (n // 2) + [8000] * (n - n // 2)
    out["step-minus-12000"] = [3000] * (n // 3) + [-12000] * (n - n // 3)
    click = [0] * n
    click[n // 3] = 32767
    out["click-full-scale"] = click
    train = [0] * n
    for i in range(0, n, rate // 10):
        train[i] = -16000
    out["click-train"] = train
    out["tone-30hz-dc"] = [
        int(round(2000 + 6000 * math.sin(2 * math.pi * 30 * i / rate))) for i in range(n)
    ]
    out["tone-1khz-minus-60dbfs"] = [
        int(round(32.767 * math.sin(2 * math.pi * 1000 * i / rate))) for i in range(n)
    ]
    return out


def main():
    if len(sys.argv) != 2:
        sys.exit("usage: make_corpus.py OUT_DIR")
    out_dir = sys.argv[1]
    for rate in RATES:
        os.makedirs(os.path.join(out_dir, str(rate)), exist_ok=True)
    jobs = []
    for i in range(CLIPS_PER_RATE):
        jobs.append(
            dict(
                index=i,
                text=SENTENCES[i % len(SENTENCES)],
                voice=VOICES[i % len(VOICES)],
                speed=SPEEDS[(i // len(VOICES)) % len(SPEEDS)],
                pitch=PITCHES[(i // 3) % len(PITCHES)],
            )
        )
    rows = []
    with tempfile.TemporaryDirectory() as work:

        def synth(job):
            stem = "u%03d" % job["index"]
            return job, speak(job["text"], job["voice"], job["speed"], job["pitch"], RATES, work, stem)

        with ThreadPoolExecutor(max_workers=max(2, os.cpu_count() or 2)) as pool:
            spoken = list(pool.map(synth, jobs))

    for job, by_rate in spoken:
        i = job["index"]
        for r_index, rate in enumerate(RATES):
            # A different level and condition per rate, so the 8 kHz set is not
            # just the 16 kHz set resampled.
            k = i + 5 * r_index
            level = LEVELS[k % len(LEVELS)]
            condition = CONDITIONS[(k // len(LEVELS) + k) % len(CONDITIONS)]
            rng = random.Random(1000003 * rate + i)
            x = by_rate[rate]
            peak = max(abs(v) for v in x) or 1.0
            x = [v / peak for v in x]
            y = at_peak(condition_signal(x, rate, condition, rng), level)
            name = "speech-%03d-%s-%s.wav" % (i, job["voice"].replace("+", "_"), condition)
            write_wav_i16(os.path.join(out_dir, str(rate), name), rate, y)
            rows.append(
                [
                    "%d/%s" % (rate, name),
                    rate,
                    job["voice"],
                    job["speed"],
                    job["pitch"],
                    level,
                    condition,
                ]
            )
    for rate in RATES:
        rng = random.Random(rate)
        for name, ints in specials(rate, rng).items():
            file = "signal-%s.wav" % name
            write_wav_raw(os.path.join(out_dir, str(rate), file), rate, ints)
            peak = max(abs(v) for v in ints)
            level = 20 * math.log10(peak / 32768.0) if peak else float("-inf")
            rows.append(["%d/%s" % (rate, file), rate, "", "", "", round(level, 2), name])
    with open(os.path.join(out_dir, "manifest.csv"), "w", newline="") as f:
        w = csv.writer(f)
        w.writerow(["file", "rate_hz", "voice", "speed_wpm", "pitch", "peak_dbfs", "condition"])
        w.writerows(rows)
    print("corpus: %d clips in %s" % (len(rows), out_dir))


if __name__ == "__main__":
    main()
