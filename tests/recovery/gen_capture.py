#!/usr/bin/env python3
"""Independent generator of synthetic captures for `pulseplan recover` (numpy/scipy only).

Nothing here calls or reuses the Rust code. The response of a modal model
h(t) = D·δ(t) + Σ rₖ e^(pₖt) to a trapezoid is computed analytically by superposing ramps:
the trapezoid is Σⱼ sⱼ·(t − tⱼ)₊ (slope changes sⱼ at its corners), and one mode driven by
the ramp (t − tⱼ)₊ answers u²·φ₂(p·u), u = t − tⱼ, φ₂(z) = (e^z − 1 − z)/z². After the
pulse each mode is its state at the end, decaying as e^(p(t − T)). `self_check()` compares
this with scipy.signal.lsim (first-order hold, breakpoints on the grid).

Small circuits are stamped in numpy (modified nodal analysis of R, C and one voltage
source) and reduced to modes by the generalized eigenproblem of (A, E) with left and right
eigenvectors (residue rₖ = (c·vₖ)(wₖᴴ·b)/(wₖᴴ·E·vₖ)); D = H(s₀) − Σ rₖ/(s₀ − pₖ).

Captures get white Gaussian noise at a chosen SNR (peak signal over noise RMS), an offset
and a linear drift, an unknown trigger offset, quantisation to b bits with clipping at the
converter's range, optional simulator-like non-uniform time steps, an optional stimulus
channel, and one of several file layouts.
"""

import json
import math
from pathlib import Path

import numpy as np
import scipy.linalg
from scipy import signal


# ---------------------------------------------------------------- pulse and exact response

def trapezoid(amplitude, rise, flat, fall):
    """Breakpoints (t, x) of a trapezoid starting at t = 0 (full 0–100 % ramps)."""
    return [(0.0, 0.0), (rise, amplitude), (rise + flat, amplitude), (rise + flat + fall, 0.0)]


def slope_changes(bp):
    """(tⱼ, sⱼ): the piecewise-linear waveform as Σ sⱼ (t − tⱼ)₊ (zero-length pieces are
    jumps and are not allowed here)."""
    out = []
    prev = 0.0
    for (ta, ua), (tb, ub) in zip(bp[:-1], bp[1:]):
        if tb <= ta:
            raise ValueError("jumps are not ramps")
        s = (ub - ua) / (tb - ta)
        out.append((ta, s - prev))
        prev = s
    out.append((bp[-1][0], -prev))
    return out


def phi2(z):
    """(e^z − 1 − z)/z², elementwise, by its Taylor series near 0."""
    z = np.asarray(z, dtype=complex)
    out = np.empty_like(z)
    small = np.abs(z) < 0.5
    zs = z[small]
    acc = np.zeros_like(zs)
    term = np.full_like(zs, 0.5)
    for n in range(25):
        acc += term
        term = term * zs / (n + 3)
    out[small] = acc
    zb = z[~small]
    out[~small] = (np.expm1(zb) - zb) / zb**2
    return out


def modal_response(modes, direct, bp, t):
    """Exact y(t) of h = D·δ + Σ Re/2Re(r e^(pt)) to the piecewise-linear input bp.

    modes: list of (p, r) with conjugate pairs given once (upper member, counted twice)."""
    t = np.asarray(t, dtype=float)
    corners = slope_changes(bp)
    end = bp[-1][0]
    y = np.zeros_like(t)
    during = t < end
    for p, r in modes:
        w = 2.0 if p.imag != 0 else 1.0
        x = np.zeros(t.shape, dtype=complex)
        for tj, sj in corners:
            u = t[during] - tj
            ok = u > 0
            xx = np.zeros(u.shape, dtype=complex)
            xx[ok] = sj * u[ok] ** 2 * phi2(p * u[ok])
            x[during] += xx
        x_end = sum(sj * (end - tj) ** 2 * phi2(np.array([p * (end - tj)]))[0]
                    for tj, sj in corners if end > tj)
        x[~during] = x_end * np.exp(p * (t[~during] - end))
        y += w * (r * x).real
    y += direct * np.interp(t, [b[0] for b in bp], [b[1] for b in bp], left=0.0, right=0.0)
    return y


def impulse_response(modes, t):
    t = np.asarray(t, dtype=float)
    return sum((2.0 if p.imag != 0 else 1.0) * (r * np.exp(p * t)).real for p, r in modes)


def self_check():
    """The ramp superposition against scipy.signal.lsim (first-order hold on a grid that
    holds every breakpoint): returns the largest relative difference."""
    modes = [(-1.0 + 0j, 2.0 + 0j), (-0.4 + 3j, 0.3 - 0.5j)]
    direct = 0.2
    bp = trapezoid(1.5, 0.05, 0.2, 0.1)
    dt = 1e-4
    t = np.arange(0, 60001) * dt
    y = modal_response(modes, direct, bp, t)
    # State space of the same modes: real Jordan form of each pole.
    a, b, c = [], [], []
    for p, r in modes:
        if p.imag == 0:
            a.append([[p.real]]); b.append([1.0]); c.append([r.real])
        else:
            a.append([[p.real, p.imag], [-p.imag, p.real]])
            b.append([1.0, 0.0])
            c.append([2 * r.real, 2 * r.imag])
    A = scipy.linalg.block_diag(*a)
    B = np.concatenate(b)[:, None]
    C = np.concatenate(c)[None, :]
    u = np.interp(t, [q[0] for q in bp], [q[1] for q in bp], left=0.0, right=0.0)
    _, yl, _ = signal.lsim((A, B, C, np.array([[direct]])), u, t, interp=True)
    return float(np.max(np.abs(yl - y)) / np.max(np.abs(y)))


# ---------------------------------------------------------------- small circuits (MNA)

def circuit_modes(parts, n_in, n_out):
    """Modes and D of V(n_out)/V(n_in) for R/C parts [(kind, a, b, value)], a voltage
    source at n_in; node "gnd" is ground."""
    nodes = sorted({x for _, a, b, _ in parts for x in (a, b) if x != "gnd"})
    k = {n: i for i, n in enumerate(nodes)}
    n = len(nodes) + 1  # plus the source current
    E = np.zeros((n, n)); A = np.zeros((n, n)); B = np.zeros(n); Cv = np.zeros(n)
    for kind, a, b, v in parts:
        for (x, y, sgn) in ((a, a, 1), (b, b, 1), (a, b, -1), (b, a, -1)):
            if x == "gnd" or y == "gnd":
                continue
            if kind == "R":
                A[k[x], k[y]] -= sgn / v
            else:
                E[k[x], k[y]] += sgn * v
    src = n - 1
    A[k[n_in], src] += 1.0   # source current into the input node
    A[src, k[n_in]] += 1.0   # v_in = u
    B[src] = -1.0
    Cv[k[n_out]] = 1.0
    # E x' = A x + b u: the source row reads 0 = v_in − u.
    bvec = B
    w, vl, vr = scipy.linalg.eig(A, E, left=True, right=True)
    modes = []
    for i, p in enumerate(w):
        if not np.isfinite(p) or abs(p) > 1e15:
            continue
        vrk = vr[:, i]; vlk = vl[:, i]
        r = (Cv @ vrk) * (vlk.conj() @ bvec) / (vlk.conj() @ E @ vrk)
        if p.imag < 0:
            continue
        modes.append((complex(p), complex(r)))

    def H(s):
        return Cv @ np.linalg.solve(s * E - A, bvec)

    def modal_part(s):
        return sum(r / (s - p) + (np.conj(r) / (s - np.conj(p)) if p.imag else 0) for p, r in modes)

    s0 = 1e3 * max(abs(p) for p, _ in modes)
    direct = H(s0) - modal_part(s0)
    # A proper D is the same at any s: check at a second point.
    s1 = 7.3 * s0 * (1 + 1j)
    assert abs(H(s1) - modal_part(s1) - direct) <= 1e-9 * (1 + abs(direct))
    return modes, float(np.real(direct))


def lag_lead(r1=47e3, c1=22e-9, r2=10e3, rs=50.0):
    """The passive lag-lead of scenarios/passive-lag-lead.toml: R1 ∥ C1 from in to out,
    R2 from out to ground, driven by a source (the generator's open-circuit voltage) behind
    its output resistance rs."""
    parts = [("R", "src", "in", rs), ("R", "in", "out", r1), ("C", "in", "out", c1),
             ("R", "out", "gnd", r2)]
    return circuit_modes(parts, "src", "out")


# ---------------------------------------------------------------- capture making

def make_capture(modes, direct, pulse_bp, *, dt, pre, post, snr_db=None, offset=0.0,
                 drift=0.0, bits=None, adc_range=None, trigger_offset=0.0, stimulus=False,
                 stim_snr_db=60.0, nonuniform=False, seed=0, noise_sigma=None):
    """Sample the response on [−pre, post] (capture time; the pulse starts at
    trigger_offset). Returns dict with t, y, optional s, and the truth."""
    rng = np.random.default_rng(seed)
    if nonuniform:
        steps = dt * rng.uniform(0.3, 1.7, int((pre + post) / dt * 1.2) + 10)
        t = -pre + np.concatenate([[0.0], np.cumsum(steps)])
        t = t[t <= post]
        # A simulator lands on every breakpoint of its source.
        t = np.union1d(t, [b[0] + trigger_offset for b in pulse_bp])
    else:
        n = int(round((pre + post) / dt)) + 1
        t = -pre + dt * np.arange(n)
    tau = t - trigger_offset
    clean = modal_response(modes, direct, pulse_bp, tau)
    peak = float(np.max(np.abs(clean)))
    sigma = 0.0
    if noise_sigma is not None:
        sigma = noise_sigma
    elif snr_db is not None:
        sigma = peak / 10 ** (snr_db / 20)
    y = clean + offset + drift * t + sigma * rng.standard_normal(t.shape)
    if bits is not None:
        lo, hi = adc_range
        q = (hi - lo) / (2**bits - 1)
        y = lo + q * np.clip(np.round((y - lo) / q), 0, 2**bits - 1)
    out = {"t": t, "y": y, "clean": clean, "sigma": sigma, "peak": peak}
    if stimulus:
        x = np.interp(tau, [b[0] for b in pulse_bp], [b[1] for b in pulse_bp], left=0.0, right=0.0)
        amp = max(abs(b[1]) for b in pulse_bp)
        out["s"] = x + amp / 10 ** (stim_snr_db / 20) * rng.standard_normal(t.shape)
    out["truth"] = {
        "poles": [[p.real, p.imag] for p, _ in modes],
        "residues": [[r.real, r.imag] for _, r in modes],
        "direct": direct,
        "h0": float(impulse_response(modes, [0.0])[0]),
        "trigger_offset": trigger_offset,
        "sigma": sigma,
        "peak": peak,
    }
    return out


def fmt(v, digits):
    return "%.*e" % (digits - 1, v)


def write(path, cap, layout="plain", digits=9):
    """Write a capture in one of the layouts: plain, meta-semicolon, tab, index, multi."""
    path = Path(path)
    t, y, s = cap["t"], cap["y"], cap.get("s")
    lines = []
    if layout == "plain":
        lines.append("time (s),out (V)" + (",stim (V)" if s is not None else ""))
        for i in range(len(t)):
            row = [fmt(t[i], 15), fmt(y[i], digits)] + ([fmt(s[i], digits)] if s is not None else [])
            lines.append(",".join(row))
    elif layout == "meta-semicolon":
        # Metadata block, semicolon delimiter, decimal comma, a units row, time in µs, mV.
        lines += ["Bench record;unit 7", "Record length;%d" % len(t), "Probe factor;1",
                  "Operator;synthetic", "t;out" + (";stim" if s is not None else ""),
                  "us;mV" + (";V" if s is not None else "")]
        for i in range(len(t)):
            row = [fmt(t[i] * 1e6, 15), fmt(y[i] * 1e3, digits)] + ([fmt(s[i], digits)] if s is not None else [])
            lines.append(";".join(v.replace(".", ",") for v in row))
    elif layout == "tab":
        lines.append("time\tout" + ("\tstim" if s is not None else ""))
        for i in range(len(t)):
            row = [fmt(t[i], 15), fmt(y[i], digits)] + ([fmt(s[i], digits)] if s is not None else [])
            lines.append("\t".join(row))
    elif layout == "index":
        dt = t[1] - t[0]
        trig = int(round(-t[0] / dt))
        lines += ["# synthetic capture", "Sample interval: %.15e s" % dt, "Trigger position: %d" % trig,
                  "index,out"]
        for i in range(len(t)):
            lines.append("%d,%s" % (i, fmt(y[i], digits)))
    elif layout == "multi":
        rng = np.random.default_rng(7)
        aux = 0.01 * rng.standard_normal(len(t))
        lines.append("time (s),aux (V),out (V),stim (V)")
        for i in range(len(t)):
            lines.append(",".join([fmt(t[i], 15), fmt(aux[i], 4), fmt(y[i], digits), fmt(s[i], digits)]))
    else:
        raise ValueError(layout)
    path.write_text("\n".join(lines) + "\n")
    path.with_suffix(".truth.json").write_text(json.dumps(cap["truth"], indent=1))
    return path


if __name__ == "__main__":
    print("ramp superposition vs scipy.signal.lsim: max relative difference %.2e" % self_check())
    m, d = lag_lead()
    print("lag-lead modes", m, "D", d)
