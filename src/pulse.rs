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
        let mut m = [0.0; 3];
        for w in self.breakpoints().windows(2) {
            let ((ta, ua), (tb, ub)) = (w[0], w[1]);
            let h = tb - ta;
            if h <= 0.0 {
                continue;
            }
            // u(t) = ua + (ub − ua)(t − ta)/h on [ta, tb]; integrate tⁿ·u exactly via Simpson,
            // which is exact for polynomials up to degree 3.
            let tm = (ta + tb) / 2.0;
            let um = (ua + ub) / 2.0;
            for (n, mn) in m.iter_mut().enumerate() {
                let f = |t: f64, u: f64| t.powi(n as i32) * u;
                *mn += h / 6.0 * (f(ta, ua) + 4.0 * f(tm, um) + f(tb, ub));
            }
        }
        m
    }

    /// Centroid: first moment / area.
    pub fn centroid(&self) -> f64 {
        let m = self.moments();
        m[1] / m[0]
    }

    /// Variance of the pulse shape about its centroid (second central moment / area).
    pub fn variance(&self) -> f64 {
        let m = self.moments();
        let c = m[1] / m[0];
        (m[2] / m[0] - c * c).max(0.0)
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
}
