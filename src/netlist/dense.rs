//! Bridges between the nalgebra containers the stamps are written in and faer's dense
//! decompositions (eigen-decompositions, SVD, Cholesky, LU), which do the heavy work.

use faer::Mat;
use nalgebra::DMatrix;
use num_complex::Complex64;

/// Order from which the few large decompositions (the tridiagonal eigensolver, the
/// triangular solves of the symmetric reduction) run on every core.
const PARALLEL_FROM: usize = 256;

/// faer's parallelism for a problem of order n. Small problems stay on the calling thread:
/// tolerance runs already spread their cases over the cores, and handing 10 × 10 matrices
/// to a thread pool costs more than it saves.
pub(crate) fn par_for(n: usize) -> faer::Par {
    if n >= PARALLEL_FROM {
        faer::Par::rayon(0)
    } else {
        faer::Par::Seq
    }
}

/// Keep faer's high-level calls (eigen, SVD, LU, Cholesky) on the calling thread; the large
/// steps that profit from threads pass [`par_for`] explicitly.
pub(crate) fn sequential_by_default() {
    static ONCE: std::sync::Once = std::sync::Once::new();
    ONCE.call_once(|| faer::set_global_parallelism(faer::Par::Seq));
}

/// A copy of a nalgebra matrix as a faer matrix.
pub(crate) fn to_faer(m: &DMatrix<f64>) -> Mat<f64> {
    Mat::from_fn(m.nrows(), m.ncols(), |i, j| m[(i, j)])
}

/// A copy of a faer matrix as a nalgebra matrix.
pub(crate) fn from_faer(m: faer::MatRef<'_, f64>) -> DMatrix<f64> {
    DMatrix::from_fn(m.nrows(), m.ncols(), |i, j| m[(i, j)])
}

/// Eigenvalues of a real square matrix (faer's real Schur form); `None` if the iteration
/// fails or the matrix holds non-finite numbers.
pub(crate) fn eigenvalues(m: &DMatrix<f64>) -> Option<Vec<Complex64>> {
    if m.iter().any(|x| !x.is_finite()) {
        return None;
    }
    to_faer(m).eigenvalues().ok()
}

/// Full SVD `m = U·diag(σ)·Vᵀ` with U and V square orthogonal (faer); σ descending.
pub(crate) fn svd(m: &DMatrix<f64>) -> Option<(DMatrix<f64>, Vec<f64>, DMatrix<f64>)> {
    if m.iter().any(|x| !x.is_finite()) {
        return None;
    }
    let svd = to_faer(m).svd().ok()?;
    let k = m.nrows().min(m.ncols());
    let s = (0..k).map(|i| svd.S()[i]).collect();
    Some((from_faer(svd.U()), s, from_faer(svd.V())))
}
