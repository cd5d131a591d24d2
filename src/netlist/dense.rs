//! Bridges between the nalgebra containers the stamps are written in and faer's dense
//! decompositions (eigen-decompositions, SVD, Cholesky, LU), which do the heavy work.

use faer::Mat;
use nalgebra::DMatrix;
use num_complex::Complex64;

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
