//! Weighted nonlinear least squares for a sum of damped exponentials by variable projection
//! (Golub & Pereyra 1973): the linear amplitudes (and the baseline offset and drift) are
//! projected out, Levenberg–Marquardt (Marquardt 1963) moves only the poles, and the
//! covariance σ²(JᵀJ)⁻¹ of every parameter is taken at the optimum.
//!
//! The data are rows: single samples, or block means of n uniform samples (a sufficient
//! reduction of a long uniform record; the model of a block mean is exact:
//! mean over the block of e^(pt) = e^(pt₀)·gₙ(pΔ), gₙ(z) = (1/n)Σⱼ e^(zj)).
//! Rows at or after the pulse end T carry the modes; rows before the pulse carry only the
//! baseline. Poles are parameterised so that conjugate symmetry holds exactly and the real
//! part stays negative: a real pole p = −e^u, a pair p = −e^u ± i·e^v.

use nalgebra::{DMatrix, DVector};
use num_complex::Complex64 as C;

/// Iteration bound of the Levenberg–Marquardt loop.
pub const MAX_ITERATIONS: usize = 200;
/// Bound on the damping retries within one iteration.
const MAX_RETRIES: usize = 40;

/// A real pole (one parameter) or a conjugate pair (two).
#[derive(Debug, Clone, Copy, PartialEq, Eq)]
pub enum PoleKind {
    /// p = −e^u.
    Real,
    /// p = −e^u ± i e^v.
    Pair,
}

impl PoleKind {
    /// Linear amplitudes (and nonlinear parameters) it carries.
    pub fn width(self) -> usize {
        match self {
            PoleKind::Real => 1,
            PoleKind::Pair => 2,
        }
    }
}

/// The rows to fit.
#[derive(Debug, Clone, Default)]
pub struct Rows {
    /// Time of each row's first sample since time zero, s.
    pub t: Vec<f64>,
    /// Row value (sample or block mean).
    pub y: Vec<f64>,
    /// Samples in the row.
    pub n: Vec<u32>,
    /// Pulse end T: rows with t ≥ T carry the modes, s.
    pub end: f64,
    /// Step between the samples inside a block, s.
    pub step: f64,
    /// Noise σ of one sample.
    pub sigma: f64,
    /// Fit a linear drift (scaled by `drift_scale`) besides the offset.
    pub drift: bool,
    /// Time scale of the drift column, s.
    pub drift_scale: f64,
}

impl Rows {
    /// Number of rows.
    pub fn len(&self) -> usize {
        self.t.len()
    }

    /// True without rows.
    pub fn is_empty(&self) -> bool {
        self.t.is_empty()
    }
}

/// Poles from parameters.
pub fn poles_of(kinds: &[PoleKind], theta: &[f64]) -> Vec<C> {
    let mut k = 0;
    kinds
        .iter()
        .map(|kind| match kind {
            PoleKind::Real => {
                k += 1;
                C::new(-theta[k - 1].exp(), 0.0)
            }
            PoleKind::Pair => {
                k += 2;
                C::new(-theta[k - 2].exp(), theta[k - 1].exp())
            }
        })
        .collect()
}

/// Parameters from poles (upper members of pairs; Re p < 0 required).
pub fn theta_of(kinds: &[PoleKind], poles: &[C]) -> Vec<f64> {
    kinds
        .iter()
        .zip(poles)
        .flat_map(|(k, p)| match k {
            PoleKind::Real => vec![(-p.re).ln()],
            PoleKind::Pair => vec![(-p.re).ln(), p.im.abs().ln()],
        })
        .collect()
}

/// gₙ(z) and (1/n)Σⱼ j e^(zj): the block-mean factor and its z-derivative.
fn block_factor(z: C, n: u32) -> (C, C) {
    if n <= 1 {
        return (C::new(1.0, 0.0), C::new(0.0, 0.0));
    }
    let ez = z.exp();
    let (mut e, mut g, mut g1) = (C::new(1.0, 0.0), C::new(0.0, 0.0), C::new(0.0, 0.0));
    for j in 0..n {
        g += e;
        g1 += e * j as f64;
        e *= ez;
    }
    (g / n as f64, g1 / n as f64)
}

/// The weighted design matrix and, per nonlinear parameter, its derivative columns.
pub struct Design {
    /// Weighted basis (rows × linear parameters): modes, then offset, then drift.
    pub a: DMatrix<f64>,
    /// ∂A/∂θₖ as (column, values) pairs.
    pub deriv: Vec<Vec<(usize, DVector<f64>)>>,
    /// Weighted data.
    pub b: DVector<f64>,
}

/// Build the design for poles `theta`.
pub fn design(rows: &Rows, kinds: &[PoleKind], theta: &[f64]) -> Design {
    let poles = poles_of(kinds, theta);
    let nlin = kinds.iter().map(|k| k.width()).sum::<usize>();
    let m = nlin + 1 + usize::from(rows.drift);
    let nr = rows.len();
    let mut a = DMatrix::zeros(nr, m);
    let mut deriv: Vec<Vec<(usize, DVector<f64>)>> = Vec::new();
    let mut col = 0;
    for kind in kinds {
        let w = kind.width();
        for _ in 0..w {
            deriv.push((col..col + w).map(|c| (c, DVector::zeros(nr))).collect());
        }
        col += w;
    }
    let mut cache: Vec<(u32, Vec<(C, C)>)> = Vec::new();
    let mut b = DVector::zeros(nr);
    for i in 0..nr {
        let n = rows.n[i];
        let wt = (n as f64).sqrt() / rows.sigma;
        b[i] = wt * rows.y[i];
        a[(i, nlin)] = wt;
        if rows.drift {
            let tm = rows.t[i] + rows.step * (n as f64 - 1.0) / 2.0;
            a[(i, nlin + 1)] = wt * tm / rows.drift_scale;
        }
        if rows.t[i] < rows.end {
            continue;
        }
        let factors = block_factors(&mut cache, &poles, n, rows.step);
        fill_modes(
            &mut a,
            &mut deriv,
            i,
            wt,
            rows.t[i] - rows.end,
            rows.step,
            kinds,
            &poles,
            factors,
        );
    }
    Design { a, deriv, b }
}

fn block_factors<'c>(
    cache: &'c mut Vec<(u32, Vec<(C, C)>)>,
    poles: &[C],
    n: u32,
    step: f64,
) -> &'c [(C, C)] {
    let k = match cache.iter().position(|(m, _)| *m == n) {
        Some(k) => k,
        None => {
            cache.push((n, poles.iter().map(|p| block_factor(p * step, n)).collect()));
            cache.len() - 1
        }
    };
    &cache[k].1
}

#[allow(clippy::too_many_arguments)] // one row of the design: plain numbers, no state
fn fill_modes(
    a: &mut DMatrix<f64>,
    deriv: &mut [Vec<(usize, DVector<f64>)>],
    i: usize,
    wt: f64,
    t: f64,
    step: f64,
    kinds: &[PoleKind],
    poles: &[C],
    factors: &[(C, C)],
) {
    let (mut col, mut par) = (0, 0);
    for ((kind, p), (g, g1)) in kinds.iter().zip(poles).zip(factors) {
        let et = (p * t).exp();
        let e = et * g * wt;
        // dE/dp = e^(pt)(t·g + Δ·g₁)
        let de = et * (g * t + g1 * step) * wt;
        match kind {
            PoleKind::Real => {
                a[(i, col)] = e.re;
                deriv[par][0].1[i] = de.re * p.re;
            }
            PoleKind::Pair => {
                a[(i, col)] = e.re;
                a[(i, col + 1)] = e.im;
                // ∂p/∂u = Re p, ∂p/∂v = i·Im p.
                deriv[par][0].1[i] = de.re * p.re;
                deriv[par][1].1[i] = de.im * p.re;
                deriv[par + 1][0].1[i] = -de.im * p.im;
                deriv[par + 1][1].1[i] = de.re * p.im;
            }
        }
        col += kind.width();
        par += kind.width();
    }
}

/// The projected problem at one θ.
pub struct Projection {
    /// Linear parameters (weighted least squares).
    pub c: DVector<f64>,
    /// Weighted residual b − A c.
    pub r: DVector<f64>,
    /// χ² = ‖r‖².
    pub chi2: f64,
}

/// Solve the linear part by QR; `None` when the basis is numerically rank deficient.
pub fn project(d: &Design) -> Option<(Projection, DMatrix<f64>, DMatrix<f64>)> {
    let qr = d.a.clone().qr();
    let q = qr.q();
    let r = qr.r();
    let diag: Vec<f64> = (0..r.ncols()).map(|k| r[(k, k)].abs()).collect();
    let big = diag.iter().copied().fold(0.0, f64::max);
    if big.is_nan() || big <= 0.0 || diag.iter().any(|&x| x <= 1e-13 * big) {
        return None;
    }
    let qtb = q.transpose() * &d.b;
    let c = r.clone().solve_upper_triangular(&qtb)?;
    let res = &d.b - &d.a * &c;
    let chi2 = res.norm_squared();
    Some((Projection { c, r: res, chi2 }, q, r))
}

/// The Golub–Pereyra Jacobian of the projected residual:
/// ∂r/∂θₖ = −P⊥(∂A/∂θₖ)c − (A⁺)ᵀ(∂A/∂θₖ)ᵀr.
pub fn jacobian(d: &Design, p: &Projection, q: &DMatrix<f64>, rm: &DMatrix<f64>) -> DMatrix<f64> {
    let nr = d.a.nrows();
    let mut j = DMatrix::zeros(nr, d.deriv.len());
    for (k, cols) in d.deriv.iter().enumerate() {
        let mut v = DVector::zeros(nr);
        let mut dtr = DVector::zeros(d.a.ncols());
        for (c, col) in cols {
            v.axpy(p.c[*c], col, 1.0);
            dtr[*c] = col.dot(&p.r);
        }
        let proj = &v - q * (q.transpose() * &v);
        let w = rm
            .transpose()
            .solve_lower_triangular(&dtr)
            .unwrap_or_else(|| DVector::zeros(dtr.len()));
        let term2 = q * w;
        j.set_column(k, &(-(proj + term2)));
    }
    j
}

/// A converged (or stopped) fit.
#[derive(Debug, Clone)]
pub struct Fit {
    /// Pole kinds.
    pub kinds: Vec<PoleKind>,
    /// Nonlinear parameters (u, v per pole).
    pub theta: Vec<f64>,
    /// Linear parameters: mode amplitudes, offset, drift.
    pub c: Vec<f64>,
    /// χ² at the optimum (weighted by the noise σ).
    pub chi2: f64,
    /// Rows − parameters.
    pub dof: usize,
    /// Iterations used.
    pub iterations: usize,
    /// Whether the stopping test was met within [`MAX_ITERATIONS`].
    pub converged: bool,
    /// Weighted residual per row.
    pub residual: Vec<f64>,
    /// Covariance of (θ, c) in that order (σ²(JᵀJ)⁻¹ with the weights carrying σ).
    pub cov: DMatrix<f64>,
}

impl Fit {
    /// The fitted poles (upper members of pairs).
    pub fn poles(&self) -> Vec<C> {
        poles_of(&self.kinds, &self.theta)
    }
}

/// Fit from starting poles. `None` when the start is unusable (rank-deficient basis).
pub fn fit(rows: &Rows, kinds: &[PoleKind], start: &[C]) -> Option<Fit> {
    let mut theta = theta_of(kinds, start);
    let mut d = design(rows, kinds, &theta);
    let (mut proj, mut q, mut rm) = project(&d)?;
    let mut lambda = 1e-3;
    let mut converged = kinds.is_empty();
    let mut iterations = 0;
    while !converged && iterations < MAX_ITERATIONS {
        iterations += 1;
        let j = jacobian(&d, &proj, &q, &rm);
        let h = j.transpose() * &j;
        let g = j.transpose() * &proj.r;
        let Some((step, next)) = damped_step(rows, kinds, &theta, &h, &g, proj.chi2, &mut lambda)
        else {
            // No damping reduces χ²: the current point is a minimum to working precision.
            converged = true;
            break;
        };
        let gain = proj.chi2 - next.1.0.chi2;
        theta = next.0;
        d = next.2;
        (proj, q, rm) = next.1;
        // Gauss–Newton converges quadratically near a small-residual optimum, so tight tests
        // cost only an iteration or two more; a step that cannot lower χ² ends the loop.
        let small_step = step.iter().all(|s| s.abs() < 1e-12);
        converged = small_step || gain <= 1e-15 * proj.chi2.max(f64::MIN_POSITIVE);
    }
    let cov = covariance(&d, &proj);
    Some(Fit {
        kinds: kinds.to_vec(),
        theta,
        c: proj.c.iter().copied().collect(),
        chi2: proj.chi2,
        dof: rows.len().saturating_sub(d.deriv.len() + d.a.ncols()),
        iterations,
        converged,
        residual: proj.r.iter().copied().collect(),
        cov,
    })
}

type Trial = (Vec<f64>, (Projection, DMatrix<f64>, DMatrix<f64>), Design);

/// One Levenberg–Marquardt step: raise the damping until χ² falls (bounded retries).
#[allow(clippy::too_many_arguments)]
fn damped_step(
    rows: &Rows,
    kinds: &[PoleKind],
    theta: &[f64],
    h: &DMatrix<f64>,
    g: &DVector<f64>,
    chi2: f64,
    lambda: &mut f64,
) -> Option<(Vec<f64>, Trial)> {
    for _ in 0..MAX_RETRIES {
        let mut a = h.clone();
        for k in 0..a.nrows() {
            a[(k, k)] += *lambda * h[(k, k)].max(1e-12 * h.diagonal().max());
        }
        let step = a.cholesky().map(|ch| ch.solve(&(-g)));
        if let Some(step) = step {
            // Limit a step to a factor e² in any rate or frequency.
            let scale = step.amax().max(2.0) / 2.0;
            let step: Vec<f64> = step.iter().map(|s| s / scale).collect();
            let trial: Vec<f64> = theta.iter().zip(&step).map(|(t, s)| t + s).collect();
            let d = design(rows, kinds, &trial);
            if let Some(p) = project(&d)
                && p.0.chi2 < chi2
            {
                *lambda = (*lambda / 3.0).max(1e-12);
                return Some((step, (trial, p, d)));
            }
        }
        *lambda *= 4.0;
        if *lambda > 1e12 {
            break;
        }
    }
    None
}

/// σ²(JᵀJ)⁻¹ for all parameters (θ then c) with the unprojected Jacobian
/// J = −[∂(Ac)/∂θ, A] (the weights already divide by σ). Equilibrated, then inverted by SVD.
fn covariance(d: &Design, p: &Projection) -> DMatrix<f64> {
    let nr = d.a.nrows();
    let nt = d.deriv.len();
    let m = d.a.ncols();
    let mut j = DMatrix::zeros(nr, nt + m);
    for (k, cols) in d.deriv.iter().enumerate() {
        let mut v = DVector::zeros(nr);
        for (c, col) in cols {
            v.axpy(p.c[*c], col, 1.0);
        }
        j.set_column(k, &v);
    }
    j.view_mut((0, nt), (nr, m)).copy_from(&d.a);
    let jtj = j.transpose() * &j;
    let s: Vec<f64> = (0..jtj.nrows())
        .map(|k| 1.0 / jtj[(k, k)].sqrt().max(f64::MIN_POSITIVE))
        .collect();
    let scaled = DMatrix::from_fn(jtj.nrows(), jtj.ncols(), |a, b| jtj[(a, b)] * s[a] * s[b]);
    let inv = scaled
        .pseudo_inverse(1e-14)
        .unwrap_or_else(|_| DMatrix::zeros(jtj.nrows(), jtj.ncols()));
    DMatrix::from_fn(inv.nrows(), inv.ncols(), |a, b| inv[(a, b)] * s[a] * s[b])
}

#[cfg(test)]
mod tests {
    use super::*;

    fn rows_of(f: impl Fn(f64) -> f64, n: usize, dt: f64, block: u32) -> Rows {
        let mut rows = Rows {
            end: 0.0,
            step: dt,
            sigma: 1e-3,
            drift: true,
            drift_scale: 1.0,
            ..Default::default()
        };
        // A short pre-trigger of baseline, then blocks of the tail.
        for k in 0..20 {
            rows.t.push(-0.2 + k as f64 * 0.01);
            rows.y.push(0.01);
            rows.n.push(1);
        }
        for k in 0..n {
            let t0 = k as f64 * dt * block as f64;
            let mean = (0..block).map(|j| f(t0 + j as f64 * dt)).sum::<f64>() / block as f64;
            rows.t.push(t0);
            rows.y.push(mean + 0.01);
            rows.n.push(block);
        }
        rows
    }

    #[test]
    fn jacobian_matches_finite_differences() {
        // Golub & Pereyra 1973: the projected residual's derivative; checked against central
        // differences of r(θ) = P⊥(θ) b away from the optimum.
        let rows = rows_of(
            |t| (-2.0 * t).exp() + 0.5 * (-0.4 * t).exp() * (3.0 * t).cos(),
            200,
            0.01,
            3,
        );
        let kinds = [PoleKind::Real, PoleKind::Pair];
        let theta = theta_of(&kinds, &[C::new(-2.3, 0.0), C::new(-0.35, 3.2)]);
        let d = design(&rows, &kinds, &theta);
        let (p, q, r) = project(&d).unwrap();
        let j = jacobian(&d, &p, &q, &r);
        for k in 0..theta.len() {
            let h = 1e-6;
            let mut tp = theta.clone();
            tp[k] += h;
            let mut tm = theta.clone();
            tm[k] -= h;
            let rp = project(&design(&rows, &kinds, &tp)).unwrap().0.r;
            let rmn = project(&design(&rows, &kinds, &tm)).unwrap().0.r;
            let fd = (rp - rmn) / (2.0 * h);
            let err = (&fd - j.column(k)).norm() / fd.norm();
            assert!(err < 1e-6, "parameter {k}: relative error {err}");
        }
    }

    #[test]
    fn recovers_poles_of_block_means() {
        // Noise-free block means are modelled exactly (e^(pt₀)·gₙ(pΔ)): the fit returns the poles.
        let rows = rows_of(|t| (-2.0 * t).exp() - 0.7 * (-9.0 * t).exp(), 300, 0.002, 5);
        let kinds = [PoleKind::Real, PoleKind::Real];
        let f = fit(&rows, &kinds, &[C::new(-1.5, 0.0), C::new(-12.0, 0.0)]).unwrap();
        let mut p: Vec<f64> = f.poles().iter().map(|p| p.re).collect();
        p.sort_by(f64::total_cmp);
        assert!(
            (p[0] + 9.0).abs() < 1e-7 && (p[1] + 2.0).abs() < 1e-8,
            "{p:?}"
        );
        assert!((f.c[2] - 0.01).abs() < 1e-9, "offset {}", f.c[2]);
    }
}
