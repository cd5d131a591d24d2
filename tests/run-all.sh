#!/usr/bin/env bash
# The project's whole test command: installs the Python reference libraries, runs the Rust
# tests, builds the release binary and checks it against scipy.signal and mpmath.
set -euo pipefail
cd "$(dirname "$0")/.."
python3 -m pip install --quiet --disable-pip-version-check -r tests/reference/requirements.txt
cargo test
cargo build --release
python3 tests/reference/check_core.py --quiet
