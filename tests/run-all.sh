#!/usr/bin/env bash
# Runs every test of stapes. On a fresh machine it first installs what the
# tests need: the bare-metal Rust targets (rustup) and, for the optional
# numpy/scipy cross-check, a Python virtual environment (pip).
set -euo pipefail
cd "$(dirname "$0")/.."

step() { printf '\n== %s\n' "$*"; }

step "toolchain: bare-metal targets and rustfmt"
rustup target add thumbv6m-none-eabi thumbv7em-none-eabihf
rustup component add rustfmt >/dev/null 2>&1 || true

step "emulator: qemu-system-arm (Debian package) for the firmware tests"
if ! command -v qemu-system-arm >/dev/null 2>&1; then
  if [ "$(id -u)" = 0 ]; then
    apt-get update -qq && DEBIAN_FRONTEND=noninteractive apt-get install -y -qq qemu-system-arm
  else
    sudo apt-get update -qq && sudo DEBIAN_FRONTEND=noninteractive apt-get install -y -qq qemu-system-arm
  fi
fi
qemu-system-arm --version | head -n 1

step "speech synthesis: espeak-ng and sox (Debian packages) for the speech corpus"
if ! command -v espeak-ng >/dev/null 2>&1 || ! command -v sox >/dev/null 2>&1; then
  if [ "$(id -u)" = 0 ]; then
    apt-get update -qq && DEBIAN_FRONTEND=noninteractive apt-get install -y -qq espeak-ng sox
  else
    sudo apt-get update -qq && sudo DEBIAN_FRONTEND=noninteractive apt-get install -y -qq espeak-ng sox
  fi
fi
espeak-ng --version | head -n 1

step "formatting"
cargo fmt --all --check
cargo fmt --manifest-path host-sim/python/Cargo.toml --check

step "tests: generator, core, reference, CLI, speech corpus, golden bits, float-free proof, firmware under QEMU (overflow checks on)"
cargo test --workspace

step "fuzzing: blob (raw and repaired), configuration, WAV reader, streaming; ${STAPES_FUZZ_SECONDS:-30} s each"
bash tests/fuzz/run.sh

step "no_std: stapes-core alone for Cortex-M0 (thumbv6m) and Cortex-M4F (thumbv7em)"
for target in thumbv6m-none-eabi thumbv7em-none-eabihf; do
  cargo build -p stapes-core --release --target "$target" --features fft-512
done
# The fixed path alone (no microfft at all) and the optional defmt integration.
cargo build -p stapes-core --release --target thumbv6m-none-eabi
cargo build -p stapes-core --release --target thumbv7em-none-eabihf --features defmt,fft-512
if cargo tree -p stapes-core -e features,no-proc-macro,no-build,no-dev --target thumbv6m-none-eabi \
    --features fft-512 | grep 'feature "std"'; then
  echo "stapes-core pulls a std feature on a bare-metal target" >&2
  exit 1
fi

step "firmware example builds for thumbv7em-none-eabihf"
(cd firmware-example && cargo build --release)

step "numpy/scipy cross-check of the demo's features"
demo_dir=$(mktemp -d)
trap 'rm -rf "$demo_dir"' EXIT
cargo run --release -q -p stapes-sim -- demo --out-dir "$demo_dir" >/dev/null
if [ ! -x .venv/bin/python ]; then
  python3 -m venv .venv
fi
.venv/bin/python -c 'import numpy, scipy' 2>/dev/null || .venv/bin/pip install -q numpy scipy
.venv/bin/python tests/python/numpy_cross_check.py "$demo_dir"

step "Python module: wheel built with maturin, installed in .venv, pytest against the CLI and export"
.venv/bin/python -c 'import maturin, pytest' 2>/dev/null || .venv/bin/pip install -q "maturin>=1.16,<2" pytest
rm -rf target/wheels
CARGO_TARGET_DIR="$PWD/target" .venv/bin/maturin build --release -q \
  -m host-sim/python/Cargo.toml -o target/wheels
.venv/bin/pip install -q --force-reinstall --no-deps target/wheels/stapes-*.whl
STAPES_BIN="$PWD/target/release/stapes" .venv/bin/python -m pytest -q tests/python/test_module.py

step "stapes match against desktop pipelines written from the formulas (numpy/scipy)"
STAPES_BIN="$PWD/target/release/stapes" .venv/bin/python -m pytest -q tests/python/test_match.py

step "all tests passed"
