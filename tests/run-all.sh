#!/usr/bin/env bash
# The project's whole test command: installs the Python reference libraries, runs the Rust
# tests, builds the release binary and checks it against scipy.signal and mpmath.
set -euo pipefail
cd "$(dirname "$0")/.."
python3 -m pip install --quiet --disable-pip-version-check -r tests/reference/requirements.txt
cargo test
cargo build --release
python3 tests/reference/check_core.py --quiet
python3 tests/reference/check_circuits.py --quiet
# Recovery from synthetic captures (tests/recovery/gen_capture.py): Cramér–Rao spread and
# coverage, the three readings, a part off its value, file layouts, bad files.
python3 tests/recovery/check_recovery.py --quiet
# Browser check of the HTML report: headless Chromium renders report.html and each figure.
# CI runs as root and installs Chromium when it is missing; elsewhere the check needs it present.
if [ ! -x /usr/bin/chromium ] && [ "$(id -u)" = "0" ]; then
    (apt-get update -qq && DEBIAN_FRONTEND=noninteractive apt-get install -y -qq chromium) >/dev/null
fi
python3 tests/browser/check_report.py --quiet
