#!/usr/bin/env bash
# The project's whole test command: sets up the Python reference libraries, runs the Rust
# tests, builds the release binary and checks it against scipy.signal and mpmath.
set -euo pipefail
cd "$(dirname "$0")/.."
# Python reference libraries: the system's if present, else a venv under target/.
source tests/python-env.sh
cargo test
cargo build --release
"$PY" tests/reference/check_core.py --quiet
"$PY" tests/reference/check_circuits.py --quiet
# Near-repeated poles (pairs 1e-3 ... 1e-10 apart) against mpmath partial fractions: accurate
# to 1e-7, or warned with a bound at least the error.
"$PY" tests/reference/check_near_repeated.py --quiet
# Recovery from synthetic captures (tests/recovery/gen_capture.py): Cramér–Rao spread and
# coverage, the three readings, a part off its value, file layouts, bad files.
"$PY" tests/recovery/check_recovery.py --quiet
# Planning for the fit reading: predicted 95 % intervals against the spread `recover` achieves
# on 200 seeded captures of the planned test, on three shipped scenarios.
"$PY" tests/recovery/check_fit_plan.py --quiet
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
"$PY" tests/browser/check_report.py --quiet
