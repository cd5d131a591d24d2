//! A-priori error bounds of the modal form: how far each pole and residue, and the figures
//! summed from them, can be from the exact network function of the data.
//!
//! Three sources, each bounded to first order:
//! - rounding in each mode's terms (residue and response evaluation): relative γ-level per
//!   term, so the figures' absolute error is that level times Σ|terms| — large where big
//!   residues of a close cluster cancel (Σ|rᵢ| ≫ |h|);
//! - the poles' own errors δpᵢ (polynomial form): the residues are computed from the
//!   computed poles, so they are those of N/D̃ with D̃ = lead·Π(s − p̃ᵢ); then
//!   H̃ − H ≈ H·Σ mᵢ·δpᵢ/(s − pᵢ), whose impulse response is Σ mᵢ·δpᵢ·(h ∗ e^{pᵢt}), bounded by
//!   Σ mᵢ·|δpᵢ|·T·max|h| on [0, T] for decaying modes (no 1/separation amplification);
//! - merging a cluster of m roots (spread ρ about its centre) into one pole of multiplicity m:
//!   Π(s − qⱼ) = (s − c)^m·(1 + σ₂/(s − c)² + …) with |σ₂| ≤ C(m,2)·ρ², so the change of h is
//!   bounded by C(m,2)·ρ²·T²/2·max|h|.
//!
//! The residues themselves are amplified: δrᵢ/rᵢ ≈ δpᵢ·N′/N + Σⱼ mⱼ(δpᵢ − δpⱼ)/(pᵢ − pⱼ).

use num_complex::Complex64;

/// A distinct pole and its multiplicity, as the bounds see a mode.
pub type PoleGroup = (Complex64, usize);

/// How well one mode is known (bounds; zero where the data give it exactly or it was not
/// assessed, as for circuits).
#[derive(Debug, Clone, Copy, PartialEq, Default)]
pub struct ModeAccuracy {
    /// Bound on the pole's error, rad/s (for a merged cluster: its centre against the mean of
    /// the exact roots it stands for).
    pub pole: f64,
    /// Radius, rad/s, about the pole that holds the exact roots a merged cluster stands for.
    pub radius: f64,
    /// Bound on each residue's error relative to that residue.
    pub residue: f64,
    /// Relative rounding level of this mode's residues (numerator conditioning included).
    pub rounding: f64,
}

/// The bounds behind a network's accuracy warning.
#[derive(Debug, Clone, Copy, PartialEq, Default)]
pub struct FigureBound {
    /// Bound on h(0⁺), h(t) and the error figures over [0, T], relative to the normaliser.
    pub figures: f64,
    /// Worst bound on a residue, relative to that residue.
    pub residues: f64,
}

/// Rounding level of one residue computed from a numerator's Taylor value `n0` (its
/// evaluation error `n_err`) and `ops` further series operations (Higham 2002, γ-bounds).
pub fn residue_rounding(n0: f64, n_err: f64, ops: usize) -> f64 {
    let cond = if n0 > 0.0 { n_err / n0 } else { 0.0 };
    cond + super::horner::gamma(2 * ops + 4)
}

/// Relative residue bounds from the pole bounds (first order; see the module comment):
/// δr/r ≤ rounding + |δp|·|N′/N| + Σⱼ (mⱼ(|δp|+|δpⱼ|) + C(mⱼ,2)ρⱼ²/dⱼ)/dⱼ, dⱼ = |p − pⱼ|,
/// plus, for a merged cluster, C(m,2)·(ρ/d)² with d its distance to the nearest other pole or
/// zero (the Laurent coefficients against the exact moments). `log_deriv` is |N′/N| per mode.
pub fn residue_bounds(
    modes: &[PoleGroup],
    acc: &mut [ModeAccuracy],
    zeros: &[Complex64],
    log_deriv: &[f64],
) {
    let snapshot: Vec<ModeAccuracy> = acc.to_vec();
    for (i, &(pole, mult)) in modes.iter().enumerate() {
        let a = snapshot[i];
        let mut rel = a.rounding + a.pole * log_deriv.get(i).copied().unwrap_or(0.0);
        let mut near = f64::INFINITY;
        for (j, &(other, mj)) in modes.iter().enumerate().filter(|&(j, _)| j != i) {
            let d = (pole - other).norm();
            let b = snapshot[j];
            rel += (mj as f64 * (a.pole + b.pole) + pairs(mj) * b.radius * b.radius / d) / d;
            near = near.min(d);
        }
        for z in zeros {
            near = near.min((pole - z).norm());
        }
        if a.radius > 0.0 && near.is_finite() {
            rel += pairs(mult) * (a.radius / near).powi(2);
        }
        acc[i].residue = rel;
    }
}

fn pairs(m: usize) -> f64 {
    (m * m.saturating_sub(1)) as f64 / 2.0
}

/// max over 0 ≤ t ≤ T of t^(k−1)/(k−1)!·e^(a t) (k ≥ 1): the largest size of a Laurent term.
fn term_peak(k: usize, a: f64, span: f64) -> f64 {
    let j = (k - 1) as i32;
    let fact: f64 = (1..k).map(|i| i as f64).product();
    let t = if a < 0.0 {
        (j as f64 / -a).min(span)
    } else {
        span
    };
    t.powi(j) / fact * (a * t).exp()
}

/// One mode's share of the figures' absolute error bound over [0, `span`] (units of h): the
/// rounding of its terms, its pole's error propagated through h ∗ e^{pt}, and the merging of
/// its cluster (see the module comment). `order` is the network's order, `peak` max|h|.
pub fn mode_figure_error(
    pole: Complex64,
    residues: &[Complex64],
    a: ModeAccuracy,
    order: usize,
    span: f64,
    peak: f64,
) -> f64 {
    let growth = (pole.re.max(0.0) * span).exp();
    let size: f64 = residues
        .iter()
        .enumerate()
        .map(|(k, r)| r.norm() * term_peak(k + 1, pole.re, span))
        .sum();
    // Rounding of this mode's terms: residue evaluation plus the response's own arithmetic
    // (exp, divided differences, the sum over modes), γ_{2n+8}; measured errors stay below
    // 2·u·Σ|terms| (tests/reference/check_near_repeated.py), this bound is ≥ 28·u·Σ|terms|.
    let round = a.rounding.max(0.0) + super::horner::gamma(2 * order + 8);
    let m = residues.len();
    round * size
        + m as f64 * a.pole * span * peak * growth
        + pairs(m) * a.radius * a.radius * span * span / 2.0 * peak * growth
}

/// Accuracy of the modes of N/D given as polynomials: each pole's bound from the exact
/// coefficients ([`super::poly::root_accuracy`]; a pole whose multiplicity the coefficients do
/// not resolve is counted as known only to its own size), the numerator's conditioning at it,
/// then the residues' bounds.
pub fn of_polynomials(
    num: &[f64],
    den: &[f64],
    modes: &[PoleGroup],
    zeros: &[Complex64],
) -> Vec<ModeAccuracy> {
    let order: usize = modes.iter().map(|g| g.1).sum();
    let nn = num.len().saturating_sub(1);
    let mut log_deriv = Vec::with_capacity(modes.len());
    let mut acc: Vec<ModeAccuracy> = modes
        .iter()
        .map(|&(p, mult)| {
            let root =
                super::poly::root_accuracy(den, p, mult).unwrap_or(super::poly::RootAccuracy {
                    error: p.norm(),
                    radius: p.norm(),
                });
            let t = super::poly::taylor_at(num, p, 2);
            let n0 = t[0].norm();
            let n_err = super::horner::gamma(4 * nn + 4) * super::horner::magnitude(num, p.norm());
            log_deriv.push(if n0 > 0.0 { t[1].norm() / n0 } else { 0.0 });
            ModeAccuracy {
                pole: root.error,
                radius: if mult >= 2 { root.radius } else { 0.0 },
                residue: 0.0,
                rounding: residue_rounding(n0, n_err, nn + order * mult),
            }
        })
        .collect();
    residue_bounds(modes, &mut acc, zeros, &log_deriv);
    acc
}

/// Accuracy of the modes of gain·Π(s − zᵢ)/Π(s − pᵢ): the poles are exact data; a pole given
/// several times within rounding is one merged mode whose radius is the given spread.
pub fn of_zpk(zeros: &[Complex64], poles: &[Complex64], modes: &[PoleGroup]) -> Vec<ModeAccuracy> {
    let order: usize = modes.iter().map(|g| g.1).sum();
    let mut log_deriv = Vec::with_capacity(modes.len());
    let mut acc: Vec<ModeAccuracy> = modes
        .iter()
        .map(|&(p, mult)| {
            let radius = if mult >= 2 {
                poles
                    .iter()
                    .map(|q| (q - p).norm())
                    .filter(|&d| d <= 1e-9 * p.norm())
                    .fold(0.0, f64::max)
            } else {
                0.0
            };
            log_deriv.push(zeros.iter().map(|z| 1.0 / (p - z).norm()).sum::<f64>());
            ModeAccuracy {
                pole: 0.0,
                radius,
                residue: 0.0,
                rounding: residue_rounding(1.0, 0.0, zeros.len() + order * mult),
            }
        })
        .collect();
    residue_bounds(modes, &mut acc, zeros, &log_deriv);
    acc
}
