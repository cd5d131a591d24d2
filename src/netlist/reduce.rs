//! Descriptor system → state space, by orthogonal transformations only.
//!
//! The system is kept in semi-explicit form
//!
//! ```text
//!   η' = A11 η + A12 w + B1 U        (dynamic rows)
//!    0 = A21 η + A22 w + B2 U        (algebraic rows)
//!    y = C1 η + C2 w + D U
//! ```
//!
//! where `U = [u, u', u'', …]` collects the input and the derivatives that index reduction
//! brings in. Each step eliminates the part of `w` that `A22` determines (Schur complement
//! through an SVD of `A22`); what `A22` leaves undetermined is fixed by the remaining
//! algebraic rows, which are then constraints `K η + L U = 0` on the dynamic unknowns. Those
//! are solved for (SVD of `K`), the constrained coordinates leave the state (order reduction)
//! and their differentiated constraints become the next algebraic rows. Every step shrinks
//! the system, so the loop ends in index-1 form; input derivatives are then moved out of the
//! state equation by the change of state `z = ẑ + B_k u^(k−1)`.

use nalgebra::{DMatrix, DVector};
use num_complex::Complex64;

use super::mna::Descriptor;
use super::spec::StateSpace;

/// Reduced state space plus the polynomial part beyond D (`improper[k−1]` multiplies s^k).
pub(crate) struct Reduced {
    pub ss: StateSpace,
    pub improper: Vec<f64>,
}

/// Why the reduction failed.
pub(crate) enum ReduceError {
    /// The matrix pencil is singular: magnitudes of the right null vector over the
    /// unknowns and of the left null vector over the equations (both in descriptor order).
    Singular { right: Vec<f64>, left: Vec<f64> },
    /// Something non-finite came out.
    Numerical(String),
}

/// Relative rank tolerance for the algebraic blocks.
const RANK_TOL: f64 = 1e-12;

/// Full SVD `m = U·diag(σ)·Vᵀ` with U, V square orthogonal; returns (U, σ (rank entries,
/// descending), V). The rank counts σᵢ > `tol`.
pub(super) fn full_svd(m: &DMatrix<f64>, tol: f64) -> (DMatrix<f64>, Vec<f64>, DMatrix<f64>) {
    let (rows, cols) = m.shape();
    if rows == 0 || cols == 0 {
        return (
            DMatrix::identity(rows, rows),
            vec![],
            DMatrix::identity(cols, cols),
        );
    }
    // faer's full SVD: U and V are square, their leading columns span the row and column
    // spaces. Non-finite input (reported by the caller) counts as rank 0.
    let Some((u, sv, v)) = super::dense::svd(m) else {
        return (
            DMatrix::identity(rows, rows),
            vec![],
            DMatrix::identity(cols, cols),
        );
    };
    let sigma: Vec<f64> = sv.iter().copied().take_while(|&s| s > tol).collect();
    (u, sigma, v)
}

pub(super) fn pow2(x: f64) -> f64 {
    if x > 0.0 && x.is_finite() {
        2f64.powi(-(x.log2().round() as i32))
    } else {
        1.0
    }
}

/// Semi-explicit system (see the module documentation).
struct Semi {
    a11: DMatrix<f64>,
    a12: DMatrix<f64>,
    a21: DMatrix<f64>,
    a22: DMatrix<f64>,
    b1: DMatrix<f64>,
    b2: DMatrix<f64>,
    c1: DVector<f64>,
    c2: DVector<f64>,
    d: Vec<f64>,
    /// Natural size of the algebraic rows, for rank decisions.
    alg_scale: f64,
    /// Magnitude scale of every contribution to `d`, to tell rounding from real terms.
    dabs: Vec<f64>,
}

pub(super) fn select(m: &DMatrix<f64>, rows: &[usize], cols: &[usize]) -> DMatrix<f64> {
    DMatrix::from_fn(rows.len(), cols.len(), |i, j| m[(rows[i], cols[j])])
}

/// Equilibrate the pencil by powers of two, columns then rows (twice), on |A| + ω|E| with ω a
/// typical frequency (the geometric-mean ratio of A's and E's entries), so that stores and
/// resistive paths weigh alike. Returns the column and row scales applied (exact powers of
/// two): `E ← diag(rows)·E·diag(cols)`, likewise A, `B ← diag(rows)·B`, `C ← diag(cols)·C`.
pub(super) fn equilibrate_pencil(
    e: &mut DMatrix<f64>,
    a: &mut DMatrix<f64>,
    b: &mut DVector<f64>,
    c: &mut DVector<f64>,
) -> (Vec<f64>, Vec<f64>) {
    let n = e.nrows();
    let logmean = |m: &DMatrix<f64>| {
        let (sum, cnt) = m
            .iter()
            .filter(|x| **x != 0.0)
            .fold((0.0, 0usize), |(s, c), x| (s + x.abs().ln(), c + 1));
        if cnt > 0 {
            Some(sum / cnt as f64)
        } else {
            None
        }
    };
    let omega = match (logmean(a), logmean(e)) {
        (Some(la), Some(le)) => (la - le).exp(),
        _ => 1.0,
    };
    let (mut cols, mut rows) = (vec![1.0; n], vec![1.0; n]);
    for _ in 0..2 {
        for j in 0..n {
            let mx = (0..n).fold(0.0f64, |m, i| {
                m.max(a[(i, j)].abs() + omega * e[(i, j)].abs())
            });
            let f = pow2(mx);
            e.column_mut(j).scale_mut(f);
            a.column_mut(j).scale_mut(f);
            c[j] *= f;
            cols[j] *= f;
        }
        for i in 0..n {
            let mx = (0..n).fold(0.0f64, |m, j| {
                m.max(a[(i, j)].abs() + omega * e[(i, j)].abs())
            });
            let f = pow2(mx);
            e.row_mut(i).scale_mut(f);
            a.row_mut(i).scale_mut(f);
            b[i] *= f;
            rows[i] *= f;
        }
    }
    (cols, rows)
}

/// Rows and columns of one connected block of E's nonzero pattern.
pub(super) type Block = (Vec<usize>, Vec<usize>);

/// Connected components of E's nonzero pattern (rows and columns linked by a nonzero), and
/// the rows and columns E does not use at all.
pub(super) fn components(e: &DMatrix<f64>) -> (Vec<Block>, Vec<usize>, Vec<usize>) {
    let n = e.nrows();
    // Union–find over rows 0..n and columns n..2n.
    let mut parent: Vec<usize> = (0..2 * n).collect();
    fn find(p: &mut [usize], mut i: usize) -> usize {
        while p[i] != i {
            p[i] = p[p[i]];
            i = p[i];
        }
        i
    }
    for j in 0..n {
        for i in 0..n {
            if e[(i, j)] != 0.0 {
                let (ri, rj) = (find(&mut parent, i), find(&mut parent, n + j));
                if ri != rj {
                    parent[ri] = rj;
                }
            }
        }
    }
    let row_used: Vec<bool> = (0..n).map(|i| e.row(i).iter().any(|&x| x != 0.0)).collect();
    let col_used: Vec<bool> = (0..n)
        .map(|j| e.column(j).iter().any(|&x| x != 0.0))
        .collect();
    let mut comps: std::collections::BTreeMap<usize, Block> = Default::default();
    for i in (0..n).filter(|&i| row_used[i]) {
        comps.entry(find(&mut parent, i)).or_default().0.push(i);
    }
    for j in (0..n).filter(|&j| col_used[j]) {
        comps.entry(find(&mut parent, n + j)).or_default().1.push(j);
    }
    let unused_rows = (0..n).filter(|&i| !row_used[i]).collect();
    let unused_cols = (0..n).filter(|&j| !col_used[j]).collect();
    (comps.into_values().collect(), unused_rows, unused_cols)
}

/// Rank tolerance of one block of E.
pub(super) fn block_tol(block: &DMatrix<f64>) -> f64 {
    64.0 * f64::EPSILON * block.nrows().max(block.ncols()) as f64 * block.amax()
}

/// Scale, split E by SVD block by block, and return the semi-explicit form together with the
/// scaled descriptor (for diagnostics).
fn split(desc: &Descriptor) -> (Semi, DMatrix<f64>, DMatrix<f64>) {
    let (mut e, mut a) = (desc.e.clone(), desc.a.clone());
    let mut b = desc.b.clone();
    let mut c = desc.c.clone();
    equilibrate_pencil(&mut e, &mut a, &mut b, &mut c);
    let n = e.nrows();
    let (e_scaled, a_scaled) = (e.clone(), a.clone());
    let (comps, unused_rows, unused_cols) = components(&e);

    let mut dyn_rows = Vec::new();
    let mut dyn_cols = Vec::new();
    let mut sig = Vec::new();
    let mut alg_rows = unused_rows;
    let mut alg_cols = unused_cols;
    for (rows, cols) in &comps {
        let block = select(&e, rows, cols);
        let (u, s, v) = full_svd(&block, block_tol(&block));
        // Rows: A[rows, :] ← Uᵀ A[rows, :]; columns: A[:, cols] ← A[:, cols] V.
        let ar = u.transpose() * select(&a, rows, &(0..n).collect::<Vec<_>>());
        let br = u.transpose() * DVector::from_fn(rows.len(), |i, _| b[rows[i]]);
        for (k, &i) in rows.iter().enumerate() {
            a.row_mut(i).copy_from(&ar.row(k));
            b[i] = br[k];
        }
        let ac = select(&a, &(0..n).collect::<Vec<_>>(), cols) * &v;
        let cc = v.transpose() * DVector::from_fn(cols.len(), |j, _| c[cols[j]]);
        for (k, &j) in cols.iter().enumerate() {
            a.column_mut(j).copy_from(&ac.column(k));
            c[j] = cc[k];
        }
        let r = s.len();
        dyn_rows.extend_from_slice(&rows[..r]);
        dyn_cols.extend_from_slice(&cols[..r]);
        sig.extend_from_slice(&s);
        alg_rows.extend_from_slice(&rows[r..]);
        alg_cols.extend_from_slice(&cols[r..]);
    }
    debug_assert_eq!(alg_rows.len(), alg_cols.len());
    let mut a11 = select(&a, &dyn_rows, &dyn_cols);
    let mut a12 = select(&a, &dyn_rows, &alg_cols);
    let mut b1 = DMatrix::from_fn(dyn_rows.len(), 1, |i, _| b[dyn_rows[i]]);
    for (k, s) in sig.iter().enumerate() {
        a11.row_mut(k).scale_mut(1.0 / s);
        a12.row_mut(k).scale_mut(1.0 / s);
        b1.row_mut(k).scale_mut(1.0 / s);
    }
    let a21 = select(&a, &alg_rows, &dyn_cols);
    let a22 = select(&a, &alg_rows, &alg_cols);
    let alg_scale = a21.norm().hypot(a22.norm());
    let semi = Semi {
        a11,
        a12,
        a21,
        a22,
        alg_scale,
        b1,
        b2: DMatrix::from_fn(alg_rows.len(), 1, |i, _| b[alg_rows[i]]),
        c1: DVector::from_fn(dyn_cols.len(), |j, _| c[dyn_cols[j]]),
        c2: DVector::from_fn(alg_cols.len(), |j, _| c[alg_cols[j]]),
        d: vec![0.0],
        dabs: vec![0.0],
    };
    (semi, e_scaled, a_scaled)
}

/// Null vectors of the pencil at a generic point, for naming the culprit of a singularity.
fn null_vectors(e: &DMatrix<f64>, a: &DMatrix<f64>) -> ReduceError {
    let n = e.nrows();
    let en = e.norm();
    let w = if en > 0.0 { a.norm() / en } else { 1.0 };
    let s0 = Complex64::new(0.3, 0.953_939_2) * w;
    let m = DMatrix::from_fn(n, n, |i, j| s0 * e[(i, j)] - a[(i, j)]);
    let unnamed = || ReduceError::Singular {
        right: vec![0.0; n],
        left: vec![0.0; n],
    };
    if m.iter().any(|x| !(x.re.is_finite() && x.im.is_finite())) {
        return unnamed();
    }
    // Bounded: the culprit is only named, so an SVD that does not converge names no one.
    let Some(svd) = nalgebra::SVD::try_new(m, true, true, f64::EPSILON, 100 * n.max(1)) else {
        return unnamed();
    };
    let k = (0..n)
        .min_by(|&i, &j| svd.singular_values[i].total_cmp(&svd.singular_values[j]))
        .unwrap_or(0);
    let (Some(u), Some(vt)) = (svd.u, svd.v_t) else {
        return unnamed();
    };
    ReduceError::Singular {
        right: (0..n).map(|j| vt[(k, j)].norm()).collect(),
        left: (0..n).map(|i| u[(i, k)].norm()).collect(),
    }
}

/// Equilibrate the algebraic rows (and their unknowns) by powers of two: rows at rounding
/// level of the system's natural size become exact zeros, the others get unit size.
fn equilibrate(s: &mut Semi) {
    let m = s.a22.nrows();
    for i in 0..m {
        let mx = s.a21.row(i).amax().max(s.a22.row(i).amax());
        if mx <= RANK_TOL * s.alg_scale {
            s.a21.row_mut(i).fill(0.0);
            s.a22.row_mut(i).fill(0.0);
            continue;
        }
        let f = pow2(mx);
        s.a21.row_mut(i).scale_mut(f);
        s.a22.row_mut(i).scale_mut(f);
        s.b2.row_mut(i).scale_mut(f);
    }
    for j in 0..m {
        let mx = s.a22.column(j).amax();
        if mx > 0.0 {
            let f = pow2(mx);
            s.a22.column_mut(j).scale_mut(f);
            s.a12.column_mut(j).scale_mut(f);
            s.c2[j] *= f;
        }
    }
}

/// Add column `src` (length `rows`) into `m` at column `col`, growing `m` as needed.
fn widen(m: &DMatrix<f64>, cols: usize) -> DMatrix<f64> {
    let mut out = DMatrix::zeros(m.nrows(), cols);
    out.columns_mut(0, m.ncols()).copy_from(m);
    out
}

/// Reduce the descriptor system to a state space.
pub(crate) fn reduce(desc: &Descriptor) -> Result<Reduced, ReduceError> {
    let (mut s, e_scaled, a_scaled) = split(desc);
    while s.a22.nrows() > 0 {
        s = step(&mut s).ok_or_else(|| null_vectors(&e_scaled, &a_scaled))?;
    }
    index_one(s)
}

/// One elimination step of the algebraic unknowns (module documentation): the next
/// semi-explicit system, `None` when the pencil is singular.
fn step(s: &mut Semi) -> Option<Semi> {
    let r = s.a11.nrows();
    let m = s.a22.nrows();
    let ku = s.d.len();
    equilibrate(s);
    let sigma_max = s.a22.iter().fold(0.0f64, |m, x| m.max(x.abs()));
    let tol = RANK_TOL * sigma_max.max(1.0) * (m as f64).sqrt();
    let (p, sv, q) = full_svd(&s.a22, tol);
    let qn = sv.len();
    let pa = p.columns(0, qn).into_owned();
    let pb = p.columns(qn, m - qn).into_owned();
    let qa = q.columns(0, qn).into_owned();
    let qb = q.columns(qn, m - qn).into_owned();
    let sinv = DMatrix::from_diagonal(&DVector::from_iterator(qn, sv.iter().map(|x| 1.0 / x)));
    // wa = −X η − Y U
    let x = &sinv * pa.transpose() * &s.a21;
    let y = &sinv * pa.transpose() * &s.b2;
    let a12a = &s.a12 * &qa;
    let c2a = qa.transpose() * &s.c2;
    let a_hat = &s.a11 - &a12a * &x;
    let b_hat = &s.b1 - &a12a * &y;
    let c_hat = &s.c1 - x.transpose() * &c2a;
    let mut d = s.d.clone();
    let mut dabs = s.dabs.clone();
    for j in 0..ku {
        let col = y.column(j);
        d[j] -= c2a.dot(&col);
        dabs[j] += c2a.norm() * col.norm();
    }
    if qn == m {
        return Some(Semi {
            a11: a_hat,
            a12: DMatrix::zeros(r, 0),
            a21: DMatrix::zeros(0, r),
            a22: DMatrix::zeros(0, 0),
            b1: b_hat,
            b2: DMatrix::zeros(0, ku),
            c1: c_hat,
            c2: DVector::zeros(0),
            d,
            alg_scale: 0.0,
            dabs,
        });
    }
    let elim = Eliminated {
        a_hat,
        b_hat,
        c_hat,
        d,
        dabs,
        tol,
    };
    constrain(s, elim, &pb, &qb)
}

/// The part of one step that the eliminated unknowns leave: the Schur complement.
struct Eliminated {
    a_hat: DMatrix<f64>,
    b_hat: DMatrix<f64>,
    c_hat: DVector<f64>,
    d: Vec<f64>,
    dabs: Vec<f64>,
    tol: f64,
}

/// The constraints a rank-deficient algebraic block leaves on the dynamic unknowns, solved
/// for: the order drops and the constrained unknowns' rows become the next algebraic rows.
fn constrain(s: &Semi, elim: Eliminated, pb: &DMatrix<f64>, qb: &DMatrix<f64>) -> Option<Semi> {
    let Eliminated {
        a_hat,
        b_hat,
        c_hat,
        mut d,
        mut dabs,
        tol,
    } = elim;
    let (r, m, ku) = (s.a11.nrows(), s.a22.nrows(), s.d.len());
    let qn = m - pb.ncols();
    // Constraints K η + L U = 0 on the dynamic unknowns.
    let k = pb.transpose() * &s.a21;
    let l = pb.transpose() * &s.b2;
    let a12b = &s.a12 * qb;
    let c2b = qb.transpose() * &s.c2;
    let (uk, sk, vk) = full_svd(&k, tol);
    let pk = sk.len();
    if pk < m - qn {
        return None;
    }
    let sk_inv = DMatrix::from_diagonal(&DVector::from_iterator(pk, sk.iter().map(|x| 1.0 / x)));
    // ξ = V1ᵀ η = G U
    let g = -(sk_inv * uk.transpose() * l);
    let v1 = vk.columns(0, pk).into_owned();
    let v2 = vk.columns(pk, r - pk).into_owned();
    let grows = g.iter().any(|&x| x != 0.0);
    let ku2 = if grows { ku + 1 } else { ku };
    let av1g = &a_hat * &v1 * &g;
    let b1 = widen(&(v2.transpose() * (&av1g + &b_hat)), ku2);
    let mut b2 = widen(&(v1.transpose() * (&av1g + &b_hat)), ku2);
    if grows {
        for j in 0..ku {
            let col = g.column(j).into_owned();
            let mut dst = b2.column_mut(j + 1);
            dst -= col;
        }
    }
    let cv1 = v1.transpose() * &c_hat;
    d.resize(ku2, 0.0);
    dabs.resize(ku2, 0.0);
    for j in 0..ku {
        let col = g.column(j);
        d[j] += cv1.dot(&col);
        dabs[j] += cv1.norm() * col.norm();
    }
    Some(Semi {
        a11: v2.transpose() * &a_hat * &v2,
        a12: v2.transpose() * &a12b,
        a21: v1.transpose() * &a_hat * &v2,
        a22: v1.transpose() * &a12b,
        b1,
        b2,
        c1: v2.transpose() * &c_hat,
        c2: c2b,
        d,
        alg_scale: a_hat.norm().hypot(a12b.norm()),
        dabs,
    })
}

/// The index-1 form reached, x' = A x + Σ B_j u^(j), y = C x + Σ D_j u^(j): input
/// derivatives moved out of the state equation, rounding-level feed-through dropped, the
/// state space balanced.
fn index_one(s: Semi) -> Result<Reduced, ReduceError> {
    let a = s.a11;
    let mut b = s.b1;
    let c = s.c1;
    let (mut d, mut dabs) = (s.d, s.dabs);
    for j in (1..b.ncols()).rev() {
        let bj = b.column(j).into_owned();
        if bj.iter().all(|&x| x == 0.0) {
            continue;
        }
        let abj = &a * &bj;
        let mut prev = b.column_mut(j - 1);
        prev += abj;
        d[j - 1] += c.dot(&bj);
        dabs[j - 1] += c.norm() * bj.norm();
        b.column_mut(j).fill(0.0);
    }
    for (dj, sj) in d.iter_mut().zip(&dabs) {
        *dj = super::function::unless_rounding(*dj, *sj);
    }
    let mut b0 = b.column(0).into_owned();
    let mut a = a;
    let mut c = c;
    if a.iter()
        .chain(b0.iter())
        .chain(c.iter())
        .any(|x| !x.is_finite())
        || !d[0].is_finite()
    {
        return Err(ReduceError::Numerical(
            "the reduction produced non-finite numbers (badly conditioned circuit)".into(),
        ));
    }
    balance(&mut a, &mut b0, &mut c);
    let mut improper: Vec<f64> = d[1..].to_vec();
    while improper.last() == Some(&0.0) {
        improper.pop();
    }
    Ok(Reduced {
        ss: StateSpace {
            a,
            b: b0,
            c,
            d: d[0],
        },
        improper,
    })
}

/// Balance the state space by a diagonal similarity with powers of two (Parlett & Reinsch
/// 1969) applied to the augmented matrix [[A, B], [C, 0]] with the input/output index held
/// fixed, so that B and C are balanced against A too: `A ← D⁻¹AD`, `B ← D⁻¹B`, `C ← CD`.
pub(crate) fn balance(a: &mut DMatrix<f64>, b: &mut DVector<f64>, c: &mut DVector<f64>) {
    let n = a.nrows();
    let mut m = DMatrix::zeros(n + 1, n + 1);
    m.view_mut((0, 0), (n, n)).copy_from(a);
    for i in 0..n {
        m[(i, n)] = b[i];
        m[(n, i)] = c[i];
    }
    let mut d = vec![1.0; n];
    for _ in 0..100 {
        let mut done = true;
        for i in 0..n {
            let mut col = 0.0;
            let mut row = 0.0;
            for j in 0..=n {
                if j != i {
                    col += m[(j, i)].abs();
                    row += m[(i, j)].abs();
                }
            }
            // No factor for a zero or non-finite norm; the loops are bounded by the exponent
            // range (an infinite norm would never come down).
            if col == 0.0 || row == 0.0 || !(col + row).is_finite() {
                continue;
            }
            let s = col + row;
            let mut f = 1.0f64;
            let mut steps = 0;
            while col < row / 2.0 && steps < 1100 {
                f *= 2.0;
                col *= 4.0;
                steps += 1;
            }
            while col > row * 2.0 && steps < 2200 {
                f /= 2.0;
                col /= 4.0;
                steps += 1;
            }
            if !(f.is_finite() && f > 0.0) {
                continue;
            }
            if (col + row) / f < 0.95 * s {
                done = false;
                d[i] *= f;
                m.row_mut(i).scale_mut(1.0 / f);
                m.column_mut(i).scale_mut(f);
            }
        }
        if done {
            break;
        }
    }
    a.copy_from(&m.view((0, 0), (n, n)));
    for i in 0..n {
        b[i] = m[(i, n)];
        c[i] = m[(n, i)];
    }
}
