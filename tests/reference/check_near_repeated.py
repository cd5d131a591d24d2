#!/usr/bin/env python3
"""Reference checks of near-repeated poles: pairs at relative separations 1e-3 ... 1e-10.

Usage:  python3 tests/reference/check_near_repeated.py [--only SUBSTRING] [-v] [--quiet] [--keep DIR]

Scenarios are written to a temporary folder: a pole pair (real, or two close complex-conjugate
pairs) at each separation, a third well-separated pole and one zero, given as transfer
polynomials and as explicit poles. Each is planned by the release binary (`plan FILE --json`)
and its poles/residues, h(0+), error figures and h(t) (`response --csv`) are compared with the
exact partial fractions of the rational function the file states, by mpmath at 40 digits (80 in
the root finding). A figure passes when it is within 1e-7 of the normaliser (residues: 1e-7 of
themselves), or when the JSON carries the `network-ill-conditioned` warning and its bound is at
least the error found (a correct bound). Prints 'N passed, N failed' and a table of the errors.
"""

import argparse
import csv
import io
import json
import math
import os
import subprocess
import sys
import tempfile
from pathlib import Path

HERE = Path(__file__).resolve().parent
ROOT = HERE.parents[1]
sys.path.insert(0, str(HERE))

import mpmath as mp  # noqa: E402

import refmath as R  # noqa: E402
from check_core import Checker, cplx, run_tool  # noqa: E402

mp.mp.dps = 40

LIMIT = 1e-7          # every figure is held to 1e-7 of its normaliser unless warned (brief)
REL_WINDOW = 1e-4     # window max: the tool may locate the maximum on a grid (as check_core.py)
SEPARATIONS = [10.0 ** -k for k in range(3, 11)]

# Invented network: the pair near w0, a third pole and a zero well away from it.
W0 = 8192.0                   # rad/s, the pair's scale (a power of two: exact products)
THIRD = -37888.0              # rad/s (37 * 2^10)
ZERO = -5120.0                # rad/s (5 * 2^10)
ZERO2 = -23552.0              # rad/s (23 * 2^10): the second zero of the "real_h0" kind
GAIN = 3.0e4
DAMPING_PAIR = (-0.25, 1.0)   # complex pair at W0*(-0.25 +- 1j): re/im in units of W0


def pair_poles(kind, sep):
    """Poles of the scenario (f64 values): a real pair -W0, -W0(1 + d) with d = 2^-k nearest
    the separation (dyadic, so the transfer polynomials' coefficients are exact in f64), or
    two complex pairs W0(-0.25 +- 1j) and W0(-0.25 +- 1j)(1 + sep)."""
    if kind in ("real", "real_h0"):
        d = 2.0 ** round(math.log2(sep))
        return [complex(-W0), complex(-W0 * (1.0 + d)), complex(THIRD)]
    a, b = DAMPING_PAIR
    p1 = complex(W0 * a, W0 * b)
    p2 = complex(W0 * a * (1.0 + sep), W0 * b * (1.0 + sep))
    return [p1, p1.conjugate(), p2, p2.conjugate(), complex(THIRD)]


def poly_coeffs(poles):
    """Descending real coefficients of prod (s - p), rounded to f64 from 60-digit products
    (these f64 values are the file's data, written exactly)."""
    with mp.workdps(60):
        c = [mp.mpc(1)]
        for p in poles:
            nxt = [mp.mpc(0)] * (len(c) + 1)
            for i, ci in enumerate(c):
                nxt[i] += ci
                nxt[i + 1] -= ci * mp.mpc(p)
            c = nxt
        return [float(mp.re(x)) for x in c]


def exact_decimal(x):
    """The exact decimal value of an f64 (so the file states exactly what the parser holds)."""
    from decimal import Decimal
    s = format(Decimal(x), "f")
    return s if "." in s else s + ".0"


def zeros_of(kind):
    """One zero; two for "real_h0" (relative degree 1, so h(0+) = gain is not zero and the
    figures are normalised by it)."""
    return [ZERO, ZERO2] if kind == "real_h0" else [ZERO]


def scenario_text(kind, sep, form):
    poles = pair_poles(kind, sep)
    zeros = zeros_of(kind)
    head = 'title = "near pair %s %s sep %g"\n\n[network]\n' % (kind, form, sep)
    if form == "poly":
        num = [GAIN * c for c in poly_coeffs([complex(z) for z in zeros])]
        den = poly_coeffs(poles)
        net = "numerator = [%s]\ndenominator = [%s]\n" % (
            ", ".join(exact_decimal(x) for x in num), ", ".join(exact_decimal(x) for x in den))
    else:
        def cs(p):
            if p.imag == 0:
                return '"%r"' % p.real
            return '"%r%s%rj"' % (p.real, "-" if p.imag < 0 else "+", abs(p.imag))
        net = "poles = [%s]\nzeros = [%s]\ngain = %r\n" % (
            ", ".join(cs(p) for p in poles), ", ".join(cs(complex(z)) for z in zeros), GAIN)
    # h(0+) = 0 for relative degree >= 2: the t0 metric is refused there, the window used
    metric = "t0" if kind == "real_h0" else "window"
    tail = ('\n[drive]\nkind = "voltage"\narea = 1.0\n\n[plan]\ntarget_error = "1 %%"\n'
            'metric = "%s"\nsettle_multiple = 5\n' % metric)
    return head + net + tail


# --------------------------------------------------------- reference ---

class ExactWindow:
    """e(s) = y(end+s)/area - h(end+s-c), s >= 0, per mode e^{ps}*sum_j coef_j s^j with the
    coefficients and every evaluation at mp precision (refmath.WindowError's construction,
    kept at 40+ digits: the pair's terms cancel by 1/separation, beyond a float64 sum)."""

    def __init__(self, net, pulse):
        self.terms = R.window_terms(net, pulse)

    def __call__(self, s):
        s = mp.mpf(s)
        acc = mp.mpc(0)
        for p, coefs in self.terms:
            poly = mp.mpc(0)
            for cj in reversed(coefs):
                poly = poly * s + cj
            acc += mp.exp(p * s) * poly
        return mp.re(acc)

    def max_abs(self, span, points=1500):
        """max |e| on [0, span]: a mixed log/linear grid, then golden-section refinement of
        the best three cells (mpmath, 40 digits)."""
        lo = span * 1e-6
        grid = sorted(set([mp.mpf(0)] + [lo * (span / lo) ** (i / (points - 1)) for i in range(points)]
                          + [span * i / (points - 1) for i in range(points)]))
        vals = [abs(self(t)) for t in grid]
        best = max(vals)
        order = sorted(range(len(grid)), key=lambda i: vals[i])[-3:]
        for i in order:
            a, b = grid[max(i - 1, 0)], grid[min(i + 1, len(grid) - 1)]
            g = (mp.sqrt(5) - 1) / 2
            x1, x2 = b - g * (b - a), a + g * (b - a)
            f1, f2 = abs(self(x1)), abs(self(x2))
            for _ in range(80):
                if f1 > f2:
                    b, x2, f2 = x2, x1, f1
                    x1 = b - g * (b - a)
                    f1 = abs(self(x1))
                else:
                    a, x1, f1 = x1, x2, f2
                    x2 = a + g * (b - a)
                    f2 = abs(self(x2))
            best = max(best, f1, f2)
        return best

    def rms(self, span):
        """RMS over [0, span] in closed form (refmath.rms_closed_form, mp coefficients)."""
        S = mp.mpf(span)
        tot = mp.mpc(0)
        with mp.workdps(60):
            for p1, c1 in self.terms:
                for p2, c2 in self.terms:
                    q = p1 + mp.conj(p2)
                    eqS = mp.exp(q * S)
                    I = []
                    for n in range(len(c1) + len(c2) - 1):
                        I.append(mp.expm1(q * S) / q if n == 0 else (S ** n * eqS - n * I[n - 1]) / q)
                    for j1, a in enumerate(c1):
                        for j2, b in enumerate(c2):
                            tot += a * mp.conj(b) * I[j1 + j2]
        return mp.sqrt(mp.re(tot) / S)


def exact_moments(net, centre, m, members):
    """Laurent coefficients at `centre` of the exact modes `members` merged into one pole of
    multiplicity m: 1/(s-p) = sum_k (p-c)^(k-1)/(s-c)^k, so the coefficient of 1/(s-c)^k is
    sum_i r_i (p_i - c)^(k-1) (simple exact poles)."""
    return [sum((md.residues[0] * (md.pole - centre) ** (k - 1) for md in members), mp.mpc(0))
            for k in range(1, m + 1)]


# ----------------------------------------------------------- checks ---

def warning_bounds(js):
    for w in js.get("warnings", []):
        if w.get("code") == "network-ill-conditioned" and "bound" in w:
            return float(w["bound"]), float(w["residue_bound"])
    return None


def judge(C, tag, err, bound, rel_bound_name):
    """Pass when err <= LIMIT, or when warned and err <= the warned bound."""
    if err <= LIMIT:
        return C.check(tag, True, "error %.2e" % err)
    if bound is None:
        return C.check(tag, False, "error %.2e above %.0e and no warning" % (err, LIMIT))
    return C.check(tag, err <= bound, "error %.2e, warned %s %.2e" % (err, rel_bound_name, bound))


def check_one(C, binary, path, table):
    name = path.stem
    rc, out, err = run_tool(binary, "plan", path, "--json")
    if not C.check("%s: plan exit code 0/1" % name, rc in (0, 1), "rc=%d %s" % (rc, err.strip()[:300])):
        return
    js = json.loads(out)
    import tomllib
    doc = tomllib.loads(path.read_text())
    # reference: mpmath partial fractions of the exact rational function in the file (80-digit
    # roots + Newton polish, Laurent series at each pole), refmath.network_from_table
    net = R.network_from_table(doc["network"])
    jn, jp, je = js["network"], js["pulse"], js["error"]
    wb = warning_bounds(js)
    fig_bound, res_bound = wb if wb else (None, None)
    h0 = net.h0_ivt
    norm = float(je["normaliser"])
    worst = {"residue": 0.0, "h0": 0.0, "figures": 0.0, "h(t)": 0.0}

    # ---- residues (mpmath 40-digit partial fractions; merged modes against the exact moments) ----
    for tm in jn["modes"]:
        c = cplx(tm["pole"])
        m = int(tm["multiplicity"])
        members = sorted(net.modes, key=lambda md: abs(complex(md.pole) - c))[:m]
        ref = exact_moments(net, mp.mpc(c), m, members) if m > 1 or members[0].m == 1 else members[0].residues
        for k, (got, want) in enumerate(zip(tm["residues"], ref), start=1):
            e = abs(cplx(got) - complex(want)) / abs(complex(want))
            worst["residue"] = max(worst["residue"], e)
            judge(C, "%s: residue k=%d at %s" % (name, k, tm["pole"]), e, res_bound, "residue bound")

    # ---- h(0+) (initial-value theorem, exact from the coefficients / poles) ----
    e = abs(float(jn["h0_plus"]) - float(h0)) / norm
    worst["h0"] = e
    judge(C, "%s: h0_plus" % name, e, fig_bound, "bound")

    # ---- error figures (exact convolution of each exact mode with the planned trapezoid,
    # 100 digits, refmath.y_exact; window by mp evaluation of e(s)) ----
    pulse = R.Pulse(jp["amplitude"], jp["rise"], jp["flat"], jp["fall"])
    y_end = R.y_exact(net, pulse, pulse.end) / pulse.area
    ideal_al = net.h_mp(pulse.end - pulse.centroid)
    for key, ideal in (("t0", h0), ("t0_aligned", ideal_al)):
        e = abs(float(je[key]["rel"]) - float((y_end - ideal) / norm))
        worst["figures"] = max(worst["figures"], e)
        judge(C, "%s: error.%s.rel" % (name, key), e, fig_bound, "bound")
    span = float(jp["run"]) - float(pulse.end)
    W = ExactWindow(net, pulse)
    mx = W.max_abs(span) / norm
    rm = W.rms(span) / norm
    e = max(0.0, abs(float(je["window"]["max_rel"]) - float(mx)) - REL_WINDOW * float(mx))
    worst["figures"] = max(worst["figures"], e)
    judge(C, "%s: error.window.max_rel" % name, e, fig_bound, "bound")
    e = abs(float(je["window"]["rms_rel"]) - float(rm))
    worst["figures"] = max(worst["figures"], e)
    judge(C, "%s: error.window.rms_rel" % name, e, fig_bound, "bound")

    # ---- h(t) on the CSV grid (mpmath sum of the exact modes) ----
    with tempfile.TemporaryDirectory() as td:
        out_csv = Path(td) / "r.csv"
        rc, _, se = run_tool(binary, "response", path, "--csv", out_csv)
        if C.check("%s: response CSV written" % name, rc in (0, 1) and out_csv.exists(), se.strip()[:200]):
            rows = [r for r in csv.reader(io.StringIO(out_csv.read_text()))][1:]
            pick = rows[:: max(1, len(rows) // 40)]
            e = max(abs(float(r[1]) - float(net.h_mp(float(r[0])))) / norm for r in pick if float(r[0]) > 0)
            worst["h(t)"] = e
            judge(C, "%s: CSV ideal h(t) (%d rows)" % (name, len(pick)), e, fig_bound, "bound")
    table.append((name, [tm["multiplicity"] for tm in jn["modes"]], worst, fig_bound, res_bound))


def main():
    ap = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    ap.add_argument("--only")
    ap.add_argument("-v", "--verbose", action="store_true")
    ap.add_argument("-q", "--quiet", action="store_true")
    ap.add_argument("--keep", help="write the scenarios into this folder and keep them")
    args = ap.parse_args()
    binary = Path(os.environ.get("PULSEPLAN_BIN") or (ROOT / "target" / "release" / "pulseplan"))
    if not binary.is_file():
        print("pulseplan binary not found at %s: run `cargo build --release`" % binary, file=sys.stderr)
        sys.exit(2)
    C = Checker(args.verbose, args.quiet)
    table = []
    with tempfile.TemporaryDirectory() as td:
        folder = Path(args.keep or td)
        folder.mkdir(parents=True, exist_ok=True)
        for kind in ("real", "complex", "real_h0"):
            for form in ("poly", "zpk"):
                for sep in SEPARATIONS:
                    name = "near_%s_%s_%.0e" % (kind, form, sep)
                    if args.only and args.only not in name:
                        continue
                    path = folder / (name + ".toml")
                    path.write_text(scenario_text(kind, sep, form))
                    try:
                        check_one(C, binary, path, table)
                    except Exception as e:  # one scenario's crash must not hide the others
                        C.check("%s: checks ran to completion" % name, False, "%s: %s" % (type(e).__name__, e))
    print("%-28s %-12s %9s %9s %9s %9s %9s %9s" % ("scenario", "mult", "residue", "h0", "figures",
                                                   "h(t)", "bound", "res.bound"))
    for name, mult, w, fb, rb in table:
        f = lambda x: "-" if x is None else "%.1e" % x
        print("%-28s %-12s %9.1e %9.1e %9.1e %9.1e %9s %9s" % (name, ",".join(map(str, mult)), w["residue"],
                                                              w["h0"], w["figures"], w["h(t)"], f(fb), f(rb)))
    print("%d passed, %d failed" % (C.passed, C.failed))
    sys.exit(1 if C.failed else 0)


if __name__ == "__main__":
    main()
