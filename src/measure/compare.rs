//! Measured vs the model: poles matched to the model's, every compared quantity with its
//! difference in units of its uncertainty, the capture's residual against the model's
//! predicted output (exact, `response::Modal::drive`) in units of σ, and a verdict.
//!
//! The verdict tests the whole family of comparisons at 5 % with the Bonferroni bound
//! (Dunn 1961): each quantity at z > Φ⁻¹(1 − 0.025/m), the residual's χ² at tail
//! probability below 0.05/m.

use super::matching::ModeMatch;
use super::modes::{PER_MODE, Propagated};
use super::stats;
use crate::network::Network;
use num_complex::Complex64 as C;
use serde::Serialize;

/// Family-wise significance level of the verdict.
pub const ALPHA: f64 = 0.05;

/// Which quantity a difference is about.
#[derive(Debug, Clone, Copy, PartialEq, Eq, Serialize)]
#[serde(rename_all = "kebab-case")]
pub enum Quantity {
    /// 1/|Re p|.
    TimeConstant,
    /// |p|.
    NaturalFrequency,
    /// −Re p/|p|.
    Damping,
    /// Re r.
    ResidueRe,
    /// Im r.
    ResidueIm,
    /// h(0⁺).
    H0,
    /// D.
    Direct,
}

/// One compared quantity.
#[derive(Debug, Clone, PartialEq, Serialize)]
pub struct Difference {
    /// What.
    pub quantity: Quantity,
    /// Index of the fitted mode, for per-mode quantities.
    pub mode: Option<usize>,
    /// Measured value.
    pub measured: f64,
    /// Its standard uncertainty.
    pub std: f64,
    /// The model's value.
    pub model: f64,
    /// (measured − model)/|model|, when the model's value is not zero (same sign as z).
    pub relative: Option<f64>,
    /// std/|model|.
    pub relative_std: Option<f64>,
    /// (measured − model)/std.
    pub z: f64,
}

/// The capture against the model's predicted output.
#[derive(Debug, Clone, PartialEq, Serialize)]
pub struct ResidualVsModel {
    /// Samples compared.
    pub samples: usize,
    /// RMS of (capture − baseline − prediction)/σ over those samples.
    pub rms_sigma: f64,
    /// Largest |…|/σ.
    pub max_sigma: f64,
    /// Likelihood-ratio statistic on the fit's rows: χ² with the model's modes (baseline
    /// refitted; amplitudes refitted too when the model's residues are unknown) minus χ² of
    /// the free fit (Wilks 1938: ~χ² with `dof` degrees of freedom under the model).
    pub delta_chi2: Option<f64>,
    /// Its degrees of freedom.
    pub dof: usize,
    /// Its tail probability (the residual test of the verdict).
    pub p_value: Option<f64>,
}

/// The verdict.
#[derive(Debug, Clone, Copy, PartialEq, Eq, Serialize)]
#[serde(rename_all = "kebab-case")]
pub enum Verdict {
    /// Every comparison within its uncertainty.
    Consistent,
    /// Different from the nominal model, but parts within their tolerances explain it.
    WithinTolerance,
    /// Different from the model beyond its uncertainty (and tolerances, for circuits).
    Inconsistent,
}

/// The comparison.
#[derive(Debug, Clone, PartialEq, Serialize)]
pub struct Comparison {
    /// Matched modes.
    pub matches: Vec<ModeMatch>,
    /// Fitted modes without a model partner.
    pub extra_fitted: Vec<usize>,
    /// Model poles (upper members) without a fitted partner.
    pub unmatched_model: Vec<(f64, f64)>,
    /// Every compared quantity.
    pub differences: Vec<Difference>,
    /// The capture against the predicted output (models with known residues).
    pub residual: Option<ResidualVsModel>,
    /// The threshold |z| of each quantity.
    pub z_critical: f64,
    /// The verdict.
    pub verdict: Verdict,
    /// Index into `differences` of the largest |z|.
    pub largest: Option<usize>,
    /// Which parts explain the difference (circuits).
    pub parts: Option<super::parts::Attribution>,
}

fn difference(
    quantity: Quantity,
    mode: Option<usize>,
    measured: f64,
    var: f64,
    model: f64,
) -> Option<Difference> {
    let std = var.max(0.0).sqrt();
    if !(std.is_finite() && std > 0.0 && measured.is_finite() && model.is_finite()) {
        return None;
    }
    let nonzero = model != 0.0;
    Some(Difference {
        quantity,
        mode,
        measured,
        std,
        model,
        relative: nonzero.then(|| (measured - model) / model.abs()),
        relative_std: nonzero.then(|| std / model.abs()),
        z: (measured - model) / std,
    })
}

/// Per-mode and whole-response differences.
pub fn differences(
    p: &Propagated,
    matches: &[ModeMatch],
    net: &Network,
    direct: Option<(f64, f64)>,
) -> Vec<Difference> {
    let mut out = Vec::new();
    let v = |k: usize| (p.values[k], p.cov[(k, k)]);
    for m in matches {
        let b = m.fitted * PER_MODE;
        let q = C::new(m.model_pole.0, m.model_pole.1);
        let pair = q.im != 0.0;
        let mut push = |qty, k: usize, model: f64| {
            let (x, var) = v(k);
            out.extend(difference(qty, Some(m.fitted), x, var, model));
        };
        push(Quantity::TimeConstant, b + 2, -1.0 / q.re);
        if pair {
            push(Quantity::NaturalFrequency, b + 3, q.norm());
            push(Quantity::Damping, b + 4, -q.re / q.norm());
        }
        if let Some((rr, ri)) = m.model_residue {
            push(Quantity::ResidueRe, b + 5, rr);
            if pair {
                push(Quantity::ResidueIm, b + 6, ri);
            }
        }
    }
    if net.residues_known {
        let k = p.set.poles.len() * PER_MODE;
        let (x, var) = v(k);
        out.extend(difference(Quantity::H0, None, x, var, net.h0_plus()));
        if let Some((d, var)) = direct {
            out.extend(difference(Quantity::Direct, None, d, var, net.direct));
        }
    }
    out
}

/// The Bonferroni threshold for m quantities plus the residual test.
pub fn z_critical(m: usize) -> f64 {
    stats::normal_quantile(1.0 - ALPHA / (2.0 * m.max(1) as f64))
}

/// Verdict from the differences, the residual test and (for circuits) whether parts within
/// tolerance explain the difference.
pub fn verdict(
    diffs: &[Difference],
    residual: Option<&ResidualVsModel>,
    within_tolerance: Option<bool>,
) -> (Verdict, f64, Option<usize>) {
    let m = diffs.len() + usize::from(residual.is_some());
    let zc = z_critical(m);
    let largest = (0..diffs.len()).max_by(|&a, &b| diffs[a].z.abs().total_cmp(&diffs[b].z.abs()));
    let quantity_fails = largest.is_some_and(|k| diffs[k].z.abs() > zc);
    let residual_fails = residual
        .and_then(|r| r.p_value)
        .is_some_and(|p| p < ALPHA / m.max(1) as f64);
    let v = if !(quantity_fails || residual_fails) {
        Verdict::Consistent
    } else if within_tolerance == Some(true) {
        Verdict::WithinTolerance
    } else {
        Verdict::Inconsistent
    };
    (v, zc, largest)
}
