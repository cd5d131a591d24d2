//! The result of a circuit analysis: the network function H(s) as poles with Laurent
//! coefficients, a direct term, the polynomial part of an improper function and h(0⁺) by the
//! initial-value theorem. This is the netlist stage's own type; the `network` stage turns it
//! into its `Network`.

use num_complex::Complex64;

/// One distinct pole of H(s) and its Laurent coefficients.
#[derive(Debug, Clone, PartialEq)]
pub struct CircuitMode {
    /// Pole in rad/s.
    pub pole: Complex64,
    /// `residues[k−1]` multiplies 1/(s − p)^k; the length is the multiplicity.
    pub residues: Vec<Complex64>,
}

impl CircuitMode {
    /// Multiplicity of the pole.
    pub fn multiplicity(&self) -> usize {
        self.residues.len()
    }

    /// Size of the mode near the origin, Σₖ |rₖ|/|p|^(k−1) (each Laurent term at the mode's
    /// own time scale; units of h), for telling rounding from a true zero.
    pub fn size(&self) -> f64 {
        let t = 1.0 / self.pole.norm();
        self.residues
            .iter()
            .enumerate()
            .map(|(k, r)| r.norm() * t.powi(k as i32))
            .sum()
    }
}

/// The analysed network function of a circuit.
#[derive(Debug, Clone, PartialEq)]
pub struct CircuitFunction {
    /// One entry per distinct pole, slowest first; conjugate pairs adjacent, upper first.
    pub modes: Vec<CircuitMode>,
    /// Direct term D (h holds D·δ(t)).
    pub direct: f64,
    /// Polynomial part beyond D: `improper[k−1]` multiplies s^k.
    pub improper: Vec<f64>,
    /// Transmission zeros for display, each repeated zero listed as computed (not yet
    /// grouped into multiplicities); empty when not computed (large circuits).
    pub zeros: Vec<Complex64>,
    /// Size of the state matrix, the scale against which zeros count as repeated.
    pub zero_scale: f64,
    /// h(0⁺) by the initial-value theorem, independent of the residues.
    pub h0_ivt: f64,
}

impl CircuitFunction {
    /// Number of poles counted with multiplicity.
    pub fn order(&self) -> usize {
        self.modes.iter().map(CircuitMode::multiplicity).sum()
    }

    /// True when the function has a polynomial part beyond D.
    pub fn is_improper(&self) -> bool {
        self.improper.iter().any(|&q| q != 0.0)
    }

    /// Σₖ of the modes' sizes (see [`CircuitMode::size`]).
    pub(crate) fn size(&self) -> f64 {
        self.modes.iter().map(CircuitMode::size).sum()
    }
}

/// Slowest first; conjugate pairs adjacent with the upper member first.
pub(crate) fn sort_modes(modes: &mut [CircuitMode]) {
    modes.sort_by(|a, b| pole_order(a.pole, b.pole));
}

/// The order modes are listed in: slowest |p| first, a conjugate pair's upper member first.
pub fn pole_order(a: num_complex::Complex64, b: num_complex::Complex64) -> std::cmp::Ordering {
    a.norm()
        .total_cmp(&b.norm())
        .then(b.im.total_cmp(&a.im))
        .then(b.re.total_cmp(&a.re))
}

/// Drop modes whose contribution is at rounding level both in the impulse response
/// (|r_k|/|p|^(k−1)) and in the step response (|r_k|/|p|^k), relative to the largest mode:
/// uncontrollable or unobservable energy stores do not appear in H(s).
pub(crate) fn drop_negligible(modes: Vec<CircuitMode>) -> Vec<CircuitMode> {
    let wmin = modes
        .iter()
        .map(|m| m.pole.norm())
        .filter(|&w| w > 0.0)
        .fold(f64::INFINITY, f64::min);
    let wref = |m: &CircuitMode| {
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

/// The check every analysis ends with: modes must be finite.
/// A sum that cancels to rounding level of its terms' `scale` (within 1e-11 of it) is exactly
/// zero: h(0⁺) of a relative degree ≥ 2, a feed-through the elimination only seemed to leave.
pub(crate) fn unless_rounding(v: f64, scale: f64) -> f64 {
    if v.abs() <= 1e-11 * scale { 0.0 } else { v }
}

pub(crate) fn all_finite(modes: &[CircuitMode]) -> bool {
    modes
        .iter()
        .all(|m| m.pole.is_finite() && m.residues.iter().all(|r| r.is_finite()))
}
