//! Removing the pulse: after the pulse ends at T, the response is Σ cₖ e^(pₖ(t−T)) with
//! cₖ = rₖ·P(pₖ), where rₖ is the impulse-response residue and
//! P(s) = ∫ x(τ) e^(s(T−τ)) dτ the pulse's transform taken about its end T.
//!
//! Time reference (stated once, used everywhere): amplitudes cₖ belong to (t − T), the time
//! after the pulse's last breakpoint; residues rₖ belong to t, the time since time zero (the
//! start of the pulse). The pulse is piecewise linear — a trapezoid's four breakpoints, or a
//! measured stimulus as the linear interpolant of its samples — so P is a sum of closed
//! forms, one per linear piece, in the φ-functions of exponential integrators
//! (Hochbruck & Ostermann 2010): on [a, b], h = b − a,
//! ∫ (uₐ + (u_b − uₐ)(τ−a)/h) e^(s(T−τ)) dτ = h·e^(s(T−b))·(uₐ φ₁(sh) + (u_b − uₐ) φ₂(sh)).

use num_complex::Complex64 as C;
use serde::Serialize;

/// Where the applied pulse's shape came from.
#[derive(Debug, Clone, Copy, PartialEq, Eq, Serialize)]
#[serde(rename_all = "kebab-case")]
pub enum PulseSource {
    /// The scenario's `[pulse]` or the planned pulse.
    Stated,
    /// Measured on the stimulus channel.
    Measured,
}

/// The pulse that was applied, as a piecewise-linear waveform in time since time zero.
#[derive(Debug, Clone, PartialEq)]
pub struct AppliedPulse {
    /// Breakpoints (t, x), t increasing, starting and ending at x = 0.
    pub breakpoints: Vec<(f64, f64)>,
    /// Where it came from.
    pub source: PulseSource,
}

impl AppliedPulse {
    /// The pulse's end T (its last breakpoint), s.
    pub fn end(&self) -> f64 {
        self.breakpoints.last().map_or(0.0, |b| b.0)
    }

    /// Its first breakpoint, s (0 for a stated pulse; a measured one may start earlier).
    pub fn start(&self) -> f64 {
        self.breakpoints.first().map_or(0.0, |b| b.0)
    }

    /// Raw moments ∫ tⁿ x dt, n = 0, 1, 2 (Simpson on each linear piece, exact there).
    pub fn moments(&self) -> [f64; 3] {
        crate::pulse::moments_of(&self.breakpoints)
    }

    /// Area ∫ x dt (V·s or A·s).
    pub fn area(&self) -> f64 {
        self.moments()[0]
    }

    /// Centroid, s since time zero.
    pub fn centroid(&self) -> f64 {
        crate::pulse::centroid_of(&self.moments())
    }

    /// Variance of the shape about its centroid, s².
    pub fn variance(&self) -> f64 {
        crate::pulse::variance_of(&self.moments())
    }

    /// Input value at time t (linear between breakpoints, zero outside).
    pub fn value(&self, t: f64) -> f64 {
        let bp = &self.breakpoints;
        if bp.is_empty() || t <= bp[0].0 || t >= self.end() {
            return 0.0;
        }
        let k = bp.partition_point(|b| b.0 <= t) - 1;
        let ((ta, ua), (tb, ub)) = (bp[k], bp[k + 1]);
        if tb <= ta {
            return ub;
        }
        ua + (ub - ua) * (t - ta) / (tb - ta)
    }

    /// P(s) = ∫ x(τ) e^(s(T−τ)) dτ, exact for the piecewise-linear waveform.
    pub fn transform(&self, s: C) -> C {
        let end = self.end();
        self.breakpoints
            .windows(2)
            .map(|w| {
                let ((ta, ua), (tb, ub)) = (w[0], w[1]);
                let h = tb - ta;
                if h <= 0.0 {
                    return C::new(0.0, 0.0);
                }
                let z = s * h;
                let (p1, p2) = phi12(z);
                (s * (end - tb)).exp() * h * (p1 * ua + p2 * (ub - ua))
            })
            .sum()
    }

    /// dP/ds by a central difference (P is analytic; step 1e-5 of the pulse's own scale).
    pub fn transform_derivative(&self, s: C) -> C {
        let scale = s.norm() + 1.0 / (self.end() - self.start()).max(f64::MIN_POSITIVE);
        let h = 1e-5 * scale;
        (self.transform(s + h) - self.transform(s - h)) / (2.0 * h)
    }
}

/// φ₁(z) = (e^z − 1)/z and φ₂(z) = (e^z − 1 − z)/z², by their Taylor series near 0.
pub fn phi12(z: C) -> (C, C) {
    if z.norm() < 0.5 {
        // φ_k(z) = Σ zⁿ/(n+k)!; 20 terms reach 0.5²⁰/20! ≈ 4e-25.
        let (mut p1, mut p2) = (C::new(0.0, 0.0), C::new(0.0, 0.0));
        let mut zn = C::new(1.0, 0.0);
        let mut f1 = 1.0; // (n+1)!
        let mut f2 = 2.0; // (n+2)!
        for n in 0..20 {
            p1 += zn / f1;
            p2 += zn / f2;
            zn *= z;
            f1 *= (n + 2) as f64;
            f2 *= (n + 3) as f64;
        }
        (p1, p2)
    } else {
        let em1 = z.exp() - 1.0;
        let p1 = em1 / z;
        (p1, (p1 - 1.0) / z)
    }
}

#[cfg(test)]
mod tests {
    use super::*;

    fn trapezoid() -> AppliedPulse {
        AppliedPulse {
            breakpoints: vec![(0.0, 0.0), (0.2, 2.0), (1.0, 2.0), (1.5, 0.0)],
            source: PulseSource::Stated,
        }
    }

    /// Composite Gauss–Legendre (5 points per panel) of x(τ) e^(s(T−τ)).
    fn quadrature(p: &AppliedPulse, s: C) -> C {
        let nodes = [
            (0.0, 0.568_888_888_888_888_9),
            (-0.538_469_310_105_683, 0.478_628_670_499_366_5),
            (0.538_469_310_105_683, 0.478_628_670_499_366_5),
            (-0.906_179_845_938_664, 0.236_926_885_056_189_1),
            (0.906_179_845_938_664, 0.236_926_885_056_189_1),
        ];
        let mut sum = C::new(0.0, 0.0);
        for w in p.breakpoints.windows(2) {
            let (a, b) = (w[0].0, w[1].0);
            let panels = 50;
            for k in 0..panels {
                let lo = a + (b - a) * k as f64 / panels as f64;
                let hi = a + (b - a) * (k + 1) as f64 / panels as f64;
                for (x, wt) in nodes {
                    let t = 0.5 * (lo + hi) + 0.5 * (hi - lo) * x;
                    sum += (s * (p.end() - t)).exp() * p.value(t) * (wt * 0.5 * (hi - lo));
                }
            }
        }
        sum
    }

    #[test]
    fn transform_matches_quadrature() {
        // Reference: Gauss–Legendre quadrature, exact to ~1e-15 on these smooth pieces.
        let p = trapezoid();
        for s in [
            C::new(0.0, 0.0),
            C::new(-1e-4, 0.0),
            C::new(-3.0, 0.0),
            C::new(-40.0, 0.0),
            C::new(-2.0, 15.0),
            C::new(-0.5, -0.9),
        ] {
            let (a, b) = (p.transform(s), quadrature(&p, s));
            assert!(
                (a - b).norm() <= 1e-12 * b.norm().max(1e-300),
                "{s}: {a} vs {b}"
            );
        }
        // P(0) is the area: A × (flat + (tr + tf)/2) = 2 × (0.8 + 0.35) = 2.3.
        assert!((p.transform(C::new(0.0, 0.0)).re - 2.3).abs() < 1e-14);
        assert!((p.area() - 2.3).abs() < 1e-14);
    }

    #[test]
    fn rectangle_into_one_pole_is_the_handbook_form() {
        // Unit-area rectangle of width w into a unit-residue pole at −1/τ (τ = 1): the output
        // at the pulse's end is c = r·P(−1) = (1 − e^(−x))/x with x = w/τ (handbook closed form).
        let w = 0.3;
        let p = AppliedPulse {
            breakpoints: vec![(0.0, 0.0), (0.0, 1.0 / w), (w, 1.0 / w), (w, 0.0)],
            source: PulseSource::Stated,
        };
        let exact = (1.0 - (-w).exp()) / w;
        assert!((p.transform(C::new(-1.0, 0.0)).re - exact).abs() < 1e-14);
    }

    #[test]
    fn derivative_matches_closed_form_for_a_rectangle() {
        // d/ds of (e^(sw) − 1)/(s w) for a unit-area rectangle: (w s e^(sw) − e^(sw) + 1)/(s² w).
        let w = 0.7;
        let p = AppliedPulse {
            breakpoints: vec![(0.0, 0.0), (0.0, 1.0 / w), (w, 1.0 / w), (w, 0.0)],
            source: PulseSource::Stated,
        };
        let s = C::new(-2.0, 3.0);
        let e = (s * w).exp();
        let exact = (s * w * e - e + 1.0) / (s * s * w);
        assert!((p.transform_derivative(s) - exact).norm() < 1e-8 * exact.norm());
    }
}
