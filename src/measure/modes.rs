//! From the fit to h(t): each mode's pole, time constant, damping, amplitude and residue
//! rₖ = cₖ/P(pₖ), h(0⁺), with uncertainties by the delta method (first-order propagation of
//! the fit's covariance through numerically differentiated functions; e.g. Bevington &
//! Robinson 2003, §3.2), and h(t) with its 95 % band.

use super::deconvolve::AppliedPulse;
use super::stats;
use super::varpro::{Fit, PoleKind};
use nalgebra::{DMatrix, DVector};
use num_complex::Complex64 as C;
use serde::Serialize;

/// A value with its standard uncertainty and 95 % interval (absent when not computable).
#[derive(Debug, Clone, Copy, PartialEq, Serialize)]
pub struct Estimate {
    /// Best value.
    pub value: f64,
    /// Standard uncertainty (1σ).
    pub std: Option<f64>,
    /// Lower end of the 95 % interval.
    pub low: Option<f64>,
    /// Upper end of the 95 % interval.
    pub high: Option<f64>,
}

impl Estimate {
    /// From a value and a variance (non-finite or negative variances give no interval).
    pub fn new(value: f64, variance: f64) -> Estimate {
        let std = (variance.is_finite() && variance >= 0.0).then(|| variance.sqrt());
        let z = stats::z95();
        Estimate {
            value,
            std,
            low: std.map(|s| value - z * s),
            high: std.map(|s| value + z * s),
        }
    }

    /// Whether the 95 % interval contains x.
    pub fn covers(&self, x: f64) -> Option<bool> {
        Some(self.low? <= x && x <= self.high?)
    }
}

/// The modes as plain numbers, from a parameter vector β = (θ, c).
#[derive(Debug, Clone, PartialEq)]
pub struct ModeSet {
    /// Pole kinds.
    pub kinds: Vec<PoleKind>,
    /// Poles (upper members).
    pub poles: Vec<C>,
    /// Point amplitudes at the pulse end: the mode is Re(ĉ e^(p(t−T))).
    pub amplitudes: Vec<C>,
    /// Residues of h (upper members; a pair contributes 2·Re(r e^(pt))).
    pub residues: Vec<C>,
    /// Baseline offset.
    pub offset: f64,
    /// Baseline drift per drift-scale unit of time.
    pub drift: f64,
}

/// Weight of a mode in h: 2 for the upper member of a pair, 1 for a real pole.
pub fn weight(kind: PoleKind) -> f64 {
    match kind {
        PoleKind::Real => 1.0,
        PoleKind::Pair => 2.0,
    }
}

/// The mode set at parameters β.
pub fn mode_set(kinds: &[PoleKind], beta: &[f64], pulse: &AppliedPulse, drift: bool) -> ModeSet {
    let nt: usize = kinds.iter().map(|k| k.width()).sum();
    let (theta, c) = beta.split_at(nt);
    let poles = super::varpro::poles_of(kinds, theta);
    let mut col = 0;
    let amplitudes: Vec<C> = kinds
        .iter()
        .map(|k| {
            let a = match k {
                PoleKind::Real => C::new(c[col], 0.0),
                PoleKind::Pair => C::new(c[col], -c[col + 1]),
            };
            col += k.width();
            a
        })
        .collect();
    let residues = kinds
        .iter()
        .zip(&poles)
        .zip(&amplitudes)
        .map(|((k, p), a)| a / (weight(*k) * pulse.transform(*p)))
        .collect();
    ModeSet {
        kinds: kinds.to_vec(),
        poles,
        amplitudes,
        residues,
        offset: c[col],
        drift: if drift { c[col + 1] } else { 0.0 },
    }
}

impl ModeSet {
    /// h(t) for t > 0 (the direct term's δ excluded).
    pub fn h(&self, t: f64) -> f64 {
        self.kinds
            .iter()
            .zip(&self.poles)
            .zip(&self.residues)
            .map(|((k, p), r)| weight(*k) * (r * (p * t).exp()).re)
            .sum()
    }

    /// h(0⁺) = Σ rₖ (pairs counted with their conjugates).
    pub fn h0(&self) -> f64 {
        self.h(0.0)
    }

    /// The fitted modes' part of the output at τ = t − T ≥ 0, and its n-th derivative.
    pub fn tail(&self, tau: f64, derivative: i32) -> f64 {
        self.poles
            .iter()
            .zip(&self.amplitudes)
            .map(|(p, a)| (a * p.powi(derivative) * (p * tau).exp()).re)
            .sum()
    }
}

/// Scalar outputs for the delta method: per mode Re p, Im p, τ, |p|, ζ, Re r, Im r, |r|,
/// then h(0⁺), the tail's value and second derivative at the pulse end.
pub const PER_MODE: usize = 8;

fn outputs(m: &ModeSet) -> Vec<f64> {
    let mut v = Vec::with_capacity(m.poles.len() * PER_MODE + 3);
    for (p, r) in m.poles.iter().zip(&m.residues) {
        v.extend([
            p.re,
            p.im,
            -1.0 / p.re,
            p.norm(),
            -p.re / p.norm(),
            r.re,
            r.im,
            r.norm(),
        ]);
    }
    v.extend([m.h0(), m.tail(0.0, 0), m.tail(0.0, 2)]);
    v
}

/// The modes with the covariance of their outputs.
#[derive(Debug, Clone)]
pub struct Propagated {
    /// The best mode set.
    pub set: ModeSet,
    /// Output values (see [`PER_MODE`]).
    pub values: Vec<f64>,
    /// Their covariance.
    pub cov: DMatrix<f64>,
    /// ∂outputs/∂β, for quantities built on top (e.g. the direct term).
    pub gradient: DMatrix<f64>,
    /// Covariance of β.
    pub beta_cov: DMatrix<f64>,
    /// β at the optimum.
    pub beta: Vec<f64>,
}

impl Propagated {
    /// Estimate of output `k`.
    pub fn estimate(&self, k: usize) -> Estimate {
        Estimate::new(self.values[k], self.cov[(k, k)])
    }

    /// h(t) and its variance (from the poles' and residues' joint covariance).
    pub fn h_with_variance(&self, t: f64) -> (f64, f64) {
        let s = &self.set;
        let mut g = DVector::zeros(self.values.len());
        for (k, ((kind, p), r)) in s.kinds.iter().zip(&s.poles).zip(&s.residues).enumerate() {
            let w = weight(*kind);
            let e = (p * t).exp();
            let rte = r * e * t;
            let base = k * PER_MODE;
            g[base] = w * rte.re;
            g[base + 1] = -w * rte.im;
            g[base + 5] = w * e.re;
            g[base + 6] = -w * e.im;
        }
        let var = (g.transpose() * &self.cov * &g)[(0, 0)];
        (s.h(t), var.max(0.0))
    }

    /// Variance of any scalar function of β, by the same numerical gradient.
    pub fn variance_of(&self, f: &dyn Fn(&[f64]) -> f64) -> f64 {
        let g = numeric_gradient(&self.beta, &self.beta_cov, &|b| vec![f(b)]);
        (g.row(0) * &self.beta_cov * g.row(0).transpose())[(0, 0)].max(0.0)
    }
}

/// ∂outputs/∂xᵢ for the interior breakpoint values xᵢ of a measured pulse: P(s) changes by
/// hᵢ·e^(s(T−tᵢ)) per unit of xᵢ (hᵢ the hat function's area, (tᵢ₊₁ − tᵢ₋₁)/2), so
/// ∂rₖ/∂xᵢ = −rₖ·hᵢ e^(pₖ(T−tᵢ))/P(pₖ); only the residues and h(0⁺) depend on the pulse.
fn stimulus_gradient(set: &ModeSet, pulse: &AppliedPulse) -> DMatrix<f64> {
    let bp = &pulse.breakpoints;
    let n_out = set.poles.len() * PER_MODE + 3;
    let inner = bp.len().saturating_sub(2);
    let mut g = DMatrix::zeros(n_out, inner);
    let end = pulse.end();
    for (k, ((kind, p), r)) in set
        .kinds
        .iter()
        .zip(&set.poles)
        .zip(&set.residues)
        .enumerate()
    {
        let factor = -r / pulse.transform(*p);
        for i in 0..inner {
            let (a, t, b) = (bp[i].0, bp[i + 1].0, bp[i + 2].0);
            let dr = factor * (0.5 * (b - a)) * (p * (end - t)).exp();
            let base = k * PER_MODE;
            g[(base + 5, i)] = dr.re;
            g[(base + 6, i)] = dr.im;
            g[(base + 7, i)] = (r.conj() * dr).re / r.norm().max(f64::MIN_POSITIVE);
            g[(n_out - 3, i)] += weight(*kind) * dr.re;
        }
    }
    g
}

/// Central-difference Jacobian of `f` at β, step 10⁻³ of each parameter's standard
/// uncertainty (or of its size when that is zero).
fn numeric_gradient(
    beta: &[f64],
    cov: &DMatrix<f64>,
    f: &dyn Fn(&[f64]) -> Vec<f64>,
) -> DMatrix<f64> {
    let n_out = f(beta).len();
    let mut g = DMatrix::zeros(n_out, beta.len());
    for j in 0..beta.len() {
        let sd = cov[(j, j)].max(0.0).sqrt();
        let h = if sd > 0.0 {
            1e-3 * sd
        } else {
            1e-7 * beta[j].abs().max(1e-12)
        };
        let mut bp = beta.to_vec();
        bp[j] += h;
        let mut bm = beta.to_vec();
        bm[j] -= h;
        let (fp, fm) = (f(&bp), f(&bm));
        for i in 0..n_out {
            g[(i, j)] = (fp[i] - fm[i]) / (2.0 * h);
        }
    }
    g
}

/// Propagate the fit's covariance to the modes' outputs; with a measured pulse whose samples
/// carry noise σₓ (`stimulus_noise`), add what that noise does to P(pₖ) and so to the residues.
pub fn propagate(
    fit: &Fit,
    pulse: &AppliedPulse,
    drift: bool,
    stimulus_noise: Option<f64>,
) -> Propagated {
    let beta: Vec<f64> = fit.theta.iter().chain(&fit.c).copied().collect();
    let f = |b: &[f64]| outputs(&mode_set(&fit.kinds, b, pulse, drift));
    let gradient = numeric_gradient(&beta, &fit.cov, &f);
    let mut cov = &gradient * &fit.cov * gradient.transpose();
    let set = mode_set(&fit.kinds, &beta, pulse, drift);
    if let Some(sx) = stimulus_noise {
        let g = stimulus_gradient(&set, pulse);
        cov += (&g * g.transpose()) * (sx * sx);
    }
    Propagated {
        values: outputs(&set),
        set,
        cov,
        gradient,
        beta_cov: fit.cov.clone(),
        beta,
    }
}
