//! Modes of a general state space: poles and right eigenvectors from faer's dense
//! non-symmetric eigen-decomposition (real Schur form, then back-substitution), left
//! eigenvectors as the rows of V⁻¹, residues r = (c·v)(w·b). Clusters of numerically
//! indistinguishable eigenvalues (Jordan blocks, e.g. buffered identical sections) get their
//! Laurent coefficients from contour integrals of the resolvent (trapezoid rule on a circle),
//! with the resolvent solved on the Hessenberg form in O(n²) per point.

use faer::linalg::solvers::DenseSolveCore;
use faer::{Mat, c64};
use nalgebra::DMatrix;
use num_complex::Complex64;

use super::dense::to_faer;
use super::function::{
    CircuitFunction, CircuitMode, all_finite, drop_negligible, sort_modes, unless_rounding,
};
use super::spec::StateSpace;

type C = Complex64;

const ZERO: C = C::new(0.0, 0.0);

/// Analyse a (balanced) state space into its network function. `full`: the zeros (for
/// display) too, and faer's eigen-decomposition at every order; a tolerance case (`false`)
/// skips the zeros and, at small orders, takes the faster route of [`eigen_small`].
pub(crate) fn function(
    ss: &StateSpace,
    improper: Vec<f64>,
    full: bool,
) -> Result<CircuitFunction, String> {
    let n = ss.order();
    // h(0⁺) = C·B; a sum that cancels to rounding level (relative degree ≥ 2) is exactly 0.
    let h0 = ss.c.dot(&ss.b);
    let h0_scale = ss.c.norm() * ss.b.norm();
    let h0_ivt = unless_rounding(h0, h0_scale);
    let mut modes = if n == 0 {
        Vec::new()
    } else {
        modes_of(ss, full)?
    };
    sort_modes(&mut modes);
    Ok(CircuitFunction {
        modes,
        direct: ss.d,
        improper,
        zeros: if full {
            super::zeros::zeros(ss)
        } else {
            Vec::new()
        },
        zero_scale: ss.a.norm(),
        h0_ivt,
    })
}

/// Eigenvalues, right eigenvectors (columns) and V⁻¹ of a real matrix, conjugate pairs made
/// exact (upper member first, its partner the exact conjugate).
struct Eigen {
    lam: Vec<C>,
    v: Mat<c64>,
    vinv: Mat<c64>,
    /// For each eigenvalue, the index of the upper member it is the conjugate of.
    conj_of: Vec<Option<usize>>,
}

fn eigen(a: &DMatrix<f64>) -> Result<Eigen, String> {
    let n = a.nrows();
    let fa = to_faer(a);
    let evd = fa
        .eigen()
        .map_err(|_| "the eigenvalue iteration did not converge".to_string())?;
    let mut lam: Vec<C> = (0..n).map(|i| evd.S()[i]).collect();
    let mut v = evd.U().to_owned();
    let mut conj_of = vec![None; n];
    let mut k = 0;
    while k < n {
        if lam[k].im != 0.0 && k + 1 < n {
            // faer lists a complex pair as adjacent conjugates; put the upper member first.
            if lam[k].im < 0.0 {
                lam.swap(k, k + 1);
                for i in 0..n {
                    let t = v[(i, k)];
                    v[(i, k)] = v[(i, k + 1)];
                    v[(i, k + 1)] = t;
                }
            }
            lam[k + 1] = lam[k].conj();
            for i in 0..n {
                v[(i, k + 1)] = v[(i, k)].conj();
            }
            conj_of[k + 1] = Some(k);
            k += 2;
        } else {
            lam[k].im = 0.0;
            k += 1;
        }
    }
    let vinv = v.partial_piv_lu().inverse();
    Ok(Eigen {
        lam,
        v,
        vinv,
        conj_of,
    })
}

/// Orders up to which a tolerance case takes [`eigen_small`]: there faer's set-up costs
/// several times the work itself.
const SMALL_ORDER: usize = 16;
/// Sweep limit of nalgebra's Francis iteration (per eigenvalue, as LAPACK allows 30).
const SCHUR_SWEEPS: usize = 30;

/// The eigenvalues of a small matrix from nalgebra's real Schur form A = QTQᵀ (Francis
/// double-shift QR, bounded), the right eigenvectors by back-substitution in T (as LAPACK's
/// trevc does), V⁻¹ by LU. `None` when any step fails; the caller then takes faer's
/// decomposition.
fn eigen_small(a: &DMatrix<f64>) -> Option<Eigen> {
    let n = a.nrows();
    let schur = nalgebra::linalg::Schur::try_new(a.clone(), f64::EPSILON, SCHUR_SWEEPS * n)?;
    let (q, t) = schur.unpack();
    let (lam, start, conj_of) = schur_eigenvalues(&t);
    let tnorm = t.norm();
    let mut v = DMatrix::<C>::zeros(n, n);
    for k in 0..n {
        let col = match conj_of[k] {
            Some(u) => v.column(u).map(|x| x.conj()),
            None => schur_vector(&t, &q, start[k], lam[k], tnorm)?,
        };
        v.set_column(k, &col);
    }
    let vinv = v.clone().lu().try_inverse()?;
    let to = |m: &DMatrix<C>| Mat::<c64>::from_fn(n, n, |i, j| m[(i, j)]);
    let ok = v.iter().chain(vinv.iter()).all(|x| x.is_finite());
    ok.then(|| Eigen {
        lam,
        v: to(&v),
        vinv: to(&vinv),
        conj_of,
    })
}

/// The eigenvalues of a real quasi-triangular T, complex pairs upper member first; for each,
/// where its diagonal block starts (`(k, true)` for a 2 × 2 block at k, k+1) and, for a
/// lower member, the index of its upper one.
#[allow(clippy::type_complexity)]
fn schur_eigenvalues(t: &DMatrix<f64>) -> (Vec<C>, Vec<(usize, bool)>, Vec<Option<usize>>) {
    let n = t.nrows();
    let (mut lam, mut start) = (Vec::with_capacity(n), Vec::with_capacity(n));
    let mut conj_of = vec![None; n];
    let mut k = 0;
    while k < n {
        if k + 1 < n && t[(k + 1, k)] != 0.0 {
            let (p, q, r, s) = (t[(k, k)], t[(k, k + 1)], t[(k + 1, k)], t[(k + 1, k + 1)]);
            let half = 0.5 * (p - s);
            let disc = half * half + q * r;
            let mid = 0.5 * (p + s);
            if disc < 0.0 {
                let im = (-disc).sqrt();
                lam.extend([C::new(mid, im), C::new(mid, -im)]);
                conj_of[k + 1] = Some(k);
            } else {
                let root = disc.sqrt().copysign(half);
                lam.extend([C::new(mid + root, 0.0), C::new(mid - root, 0.0)]);
            }
            start.extend([(k, true), (k, true)]);
            k += 2;
        } else {
            lam.push(C::new(t[(k, k)], 0.0));
            start.push((k, false));
            k += 1;
        }
    }
    (lam, start, conj_of)
}

/// The unit right eigenvector Q·y of A at eigenvalue `l` of T, from (T − λI)y = 0 solved
/// upwards from the eigenvalue's diagonal block (`start`); divisors at rounding level of ‖T‖
/// are raised to it, as trevc does.
fn schur_vector(
    t: &DMatrix<f64>,
    q: &DMatrix<f64>,
    start: (usize, bool),
    l: C,
    tnorm: f64,
) -> Option<nalgebra::DVector<C>> {
    let n = t.nrows();
    let small = (f64::EPSILON * tnorm).max(f64::MIN_POSITIVE);
    let guard = |d: C| {
        if d.norm() < small {
            C::new(small, 0.0)
        } else {
            d
        }
    };
    let mut y = vec![ZERO; n];
    let (k, pair) = start;
    if pair {
        let (p, qq, r, s) = (t[(k, k)], t[(k, k + 1)], t[(k + 1, k)], t[(k + 1, k + 1)]);
        // A null vector of the block from its first row, or its second where that is larger.
        let (a0, a1) = (C::new(qq, 0.0), l - p);
        let (b0, b1) = (C::new(s, 0.0) - l, C::new(-r, 0.0));
        let first = a0.norm_sqr() + a1.norm_sqr() >= b0.norm_sqr() + b1.norm_sqr();
        (y[k], y[k + 1]) = if first { (a0, a1) } else { (b0, b1) };
    } else {
        y[k] = C::new(1.0, 0.0);
    }
    let top = if pair { k + 2 } else { k + 1 };
    let rhs = |y: &[C], row: usize, from: usize| -> C {
        -(from..top).map(|j| y[j] * t[(row, j)]).sum::<C>()
    };
    let mut i = k;
    while i > 0 {
        let row = i - 1;
        if row >= 1 && t[(row, row - 1)] != 0.0 {
            let (u, w) = (row - 1, row);
            let (a11, a12) = (C::new(t[(u, u)], 0.0) - l, C::new(t[(u, w)], 0.0));
            let (a21, a22) = (C::new(t[(w, u)], 0.0), C::new(t[(w, w)], 0.0) - l);
            let (r1, r2) = (rhs(&y, u, w + 1), rhs(&y, w, w + 1));
            let det = guard(a11 * a22 - a12 * a21);
            y[u] = (r1 * a22 - a12 * r2) / det;
            y[w] = (a11 * r2 - a21 * r1) / det;
            i -= 2;
        } else {
            y[row] = rhs(&y, row, row + 1) / guard(C::new(t[(row, row)], 0.0) - l);
            i -= 1;
        }
    }
    let mut v =
        nalgebra::DVector::<C>::from_fn(n, |r, _| (0..top).map(|j| y[j] * q[(r, j)]).sum::<C>());
    let norm = v.norm();
    if !(norm.is_finite() && norm > 0.0) {
        return None;
    }
    v /= C::new(norm, 0.0);
    Some(v)
}

fn modes_of(ss: &StateSpace, full: bool) -> Result<Vec<CircuitMode>, String> {
    let n = ss.order();
    let small = (!full && n <= SMALL_ORDER)
        .then(|| eigen_small(&ss.a))
        .flatten();
    let mut e = match small {
        Some(e) => e,
        None => eigen(&ss.a)?,
    };
    let anorm = ss.a.norm();
    refine_slow(ss, &mut e, anorm);
    let bt: Vec<C> = (0..n)
        .map(|k| (0..n).map(|j| e.vinv[(k, j)] * ss.b[j]).sum())
        .collect();
    let ct: Vec<C> = (0..n)
        .map(|k| (0..n).map(|i| e.v[(i, k)] * ss.c[i]).sum())
        .collect();
    // Residues and eigenvalue condition numbers s = |wᵀv|/(‖w‖‖v‖) with wᵀv = 1.
    let mut residue = vec![ZERO; n];
    let mut cond = vec![0.0; n];
    for k in 0..n {
        let r = ct[k] * bt[k];
        residue[k] = if e.lam[k].im == 0.0 {
            C::new(r.re, 0.0)
        } else {
            r
        };
        let nv = (0..n).map(|i| e.v[(i, k)].norm_sqr()).sum::<f64>().sqrt();
        let nw = (0..n)
            .map(|j| e.vinv[(k, j)].norm_sqr())
            .sum::<f64>()
            .sqrt();
        let s = 1.0 / (nv * nw);
        cond[k] = if s.is_finite() { s } else { 0.0 };
    }
    let clusters = clusters(&e.lam, &cond, anorm);
    let mut modes = Vec::new();
    let mut resolvent: Option<Hessenberg> = None;
    for members in &clusters {
        if members.len() == 1 {
            let k = members[0];
            if e.conj_of[k].is_none() {
                modes.push(CircuitMode {
                    pole: e.lam[k],
                    residues: vec![residue[k]],
                });
                if e.lam[k].im != 0.0 {
                    modes.push(CircuitMode {
                        pole: e.lam[k].conj(),
                        residues: vec![residue[k].conj()],
                    });
                }
            }
            continue;
        }
        let h = resolvent.get_or_insert_with(|| Hessenberg::new(ss));
        cluster_modes(h, &e.lam, members, &mut modes);
    }
    if !all_finite(&modes) {
        return Err("the modal analysis produced non-finite numbers".into());
    }
    Ok(drop_negligible(modes))
}

/// Small eigenvalues carry the absolute error ε‖A‖ of the Schur form, a large relative error
/// for the slow poles of a stiff network. Each is re-estimated from the two-sided quotient
/// of A⁻¹ (whose largest eigenvalues are A's smallest, found with relative accuracy):
/// 1/λ = wᵀA⁻¹v / wᵀv. One LU of A, then O(n²) per refined pole.
fn refine_slow(ss: &StateSpace, e: &mut Eigen, anorm: f64) {
    let n = ss.order();
    let slow = |l: C| l.norm() <= 2e-4 * anorm;
    if !e.lam.iter().any(|&l| slow(l)) {
        return;
    }
    let lu = to_faer(&ss.a).partial_piv_lu();
    let allowed = 1e3 * f64::EPSILON * anorm;
    for k in 0..n {
        if e.conj_of[k].is_some() || !slow(e.lam[k]) {
            continue;
        }
        let re = Mat::<f64>::from_fn(n, 2, |i, j| {
            if j == 0 {
                e.v[(i, k)].re
            } else {
                e.v[(i, k)].im
            }
        });
        let x = faer::linalg::solvers::Solve::solve(&lu, &re);
        let (mut wx, mut wv) = (ZERO, ZERO);
        for i in 0..n {
            let w = e.vinv[(k, i)];
            wx += w * C::new(x[(i, 0)], x[(i, 1)]);
            wv += w * e.v[(i, k)];
        }
        let refined = wv / wx;
        if refined.is_finite() && (refined - e.lam[k]).norm() <= allowed {
            let refined = if e.lam[k].im == 0.0 {
                C::new(refined.re, 0.0)
            } else {
                refined
            };
            e.lam[k] = refined;
            if k + 1 < n && e.conj_of[k + 1] == Some(k) {
                e.lam[k + 1] = refined.conj();
            }
        }
    }
}

/// Groups of eigenvalues whose uncertainty discs (ε‖A‖/s) overlap, or that agree to about
/// √ε (the scatter a computed double eigenvalue shows whatever the scaling).
fn clusters(lam: &[C], cond: &[f64], anorm: f64) -> Vec<Vec<usize>> {
    let ne = lam.len();
    let radius: Vec<f64> = (0..ne)
        .map(|k| {
            let r = 1e3 * f64::EPSILON * anorm / cond[k].max(1e-300);
            r.min(0.01 * lam[k].norm())
        })
        .collect();
    let mut parent: Vec<usize> = (0..ne).collect();
    fn find(p: &mut [usize], mut i: usize) -> usize {
        while p[i] != i {
            p[i] = p[p[i]];
            i = p[i];
        }
        i
    }
    // Sorted by real part, only neighbours within the largest radius need comparing.
    let mut order: Vec<usize> = (0..ne).collect();
    order.sort_by(|&a, &b| lam[a].re.total_cmp(&lam[b].re));
    let rmax = radius.iter().copied().fold(0.0, f64::max);
    let lmax = lam.iter().map(|l| l.norm()).fold(0.0, f64::max);
    let reach = 2.0 * rmax + 1e-7 * lmax;
    for (x, &i) in order.iter().enumerate() {
        for &j in &order[x + 1..] {
            if lam[j].re - lam[i].re > reach {
                break;
            }
            let gap = (lam[i] - lam[j]).norm();
            let near = 1e-7 * lam[i].norm().max(lam[j].norm());
            if gap <= radius[i] + radius[j] || gap <= near {
                let (a, b) = (find(&mut parent, i), find(&mut parent, j));
                if a != b {
                    parent[a] = b;
                }
            }
        }
    }
    let mut groups: std::collections::BTreeMap<usize, Vec<usize>> = Default::default();
    for k in 0..ne {
        groups.entry(find(&mut parent, k)).or_default().push(k);
    }
    groups.into_values().collect()
}

/// The resolvent cᵀ(sI − A)⁻¹b on the Hessenberg form A = Q H Qᵀ (nalgebra), each point
/// solved by Gaussian elimination with partial pivoting along the subdiagonal: O(n²).
struct Hessenberg {
    h: DMatrix<f64>,
    b: Vec<f64>,
    c: Vec<f64>,
}

impl Hessenberg {
    fn new(ss: &StateSpace) -> Hessenberg {
        let hess = ss.a.clone().hessenberg();
        let (q, h) = hess.unpack();
        let b = (q.transpose() * &ss.b).iter().copied().collect();
        let c = (q.transpose() * &ss.c).iter().copied().collect();
        Hessenberg { h, b, c }
    }

    /// cᵀ(sI − H)⁻¹b.
    fn transfer(&self, s: C) -> C {
        let n = self.b.len();
        let mut m: Vec<Vec<C>> = (0..n)
            .map(|i| {
                (0..n)
                    .map(|j| {
                        let d = if i == j { s } else { ZERO };
                        d - self.h[(i, j)]
                    })
                    .collect()
            })
            .collect();
        let mut x: Vec<C> = self.b.iter().map(|&v| C::new(v, 0.0)).collect();
        for k in 0..n.saturating_sub(1) {
            // Only row k + 1 has a nonzero below the diagonal in column k.
            if m[k + 1][k].norm() > m[k][k].norm() {
                m.swap(k, k + 1);
                x.swap(k, k + 1);
            }
            if m[k][k] == ZERO {
                continue;
            }
            let f = m[k + 1][k] / m[k][k];
            let (top, rest) = m.split_at_mut(k + 1);
            for (dst, src) in rest[0][k..].iter_mut().zip(&top[k][k..]) {
                *dst -= f * src;
            }
            let t = x[k];
            x[k + 1] -= f * t;
        }
        for k in (0..n).rev() {
            let acc: C = (k + 1..n).map(|j| m[k][j] * x[j]).sum();
            x[k] = (x[k] - acc) / m[k][k];
        }
        self.c.iter().zip(&x).map(|(c, x)| x * *c).sum()
    }
}

/// Laurent coefficients of one cluster from the contour integral of the resolvent around
/// it: aⱼ = (1/2πi)∮ H(s)(s − centre)^(j−1) ds, trapezoid rule on a circle.
fn cluster_modes(h: &Hessenberg, lam: &[C], members: &[usize], out: &mut Vec<CircuitMode>) {
    let ne = lam.len();
    let m = members.len();
    let mut centre = members.iter().map(|&k| lam[k]).sum::<C>() / m as f64;
    let self_conj = centre.im.abs() <= 1e-12 * centre.norm();
    if !self_conj && centre.im < 0.0 {
        return; // mirrored from the upper cluster
    }
    if self_conj {
        centre.im = 0.0;
    }
    let spread = members
        .iter()
        .map(|&k| (lam[k] - centre).norm())
        .fold(0.0, f64::max);
    let dist = (0..ne)
        .filter(|k| !members.contains(k))
        .map(|k| (lam[k] - centre).norm())
        .fold(f64::INFINITY, f64::min);
    let rho = if dist.is_finite() {
        if dist / 2.0 > 2.0 * spread {
            dist / 2.0
        } else {
            (spread + dist) / 2.0
        }
    } else {
        let r = (centre.norm() / 2.0).max(4.0 * spread);
        if r > 0.0 { r } else { 1.0 }
    };
    let points = if dist.is_finite() && (rho / dist > 0.6 || spread / rho > 0.4) {
        256
    } else {
        64
    };
    let mut coeffs = vec![ZERO; m];
    for j in 0..points {
        let theta = 2.0 * std::f64::consts::PI * (j as f64 + 0.5) / points as f64;
        let z = C::from_polar(rho, theta);
        let hz = h.transfer(centre + z);
        let mut zk = z;
        for a in coeffs.iter_mut() {
            *a += hz * zk;
            zk *= z;
        }
    }
    for a in coeffs.iter_mut() {
        *a /= points as f64;
        if self_conj {
            a.im = 0.0;
        }
    }
    // Drop trailing coefficients at rounding level (a semisimple multiple eigenvalue).
    let scale = centre.norm().max(rho);
    let weight = |k: usize, a: &C| a.norm() / scale.powi(k as i32);
    let wmax = coeffs
        .iter()
        .enumerate()
        .map(|(k, a)| weight(k, a))
        .fold(0.0, f64::max);
    while coeffs.len() > 1 && weight(coeffs.len() - 1, &coeffs[coeffs.len() - 1]) <= 1e-7 * wmax {
        coeffs.pop();
    }
    if !self_conj {
        out.push(CircuitMode {
            pole: centre.conj(),
            residues: coeffs.iter().map(|a| a.conj()).collect(),
        });
    }
    out.push(CircuitMode {
        pole: centre,
        residues: coeffs,
    });
}
