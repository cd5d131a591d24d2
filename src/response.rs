//! Exact responses of a network, in modal form, to an impulse and to piecewise-linear inputs.
//!
//! Each distinct pole p of multiplicity m is a Jordan chain x₁′ = p x₁ + u, xⱼ′ = p xⱼ + xⱼ₋₁
//! whose output is Σ rⱼ xⱼ (rⱼ the Laurent coefficients). Over a piece where the input is
//! linear, u = u₀ + s·τ, the chain is advanced exactly with divided differences of exp at the
//! nodes {p τ (a times), 0 (b times)} (the φ-functions of exponential integrators, e.g.
//! Hochbruck & Ostermann 2010). No step size enters, so a 1 ns edge in a 1 s window is as exact
//! as anywhere else, and each mode keeps its own relative accuracy however stiff the spread.
//! A conjugate pair is carried as its upper member with weight 2 (output 2·Re).

use crate::network::{Mode, Network};
use num_complex::Complex64;

type C = Complex64;

const ZERO: C = C::new(0.0, 0.0);

/// Largest number of points a uniform response grid may ask for (the response table holds
/// six numbers per point: 480 MB at this size).
pub const MAX_GRID_POINTS: usize = 10_000_000;

/// Below this |z| the divided differences are summed as a power series.
const SERIES_RADIUS: f64 = 2.0;

/// n! as a float.
fn factorial(n: usize) -> f64 {
    (1..=n).fold(1.0, |acc, k| acc * k as f64)
}

/// Product of two polynomials (lowest order first).
fn poly_mul(a: &[C], b: &[C]) -> Vec<C> {
    let mut out = vec![ZERO; a.len() + b.len() - 1];
    for (i, x) in a.iter().enumerate() {
        for (j, y) in b.iter().enumerate() {
            out[i + j] += x * y;
        }
    }
    out
}

/// Reciprocal factorials 1/n! for n < 171.
fn inv_factorial(n: usize) -> f64 {
    (1..=n).fold(1.0, |acc, k| acc / k as f64)
}

/// Divided differences of exp: `t[a][b]` at nodes {z repeated a times, 0 repeated b times},
/// for a in 0..=amax and b in 0..=2 (`t[0][0]` unused).
///
/// |z| ≤ 2: power series Σₙ C(n+a−1, a−1) zⁿ/(n+a+b−1)!. Large |z|: the divided-difference
/// recurrence E(a,b) = (E(a,b−1) − E(a−1,b))/z, which is well-conditioned once |z| exceeds
/// the number of nodes. Between: scaling and squaring of the bidiagonal matrix whose
/// exponential holds these divided differences (Moler & Van Loan 2003, method 3).
pub(crate) fn dd_table(z: C, amax: usize) -> Vec<[C; 3]> {
    let r = z.norm();
    if r <= SERIES_RADIUS {
        series_table(z, amax)
    } else if r >= 2.0 * (amax as f64 + 2.0) {
        recurrence_table(z, amax)
    } else {
        squaring_table(z, amax)
    }
}

#[allow(clippy::needless_range_loop)] // index arithmetic mirrors the series formula
fn series_table(z: C, amax: usize) -> Vec<[C; 3]> {
    let ez = z.exp();
    let mut t = vec![[ZERO; 3]; amax + 1];
    t[0] = [ZERO, C::new(1.0, 0.0), C::new(1.0, 0.0)];
    for (a, row) in t.iter_mut().enumerate().skip(1) {
        row[0] = ez * inv_factorial(a - 1);
        for b in 1..=2 {
            let mut term = C::new(inv_factorial(a + b - 1), 0.0);
            let mut sum = term;
            for n in 0..400 {
                let nf = n as f64;
                term *= z * ((nf + a as f64) / ((nf + 1.0) * (nf + (a + b) as f64)));
                sum += term;
                if term.norm() <= 1e-18 * sum.norm() {
                    break;
                }
            }
            row[b] = sum;
        }
    }
    t
}

/// E(1, 1)(z) = (e^z − 1)/z exactly as `series_table` (|z| ≤ 2) and `recurrence_table`
/// (|z| ≥ 6) compute it for one node, without the table; exp is skipped where it underflows.
fn phi1(z: C) -> C {
    if z.norm() <= SERIES_RADIUS {
        let mut term = C::new(inv_factorial(1), 0.0);
        let mut sum = term;
        for n in 0..400 {
            let nf = n as f64;
            term *= z * ((nf + 1.0) / ((nf + 1.0) * (nf + 2.0)));
            sum += term;
            if term.norm() <= 1e-18 * sum.norm() {
                break;
            }
        }
        return sum;
    }
    let ez = if z.re < UNDERFLOW { ZERO } else { z.exp() };
    (ez * inv_factorial(0) - C::new(1.0, 0.0)) / z
}

fn recurrence_table(z: C, amax: usize) -> Vec<[C; 3]> {
    let ez = z.exp();
    let mut t = vec![[ZERO; 3]; amax + 1];
    t[0] = [ZERO, C::new(1.0, 0.0), C::new(1.0, 0.0)];
    for a in 1..=amax {
        t[a][0] = ez * inv_factorial(a - 1);
        t[a][1] = (t[a][0] - t[a - 1][1]) / z;
        t[a][2] = (t[a][1] - t[a - 1][2]) / z;
    }
    t
}

#[allow(clippy::needless_range_loop)] // triangular matrix products read best with indices
fn squaring_table(z: C, amax: usize) -> Vec<[C; 3]> {
    let k = (z.norm() / SERIES_RADIUS).log2().ceil().max(0.0) as i32;
    let small = z / 2f64.powi(k);
    let base = series_table(small, amax);
    let size = amax + 2;
    // Nodes: index 0 and 1 are 0 (slope, level), 2.. are z.
    let entry = |i: usize, j: usize| -> C {
        let b = if j <= 1 { i.min(1) + 1 - j } else { 0 };
        let a = if i >= 2 { i + 1 - j.max(2) } else { 0 };
        match (a, b) {
            (0, b) => C::new(inv_factorial(b - 1), 0.0),
            (a, b) => base[a][b],
        }
    };
    let mut f = vec![vec![ZERO; size]; size];
    for i in 0..size {
        for j in 0..=i {
            f[i][j] = entry(i, j);
        }
    }
    for _ in 0..k {
        let mut g = vec![vec![ZERO; size]; size];
        for i in 0..size {
            for j in 0..=i {
                let mut acc = ZERO;
                for l in j..=i {
                    acc += f[i][l] * f[l][j];
                }
                g[i][j] = acc * 2f64.powi(j as i32 - i as i32);
            }
        }
        f = g;
    }
    let mut t = vec![[ZERO; 3]; amax + 1];
    t[0] = [ZERO, C::new(1.0, 0.0), C::new(1.0, 0.0)];
    for (a, row) in t.iter_mut().enumerate().skip(1) {
        *row = [f[a + 1][2], f[a + 1][1], f[a + 1][0]];
    }
    t
}

/// One Jordan chain of the modal realization.
#[derive(Debug, Clone)]
struct Block {
    p: C,
    /// Laurent coefficients r₁..r_m.
    r: Vec<C>,
    /// 1 for a real pole, 2 for the upper member of a conjugate pair.
    weight: f64,
}

impl Block {
    fn m(&self) -> usize {
        self.r.len()
    }

    /// Advance the chain state over τ with input u₀ + s·τ (exact).
    fn advance(&self, x: &[C], u0: f64, s: f64, tau: f64) -> Vec<C> {
        let m = self.m();
        if tau == 0.0 {
            return x.to_vec();
        }
        let t = dd_table(self.p * tau, m);
        let mut out = vec![ZERO; m];
        for i in 1..=m {
            let mut acc = ZERO;
            let mut tp = 1.0; // τ^(i−j)
            for j in (1..=i).rev() {
                acc += x[j - 1] * (t[i - j + 1][0] * tp);
                tp *= tau;
            }
            // tp = τ^i now
            acc += t[i][1] * (tp * u0) + t[i][2] * (tp * tau * s);
            out[i - 1] = acc;
        }
        out
    }

    fn output(&self, x: &[C]) -> f64 {
        let y: C = self.r.iter().zip(x).map(|(r, x)| r * x).sum();
        self.weight * y.re
    }

    /// Polynomial coefficients q_k of the free response e^(pτ)·Σ q_k τ^k from state x.
    fn free_poly(&self, x: &[C]) -> Vec<C> {
        let m = self.m();
        (0..m)
            .map(|k| {
                let s: C = (k + 1..=m).map(|i| self.r[i - 1] * x[i - 1 - k]).sum();
                s * inv_factorial(k)
            })
            .collect()
    }
}

/// A network in modal form, ready to respond to inputs.
#[derive(Debug, Clone)]
pub struct Modal {
    blocks: Vec<Block>,
    direct: f64,
}

impl Modal {
    /// The modal realization of a network (direct term included, improper terms left out:
    /// δ′ and higher cannot be driven by a finite pulse and are reported separately).
    pub fn new(net: &Network) -> Modal {
        Modal::from_modes(&net.modes, net.direct)
    }

    /// The realization of a set of modes with a direct term.
    pub fn from_modes(modes: &[Mode], direct: f64) -> Modal {
        let blocks = modes
            .iter()
            .filter(|m| m.pole.im >= 0.0)
            .map(|m| Block {
                p: m.pole,
                r: m.residues.clone(),
                weight: if m.pole.im > 0.0 { 2.0 } else { 1.0 },
            })
            .collect();
        Modal { blocks, direct }
    }

    /// Direct term D.
    pub fn direct(&self) -> f64 {
        self.direct
    }

    /// The ideal impulse response h(t) for t > 0 (the D·δ(t) term excluded).
    pub fn impulse(&self) -> FreeResponse {
        let terms = self
            .blocks
            .iter()
            .map(|b| {
                let mut x = vec![ZERO; b.m()];
                x[0] = C::new(1.0, 0.0);
                Term {
                    p: b.p,
                    q: b.free_poly(&x),
                    weight: b.weight,
                }
            })
            .collect();
        FreeResponse { anchor: 0.0, terms }
    }

    /// Drive the network from rest with a piecewise-linear input given by breakpoints
    /// (t, u), non-decreasing in t; u is zero before the first and after the last breakpoint
    /// (a repeated time is a jump).
    pub fn drive(&self, breakpoints: &[(f64, f64)]) -> Driven<'_> {
        let mut states = Vec::with_capacity(breakpoints.len());
        let mut x: Vec<Vec<C>> = self.blocks.iter().map(|b| vec![ZERO; b.m()]).collect();
        states.push(x.clone());
        for w in breakpoints.windows(2) {
            let ((ta, ua), (tb, ub)) = (w[0], w[1]);
            let h = tb - ta;
            if h > 0.0 {
                let s = (ub - ua) / h;
                x = self
                    .blocks
                    .iter()
                    .zip(&x)
                    .map(|(b, xb)| b.advance(xb, ua, s, h))
                    .collect();
            }
            states.push(x.clone());
        }
        Driven {
            modal: self,
            breakpoints: breakpoints.to_vec(),
            states,
        }
    }
}

/// The exact response to one piecewise-linear input.
#[derive(Debug, Clone)]
pub struct Driven<'a> {
    modal: &'a Modal,
    breakpoints: Vec<(f64, f64)>,
    /// Chain states at each breakpoint (per block).
    states: Vec<Vec<Vec<C>>>,
}

impl Driven<'_> {
    /// Time of the last breakpoint (the input is zero from here on).
    pub fn end(&self) -> f64 {
        self.breakpoints.last().map_or(0.0, |b| b.0)
    }

    /// Output y(t), exact, at any time (D·u(t) included).
    pub fn at(&self, t: f64) -> f64 {
        let bp = &self.breakpoints;
        if bp.is_empty() || t < bp[0].0 {
            return 0.0;
        }
        if t >= self.end() {
            return self.after_end().at(t);
        }
        // Last breakpoint at or before t whose successor lies after t.
        let k = bp.partition_point(|b| b.0 <= t) - 1;
        let ((ta, ua), (tb, ub)) = (bp[k], bp[k + 1]);
        let s = (ub - ua) / (tb - ta);
        let tau = t - ta;
        let u = ua + s * tau;
        let y: f64 = self
            .modal
            .blocks
            .iter()
            .zip(&self.states[k])
            .map(|(b, x)| b.output(&b.advance(x, ua, s, tau)))
            .sum();
        y + self.modal.direct * u
    }

    /// The free response after the input has returned to zero.
    pub fn after_end(&self) -> FreeResponse {
        let last = self
            .states
            .last()
            .expect("drive() always stores the initial state");
        let terms = self
            .modal
            .blocks
            .iter()
            .zip(last)
            .map(|(b, x)| Term {
                p: b.p,
                q: b.free_poly(x),
                weight: b.weight,
            })
            .collect();
        FreeResponse {
            anchor: self.end(),
            terms,
        }
    }

    /// y on the uniform grid t₀ + k·dt, k < n (exact at every point).
    pub fn uniform(&self, t0: f64, dt: f64, n: usize) -> Vec<f64> {
        let end = self.end();
        // Points before the end are evaluated one by one; the rest by the free response.
        let split = if t0 >= end {
            0
        } else {
            (((end - t0) / dt).ceil().max(0.0) as usize).min(n)
        };
        let mut out: Vec<f64> = (0..split).map(|k| self.at(t0 + k as f64 * dt)).collect();
        if split < n {
            out.extend(
                self.after_end()
                    .uniform(t0 + split as f64 * dt, dt, n - split),
            );
        }
        out
    }
}

#[derive(Debug, Clone)]
struct Term {
    p: C,
    q: Vec<C>,
    weight: f64,
}

/// Σ|Gram terms| above this multiple of ∫value² hands the window's RMS to quadrature: beyond
/// it the sum's rounding, ε·Σ|terms|, exceeds 1e-9 of ∫value² (5e-10 of the RMS). Below it
/// the sum is kept (it is exact in form and O(modes²) against the quadrature's
/// O(modes·segments), which a long ladder would pay at every width tried).
pub const GRAM_CANCELLATION: f64 = 1e-9 / f64::EPSILON;

/// Most segments the quadrature of ∫value² may use.
pub const MAX_QUADRATURE_SEGMENTS: usize = 200_000;

/// Nodes and weights of 16-point Gauss–Legendre quadrature on [−1, 1]: the roots of P₁₆ by
/// Newton from Tricomi's estimates cos(π(i − ¼)/(n + ½)), weights 2/((1 − x²)P′₁₆(x)²)
/// (Abramowitz & Stegun 1964, 25.4.29).
fn gauss_legendre_16() -> ([f64; 16], [f64; 16]) {
    const N: usize = 16;
    let mut nodes = [0.0; N];
    let mut weights = [0.0; N];
    for i in 0..N {
        let mut x = (std::f64::consts::PI * (i as f64 + 0.75) / (N as f64 + 0.5)).cos();
        let mut dp = 1.0;
        for _ in 0..100 {
            // P_n(x) and P′_n(x) by the three-term recurrence.
            let (mut p0, mut p1) = (1.0, x);
            for k in 2..=N {
                let k = k as f64;
                (p0, p1) = (p1, ((2.0 * k - 1.0) * x * p1 - (k - 1.0) * p0) / k);
            }
            dp = N as f64 * (x * p1 - p0) / (x * x - 1.0);
            let step = p1 / dp;
            x -= step;
            if step.abs() <= 1e-16 {
                break;
            }
        }
        nodes[i] = x;
        weights[i] = 2.0 / ((1.0 - x * x) * dp * dp);
    }
    (nodes, weights)
}

/// A sum of modes Σ w·Re(e^(p(t−anchor))·Σ q_k (t−anchor)^k), valid for t ≥ anchor.
#[derive(Debug, Clone)]
pub struct FreeResponse {
    anchor: f64,
    terms: Vec<Term>,
}

impl FreeResponse {
    /// Start time of validity.
    pub fn anchor(&self) -> f64 {
        self.anchor
    }

    /// The same response delayed by d: value(t − d).
    pub fn delayed(&self, d: f64) -> FreeResponse {
        FreeResponse {
            anchor: self.anchor + d,
            terms: self.terms.clone(),
        }
    }

    /// The same function written about a later anchor (exact polynomial re-expansion).
    #[allow(clippy::needless_range_loop)] // binomial expansion by index
    pub fn reanchored(&self, new_anchor: f64) -> FreeResponse {
        let delta = new_anchor - self.anchor;
        let terms = self
            .terms
            .iter()
            .map(|t| {
                // Q(τ + δ) = Σ_k q_k (τ + δ)^k, binomially re-expanded in τ.
                let m = t.q.len();
                let mut q = vec![ZERO; m];
                for (k, &qk) in t.q.iter().enumerate() {
                    let mut binom = 1.0;
                    for j in 0..=k {
                        // coefficient of τ^j in (τ + δ)^k is C(k, j)·δ^(k−j)
                        q[j] += qk * binom * delta.powi((k - j) as i32);
                        binom = binom * (k - j) as f64 / (j + 1) as f64;
                    }
                }
                let shift = (t.p * delta).exp();
                Term {
                    p: t.p,
                    q: q.into_iter().map(|c| c * shift).collect(),
                    weight: t.weight,
                }
            })
            .collect();
        FreeResponse {
            anchor: new_anchor,
            terms,
        }
    }

    /// a·self + b·other, for two free responses of the same modal system and anchor, merged
    /// mode by mode so that a small difference of large responses stays accurate.
    pub fn combine(&self, a: f64, other: &FreeResponse, b: f64) -> FreeResponse {
        assert_eq!(self.terms.len(), other.terms.len(), "same modal system");
        assert!(self.anchor == other.anchor, "same anchor");
        let terms = self
            .terms
            .iter()
            .zip(&other.terms)
            .map(|(x, y)| {
                debug_assert!(x.p == y.p);
                Term {
                    p: x.p,
                    q: x.q.iter().zip(&y.q).map(|(u, v)| u * a + v * b).collect(),
                    weight: x.weight,
                }
            })
            .collect();
        FreeResponse {
            anchor: self.anchor,
            terms,
        }
    }

    /// ∫ value² dt from the anchor over a span T, exactly: the Gram sum over pairs of modes with
    /// ∫₀ᵀ τⁿ e^(sτ) dτ = Tⁿ⁺¹·n!·E(n+1, 1)(sT) (divided differences of exp, as in `dd_table`).
    pub fn integral_square(&self, span: f64) -> f64 {
        // ∫₀ᵀ e^(sτ) dτ = T·E(1, 1)(sT) for a pair of simple modes, evaluated as `dd_table` does
        // (power series for |z| ≤ 2, (e^z − 1)/z from 6 on) without building the table.
        let simple = |s: C, c: C| -> C {
            let z = s * span;
            let r = z.norm();
            let e11 = if r <= SERIES_RADIUS || r >= 6.0 {
                phi1(z)
            } else {
                dd_table(z, 1)[1][1]
            };
            c * e11 * (span * factorial(0))
        };
        let integral = |s: C, poly: &[C]| -> C {
            let t = dd_table(s * span, poly.len());
            let mut acc = ZERO;
            let mut tp = span; // T^(n+1)
            for (n, &c) in poly.iter().enumerate() {
                acc += c * t[n + 1][1] * (tp * factorial(n));
                tp *= span;
            }
            acc
        };
        let mut total = 0.0;
        let mut size = 0.0;
        for (i, a) in self.terms.iter().enumerate() {
            for b in &self.terms[i..] {
                let factor = if std::ptr::eq(a, b) { 1.0 } else { 2.0 };
                let v = if a.q.len() == 1 && b.q.len() == 1 {
                    simple(a.p + b.p, a.q[0] * b.q[0])
                        + simple(a.p + b.p.conj(), a.q[0] * b.q[0].conj())
                } else {
                    let prod = poly_mul(&a.q, &b.q);
                    let conj_b: Vec<C> = b.q.iter().map(|c| c.conj()).collect();
                    let prod_c = poly_mul(&a.q, &conj_b);
                    integral(a.p + b.p, &prod) + integral(a.p + b.p.conj(), &prod_c)
                };
                total += factor * a.weight * b.weight * 0.5 * v.re;
                size += (factor * a.weight * b.weight * 0.5 * v.re).abs();
            }
        }
        // The Gram sum's rounding is ε·Σ|terms|: where close modes with large, opposite
        // coefficients make it cancel (Σ|terms| ≫ ∫value², the amplification squared), the
        // integral of the value itself — whose rounding is only linear in it — is taken instead.
        if size > GRAM_CANCELLATION * total
            && let Some(q) = self
                .integral_square_by_quadrature(span, (size / total.max(f64::EPSILON * size)).sqrt())
        {
            return q;
        }
        total.max(0.0)
    }

    /// ∫₀ᵀ value² dτ by 16-point Gauss–Legendre quadrature (Golub & Welsch 1969 nodes, found
    /// here by Newton on P₁₆) on segments geometric from the fastest time scale and none wider
    /// than 2/|p| of the fastest mode still alive at the segment's start (where the
    /// integrand's Taylor terms fall below ε). A mode is alive while e^(Re p·t), times the
    /// coefficients' amplification over the value (√(Σ|Gram terms|/∫value²)), is above
    /// e^(−40). `None` beyond [`MAX_QUADRATURE_SEGMENTS`] segments (the Gram sum is kept).
    fn integral_square_by_quadrature(&self, span: f64, amplification: f64) -> Option<f64> {
        let fastest = self.terms.iter().map(|t| t.p.norm()).fold(0.0, f64::max);
        if !(fastest > 0.0 && span > 0.0) {
            return None;
        }
        let cut = 40.0 + amplification.max(1.0).ln();
        let width_at = |t: f64| {
            let alive = self
                .terms
                .iter()
                .filter(|m| m.p.re * t > -cut - 10.0 * (m.q.len() - 1) as f64)
                .map(|m| m.p.norm())
                .fold(0.0, f64::max);
            if alive > 0.0 { 2.0 / alive } else { span }
        };
        let mut edges = vec![0.0];
        let mut t = (2.0 / fastest * 1e-6).min(span);
        while t < span {
            edges.push(t);
            if edges.len() > MAX_QUADRATURE_SEGMENTS {
                return None;
            }
            t = (t * 1.5).min(t + width_at(t));
        }
        edges.push(span);
        let (nodes, weights) = gauss_legendre_16();
        let mut total = 0.0;
        for w in edges.windows(2) {
            let (a, b) = (w[0], w[1]);
            let (mid, half) = ((a + b) / 2.0, (b - a) / 2.0);
            let seg: f64 = nodes
                .iter()
                .zip(&weights)
                .map(|(x, wt)| wt * self.at(self.anchor + mid + half * x).powi(2))
                .sum();
            total += seg * half;
        }
        Some(total.max(0.0))
    }

    /// Σ_{k≥1} value(t + kT): what the earlier pulses of a train with period T still leave at
    /// t. Per mode a geometric series, e^(pT)/(1 − e^(pT)) for a simple mode; for repeated
    /// modes the sums Σ e^(pkT)(kT)ⁿ converge geometrically and are summed to rounding.
    /// `None` when a mode does not decay (the train's response grows without bound).
    pub fn periodic_tail(&self, period: f64) -> Option<FreeResponse> {
        let mut terms = Vec::with_capacity(self.terms.len());
        for t in &self.terms {
            let rho = (t.p * period).exp();
            if rho.norm() >= 1.0 {
                return None;
            }
            let m = t.q.len();
            // s[n] = Σ_{k≥1} ρ^k (kT)^n
            let mut s = vec![ZERO; m];
            s[0] = rho / (C::new(1.0, 0.0) - rho);
            if m > 1 {
                let mut rk = rho;
                for k in 1..2_000_000u32 {
                    let kt = k as f64 * period;
                    let mut pw = kt;
                    let mut biggest = 0.0f64;
                    for sn in s.iter_mut().skip(1) {
                        let add = rk * pw;
                        *sn += add;
                        biggest = biggest.max(add.norm() / sn.norm().max(f64::MIN_POSITIVE));
                        pw *= kt;
                    }
                    if biggest < 1e-18 {
                        break;
                    }
                    rk *= rho;
                }
            }
            // Σ_k ρ^k Q(τ + kT) re-expanded in τ: coefficient i = Σ_{j≥i} q_j C(j, i) s[j − i].
            let q = (0..m)
                .map(|i| {
                    let mut acc = ZERO;
                    let mut binom = 1.0;
                    for j in i..m {
                        acc += t.q[j] * s[j - i] * binom;
                        binom = binom * (j + 1) as f64 / (j + 1 - i) as f64;
                    }
                    acc
                })
                .collect();
            terms.push(Term {
                p: t.p,
                q,
                weight: t.weight,
            });
        }
        Some(FreeResponse {
            anchor: self.anchor,
            terms,
        })
    }

    /// Σ_k |q_k| of each mode term (weighted), the size each mode brings to the sum.
    pub fn magnitudes(&self) -> impl Iterator<Item = f64> + '_ {
        self.terms
            .iter()
            .map(|t| t.weight * t.q.iter().map(|q| q.norm()).sum::<f64>())
    }

    /// |p| of each mode term.
    pub fn frequencies(&self) -> impl Iterator<Item = f64> + '_ {
        self.terms.iter().map(|t| t.p.norm())
    }

    /// Value at t (t ≥ anchor; earlier times are extrapolated by the same formula).
    pub fn at(&self, t: f64) -> f64 {
        let tau = t - self.anchor;
        self.terms
            .iter()
            .map(|term| {
                // Past e^(−746) the exponential is exactly 0 in f64: skip the sincos.
                if term.p.re * tau < UNDERFLOW {
                    return 0.0;
                }
                let poly = term.q.iter().rev().fold(ZERO, |acc, &q| acc * tau + q);
                term.weight * ((term.p * tau).exp() * poly).re
            })
            .sum()
    }

    /// The n-th time derivative, as another free response.
    pub fn derivative(&self, n: usize) -> FreeResponse {
        let mut terms = self.terms.clone();
        for _ in 0..n {
            for term in terms.iter_mut() {
                let m = term.q.len();
                term.q = (0..m)
                    .map(|k| {
                        let next = if k + 1 < m {
                            term.q[k + 1] * (k + 1) as f64
                        } else {
                            ZERO
                        };
                        term.p * term.q[k] + next
                    })
                    .collect();
            }
        }
        FreeResponse {
            anchor: self.anchor,
            terms,
        }
    }

    /// Upper bound of |value| at t: Σ w·|e^(pτ)|·Σ|q_k|τ^k (decreasing once every mode decays
    /// and the polynomial factors have peaked).
    pub fn envelope(&self, t: f64) -> f64 {
        let tau = t - self.anchor;
        self.terms
            .iter()
            .map(|term| {
                let poly: f64 = term.q.iter().rev().fold(0.0, |acc, q| acc * tau + q.norm());
                term.weight * (term.p.re * tau).exp() * poly
            })
            .sum()
    }

    /// The same response with only the terms whose flag is set (a mode whose envelope has
    /// fallen below what matters can be left out of a scan).
    pub fn with_terms(&self, keep: &[bool]) -> FreeResponse {
        FreeResponse {
            anchor: self.anchor,
            terms: self
                .terms
                .iter()
                .zip(keep)
                .filter(|(_, k)| **k)
                .map(|(t, _)| t.clone())
                .collect(),
        }
    }

    /// For each mode term, its natural frequency |p| and the time after the anchor beyond
    /// which its envelope w·e^(Re p·τ)·Σ|q_k|τ^k stays below `floor` (0 for a term that never
    /// reaches it; infinite for one that does not decay). Past τ₀ = (degree)/|Re p| every
    /// factor τ^k·e^(Re p·τ) decreases, so the crossing found there is final; before τ₀ the
    /// term is counted alive (a conservative answer).
    pub fn lifetimes(&self, floor: f64) -> Vec<(f64, f64)> {
        self.terms
            .iter()
            .map(|term| {
                let sigma = term.p.re;
                let env = |tau: f64| {
                    let poly: f64 = term.q.iter().rev().fold(0.0, |acc, q| acc * tau + q.norm());
                    term.weight * (sigma * tau).exp() * poly
                };
                let life = if sigma >= 0.0 {
                    f64::INFINITY
                } else {
                    let tau0 = (term.q.len() - 1) as f64 / -sigma;
                    if env(tau0) <= floor {
                        tau0
                    } else {
                        let (mut lo, mut hi) = (tau0, tau0 + 1.0 / -sigma);
                        for _ in 0..64 {
                            if env(hi) <= floor {
                                break;
                            }
                            lo = hi;
                            hi += hi - tau0;
                        }
                        for _ in 0..60 {
                            let mid = 0.5 * (lo + hi);
                            if env(mid) > floor { lo = mid } else { hi = mid }
                        }
                        hi
                    }
                };
                (term.p.norm(), life)
            })
            .collect()
    }

    /// Values on the uniform grid t₀ + k·dt (t₀ ≥ anchor), by running exponentials: per point
    /// and mode one complex multiply, in four independent lanes so the multiplies overlap, on
    /// chunks that stay in cache; the exponential is re-anchored exactly every
    /// `REANCHOR_CHUNKS` chunks so rounding cannot accumulate.
    pub fn uniform(&self, t0: f64, dt: f64, n: usize) -> Vec<f64> {
        let mut out = vec![0.0; n];
        let tau0 = t0 - self.anchor;
        let (simple, general): (Vec<&Term>, Vec<&Term>) =
            self.terms.iter().partition(|t| t.q.len() == 1);
        let lanes: Vec<Lanes> = simple.iter().map(|t| Lanes::new(t, dt)).collect();
        let mut bases: Vec<C> = vec![ZERO; lanes.len()];
        for (c, chunk) in out.chunks_mut(CHUNK).enumerate() {
            let k0 = c * CHUNK;
            let tau_k0 = tau0 + k0 as f64 * dt;
            for (l, base) in lanes.iter().zip(bases.iter_mut()) {
                // A decaying mode whose running value fell below 1e-300 adds nothing that
                // could show in a sum of f64 values of sensible size: it stays off from here.
                if l.p.re < 0.0 && c > 0 && base.re.abs().max(base.im.abs()) < TINY {
                    *base = ZERO;
                    continue;
                }
                *base = if c % REANCHOR_CHUNKS == 0 {
                    l.q * (l.p * tau_k0).exp()
                } else {
                    *base * l.chunk_step
                };
                l.accumulate(*base, chunk);
            }
            for term in &general {
                for (i, o) in chunk.iter_mut().enumerate() {
                    let tau = tau_k0 + i as f64 * dt;
                    let poly = term.q.iter().rev().fold(ZERO, |acc, &q| acc * tau + q);
                    *o += term.weight * ((term.p * tau).exp() * poly).re;
                }
            }
        }
        out
    }
}

/// Exponents below this give exp(x) = 0 exactly in f64.
const UNDERFLOW: f64 = -746.0;
/// Running values below this are dropped (they cannot show beside any value above 1e-284).
const TINY: f64 = 1e-300;

/// Points per chunk on uniform grids.
const CHUNK: usize = 64;
/// Chunks between exact re-anchoring of a running exponential.
const REANCHOR_CHUNKS: usize = 16;

/// A simple mode's running exponential split into four interleaved lanes.
struct Lanes {
    p: C,
    /// q₀ times the weight.
    q: C,
    /// e^(p·dt)^j for j = 0..3.
    offsets: [C; 4],
    /// e^(4p·dt).
    step4: C,
    /// e^(p·CHUNK·dt).
    chunk_step: C,
    real: bool,
}

impl Lanes {
    fn new(t: &Term, dt: f64) -> Lanes {
        Lanes {
            p: t.p,
            q: t.q[0] * t.weight,
            offsets: [0.0, 1.0, 2.0, 3.0].map(|j| (t.p * (j * dt)).exp()),
            step4: (t.p * (4.0 * dt)).exp(),
            chunk_step: (t.p * (CHUNK as f64 * dt)).exp(),
            real: t.p.im == 0.0 && t.q[0].im == 0.0,
        }
    }

    /// Add Re(base·e^(p·i·dt)) to chunk[i].
    fn accumulate(&self, base: C, chunk: &mut [f64]) {
        if self.real {
            let s4 = self.step4.re;
            let mut r = self.offsets.map(|o| (base * o).re);
            for quad in chunk.chunks_mut(4) {
                for (o, rj) in quad.iter_mut().zip(r.iter_mut()) {
                    *o += *rj;
                    *rj *= s4;
                }
            }
        } else {
            let mut r = self.offsets.map(|o| base * o);
            for quad in chunk.chunks_mut(4) {
                for (o, rj) in quad.iter_mut().zip(r.iter_mut()) {
                    *o += rj.re;
                    *rj *= self.step4;
                }
            }
        }
    }
}

#[cfg(test)]
mod tests {
    use super::*;
    use crate::network::NetworkSpec;

    fn single_pole(a: f64) -> Network {
        Network::from_spec(&NetworkSpec::Polynomial {
            numerator: vec![a],
            denominator: vec![1.0, a],
        })
        .unwrap()
    }

    #[test]
    fn phi_functions_match_closed_forms() {
        // φ₁(z) = (e^z − 1)/z, φ₂(z) = (e^z − 1 − z)/z² (closed forms; evaluated where the
        // closed forms themselves are accurate, |z| ≥ 0.5).
        for &z in &[
            C::new(-0.5, 0.0),
            C::new(-3.0, 0.0),
            C::new(-7.0, 2.0),
            C::new(-40.0, 0.0),
            C::new(-0.2, 9.0),
            C::new(1.5, 0.0),
            C::new(-1e4, 3e3),
        ] {
            let t = dd_table(z, 3);
            let phi1 = (z.exp() - 1.0) / z;
            let phi2 = (z.exp() - 1.0 - z) / (z * z);
            assert!((t[1][1] - phi1).norm() <= 1e-14 * phi1.norm(), "φ1 {z}");
            assert!((t[1][2] - phi2).norm() <= 1e-13 * phi2.norm(), "φ2 {z}");
        }
    }

    #[test]
    fn regimes_agree_at_their_borders() {
        // The three evaluation regimes must agree where they meet (internal consistency).
        for amax in [1usize, 3, 6] {
            for &r in &[SERIES_RADIUS * 1.0001, 2.0 * (amax as f64 + 2.0) * 1.0001] {
                for ang in [0.3f64, 1.7, 3.0] {
                    let z = C::from_polar(r, ang);
                    let a = squaring_table(z, amax);
                    let b = if r > 5.0 {
                        recurrence_table(z, amax)
                    } else {
                        series_table(z, amax)
                    };
                    for k in 1..=amax {
                        for j in 0..3 {
                            let d = (a[k][j] - b[k][j]).norm();
                            assert!(d <= 1e-12 * b[k][j].norm(), "{z} a={k} b={j}");
                        }
                    }
                }
            }
        }
    }

    #[test]
    fn rectangle_into_single_pole() {
        // Unit-area rectangle of width w into a/(s+a): y(w) = (1 − e^(−aw))/w, so the reading
        // is h(0⁺)·(1 − e^(−x))/x with x = a·w (handbook closed form).
        let a = 1e3;
        let net = single_pole(a);
        let modal = Modal::new(&net);
        for &x in &[1e-9, 1e-4, 0.01, 1.0, 30.0] {
            let w = x / a;
            let bp = [(0.0, 0.0), (0.0, 1.0 / w), (w, 1.0 / w), (w, 0.0)];
            let y = modal.drive(&bp).at(w);
            let want = a * (-(-x).exp_m1()) / x;
            assert!(((y - want) / want).abs() < 1e-14, "x={x}: {y} vs {want}");
        }
    }

    #[test]
    fn stiff_edge_in_long_window() {
        // Response of a/(s+a) to the ramp u = t/tr: y = (at − (1 − e^(−at)))/(a·tr) (closed
        // form, x − (1 − e^(−x)) summed as its Taylor series for small x); after the input drops
        // to zero at tr the output decays as y(tr)·e^(−a(t−tr)). A 5 ns ramp on poles 1 and
        // 1e6 rad/s, read inside the edge and at 1 s, must keep full relative accuracy.
        fn x_minus_one_minus_exp(x: f64) -> f64 {
            if x < 0.1 {
                let (mut term, mut sum) = (x * x / 2.0, 0.0);
                for n in 3..30 {
                    sum += term;
                    term *= -x / n as f64;
                }
                sum
            } else {
                x + (-x).exp_m1()
            }
        }
        for a in [1.0, 1e6] {
            let modal = Modal::new(&single_pole(a));
            let tr = 5e-9;
            let d = modal.drive(&[(0.0, 0.0), (tr, 1.0)]);
            let y = |t: f64| x_minus_one_minus_exp(a * t) / (a * tr);
            let t = tr / 2.0;
            assert!(
                ((d.at(t) - y(t)) / y(t)).abs() < 1e-13,
                "inside edge, a={a}: {} {}",
                d.at(t),
                y(t)
            );
            let t2 = if a > 1.0 { 20e-6 } else { 1.0 };
            let want = y(tr) * (-a * (t2 - tr)).exp();
            assert!(
                ((d.at(t2) - want) / want).abs() < 1e-12,
                "a={a}: {} {want}",
                d.at(t2)
            );
        }
    }

    #[test]
    fn integral_square_of_decaying_modes() {
        // ∫₀^∞ (a e^(−at))² dt = a/2, and for ω0²/(s² + 2ζω0 s + ω0²) the impulse response's energy
        // is ω0/(4ζ) (closed forms; a long span stands in for ∞).
        let a = 30.0;
        let h = Modal::new(&single_pole(a)).impulse();
        assert!((h.integral_square(100.0) - a / 2.0).abs() < 1e-12 * a);
        let (w0, z) = (500.0, 0.2);
        let net = Network::from_spec(&NetworkSpec::Polynomial {
            numerator: vec![w0 * w0],
            denominator: vec![1.0, 2.0 * z * w0, w0 * w0],
        })
        .unwrap();
        let h = Modal::new(&net).impulse();
        let want = w0 / (4.0 * z);
        assert!((h.integral_square(10.0) - want).abs() < 1e-10 * want);
        // Re-anchoring preserves values.
        let r = h.reanchored(1e-3);
        assert!((r.at(2e-3) - h.at(2e-3)).abs() < 1e-12 * want);
    }

    #[test]
    fn integral_square_of_a_close_pair_keeps_its_digits() {
        // Poles −a and −a(1 + 1e-9): h = K(e^(−p₁t) − e^(−p₂t))/(p₂ − p₁) = K·t·e^(−at)·(1 + O(1e-9)),
        // so ∫₀^∞ h² = K²/(4a³) to ~1e-9 (closed form of ∫t²e^(−2at)). The Gram sum alone
        // cancels by (1e9)² and keeps no digit; the quadrature keeps about nine.
        let (a, k) = (1e3, 1e6);
        let c = Complex64::new;
        let net = Network::from_spec(&NetworkSpec::ZeroPoleGain {
            zeros: vec![],
            poles: vec![c(-a, 0.0), c(-a * (1.0 + 1e-9), 0.0)],
            gain: k,
        })
        .unwrap();
        let h = Modal::new(&net).impulse();
        let want = k * k / (4.0 * a * a * a);
        let got = h.integral_square(60.0 / a);
        assert!((got - want).abs() < 1e-7 * want, "{got} vs {want}");
        let (x, w) = gauss_legendre_16();
        // Σw = 2 and Σw·x² = 2/3 on [−1, 1] (exact for the rule's degree).
        assert!((w.iter().sum::<f64>() - 2.0).abs() < 1e-14);
        let m2: f64 = x.iter().zip(&w).map(|(x, w)| w * x * x).sum();
        assert!((m2 - 2.0 / 3.0).abs() < 1e-14);
    }

    #[test]
    fn periodic_tail_is_the_sum_over_earlier_pulses() {
        // Geometric series: Σ_{k≥1} f(t + kT) for f = a e^(−at) is f(t)·e^(−aT)/(1 − e^(−aT)); for
        // a double pole the sum is checked against direct summation of the shifted responses.
        let a = 100.0;
        let h = Modal::new(&single_pole(a)).impulse();
        let period = 0.02;
        let tail = h.periodic_tail(period).unwrap();
        let r = (-a * period).exp();
        let want = h.at(0.003) * r / (1.0 - r);
        assert!((tail.at(0.003) - want).abs() < 1e-13 * want);
        let net = Network::from_spec(&NetworkSpec::Polynomial {
            numerator: vec![1.0],
            denominator: vec![1.0, 2.0 * a, a * a],
        })
        .unwrap();
        let h2 = Modal::new(&net).impulse();
        let tail2 = h2.periodic_tail(period).unwrap();
        let direct: f64 = (1..200).map(|k| h2.at(0.004 + k as f64 * period)).sum();
        assert!((tail2.at(0.004) - direct).abs() < 1e-12 * direct.abs());
        // A mode that does not decay has no finite tail.
        let integ = Network::from_spec(&NetworkSpec::ZeroPoleGain {
            zeros: vec![],
            poles: vec![C::new(0.0, 0.0), C::new(-5.0, 0.0)],
            gain: 1.0,
        })
        .unwrap();
        assert!(Modal::new(&integ).impulse().periodic_tail(1.0).is_none());
    }

    #[test]
    fn uniform_grid_matches_direct() {
        let net = Network::from_spec(&NetworkSpec::Polynomial {
            numerator: vec![1.0, 0.0],
            denominator: vec![1.0, 0.2, 100.0],
        })
        .unwrap();
        let modal = Modal::new(&net);
        let bp = [(0.0, 0.0), (1e-3, 10.0), (2e-3, 10.0), (3e-3, 0.0)];
        let d = modal.drive(&bp);
        let v = d.uniform(0.0, 1e-3 / 7.0, 2000);
        for (k, y) in v.iter().enumerate().step_by(37) {
            let direct = d.at(k as f64 * 1e-3 / 7.0);
            assert!((y - direct).abs() <= 1e-12 * direct.abs().max(1e-3));
        }
    }
}
