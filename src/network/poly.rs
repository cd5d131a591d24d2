//! Real polynomials in descending powers of s: trimming, long division, evaluation, and roots.

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
    for w in schur.complex_eigenvalues().iter() {
        out.push(polish(&c, *w * sigma));
    }
    Some(out)
}

/// QR iterations allowed per eigenvalue of the companion matrix (the shifted QR converges in
/// two or three per eigenvalue; thirty per eigenvalue is the classic limit of EISPACK's hqr).
pub const MAX_QR_ITERATIONS: usize = 30;

/// Newton's method on p at a (simple-root) estimate; keeps the estimate if Newton does not improve it.
fn polish(c: &[f64], start: Complex64) -> Complex64 {
    let deriv: Vec<f64> = {
        let n = degree(c);
        c[..n]
            .iter()
            .enumerate()
            .map(|(k, &ck)| ck * (n - k) as f64)
            .collect()
    };
    let mut z = start;
    let mut best = eval(c, z).norm();
    for _ in 0..8 {
        let d = eval(&deriv, z);
        if d.norm() == 0.0 {
            break;
        }
        let step = eval(c, z) / d;
        let cand = z - step;
        let val = eval(c, cand).norm();
        if val.partial_cmp(&best) != Some(std::cmp::Ordering::Less) {
            break;
        }
        best = val;
        z = cand;
        if step.norm() <= 1e-16 * z.norm() {
            break;
        }
    }
    z
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
    fn taylor_coefficients() {
        // p(s) = s³ at a = 2: 8, 12, 6, 1 (binomial expansion).
        let t = taylor_at(&[1.0, 0.0, 0.0, 0.0], Complex64::new(2.0, 0.0), 4);
        let re: Vec<f64> = t.iter().map(|z| z.re).collect();
        assert_eq!(re, vec![8.0, 12.0, 6.0, 1.0]);
    }
}
