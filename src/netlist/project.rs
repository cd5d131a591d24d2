//! The reduction of one circuit, kept for its variants (tolerance samples).
//!
//! The nominal reduction splits E block by block by SVD into dynamic and algebraic parts.
//! Stamped capacitances, inductances and op-amp time constants enter E as sums of positive
//! multiples of fixed patterns, so E's row and column null spaces, and with them the
//! orthogonal bases of the split, do not move when the values do. A variant is therefore
//! projected on the nominal bases (after the nominal power-of-two scaling): its transformed E
//! is checked to vanish outside the dynamic block, the dynamic rows are solved with that
//! block, and an index-1 algebraic part is eliminated by an LU-based Schur complement. Any
//! variant for which a check fails (a null space that moved, a near-singular block, a
//! non-finite number) is not projected: the caller reduces it from scratch.

use nalgebra::{DMatrix, DVector};

use super::mna::Descriptor;
use super::reduce::{balance, block_tol, components, equilibrate_pencil, full_svd, select};
use super::spec::StateSpace;

/// Largest descriptor order kept for projection; larger circuits are reduced afresh (their
/// cost is the eigen-decomposition, not the reduction).
const MAX_ORDER: usize = 64;
/// Smallest pivot, relative to the largest, an LU here may meet before the variant is handed
/// back to the rank-revealing reduction.
const PIVOT_RATIO: f64 = 1e-9;

/// A sparse linear map: entry k of the result is Σ coefficient·x[index] over `terms[k]`.
struct Sparse {
    terms: Vec<Vec<(usize, f64)>>,
}

impl Sparse {
    /// The map from basis vectors (each of length n), the scales folded into the coefficients.
    fn new(basis: &[DVector<f64>], scale: &[f64]) -> Sparse {
        let terms = basis
            .iter()
            .map(|v| {
                (0..v.len())
                    .filter(|&i| v[i] != 0.0)
                    .map(|i| (i, v[i] * scale[i]))
                    .collect()
            })
            .collect();
        Sparse { terms }
    }

    fn vector(&self, x: &DVector<f64>) -> DVector<f64> {
        DVector::from_iterator(
            self.terms.len(),
            self.terms
                .iter()
                .map(|t| t.iter().map(|&(i, c)| c * x[i]).sum()),
        )
    }
}

/// `P·M·Q` for the row map P and the column map Q (both sparse).
fn transform(p: &Sparse, m: &DMatrix<f64>, q: &Sparse) -> DMatrix<f64> {
    let n = m.ncols();
    let mut rows = DMatrix::<f64>::zeros(p.terms.len(), n);
    for (k, t) in p.terms.iter().enumerate() {
        for &(i, c) in t {
            for j in 0..n {
                rows[(k, j)] += c * m[(i, j)];
            }
        }
    }
    let mut out = DMatrix::<f64>::zeros(p.terms.len(), q.terms.len());
    for (l, t) in q.terms.iter().enumerate() {
        for &(j, c) in t {
            for k in 0..p.terms.len() {
                out[(k, l)] += c * rows[(k, j)];
            }
        }
    }
    out
}

/// The nominal split of a descriptor system: orthogonal bases with the power-of-two scales
/// folded in.
pub(crate) struct Projection {
    /// Row transform (dynamic rows first), applied to the unscaled rows.
    pt: Sparse,
    /// Column transform (dynamic columns first), applied to the unscaled columns.
    q: Sparse,
    /// Number of dynamic unknowns.
    r: usize,
}

impl Projection {
    /// The nominal split of `desc`; `None` for a system too large to gain from it.
    pub(crate) fn new(desc: &Descriptor) -> Option<Projection> {
        let n = desc.e.nrows();
        if n == 0 || n > MAX_ORDER {
            return None;
        }
        let (mut e, mut a) = (desc.e.clone(), desc.a.clone());
        let (mut b, mut c) = (desc.b.clone(), desc.c.clone());
        let (cols, rows) = equilibrate_pencil(&mut e, &mut a, &mut b, &mut c);
        let (comps, unused_rows, unused_cols) = components(&e);
        let (mut dyn_rows, mut alg_rows) = (Vec::new(), Vec::new());
        let (mut dyn_cols, mut alg_cols) = (Vec::new(), Vec::new());
        for &i in &unused_rows {
            alg_rows.push(DVector::from_fn(n, |k, _| if k == i { 1.0 } else { 0.0 }));
        }
        for &j in &unused_cols {
            alg_cols.push(DVector::from_fn(n, |k, _| if k == j { 1.0 } else { 0.0 }));
        }
        for (rs, cs) in &comps {
            let block = select(&e, rs, cs);
            let (u, s, v) = full_svd(&block, block_tol(&block));
            sort_basis(&u, rs, s.len(), n, &mut dyn_rows, &mut alg_rows);
            sort_basis(&v, cs, s.len(), n, &mut dyn_cols, &mut alg_cols);
        }
        let r = dyn_rows.len();
        if r != dyn_cols.len() || r + alg_rows.len() != n || r + alg_cols.len() != n {
            return None;
        }
        let basis_rows: Vec<_> = dyn_rows.into_iter().chain(alg_rows).collect();
        let basis_cols: Vec<_> = dyn_cols.into_iter().chain(alg_cols).collect();
        Some(Projection {
            pt: Sparse::new(&basis_rows, &rows),
            q: Sparse::new(&basis_cols, &cols),
            r,
        })
    }

    /// Number of dynamic unknowns (the order of every projected state space).
    pub(crate) fn order(&self) -> usize {
        self.r
    }

    /// The balanced state space of a variant with the nominal's structure, `None` when the
    /// variant does not keep it (the caller then reduces it from scratch).
    pub(crate) fn reduce(
        &self,
        e: &DMatrix<f64>,
        a: &DMatrix<f64>,
        b: &DVector<f64>,
        c: &DVector<f64>,
    ) -> Option<StateSpace> {
        let n = e.nrows();
        let (r, m) = (self.r, n - self.r);
        let et = transform(&self.pt, e, &self.q);
        let at = transform(&self.pt, a, &self.q);
        let bt = self.pt.vector(b);
        let ct = self.q.vector(c);
        // E must vanish outside its dynamic block (to rounding of its own size).
        let off_tol = 64.0 * f64::EPSILON * n as f64 * et.amax();
        let off = (0..n)
            .flat_map(|i| (0..n).map(move |j| (i, j)))
            .filter(|&(i, j)| i >= r || j >= r)
            .fold(0.0f64, |mx, (i, j)| mx.max(et[(i, j)].abs()));
        if off.is_nan() || off > off_tol {
            return None;
        }
        let e11 = et.view((0, 0), (r, r)).into_owned();
        let lu11 = checked_lu(e11)?;
        let a11 = lu11.solve(&at.view((0, 0), (r, r)).into_owned())?;
        let b1 = lu11.solve(&bt.rows(0, r).into_owned())?;
        let c1 = ct.rows(0, r).into_owned();
        let (mut a_hat, mut b_hat, mut c_hat, d) = if m == 0 {
            (a11, b1, c1, 0.0)
        } else {
            let a12 = lu11.solve(&at.view((0, r), (r, m)).into_owned())?;
            let a21 = at.view((r, 0), (m, r)).into_owned();
            let lu22 = checked_lu(at.view((r, r), (m, m)).into_owned())?;
            let x = lu22.solve(&a21)?;
            let y = lu22.solve(&bt.rows(r, m).into_owned())?;
            let c2 = ct.rows(r, m).into_owned();
            // A feed-through that cancels to rounding is none (as in the full reduction).
            let d = super::function::unless_rounding(-c2.dot(&y), c2.norm() * y.norm());
            (
                &a11 - &a12 * &x,
                &b1 - &a12 * &y,
                &c1 - x.transpose() * &c2,
                d,
            )
        };
        let finite = a_hat
            .iter()
            .chain(b_hat.iter())
            .chain(c_hat.iter())
            .all(|x| x.is_finite());
        if !finite || !d.is_finite() {
            return None;
        }
        balance(&mut a_hat, &mut b_hat, &mut c_hat);
        Some(StateSpace {
            a: a_hat,
            b: b_hat,
            c: c_hat,
            d,
        })
    }
}

/// The columns of a block's orthogonal factor `m` (over the indices `idx`) as length-n
/// vectors: the first `rank` to `dynamic`, the rest to `algebraic`.
fn sort_basis(
    m: &DMatrix<f64>,
    idx: &[usize],
    rank: usize,
    n: usize,
    dynamic: &mut Vec<DVector<f64>>,
    algebraic: &mut Vec<DVector<f64>>,
) {
    for k in 0..idx.len() {
        let mut out = DVector::zeros(n);
        for (i, &g) in idx.iter().enumerate() {
            out[g] = m[(i, k)];
        }
        if k < rank {
            &mut *dynamic
        } else {
            &mut *algebraic
        }
        .push(out);
    }
}

/// LU with partial pivoting of a square block, `None` when a pivot is small against the
/// largest (a block that may be singular is left to the rank-revealing reduction).
fn checked_lu(m: DMatrix<f64>) -> Option<nalgebra::LU<f64, nalgebra::Dyn, nalgebra::Dyn>> {
    let lu = m.lu();
    let u = lu.u();
    let diag: Vec<f64> = (0..u.nrows()).map(|i| u[(i, i)].abs()).collect();
    let max = diag.iter().copied().fold(0.0f64, f64::max);
    let min = diag.iter().copied().fold(f64::INFINITY, f64::min);
    (max.is_finite() && min > PIVOT_RATIO * max).then_some(lu)
}
