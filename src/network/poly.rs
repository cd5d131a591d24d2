//! Real polynomials in descending powers of s: trimming, long division, evaluation, and roots.

use super::horner;
use nalgebra::DMatrix;
use num_complex::Complex64;

/// Drop leading zero coefficients (descending order). An all-zero polynomial becomes empty.
pub fn trim(coeffs: &[f64]) -> Vec<f64> {
    let first = coeffs
        .iter()
        .position(|&c| c != 0.0)
        .unwrap_or(coeffs.len());
    coeffs[first..].to_vec()
}

/// Degree of a trimmed, non-empty polynomial.
pub fn degree(coeffs: &[f64]) -> usize {
    coeffs.len().saturating_sub(1)
}

/// Polynomial long division n = q·d + r (descending coefficients, `d` trimmed and non-empty).
/// Returns (q, r) with r of length deg d (zero-padded).
pub fn divide(n: &[f64], d: &[f64]) -> (Vec<f64>, Vec<f64>) {
    let dn = degree(d);
    if n.len() <= dn {
        let mut r = vec![0.0; dn - n.len()];
        r.extend_from_slice(n);
        return (vec![0.0], r);
    }
    let mut rem = n.to_vec();
    let qlen = n.len() - dn;
    let mut q = vec![0.0; qlen];
    for i in 0..qlen {
        let c = rem[i] / d[0];
        q[i] = c;
        for (k, dk) in d.iter().enumerate() {
            rem[i + k] -= c * dk;
        }
        rem[i] = 0.0;
    }
    (q, rem[qlen..].to_vec())
}

/// Evaluate a real polynomial at a complex point (Horner).
pub fn eval(coeffs: &[f64], s: Complex64) -> Complex64 {
    coeffs
        .iter()
        .fold(Complex64::new(0.0, 0.0), |acc, &c| acc * s + c)
}

/// Coefficients of p(s) in powers of (s − a), lowest first: p(a), p′(a), p″(a)/2!, …
/// truncated to `count` terms (repeated synthetic division).
pub fn taylor_at(coeffs: &[f64], a: Complex64, count: usize) -> Vec<Complex64> {
    let mut work: Vec<Complex64> = coeffs.iter().map(|&c| Complex64::new(c, 0.0)).collect();
    let mut out = Vec::with_capacity(count);
    for _ in 0..count {
        if work.is_empty() {
            out.push(Complex64::new(0.0, 0.0));
            continue;
        }
        // Synthetic division by (s − a): quotient in work[..len-1], remainder last.
        for i in 1..work.len() {
            let prev = work[i - 1];
            work[i] += prev * a;
        }
        out.push(work.pop().unwrap_or_default());
    }
    out
}

/// Multiply out Π (s − rᵢ) for roots that come in conjugate pairs; returns real descending coefficients.
pub fn from_roots(roots: &[Complex64]) -> Vec<f64> {
    let mut c = vec![Complex64::new(1.0, 0.0)];
    for &r in roots {
        let mut next = vec![Complex64::new(0.0, 0.0); c.len() + 1];
        for (i, &ci) in c.iter().enumerate() {
            next[i] += ci;
            next[i + 1] -= ci * r;
        }
        c = next;
    }
    c.iter().map(|z| z.re).collect()
}

/// Roots of a real polynomial (descending, trimmed, degree ≥ 1).
///
/// Method: eigenvalues of the balanced companion matrix (Parlett & Reinsch 1969 balancing,
/// nalgebra's real Schur form), after scaling s so the coefficients are of similar size,
/// each root then polished by Newton's method on the original polynomial. Exact zero roots
/// (trailing zero coefficients) are returned exactly. `None` when the QR iteration does not
/// converge within [`MAX_QR_ITERATIONS`] per root.
pub fn roots(coeffs: &[f64]) -> Option<Vec<Complex64>> {
    let mut c = trim(coeffs);
    let mut out = Vec::new();
    while c.len() > 1 && *c.last().unwrap_or(&1.0) == 0.0 {
        c.pop();
        out.push(Complex64::new(0.0, 0.0));
    }
    let n = degree(&c);
    if n == 0 {
        return Some(out);
    }
    // Scale s = σ·w so that the monic polynomial in w has |constant| = 1.
    let sigma = (c[n] / c[0]).abs().powf(1.0 / n as f64);
    let sigma = if sigma.is_finite() && sigma > 0.0 {
        sigma
    } else {
        1.0
    };
    let monic: Vec<f64> = (0..=n)
        .map(|k| c[k] / c[0] / sigma.powi(k as i32))
        .collect();
    let mut comp = DMatrix::<f64>::zeros(n, n);
    for k in 0..n {
        comp[(0, k)] = -monic[k + 1];
    }
    for k in 1..n {
        comp[(k, k - 1)] = 1.0;
    }
    balance(&mut comp);
    if comp.iter().any(|x| !x.is_finite()) {
        return None;
    }
    // A bounded QR iteration: non-convergence is reported, never looped on.
    let schur = nalgebra::linalg::Schur::try_new(comp, f64::EPSILON, MAX_QR_ITERATIONS * n)?;
    let starts: Vec<Complex64> = schur
        .complex_eigenvalues()
        .iter()
        .map(|w| w * sigma)
        .collect();
    out.extend(polish_all(&c, &starts));
    Some(out)
}

/// Polish every eigenvalue. Two eigenvalues within [`PAIR_GAP`] of each other (relative) are a
/// near-double pair: their computed values scatter by √ε about the pair, often as a false
/// complex pair on which Newton cannot converge, so the pair is split first ([`split_pair`]).
/// A root that Newton carries more than half-way towards another start keeps its start, so
/// no root is lost.
fn polish_all(c: &[f64], starts: &[Complex64]) -> Vec<Complex64> {
    let nearest = |i: usize| {
        (0..starts.len())
            .filter(|&j| j != i)
            .min_by(|&a, &b| {
                (starts[a] - starts[i])
                    .norm()
                    .total_cmp(&(starts[b] - starts[i]).norm())
            })
            .map(|j| (j, (starts[j] - starts[i]).norm()))
    };
    let mut out: Vec<Complex64> = starts.to_vec();
    let mut done = vec![false; starts.len()];
    for i in 0..starts.len() {
        let Some((j, gap)) = nearest(i) else {
            out[i] = polish(c, starts[i]);
            continue;
        };
        if done[i] {
            continue;
        }
        let mutual = nearest(j).is_some_and(|(k, _)| k == i);
        let close = gap <= PAIR_GAP * starts[i].norm();
        if let Some((a, b)) = (mutual && close)
            .then(|| split_pair(c, starts[i], starts[j]))
            .flatten()
        {
            (out[i], out[j], done[j]) = (a, b, true);
            continue;
        }
        let z = polish(c, starts[i]);
        out[i] = if (z - starts[i]).norm() <= 0.5 * gap {
            z
        } else {
            starts[i]
        };
    }
    out
}

/// Refine the centre of every cluster of multiplicity ≥ 2 ([`refine_centre`]); a real centre
/// stays real and the lower member of a conjugate pair becomes the conjugate of the upper.
pub fn refine_clusters(c: &[f64], groups: &[(Complex64, usize)]) -> Vec<(Complex64, usize)> {
    let mut out: Vec<(Complex64, usize)> = groups.to_vec();
    for g in out.iter_mut().filter(|g| g.1 >= 2 && g.0.im >= 0.0) {
        let z = refine_centre(c, g.0, g.1);
        let moved = (z - g.0).norm();
        // A refinement that moves the centre beyond the cluster tolerance found another root.
        if moved <= 10.0 * f64::EPSILON.powf(1.0 / g.1 as f64) * g.0.norm() {
            g.0 = if g.0.im == 0.0 {
                Complex64::new(z.re, 0.0)
            } else {
                z
            };
        }
    }
    let uppers: Vec<(Complex64, Complex64, usize)> = groups
        .iter()
        .zip(&out)
        .filter(|(g, _)| g.0.im > 0.0)
        .map(|(g, o)| (g.0, o.0, g.1))
        .collect();
    for (g, o) in groups.iter().zip(out.iter_mut()) {
        if let Some(u) = uppers
            .iter()
            .find(|u| g.0.im < 0.0 && u.0 == g.0.conj() && u.2 == g.1)
        {
            o.0 = u.1.conj();
        }
    }
    out
}

/// Relative distance under which two eigenvalues are treated as a near-double pair: well above
/// the √ε scatter of a double root, well below any separation the eigenvalues resolve alone.
pub const PAIR_GAP: f64 = 1e-5;

/// Split a near-double pair: the centre is the root of p′ next to the pair's mean (Newton,
/// compensated), then the two roots of the local quadratic a₀ + a₁w + a₂w² (a₀, a₁
/// compensated), each polished by Newton. `None` when the pair does not resolve (a double
/// root to working accuracy: both quadratic roots polish onto one).
fn split_pair(c: &[f64], w1: Complex64, w2: Complex64) -> Option<(Complex64, Complex64)> {
    let centre = refine_centre(c, (w1 + w2) / 2.0, 2);
    let a0 = horner::compensated(c, centre).value;
    let a1 = horner::compensated(&derivative(c), centre).value;
    let a2 = taylor_at(c, centre, 3)[2];
    if a2.norm() == 0.0 {
        return None;
    }
    let disc = (a1 * a1 - 4.0 * a0 * a2).sqrt();
    let (q1, q2) = (
        centre + (-a1 + disc) / (2.0 * a2),
        centre + (-a1 - disc) / (2.0 * a2),
    );
    let (z1, z2) = (polish(c, q1), polish(c, q2));
    let sep = (q1 - q2).norm();
    if (z1 - z2).norm() > 0.5 * sep && (z1 - q1).norm() < 0.5 * sep {
        Some((z1, z2))
    } else {
        (sep > 0.0).then_some((q1, q2))
    }
}

/// The centre of a cluster of m roots: Newton on p^(m−1) (compensated Horner, bounded by
/// [`MAX_POLISH`], a step kept only when it lowers |p^(m−1)|). The root of p^(m−1) lies within
/// O(spread²) of the cluster's mean, where the computed members scatter by ε^(1/m).
pub fn refine_centre(c: &[f64], start: Complex64, m: usize) -> Complex64 {
    let mut d = c.to_vec();
    for _ in 1..m {
        if d.len() < 2 {
            return start;
        }
        d = derivative(&d);
    }
    if d.len() < 2 {
        return start;
    }
    polish(&d, start)
}

/// QR iterations allowed per eigenvalue of the companion matrix (the shifted QR converges in
/// two or three per eigenvalue; thirty per eigenvalue is the classic limit of EISPACK's hqr).
pub const MAX_QR_ITERATIONS: usize = 30;

/// Newton steps allowed per root in the polish (quadratic convergence from an eigenvalue
/// accurate to a few digits needs three or four; a near-multiple root converges linearly).
pub const MAX_POLISH: usize = 24;

/// Newton's method on p at an estimate, with p and p′ evaluated by the compensated Horner
/// scheme (Graillat, Langlois & Louvet 2005) on the original coefficients, so a close root is
/// found to the accuracy of the data rather than to ε·p̃(|z|)/|p′(z)|. Bounded by
/// [`MAX_POLISH`] steps; a step is kept only when it lowers the compensated residual, so the
/// better of before and after is returned.
fn polish(c: &[f64], start: Complex64) -> Complex64 {
    let deriv = derivative(c);
    let mut z = start;
    let mut best = horner::compensated(c, z).value.norm();
    for _ in 0..MAX_POLISH {
        if best == 0.0 {
            break;
        }
        let d = horner::compensated(&deriv, z).value;
        if d.norm() == 0.0 {
            break;
        }
        let step = horner::compensated(c, z).value / d;
        let cand = z - step;
        let val = horner::compensated(c, cand).value.norm();
        if val.partial_cmp(&best) != Some(std::cmp::Ordering::Less) {
            break;
        }
        best = val;
        z = cand;
        if step.norm() <= 0.25 * f64::EPSILON * z.norm() {
            break;
        }
    }
    z
}

/// Descending coefficients of p′.
fn derivative(c: &[f64]) -> Vec<f64> {
    let n = degree(c);
    c[..n]
        .iter()
        .enumerate()
        .map(|(k, &ck)| ck * (n - k) as f64)
        .collect()
}

/// How well a computed root (or the centre of a cluster of m roots) is known.
#[derive(Debug, Clone, Copy, PartialEq, Default)]
pub struct RootAccuracy {
    /// Bound on the distance from the centre to the mean of the m exact roots it stands for.
    pub error: f64,
    /// Radius about the centre that holds those m exact roots (0 for an exact root).
    pub radius: f64,
}

/// A-posteriori accuracy of a root of multiplicity `m` (m = 1: a simple root) of the exact
/// polynomial `c` at the computed `centre`.
///
/// Method: the Taylor coefficients aₖ = p^(k)(centre)/k! (a₀ compensated, Graillat et al. 2005;
/// the others with the γ-bound of the shift, Higham 2002 §5.1) give the local polynomial
/// Σ aₖ wᵏ; Fujiwara's bound (1916) on its m small roots gives the radius
/// ρ = 2·max_{k<m} (|aₖ|/|aₘ|)^{1/(m−k)}, and Vieta's sum of those roots the mean's offset
/// |a_{m−1}|/(m|aₘ|), plus ρ²·|a_{m+1}|/|aₘ| for the terms beyond the local polynomial
/// (first order in the neglected terms). Each |aₖ| is enlarged by its error bound first.
/// `None` when aₘ is not resolved from its own error (the root is not of that multiplicity).
pub fn root_accuracy(c: &[f64], centre: Complex64, m: usize) -> Option<RootAccuracy> {
    let n = degree(c);
    let a0 = horner::compensated(c, centre);
    let taylor = taylor_at(c, centre, m + 2);
    let abs: Vec<f64> = c.iter().map(|x| x.abs()).collect();
    let sizes = taylor_at(&abs, Complex64::new(centre.norm(), 0.0), m + 2);
    let g = 2.0 * horner::gamma(4 * n + 4);
    let upper = |k: usize| -> f64 {
        if k == 0 {
            a0.value.norm() + a0.error
        } else {
            taylor[k].norm() + g * sizes[k].re
        }
    };
    let lead = taylor[m].norm() - g * sizes[m].re;
    if lead.partial_cmp(&0.0) != Some(std::cmp::Ordering::Greater) {
        return None;
    }
    let radius = 2.0
        * (0..m)
            .map(|k| (upper(k) / lead).powf(1.0 / (m - k) as f64))
            .fold(0.0, f64::max);
    let error = upper(m - 1) / (m as f64 * lead) + radius * radius * upper(m + 1) / lead;
    (error.is_finite() && radius.is_finite()).then_some(RootAccuracy { error, radius })
}

/// Balance a square matrix in place by diagonal similarity with powers of two
/// (Parlett & Reinsch 1969), which reduces eigenvalue error for badly scaled matrices.
pub fn balance(a: &mut DMatrix<f64>) {
    let n = a.nrows();
    let radix = 2.0f64;
    let mut done = false;
    let mut sweeps = 0;
    while !done && sweeps < 100 {
        done = true;
        sweeps += 1;
        for i in 0..n {
            let mut col = 0.0;
            let mut row = 0.0;
            for j in 0..n {
                if j != i {
                    col += a[(j, i)].abs();
                    row += a[(i, j)].abs();
                }
            }
            // A zero, non-finite or overflowing norm has no balancing factor (the loops below
            // would not end on an infinite one); each loop is bounded by the exponent range.
            if col == 0.0 || row == 0.0 || !(col + row).is_finite() {
                continue;
            }
            let mut f = 1.0;
            let s = col + row;
            let mut g = row / radix;
            let mut steps = 0;
            while col < g && steps < 1100 {
                f *= radix;
                col *= radix * radix;
                steps += 1;
            }
            g = row * radix;
            while col > g && steps < 2200 {
                f /= radix;
                col /= radix * radix;
                steps += 1;
            }
            if !(f.is_finite() && f > 0.0) {
                continue;
            }
            if (col + row) / f < 0.95 * s {
                done = false;
                for j in 0..n {
                    a[(i, j)] /= f;
                }
                for j in 0..n {
                    a[(j, i)] *= f;
                }
            }
        }
    }
}

/// Group nearly equal roots into (root, multiplicity), making conjugate pairs exact and real
/// roots exactly real.
///
/// Computed roots of a multiplicity-m root scatter by about ε^(1/m) relative; a cluster is
/// accepted as one root of multiplicity m when its spread is within 10·ε^(1/m)·|root|
/// (ε = machine epsilon). The cluster's mean is its root (the mean is well-conditioned).
pub fn cluster(roots: &[Complex64], scale: f64) -> Vec<(Complex64, usize)> {
    let eps = f64::EPSILON;
    let mut left: Vec<Complex64> = roots.to_vec();
    left.sort_by(|a, b| a.re.total_cmp(&b.re).then(a.im.total_cmp(&b.im)));
    let mut groups: Vec<(Complex64, usize)> = Vec::new();
    while let Some(&seed) = left.first() {
        // Try the largest plausible cluster around the seed first.
        let mut order: Vec<usize> = (0..left.len()).collect();
        order.sort_by(|&a, &b| (left[a] - seed).norm().total_cmp(&(left[b] - seed).norm()));
        let mut members = vec![0usize];
        for m in (2..=order.len().min(12)).rev() {
            let cand = &order[..m];
            let centre: Complex64 = cand.iter().map(|&i| left[i]).sum::<Complex64>() / m as f64;
            let tol = 10.0 * eps.powf(1.0 / m as f64) * centre.norm().max(scale * 1e-12);
            if cand.iter().all(|&i| (left[i] - centre).norm() <= tol) {
                members = cand.to_vec();
                break;
            }
        }
        let centre: Complex64 =
            members.iter().map(|&i| left[i]).sum::<Complex64>() / members.len() as f64;
        let mult = members.len();
        members.sort_unstable_by(|a, b| b.cmp(a));
        for i in members {
            left.remove(i);
        }
        groups.push((centre, mult));
    }
    make_conjugate_exact(groups, scale)
}

fn make_conjugate_exact(groups: Vec<(Complex64, usize)>, scale: f64) -> Vec<(Complex64, usize)> {
    let mut out: Vec<(Complex64, usize)> = Vec::new();
    let mut used = vec![false; groups.len()];
    for i in 0..groups.len() {
        if used[i] {
            continue;
        }
        used[i] = true;
        let (p, m) = groups[i];
        let mag = p.norm().max(scale * 1e-12);
        if p.im.abs() <= 1e-9 * mag {
            out.push((Complex64::new(p.re, 0.0), m));
            continue;
        }
        // Find the partner with the same multiplicity nearest to conj(p).
        let partner = (0..groups.len())
            .filter(|&j| !used[j] && groups[j].1 == m)
            .min_by(|&a, &b| {
                (groups[a].0 - p.conj())
                    .norm()
                    .total_cmp(&(groups[b].0 - p.conj()).norm())
            });
        let upper = Complex64::new(p.re, p.im.abs());
        if let Some(j) = partner {
            used[j] = true;
            let q = groups[j].0;
            let avg = Complex64::new((p.re + q.re) / 2.0, (p.im.abs() + q.im.abs()) / 2.0);
            out.push((avg, m));
            out.push((avg.conj(), m));
        } else {
            out.push((upper, m));
            out.push((upper.conj(), m));
        }
    }
    out
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn division_matches_hand_worked_example() {
        // (s² + 3s + 5) / (s + 1) = s + 2 remainder 3 (hand long division).
        let (q, r) = divide(&[1.0, 3.0, 5.0], &[1.0, 1.0]);
        assert_eq!(q, vec![1.0, 2.0]);
        assert_eq!(r, vec![3.0]);
    }

    #[test]
    fn roots_of_stiff_and_repeated_polynomials() {
        // (s + 1)(s + 1e6): roots known by construction.
        let r = roots(&[1.0, 1e6 + 1.0, 1e6]).unwrap();
        let mut re: Vec<f64> = r.iter().map(|z| z.re).collect();
        re.sort_by(f64::total_cmp);
        assert!((re[0] + 1e6).abs() < 1e-9 * 1e6);
        assert!((re[1] + 1.0).abs() < 1e-12);
        // (s + 2)³ = s³ + 6s² + 12s + 8: one root of multiplicity 3.
        let g = cluster(&roots(&[1.0, 6.0, 12.0, 8.0]).unwrap(), 2.0);
        assert_eq!(g.len(), 1);
        assert_eq!(g[0].1, 3);
        assert!((g[0].0 + 2.0).norm() < 1e-9);
    }

    #[test]
    fn polish_separates_a_close_pair() {
        // (s + 1)(s + 1 + δ)(s + 3) with δ = 2^-30: every coefficient is exact in f64
        // (5 + δ, 7 + 4δ, 3 + 3δ), so the roots are known exactly by construction. Newton with
        // ordinary Horner stops at ε·p̃/|p′| ≈ 1e-7 relative; the compensated polish finds each
        // root to a few ulps (Graillat, Langlois & Louvet 2005).
        let d = 2f64.powi(-30);
        let c = [1.0, 5.0 + d, 7.0 + 4.0 * d, 3.0 + 3.0 * d];
        let mut r = roots(&c).unwrap();
        r.sort_by(|a, b| b.re.total_cmp(&a.re));
        for (got, want) in r.iter().zip([-1.0, -1.0 - d, -3.0]) {
            let err = (got - Complex64::new(want, 0.0)).norm();
            assert!(err <= 4.0 * f64::EPSILON * want.abs(), "{got} vs {want}");
            let acc = root_accuracy(&c, *got, 1).unwrap();
            assert!(
                acc.error >= err && acc.error < 1e-14,
                "bound {} error {err}",
                acc.error
            );
        }
        // The separation, hence the residues, to ~1e-6 of δ: a plain Newton gives ~1e2·δ.
        assert!(((r[0] - r[1]).re - d).abs() <= 1e-6 * d);
    }

    #[test]
    fn cluster_accuracy_of_a_double_root() {
        // (s + 2)²(s + 5) = s³ + 9s² + 24s + 20, an exact double root at −2 (by construction):
        // the radius bound holds the exact pair and the centre's offset is bounded.
        let c = [1.0, 9.0, 24.0, 20.0];
        let g = cluster(&roots(&c).unwrap(), 2.0);
        let (centre, m) = g.iter().copied().find(|(_, m)| *m == 2).unwrap();
        assert_eq!(m, 2);
        let centre = refine_centre(&c, centre, 2);
        let acc = root_accuracy(&c, centre, 2).unwrap();
        let err = (centre + 2.0).norm();
        assert!(acc.error >= err && acc.radius >= err, "{acc:?} vs {err}");
        assert!(acc.radius < 1e-6 && acc.error < 1e-10, "{acc:?}");
    }

    #[test]
    fn taylor_coefficients() {
        // p(s) = s³ at a = 2: 8, 12, 6, 1 (binomial expansion).
        let t = taylor_at(&[1.0, 0.0, 0.0, 0.0], Complex64::new(2.0, 0.0), 4);
        let re: Vec<f64> = t.iter().map(|z| z.re).collect();
        assert_eq!(re, vec![8.0, 12.0, 6.0, 1.0]);
    }
}
