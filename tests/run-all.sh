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
# Browser check of the HTML report: headless Chromium renders report.html and each figure, and
# prints the report (poppler-utils' pdftotext reads the printed pages back). CI runs as root and
# installs what is missing; elsewhere the check needs Chromium present (and skips the printed
# pages, saying so, without pdftotext).
missing=""
[ -x /usr/bin/chromium ] || missing="chromium"
command -v pdftotext >/dev/null || missing="$missing poppler-utils"
if [ -n "$missing" ] && [ "$(id -u)" = "0" ]; then
    # shellcheck disable=SC2086
    (apt-get update -qq && DEBIAN_FRONTEND=noninteractive apt-get install -y -qq $missing) >/dev/null
fi
python3 tests/browser/check_report.py --quiet
