//! Signal-to-noise: at a fixed amplitude, a wider pulse carries more area (less noise in the
//! reading y/area) but more bias. The total error against width, and the averages needed.

use super::settings::BenchInput;
use crate::estimate::{ErrorEstimate, Estimator};
use crate::notice::{Note, Warning};
use crate::plan::{PlanSettings, Prepared, tied_pulse};
use crate::pulse::Trapezoid;
use serde::Serialize;

/// The three error curves against width, and the width that minimises the total.
#[derive(Debug, Clone, PartialEq, Serialize)]
pub struct NoiseCurves {
    /// 50 % widths, s (log-spaced).
    pub widths: Vec<f64>,
    /// |bias| of the chosen metric (relative).
    pub bias: Vec<f64>,
    /// Noise in one acquisition, relative: σₙ/(A·w·normaliser).
    pub noise: Vec<f64>,
    /// bias + noise (a conservative, linear sum).
    pub total: Vec<f64>,
    /// Width at the minimum total.
    pub best_width: f64,
    /// Bias there.
    pub best_bias: f64,
    /// Single-acquisition noise there.
    pub best_noise: f64,
}

impl NoiseCurves {
    /// Averages needed to bring bias + noise/√N within the budget at the best width
    /// (white noise averages down as 1/√N); `None` when the bias alone exceeds the budget.
    pub fn averages_for(&self, budget: f64) -> Option<u64> {
        let room = budget - self.best_bias;
        if room <= 0.0 {
            return None;
        }
        Some(((self.best_noise / room).powi(2)).ceil().max(1.0) as u64)
    }
}

/// Error curves for widths in [w_min, w_max] at a fixed amplitude (V or A) and output noise
/// σₙ (rms, one acquisition), with the edges tied to the width.
pub fn noise_curves(
    est: &Estimator,
    settings: &PlanSettings,
    amplitude: f64,
    noise_rms: f64,
    run: f64,
    w_min: f64,
    w_max: f64,
) -> NoiseCurves {
    let bias = |w: f64| {
        let p = tied_pulse(1.0, w, settings.edge_ratio);
        est.metric(&p, settings.metric, run.max(2.0 * p.end()))
    };
    let noise = |w: f64| noise_rms / (amplitude.abs() * w * est.normaliser());
    let n = 48;
    let ratio = (w_max / w_min).powf(1.0 / (n - 1) as f64);
    let widths: Vec<f64> = (0..n).map(|k| w_min * ratio.powi(k as i32)).collect();
    let b: Vec<f64> = widths.iter().map(|&w| bias(w)).collect();
    let nz: Vec<f64> = widths.iter().map(|&w| noise(w)).collect();
    let total: Vec<f64> = b.iter().zip(&nz).map(|(x, y)| x + y).collect();
    // Refine the minimum by golden section on log width around the best sample.
    let k = total
        .iter()
        .enumerate()
        .min_by(|a, b| a.1.total_cmp(b.1))
        .map_or(0, |(k, _)| k);
    let (mut lo, mut hi) = (
        widths[k.saturating_sub(1)].ln(),
        widths[(k + 1).min(n - 1)].ln(),
    );
    let f = |lw: f64| bias(lw.exp()) + noise(lw.exp());
    let g = (5f64.sqrt() - 1.0) / 2.0;
    for _ in 0..60 {
        let c = hi - g * (hi - lo);
        let d = lo + g * (hi - lo);
        if f(c) < f(d) {
            hi = d;
        } else {
            lo = c;
        }
    }
    let best_width = ((lo + hi) / 2.0).exp();
    NoiseCurves {
        best_bias: bias(best_width),
        best_noise: noise(best_width),
        widths,
        bias: b,
        noise: nz,
        total,
        best_width,
    }
}

/// The width that needs the fewest averages to bring bias + noise/√N within the budget, and
/// among the widths that need that few, the widest (the lowest amplitude, the most margin from
/// the generator's edges). N(w) = ⌈(noise(w)/(budget − bias(w)))²⌉ (white noise averages down as
/// 1/√N), searched over (w_hi/10⁴, w_hi]. `amplitude_limit` is the largest amplitude the bench
/// allows (None: the area is kept, amplitude = area/width, and the noise share does not depend
/// on the width).
#[allow(clippy::too_many_arguments)]
pub fn fewest_averages(
    est: &Estimator,
    settings: &PlanSettings,
    amplitude_limit: Option<f64>,
    area: f64,
    noise_rms: f64,
    run: f64,
    w_hi: f64,
    budget: f64,
) -> Option<(f64, u64)> {
    let averages = |w: f64| -> Option<u64> {
        let p = tied_pulse(1.0, w, settings.edge_ratio);
        let bias = est.metric(&p, settings.metric, run.max(2.0 * p.end()));
        if bias >= budget {
            return None;
        }
        let amp = amplitude_limit.map_or(area / w, |a| a.min(area / w));
        let g = noise_rms / (amp * w * est.normaliser()) / (budget - bias);
        let n = (g * g).ceil().max(1.0);
        (n < u64::MAX as f64).then_some(n as u64)
    };
    let n = 80;
    let w_lo = w_hi / 1e4;
    let ratio = (w_hi / w_lo).powf(1.0 / (n - 1) as f64);
    let ws: Vec<f64> = (0..n).map(|k| w_lo * ratio.powi(k as i32)).collect();
    let ns: Vec<Option<u64>> = ws.iter().map(|&w| averages(w)).collect();
    let fewest = ns.iter().flatten().copied().min()?;
    // The widest sampled width with that count, then bisect towards the next one.
    let k = (0..n).rev().find(|&k| ns[k] == Some(fewest))?;
    let mut lo = ws[k];
    if k + 1 < n {
        let mut hi = ws[k + 1];
        for _ in 0..50 {
            let mid = (lo * hi).sqrt();
            if averages(mid) == Some(fewest) {
                lo = mid;
            } else {
                hi = mid;
            }
        }
    }
    Some((lo, fewest))
}

/// The noise step's figures.
#[derive(Debug, Clone, PartialEq, Default, Serialize)]
pub struct NoiseFit {
    /// Noise curves, with `[capture] noise`.
    pub noise: Option<NoiseCurves>,
    /// Averages needed for the budget (None: not reachable, or no noise given).
    pub averages: Option<u64>,
}

/// The noise step's result.
#[derive(Debug, Clone, PartialEq, Default)]
pub struct NoiseStep {
    /// Figures.
    pub fit: NoiseFit,
    /// Warnings.
    pub warnings: Vec<Warning>,
    /// Notes.
    pub notes: Vec<Note>,
}

/// Noise and averaging for the delivered pulse: the curves against width at its amplitude,
/// and the averages that bring bias + noise/√N within the budget (white noise).
pub fn assess(
    inp: &BenchInput,
    prep: &Prepared,
    pulse: &Trapezoid,
    estimate: &ErrorEstimate,
    budget: f64,
) -> NoiseStep {
    let capture = inp.bench.capture.as_ref();
    let Some(sigma) = capture.and_then(|c| c.noise) else {
        return NoiseStep::default();
    };
    if !inp.residues_known {
        return NoiseStep {
            notes: vec![Note::NoiseNeedsResidues],
            ..NoiseStep::default()
        };
    }
    let s = inp.plan;
    let est = &prep.estimator;
    let cap = crate::plan::width_cap(prep, s).width(prep.tau_plan);
    let w_hi = (prep.tau_plan / crate::plan::RULE_MAX_WIDTH_RATIO)
        .max(4.0 * pulse.width_50())
        .min(cap);
    let w_lo = (w_hi / 1e4).min(pulse.width_50() / 10.0);
    let curves = noise_curves(est, s, pulse.amplitude, sigma, prep.run, w_lo, w_hi);
    let bias_now = estimate.metric(s.metric);
    let noise_now = sigma / (pulse.area().abs() * est.normaliser());
    let room = budget - bias_now;
    let needed = (room > 0.0).then(|| ((noise_now / room).powi(2)).ceil().max(1.0) as u64);
    let max_avg = capture.and_then(|c| c.max_averages);
    let mut warnings = Vec::new();
    match (needed, max_avg) {
        (None, _) => warnings.push(Warning::NoiseBudgetUnreachable {
            bias: bias_now,
            budget,
        }),
        (Some(n), Some(m)) if n as f64 > m => warnings.push(Warning::AveragesExceedCapture {
            needed: n,
            max_averages: m,
            budget,
            noise: noise_now,
        }),
        _ => {}
    }
    let notes = vec![Note::NoiseAtPulse {
        noise: noise_now,
        bias: bias_now,
        best_width: curves.best_width,
    }];
    NoiseStep {
        fit: NoiseFit {
            noise: Some(curves),
            averages: needed,
        },
        warnings,
        notes,
    }
}
