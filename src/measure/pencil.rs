//! Poles of a sum of damped exponentials from uniform samples by the matrix pencil method
//! (Hua & Sarkar 1990), in its SVD form (Sarkar & Pereira 1995): the Hankel matrix of the
//! data is truncated to its M dominant right singular vectors V, and the poles zₖ = e^(pₖΔ)
//! are the eigenvalues of V₁⁺V₂ (V without its last, resp. first, row).

use nalgebra::DMatrix;
use num_complex::Complex64 as C;

/// Highest order the pencil proposes.
pub const MAX_ORDER: usize = 12;
/// Margin over the noise edge of the singular values (common practice, no source).
const NOISE_MARGIN: f64 = 1.5;
/// Singular values below this fraction of the largest are rounding, not signal (printed data
/// keep about ten digits; common practice, no source).
const ROUNDING_FLOOR: f64 = 1e-10;

/// What the pencil found.
#[derive(Debug, Clone)]
pub struct Pencil {
    /// Singular values of the Hankel matrix, descending.
    pub singular: Vec<f64>,
    /// Order chosen from the singular values (or forced).
    pub order: usize,
    /// Order by the minimum description length criterion (Wax & Kailath 1985).
    pub order_mdl: usize,
    /// s_M / s_(M+1) at the chosen order (∞ shown as None).
    pub gap: Option<f64>,
    right: DMatrix<f64>,
    step: f64,
}

/// Run the pencil on `y` (uniform step `step`, per-sample noise `noise`), choosing the order
/// from the singular values unless `forced`.
pub fn pencil(y: &[f64], step: f64, noise: f64, forced: Option<usize>) -> Option<Pencil> {
    let n = y.len();
    if n < 6 {
        return None;
    }
    let l = (n / 3).max(2);
    let rows = n - l;
    let hankel = DMatrix::from_fn(rows, l + 1, |i, j| y[i + j]);
    if hankel.iter().any(|x| !x.is_finite()) {
        return None;
    }
    let svd = nalgebra::SVD::try_new(hankel, false, true, f64::EPSILON, 100 * (l + 1))?;
    let vt = svd.v_t?;
    let mut idx: Vec<usize> = (0..svd.singular_values.len()).collect();
    idx.sort_by(|&a, &b| svd.singular_values[b].total_cmp(&svd.singular_values[a]));
    let singular: Vec<f64> = idx.iter().map(|&i| svd.singular_values[i]).collect();
    let right = DMatrix::from_fn(l + 1, idx.len(), |r, c| vt[(idx[c], r)]);
    let cap = MAX_ORDER.min(l / 2).min(singular.len());
    let edge = NOISE_MARGIN * noise * ((rows as f64).sqrt() + ((l + 1) as f64).sqrt());
    let floor = edge.max(ROUNDING_FLOOR * singular[0]);
    let by_threshold = singular.iter().take(cap).filter(|&&s| s > floor).count();
    let order = forced.unwrap_or(by_threshold).min(cap);
    let gap = match (singular.get(order.wrapping_sub(1)), singular.get(order)) {
        (Some(&a), Some(&b)) if b > 0.0 => Some(a / b),
        _ => None,
    };
    Some(Pencil {
        order_mdl: mdl_order(&singular, rows, cap),
        singular,
        order,
        gap,
        right,
        step,
    })
}

impl Pencil {
    /// Poles pₖ = ln(zₖ)/Δ for order m (conjugate pairs exact: the pencil matrix is real).
    pub fn poles(&self, m: usize) -> Vec<C> {
        let m = m.min(self.right.ncols());
        if m == 0 {
            return Vec::new();
        }
        let v = self.right.columns(0, m);
        let rows = v.nrows();
        let v1 = v.rows(0, rows - 1).into_owned();
        let v2 = v.rows(1, rows - 1).into_owned();
        let Ok(pinv) = v1.pseudo_inverse(1e-14) else {
            return Vec::new();
        };
        let a = pinv * v2;
        if a.iter().any(|x| !x.is_finite()) {
            return Vec::new();
        }
        let Some(schur) = nalgebra::linalg::Schur::try_new(a, f64::EPSILON, 30 * m.max(1)) else {
            return Vec::new();
        };
        schur
            .complex_eigenvalues()
            .iter()
            .map(|z| z.ln() / self.step)
            .collect()
    }
}

/// Minimum description length order (Wax & Kailath 1985) from the Hankel singular values,
/// taking their squares as the eigenvalues of the sample covariance of `snapshots` rows.
fn mdl_order(singular: &[f64], snapshots: usize, cap: usize) -> usize {
    let p = singular.len();
    let lam: Vec<f64> = singular
        .iter()
        .map(|s| (s * s).max(f64::MIN_POSITIVE))
        .collect();
    let ns = snapshots as f64;
    (0..=cap.min(p.saturating_sub(1)))
        .map(|k| {
            let rest = &lam[k..];
            let q = rest.len() as f64;
            let log_geo = rest.iter().map(|l| l.ln()).sum::<f64>() / q;
            let log_ari = (rest.iter().sum::<f64>() / q).ln();
            let fit = -(log_geo - log_ari) * q * ns;
            let penalty = 0.5 * (k as f64) * (2.0 * p as f64 - k as f64) * ns.ln();
            (k, fit + penalty)
        })
        .min_by(|a, b| a.1.total_cmp(&b.1))
        .map_or(0, |(k, _)| k)
}

#[cfg(test)]
mod tests {
    use super::*;

    fn sorted(mut p: Vec<C>) -> Vec<C> {
        p.sort_by(|a, b| a.re.total_cmp(&b.re).then(a.im.total_cmp(&b.im)));
        p
    }

    #[test]
    fn recovers_exact_poles() {
        // Exact samples of Σ cₖ e^(pₖ t): the pencil is exact up to rounding (Hua & Sarkar 1990).
        let poles = [
            C::new(-1.0, 0.0),
            C::new(-0.3, 4.0),
            C::new(-0.3, -4.0),
            C::new(-7.0, 0.0),
        ];
        let amps = [
            C::new(1.0, 0.0),
            C::new(0.4, 0.7),
            C::new(0.4, -0.7),
            C::new(-2.0, 0.0),
        ];
        let dt = 0.01;
        let y: Vec<f64> = (0..300)
            .map(|k| {
                let t = k as f64 * dt;
                poles
                    .iter()
                    .zip(&amps)
                    .map(|(p, a)| (a * (p * t).exp()).re)
                    .sum()
            })
            .collect();
        let pen = pencil(&y, dt, 0.0, None).unwrap();
        assert_eq!(pen.order, 4);
        let got = sorted(pen.poles(4));
        let want = sorted(poles.to_vec());
        for (g, w) in got.iter().zip(&want) {
            assert!((g - w).norm() < 1e-10 * w.norm(), "{g} vs {w}");
        }
    }

    #[test]
    fn noise_sets_the_order() {
        // One mode in white noise: the second singular value sits at the noise edge.
        let mut state = 12345u64;
        let mut gauss = || {
            // Box–Muller on a 64-bit LCG (Knuth's MMIX constants).
            let mut u = || {
                state = state
                    .wrapping_mul(6364136223846793005)
                    .wrapping_add(1442695040888963407);
                ((state >> 11) as f64 + 0.5) / (1u64 << 53) as f64
            };
            let (a, b) = (u(), u());
            (-2.0 * a.ln()).sqrt() * (std::f64::consts::TAU * b).cos()
        };
        let y: Vec<f64> = (0..300)
            .map(|k| (-(k as f64) * 0.02).exp() + 1e-3 * gauss())
            .collect();
        let pen = pencil(&y, 1.0, 1e-3, None).unwrap();
        assert_eq!(pen.order, 1);
        let p = pen.poles(1)[0];
        assert!((p.re + 0.02).abs() < 1e-3 && p.im == 0.0);
    }
}
