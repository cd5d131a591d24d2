//! Fitted poles matched to the model's.

use crate::network::Network;
use num_complex::Complex64 as C;
use serde::Serialize;

/// A fitted mode matched to a model mode.
#[derive(Debug, Clone, PartialEq, Serialize)]
pub struct ModeMatch {
    /// Fitted mode index.
    pub fitted: usize,
    /// Model pole (re, im), rad/s.
    pub model_pole: (f64, f64),
    /// Model residue (re, im), when known.
    pub model_residue: Option<(f64, f64)>,
    /// |p_fit − p_model|/|p_model|.
    pub distance: f64,
}

/// Match fitted poles to the model's (upper members), greedily by relative distance, up
/// to 50 % apart (common practice, no source).
pub fn match_modes(fitted: &[C], net: &Network) -> (Vec<ModeMatch>, Vec<usize>, Vec<(f64, f64)>) {
    let model: Vec<(C, C)> = net
        .modes
        .iter()
        .filter(|m| m.pole.im >= 0.0 && m.multiplicity() == 1)
        .map(|m| (m.pole, m.residues[0]))
        .collect();
    let mut pairs: Vec<(f64, usize, usize)> = Vec::new();
    for (i, p) in fitted.iter().enumerate() {
        for (j, (q, _)) in model.iter().enumerate() {
            pairs.push(((p - q).norm() / q.norm().max(f64::MIN_POSITIVE), i, j));
        }
    }
    pairs.sort_by(|a, b| a.0.total_cmp(&b.0));
    let (mut used_f, mut used_m) = (vec![false; fitted.len()], vec![false; model.len()]);
    let mut matches = Vec::new();
    for (d, i, j) in pairs {
        if d > 0.5 || used_f[i] || used_m[j] {
            continue;
        }
        used_f[i] = true;
        used_m[j] = true;
        let (q, r) = model[j];
        matches.push(ModeMatch {
            fitted: i,
            model_pole: (q.re, q.im),
            model_residue: net.residues_known.then_some((r.re, r.im)),
            distance: d,
        });
    }
    matches.sort_by_key(|m| m.fitted);
    let extra = (0..fitted.len()).filter(|&i| !used_f[i]).collect();
    let missing = (0..model.len())
        .filter(|&j| !used_m[j])
        .map(|j| (model[j].0.re, model[j].0.im))
        .collect();
    (matches, extra, missing)
}
