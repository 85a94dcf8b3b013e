#!/usr/bin/env bash
# Regenerates the firmware figures table in README.md's "Firmware" section:
# builds the firmware example for every preset, arithmetic and core, runs it
# under QEMU, checks its frames against the host, and prints the table (also
# written to target/firmware-figures.md) and the budget predictions.
set -euo pipefail
cd "$(dirname "$0")/.."
cargo test -q -p stapes-tests --test firmware_qemu -- --nocapture | grep -E '^\||predicted|fitted costs'
