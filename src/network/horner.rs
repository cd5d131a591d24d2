//! Compensated Horner evaluation of a real polynomial at a real or complex point.
//!
//! Method: Graillat, Langlois & Louvet 2005, "Compensated Horner scheme" (the complex case as
//! in Graillat & Ménissier-Morain 2008). Each Horner step's rounding errors are caught exactly
//! by error-free transformations — Knuth's TwoSum and TwoProduct through a fused multiply-add
//! — and summed in a second, ordinary Horner recurrence, so the value is as accurate as if it
//! had been computed in twice the working precision and then rounded:
//! |ŝ − p(x)| ≤ u·|p(x)| + γ²·p̃(|x|), where p̃ has the coefficients' magnitudes.

use num_complex::Complex64;

/// Unit roundoff u = ε/2.
const U: f64 = f64::EPSILON / 2.0;

/// TwoSum (Knuth 1969): s + e = a + b exactly, s = fl(a + b).
pub fn two_sum(a: f64, b: f64) -> (f64, f64) {
    let s = a + b;
    let bb = s - a;
    (s, (a - (s - bb)) + (b - bb))
}

/// TwoProduct by fma: p + e = a·b exactly, p = fl(a·b) (no underflow assumed).
pub fn two_prod(a: f64, b: f64) -> (f64, f64) {
    let p = a * b;
    (p, a.mul_add(b, -p))
}

/// Complex product x·y = p + e exactly in the sense that e's parts are sums of the caught
/// errors (each part's three error terms are added in ordinary arithmetic: the compensation
/// only needs them to first order).
fn two_prod_complex(x: Complex64, y: Complex64) -> (Complex64, Complex64) {
    let (p1, e1) = two_prod(x.re, y.re);
    let (p2, e2) = two_prod(x.im, y.im);
    let (p3, e3) = two_prod(x.re, y.im);
    let (p4, e4) = two_prod(x.im, y.re);
    let (re, e5) = two_sum(p1, -p2);
    let (im, e6) = two_sum(p3, p4);
    (
        Complex64::new(re, im),
        Complex64::new(e1 - e2 + e5, e3 + e4 + e6),
    )
}

/// A compensated value and an a-priori bound on its error.
#[derive(Debug, Clone, Copy, PartialEq)]
pub struct Evaluation {
    /// p(x), compensated.
    pub value: Complex64,
    /// Bound on |value − p(x)| (exact p, exact x).
    pub error: f64,
}

/// γ_k = k·u/(1 − k·u) (Higham 2002, §3.1).
pub fn gamma(k: usize) -> f64 {
    let ku = k as f64 * U;
    ku / (1.0 - ku)
}

/// p(x) for descending real coefficients by the compensated Horner scheme
/// (Graillat, Langlois & Louvet 2005), with the error bound of their Theorem (complex
/// arithmetic: γ_{2n} replaced by √2·γ_{4n+2}, a deliberately generous constant).
pub fn compensated(coeffs: &[f64], x: Complex64) -> Evaluation {
    let zero = Complex64::new(0.0, 0.0);
    let Some((&first, rest)) = coeffs.split_first() else {
        return Evaluation {
            value: zero,
            error: 0.0,
        };
    };
    let mut s = Complex64::new(first, 0.0);
    let mut c = zero;
    for &a in rest {
        let (p, pi) = two_prod_complex(s, x);
        let (re, sigma) = two_sum(p.re, a);
        s = Complex64::new(re, p.im);
        c = c * x + pi + sigma;
    }
    let value = s + c;
    let n = rest.len();
    let g = std::f64::consts::SQRT_2 * gamma(4 * n + 2);
    Evaluation {
        value,
        error: 2.0 * U * value.norm() + g * g * magnitude(coeffs, x.norm()),
    }
}

/// p̃(|x|) = Σ|aₖ|·|x|^k, the size of the terms Horner adds up.
pub fn magnitude(coeffs: &[f64], r: f64) -> f64 {
    coeffs.iter().fold(0.0, |acc, &a| acc * r + a.abs())
}

#[cfg(test)]
mod tests {
    use super::*;

    /// Coefficients of (x − 3/4)^5·(x − 1)^11, exact: multiplied out in integers scaled by 4^5
    /// (every coefficient is a multiple of 4^-5 well inside 2^53).
    fn graillat_example() -> Vec<f64> {
        let mut c: Vec<i128> = vec![1];
        let mul = |c: &mut Vec<i128>, num: i128, den: i128| {
            // multiply by (den·x − num)
            let mut next = vec![0i128; c.len() + 1];
            for (i, &ci) in c.iter().enumerate() {
                next[i] += ci * den;
                next[i + 1] -= ci * num;
            }
            *c = next;
        };
        for _ in 0..5 {
            mul(&mut c, 3, 4);
        }
        for _ in 0..11 {
            mul(&mut c, 1, 1);
        }
        c.iter().map(|&k| k as f64 / 1024.0).collect()
    }

    #[test]
    fn compensated_horner_on_an_ill_conditioned_product() {
        // Reference: the factored form (x − 3/4)^5·(x − 1)^11, whose two subtractions are exact
        // for 3/4 ≤ x ≤ 3/2 (Sterbenz) and whose 15 products carry at most γ₃₀ relative error
        // (Higham 2002, §3.1; complex products √2·γ more): known to ~1e-14 relative. The
        // expanded form's condition number p̃(|x|)/|p(x)| is ≈ 1e18 at x = 1.1: ordinary Horner
        // keeps no correct digit there, the compensated scheme most of them
        // (Graillat, Langlois & Louvet 2005, §5).
        let c = graillat_example();
        let factored = |x: Complex64| (x - 0.75).powi(5) * (x - 1.0).powi(11);
        for x in [
            Complex64::new(1.1, 0.0),
            Complex64::new(1.0625, 0.0),
            Complex64::new(1.1, 0.07),
        ] {
            let exact = factored(x);
            let plain = super::super::poly::eval(&c, x);
            let comp = compensated(&c, x);
            let err = (comp.value - exact).norm();
            let ref_err = 100.0 * f64::EPSILON * exact.norm();
            assert!(
                err <= 1e-12 * exact.norm(),
                "{x}: {} vs {exact}",
                comp.value
            );
            assert!(
                err <= comp.error + ref_err,
                "bound {} below error {err}",
                comp.error
            );
            assert!(
                (plain - exact).norm() > 1e-3 * exact.norm(),
                "{x}: plain Horner {plain} is not ill-conditioned here"
            );
        }
    }

    #[test]
    fn error_free_transformations_are_exact() {
        // TwoSum/TwoProduct identities (Knuth 1969; Ogita, Rump & Oishi 2005).
        let (s, e) = two_sum(1.0, 1e-17);
        assert_eq!((s, e), (1.0, 1e-17));
        let a = 1.0 + f64::EPSILON;
        let (p, e) = two_prod(a, a);
        assert_eq!(p, 1.0 + 2.0 * f64::EPSILON);
        assert_eq!(e, f64::EPSILON * f64::EPSILON);
    }
}
