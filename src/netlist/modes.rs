//! Modes of a state space: poles from the real Schur form, residues from eigenvectors of
//! the quasi-triangular factor, Laurent coefficients of eigenvalue clusters from contour
//! integrals of the resolvent.

use nalgebra::{DMatrix, Schur};
use num_complex::Complex64;

use super::StateSpace;
use crate::network::{Form, Mode, Network};

type C = Complex64;

const ZERO: C = C::new(0.0, 0.0);

/// Quasi-upper-triangular factor with its diagonal blocks.
struct Quasi {
    t: DMatrix<f64>,
    /// (start, size) of each diagonal block, size 1 or 2.
    blocks: Vec<(usize, usize)>,
    /// Denominators smaller than this are lifted to it (as in LAPACK's trevc).
    smin: f64,
}

impl Quasi {
    fn n(&self) -> usize {
        self.t.nrows()
    }

    fn col(&self, j: usize) -> &[f64] {
        let n = self.n();
        &self.t.as_slice()[j * n..(j + 1) * n]
    }

    /// Solve the block (T_bb − λI) x = rhs (transposed block when `trans`).
    fn block_solve(&self, (i, size): (usize, usize), lam: C, rhs: [C; 2], trans: bool) -> [C; 2] {
        let t = &self.t;
        if size == 1 {
            let mut den = t[(i, i)] - lam;
            if den.norm() < self.smin {
                den = C::new(self.smin, 0.0);
            }
            return [rhs[0] / den, ZERO];
        }
        let mut m11 = t[(i, i)] - lam;
        let (mut m12, mut m21) = (C::new(t[(i, i + 1)], 0.0), C::new(t[(i + 1, i)], 0.0));
        let mut m22 = t[(i + 1, i + 1)] - lam;
        if trans {
            std::mem::swap(&mut m12, &mut m21);
        }
        let mut det = m11 * m22 - m12 * m21;
        let size_est = m11.norm() + m12.norm() + m21.norm() + m22.norm();
        if det.norm() < self.smin * size_est.max(self.smin) {
            m11 += self.smin;
            m22 += self.smin;
            det = m11 * m22 - m12 * m21;
        }
        [
            (m22 * rhs[0] - m12 * rhs[1]) / det,
            (m11 * rhs[1] - m21 * rhs[0]) / det,
        ]
    }

    /// Solve (T − λI) x = rhs on the leading blocks `..upto` (block index), in place.
    fn back_substitute(&self, lam: C, x: &mut [C], upto: usize) {
        for bi in (0..upto).rev() {
            let (i, size) = self.blocks[bi];
            let sol = self.block_solve((i, size), lam, [x[i], x[(i + 1).min(x.len() - 1)]], false);
            for k in 0..size {
                x[i + k] = sol[k];
                let col = self.col(i + k);
                for (xr, &tr) in x[..i].iter_mut().zip(&col[..i]) {
                    *xr -= sol[k] * tr;
                }
            }
        }
    }

    /// Right eigenvector of T for the eigenvalue `lam` of block `bi`.
    fn right(&self, lam: C, bi: usize) -> Vec<C> {
        let (i, size) = self.blocks[bi];
        let mut y = vec![ZERO; self.n()];
        if size == 1 {
            y[i] = C::new(1.0, 0.0);
        } else {
            let (m11, m12) = (self.t[(i, i)] - lam, C::new(self.t[(i, i + 1)], 0.0));
            let (m21, m22) = (
                C::new(self.t[(i + 1, i)], 0.0),
                self.t[(i + 1, i + 1)] - lam,
            );
            let (a, b) = if m11.norm() + m12.norm() >= m21.norm() + m22.norm() {
                (m12, -m11)
            } else {
                (m22, -m21)
            };
            y[i] = a;
            y[i + 1] = b;
        }
        for k in 0..size {
            let col = self.col(i + k);
            let v = y[i + k];
            for r in 0..i {
                y[r] -= v * col[r];
            }
        }
        self.back_substitute(lam, &mut y, bi);
        y
    }

    /// Left eigenvector w (wᵀ T = λ wᵀ) for the eigenvalue `lam` of block `bi`.
    fn left(&self, lam: C, bi: usize) -> Vec<C> {
        let (i, size) = self.blocks[bi];
        let n = self.n();
        let mut w = vec![ZERO; n];
        if size == 1 {
            w[i] = C::new(1.0, 0.0);
        } else {
            let (m11, m12) = (self.t[(i, i)] - lam, C::new(self.t[(i, i + 1)], 0.0));
            let (m21, m22) = (
                C::new(self.t[(i + 1, i)], 0.0),
                self.t[(i + 1, i + 1)] - lam,
            );
            let (a, b) = if m11.norm() + m21.norm() >= m12.norm() + m22.norm() {
                (m21, -m11)
            } else {
                (m22, -m12)
            };
            w[i] = a;
            w[i + 1] = b;
        }
        for bj in bi + 1..self.blocks.len() {
            let (j, sz) = self.blocks[bj];
            let mut rhs = [ZERO; 2];
            for (k, r) in rhs.iter_mut().enumerate().take(sz) {
                let col = self.col(j + k);
                let mut acc = ZERO;
                for l in i..j {
                    acc += w[l] * col[l];
                }
                *r = -acc;
            }
            let sol = self.block_solve((j, sz), lam, rhs, true);
            w[j..j + sz].copy_from_slice(&sol[..sz]);
        }
        w
    }

    /// (sI − T)⁻¹ b.
    fn resolvent(&self, s: C, b: &[C]) -> Vec<C> {
        let mut x: Vec<C> = b.iter().map(|v| -v).collect();
        self.back_substitute(s, &mut x, self.blocks.len());
        x
    }
}

fn dot(a: &[C], b: &[C]) -> C {
    a.iter().zip(b).map(|(x, y)| x * y).sum()
}

fn norm(a: &[C]) -> f64 {
    a.iter().map(|x| x.norm_sqr()).sum::<f64>().sqrt()
}

struct Eig {
    lam: C,
    block: usize,
    /// Index of the eigenvalue this one is the conjugate of.
    conj_of: Option<usize>,
}

/// Analyse a (balanced) state space into a [`Network`].
pub(crate) fn network(ss: &StateSpace, improper: Vec<f64>) -> Result<Network, String> {
    let n = ss.order();
    // h(0⁺) = C·B; a sum that cancels to rounding level (relative degree ≥ 2) is exactly 0.
    let h0 = ss.c.dot(&ss.b);
    let h0_scale = ss.c.norm() * ss.b.norm();
    let h0_ivt = if h0.abs() <= 1e-11 * h0_scale {
        0.0
    } else {
        h0
    };
    let modes = if n == 0 { Vec::new() } else { modes_of(ss)? };
    let mut net = Network {
        form: Form::Netlist,
        modes,
        direct: ss.d,
        improper,
        zeros: zeros(ss),
        residues_known: true,
        h0_ivt,
    };
    net.modes.sort_by(|a, b| {
        a.pole
            .norm()
            .total_cmp(&b.pole.norm())
            .then(b.pole.im.total_cmp(&a.pole.im))
            .then(b.pole.re.total_cmp(&a.pole.re))
    });
    Ok(net)
}

/// Largest order for which zeros are computed (they are for display; powers of A in the
/// observability rows grow ill-conditioned for long chains).
const MAX_ZERO_ORDER: usize = 40;

/// Transmission zeros of a SISO state space, for display.
///
/// With D ≠ 0 they are the eigenvalues of A − B·C/D. Otherwise, with relative degree r
/// (first non-zero Markov parameter m = C·A^(r−1)·B), they are the eigenvalues of the zero
/// dynamics: A − B·C·A^r/m restricted to the kernel of [C; CA; …; CA^(r−1)], which that
/// matrix leaves invariant (Isidori, Nonlinear Control Systems, 1995, §4.3, linear case).
fn zeros(ss: &StateSpace) -> Vec<C> {
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
        let svd = obs.transpose().svd(true, false);
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
    let eig = zero_dynamics.complex_eigenvalues();
    let raw: Vec<C> = eig
        .iter()
        .map(|z| {
            // Zeros within rounding of the origin are the origin.
            if z.norm() <= 1e-9 * scale {
                C::new(0.0, 0.0)
            } else {
                *z
            }
        })
        .collect();
    crate::network::poly::cluster(&raw, scale)
        .into_iter()
        .flat_map(|(z, m)| std::iter::repeat_n(z, m))
        .collect()
}

fn modes_of(ss: &StateSpace) -> Result<Vec<Mode>, String> {
    let n = ss.order();
    let schur = Schur::try_new(ss.a.clone(), f64::EPSILON, 1000 + 100 * n)
        .ok_or("the eigenvalue iteration did not converge")?;
    let (q, t) = schur.unpack();
    let bt: Vec<C> = (q.transpose() * &ss.b)
        .iter()
        .map(|&x| C::new(x, 0.0))
        .collect();
    let ct: Vec<C> = (q.transpose() * &ss.c)
        .iter()
        .map(|&x| C::new(x, 0.0))
        .collect();
    let tnorm = t.norm();
    let mut blocks = Vec::new();
    let mut i = 0;
    while i < n {
        if i + 1 < n && t[(i + 1, i)] != 0.0 {
            blocks.push((i, 2));
            i += 2;
        } else {
            blocks.push((i, 1));
            i += 1;
        }
    }
    let qt = Quasi {
        t,
        blocks,
        smin: (f64::EPSILON * tnorm).max(f64::MIN_POSITIVE),
    };
    // Eigenvalues; a complex pair as upper member then its exact conjugate.
    let mut eigs: Vec<Eig> = Vec::new();
    for (bi, &(i, size)) in qt.blocks.iter().enumerate() {
        let t = &qt.t;
        if size == 1 {
            eigs.push(Eig {
                lam: C::new(t[(i, i)], 0.0),
                block: bi,
                conj_of: None,
            });
            continue;
        }
        let (a, b, c, d) = (t[(i, i)], t[(i, i + 1)], t[(i + 1, i)], t[(i + 1, i + 1)]);
        let half = (a + d) / 2.0;
        let disc = ((a - d) / 2.0).powi(2) + b * c;
        if disc >= 0.0 {
            let r = disc.sqrt();
            for lam in [half + r, half - r] {
                eigs.push(Eig {
                    lam: C::new(lam, 0.0),
                    block: bi,
                    conj_of: None,
                });
            }
        } else {
            let up = C::new(half, (-disc).sqrt());
            eigs.push(Eig {
                lam: up,
                block: bi,
                conj_of: None,
            });
            eigs.push(Eig {
                lam: up.conj(),
                block: bi,
                conj_of: Some(eigs.len() - 1),
            });
        }
    }
    let ne = eigs.len();
    // Small eigenvalues carry the absolute error ε‖A‖ of the Schur form, which is a large
    // relative error for the slow poles of a stiff network. Re-estimate each from the
    // two-sided quotient of A⁻¹ (the largest eigenvalues of A⁻¹ are the smallest of A, found
    // with relative accuracy): 1/λ = wᵀA⁻¹y / wᵀy with the right and left eigenvectors.
    let needs_refinement = eigs.iter().any(|e| e.lam.norm() <= 2e-4 * tnorm);
    let lu = if needs_refinement {
        ss.a.clone().lu()
    } else {
        DMatrix::<f64>::identity(1, 1).lu()
    };
    let invertible = needs_refinement && lu.is_invertible();
    for k in 0..ne {
        // Only where the Schur form's relative error ε‖T‖/|λ| could exceed 1e-12.
        if !invertible || eigs[k].conj_of.is_some() || eigs[k].lam.norm() > 2e-4 * tnorm {
            continue;
        }
        let y = qt.right(eigs[k].lam, eigs[k].block);
        let w = qt.left(eigs[k].lam, eigs[k].block);
        let to_orig = |v: &[C]| -> (nalgebra::DVector<f64>, nalgebra::DVector<f64>) {
            let re = &q * nalgebra::DVector::from_iterator(n, v.iter().map(|z| z.re));
            let im = &q * nalgebra::DVector::from_iterator(n, v.iter().map(|z| z.im));
            (re, im)
        };
        let (yr, yi) = to_orig(&y);
        let (wr, wi) = to_orig(&w);
        let (Some(xr), Some(xi)) = (lu.solve(&yr), lu.solve(&yi)) else {
            continue;
        };
        let cdot = |ar: &nalgebra::DVector<f64>,
                    ai: &nalgebra::DVector<f64>,
                    br: &nalgebra::DVector<f64>,
                    bi: &nalgebra::DVector<f64>| {
            C::new(ar.dot(br) - ai.dot(bi), ar.dot(bi) + ai.dot(br))
        };
        let mu = cdot(&wr, &wi, &xr, &xi) / cdot(&wr, &wi, &yr, &yi);
        let refined = C::new(1.0, 0.0) / mu;
        // Accept only a correction within the Schur form's own uncertainty.
        let allowed = 1e3 * f64::EPSILON * tnorm;
        if refined.is_finite() && (refined - eigs[k].lam).norm() <= allowed {
            let refined = if eigs[k].lam.im == 0.0 {
                C::new(refined.re, 0.0)
            } else {
                refined
            };
            eigs[k].lam = refined;
            if k + 1 < ne && eigs[k + 1].conj_of == Some(k) {
                eigs[k + 1].lam = refined.conj();
            }
        }
    }
    // Residues of simple poles and eigenvalue condition numbers.
    let mut residue = vec![ZERO; ne];
    let mut cond = vec![1.0; ne];
    for k in 0..ne {
        if let Some(u) = eigs[k].conj_of {
            residue[k] = residue[u].conj();
            cond[k] = cond[u];
            continue;
        }
        let y = qt.right(eigs[k].lam, eigs[k].block);
        let w = qt.left(eigs[k].lam, eigs[k].block);
        let wy = dot(&w, &y);
        let s = wy.norm() / (norm(&w) * norm(&y));
        cond[k] = if s.is_finite() { s } else { 0.0 };
        let r = dot(&ct, &y) * dot(&w, &bt) / wy;
        residue[k] = if eigs[k].lam.im == 0.0 {
            C::new(r.re, 0.0)
        } else {
            r
        };
    }
    // Clusters: eigenvalues whose uncertainty discs (ε‖T‖/s) overlap are indistinguishable.
    let radius: Vec<f64> = (0..ne)
        .map(|k| {
            let r = 1e3 * f64::EPSILON * tnorm / cond[k].max(1e-300);
            r.min(0.01 * eigs[k].lam.norm())
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
    for i in 0..ne {
        for j in i + 1..ne {
            // Overlapping uncertainty discs, or equal to about √ε (the scatter a computed
            // double eigenvalue shows whatever the scaling).
            let gap = (eigs[i].lam - eigs[j].lam).norm();
            let near = 1e-7 * eigs[i].lam.norm().max(eigs[j].lam.norm());
            if gap <= radius[i] + radius[j] || gap <= near {
                let (a, b) = (find(&mut parent, i), find(&mut parent, j));
                if a != b {
                    parent[a] = b;
                }
            }
        }
    }
    let mut clusters: std::collections::BTreeMap<usize, Vec<usize>> = Default::default();
    for k in 0..ne {
        clusters.entry(find(&mut parent, k)).or_default().push(k);
    }
    let mut modes: Vec<Mode> = Vec::new();
    for members in clusters.values() {
        if members.len() == 1 {
            let k = members[0];
            if eigs[k].conj_of.is_some() {
                continue; // emitted with its upper member
            }
            let lam = eigs[k].lam;
            modes.push(Mode {
                pole: lam,
                residues: vec![residue[k]],
            });
            if lam.im != 0.0 {
                modes.push(Mode {
                    pole: lam.conj(),
                    residues: vec![residue[k].conj()],
                });
            }
            continue;
        }
        let m = members.len();
        let mut centre = members.iter().map(|&k| eigs[k].lam).sum::<C>() / m as f64;
        let self_conj = centre.im.abs() <= 1e-12 * centre.norm();
        if !self_conj && centre.im < 0.0 {
            continue; // mirrored from the upper cluster
        }
        if self_conj {
            centre.im = 0.0;
        }
        let spread = members
            .iter()
            .map(|&k| (eigs[k].lam - centre).norm())
            .fold(0.0, f64::max);
        let dist = (0..ne)
            .filter(|k| !members.contains(k))
            .map(|k| (eigs[k].lam - centre).norm())
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
            let x = qt.resolvent(centre + z, &bt);
            let h = dot(&ct, &x);
            let mut zk = z;
            for a in coeffs.iter_mut() {
                *a += h * zk;
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
        while coeffs.len() > 1 && weight(coeffs.len() - 1, coeffs.last().unwrap()) <= 1e-7 * wmax {
            coeffs.pop();
        }
        if !self_conj {
            modes.push(Mode {
                pole: centre.conj(),
                residues: coeffs.iter().map(|a| a.conj()).collect(),
            });
        }
        modes.push(Mode {
            pole: centre,
            residues: coeffs,
        });
    }
    if modes.iter().any(|m| {
        !m.pole.re.is_finite()
            || m.residues
                .iter()
                .any(|r| !r.re.is_finite() || !r.im.is_finite())
    }) {
        return Err("the modal analysis produced non-finite numbers".into());
    }
    Ok(drop_negligible(modes))
}

/// Drop modes whose contribution is at rounding level both in the impulse response
/// (|r_k|/|p|^(k−1)) and in the step response (|r_k|/|p|^k), relative to the largest mode.
fn drop_negligible(modes: Vec<Mode>) -> Vec<Mode> {
    let wmin = modes
        .iter()
        .map(|m| m.pole.norm())
        .filter(|&w| w > 0.0)
        .fold(f64::INFINITY, f64::min);
    let wref = |m: &Mode| {
        let w = m.pole.norm();
        if w > 0.0 {
            w
        } else if wmin.is_finite() {
            wmin
        } else {
            1.0
        }
    };
    let weights: Vec<(f64, f64)> = modes
        .iter()
        .map(|m| {
            let w = wref(m);
            m.residues
                .iter()
                .enumerate()
                .fold((0.0f64, 0.0f64), |(i, s), (k, r)| {
                    let imp = r.norm() / w.powi(k as i32);
                    (i.max(imp), s.max(imp / w))
                })
        })
        .collect();
    let imax = weights.iter().map(|w| w.0).fold(0.0, f64::max);
    let smax = weights.iter().map(|w| w.1).fold(0.0, f64::max);
    modes
        .into_iter()
        .zip(weights)
        .filter(|(_, (i, s))| *i > 1e-10 * imax || *s > 1e-10 * smax)
        .map(|(m, _)| m)
        .collect()
}
