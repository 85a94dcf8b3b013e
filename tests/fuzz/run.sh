#!/usr/bin/env bash
# Runs every fuzz target for a short fixed time (STAPES_FUZZ_SECONDS, 30 by
# default) from its seeds, with overflow checks and debug assertions on, on the stable toolchain (RUSTC_BOOTSTRAP lets
# cargo-fuzz pass its sanitizer flags), and prints each target's executions.
# A crash fails the run; cargo-fuzz writes the input to
# tests/fuzz/artifacts/TARGET/: copy it to tests/fuzz/regressions/TARGET/ and
# fix the cause (tests/fuzz_replay.rs replays it from then on).
set -euo pipefail
cd "$(dirname "$0")/../.."
seconds=${STAPES_FUZZ_SECONDS:-30}
# libFuzzer is built from its C++ sources.
if ! command -v c++ >/dev/null 2>&1; then
  if [ "$(id -u)" = 0 ]; then
    apt-get update -qq && DEBIAN_FRONTEND=noninteractive apt-get install -y -qq g++
  else
    sudo apt-get update -qq && sudo DEBIAN_FRONTEND=noninteractive apt-get install -y -qq g++
  fi
fi
if ! command -v cargo-fuzz >/dev/null 2>&1; then
  cargo install cargo-fuzz --version 0.13.1 --locked
fi
for target in blob_bytes blob_repaired configuration wav_reader streaming; do
  corpus=target/fuzz-corpus/$target
  mkdir -p "$corpus"
  case $target in
    blob_*) cp tables/*.bin "$corpus"/ ;;
    *) cp tests/fuzz/seeds/"$target"/* "$corpus"/ ;;
  esac
  if [ -d tests/fuzz/regressions/"$target" ]; then
    cp tests/fuzz/regressions/"$target"/* "$corpus"/ 2>/dev/null || true
  fi
  log=$(mktemp)
  if ! RUSTC_BOOTSTRAP=1 cargo fuzz run --debug-assertions --fuzz-dir tests/fuzz "$target" "$corpus" -- \
      -max_total_time="$seconds" -print_final_stats=1 >"$log" 2>&1; then
    tail -n 60 "$log"
    echo "fuzz target $target failed: see tests/fuzz/artifacts/$target/" >&2
    exit 1
  fi
  runs=$(grep -E '^stat::number_of_executed_units' "$log" | awk '{print $2}')
  echo "fuzz $target: ${runs:-?} executions in ${seconds} s, no crash"
  rm -f "$log"
done
