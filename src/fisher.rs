//! The Cramér–Rao bound of the modal fit that a planned record allows (Kay 1993,
//! *Fundamentals of Statistical Signal Processing I: Estimation Theory*, §3.7–3.9).
//!
//! After the pulse ends at T the output is exactly Σ aₖ e^(pₖ(t−T)) plus the baseline offset
//! b; the record holds samples at interval Δ before the pulse (baseline only) and from T on,
//! each with white noise σ. The Fisher information of (poles, amplitudes, offset) is
//! JᵀJ/σ², its inverse bounds the covariance of any unbiased estimate, and the delta method
//! carries it to what the user reads: each time constant −1/Re pₖ, h(0⁺) = Σ rₖ with the
//! impulse-response residue rₖ = aₖ/(e^(pₖT)·X(pₖ)) (X the pulse's Laplace transform), and
//! h(t) over the window. This is the model `recover` fits (variable projection with the
//! offset unknown), so its spread can be held against these bounds.
//!
//! Everything here is per unit noise: a standard deviation scales as σ/√(averages).

use crate::network::Network;
use crate::pulse::Trapezoid;
use nalgebra::{DMatrix, DVector};
use num_complex::Complex64 as C;
use serde::Serialize;

/// A block of samples may span at most this share of the shortest time scale 1/|p| still
/// alive: the Jacobian is then practically constant over it and the block's information is
/// its sample count times one row's (common practice, no source).
const BLOCK_SHARE: f64 = 0.05;
/// A mode's columns count as alive while e^(Re p·τ)·(1 + |p|τ) exceeds this.
const ALIVE: f64 = 1e-12;
/// Most Jacobian rows summed (longer records are reduced to blocks first).
const MAX_ROWS: f64 = 50_000.0;

pub use crate::notice::FitLimit as Unbounded;

/// One mode of the fit's model (the upper member for a conjugate pair).
#[derive(Debug, Clone, Copy, PartialEq)]
pub struct FitMode {
    /// Pole, rad/s.
    pub pole: C,
    /// Impulse-response residue (of the upper member for a pair).
    pub residue: C,
    /// A conjugate pair (contributes 2·Re(a e^(pτ))).
    pub pair: bool,
}

impl FitMode {
    /// Its weight in h: 2 for a conjugate pair (counted by its upper member), 1 for a real pole.
    pub fn weight(&self) -> f64 {
        if self.pair { 2.0 } else { 1.0 }
    }

    /// Parameters it carries: (Re p, a) for a real pole, (Re p, Im p, Re a, Im a) for a pair.
    fn width(&self) -> usize {
        if self.pair { 4 } else { 2 }
    }
}

/// The modes of a network as the fit sees them (conjugate pairs once, by the upper member).
pub fn fit_modes(net: &Network) -> Result<Vec<FitMode>, Unbounded> {
    if !net.residues_known {
        return Err(Unbounded::ResiduesUnknown);
    }
    let mut out = Vec::new();
    for m in &net.modes {
        if m.pole.im < 0.0 {
            continue;
        }
        if m.multiplicity() > 1 {
            return Err(Unbounded::RepeatedPole);
        }
        if m.pole.re >= 0.0 {
            return Err(Unbounded::NonDecaying);
        }
        out.push(FitMode {
            pole: m.pole,
            residue: m.residues[0],
            pair: m.pole.im > 0.0,
        });
    }
    Ok(out)
}

/// Where the samples are, relative to the pulse.
#[derive(Debug, Clone, Copy, PartialEq, Serialize)]
pub struct Sampling {
    /// Sample interval Δ, s.
    pub interval: f64,
    /// Samples before the pulse starts (they carry only the baseline).
    pub samples_before: f64,
    /// Time of the first sample at or after the pulse end, measured from the end, s.
    pub first_after_end: f64,
    /// Samples from the pulse end to the end of the record.
    pub samples_after: f64,
}

impl Sampling {
    /// A uniform record from −`pre` to `record − pre` (time zero at the pulse's start) around
    /// a pulse ending at `end`.
    pub fn uniform(interval: f64, pre: f64, record: f64, end: f64) -> Sampling {
        let before = (pre / interval).ceil().max(0.0);
        let first = ((pre + end) / interval).ceil();
        let last = (record / interval).floor();
        Sampling {
            interval,
            samples_before: before,
            first_after_end: (first * interval - pre - end).max(0.0),
            samples_after: (last - first + 1.0).max(0.0),
        }
    }
}

/// The pulse's factor on each mode: the output's mode amplitude at the pulse end is
/// a = r·Q(p), Q(p) = e^(pT)·X(p) = ∫ x(τ) e^(p(T−τ)) dτ.
fn q_of(pulse: &Trapezoid, p: C) -> C {
    (p * pulse.end()).exp() * pulse.transform(p)
}

/// dQ/dp by a central difference along the real axis (Q is analytic in p).
fn dq_of(pulse: &Trapezoid, p: C) -> C {
    let h = 1e-5 * p.norm().max(1.0 / pulse.end().max(f64::MIN_POSITIVE));
    (q_of(pulse, p + h) - q_of(pulse, p - h)) / (2.0 * h)
}

/// The bounds of one planned record, per unit noise σ = 1 and one acquisition.
#[derive(Debug, Clone)]
pub struct Bounds {
    modes: Vec<FitMode>,
    /// Output amplitude of each mode at the pulse end (upper member).
    amplitudes: Vec<C>,
    /// ∂r/∂p and ∂r/∂a (complex), per mode.
    dr: Vec<(C, C)>,
    /// Covariance of the parameters (σ = 1), in the order of [`FitMode::width`], offset last.
    cov: DMatrix<f64>,
}

/// Scales of the parameters (|p| for the poles' parts, |a| for the amplitudes', 1 for the
/// offset), so that the Fisher matrix is inverted in well-scaled form.
fn scales(modes: &[FitMode], amps: &[C]) -> Vec<f64> {
    let mut s = Vec::new();
    for (m, a) in modes.iter().zip(amps) {
        let pa = m.pole.norm();
        let aa = a.norm().max(f64::MIN_POSITIVE);
        if m.pair {
            s.extend([pa, pa, aa, aa]);
        } else {
            s.extend([pa, aa]);
        }
    }
    s.push(1.0);
    s
}

/// One Jacobian row (scaled) at τ = t − T ≥ 0.
fn row(modes: &[FitMode], amps: &[C], sc: &[f64], tau: f64, out: &mut DVector<f64>) {
    let mut j = 0;
    for (m, a) in modes.iter().zip(amps) {
        let e = (m.pole * tau).exp();
        if m.pair {
            let ate = a * e * tau;
            out[j] = 2.0 * ate.re * sc[j];
            out[j + 1] = -2.0 * ate.im * sc[j + 1];
            out[j + 2] = 2.0 * e.re * sc[j + 2];
            out[j + 3] = -2.0 * e.im * sc[j + 3];
        } else {
            out[j] = (a * e * tau).re * sc[j];
            out[j + 1] = e.re * sc[j + 1];
        }
        j += m.width();
    }
    out[j] = 1.0;
}

/// The unit-noise Fisher matrix (scaled parameters) of a record.
fn fisher(modes: &[FitMode], amps: &[C], sc: &[f64], s: &Sampling) -> DMatrix<f64> {
    let np = sc.len();
    let mut f = DMatrix::<f64>::zeros(np, np);
    f[(np - 1, np - 1)] += s.samples_before;
    let slowest = modes
        .iter()
        .map(|m| 1.0 / m.pole.norm())
        .fold(0.0, f64::max);
    let n = s.samples_after;
    let floor_block = (n / MAX_ROWS).ceil().max(1.0);
    let mut r = DVector::<f64>::zeros(np);
    let mut i = 0.0;
    while i < n {
        let tau = s.first_after_end + i * s.interval;
        let scale = modes
            .iter()
            .filter(|m| (m.pole.re * tau).exp() * (1.0 + m.pole.norm() * tau) > ALIVE)
            .map(|m| 1.0 / m.pole.norm())
            .fold(slowest, f64::min);
        let b = (BLOCK_SHARE * scale / s.interval)
            .floor()
            .max(floor_block)
            .min(n - i)
            .max(1.0);
        row(modes, amps, sc, tau + 0.5 * (b - 1.0) * s.interval, &mut r);
        f.ger(b, &r, &r, 1.0);
        i += b;
    }
    f
}

impl Bounds {
    /// The bounds for `modes` driven by `pulse` and sampled as `s` (σ = 1, one acquisition).
    pub fn new(modes: &[FitMode], pulse: &Trapezoid, s: &Sampling) -> Result<Bounds, Unbounded> {
        let amplitudes: Vec<C> = modes
            .iter()
            .map(|m| m.residue * q_of(pulse, m.pole))
            .collect();
        let dr = modes
            .iter()
            .zip(&amplitudes)
            .map(|(m, a)| {
                let q = q_of(pulse, m.pole);
                (-a * dq_of(pulse, m.pole) / (q * q), C::new(1.0, 0.0) / q)
            })
            .collect();
        let sc = scales(modes, &amplitudes);
        let f = fisher(modes, &amplitudes, &sc, s);
        if !f.iter().all(|v| v.is_finite()) {
            return Err(Unbounded::Singular);
        }
        let chol = f.cholesky().ok_or(Unbounded::Singular)?;
        let inv = chol.inverse();
        let d = DMatrix::from_diagonal(&DVector::from_vec(sc));
        let cov = &d * inv * &d;
        if !cov.iter().all(|v| v.is_finite()) {
            return Err(Unbounded::Singular);
        }
        Ok(Bounds {
            modes: modes.to_vec(),
            amplitudes,
            dr,
            cov,
        })
    }

    /// Output amplitude of each mode at the pulse end (upper member; a pair shows 2|a|).
    pub fn amplitudes(&self) -> &[C] {
        &self.amplitudes
    }

    fn start(&self, k: usize) -> usize {
        self.modes[..k].iter().map(|m| m.width()).sum()
    }

    fn quad(&self, g: &DVector<f64>) -> f64 {
        (g.transpose() * &self.cov * g)[(0, 0)].max(0.0)
    }

    /// Standard deviation of mode k's time constant −1/Re p, s.
    pub fn tau_std(&self, k: usize) -> f64 {
        let re = self.modes[k].pole.re;
        let j = self.start(k);
        self.cov[(j, j)].max(0.0).sqrt() / (re * re)
    }

    /// Standard deviation of mode k's pole (real part, and imaginary part for a pair), rad/s.
    pub fn pole_std(&self, k: usize) -> (f64, f64) {
        let j = self.start(k);
        let im = if self.modes[k].pair {
            self.cov[(j + 1, j + 1)].max(0.0).sqrt()
        } else {
            0.0
        };
        (self.cov[(j, j)].max(0.0).sqrt(), im)
    }

    /// Gradient of h(t) (t ≥ 0, the direct term excluded) in the parameters.
    fn h_gradient(&self, t: f64) -> DVector<f64> {
        let mut g = DVector::zeros(self.cov.nrows());
        for (k, m) in self.modes.iter().enumerate() {
            let j = self.start(k);
            let w = m.weight();
            let e = (m.pole * t).exp();
            let r = m.residue;
            let (drp, dra) = self.dr[k];
            // ∂h/∂(Re p): w·Re((∂r/∂p + r t) e^(pt)); ∂/∂(Im p) the same with a factor i.
            let via_p = (drp + r * t) * e;
            g[j] = w * via_p.re;
            if m.pair {
                g[j + 1] = w * (C::i() * via_p).re;
                g[j + 2] = w * (dra * e).re;
                g[j + 3] = w * (C::i() * dra * e).re;
            } else {
                g[j + 1] = w * (dra * e).re;
            }
        }
        g
    }

    /// Standard deviation of h(t), in h's unit.
    pub fn h_std(&self, t: f64) -> f64 {
        self.quad(&self.h_gradient(t)).sqrt()
    }

    /// The largest standard deviation of h(t) over `times`, and where.
    pub fn window_std(&self, times: &[f64]) -> (f64, f64) {
        times
            .iter()
            .map(|&t| (self.h_std(t), t))
            .fold((0.0, 0.0), |a, b| if b.0 > a.0 { b } else { a })
    }
}

/// Times over [0, run] at which the window's bound is read: a uniform grid with a geometric
/// one from the fastest time scale, so brief modes are not stepped over.
pub fn window_times(fastest: f64, run: f64) -> Vec<f64> {
    let n = 300;
    let mut t: Vec<f64> = (0..n).map(|k| run * k as f64 / (n - 1) as f64).collect();
    let lo = (fastest / 20.0).min(run / 1e3).max(run * 1e-12);
    let ratio = (run / lo).powf(1.0 / 199.0);
    t.extend((0..200).map(|k| lo * ratio.powi(k)));
    t.sort_by(f64::total_cmp);
    t
}

#[cfg(test)]
mod tests {
    use super::*;

    fn rect(width: f64) -> Trapezoid {
        // Nearly rectangular, unit amplitude.
        Trapezoid {
            amplitude: 1.0,
            rise: width * 1e-6,
            flat: width,
            fall: width * 1e-6,
        }
    }

    #[test]
    fn one_exponential_matches_the_closed_form() {
        // y = A e^(−t/τ) + noise with A and τ unknown, σ = 1, a record long against τ and
        // sampled finely: σ_τ/τ = 2√2·(σ/A)·√(Δ/τ) (Kay 1993 §3.7 with the sums taken as
        // integrals: ∫e^(−2t/τ) = τ/2, ∫t e^(−2t/τ) = τ²/4, ∫t² e^(−2t/τ) = τ³/4). The offset
        // is known here to be zero: many samples before the pulse pin it.
        let tau = 1e-3;
        let m = FitMode {
            pole: C::new(-1.0 / tau, 0.0),
            residue: C::new(1.0 / tau, 0.0),
            pair: false,
        };
        let pulse = rect(1e-9);
        let dt = tau / 2000.0;
        let s = Sampling {
            interval: dt,
            samples_before: 1e15,
            first_after_end: 0.0,
            samples_after: 40.0 * tau / dt,
        };
        let b = Bounds::new(&[m], &pulse, &s).unwrap();
        let a = b.amplitudes()[0].re;
        let closed = tau * 2.0 * 2f64.sqrt() / a * (dt / tau).sqrt();
        let got = b.tau_std(0);
        assert!(
            (got / closed - 1.0).abs() < 2e-3,
            "got {got:e}, closed form {closed:e}"
        );
    }

    /// The model's output at τ for parameters (Re p, Im p, a…, offset).
    fn model(modes: &[FitMode], theta: &[f64], tau: f64) -> f64 {
        let mut j = 0;
        let mut y = 0.0;
        for m in modes {
            if m.pair {
                let p = C::new(theta[j], theta[j + 1]);
                let a = C::new(theta[j + 2], theta[j + 3]);
                y += 2.0 * (a * (p * tau).exp()).re;
            } else {
                y += theta[j + 1] * (theta[j] * tau).exp();
            }
            j += m.width();
        }
        y + theta[j]
    }

    #[test]
    fn fisher_matches_finite_differences() {
        // A real pole and a lightly damped pair; the Fisher matrix from a Jacobian taken by
        // central finite differences of the model itself (no blocks), against the module's.
        let modes = [
            FitMode {
                pole: C::new(-2e3, 0.0),
                residue: C::new(1.5e3, 0.0),
                pair: false,
            },
            FitMode {
                pole: C::new(-500.0, 2e4),
                residue: C::new(300.0, -800.0),
                pair: true,
            },
        ];
        let pulse = rect(20e-6);
        let s = Sampling {
            interval: 2e-6,
            samples_before: 300.0,
            first_after_end: 1e-6,
            samples_after: 5000.0,
        };
        let b = Bounds::new(&modes, &pulse, &s).unwrap();
        let mut theta = Vec::new();
        for (m, a) in modes.iter().zip(b.amplitudes()) {
            if m.pair {
                theta.extend([m.pole.re, m.pole.im, a.re, a.im]);
            } else {
                theta.extend([m.pole.re, a.re]);
            }
        }
        theta.push(0.0);
        let np = theta.len();
        let mut f = DMatrix::<f64>::zeros(np, np);
        f[(np - 1, np - 1)] = s.samples_before;
        for i in 0..s.samples_after as usize {
            let tau = s.first_after_end + i as f64 * s.interval;
            let g = DVector::from_iterator(
                np,
                (0..np).map(|j| {
                    let h = 1e-6 * theta[j].abs().max(1.0);
                    let (mut up, mut dn) = (theta.clone(), theta.clone());
                    up[j] += h;
                    dn[j] -= h;
                    (model(&modes, &up, tau) - model(&modes, &dn, tau)) / (2.0 * h)
                }),
            );
            f.ger(1.0, &g, &g, 1.0);
        }
        let cov = f.try_inverse().unwrap();
        for j in 0..np {
            let rel = (cov[(j, j)] / b.cov[(j, j)] - 1.0).abs();
            // Blocks of ≤ 5 % of the fastest time scale: the midpoint rule's error (our choice).
            assert!(
                rel < 2e-3,
                "parameter {j}: {} vs {}",
                cov[(j, j)],
                b.cov[(j, j)]
            );
        }
    }

    #[test]
    fn h0_bound_is_the_residue_bound_for_one_pole() {
        // One real pole: h(0⁺) = r = a/Q(p), so σ(h0) follows from σ(a), σ(p) and their
        // covariance; checked against the same quantity by finite differences of r(p, a).
        let m = FitMode {
            pole: C::new(-1e3, 0.0),
            residue: C::new(1e3, 0.0),
            pair: false,
        };
        let pulse = rect(300e-6);
        let s = Sampling::uniform(1e-6, 1e-3, 9e-3, pulse.end());
        let b = Bounds::new(&[m], &pulse, &s).unwrap();
        let a = b.amplitudes()[0];
        let r = |p: f64, a: f64| a / q_of(&pulse, C::new(p, 0.0)).re;
        let (hp, ha) = (1e-3, 1e-6 * a.re);
        let gp = (r(-1e3 + hp, a.re) - r(-1e3 - hp, a.re)) / (2.0 * hp);
        let ga = (r(-1e3, a.re + ha) - r(-1e3, a.re - ha)) / (2.0 * ha);
        let g = DVector::from_vec(vec![gp, ga, 0.0]);
        let want = (g.transpose() * &b.cov * &g)[(0, 0)].sqrt();
        let got = b.h_std(0.0);
        assert!((got / want - 1.0).abs() < 1e-4, "{got} vs {want}");
    }
}
