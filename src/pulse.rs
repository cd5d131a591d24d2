//! The trapezoid pulse and its standard descriptions.
//!
//! Two conventions describe the same shape. Bench generators state the pulse duration at
//! 50 % amplitude and the 10–90 % transition durations (IEEE Std 181 terms); simulator pulse
//! sources state the flat top and the full 0–100 % ramps. Internally a pulse is always held as
//! full ramps plus flat top, starting at t = 0.

/// Ratio of the 10–90 % transition duration to the full 0–100 % ramp of a linear edge.
pub const TEN_NINETY: f64 = 0.8;

/// How a user's rise/fall/width figures are meant.
#[derive(Debug, Clone, Copy, PartialEq, Eq, serde::Serialize, serde::Deserialize)]
#[serde(rename_all = "lowercase")]
pub enum Convention {
    /// width at 50 %, rise/fall 10–90 % (bench generators).
    Generator,
    /// width is the flat top, rise/fall are full ramps (simulator pulse sources).
    Ramp,
}

/// Why a pulse description is not a valid trapezoid.
#[derive(Debug, thiserror::Error, Clone, PartialEq)]
pub enum PulseError {
    /// The 50 % width is shorter than the mean of the full ramps, so there is no flat top.
    #[error(
        "the 50 % width {width:e} s is shorter than half the full rise plus fall ({half:e} s): no such trapezoid"
    )]
    NoFlatTop {
        /// 50 % width.
        width: f64,
        /// (tr + tf)/2.
        half: f64,
    },
    /// A negative or non-finite figure.
    #[error("{0} must be a finite, non-negative time")]
    Bad(&'static str),
    /// Zero area.
    #[error("the pulse has zero area (amplitude or duration is zero)")]
    ZeroArea,
}

/// A trapezoid pulse starting at t = 0.
#[derive(Debug, Clone, Copy, PartialEq)]
pub struct Trapezoid {
    /// Amplitude (V or A).
    pub amplitude: f64,
    /// Full 0–100 % rise ramp, s.
    pub rise: f64,
    /// Flat top, s.
    pub flat: f64,
    /// Full 100–0 % fall ramp, s.
    pub fall: f64,
}

impl Trapezoid {
    /// Build from the generator's figures (50 % width, 10–90 % edges) or the ramp figures.
    pub fn from_convention(
        amplitude: f64,
        width: f64,
        rise: f64,
        fall: f64,
        convention: Convention,
    ) -> Result<Trapezoid, PulseError> {
        for (v, name) in [(width, "width"), (rise, "rise"), (fall, "fall")] {
            if !(v.is_finite() && v >= 0.0) {
                return Err(PulseError::Bad(name));
            }
        }
        let p = match convention {
            Convention::Ramp => Trapezoid {
                amplitude,
                rise,
                flat: width,
                fall,
            },
            Convention::Generator => {
                let (tr, tf) = (rise / TEN_NINETY, fall / TEN_NINETY);
                let half = (tr + tf) / 2.0;
                let flat = width - half;
                if flat < -1e-12 * width {
                    return Err(PulseError::NoFlatTop { width, half });
                }
                Trapezoid {
                    amplitude,
                    rise: tr,
                    flat: flat.max(0.0),
                    fall: tf,
                }
            }
        };
        if p.area() == 0.0 {
            return Err(PulseError::ZeroArea);
        }
        Ok(p)
    }

    /// Pulse of a given area and 50 % width with equal 10–90 % edges.
    pub fn with_area(area: f64, width: f64, edge_10_90: f64) -> Result<Trapezoid, PulseError> {
        Trapezoid::from_convention(
            area / width,
            width,
            edge_10_90,
            edge_10_90,
            Convention::Generator,
        )
    }

    /// 50 % duration (IEEE Std 181 pulse duration): flat + (tr + tf)/2.
    pub fn width_50(&self) -> f64 {
        self.flat + (self.rise + self.fall) / 2.0
    }

    /// 10–90 % rise transition duration.
    pub fn rise_10_90(&self) -> f64 {
        TEN_NINETY * self.rise
    }

    /// 10–90 % fall transition duration.
    pub fn fall_10_90(&self) -> f64 {
        TEN_NINETY * self.fall
    }

    /// Area A × 50 % duration (V·s or A·s).
    pub fn area(&self) -> f64 {
        self.amplitude * self.width_50()
    }

    /// Time at which the pulse is back to zero.
    pub fn end(&self) -> f64 {
        self.rise + self.flat + self.fall
    }

    /// Breakpoints (t, u) of the piecewise-linear waveform, starting and ending at zero.
    pub fn breakpoints(&self) -> Vec<(f64, f64)> {
        let a = self.amplitude;
        let t1 = self.rise;
        let t2 = t1 + self.flat;
        let t3 = t2 + self.fall;
        vec![(0.0, 0.0), (t1, a), (t2, a), (t3, 0.0)]
    }

    /// Raw moments ∫ tⁿ u(t) dt for n = 0, 1, 2 (exact for each linear piece).
    pub fn moments(&self) -> [f64; 3] {
        moments_of(&self.breakpoints())
    }

    /// Centroid: first moment / area.
    pub fn centroid(&self) -> f64 {
        centroid_of(&self.moments())
    }

    /// Variance of the pulse shape about its centroid (second central moment / area).
    pub fn variance(&self) -> f64 {
        variance_of(&self.moments())
    }

    /// Value of the waveform at time t.
    pub fn value(&self, t: f64) -> f64 {
        let a = self.amplitude;
        if t <= 0.0 || t >= self.end() {
            0.0
        } else if t < self.rise {
            a * t / self.rise
        } else if t <= self.rise + self.flat {
            a
        } else {
            a * (self.end() - t) / self.fall
        }
    }
}

impl Trapezoid {
    /// The Laplace transform of the waveform, X(s) = ∫ x(τ) e^(−sτ) dτ, exactly: a sum over
    /// the linear pieces. For |s|·end ≤ 1 it is summed as the moment series Σ (−s)ⁿ mₙ/n!
    /// (mₙ = ∫ τⁿ x dτ, exact per piece), which keeps full accuracy where the closed form
    /// would cancel; otherwise from the closed form of each ramp,
    /// ∫₀ʰ (a + bτ) e^(−sτ) dτ = a(1 − e^(−sh))/s + b(1 − e^(−sh)(1 + sh))/s².
    pub fn transform(&self, s: num_complex::Complex64) -> num_complex::Complex64 {
        use num_complex::Complex64 as C;
        let end = self.end();
        if (s * end).norm() <= 1.0 {
            return self.moment_series(s);
        }
        let mut total = C::new(0.0, 0.0);
        for w in self.breakpoints().windows(2) {
            let ((ta, ua), (tb, ub)) = (w[0], w[1]);
            let h = tb - ta;
            if h <= 0.0 {
                continue;
            }
            let b = (ub - ua) / h;
            let e = (-s * h).exp();
            let piece = ua * (1.0 - e) / s + b * (1.0 - e * (1.0 + s * h)) / (s * s);
            total += (-s * ta).exp() * piece;
        }
        total
    }

    /// Σₙ (−s)ⁿ mₙ/n! with the raw moments mₙ computed exactly per piece (|s|·end ≤ 1: the
    /// terms fall at least as 1/n!, 30 terms reach rounding).
    fn moment_series(&self, s: num_complex::Complex64) -> num_complex::Complex64 {
        use num_complex::Complex64 as C;
        const TERMS: usize = 30;
        let mut total = C::new(0.0, 0.0);
        let mut factor = C::new(1.0, 0.0); // (−s)ⁿ/n!
        for n in 0..TERMS {
            total += factor * self.raw_moment(n);
            factor *= -s / (n as f64 + 1.0);
        }
        total
    }

    /// ∫ τⁿ x(τ) dτ, exact (see [`moment_of`]).
    pub fn raw_moment(&self, n: usize) -> f64 {
        moment_of(&self.breakpoints(), 0.0, n)
    }

    /// The transform about the centroid, per unit area: P̃(s) = X(s)·e^(s·c)/area
    /// = 1 + ½σ²s² − … (the moment expansion behind the first-order estimates).
    pub fn centred_transform(&self, s: num_complex::Complex64) -> num_complex::Complex64 {
        self.transform(s) * (s * self.centroid()).exp() / self.area()
    }

    /// ∫ (τ − origin)ⁿ x(τ) dτ / area, exact per piece.
    pub fn moment_about(&self, origin: f64, n: usize) -> f64 {
        moment_of(&self.breakpoints(), origin, n) / self.area()
    }

    /// The terms a first-order reading leaves out, for one mode e^(pt) (exact, no cancellation):
    /// about the centroid (the aligned reading at t ≥ end),
    /// P̃(p) − 1 − ½σ²p² = Σₙ≥₃ (−p)ⁿ μₙ/n!, and for the raw reading at the pulse's end,
    /// e^(pδ)·P̃(p) − 1 − pδ − ½(σ² + δ²)p² = Σₙ≥₃ (−p)ⁿ Mₙ/n! with δ = end − c, μₙ the
    /// central moments and Mₙ the moments about the end (per unit area). Returns (aligned, raw);
    /// `None` when |p|·end > 40, where the expansion has no meaning and the exact terms overflow.
    pub fn expansion_remainders(
        &self,
        p: num_complex::Complex64,
    ) -> Option<(num_complex::Complex64, num_complex::Complex64)> {
        use num_complex::Complex64 as C;
        let end = self.end();
        let z = p.norm() * end;
        let c = self.centroid();
        let var = self.variance();
        let half_var = 0.5 * var * p * p;
        if z > 40.0 {
            return None;
        }
        if z > 1.0 {
            let pt = self.centred_transform(p);
            let delta = end - c;
            let aligned = pt - 1.0 - half_var;
            let raw =
                (p * delta).exp() * pt - 1.0 - p * delta - 0.5 * (var + delta * delta) * p * p;
            return Some((aligned, raw));
        }
        let series = |origin: f64, from: usize| {
            let mut total = C::new(0.0, 0.0);
            let mut factor = C::new(1.0, 0.0);
            for n in 0..30 {
                if n >= from {
                    total += factor * self.moment_about(origin, n);
                }
                factor *= -p / (n as f64 + 1.0);
            }
            total
        };
        Some((series(c, 3), series(end, 3)))
    }
}

/// ∫ (τ − origin)ⁿ x(τ) dτ of a piecewise-linear waveform given by breakpoints (t, u), exact:
/// on a piece u = a₀ + bτ (τ from the origin) the primitive is a₀τⁿ⁺¹/(n+1) + bτⁿ⁺²/(n+2).
pub fn moment_of(breakpoints: &[(f64, f64)], origin: f64, n: usize) -> f64 {
    let mut m = 0.0;
    for w in breakpoints.windows(2) {
        let ((ta, ua), (tb, ub)) = ((w[0].0 - origin, w[0].1), (w[1].0 - origin, w[1].1));
        let h = tb - ta;
        if h <= 0.0 {
            continue;
        }
        let b = (ub - ua) / h;
        let a0 = ua - b * ta;
        let prim = |t: f64| {
            a0 * t.powi(n as i32 + 1) / (n as f64 + 1.0)
                + b * t.powi(n as i32 + 2) / (n as f64 + 2.0)
        };
        m += prim(tb) - prim(ta);
    }
    m
}

/// The raw moments n = 0, 1, 2 of a piecewise-linear waveform.
pub fn moments_of(breakpoints: &[(f64, f64)]) -> [f64; 3] {
    [0, 1, 2].map(|n| moment_of(breakpoints, 0.0, n))
}

/// Centroid from the raw moments: m₁/m₀.
pub fn centroid_of(m: &[f64; 3]) -> f64 {
    m[1] / m[0]
}

/// Variance about the centroid from the raw moments: m₂/m₀ − c² (never negative).
pub fn variance_of(m: &[f64; 3]) -> f64 {
    let c = m[1] / m[0];
    (m[2] / m[0] - c * c).max(0.0)
}

/// Serialised with both conventions' figures (ramp view and IEEE Std 181 generator view) and
/// the derived timing: amplitude, area, width (50 %), flat, rise, fall, rise_10_90,
/// fall_10_90, centroid, sigma, end.
impl serde::Serialize for Trapezoid {
    fn serialize<S: serde::Serializer>(&self, ser: S) -> Result<S::Ok, S::Error> {
        use serde::ser::SerializeStruct;
        let mut st = ser.serialize_struct("Trapezoid", 11)?;
        st.serialize_field("amplitude", &self.amplitude)?;
        st.serialize_field("area", &self.area())?;
        st.serialize_field("width", &self.width_50())?;
        st.serialize_field("flat", &self.flat)?;
        st.serialize_field("rise", &self.rise)?;
        st.serialize_field("fall", &self.fall)?;
        st.serialize_field("rise_10_90", &self.rise_10_90())?;
        st.serialize_field("fall_10_90", &self.fall_10_90())?;
        st.serialize_field("centroid", &self.centroid())?;
        st.serialize_field("sigma", &self.variance().sqrt())?;
        st.serialize_field("end", &self.end())?;
        st.end()
    }
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn generator_and_ramp_views_agree() {
        // IEEE Std 181 relations for a linear trapezoid: 10–90 % = 0.8 × full ramp,
        // 50 % duration = flat + (tr + tf)/2, area = amplitude × 50 % duration.
        let p = Trapezoid::from_convention(2.0, 500e-9, 5e-9, 5e-9, Convention::Generator).unwrap();
        assert!((p.rise - 6.25e-9).abs() < 1e-21);
        assert!((p.flat - (500e-9 - 6.25e-9)).abs() < 1e-20);
        assert!((p.width_50() - 500e-9).abs() < 1e-20);
        assert!((p.area() - 1e-6).abs() < 1e-18);
        let q = Trapezoid::from_convention(2.0, p.flat, p.rise, p.fall, Convention::Ramp).unwrap();
        assert!((q.area() - p.area()).abs() < 1e-20);
    }

    #[test]
    fn moments_of_shapes() {
        // Rectangle of width w: centroid w/2, variance w²/12 (uniform distribution).
        let w = 2.0;
        let r = Trapezoid {
            amplitude: 1.0,
            rise: 0.0,
            flat: w,
            fall: 0.0,
        };
        assert!((r.centroid() - 1.0).abs() < 1e-15);
        assert!((r.variance() - w * w / 12.0).abs() < 1e-14);
        // Triangle 0..2 symmetric: centroid 1, variance (a²+b²+c²−ab−ac−bc)/18 = 1/6.
        let t = Trapezoid {
            amplitude: 1.0,
            rise: 1.0,
            flat: 0.0,
            fall: 1.0,
        };
        assert!((t.centroid() - 1.0).abs() < 1e-15);
        assert!((t.variance() - 1.0 / 6.0).abs() < 1e-15);
        assert!((t.area() - 1.0).abs() < 1e-15);
    }

    #[test]
    fn rejects_impossible_generator_figures() {
        assert!(matches!(
            Trapezoid::from_convention(1.0, 1e-9, 5e-9, 5e-9, Convention::Generator),
            Err(PulseError::NoFlatTop { .. })
        ));
    }

    #[test]
    fn transform_matches_quadrature_and_the_rectangle_closed_form() {
        use num_complex::Complex64 as C;
        // A rectangle of height A and width w: X(s) = A(1 − e^(−sw))/s (handbook Laplace pair).
        let rect = Trapezoid {
            amplitude: 2.0,
            rise: 0.0,
            flat: 3e-6,
            fall: 0.0,
        };
        for s in [
            C::new(-2e5, 0.0),
            C::new(-3e5, 4e5),
            C::new(-1e7, 2e7),
            C::new(1e3, 0.0),
        ] {
            let want = 2.0 * (1.0 - (-s * 3e-6).exp()) / s;
            let got = rect.transform(s);
            assert!(
                (got - want).norm() <= 1e-12 * want.norm(),
                "{s}: {got} vs {want}"
            );
        }
        // A trapezoid against composite Simpson quadrature of x(τ)e^(−sτ) (10⁵ panels).
        let p = Trapezoid {
            amplitude: 1.5,
            rise: 1e-6,
            flat: 2e-6,
            fall: 0.5e-6,
        };
        for s in [C::new(-1e5, 0.0), C::new(-2e6, 3e6), C::new(-4e6, 0.0)] {
            let n = 100_000;
            let h = p.end() / n as f64;
            let f = |t: f64| p.value(t) * (-s * t).exp();
            let mut q = f(0.0) + f(p.end());
            for k in 1..n {
                q += f(k as f64 * h) * if k % 2 == 1 { 4.0 } else { 2.0 };
            }
            q *= h / 3.0;
            let got = p.transform(s);
            assert!((got - q).norm() <= 1e-9 * q.norm(), "{s}: {got} vs {q}");
        }
        // About the centroid, per unit area: 1 + ½σ²s² + O(s³) for small s.
        let s = C::new(-1e3, 0.0);
        let c = p.centred_transform(s);
        let second = 0.5 * p.variance() * 1e6;
        assert!((c.re - 1.0 - second).abs() < 1e-3 * second, "{c}");
    }
}
