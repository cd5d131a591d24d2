#!/usr/bin/env python3
"""Reference checks of pulseplan's netlist analysis against an independent MNA reference.

Usage:  python3 tests/reference/check_circuits.py [--only SUBSTRING] [-q] [-v]

Each scenario in tests/reference/circuits/*.toml is stamped here, from the TOML alone, into
a descriptor system E x' = A x + B u, y = C x (node voltages plus branch currents of
inductors, voltage-type elements and the stimulus source), then analysed with numpy/scipy:
finite generalized eigenvalues of (A, E), residues from left/right generalized eigenvectors,
Laurent coefficients of a repeated pole by a contour integral of H(s) = C (sE - A)^-1 B, D and
h(0+) from an SVD split of the descriptor system into a state space, the trapezoid response
in closed form (mpmath, refmath.y_exact) and by scipy.signal.lsim.  Closed forms (RC, RLC,
Sallen-Key, uniform ladder, hand-derived transfer functions) are an extra check.
Singular circuits in tests/reference/circuits/bad/ must exit 2 naming the culprit and line.

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
import tomllib
from pathlib import Path

HERE = Path(__file__).resolve().parent
ROOT = HERE.parents[1]
CIRCUITS = HERE / "circuits"
sys.path.insert(0, str(HERE))

import mpmath as mp  # noqa: E402
import numpy as np  # noqa: E402
import scipy.linalg as sla  # noqa: E402
from scipy import signal  # noqa: E402

import refmath as R  # noqa: E402
from check_core import Checker, _fmt, cplx, run_tool  # noqa: E402  (same output style)

mp.mp.dps = 40

# Tolerances (see the comment at each use)
REL_CORE = 1e-7        # poles, residues, D, h(0+), t0 readings of small circuits (brief: 1e-7).
#                        The float64 reference itself is good to ~1e-12 on these (balanced QZ,
#                        cross-checked below against closed forms), so 1e-7 leaves only tool error.
FLOOR_MODAL = 1e-12    # abs floor as a fraction of the modal magnitude M (float64 cancellation floor
#                        of any modal sum; as check_core.py)
REL_LADDER = 1e-9      # ladders: poles (and residues) to 1e-9 of the largest |pole| (|residue|):
#                        QZ/eigh backward error is ~1e-15 of the largest eigenvalue; the smallest
#                        eigenvalue gap relative to the largest is ~6e-5 (400 sections), so the
#                        eigenvectors, hence residues, are good to ~1e-11 of the largest residue.
FLOOR_LADDER = 1e-10   # abs floor for ladder readings/responses, fraction of M: 400 residues of
#                        alternating sign, each good to ~1e-12 of the largest, are summed.
REL_WINDOW = 1e-4      # window max/rms: the tool may locate the max on a grid (as check_core.py)
REL_RESPONSE = 1e-9    # CSV h(t), y(t)/area vs the closed-form modal response (exact-response target)
REL_LSIM = 1e-7        # CSV y(t) vs scipy.signal.lsim: float64 expm + recursion, observed ~1e-12
FLOOR_LSIM = 1e-10     # abs floor of the lsim comparison, fraction of the modal terms' size at t
# Closed forms (RC, RLC, Sallen-Key, hand-derived transfer functions and state equations) are
# compared with REL_CORE: evaluated in float64 they carry only ~1e-15 round-off, so the tool's own
# 1e-7 target applies; the reference itself is asserted to match them to 1e-10.


# ------------------------------------------------------------ netlist ---

def is_ground(n):
    return n.lower() in ("gnd", "ground")


class Circuit:
    """The [network] table of a netlist scenario, values as IEEE doubles (what the tool reads)."""

    def __init__(self, doc):
        net = doc["network"]
        self.input = net["input"]
        out = net["output"]
        if isinstance(out, str):
            self.output = ("node", out)
        elif isinstance(out, list):
            self.output = ("diff", out[0], out[1])
        else:
            self.output = ("current", out["current_through"])
        self.rs = R.quantity_f64(net["source_resistance"]) if "source_resistance" in net else None
        self.stimulus = doc.get("drive", {}).get("kind", "voltage")
        self.parts = net["parts"]
        self.by_name = {p["name"].lower(): p for p in self.parts}


def stamp(cir):
    """Independent modified nodal analysis.  Returns (E, A, B, C, labels), all float64:
    E x' = A x + B u, y = C x.  Unknowns: node voltages (ground excluded), then one
    branch current per inductor, vcvs, ccvs, op-amp output, capacitor whose current is
    sensed/observed, and the voltage stimulus.  Equations: KCL at every node written as
    (sum of currents leaving through capacitors) = -(other leaving currents) + injections,
    then one branch equation per branch current.
    Conventions (from the module documentation of src/netlist/mod.rs): the current through a
    part flows nodes[0] -> part -> nodes[1]; vccs/cccs drive their current out of nodes[0] and
    into nodes[1]; vcvs/ccvs set v(nodes[0]) - v(nodes[1]); op-amp output branch from the
    output node to ground; coupled inductors have their dotted ends at nodes[0]."""
    nodes = []

    def node(n):
        if is_ground(n):
            return None
        if n not in nodes:
            nodes.append(n)
        return nodes.index(n)

    for p in cir.parts:
        for key in ("nodes", "control"):
            for n in p.get(key, []):
                node(n)
        for key in ("plus", "minus", "output"):
            if key in p:
                node(p[key])
    node(cir.input)
    src_node = None
    if cir.stimulus == "voltage" and cir.rs:
        src_node = node("__source__")      # Thevenin: ideal source behind Rs
    sensed = set()
    for p in cir.parts:
        if p["kind"] in ("cccs", "ccvs"):
            sensed.add(p["sense"].lower())
    if cir.output[0] == "current":
        sensed.add(cir.output[1].lower())
    branches = []
    for p in cir.parts:
        k = p["kind"]
        if k in ("inductor", "vcvs", "ccvs", "opamp") or (k == "capacitor" and p["name"].lower() in sensed):
            branches.append(p["name"].lower())
    if cir.stimulus == "voltage":
        branches.append("__stimulus__")
    nn = len(nodes)
    n = nn + len(branches)
    br = {b: nn + i for i, b in enumerate(branches)}
    E = np.zeros((n, n))
    A = np.zeros((n, n))
    B = np.zeros(n)
    labels = ["v(%s)" % x for x in nodes] + ["i(%s)" % b for b in branches]

    def val(p):
        return R.quantity_f64(p["value"])

    def conductance(a, b, g):
        for i, j, s in ((a, a, 1), (a, b, -1), (b, a, -1), (b, b, 1)):
            if i is not None and j is not None:
                A[i, j] -= s * g

    def current_form(name):
        """Row vector f with i(name) = f . x (current nodes[0] -> nodes[1] through the part)."""
        p = cir.by_name[name.lower()]
        f = np.zeros(n)
        if p["name"].lower() in br:
            f[br[p["name"].lower()]] = 1.0
        elif p["kind"] == "resistor":
            a, b = node(p["nodes"][0]), node(p["nodes"][1])
            g = 1.0 / val(p)
            if a is not None:
                f[a] += g
            if b is not None:
                f[b] -= g
        else:
            raise ValueError("reference cannot sense the current of %s" % name)
        return f

    def leave(a, b, f):
        """A current f.x leaves node a and enters node b."""
        if a is not None:
            A[a, :] -= f
        if b is not None:
            A[b, :] += f

    def vdiff(a, b, scale=1.0):
        f = np.zeros(n)
        if a is not None:
            f[a] += scale
        if b is not None:
            f[b] -= scale
        return f

    for p in cir.parts:
        k = p["kind"]
        if k == "resistor":
            conductance(node(p["nodes"][0]), node(p["nodes"][1]), 1.0 / val(p))
        elif k == "capacitor":
            a, b = node(p["nodes"][0]), node(p["nodes"][1])
            c = val(p)
            if p["name"].lower() in br:
                j = br[p["name"].lower()]
                e = np.zeros(n)
                e[j] = 1.0
                leave(a, b, e)
                # C (va' - vb') = i_C
                E[j, :] += vdiff(a, b, c)
                A[j, j] += 1.0
            else:
                for i, jj, s in ((a, a, 1), (a, b, -1), (b, a, -1), (b, b, 1)):
                    if i is not None and jj is not None:
                        E[i, jj] += s * c
        elif k == "inductor":
            a, b = node(p["nodes"][0]), node(p["nodes"][1])
            j = br[p["name"].lower()]
            e = np.zeros(n)
            e[j] = 1.0
            leave(a, b, e)
            # L i' (+ M i_other') = va - vb
            E[j, j] += val(p)
            A[j, :] += vdiff(a, b)
        elif k == "coupling":
            l1, l2 = (cir.by_name[x.lower()] for x in p["inductors"])
            kk = R.quantity_f64(p["k"])
            m = kk * math.sqrt(val(l1) * val(l2))
            j1, j2 = br[l1["name"].lower()], br[l2["name"].lower()]
            E[j1, j2] += m
            E[j2, j1] += m
        elif k == "vccs":
            g = R.quantity_f64(p["gain"])
            leave(node(p["nodes"][0]), node(p["nodes"][1]), vdiff(node(p["control"][0]), node(p["control"][1]), g))
        elif k == "cccs":
            g = R.quantity_f64(p["gain"])
            leave(node(p["nodes"][0]), node(p["nodes"][1]), g * current_form(p["sense"]))
        elif k in ("vcvs", "ccvs"):
            a, b = node(p["nodes"][0]), node(p["nodes"][1])
            j = br[p["name"].lower()]
            e = np.zeros(n)
            e[j] = 1.0
            leave(a, b, e)
            g = R.quantity_f64(p["gain"])
            # 0 = va - vb - gain * control
            ctl = vdiff(node(p["control"][0]), node(p["control"][1]), g) if k == "vcvs" else g * current_form(p["sense"])
            A[j, :] += vdiff(a, b) - ctl
        elif k == "opamp":
            o, pl, mi = node(p["output"]), node(p["plus"]), node(p["minus"])
            j = br[p["name"].lower()]
            e = np.zeros(n)
            e[j] = 1.0
            leave(o, None, e)
            a0 = R.quantity_f64(p["gain"]) if "gain" in p else None
            gbw = R.quantity_f64(p["gbw"]) if "gbw" in p else None
            # ideal: 0 = v+ - v-;  A0 only: 0 = (v+ - v-) - vo/A0;
            # A0, GBW: vo = A0/(1 + s A0/wt) (v+ - v-)  <=>  vo'/wt = (v+ - v-) - vo/A0;  GBW only: vo'/wt = v+ - v-
            A[j, :] += vdiff(pl, mi)
            if a0 is not None:
                A[j, o] -= 1.0 / a0
            if gbw is not None:
                E[j, o] += 1.0 / (2 * math.pi * gbw)
        else:
            raise ValueError("unknown kind %r" % k)
    inp = node(cir.input)
    if cir.stimulus == "voltage":
        j = br["__stimulus__"]
        drv = src_node if src_node is not None else inp
        e = np.zeros(n)
        e[j] = 1.0
        leave(drv, None, e)
        A[j, drv] += 1.0     # 0 = v_drv - u
        B[j] = -1.0
        if src_node is not None:
            conductance(src_node, inp, 1.0 / cir.rs)
    else:
        B[inp] += 1.0        # u flows from ground into the input
        if cir.rs:
            conductance(inp, None, 1.0 / cir.rs)
    if cir.output[0] == "node":
        C = vdiff(node(cir.output[1]), None)
    elif cir.output[0] == "diff":
        C = vdiff(node(cir.output[1]), node(cir.output[2]))
    else:
        C = current_form(cir.output[1])
    return E, A, B, C, labels


# ---------------------------------------------------------- analysis ---

def _pow2(x):
    return 2.0 ** np.round(np.log2(x))


def balance(E, A, B, C):
    """Diagonal equilibration by powers of two (eigenvalues unchanged, exact in floating point):
    D1 (A, E) D2 with rows/columns of |A| + |E| brought to unit max norm."""
    n = A.shape[0]
    d1, d2 = np.ones(n), np.ones(n)
    for _ in range(30):
        M = np.abs(A * d1[:, None] * d2[None, :]) + np.abs(E * d1[:, None] * d2[None, :])
        r = M.max(axis=1)
        r[r == 0] = 1.0
        d1 /= _pow2(np.sqrt(r))
        M = np.abs(A * d1[:, None] * d2[None, :]) + np.abs(E * d1[:, None] * d2[None, :])
        c = M.max(axis=0)
        c[c == 0] = 1.0
        d2 /= _pow2(np.sqrt(c))
    return (E * d1[:, None] * d2[None, :], A * d1[:, None] * d2[None, :], B * d1, C * d2)


class Reference:
    """Poles/residues/D/h0 of the descriptor system, computed in sigma = s/w0 (time scaled)
    on a balanced pencil, reported in SI units."""

    def __init__(self, E, A, B, C):
        self.E0, self.A0, self.B0, self.C0 = E, A, B, C
        # first pass for the frequency scale w0 (geometric mean of the finite |poles|)
        Eb, Ab, _, _ = balance(E, A, B, C)
        lam = self._finite(sla.eig(Ab, Eb, right=False, homogeneous_eigvals=True))
        self.w0 = float(np.exp(np.mean(np.log(np.abs(lam[lam != 0]))))) if np.any(lam != 0) else 1.0
        self.E, self.A, self.B, self.C = balance(self.w0 * E, A, B, C)
        self.order = None
        self._eig()
        self._reduce()
        self._modes()

    @staticmethod
    def _finite(ab):
        a, b = ab
        fin = np.abs(b) > 1e-8 * np.abs(a)
        return a[fin] / b[fin]

    def _eig(self):
        # reference: scipy.linalg.eig(A, E) (LAPACK QZ) with left and right eigenvectors
        ab, vl, vr = sla.eig(self.A, self.E, left=True, right=True, homogeneous_eigvals=True)
        a, b = ab
        fin = np.abs(b) > 1e-8 * np.abs(a)
        self.sig = a[fin] / b[fin]
        self.vl, self.vr = vl[:, fin], vr[:, fin]
        self.order = int(fin.sum())

    def H(self, s):
        """H(s) = C (sE - A)^-1 B (SI s), by a dense complex solve on the scaled pencil."""
        sg = s / self.w0
        x = np.linalg.solve(sg * self.E - self.A, self.B.astype(complex))
        return complex(self.C @ x)

    def _reduce(self):
        """SVD split of the (scaled, balanced) descriptor system into x~' = Ar x~ + Br u,
        y = Cr x~ + Dr u (index-1 case: the algebraic block A22 must be invertible)."""
        U, S, Vt = np.linalg.svd(self.E)
        r = int(np.sum(S > 1e-12 * S[0]))
        if r != self.order:
            raise ValueError("reference: rank(E) = %d but %d finite eigenvalues (index > 1 circuit)"
                             % (r, self.order))
        V = Vt.T
        At = U.T @ self.A @ V
        Bt = U.T @ self.B
        Ct = self.C @ V
        A11, A12, A21, A22 = At[:r, :r], At[:r, r:], At[r:, :r], At[r:, r:]
        B1, B2 = Bt[:r], Bt[r:]
        C1, C2 = Ct[:r], Ct[r:]
        if A22.size:
            if np.linalg.cond(A22) > 1e12:
                raise ValueError("reference: algebraic block singular (index > 1)")
            X = np.linalg.solve(A22, np.column_stack([A21, B2]))
            K, k = X[:, :r], X[:, r]
        else:
            K, k = np.zeros((0, r)), np.zeros(0)
        Si = 1.0 / S[:r]
        self.Ar = Si[:, None] * (A11 - A12 @ K)        # sigma-domain (time scaled by w0)
        self.Br = Si * (B1 - A12 @ k)
        self.Cr = C1 - C2 @ K
        self.Dr = float(-C2 @ k) if C2.size else 0.0

    def _modes(self):
        w0 = self.w0
        sig = self.sig
        n = len(sig)
        # clusters of numerically coincident eigenvalues (a double pole splits by ~sqrt(eps))
        parent = list(range(n))

        def find(i):
            while parent[i] != i:
                i = parent[i]
            return i
        for i in range(n):
            for j in range(i + 1, n):
                if abs(sig[i] - sig[j]) <= 1e-6 * max(abs(sig[i]), abs(sig[j])):
                    parent[find(i)] = find(j)
        groups = {}
        for i in range(n):
            groups.setdefault(find(i), []).append(i)
        modes = []
        for members in groups.values():
            if len(members) == 1:
                i = members[0]
                v, w = self.vr[:, i], self.vl[:, i]
                # reference: r = (C v)(w^H B)/(w^H E v), generalized right/left eigenvectors
                r = (self.C @ v) * (w.conj() @ self.B) / (w.conj() @ self.E @ v)
                p = sig[i] * w0
                r = r * w0
                if abs(p.imag) <= 1e-13 * abs(p):
                    p, r = complex(p.real, 0.0), complex(r.real, 0.0)
                modes.append((p, [r]))
            else:
                modes.append(self._laurent([sig[i] for i in members]))
        self.modes = modes

    def _laurent(self, cl):
        """Laurent coefficients a_-k, k = 1..m, of H at a cluster centre c by the trapezoid rule on
        a circle: a_-k = (1/N) sum_j H(c + rho e^{i th_j}) (rho e^{i th_j})^k (geometric
        convergence; radius half the distance to the nearest other pole)."""
        # reference: contour integral of H(s) = C (sE - A)^-1 B around the cluster, 512 points
        m = len(cl)
        c = np.mean(cl)
        if abs(c.imag) <= 1e-12 * abs(c):
            c = complex(c.real, 0.0)
        others = [s for s in self.sig if min(abs(s - x) for x in cl) > 1e-6 * abs(s)]
        dist = min((abs(s - c) for s in others), default=abs(c))
        rho = 0.5 * dist
        N = 512
        th = 2 * np.pi * (np.arange(N) + 0.5) / N
        z = rho * np.exp(1j * th)
        h = np.array([self.H((c + zz) * self.w0) for zz in z])   # H in SI, s = w0 sigma
        res = []
        for k in range(1, m + 1):
            a = np.mean(h * z ** k)        # coefficient in powers of (sigma - c)
            res.append(complex(a) * self.w0 ** k)   # 1/(sigma - c)^k = w0^k/(s - p)^k
        p = c * self.w0
        if p.imag == 0:
            res = [complex(x.real, 0.0) for x in res]
        return (complex(p), res)

    @property
    def direct(self):
        return self.Dr

    @property
    def h0_ivt(self):
        # initial-value theorem on the reduced system: lim s (H(s) - D) = C_r B_r (x w0 for time scale)
        return float(self.Cr @ self.Br) * self.w0

    def modal_magnitude(self):
        M = 0.0
        for p, rs in self.modes:
            a = abs(p.real)
            for k, r in enumerate(rs, start=1):
                M += abs(r) * _wk(k, a)
        return M

    def network(self, h0_zero):
        """refmath.Network built from these modes (for the closed-form trapezoid response)."""
        modes = [R.Mode(mp.mpc(p), [mp.mpc(r) for r in rs]) for p, rs in self.modes]
        h0 = mp.mpf(0) if h0_zero else mp.mpf(self.h0_ivt)
        return R.Network(modes, mp.mpf(self.direct), h0, "netlist")


def _wk(k, a):
    if k == 1:
        return 1.0
    tp = (k - 1) / a
    return tp ** (k - 1) / math.factorial(k - 1) * math.exp(-a * tp)


def y_and_mag(net, pulse, t):
    """y(t) of the trapezoid (as refmath.y_exact: ramp decomposition convolved with each mode,
    refmath.Y_DPS digits) and the sum of the magnitudes of its modal terms: the size of what a
    float64 modal sum adds up at t, i.e. its cancellation floor / eps."""
    with mp.workdps(R.Y_DPS):
        t = mp.mpf(t)
        A, tr, tf, t1, end = pulse.A, pulse.tr, pulse.tf, pulse.t1, pulse.end
        acc, mag = mp.mpc(0), mp.mpf(0)
        for md in net.modes:
            p = md.pole
            for k, r in enumerate(md.residues, start=1):
                g = (A / tr) * (R._G2(p, k, t) - R._G2(p, k, t - tr)) \
                    - (A / tf) * (R._G2(p, k, t - t1) - R._G2(p, k, t - end))
                acc += r * g
                mag += abs(r * g)
        y = mp.re(acc) + net.direct * pulse.u(t)
        return +y, float(mag + abs(net.direct * pulse.u(t)))


def h_and_mag(net, t):
    """h(t) (refmath.Network.h_mp) and the sum of the magnitudes of its modal terms at t."""
    t = mp.mpf(t)
    acc, mag = mp.mpc(0), mp.mpf(0)
    for md in net.modes:
        e = mp.exp(md.pole * t)
        for k, r in enumerate(md.residues, start=1):
            term = r * t ** (k - 1) / mp.factorial(k - 1) * e
            acc += term
            mag += abs(term)
    return mp.re(acc), float(mag)


# --------------------------------------------------- closed forms ---

def vq(doc, name, key="value"):
    for p in doc["network"]["parts"]:
        if p["name"] == name:
            return R.quantity_f64(p[key])
    raise KeyError(name)


def poly_poles(den):
    """Roots of a real polynomial (descending powers) with mpmath at 50 digits."""
    with mp.workdps(50):
        rts = mp.polyroots([mp.mpf(c) for c in den], maxsteps=400, extraprec=200)
    return [complex(r) for r in rts]


def quad_poles(b, c):
    """Roots of s^2 + b s + c."""
    d = b * b / 4 - c
    if d >= 0:
        return [complex(-b / 2 + math.sqrt(d)), complex(-b / 2 - math.sqrt(d))]
    return [complex(-b / 2, math.sqrt(-d)), complex(-b / 2, -math.sqrt(-d))]


def closed_forms(name, doc):
    """Per scenario: (label, poles, extras) from handbook closed forms / hand derivations.
    extras: list of (json key in network, value, source)."""
    g = lambda n, k="value": vq(doc, n, k)   # noqa: E731
    net = doc["network"]
    rs = R.quantity_f64(net["source_resistance"]) if "source_resistance" in net else 0.0
    if name == "rc_lowpass":
        tau = (rs + g("R1")) * g("C1")
        # handbook closed form: RC low-pass H = (1/tau)/(s + 1/tau), tau = (Rs + R1) C1
        return "RC low-pass tau = (Rs+R1)C1", [complex(-1 / tau)], {"residue": [1 / tau], "h0_plus": 1 / tau}
    if name == "rl_current":
        r1, r2, L = g("R1"), g("R2"), g("L1")
        rth = r1 * r2 / (r1 + r2)
        # handbook closed form: Thevenin (R1||R2, R2/(R1+R2)) into L: i_L = Vth/(Rth + sL)
        return "RL tau = L/(R1||R2)", [complex(-rth / L)], {"residue": [r2 / (r1 + r2) / L], "h0_plus": r2 / (r1 + r2) / L}
    if name == "series_rlc_current":
        L, Cc, rt = g("L1"), g("C1"), rs + g("R1")
        # handbook closed form: series RLC, w0 = 1/sqrt(LC), 2 zeta w0 = R/L (Norton -> Thevenin: R = Rs + R1),
        # v_C/u = (Rs/(LC)) / (s^2 + (R/L) s + 1/(LC))
        return "series RLC w0 = 1/sqrt(LC), 2 zeta w0 = (Rs+R1)/L", quad_poles(rt / L, 1 / (L * Cc)), {}
    if name == "parallel_rlc_current":
        L, Cc = g("L1"), g("C1")
        Rp = 1 / (1 / g("R1") + 1 / rs)
        # handbook closed form: parallel RLC, Z = (s/C)/(s^2 + s/(RC) + 1/(LC)), R = R1 || Rs; h(0+) = 1/C
        return "parallel RLC w0 = 1/sqrt(LC), 2 zeta w0 = 1/(RC)", quad_poles(1 / (Rp * Cc), 1 / (L * Cc)), {"h0_plus": 1 / Cc}
    if name == "lag_lead_rs":
        R1, C1, R2, C2 = g("R1"), g("C1"), g("R2"), g("C2")
        # hand derivation: divider Z2/(Rs + Z1 + Z2), Z1 = R1/(1 + s R1 C1), Z2 = R2 + 1/(s C2);
        # times s C2 (1 + s R1 C1): den = (Rs+R2) C2 R1 C1 s^2 + ((Rs+R2) C2 + R1 C2 + R1 C1) s + 1
        den = [(rs + R2) * C2 * R1 * C1, (rs + R2) * C2 + R1 * C2 + R1 * C1, 1.0]
        return "lag-lead divider Z2/(Rs+Z1+Z2)", poly_poles(den), {"direct": R2 / (rs + R2)}
    if name in ("sallen_key_ideal", "buffered_double_pole"):
        if name == "buffered_double_pole":
            tau = g("R1") * g("C1")
            # handbook closed form: two buffered equal RC sections, H = (1/RC)^2/(s + 1/RC)^2
            return "buffered RC sections: double pole -1/RC", [complex(-1 / tau)] * 2, {"residue2": 1 / tau ** 2, "residue1": 0.0}
        R1, R2, C1, C2 = g("R1"), g("R2"), g("C1"), g("C2")
        w0 = 1 / math.sqrt(R1 * R2 * C1 * C2)
        Q = math.sqrt(R1 * R2 * C1 * C2) / (C2 * (R1 + R2))
        # handbook closed form: unity-gain Sallen-Key w0 = 1/sqrt(R1R2C1C2), Q = sqrt(R1R2C1C2)/(C2(R1+R2)),
        # cascaded with the buffered R3-C3 pole -1/(R3 C3)
        return "Sallen-Key w0, Q + pole -1/(R3C3)", quad_poles(w0 / Q, w0 * w0) + [complex(-1 / (g("R3") * g("C3")))], {}
    if name.startswith("transformer"):
        L1, L2, RL, CL = g("L1"), g("L2"), g("RL"), g("CL")
        M = g("K1", "k") * math.sqrt(L1 * L2)
        tl = RL * CL
        # hand derivation (mesh equations): H = s M RL / [(Rs + s L1)(s L2 (1 + s tl) + RL) - s^2 M^2 (1 + s tl)]
        # den = (L1 L2 - M^2) tl s^3 + (Rs L2 tl + L1 L2 - M^2) s^2 + (Rs L2 + L1 RL) s + Rs RL
        den = [(L1 * L2 - M * M) * tl, rs * L2 * tl + L1 * L2 - M * M, rs * L2 + L1 * RL, rs * RL]
        # leading behaviour: H ~ M RL / ((L1L2 - M^2) tl s^2): relative degree 2, h(0+) = 0
        return "transformer mesh equations", poly_poles(den), {}
    if name == "controlled_sources":
        R1, C1, R2, C2, R3, L1, R4, C3 = (g(x) for x in ("R1", "C1", "R2", "C2", "R3", "L1", "R4", "C3"))
        g1, rm, f1, g2, e1 = g("G1", "gain"), g("H1", "gain"), g("F1", "gain"), g("G2", "gain"), g("E1", "gain")
        # hand-written state equations, states (v_a, v_b, i_L1, v_e):
        #   C1 v_a' = (u - v_a)/R1;  C2 v_b' = g1 v_a - v_b/R2 - g2 v_e;  v_c = rm v_b/R2;
        #   L1 i' = v_c - R3 i;  C3 v_e' = f1 i - v_e/R4;  y = e1 (v_e - v_b)
        Ah = np.array([[-1 / (R1 * C1), 0, 0, 0],
                       [g1 / C2, -1 / (R2 * C2), 0, -g2 / C2],
                       [0, rm / (R2 * L1), -R3 / L1, 0],
                       [0, 0, f1 / C3, -1 / (R4 * C3)]])
        Bh = np.array([1 / (R1 * C1), 0, 0, 0])
        Ch = np.array([0, -e1, 0, e1])
        return "hand-written state equations", None, {"ss": (Ah, Bh, Ch)}
    if name == "sallen_key_gbw":
        R1, R2, C1, C2, R3, C3 = (g(x) for x in ("R1", "R2", "C1", "C2", "R3", "C3"))
        a0, wt = g("U1", "gain"), 2 * math.pi * g("U1", "gbw")
        # hand-written state equations, states (v_a, v_b, v_o, v_out), op-amp vo'/wt = v_b - v_o - v_o/a0:
        #   v_o' = wt (v_b - v_o (1 + 1/a0));  C1 (v_a' - v_o') = (u - v_a)/R1 - (v_a - v_b)/R2;
        #   C2 v_b' = (v_a - v_b)/R2;  C3 v_out' = (v_o - v_out)/R3
        ro = np.array([0, wt, -wt * (1 + 1 / a0), 0])
        ra = ro + np.array([-1 / (R1 * C1) - 1 / (R2 * C1), 1 / (R2 * C1), 0, 0])
        Ah = np.array([ra, [1 / (R2 * C2), -1 / (R2 * C2), 0, 0], ro, [0, 0, 1 / (R3 * C3), -1 / (R3 * C3)]])
        Bh = np.array([1 / (R1 * C1), 0, 0, 0])
        Ch = np.array([0, 0, 0, 1.0])
        return "hand-written state equations", None, {"ss": (Ah, Bh, Ch)}
    m = re.fullmatch(r"rc_ladder_(\d+)", name)
    if m:
        N = int(m.group(1))
        r, c = g("R1"), g("C1")
        # handbook closed form (uniform RC ladder, grounded source end, open far end):
        # eigenvalues (4/RC) sin^2(theta_k/2), theta_k = (2k-1) pi/(2N+1); eigenvectors sin(j theta_k),
        # so the far-end residue is sin(theta) sin(N theta) / (RC sum_j sin^2(j theta))
        k = np.arange(1, N + 1)
        th = (2 * k - 1) * np.pi / (2 * N + 1)
        poles = -(4 / (r * c)) * np.sin(th / 2) ** 2
        j = np.arange(1, N + 1)
        nrm = np.array([np.sum(np.sin(j * t) ** 2) for t in th])
        resid = np.sin(th) * np.sin(N * th) / (r * c * nrm)
        return "uniform ladder -(4/RC) sin^2((2k-1)pi/(2(2N+1)))", [complex(p) for p in poles], {"ladder_residues": resid}
    return None, None, {}


# ------------------------------------------------------------ checks ---

def match_modes(tmodes, p):
    return min(tmodes, key=lambda t: abs(cplx(t["pole"]) - p))


def check_scenario(C, binary, path, verbose=False):
    name = path.stem
    with open(path, "rb") as fh:
        doc = tomllib.load(fh)
    cir = Circuit(doc)
    E, A, B, Cv, labels = stamp(cir)
    ref = Reference(E, A, B, Cv)
    ladder = name.startswith("rc_ladder")
    M = ref.modal_magnitude()
    floor_m = (FLOOR_LADDER if ladder else FLOOR_MODAL) * M
    pmax = max(abs(p) for p, _ in ref.modes)
    rmax = max(abs(rs[0]) for _, rs in ref.modes)

    # reference self-consistency: H(s) = D + sum of modes at test points (partial fractions are
    # exact for a proper H), and sum r1 = C_r B_r (h0 by the IVT)
    for s in (0.37j * pmax + 0.11 * pmax, 3.0 * pmax):
        pf = ref.direct + sum(r / (s - p) ** k for p, rs in ref.modes for k, r in enumerate(rs, start=1))
        hs = ref.H(s)
        assert abs(pf - hs) <= 1e-9 * (abs(hs) + M / pmax + abs(ref.direct)), \
            "reference partial fractions inconsistent at s=%s: %s vs %s" % (s, pf, hs)
    h0_res = sum(rs[0] for _, rs in ref.modes).real
    assert abs(h0_res - ref.h0_ivt) <= 1e-9 * M, "reference h0 inconsistent: %r vs %r" % (h0_res, ref.h0_ivt)
    h0_zero = abs(ref.h0_ivt) <= 1e-9 * M
    net = ref.network(h0_zero)
    pulse = R.pulse_from_table(doc["pulse"])
    h0 = 0.0 if h0_zero else ref.h0_ivt

    rc, out, err = run_tool(binary, "assess", path, "--json")
    if not C.check("%s: assess exit code 0/1" % name, rc in (0, 1), "rc=%d stderr=%s" % (rc, err.strip()[:300])):
        return
    try:
        js = json.loads(out)
    except ValueError as e:
        C.check("%s: assess JSON parses" % name, False, str(e))
        return
    jn, je = js.get("network", {}), js.get("error", {})
    C.check("%s: network.form = netlist" % name, jn.get("form") == "netlist", "tool %r" % jn.get("form"))
    # reference: number of finite generalized eigenvalues of (A, E) = degree of det(sE - A)
    C.check("%s: network.order" % name, jn.get("order") == ref.order, "tool %r ref %d" % (jn.get("order"), ref.order))

    # ---- poles and residues ----
    tmodes = jn.get("modes", [])
    # modes whose weight is at rounding level may be dropped by the tool (it says so in the module
    # documentation); every mode of weight > 1e-8 of the largest must be there.
    weights = [max(abs(r) / abs(p) ** (k - 1) for k, r in enumerate(rs, start=1)) for p, rs in ref.modes]
    wmax = max(weights)
    need = [md for md, w in zip(ref.modes, weights) if w > 1e-8 * wmax]
    C.check("%s: network.modes count" % name, len(need) <= len(tmodes) <= len(ref.modes),
            "tool %d distinct poles, ref %d (%d significant)" % (len(tmodes), len(ref.modes), len(need)))
    worst = {"pole": (0.0, ""), "residue": (0.0, ""), "mult": (0, "")}
    for p, rs in (ref.modes if ladder else need):
        if not tmodes:
            break
        tm = match_modes(tmodes, p)
        tp = cplx(tm["pole"])
        tres = [cplx(x) for x in tm.get("residues", [])]
        tag = "%s: mode p=%s" % (name, _fmt(p))
        if ladder:
            # ladders: one aggregated line per quantity (400 modes), tolerance REL_LADDER of the largest
            q = abs(tp - p) / (REL_LADDER * pmax)
            if q > worst["pole"][0]:
                worst["pole"] = (q, "p=%s tool %s" % (_fmt(p), _fmt(tp)))
            if len(tres) != len(rs):
                worst["mult"] = (worst["mult"][0] + 1, "p=%s tool m=%d ref m=%d" % (_fmt(p), len(tres), len(rs)))
            else:
                q = abs(tres[0] - rs[0]) / (REL_LADDER * rmax)
                if q > worst["residue"][0]:
                    worst["residue"] = (q, "p=%s tool %s ref %s" % (_fmt(p), _fmt(tres[0]), _fmt(rs[0])))
            continue
        # reference: scipy.linalg.eig(A, E) on the balanced, time-scaled pencil (cluster mean for
        # a repeated pole)
        C.close(tag + " pole", tp, p, REL_CORE)
        C.check(tag + " multiplicity", int(tm.get("multiplicity", -1)) == len(rs) and len(tres) == len(rs),
                "tool %s (%d residues) ref %d" % (tm.get("multiplicity"), len(tres), len(rs)))
        a = abs(p.real)
        for k, r in enumerate(rs, start=1):
            if k > len(tres):
                break
            # reference: simple pole: (C v)(w^H B)/(w^H E v); repeated: contour integral of H(s)
            # abs floor: 1e-10 M / max_t|t^(k-1)/(k-1)! e^(-at)| (a coefficient that contributes ~0)
            C.close(tag + " residue k=%d" % k, tres[k - 1], r, REL_CORE, 1e-10 * M / _wk(k, a))
    if ladder:
        C.check("%s: all %d poles vs scipy.linalg.eig(A, E)" % (name, len(ref.modes)), worst["pole"][0] <= 1.0,
                "worst |diff|/(%.0e max|p|) = %.3g %s" % (REL_LADDER, worst["pole"][0], worst["pole"][1]))
        C.check("%s: all residues vs eigenvectors of (A, E)" % name, worst["residue"][0] <= 1.0,
                "worst |diff|/(%.0e max|r|) = %.3g %s" % (REL_LADDER, worst["residue"][0], worst["residue"][1]))
        C.check("%s: all modes simple" % name, worst["mult"][0] == 0, worst["mult"][1])
        # the slowest pole to 1e-9 of its own magnitude: the tail of h(t) inherits its relative error
        # times |p| t (several time constants), and the README's exact-response target is ~1e-9
        ps = min(ref.modes, key=lambda md: abs(md[0]))[0]
        C.close("%s: slowest pole to 1e-9 of itself" % name, cplx(match_modes(tmodes, ps)["pole"]), ps, 1e-9)

    # ---- D and h(0+) ----
    # reference: D of the SVD-reduced state space (= H(s) - sum of modes, checked above)
    C.close("%s: network.direct" % name, jn.get("direct"), ref.direct, REL_CORE, FLOOR_MODAL * M / pmax)
    # reference: initial-value theorem on the reduced state space, C_r B_r
    C.close("%s: network.h0_plus" % name, jn.get("h0_plus"), h0, REL_CORE, floor_m)

    # ---- closed forms ----
    label, cpoles, extra = closed_forms(name, doc)
    if cpoles is not None and tmodes:
        if ladder:
            q, d = 0.0, ""
            for p in cpoles:
                tp = cplx(match_modes(tmodes, p)["pole"])
                e = abs(tp - p) / (REL_LADDER * pmax)
                if e > q:
                    q, d = e, "p=%s tool %s" % (_fmt(p), _fmt(tp))
            C.check("%s: poles vs handbook %s" % (name, label), q <= 1.0,
                    "worst |diff|/(%.0e max|p|) = %.3g %s" % (REL_LADDER, q, d))
            q, d = 0.0, ""
            for p, r in zip(cpoles, extra["ladder_residues"]):
                tm = match_modes(tmodes, p)
                e = abs(cplx(tm["residues"][0]) - r) / (REL_LADDER * rmax)
                if e > q:
                    q, d = e, "p=%s tool %s ref %s" % (_fmt(p), _fmt(cplx(tm["residues"][0])), _fmt(r))
            C.check("%s: residues vs handbook ladder eigenvectors" % name, q <= 1.0,
                    "worst |diff|/(%.0e max|r|) = %.3g %s" % (REL_LADDER, q, d))
            # the reference itself against the closed form (guards the MNA stamps)
            rp = np.sort(np.array([p.real for p, _ in ref.modes]))
            assert np.max(np.abs(rp - np.sort(np.real(cpoles)))) <= 1e-11 * pmax, "reference ladder poles off"
        else:
            for p in cpoles:
                tp = cplx(match_modes(tmodes, p)["pole"])
                # handbook closed form evaluated in float64 (round-off ~1e-15): the tool's 1e-7 applies
                C.close("%s: pole %s vs handbook %s" % (name, _fmt(p), label), tp, p, REL_CORE)
                # the reference itself must agree far more tightly (guards the MNA stamps)
                rp = min((q for q, _ in ref.modes), key=lambda q: abs(q - p))
                assert abs(rp - p) <= 1e-10 * abs(p), "reference pole %s vs closed form %s" % (rp, p)
            if "residue" in extra:
                for p, r in zip(cpoles, extra["residue"]):
                    tm = match_modes(tmodes, p)
                    C.close("%s: residue vs handbook %s" % (name, label), cplx(tm["residues"][0]), r, REL_CORE)
            if "residue2" in extra:
                tm = match_modes(tmodes, cpoles[0])
                tres = [cplx(x) for x in tm.get("residues", [])]
                ok = len(tres) == 2
                C.check("%s: double pole has two Laurent coefficients (handbook)" % name, ok, "tool %d" % len(tres))
                if ok:
                    C.close("%s: r2 = 1/(RC)^2 (handbook)" % name, tres[1], extra["residue2"], REL_CORE)
                    # r1 = 0: floor 1e-10 of r2/|p| (the scale of a first-order coefficient)
                    C.close("%s: r1 = 0 (handbook)" % name, tres[0], 0.0, 0.0, 1e-10 * extra["residue2"] / abs(cpoles[0]))
            if "h0_plus" in extra:
                C.close("%s: h0_plus vs handbook" % name, jn.get("h0_plus"), extra["h0_plus"], REL_CORE)
            if "direct" in extra:
                C.close("%s: direct vs handbook R2/(Rs+R2)" % name, jn.get("direct"), extra["direct"], REL_CORE)
    if "ss" in extra and tmodes:
        # hand derivation: eigen-decomposition of hand-written state equations (numpy.linalg.eig),
        # residues (C v)(w B)/(w v) with left eigenvectors w = rows of V^-1
        Ah, Bh, Ch = extra["ss"]
        lam, V = np.linalg.eig(Ah)
        W = np.linalg.inv(V)
        for i, p in enumerate(lam):
            r = (Ch @ V[:, i]) * (W[i, :] @ Bh)
            tm = match_modes(tmodes, p)
            C.close("%s: pole %s vs %s" % (name, _fmt(p), label), cplx(tm["pole"]), p, REL_CORE)
            C.close("%s: residue at %s vs %s" % (name, _fmt(p), label), cplx(tm["residues"][0]), r, REL_CORE,
                    1e-10 * M)
            rp = min((q for q, _ in ref.modes), key=lambda q: abs(q - p))
            assert abs(rp - p) <= 1e-10 * abs(p), "reference pole %s vs hand-written %s" % (rp, p)
    if name == "sallen_key_gbw" and tmodes:
        # handbook approximation: a unity-gain follower with a one-pole op-amp adds a closed-loop pole
        # near -wt(1 + 1/A0), wt = 2 pi GBW; the surrounding RC network moves it by ~|p|/wt (a few %)
        wt = 2 * math.pi * vq(doc, "U1", "gbw")
        fast = max((cplx(t["pole"]) for t in tmodes), key=abs)
        C.close("%s: fast pole ~ -2 pi GBW (5 %%, approximation)" % name, fast, -wt, 0.05)

    # ---- error readings (closed-form trapezoid response of the reference modes) ----
    norm_kind = "peak" if h0_zero else "h0_plus"
    norm = R.peak_abs_h(net) if h0_zero else abs(h0)
    C.check("%s: error.normalised_by" % name, je.get("normalised_by") == norm_kind,
            "tool %r ref %r (ref h0 %s)" % (je.get("normalised_by"), norm_kind, _fmt(ref.h0_ivt)))
    if "normaliser" in je:
        # reference: |h(0+)| or peak |h| (dense grid + mpmath.findroot on h'(t) = 0, refmath.peak_abs_h)
        C.close("%s: error.normaliser" % name, je.get("normaliser"), norm, REL_CORE, floor_m)
    # reference: refmath.y_exact (ramp decomposition of the trapezoid convolved with each mode, 100 digits)
    y_end = R.y_exact(net, pulse, pulse.end) / pulse.area
    ideal_al = net.h_mp(pulse.end - pulse.centroid)
    for key, ideal in (("t0", mp.mpf(h0)), ("t0_aligned", ideal_al)):
        blk = je.get(key, {})
        ab = y_end - ideal
        C.close("%s: error.%s.reading" % (name, key), blk.get("reading"), y_end, REL_CORE, floor_m)
        C.close("%s: error.%s.ideal" % (name, key), blk.get("ideal"), ideal, REL_CORE, floor_m)
        C.close("%s: error.%s.abs" % (name, key), blk.get("abs"), ab, REL_CORE, floor_m)
        C.close("%s: error.%s.rel" % (name, key), blk.get("rel"), ab / norm, REL_CORE, floor_m / norm)
    run = js.get("pulse", {}).get("run")
    if not ladder and isinstance(run, (int, float)) and run > float(pulse.end):
        # reference: refmath.WindowError (per-mode e(s) coefficients at 60 digits), max by grid +
        # bounded refinement, RMS in closed form
        W = R.WindowError(net, pulse)
        span = run - float(pulse.end)
        tf = 1 / pmax
        mx = R.max_abs(W, span, tf) / norm
        rm = R.rms_closed_form(W, span) / norm
        wj = je.get("window", {})
        C.close("%s: error.window.max_rel" % name, wj.get("max_rel"), mx, REL_WINDOW, FLOOR_MODAL * M / norm)
        C.close("%s: error.window.rms_rel" % name, wj.get("rms_rel"), rm, REL_WINDOW, FLOOR_MODAL * M / norm)

    check_csv(C, binary, path, name, ref, net, pulse, M, floor_m, ladder)


def check_csv(C, binary, path, name, ref, net, pulse, M, floor_m, ladder):
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
    header = [h.strip() for h in next(rd, [])]
    C.check("%s: CSV header starts t,ideal,predicted,error" % name, header[:4] == ["t", "ideal", "predicted", "error"],
            "got %r" % header)
    try:
        rows = np.array([[float(x) for x in r] for r in rd if r], dtype=float)
    except ValueError as e:
        C.check("%s: CSV numeric" % name, False, str(e))
        return
    if not C.check("%s: CSV has rows" % name, rows.ndim == 2 and rows.shape[0] >= 10, "shape %s" % (rows.shape,)):
        return
    t = rows[:, 0]
    area, end = float(pulse.area), float(pulse.end)
    nsel = 40 if ladder else 80
    idx = set(np.linspace(0, len(t) - 1, nsel).astype(int).tolist())
    inside = np.nonzero((t > 0) & (t <= end))[0]
    if len(inside):
        idx |= set(inside[np.linspace(0, len(inside) - 1, min(20 if ladder else 40, len(inside))).astype(int)].tolist())
    idx = sorted(i for i in idx if t[i] > 0)

    # reference: closed-form modal h(t) and trapezoid response y(t) (refmath, 100 digits) of the
    # reference modes.  Tolerance: REL_RESPONSE relative (the exact-response target) plus the
    # cancellation floor of a float64 modal sum at that instant, FLOOR_MODAL x (sum of |modal terms|
    # at t) -- time-local, so a late-time error of a slow mode is not hidden by long-gone fast modes.
    worst = {"ideal": (0.0, ""), "predicted": (0.0, ""), "error": (0.0, "")}
    ymag = {}
    for i in idx:
        ti, hi, pi, ei = rows[i, :4]
        h_ref, mh = h_and_mag(net, ti)
        y_ref, my = y_and_mag(net, pulse, ti)
        ymag[i] = my
        y_ref, my = y_ref / pulse.area, my / float(pulse.area)
        for key, got, rf, mg in (("ideal", hi, h_ref, mh), ("predicted", pi, y_ref, my),
                                 ("error", ei, y_ref - h_ref, mh + my)):
            q = abs(got - float(rf)) / (REL_RESPONSE * abs(float(rf)) + FLOOR_MODAL * mg + 1e-300)
            if q > worst[key][0]:
                worst[key] = (q, "t=%.6g tool %.15g ref %.15g (rel %.3g)"
                              % (ti, got, float(rf), abs(got - float(rf)) / abs(float(rf)) if rf else float("inf")))
    for key, (q, d) in worst.items():
        C.check("%s: CSV %s vs reference modes (%d rows)" % (name, key, len(idx)), q <= 1.0,
                "worst |diff|/tol = %.3g %s" % (q, d))

    # reference: scipy.signal.lsim of the SVD-reduced state space (time scaled by w0), one uniform
    # 2000-step grid per linear piece of the trapezoid (breakpoints on the grid: first-order hold
    # is exact for the piecewise-linear input), 2-point lsim from the state at the pulse's end
    w0 = ref.w0
    sys_ = (ref.Ar, ref.Br.reshape(-1, 1), ref.Cr.reshape(1, -1), np.array([[ref.Dr]]))
    seg_states = []
    x = np.zeros(ref.Ar.shape[0])
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
                if a <= ti < b:
                    break
            n = 401
            T = np.linspace(0.0, w0 * (ti - a), n)
            U = ua + (ub - ua) * np.linspace(0.0, ti - a, n) / (b - a)
            if ti > a:
                _, yy, _ = signal.lsim(sys_, U, T, X0=x0)
                yref = float(np.atleast_1d(yy)[-1])
            else:
                yref = float(ref.Cr @ x0 + ref.Dr * ua)
        else:
            _, yy, _ = signal.lsim(sys_, [0.0, 0.0], [0.0, w0 * (ti - end)], X0=x_end)
            yref = float(np.atleast_1d(yy)[-1])
        got = rows[i, 2] * area
        # floor: FLOOR_LSIM x the size of the modal terms of y at t (time-local, see above)
        q = abs(got - yref) / (REL_LSIM * abs(yref) + FLOOR_LSIM * ymag[i] + 1e-300)
        if q > q_ls:
            q_ls, d_ls = q, "t=%.6g tool predicted*area %.15g lsim %.15g" % (ti, got, yref)
    C.check("%s: CSV predicted*area vs scipy.signal.lsim (%d rows)" % (name, len(idx)), q_ls <= 1.0,
            "worst |diff|/tol = %.3g %s" % (q_ls, d_ls))


# ------------------------------------------------------------ singular ---

BAD = [
    # file, culprit names (any may be named), names whose line must be cited: part names, or
    # "output=" for the line of the `output` key (None: no line exists)
    ("opamp_no_feedback.toml", ["U1"], ["U1"]),
    ("voltage_loop.toml", ["E1", "E2"], ["E1", "E2"]),
    ("dangling_node.toml", ["x"], ["R3"]),
    ("unknown_control_node.toml", ["q"], ["G1"]),
    ("unknown_output_node.toml", ["nowhere"], ["output="]),
    ("unknown_sense.toml", ["F1", "R9"], ["F1"]),
    ("duplicate_name.toml", ["R1", "r1"], ["R1", "r1"]),
]


def _part_lines(path, names):
    out = set()
    for i, line in enumerate(path.read_text().splitlines(), start=1):
        for nm in names:
            if nm == "output=" and re.match(r"\s*output\s*=", line):
                out.add(i)
            elif re.search(r'name\s*=\s*"%s"' % re.escape(nm), line):
                out.add(i)
    return out


def check_singular(C, binary, only=None):
    # reference: each file's singularity is by construction (its comment says which); the culprit
    # is the part or node that creates it, the line that of the culprit part (or of `output`)
    for fname, culprits, line_parts in BAD:
        if only and only not in fname and only not in "singular":
            continue
        path = CIRCUITS / "bad" / fname
        rc, out, err = run_tool(binary, "assess", path, "--json")
        tag = "singular %s" % fname
        C.check(tag + ": exit code 2", rc == 2, "rc=%d stdout=%s stderr=%s" % (rc, out[:120], err.strip()[:300]))
        named = [c for c in culprits if re.search(r"'%s'|\"%s\"|\b%s\b" % ((re.escape(c),) * 3), err)]
        C.check(tag + ": stderr names the culprit", bool(named),
                "wanted one of %s; stderr: %s" % (culprits, err.strip()[:300]))
        if line_parts is not None:
            want = _part_lines(path, line_parts)
            cited = {int(n) for n in re.findall(r"line\s+(\d+)", err, flags=re.I)}
            cited |= {int(n) for n in re.findall(r"\.toml:(\d+)", err)}
            C.check(tag + ": stderr cites the culprit's line", bool(cited & want),
                    "wanted line %s, cited %s; stderr: %s" % (sorted(want), sorted(cited), err.strip()[:300]))


# ----------------------------------------------------------------- main ---

def main():
    ap = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    ap.add_argument("--only", help="run only scenarios whose name contains this ('singular' runs the bad circuits)")
    ap.add_argument("-v", "--verbose", action="store_true")
    ap.add_argument("-q", "--quiet", action="store_true", help="print failures and the summary only")
    args = ap.parse_args()

    binary = Path(os.environ.get("PULSEPLAN_BIN") or (ROOT / "target" / "release" / "pulseplan"))
    if not binary.is_file() or not os.access(binary, os.X_OK):
        print("pulseplan binary not found at %s: build it with `cargo build --release` in %s "
              "or set PULSEPLAN_BIN" % (binary, ROOT), file=sys.stderr)
        sys.exit(2)

    C = Checker(args.verbose, args.quiet)
    for path in sorted(CIRCUITS.glob("*.toml")):
        if args.only and args.only not in path.stem:
            continue
        try:
            check_scenario(C, binary, path, args.verbose)
        except Exception as e:  # a crash in one scenario must not hide the others
            C.check("%s: checks ran to completion" % path.stem, False, "%s: %s" % (type(e).__name__, e))
    check_singular(C, binary, args.only)

    print("%d passed, %d failed" % (C.passed, C.failed))
    sys.exit(1 if C.failed else 0)


if __name__ == "__main__":
    main()
