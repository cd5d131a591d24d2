//! The linear network: its network function H(s) reduced to modes (poles with Laurent
//! coefficients), a direct term and, for improper functions, the polynomial part.
//!
//! Every form a scenario can give (time constants, polynomials, zeros/poles/gain, and later
//! netlists through a state space) ends as a [`Network`]; later stages see only modes.

pub mod accuracy;
pub mod horner;
pub mod partial;
pub mod poly;

use num_complex::Complex64;
use thiserror::Error;

/// A network as the scenario describes it, in SI units (s, rad/s).
#[derive(Debug, Clone, PartialEq)]
pub enum NetworkSpec {
    /// Only the time constants are known: each is a real pole −1/τ with unknown residue.
    TimeConstants(Vec<f64>),
    /// H(s) = numerator / denominator, descending powers of s.
    Polynomial {
        /// Numerator coefficients.
        numerator: Vec<f64>,
        /// Denominator coefficients.
        denominator: Vec<f64>,
    },
    /// A circuit, analysed by modified nodal analysis (see [`crate::netlist`]).
    Netlist(crate::netlist::NetlistSpec),
    /// H(s) = gain·Π(s − zᵢ)/Π(s − pᵢ).
    ZeroPoleGain {
        /// Zeros in rad/s (conjugate pairs complete).
        zeros: Vec<Complex64>,
        /// Poles in rad/s (conjugate pairs complete).
        poles: Vec<Complex64>,
        /// Gain factor.
        gain: f64,
    },
}

/// Why a network function cannot be analysed.
#[derive(Debug, Error, Clone, PartialEq)]
pub enum NetworkError {
    /// The denominator is identically zero.
    #[error("the denominator is zero: H(s) is undefined")]
    ZeroDenominator,
    /// H(s) has no poles at all (a constant or a polynomial).
    #[error("H(s) has no poles: its impulse response has no modes to measure")]
    NoPoles,
    /// Every pole sits at s = 0: no time scale to size a pulse against.
    #[error(
        "every pole is at s = 0 (a pure integrator): there is no time scale to size a pulse against"
    )]
    NoTimeScale,
    /// Every residue is zero: h(t) has no modes (a pole–zero cancellation, for instance).
    #[error(
        "every residue is zero: h(t) has no decaying part to measure (does a zero cancel each pole?)"
    )]
    NoModes,
    /// A complex root without its conjugate.
    #[error("complex {what} {value} has no conjugate partner; a real circuit needs both")]
    NotConjugate {
        /// "pole" or "zero".
        what: &'static str,
        /// The offending value, formatted.
        value: String,
    },
    /// The circuit cannot be analysed; the error names the culprit part or node.
    #[error("{0}")]
    Netlist(crate::netlist::NetlistError),
    /// A non-finite or otherwise unusable number.
    #[error("{0}")]
    Invalid(String),
}

/// One distinct pole and its Laurent coefficients.
#[derive(Debug, Clone, PartialEq)]
pub struct Mode {
    /// Pole location in rad/s.
    pub pole: Complex64,
    /// residues[k−1] multiplies 1/(s − p)^k; the length is the multiplicity.
    pub residues: Vec<Complex64>,
}

impl Mode {
    /// Multiplicity of the pole.
    pub fn multiplicity(&self) -> usize {
        self.residues.len()
    }

    /// Decay time constant 1/|Re p| in seconds (infinite for a pole on the imaginary axis).
    pub fn time_constant(&self) -> f64 {
        1.0 / self.pole.re.abs()
    }

    /// Natural frequency |p| in rad/s.
    pub fn natural_frequency(&self) -> f64 {
        self.pole.norm()
    }

    /// Damping ratio −Re p/|p| (1 for a stable real pole); `None` for a pole at the origin.
    pub fn damping(&self) -> Option<f64> {
        let w = self.pole.norm();
        (w > 0.0).then(|| -self.pole.re / w)
    }

    /// Dominance of the mode in the output: Σₖ |rₖ|/|Re p|^k, the bound on ∫|mode(t)| dt (the
    /// dominant-pole measure |R|/|Re λ| of Rommes & Martins 2006, extended to repeated poles).
    /// Infinite for a mode that does not decay.
    pub fn dominance(&self) -> f64 {
        let a = self.pole.re.abs();
        self.residues
            .iter()
            .enumerate()
            .map(|(k, r)| r.norm() / a.powi(k as i32 + 1))
            .sum()
    }

    /// Size of the mode near the origin: Σₖ |rₖ|/|p|^(k−1), each Laurent term taken at the
    /// mode's own time scale 1/|p| (units of h, 1/s). Used to tell rounding from a true zero.
    pub fn size(&self) -> f64 {
        let t = self.time_scale();
        self.residues
            .iter()
            .enumerate()
            .map(|(k, r)| r.norm() * t.powi(k as i32))
            .sum()
    }

    /// Fastest time scale this mode imposes on a pulse: 1/|p| (for an underdamped pair the
    /// oscillation, not the decay).
    pub fn time_scale(&self) -> f64 {
        1.0 / self.pole.norm()
    }
}

/// Which modes are significant at the output.
#[derive(Debug, Clone, PartialEq)]
pub struct Significance {
    /// Each mode's share of Σ dominance, aligned with `Network::modes`.
    pub shares: Vec<f64>,
    /// Whether each mode is significant.
    pub significant: Vec<bool>,
    /// Fastest significant time scale 1/|p|, s.
    pub tau: f64,
}

/// Which scenario form a network came from.
#[derive(Debug, Clone, Copy, PartialEq, Eq, serde::Serialize)]
pub enum Form {
    /// `time_constants`.
    #[serde(rename = "time constants")]
    TimeConstants,
    /// `numerator`/`denominator`.
    #[serde(rename = "transfer polynomials")]
    Polynomial,
    /// `poles`/`zeros`/`gain`.
    #[serde(rename = "poles, zeros and gain")]
    ZeroPoleGain,
    /// A netlist (through a state space).
    #[serde(rename = "netlist")]
    Netlist,
}

impl Form {
    /// Name used in reports.
    pub fn name(self) -> &'static str {
        match self {
            Form::TimeConstants => "time constants",
            Form::Polynomial => "transfer polynomials",
            Form::ZeroPoleGain => "poles, zeros and gain",
            Form::Netlist => "netlist",
        }
    }
}

/// The analysed network function.
#[derive(Debug, Clone, PartialEq)]
pub struct Network {
    /// Where it came from.
    pub form: Form,
    /// One entry per distinct pole; conjugate pairs both listed, the upper member first.
    pub modes: Vec<Mode>,
    /// Direct term D: h(t) contains D·δ(t).
    pub direct: f64,
    /// Polynomial part beyond D for improper H: `improper[k−1]` multiplies s^k (δ^(k) in h).
    pub improper: Vec<f64>,
    /// Zeros (for display), conjugate pairs complete; empty when unknown.
    pub zeros: Vec<Complex64>,
    /// False for time-constant-only networks: each mode is then taken as e^(−t/τ).
    pub residues_known: bool,
    /// h(0⁺) by the initial-value theorem, lim s·(H(s) − polynomial part), computed
    /// independently of the residues.
    pub h0_ivt: f64,
    /// A-priori accuracy of each mode, aligned with `modes`; empty where not assessed
    /// (circuits, time constants), which counts as exact poles with rounding-level residues.
    pub accuracy: Vec<accuracy::ModeAccuracy>,
}

impl Network {
    /// Analyse a network specification into modes.
    pub fn from_spec(spec: &NetworkSpec) -> Result<Network, NetworkError> {
        let net = match spec {
            NetworkSpec::TimeConstants(taus) => from_time_constants(taus)?,
            NetworkSpec::Polynomial {
                numerator,
                denominator,
            } => from_polynomials(numerator, denominator)?,
            NetworkSpec::ZeroPoleGain { zeros, poles, gain } => from_zpk(zeros, poles, *gain)?,
            NetworkSpec::Netlist(spec) => {
                Network::from_circuit(crate::netlist::analyse(spec).map_err(NetworkError::Netlist)?)
            }
        };
        if net.modes.is_empty() {
            return Err(NetworkError::NoPoles);
        }
        if net.modes.iter().all(|m| m.pole.norm() == 0.0) {
            return Err(NetworkError::NoTimeScale);
        }
        if net
            .modes
            .iter()
            .all(|m| m.residues.iter().all(|r| r.norm() == 0.0))
        {
            return Err(NetworkError::NoModes);
        }
        Ok(net)
    }

    /// A network function without poles: a constant gain `d` (a resistive divider, say).
    pub fn constant(d: f64) -> Network {
        Network {
            form: Form::Netlist,
            modes: Vec::new(),
            direct: d,
            improper: Vec::new(),
            zeros: Vec::new(),
            residues_known: true,
            h0_ivt: 0.0,
            accuracy: Vec::new(),
        }
    }

    /// The network of a circuit's analysed network function (repeated zeros grouped).
    pub fn from_circuit(f: crate::netlist::CircuitFunction) -> Network {
        let zeros = poly::cluster(&f.zeros, f.zero_scale)
            .into_iter()
            .flat_map(|(z, m)| std::iter::repeat_n(z, m))
            .collect();
        Network {
            form: Form::Netlist,
            modes: f
                .modes
                .into_iter()
                .map(|m| Mode {
                    pole: m.pole,
                    residues: m.residues,
                })
                .collect(),
            direct: f.direct,
            improper: f.improper,
            zeros,
            residues_known: true,
            h0_ivt: f.h0_ivt,
            accuracy: Vec::new(),
        }
    }

    /// h(0⁺) from the modes: Σ of the first-order residues (terms t^(k−1) vanish at 0 for k ≥ 2).
    ///
    /// When the initial-value theorem gives exactly zero (relative degree ≥ 2) and the sum
    /// cancels to rounding level (1e-10 of Σₖ|rₖ|/|p|^(k−1)), the exact zero is returned.
    pub fn h0_plus(&self) -> f64 {
        let sum: f64 = self.modes.iter().map(|m| m.residues[0].re).sum();
        // Size of h near the origin: each Laurent coefficient rₖ contributes rₖ·t^(k−1) at the
        // mode's own time scale.
        let scale: f64 = self.modes.iter().map(Mode::size).sum();
        if self.h0_ivt == 0.0 && sum.abs() <= 1e-10 * scale {
            0.0
        } else {
            sum
        }
    }

    /// True when h(0⁺) is zero to the accuracy of the modal sum: exactly zero, or within 1e-9
    /// of the modes' summed size near the origin (a low-pass of relative degree ≥ 2, a ladder).
    /// Readings at 0⁺ then have nothing to be compared with.
    /// A non-zero h(0⁺) that the initial-value theorem confirms to 1e-6 is not negligible,
    /// however large the residues that cancel into it (a near-repeated pair's).
    pub fn h0_negligible(&self) -> bool {
        let h0 = self.h0_plus();
        let scale: f64 = self.modes.iter().map(Mode::size).sum();
        let confirmed = self.h0_ivt != 0.0 && (h0 - self.h0_ivt).abs() <= 1e-6 * self.h0_ivt.abs();
        h0 == 0.0 || (h0.abs() <= 1e-9 * scale && !confirmed)
    }

    /// Fastest time scale 1/max|p| (poles at the origin excluded).
    pub fn tau_fast(&self) -> f64 {
        let w = self
            .modes
            .iter()
            .map(Mode::natural_frequency)
            .fold(0.0, f64::max);
        1.0 / w
    }

    /// Slowest decay time 1/min|Re p| over the decaying modes; `None` if no mode decays.
    pub fn tau_slow(&self) -> Option<f64> {
        self.modes
            .iter()
            .filter(|m| m.pole.re < 0.0)
            .map(Mode::time_constant)
            .reduce(f64::max)
    }

    /// True when every pole is in the open left half-plane.
    pub fn stable(&self) -> bool {
        self.modes.iter().all(|m| m.pole.re < 0.0)
    }

    /// Poles in the right half-plane.
    pub fn unstable_modes(&self) -> impl Iterator<Item = &Mode> {
        self.modes.iter().filter(|m| m.pole.re > 0.0)
    }

    /// Poles on the imaginary axis (marginal).
    pub fn marginal_modes(&self) -> impl Iterator<Item = &Mode> {
        self.modes.iter().filter(|m| m.pole.re == 0.0)
    }

    /// True when H is improper (numerator degree above the denominator's).
    pub fn is_improper(&self) -> bool {
        self.improper.iter().any(|&q| q != 0.0)
    }

    /// Which modes matter at the output: each mode's share of Σ dominance (see
    /// [`Mode::dominance`]); a mode is significant when its share reaches `threshold` (the
    /// largest mode always is, and every mode is when residues are unknown).
    pub fn significance(&self, threshold: f64) -> Significance {
        let dominance: Vec<f64> = self.modes.iter().map(Mode::dominance).collect();
        let total: f64 = dominance.iter().filter(|d| d.is_finite()).sum();
        let shares: Vec<f64> = dominance
            .iter()
            .map(|&d| {
                if d.is_finite() && total > 0.0 {
                    d / total
                } else {
                    1.0
                }
            })
            .collect();
        let top = shares.iter().copied().fold(0.0, f64::max);
        let significant: Vec<bool> = shares
            .iter()
            .map(|&s| !self.residues_known || s >= threshold || s == top)
            .collect();
        let fastest = self
            .modes
            .iter()
            .zip(&significant)
            .filter(|(_, s)| **s)
            .map(|(m, _)| m.natural_frequency())
            .fold(0.0, f64::max);
        let tau = if fastest > 0.0 {
            1.0 / fastest
        } else {
            self.tau_fast()
        };
        Significance {
            shares,
            significant,
            tau,
        }
    }

    /// A-priori bounds of the figures over [0, `span`] (relative to `normaliser`, counting
    /// both a reading and the ideal it is compared with) and of the residues, from the modes'
    /// accuracy ([`accuracy`]); capped at 1e300 so they stay finite.
    pub fn figure_bound(&self, span: f64, peak: f64, normaliser: f64) -> accuracy::FigureBound {
        let order = self.order();
        let mut abs = 0.0;
        let mut residues: f64 = 0.0;
        for (i, m) in self.modes.iter().enumerate() {
            let a = self.accuracy.get(i).copied().unwrap_or_default();
            abs += accuracy::mode_figure_error(m.pole, &m.residues, a, order, span, peak);
            residues = residues.max(a.residue);
        }
        let finite = |x: f64| if x.is_finite() { x.min(1e300) } else { 1e300 };
        accuracy::FigureBound {
            figures: finite(2.0 * abs / normaliser),
            residues: finite(residues),
        }
    }

    /// Order (number of poles counted with multiplicity).
    pub fn order(&self) -> usize {
        self.modes.iter().map(Mode::multiplicity).sum()
    }
}

fn check_finite(values: &[f64], what: &str) -> Result<(), NetworkError> {
    if values.iter().all(|v| v.is_finite()) {
        Ok(())
    } else {
        Err(NetworkError::Invalid(format!(
            "{what} contains a non-finite number"
        )))
    }
}

fn from_time_constants(taus: &[f64]) -> Result<Network, NetworkError> {
    check_finite(taus, "time_constants")?;
    if let Some(t) = taus.iter().find(|&&t| t <= 0.0) {
        return Err(NetworkError::Invalid(format!(
            "time constant {t} s is not positive"
        )));
    }
    let poles: Vec<Complex64> = taus.iter().map(|t| Complex64::new(-1.0 / t, 0.0)).collect();
    let groups = poly::cluster(&poles, 0.0);
    let modes = groups
        .into_iter()
        .map(|(p, m)| {
            // Unit-amplitude mode e^(−t/τ) (times t^(k−1)/(k−1)! for a repeated τ): residues unknown.
            let mut residues = vec![Complex64::new(0.0, 0.0); m];
            residues[m - 1] = Complex64::new(1.0, 0.0);
            Mode { pole: p, residues }
        })
        .collect();
    let mut net = Network {
        form: Form::TimeConstants,
        modes,
        direct: 0.0,
        improper: Vec::new(),
        zeros: Vec::new(),
        residues_known: false,
        h0_ivt: 0.0,
        accuracy: Vec::new(),
    };
    sort_modes(&mut net.modes);
    net.h0_ivt = net.h0_plus();
    Ok(net)
}

fn from_polynomials(numerator: &[f64], denominator: &[f64]) -> Result<Network, NetworkError> {
    check_finite(numerator, "numerator")?;
    check_finite(denominator, "denominator")?;
    let den = poly::trim(denominator);
    if den.is_empty() {
        return Err(NetworkError::ZeroDenominator);
    }
    let num = poly::trim(numerator);
    let (quotient, remainder) = poly::divide(&num, &den);
    // quotient is descending: last entry is D, earlier ones multiply s^k.
    let direct = *quotient.last().unwrap_or(&0.0);
    let improper: Vec<f64> = quotient.iter().rev().skip(1).copied().collect();
    let n = poly::degree(&den);
    let h0_ivt = if n >= 1 { remainder[0] / den[0] } else { 0.0 };
    let scale = (den[n] / den[0]).abs().powf(1.0 / n.max(1) as f64);
    let no_convergence = |what: &str| {
        NetworkError::Invalid(format!(
            "the {what}'s roots did not converge (companion-matrix QR iteration stopped after {} \
             steps per root): the coefficients are too far apart in scale",
            poly::MAX_QR_ITERATIONS
        ))
    };
    let den_roots = poly::roots(&den).ok_or_else(|| no_convergence("denominator"))?;
    let groups = poly::refine_clusters(&den, &poly::cluster(&den_roots, scale));
    let residues = partial::residues(&groups, den[0], &|p, count| poly::taylor_at(&num, p, count));
    let zeros = if num.len() > 1 {
        poly::cluster(
            &poly::roots(&num).ok_or_else(|| no_convergence("numerator"))?,
            1.0,
        )
        .into_iter()
        .flat_map(|(z, m)| std::iter::repeat_n(z, m))
        .collect()
    } else {
        Vec::new()
    };
    if zeros
        .iter()
        .any(|z: &Complex64| !(z.re.is_finite() && z.im.is_finite()))
    {
        return Err(NetworkError::Invalid(
            "the numerator's roots overflow f64: its coefficients are too far apart in scale \
             (bring them nearer to each other, or give the zeros directly)"
                .into(),
        ));
    }
    let mut net = Network {
        form: Form::Polynomial,
        modes: build_modes(&groups, residues),
        direct,
        improper,
        zeros,
        residues_known: true,
        h0_ivt,
        accuracy: Vec::new(),
    };
    sort_modes(&mut net.modes);
    net.accuracy = accuracy::of_polynomials(&num, &den, &pole_groups(&net.modes), &net.zeros);
    Ok(net)
}

fn from_zpk(zeros: &[Complex64], poles: &[Complex64], gain: f64) -> Result<Network, NetworkError> {
    check_finite(&[gain], "gain")?;
    for (what, set) in [("pole", poles), ("zero", zeros)] {
        for z in set {
            check_finite(&[z.re, z.im], what)?;
            if z.im != 0.0 && !set.iter().any(|w| conj_close(*w, *z)) {
                return Err(NetworkError::NotConjugate {
                    what,
                    value: format!("{}{:+}j", z.re, z.im),
                });
            }
        }
    }
    let scale = poles.iter().map(|p| p.norm()).fold(0.0, f64::max);
    let groups = group_exact(poles, scale);
    let residues = partial::residues(&groups, 1.0, &|p, count| {
        partial::factored_taylor(gain, zeros, p, count)
    });
    let (nz, np) = (zeros.len(), poles.len());
    let mut direct = 0.0;
    let mut improper = Vec::new();
    let h0_ivt;
    if nz + 1 == np {
        h0_ivt = gain;
    } else if nz == np {
        direct = gain;
        // H − gain = gain·(Π(s−z) − Π(s−p))/Π(s−p); the numerator's s^(n−1) coefficient is Σp − Σz.
        let sp: Complex64 = poles.iter().sum();
        let sz: Complex64 = zeros.iter().sum();
        h0_ivt = gain * (sp - sz).re;
    } else if nz > np {
        let num: Vec<f64> = poly::from_roots(zeros).iter().map(|c| c * gain).collect();
        let den = poly::from_roots(poles);
        let (q, r) = poly::divide(&num, &den);
        direct = *q.last().unwrap_or(&0.0);
        improper = q.iter().rev().skip(1).copied().collect();
        h0_ivt = if np >= 1 { r[0] / den[0] } else { 0.0 };
    } else {
        h0_ivt = 0.0;
    }
    let mut net = Network {
        form: Form::ZeroPoleGain,
        modes: build_modes(&groups, residues),
        direct,
        improper,
        zeros: zeros.to_vec(),
        residues_known: true,
        h0_ivt,
        accuracy: Vec::new(),
    };
    sort_modes(&mut net.modes);
    net.accuracy = accuracy::of_zpk(zeros, poles, &pole_groups(&net.modes));
    Ok(net)
}

fn conj_close(a: Complex64, b: Complex64) -> bool {
    let tol = 1e-12 * b.norm();
    (a - b.conj()).norm() <= tol
}

/// Group poles that were given equal (to rounding) into multiplicities; conjugates made exact.
fn group_exact(poles: &[Complex64], scale: f64) -> Vec<(Complex64, usize)> {
    let mut groups: Vec<(Complex64, usize)> = Vec::new();
    for &p in poles {
        let tol = 1e-12 * p.norm().max(scale * 1e-12);
        if let Some(g) = groups.iter_mut().find(|(q, _)| (*q - p).norm() <= tol) {
            g.1 += 1;
        } else {
            groups.push((p, 1));
        }
    }
    // Make conjugates exact: an upper pole's partner becomes its exact conjugate.
    let uppers: Vec<Complex64> = groups
        .iter()
        .filter(|(p, _)| p.im > 0.0)
        .map(|g| g.0)
        .collect();
    for g in groups.iter_mut().filter(|(p, _)| p.im < 0.0) {
        if let Some(u) = uppers.iter().find(|u| conj_close(**u, g.0)) {
            g.0 = u.conj();
        }
    }
    groups
}

fn build_modes(groups: &[(Complex64, usize)], residues: Vec<Vec<Complex64>>) -> Vec<Mode> {
    let mut modes: Vec<Mode> = groups
        .iter()
        .zip(residues)
        .map(|(&(pole, _), residues)| Mode { pole, residues })
        .collect();
    // Real poles carry real residues; conjugate poles carry exactly conjugate residues.
    for m in modes.iter_mut() {
        if m.pole.im == 0.0 {
            for r in m.residues.iter_mut() {
                r.im = 0.0;
            }
        }
    }
    let uppers: Vec<Mode> = modes.iter().filter(|m| m.pole.im > 0.0).cloned().collect();
    for m in modes.iter_mut().filter(|m| m.pole.im < 0.0) {
        if let Some(u) = uppers.iter().find(|u| u.pole == m.pole.conj()) {
            m.residues = u.residues.iter().map(|r| r.conj()).collect();
        }
    }
    modes
}

/// Each mode's pole and multiplicity.
fn pole_groups(modes: &[Mode]) -> Vec<accuracy::PoleGroup> {
    modes.iter().map(|m| (m.pole, m.multiplicity())).collect()
}

/// Slowest first; conjugate pairs adjacent with the upper member first.
fn sort_modes(modes: &mut [Mode]) {
    modes.sort_by(|a, b| crate::netlist::pole_order(a.pole, b.pole));
}

#[cfg(test)]
mod tests {
    use super::*;

    fn c(re: f64, im: f64) -> Complex64 {
        Complex64::new(re, im)
    }

    #[test]
    fn rc_low_pass() {
        // First-order RC low-pass H = a/(s + a): h(t) = a·e^(−at), h(0⁺) = a (handbook closed form).
        let a = 2000.0;
        let net = Network::from_spec(&NetworkSpec::Polynomial {
            numerator: vec![a],
            denominator: vec![1.0, a],
        })
        .unwrap();
        assert_eq!(net.modes.len(), 1);
        assert!((net.modes[0].pole.re + a).abs() < 1e-12 * a);
        assert!((net.h0_plus() - a).abs() < 1e-12 * a);
        assert!((net.h0_ivt - a).abs() < 1e-12 * a);
    }

    #[test]
    fn lag_lead_direct_term() {
        // Lag-lead (s + z)/(s + p): D = 1, residue z − p, h(0⁺) = z − p (partial fractions by hand).
        let (z, p) = (100.0, 1000.0);
        let net = Network::from_spec(&NetworkSpec::Polynomial {
            numerator: vec![1.0, z],
            denominator: vec![1.0, p],
        })
        .unwrap();
        assert!((net.direct - 1.0).abs() < 1e-15);
        assert!((net.h0_plus() - (z - p)).abs() < 1e-12 * p);
        assert!((net.h0_ivt - (z - p)).abs() < 1e-12 * p);
        let zpk = Network::from_spec(&NetworkSpec::ZeroPoleGain {
            zeros: vec![c(-z, 0.0)],
            poles: vec![c(-p, 0.0)],
            gain: 1.0,
        })
        .unwrap();
        assert!((zpk.h0_plus() - zpk.h0_ivt).abs() < 1e-12 * p);
        assert_eq!(zpk.direct, 1.0);
    }

    #[test]
    fn series_rlc_band_pass() {
        // Series RLC, output across R: H = (R/L)s/(s² + (R/L)s + 1/(LC)); h(0⁺) = R/L
        // (initial-value theorem), poles −α ± jω_d with α = R/2L (handbook closed form).
        let (r, l, cap) = (10.0, 1e-3, 1e-6);
        let net = Network::from_spec(&NetworkSpec::Polynomial {
            numerator: vec![r / l, 0.0],
            denominator: vec![1.0, r / l, 1.0 / (l * cap)],
        })
        .unwrap();
        let alpha = r / (2.0 * l);
        let wd = (1.0 / (l * cap) - alpha * alpha).sqrt();
        assert_eq!(net.modes.len(), 2);
        assert!((net.modes[0].pole - c(-alpha, wd)).norm() < 1e-10 * wd);
        assert!((net.modes[1].pole - c(-alpha, -wd)).norm() < 1e-10 * wd);
        assert!((net.h0_plus() - r / l).abs() < 1e-9 * r / l);
        assert!((net.h0_ivt - r / l).abs() < 1e-12 * r / l);
        let w0 = 1.0 / (l * cap).sqrt();
        assert!((net.tau_fast() - 1.0 / w0).abs() < 1e-10 / w0);
        assert!((net.modes[0].damping().unwrap() - alpha / w0).abs() < 1e-10);
    }

    #[test]
    fn rejects_non_conjugate_poles() {
        let e = Network::from_spec(&NetworkSpec::ZeroPoleGain {
            zeros: vec![],
            poles: vec![c(-1.0, 2.0)],
            gain: 1.0,
        })
        .unwrap_err();
        assert!(matches!(e, NetworkError::NotConjugate { .. }));
    }
}
