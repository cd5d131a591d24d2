//! Transmission zeros of a single-input single-output state space, for display.

use nalgebra::DMatrix;
use num_complex::Complex64;

use super::spec::StateSpace;

type C = Complex64;

/// Largest order for which zeros are computed (they are for display; powers of A in the
/// observability rows grow ill-conditioned for long chains).
const MAX_ZERO_ORDER: usize = 40;

/// Transmission zeros of a SISO state space, for display.
///
/// With D ≠ 0 they are the eigenvalues of A − B·C/D. Otherwise, with relative degree r
/// (first non-zero Markov parameter m = C·A^(r−1)·B), they are the eigenvalues of the zero
/// dynamics: A − B·C·A^r/m restricted to the kernel of [C; CA; …; CA^(r−1)], which that
/// matrix leaves invariant (Isidori, Nonlinear Control Systems, 1995, §4.3, linear case).
pub(crate) fn zeros(ss: &StateSpace) -> Vec<C> {
    let n = ss.order();
    if n == 0 || n > MAX_ZERO_ORDER {
        return Vec::new();
    }
    let a = &ss.a;
    let b = &ss.b;
    let c_row = ss.c.transpose();
    let scale = a.norm().max(f64::MIN_POSITIVE);
    let zero_dynamics = if ss.d != 0.0 {
        a - b * &c_row / ss.d
    } else {
        // Relative degree: the first Markov parameter that is not rounding noise.
        let mut rows: Vec<nalgebra::RowDVector<f64>> = Vec::new();
        let mut row = c_row.clone();
        let mut found = None;
        for r in 1..=n {
            let m = (&row * b)[(0, 0)];
            let size = row.norm() * b.norm();
            rows.push(row.clone());
            if m.abs() > 1e-10 * size {
                found = Some((r, m));
                break;
            }
            row = &row * a;
        }
        let Some((r, m)) = found else {
            return Vec::new();
        };
        let car = &row * a; // C·A^r
        let closed = a - b * &car / m;
        if r == n {
            return Vec::new();
        }
        // Orthonormal basis of the kernel of the r observability rows.
        let mut obs = DMatrix::<f64>::zeros(r, n);
        for (i, rw) in rows.iter().enumerate() {
            obs.set_row(i, &(rw / rw.norm().max(f64::MIN_POSITIVE)));
        }
        if obs.iter().any(|x| !x.is_finite()) {
            return Vec::new();
        }
        // Bounded SVD: the zeros are for display; none are shown if it does not converge.
        let Some(svd) =
            nalgebra::SVD::try_new(obs.transpose(), true, false, f64::EPSILON, 100 * n.max(1))
        else {
            return Vec::new();
        };
        let Some(u) = svd.u else {
            return Vec::new();
        };
        // Full basis of Rⁿ from a QR of [U | I]; the last n − r columns span the kernel.
        let mut full = DMatrix::<f64>::zeros(n, n + r);
        full.view_mut((0, 0), (n, r)).copy_from(&u.columns(0, r));
        full.view_mut((0, r), (n, n))
            .copy_from(&DMatrix::<f64>::identity(n, n));
        let q = full.qr().q();
        let z = q.columns(r, n - r).into_owned();
        z.transpose() * closed * z
    };
    let Some(eig) = super::dense::eigenvalues(&zero_dynamics) else {
        return Vec::new();
    };
    // Zeros within rounding of the origin are the origin.
    eig.into_iter()
        .map(|z| {
            if z.norm() <= 1e-9 * scale {
                C::new(0.0, 0.0)
            } else {
                z
            }
        })
        .collect()
}
