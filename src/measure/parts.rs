//! Which parts explain a difference between the capture and a circuit model.
//!
//! The measured modes (poles, residues and the direct term, with their joint covariance)
//! are compared with the circuit re-analysed (`netlist::analyse`) at changed part values.
//! Sensitivities are central differences in ln(value). Two questions are answered:
//!
//! * one part at a time: the value of that part alone that best explains the measurement
//!   (Gauss–Newton on ln(value), weighted by the inverse covariance), and how well (χ²);
//! * all toleranced parts together: the smallest change, in units of half the tolerance
//!   (tolerance read as 2σ, common practice, no source), that explains the measurement
//!   (regularised weighted least squares, Tikhonov 1963), and whether it stays within the
//!   tolerances.

use super::matching::ModeMatch;
use super::modes::{Estimate, PER_MODE, Propagated};
use super::stats;
use crate::netlist::{self, NetlistSpec, PartKind};
use crate::network::Network;
use nalgebra::{DMatrix, DVector};
use num_complex::Complex64 as C;
use serde::Serialize;

/// Most parts examined (each costs a few circuit analyses).
pub const MAX_PARTS: usize = 40;
/// Gauss–Newton iterations for one part.
const MAX_STEPS: usize = 8;
/// Relative step of the sensitivities.
const STEP: f64 = 1e-4;
/// A part explains the measurement when its χ² tail probability is at least this
/// (common practice, no source).
pub const EXPLAINS: f64 = 0.01;

/// One part's best explanation.
#[derive(Debug, Clone, PartialEq, Serialize)]
pub struct PartFit {
    /// Part name.
    pub part: String,
    /// Nominal value (Ω, F or H).
    pub nominal: f64,
    /// Value that best explains the measurement, with its uncertainty.
    pub value: Estimate,
    /// (value − nominal)/nominal.
    pub change: f64,
    /// Its tolerance, as a fraction.
    pub tolerance: Option<f64>,
    /// Whether the change is within the tolerance.
    pub within_tolerance: Option<bool>,
    /// χ² of the remaining misfit.
    pub chi2: f64,
    /// Its degrees of freedom.
    pub dof: usize,
    /// Its tail probability.
    pub p_value: f64,
}

/// The joint, tolerance-weighted explanation.
#[derive(Debug, Clone, PartialEq, Serialize)]
pub struct JointFit {
    /// (part, relative change) for each toleranced part.
    pub changes: Vec<(String, f64)>,
    /// χ² of the data misfit.
    pub chi2: f64,
    /// Tail probability with as many degrees of freedom as measured numbers.
    pub p_value: f64,
    /// Every change within its tolerance and the misfit acceptable.
    pub within_tolerance: bool,
}

/// The parts that explain the difference.
#[derive(Debug, Clone, PartialEq, Serialize)]
pub struct Attribution {
    /// Measured numbers used.
    pub measured: usize,
    /// One part at a time, best first.
    pub single: Vec<PartFit>,
    /// The only part that alone explains the measurement, when there is one.
    pub culprit: Option<String>,
    /// All toleranced parts together.
    pub joint: Option<JointFit>,
}

/// The measured vector (Re p, [Im p], Re r, [Im r] per matched mode, then D) and its
/// covariance.
fn measured(
    p: &Propagated,
    matches: &[ModeMatch],
    direct: Option<(f64, f64)>,
) -> (DVector<f64>, DMatrix<f64>) {
    let mut idx = Vec::new();
    for m in matches {
        let b = m.fitted * PER_MODE;
        let pair = m.model_pole.1 != 0.0;
        idx.push(b);
        if pair {
            idx.push(b + 1);
        }
        idx.push(b + 5);
        if pair {
            idx.push(b + 6);
        }
    }
    let n = idx.len() + usize::from(direct.is_some());
    let mut q = DVector::zeros(n);
    let mut cov = DMatrix::zeros(n, n);
    for (a, &i) in idx.iter().enumerate() {
        q[a] = p.values[i];
        for (b, &j) in idx.iter().enumerate() {
            cov[(a, b)] = p.cov[(i, j)];
        }
    }
    if let Some((d, var)) = direct {
        q[n - 1] = d;
        cov[(n - 1, n - 1)] = var;
    }
    (q, cov)
}

/// The same numbers from an analysed circuit, each model mode taken as the perturbed pole
/// nearest to the nominal one.
fn model_vector(net: &Network, matches: &[ModeMatch], with_direct: bool) -> Option<DVector<f64>> {
    let mut v = Vec::new();
    for m in matches {
        let q0 = C::new(m.model_pole.0, m.model_pole.1);
        let mode = net
            .modes
            .iter()
            .filter(|x| x.pole.im >= 0.0 && x.multiplicity() == 1)
            .min_by(|a, b| (a.pole - q0).norm().total_cmp(&(b.pole - q0).norm()))?;
        let (p, r) = (mode.pole, mode.residues[0]);
        v.push(p.re);
        if q0.im != 0.0 {
            v.push(p.im);
        }
        v.push(r.re);
        if q0.im != 0.0 {
            v.push(r.im);
        }
    }
    if with_direct {
        v.push(net.direct);
    }
    Some(DVector::from_vec(v))
}

fn value_of(kind: &PartKind) -> Option<f64> {
    match kind {
        PartKind::Resistor { value, .. }
        | PartKind::Capacitor { value, .. }
        | PartKind::Inductor { value, .. } => Some(*value),
        _ => None,
    }
}

fn with_value(spec: &NetlistSpec, part: usize, factor: f64) -> NetlistSpec {
    let mut s = spec.clone();
    if let PartKind::Resistor { value, .. }
    | PartKind::Capacitor { value, .. }
    | PartKind::Inductor { value, .. } = &mut s.parts[part].kind
    {
        *value *= factor;
    }
    s
}

struct Problem<'a> {
    spec: &'a NetlistSpec,
    matches: &'a [ModeMatch],
    with_direct: bool,
    q: DVector<f64>,
    weight: DMatrix<f64>,
}

impl Problem<'_> {
    fn at(&self, part: usize, x: f64) -> Option<DVector<f64>> {
        let net =
            Network::from_circuit(netlist::analyse(&with_value(self.spec, part, x.exp())).ok()?);
        model_vector(&net, self.matches, self.with_direct)
    }

    fn sensitivity(&self, part: usize, x: f64) -> Option<DVector<f64>> {
        Some((self.at(part, x + STEP)? - self.at(part, x - STEP)?) / (2.0 * STEP))
    }

    fn chi2(&self, r: &DVector<f64>) -> f64 {
        (r.transpose() * &self.weight * r)[(0, 0)]
    }

    /// Gauss–Newton on ln(value) of one part.
    fn single(&self, part: usize) -> Option<(f64, f64, f64)> {
        let mut x = 0.0;
        let mut info = 0.0;
        for _ in 0..MAX_STEPS {
            let s = self.sensitivity(part, x)?;
            let r = &self.q - self.at(part, x)?;
            info = (s.transpose() * &self.weight * &s)[(0, 0)];
            if info.is_nan() || info <= 0.0 {
                return None;
            }
            let dx = ((s.transpose() * &self.weight * &r)[(0, 0)] / info).clamp(-0.5, 0.5);
            x += dx;
            if dx.abs() < 1e-7 {
                break;
            }
        }
        let r = &self.q - self.at(part, x)?;
        Some((x, 1.0 / info, self.chi2(&r)))
    }
}

/// Attribute the measured difference to parts. `None` when there is nothing to compare or
/// the circuit has more than [`MAX_PARTS`] valued parts.
pub fn attribute(
    spec: &NetlistSpec,
    nominal: &Network,
    p: &Propagated,
    matches: &[ModeMatch],
    direct: Option<(f64, f64)>,
) -> Option<Attribution> {
    let parts: Vec<usize> = (0..spec.parts.len())
        .filter(|&i| value_of(&spec.parts[i].kind).is_some())
        .collect();
    if matches.is_empty() || parts.is_empty() || parts.len() > MAX_PARTS {
        return None;
    }
    let (q, cov) = measured(p, matches, direct);
    let weight = cov.clone().pseudo_inverse(1e-12).ok()?;
    let prob = Problem {
        spec,
        matches,
        with_direct: direct.is_some(),
        q,
        weight,
    };
    let dof = prob.q.len().saturating_sub(1);
    let mut single: Vec<PartFit> = parts
        .iter()
        .filter_map(|&i| {
            let (x, var, chi2) = prob.single(i)?;
            let part = &spec.parts[i];
            let nominal = value_of(&part.kind)?;
            let value = nominal * x.exp();
            let change = x.exp() - 1.0;
            Some(PartFit {
                part: part.name.clone(),
                nominal,
                value: Estimate::new(value, var * value * value),
                change,
                tolerance: part.tolerance,
                within_tolerance: part.tolerance.map(|t| change.abs() <= t),
                chi2,
                dof,
                p_value: stats::chi2_sf(chi2, dof as f64),
            })
        })
        .collect();
    single.sort_by(|a, b| a.chi2.total_cmp(&b.chi2));
    let explains: Vec<&PartFit> = single.iter().filter(|f| f.p_value >= EXPLAINS).collect();
    let culprit = (explains.len() == 1).then(|| explains[0].part.clone());
    let joint = joint(&prob, &parts, nominal);
    Some(Attribution {
        measured: prob.q.len(),
        single,
        culprit,
        joint,
    })
}

/// All toleranced parts at once, linearised at the nominal values.
fn joint(prob: &Problem, parts: &[usize], nominal: &Network) -> Option<JointFit> {
    let tol: Vec<(usize, f64)> = parts
        .iter()
        .filter_map(|&i| {
            prob.spec.parts[i]
                .tolerance
                .filter(|t| *t > 0.0)
                .map(|t| (i, t))
        })
        .collect();
    if tol.is_empty() {
        return None;
    }
    let q0 = model_vector(nominal, prob.matches, prob.with_direct)?;
    let dq = &prob.q - &q0;
    let mut s = DMatrix::zeros(prob.q.len(), tol.len());
    for (k, (i, _)) in tol.iter().enumerate() {
        s.set_column(k, &prob.sensitivity(*i, 0.0)?);
    }
    let mut a = s.transpose() * &prob.weight * &s;
    for (k, (_, t)) in tol.iter().enumerate() {
        a[(k, k)] += 1.0 / (0.5 * t).powi(2);
    }
    let x = a.lu().solve(&(s.transpose() * &prob.weight * &dq))?;
    let r = &dq - &s * &x;
    let chi2 = prob.chi2(&r);
    let p_value = stats::chi2_sf(chi2, prob.q.len() as f64);
    let changes: Vec<(String, f64)> = tol
        .iter()
        .zip(x.iter())
        .map(|((i, _), xi)| (prob.spec.parts[*i].name.clone(), xi.exp() - 1.0))
        .collect();
    let within = tol
        .iter()
        .zip(&changes)
        .all(|((_, t), (_, c))| c.abs() <= *t)
        && p_value >= EXPLAINS;
    Some(JointFit {
        changes,
        chi2,
        p_value,
        within_tolerance: within,
    })
}
