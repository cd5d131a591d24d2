#!/usr/bin/env python3
"""Reference checks of pulseplan's JSON and CSV output against mpmath and scipy.

Usage:  python3 tests/reference/check_core.py [--only SUBSTRING] [-v]

The binary is $PULSEPLAN_BIN, or target/release/pulseplan under the repo root.
Prints one line per check and ends with 'N passed, N failed'; exits 1 when any
check failed, 2 when the binary is missing.
"""

import argparse
import csv
import io
import json
import math
import os
import re
import subprocess
import sys
import tempfile
from pathlib import Path

HERE = Path(__file__).resolve().parent
ROOT = HERE.parents[1]
sys.path.insert(0, str(HERE))

import mpmath as mp  # noqa: E402
import numpy as np  # noqa: E402
from scipy import signal  # noqa: E402

import refmath as R  # noqa: E402

mp.mp.dps = 40

# Tolerances (see the comment at each use)
REL_CORE = 1e-7        # poles, residues, D, h(0+), t0 readings/ideals (brief: 1e-7)
REL_PULSE = 1e-9       # plain arithmetic on the pulse parameters
FLOOR_MODAL = 1e-12    # abs floor, as a fraction of the modal magnitude M (double-precision cancellation floor)
REL_WINDOW = 1e-4      # window max/rms: the tool may sample e(t) on a grid; reference is refined to ~1e-10
REL_RESPONSE = 1e-9    # h(t), y(t)/area on the CSV grid: the exact-response target (~1e-9 relative)
REL_SCIPY = 1e-9       # scipy.signal.residue in float64 (observed <= 1e-14 on these scenarios)


class Checker:
    def __init__(self, verbose=False, quiet=False):
        self.quiet = quiet
        self.passed = 0
        self.failed = 0
        self.verbose = verbose
        self.failures = []

    def check(self, name, ok, detail=""):
        if ok:
            self.passed += 1
        else:
            self.failed += 1
            self.failures.append("%s: %s" % (name, detail))
        if not (ok and self.quiet):
            print("%s %s%s" % ("PASS" if ok else "FAIL", name, (" -- " + detail) if detail else ""), flush=True)
        return ok

    def close(self, name, got, ref, rtol, atol=0.0):
        """|got - ref| <= rtol*|ref| + atol (complex allowed)."""
        try:
            g = complex(got)
        except (TypeError, ValueError):
            return self.check(name, False, "tool value %r is not a number (ref %s)" % (got, _fmt(ref)))
        r = complex(ref)
        err = abs(g - r)
        tol = rtol * abs(r) + atol
        ok = math.isfinite(err) and err <= tol
        rel = err / abs(r) if r != 0 else float("inf") if err else 0.0
        return self.check(name, ok, "tool %s ref %s |diff| %.3g (rel %.3g, tol %.3g)"
                          % (_fmt(got), _fmt(ref), err, rel, tol))


def _fmt(v):
    if isinstance(v, (list, tuple)):
        return "[" + ", ".join(_fmt(x) for x in v) + "]"
    if isinstance(v, (mp.mpc, complex)):
        v = complex(v)
        return "(%.15g%+.15gj)" % (v.real, v.imag)
    try:
        return "%.15g" % float(v)
    except (TypeError, ValueError):
        return repr(v)


def run_tool(binary, *args, timeout=300):
    p = subprocess.run([str(binary), *map(str, args)], capture_output=True, text=True, timeout=timeout)
    return p.returncode, p.stdout, p.stderr


def cplx(v):
    """JSON [re, im] -> complex; a bare number is accepted as real."""
    if isinstance(v, (list, tuple)) and len(v) == 2:
        return complex(float(v[0]), float(v[1]))
    return complex(float(v))


def modal_magnitude(net):
    """M = sum over modes and k of max_t |r_k t^(k-1)/(k-1)! e^(Re p t)|: the size of the
    largest terms a double-precision modal sum adds up.  Results that are much
    smaller than M (h(0+) = 0 networks, readings of high relative degree) can only
    be reproduced to ~eps*M by any float64 modal sum, so absolute floors scale with M."""
    M = 0.0
    for md in net.modes:
        a = abs(float(mp.re(md.pole)))
        for k, r in enumerate(md.residues, start=1):
            M += abs(complex(r)) * _wk(k, a)
    return M


def _wk(k, a):
    """max_t t^(k-1)/(k-1)! e^(-a t)."""
    if k == 1:
        return 1.0
    tp = (k - 1) / a
    return tp ** (k - 1) / math.factorial(k - 1) * math.exp(-a * tp)


# ------------------------------------------------------------ scenarios ---

def check_scenario(C, binary, path):
    name = path.stem
    doc, net, pulse = R.load_scenario(path)
    M = modal_magnitude(net)
    h0 = net.h0_ivt
    # reference: sum of simple-pole residues must equal the initial-value theorem (internal consistency)
    assert abs(net.h0_from_residues() - h0) <= mp.mpf(10) ** -25 * M, "reference h0 inconsistent"
    if h0 == 0:
        norm, norm_kind = R.peak_abs_h(net), "peak"
    else:
        norm, norm_kind = abs(float(h0)), "h0_plus"

    rc, out, err = run_tool(binary, "assess", path, "--json")
    if not C.check("%s: assess exit code 0/1" % name, rc in (0, 1), "rc=%d stderr=%s" % (rc, err.strip()[:300])):
        return
    try:
        js = json.loads(out)
    except ValueError as e:
        C.check("%s: assess JSON parses" % name, False, str(e))
        return
    C.check("%s: assess JSON parses" % name, True)

    jn, jp, je = js.get("network", {}), js.get("pulse", {}), js.get("error", {})

    # ---- network: poles, multiplicities, residues (mpmath Laurent coefficients) ----
    tmodes = jn.get("modes", [])
    C.check("%s: network.modes count" % name, len(tmodes) == len(net.modes),
            "tool %d distinct poles, ref %d" % (len(tmodes), len(net.modes)))
    for md in net.modes:
        p = complex(md.pole)
        if not tmodes:
            break
        tm = min(tmodes, key=lambda t: abs(cplx(t["pole"]) - p))
        tag = "%s: mode p=%s" % (name, _fmt(p))
        # reference: mpmath 80-digit polyroots + Newton polish (form 2) / given poles (form 3)
        C.close(tag + " pole", cplx(tm["pole"]), p, REL_CORE)
        C.check(tag + " multiplicity", int(tm.get("multiplicity", -1)) == md.m,
                "tool %s ref %d" % (tm.get("multiplicity"), md.m))
        tres = tm.get("residues", [])
        C.check(tag + " residues length", len(tres) == md.m, "tool %d ref %d" % (len(tres), md.m))
        a = abs(p.real)
        for k, r in enumerate(md.residues, start=1):
            if k > len(tres):
                break
            # reference: mpmath 80-digit Laurent coefficients (series of N/prod(s-q)^m at p)
            # abs floor: 1e-10 * M / max_t|t^(k-1)/(k-1)! e^(-at)| (residue that contributes ~0)
            C.close(tag + " residue k=%d" % k, cplx(tres[k - 1]), complex(r), REL_CORE, 1e-10 * M / _wk(k, a))
        # reference: definitions on the mpmath pole
        C.close(tag + " time_constant", tm.get("time_constant"), 1 / a, REL_CORE)
        C.close(tag + " natural_frequency", tm.get("natural_frequency"), abs(p), REL_CORE)
        C.close(tag + " damping", tm.get("damping"), -p.real / abs(p), REL_CORE)

    # reference: leading-coefficient ratio (mpmath), H(inf)
    C.close("%s: network.direct" % name, jn.get("direct"), net.direct, REL_CORE,
            FLOOR_MODAL * M * float(net.tau_fast))
    # reference: initial-value theorem lim s->inf s(H(s)-D), exact from the coefficients
    C.close("%s: network.h0_plus" % name, jn.get("h0_plus"), h0, REL_CORE, FLOOR_MODAL * M)
    if "peak" in jn:
        # reference: peak |h(t)|, t > 0: grid + mpmath.findroot on h'(t) = 0 (40 digits)
        C.close("%s: network.peak" % name, jn.get("peak"), R.peak_abs_h(net), REL_CORE, FLOOR_MODAL * M)
    C.close("%s: network.tau_fast" % name, jn.get("tau_fast"), net.tau_fast, REL_CORE)
    C.close("%s: network.tau_slow" % name, jn.get("tau_slow"), net.tau_slow, REL_CORE)
    C.check("%s: network.stable" % name, jn.get("stable") is True, "tool %r" % jn.get("stable"))

    # ---- scipy.signal.residue for simple-pole networks ----
    # scipy.signal.residue works on expanded polynomials, whose coefficients lose the poles of a
    # high-order network (the reason pulseplan never expands them); the mpmath checks above
    # cover every order, so scipy is consulted only up to order 12.
    if all(md.m == 1 for md in net.modes) and tmodes and len(net.modes) <= 12:
        # reference: scipy.signal.residue on the frequency-scaled polynomials (s = w0*sigma)
        mags = [abs(complex(md.pole)) for md in net.modes]
        w0 = float(np.exp(np.mean(np.log(mags))))
        if net.tf is not None:
            num, den = net.tf
            n, nn = len(den) - 1, len(num) - 1
            b = [c * w0 ** (nn - i) for i, c in enumerate(num)]
            a_ = [c * w0 ** (n - i) for i, c in enumerate(den)]
        else:
            z, pz, kz = net.zpk
            b, a_ = signal.zpk2tf(z / w0, pz / w0, kz * w0 ** (len(z) - len(pz)))
        rs, ps, ks = signal.residue(b, a_)
        rs, ps = rs * w0, ps * w0
        worst, detail = 0.0, ""
        ok = True
        for tm in tmodes:
            tp = cplx(tm["pole"])
            i = int(np.argmin(abs(ps - tp)))
            tr = cplx(tm["residues"][0]) if tm.get("residues") else float("nan")
            e = abs(tr - rs[i])
            tol = REL_SCIPY * abs(rs[i]) + 1e-10 * M
            rel = e / abs(rs[i]) if rs[i] != 0 else e
            if not (e <= tol):
                ok = False
                detail += " p=%s tool %s scipy %s;" % (_fmt(tp), _fmt(tr), _fmt(rs[i]))
            worst = max(worst, rel)
        C.check("%s: residues vs scipy.signal.residue" % name, ok,
                ("worst rel %.3g (tol %.0e)" % (worst, REL_SCIPY)) + detail)

    # ---- pulse (IEEE Std 181 style trapezoid relations) ----
    # reference: area = A(flat + (tr+tf)/2), centroid = first moment / area, end = tr + flat + tf
    ref_pulse = {
        "amplitude": pulse.A, "area": pulse.area, "width": pulse.width50, "flat": pulse.flat,
        "rise": pulse.tr, "fall": pulse.tf, "rise_10_90": pulse.tr * mp.mpf("0.8"),
        "fall_10_90": pulse.tf * mp.mpf("0.8"), "centroid": pulse.centroid, "end": pulse.end,
    }
    for key, ref in ref_pulse.items():
        atol = 1e-12 * float(pulse.end) if key not in ("amplitude", "area") else 0.0
        C.close("%s: pulse.%s" % (name, key), jp.get(key), ref, REL_PULSE, atol)
    run = jp.get("run")
    try:
        run = float(run)
        run_ok = math.isfinite(run) and run > float(pulse.end)
    except (TypeError, ValueError):
        run_ok = False
    C.check("%s: pulse.run finite and > end" % name, run_ok, "run %r end %s" % (jp.get("run"), _fmt(pulse.end)))

    # ---- error metrics ----
    C.check("%s: error.normalised_by" % name, je.get("normalised_by") == norm_kind,
            "tool %r ref %r (h0_plus ref %s)" % (je.get("normalised_by"), norm_kind, _fmt(h0)))
    if "normaliser" in je:
        # reference: |h(0+)| (initial-value theorem) or peak |h| by dense grid + bounded refinement
        C.close("%s: error.normaliser" % name, je.get("normaliser"), norm, REL_CORE, FLOOR_MODAL * M)
    warns = js.get("warnings")
    C.check("%s: warnings is a list of {code, message}" % name,
            isinstance(warns, list) and all(isinstance(w, dict) and isinstance(w.get("code"), str)
                                            and isinstance(w.get("message"), str) for w in warns),
            "got %r" % (warns,) if not isinstance(warns, list) else
            "codes %s" % [w.get("code") for w in warns if isinstance(w, dict)])
    # reference: closed-form convolution of each mode with the ramp decomposition of the
    # trapezoid, 100 digits (cross-checked against mpmath.quad moments at 60 digits)
    y_end = R.y_exact(net, pulse, pulse.end) / pulse.area
    W = R.WindowError(net, pulse)
    assert abs(W.y_end_over_area - y_end) <= mp.mpf(10) ** -25 * M, "reference y(end) inconsistent"
    ideal_al = net.h_mp(pulse.end - pulse.centroid)
    for key, ideal in (("t0", h0), ("t0_aligned", ideal_al)):
        blk = je.get(key, {})
        ab = y_end - ideal
        C.close("%s: error.%s.reading" % (name, key), blk.get("reading"), y_end, REL_CORE, FLOOR_MODAL * M)
        C.close("%s: error.%s.ideal" % (name, key), blk.get("ideal"), ideal, REL_CORE, FLOOR_MODAL * M)
        C.close("%s: error.%s.abs" % (name, key), blk.get("abs"), ab, REL_CORE, FLOOR_MODAL * M)
        C.close("%s: error.%s.rel" % (name, key), blk.get("rel"), ab / norm, REL_CORE, FLOOR_MODAL * M / norm)
    if run_ok:
        span = run - float(pulse.end)
        # reference: e(t) per mode as e^{ps} * poly(s), coefficients at 60 digits; max by dense
        # grid + bounded refinement; RMS in closed form (sum of s^n e^{qs} integrals, mpmath),
        # cross-checked against adaptive quadrature (scipy.integrate.quad)
        mx = R.max_abs(W, span, float(net.tau_fast)) / norm
        rm = R.rms_closed_form(W, span) / norm
        rq = R.rms(W, span, float(net.tau_fast)) / norm
        assert abs(rm - rq) <= 1e-9 * rm + 1e-15, "reference RMS inconsistent: %r vs %r" % (rm, rq)
        wj = je.get("window", {})
        C.close("%s: error.window.max_rel" % name, wj.get("max_rel"), mx, REL_WINDOW, FLOOR_MODAL * M / norm)
        C.close("%s: error.window.rms_rel" % name, wj.get("rms_rel"), rm, REL_WINDOW, FLOOR_MODAL * M / norm)

    check_csv(C, binary, path, name, net, pulse, M, norm)


# ------------------------------------------------------------------ CSV ---

def check_csv(C, binary, path, name, net, pulse, M, norm):
    with tempfile.TemporaryDirectory() as td:
        out = Path(td) / (name + ".csv")
        # the response to the scenario's own [pulse] (the planned pulse is the default)
        given = ["--given"] if "[pulse]" in Path(path).read_text() else []
        rc, so, se = run_tool(binary, "response", path, "--csv", out, *given)
        if not C.check("%s: response exit code 0/1 and CSV written" % name, rc in (0, 1) and out.exists(),
                       "rc=%d stderr=%s" % (rc, se.strip()[:300])):
            return
        text = out.read_text()
    rd = csv.reader(io.StringIO(text))
    header = next(rd, [])
    header = [h.strip() for h in header]
    # the documented columns come first; extra columns are allowed and named in the detail
    C.check("%s: CSV header starts t,ideal,predicted,error" % name, header[:4] == ["t", "ideal", "predicted", "error"],
            "got %r" % header if header[:4] != ["t", "ideal", "predicted", "error"]
            else ("extra columns %r" % header[4:] if header[4:] else ""))
    try:
        rows = np.array([[float(x) for x in r] for r in rd if r], dtype=float)
    except ValueError as e:
        C.check("%s: CSV numeric" % name, False, str(e))
        return
    if not C.check("%s: CSV has rows" % name, rows.ndim == 2 and rows.shape[0] >= 10 and rows.shape[1] == len(header),
                   "shape %s" % (rows.shape,)):
        return
    col = {h: i for i, h in enumerate(header)}
    t = rows[:, 0]
    C.check("%s: CSV t increasing" % name, bool(np.all(np.diff(t) > 0)), "")
    area = float(pulse.area)
    end = float(pulse.end)
    # pick <= 120 rows: evenly by index, plus every row inside the pulse (up to 40 of them)
    idx = set(np.linspace(0, len(t) - 1, 80).astype(int).tolist())
    inside = np.nonzero((t > 0) & (t <= end))[0]
    idx |= set(inside[np.linspace(0, len(inside) - 1, min(40, len(inside))).astype(int)].tolist()) if len(inside) else set()
    idx = sorted(i for i in idx if t[i] > 0)

    # reference: mpmath h(t) (sum of r_k t^(k-1)/(k-1)! e^{pt}) and 100-digit closed-form y(t)
    worst = {"ideal": (0.0, ""), "predicted": (0.0, ""), "error": (0.0, ""), "consistency": (0.0, "")}
    for i in idx:
        ti, hi, pi, ei = rows[i, :4]
        h_ref = net.h_mp(ti)
        y_ref = R.y_exact(net, pulse, ti) / pulse.area
        for key, got, ref in (("ideal", hi, h_ref), ("predicted", pi, y_ref), ("error", ei, y_ref - h_ref)):
            e = abs(got - float(ref))
            q = e / (REL_RESPONSE * abs(float(ref)) + FLOOR_MODAL * M)   # <= 1 passes
            if q > worst[key][0]:
                worst[key] = (q, "t=%.6g tool %.15g ref %.15g" % (ti, got, float(ref)))
        q = abs(ei - (pi - hi)) / (1e-12 * (abs(pi) + abs(hi)) + FLOOR_MODAL * M)
        if q > worst["consistency"][0]:
            worst["consistency"] = (q, "t=%.6g error %.15g predicted-ideal %.15g" % (ti, ei, pi - hi))
        # optional extra columns: ideal_aligned = h(t - c), error_aligned = predicted - h(t - c)
        if "ideal_aligned" in col and ti > float(pulse.centroid):
            ha = net.h_mp(ti - pulse.centroid)
            for key, ref in (("ideal_aligned", ha), ("error_aligned", y_ref - ha)):
                if key not in col:
                    continue
                got = rows[i, col[key]]
                q = abs(got - float(ref)) / (REL_CORE * abs(float(ref)) + FLOOR_MODAL * M)
                if q > worst.setdefault(key, (0.0, ""))[0]:
                    worst[key] = (q, "t=%.6g tool %.15g ref %.15g" % (ti, got, float(ref)))
    for key, (q, d) in worst.items():
        C.check("%s: CSV %s vs mpmath (%d rows)" % (name, key, len(idx)), q <= 1.0,
                "worst |diff|/tol = %.3g %s" % (q, d))

    # ---- scipy.signal.impulse / lsim ----
    # Realisation: scipy.signal.tf2ss / zpk2ss of H(w0*sigma) (time scaled by w0) so the
    # companion matrix is well conditioned.  lsim's default first-order hold is exact for a
    # piecewise-linear input whose breakpoints lie on the grid, so the only error left is
    # float64 round-off in expm and the recursion: observed <= 1e-13 of M on these
    # scenarios; tolerance 1e-7*|value| + 1e-10*M.
    A, B, Cm, D, w0 = R.scaled_ss(net)
    sys_ = (A, B, Cm, D)
    tol = lambda ref: 1e-7 * abs(ref) + 1e-10 * M
    # reference: scipy.signal.impulse (per sample, two-point time grid [0, w0 t])
    q_imp, d_imp = 0.0, ""
    for i in idx:
        ti = rows[i, 0]
        _, hh = signal.impulse(sys_, T=[0.0, w0 * ti])
        href = w0 * hh[-1]
        q = abs(rows[i, 1] - href) / tol(href)
        if q > q_imp:
            q_imp, d_imp = q, "t=%.6g tool %.15g scipy %.15g" % (ti, rows[i, 1], href)
    C.check("%s: CSV ideal vs scipy.signal.impulse" % name, q_imp <= 1.0, "worst |diff|/tol = %.3g %s" % (q_imp, d_imp))

    # reference: scipy.signal.lsim of the trapezoid, one uniform 2000-step grid per linear piece
    seg_states = []
    x = np.zeros(A.shape[0])
    for (a, b, ua, ub) in pulse.segments():
        a, b, ua, ub = float(a), float(b), float(ua), float(ub)
        seg_states.append((a, b, ua, ub, x.copy()))
        if b > a:
            T = np.linspace(0.0, w0 * (b - a), 2001)
            U = np.linspace(ua, ub, 2001)
            _, _, xs = signal.lsim(sys_, U, T, X0=x)
            x = np.asarray(xs).reshape(len(T), -1)[-1]
    x_end = x
    q_ls, d_ls = 0.0, ""
    for i in idx:
        ti = rows[i, 0]
        if ti < end:
            for (a, b, ua, ub, x0) in seg_states:
                if a <= ti < b or (ti == b):
                    break
            n = 401
            T = np.linspace(0.0, w0 * (ti - a), n)
            U = ua + (ub - ua) * np.linspace(0.0, ti - a, n) / (b - a)
            if ti > a:
                _, yy, _ = signal.lsim(sys_, U, T, X0=x0)
                yref = float(np.atleast_1d(yy)[-1])
            else:
                yref = float((Cm @ x0)[0] + D[0, 0] * ua)
        else:
            _, yy, _ = signal.lsim(sys_, [0.0, 0.0], [0.0, w0 * (ti - end)], X0=x_end)
            yref = float(np.atleast_1d(yy)[-1])
        got = rows[i, 2] * area
        q = abs(got - yref) / (1e-7 * abs(yref) + 1e-10 * M * area)
        if q > q_ls:
            q_ls, d_ls = q, "t=%.6g tool predicted*area %.15g lsim %.15g" % (ti, got, yref)
    C.check("%s: CSV predicted*area vs scipy.signal.lsim" % name, q_ls <= 1.0,
            "worst |diff|/tol = %.3g %s" % (q_ls, d_ls))


# ------------------------------------------------------------- handbook ---

def check_handbook(C, binary):
    """Rectangular-ish unit-area pulse into a/(s+a): reading/ideal = (1 - e^-x)/x, x = width*a."""
    a = 5.0e4
    with tempfile.TemporaryDirectory() as td:
        for x in (0.02, 0.3, 1.0):
            w = x / a
            rise = w * 1e-4
            f = Path(td) / ("onepole_x%g.toml" % x)
            f.write_text(
                'title = "one pole, unit-area pulse, x = %r"\n\n[network]\nnumerator = [%r]\ndenominator = [1.0, %r]\n\n'
                '[drive]\nkind = "voltage"\narea = 1.0\n\n[plan]\ntarget_error = "1 %%"\nmetric = "t0"\n'
                'width_ratio = 100\nedge_ratio = 100\nsettle_multiple = 5\n\n'
                '[pulse]\namplitude = %r\nwidth = %r\nrise = %r\nfall = %r\nconvention = "generator"\n'
                % (x, a, a, 1.0 / w, w, rise, rise))
            rc, out, err = run_tool(binary, "assess", f, "--json")
            tag = "handbook one-pole x=%g" % x
            if not C.check(tag + ": assess exit code 0/1", rc in (0, 1), "rc=%d %s" % (rc, err.strip()[:200])):
                continue
            js = json.loads(out)
            t0 = js["error"]["t0"]
            ratio = float(t0["reading"]) / float(t0["ideal"])
            hb = -math.expm1(-x) / x
            # handbook closed form: rectangular pulse into one pole reads (1-e^-x)/x;
            # the generator edges (full ramp tr = rise/0.8) shift the reading by ~a*tr/2
            # relative, so the tolerance is a*tr relative.
            tr = rise / 0.8
            C.close(tag + ": t0 reading/ideal = (1-e^-x)/x", ratio, hb, a * tr)
            C.close(tag + ": pulse.area = 1", js["pulse"].get("area"), 1.0, REL_PULSE)


# ------------------------------------------------------------ malformed ---

BAD = [
    # file, keys any of which must be named, lines any of which must be cited (None: no line exists)
    ("unknown_unit.toml", ["width"], ["width"]),
    ("missing_network.toml", ["network"], None),
    ("two_forms.toml", ["numerator", "denominator", "poles", "gain", "network"],
     ["numerator", "denominator", "poles", "gain", "[network]"]),
    ("nonconjugate.toml", ["poles"], ["poles"]),
    ("zero_denominator.toml", ["denominator"], ["denominator"]),
    ("nan_gain.toml", ["gain"], ["gain"]),
]


def _lines_of(path, keys):
    out = set()
    for i, line in enumerate(path.read_text().splitlines(), start=1):
        s = line.strip()
        for k in keys:
            if s == k or re.match(r"%s\s*=" % re.escape(k), s):
                out.add(i)
    return out


def check_malformed(C, binary):
    for fname, keys, line_keys in BAD:
        path = HERE / "bad" / fname
        rc, out, err = run_tool(binary, "assess", path, "--json")
        tag = "malformed %s" % fname
        C.check(tag + ": exit code 2", rc == 2, "rc=%d" % rc)
        low = err.lower()
        named = [k for k in keys if re.search(r"(?<![a-z_])%s(?![a-z_])" % re.escape(k), low)]
        C.check(tag + ": stderr names the key", bool(named),
                "wanted one of %s; stderr: %s" % (keys, err.strip()[:300]))
        if line_keys is not None:
            want = _lines_of(path, line_keys)
            cited = {int(n) for n in re.findall(r"line\s+(\d+)", err, flags=re.I)}
            cited |= {int(n) for n in re.findall(r"\.toml:(\d+)", err)}
            C.check(tag + ": stderr cites the line", bool(cited & want),
                    "wanted line %s, cited %s; stderr: %s" % (sorted(want), sorted(cited), err.strip()[:300]))


# ----------------------------------------------------------------- main ---

def main():
    ap = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    ap.add_argument("--only", help="run only scenarios whose name contains this (skips handbook/malformed unless it matches them)")
    ap.add_argument("-v", "--verbose", action="store_true")
    ap.add_argument("-q", "--quiet", action="store_true", help="print failures and the summary only")
    args = ap.parse_args()

    binary = Path(os.environ.get("PULSEPLAN_BIN") or (ROOT / "target" / "release" / "pulseplan"))
    if not binary.is_file() or not os.access(binary, os.X_OK):
        print("pulseplan binary not found at %s: build it with `cargo build --release` in %s "
              "or set PULSEPLAN_BIN" % (binary, ROOT), file=sys.stderr)
        sys.exit(2)

    C = Checker(args.verbose, args.quiet)
    for path in sorted((HERE / "scenarios").glob("*.toml")):
        if args.only and args.only not in path.stem:
            continue
        try:
            check_scenario(C, binary, path)
        except Exception as e:  # a crash in one scenario must not hide the others
            C.check("%s: checks ran to completion" % path.stem, False, "%s: %s" % (type(e).__name__, e))
    if not args.only or args.only in "handbook":
        try:
            check_handbook(C, binary)
        except Exception as e:
            C.check("handbook: checks ran to completion", False, "%s: %s" % (type(e).__name__, e))
    if not args.only or args.only in "malformed":
        check_malformed(C, binary)

    print("%d passed, %d failed" % (C.passed, C.failed))
    sys.exit(1 if C.failed else 0)


if __name__ == "__main__":
    main()
