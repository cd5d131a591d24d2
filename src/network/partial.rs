//! Partial fractions: the Laurent coefficients of H(s) at each pole.
//!
//! For a pole p of multiplicity m, G(s) = (s − p)^m·H(s) is analytic at p and the residue
//! multiplying 1/(s − p)^k is G^(m−k)(p)/(m−k)! (Heaviside's cover-up rule generalised).
//! G's Taylor series is built from truncated series arithmetic, never from expanded
//! polynomials, so clustered and widely spread poles keep their accuracy.

use num_complex::Complex64;

/// Truncated power series in (s − p), lowest order first.
type Series = Vec<Complex64>;

fn mul(a: &Series, b: &Series, n: usize) -> Series {
    let mut out = vec![Complex64::new(0.0, 0.0); n];
    for (i, ai) in a.iter().enumerate().take(n) {
        for (j, bj) in b.iter().enumerate().take(n - i) {
            out[i + j] += ai * bj;
        }
    }
    out
}

/// Series of 1/((s − p) + d)^m about s = p, truncated to n terms.
fn inverse_power(d: Complex64, m: usize, n: usize) -> Series {
    // 1/(d + x) = Σ (−1)^j x^j / d^(j+1)
    let base: Series = (0..n)
        .map(|j| {
            let sign = if j % 2 == 0 { 1.0 } else { -1.0 };
            sign / d.powi(j as i32 + 1)
        })
        .collect();
    let mut acc: Series = vec![Complex64::new(0.0, 0.0); n];
    if n > 0 {
        acc[0] = Complex64::new(1.0, 0.0);
    }
    for _ in 0..m {
        acc = mul(&acc, &base, n);
    }
    acc
}

/// Residues at every pole group. `numerator_taylor(p, n)` must return the first n Taylor
/// coefficients of the numerator about p; the denominator is `lead`·Π(s − pᵢ)^mᵢ.
///
/// Returns, per pole group, residues[k−1] multiplying 1/(s − p)^k.
pub fn residues(
    poles: &[(Complex64, usize)],
    lead: f64,
    numerator_taylor: &dyn Fn(Complex64, usize) -> Vec<Complex64>,
) -> Vec<Vec<Complex64>> {
    poles
        .iter()
        .enumerate()
        .map(|(i, &(p, m))| {
            let mut g = numerator_taylor(p, m);
            for (j, &(q, mq)) in poles.iter().enumerate() {
                if j != i {
                    g = mul(&g, &inverse_power(p - q, mq, m), m);
                }
            }
            // r_k = g_{m−k}
            (1..=m).map(|k| g[m - k] / lead).collect()
        })
        .collect()
}

/// Taylor coefficients about p of gain·Π(s − zᵢ), for a factored numerator.
pub fn factored_taylor(gain: f64, zeros: &[Complex64], p: Complex64, n: usize) -> Vec<Complex64> {
    let mut acc: Series = vec![Complex64::new(0.0, 0.0); n];
    if n == 0 {
        return acc;
    }
    acc[0] = Complex64::new(gain, 0.0);
    for &z in zeros {
        let factor: Series = vec![p - z, Complex64::new(1.0, 0.0)];
        acc = mul(&acc, &factor, n);
    }
    acc
}

#[cfg(test)]
mod tests {
    use super::*;

    fn c(re: f64) -> Complex64 {
        Complex64::new(re, 0.0)
    }

    #[test]
    fn double_pole_residues() {
        // (s + 3)/((s + 1)²(s + 2)): hand partial fractions give
        //   −1/(s+1) + 2/(s+1)² + 1/(s+2).
        let poles = [(c(-1.0), 2), (c(-2.0), 1)];
        let r = residues(&poles, 1.0, &|p, n| factored_taylor(1.0, &[c(-3.0)], p, n));
        assert!((r[0][0] - c(-1.0)).norm() < 1e-14);
        assert!((r[0][1] - c(2.0)).norm() < 1e-14);
        assert!((r[1][0] - c(1.0)).norm() < 1e-14);
    }
}
