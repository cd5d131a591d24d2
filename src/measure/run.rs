//! The recovery pipeline: condition → fit → remove the pulse → readings → comparison.

use super::capture::Capture;
use super::condition::{self, MeasuredPulse, TimeZeroSource};
use super::deconvolve::{AppliedPulse, PulseSource};
use super::error::{CaptureError, Problem, RecoverError};
use super::fitting::{self, Span, StartOrigin};
use super::modes::{self, Estimate, PER_MODE, Propagated};
use super::pencil::Pencil;
use super::varpro::{Fit, PoleKind, Rows};
use super::*;
use crate::network::Mode;
use crate::response::Modal;
use num_complex::Complex64 as C;

/// Fewest unclipped samples after the pulse.
const MIN_TAIL: usize = 8;
/// Fewest pre-trigger samples for a noise estimate.
const MIN_PRE: usize = 16;
/// Pre-trigger samples used for the noise estimate (the last ones before the pulse).
const NOISE_SAMPLES: usize = 200_000;
/// Samples during the pulse used for the direct term.
const MAX_PULSE_SAMPLES: usize = 2000;
/// σ never below this fraction of the record's largest value: a fit of exponentials in
/// double precision holds about ten digits (common practice, no source).
const NOISE_FLOOR: f64 = 1e-10;
/// Samples compared with the model's prediction.
const MAX_MODEL_SAMPLES: usize = 200_000;

/// Recover h(t) from a capture.
pub fn recover(cap: &Capture, s: &RecoverSettings) -> Result<Recovery, RecoverError> {
    recover_with_progress(cap, s, &|_, _| {})
}

/// Recover h(t), reporting the refinements done as (done, total).
pub fn recover_with_progress(
    cap: &Capture,
    s: &RecoverSettings,
    progress: &dyn Fn(usize, usize),
) -> Result<Recovery, RecoverError> {
    let measured = measure_stimulus(cap)?;
    let tz = condition::time_zero(cap, measured.as_ref(), s.t0, s.pre_trigger, s.trigger_delay);
    let pulse = measured.as_ref().map_or_else(
        || AppliedPulse {
            breakpoints: s.pulse.breakpoints(),
            source: PulseSource::Stated,
        },
        |m| m.pulse.clone(),
    );
    let clip = condition::clipping(
        &cap.output.values,
        rest_level(cap, tz.capture_time_s + pulse.start()),
    );
    let span = Span {
        cap,
        zero: tz.capture_time_s,
        pulse_start: pulse.start(),
        pulse_end: pulse.end(),
        clip: &clip,
    };
    check_tail(&span)?;
    let (sigma0, pre_noise) = noise(&span);
    let drift_pre = s.drift.unwrap_or_else(|| drift_significant(&span, sigma0));
    let mut rows = fitting::rows(&span, sigma0, drift_pre, fitting::SELECT_TAIL_ROWS);
    let (mut fit, mut candidates, mut pencil) = fit_stage(&rows, s, &pulse, progress)?;
    if s.drift.is_none() && !drift_pre {
        // The pre-trigger alone may be too short to show a drift: let the whole record decide
        // by the information criterion.
        let with = fitting::rows(&span, sigma0, true, fitting::SELECT_TAIL_ROWS);
        if let Ok(alt) = fit_stage(&with, s, &pulse, progress)
            && bic(&alt.0, &with) < bic(&fit, &rows)
        {
            rows = with;
            (fit, candidates, pencil) = alt;
        }
    }
    if let Some((r, f)) = refine_blocks(&span, &rows, &fit) {
        (rows, fit) = (r, f);
    }
    let drift = rows.drift;
    let peak = rows.y.iter().map(|y| y.abs()).fold(0.0, f64::max);
    let (fit, scale, noise_info) = settle_noise(fit, sigma0, pre_noise, NOISE_FLOOR * peak);
    let stim_noise = measured.as_ref().map(|m| m.breakpoint_noise);
    let prop = modes::propagate(&fit, &pulse, drift, stim_noise);
    let mut curves = Curves {
        modes: prop,
        zero: tz.capture_time_s,
        end: pulse.end(),
        drift_scale: rows.drift_scale,
        pulse: pulse.clone(),
        direct: 0.0,
    };
    let direct = direct_term(&span, &curves, noise_info.sigma);
    curves.direct = direct.estimate.map_or(0.0, |e| e.value);
    let info = fit_info(&fit, &rows, scale, candidates, pencil.as_ref(), drift);
    let base = Base {
        cap,
        rows: &rows,
        fit_raw: &fit,
        s,
        tz,
        clip: &clip,
        measured,
        curves,
        noise: noise_info,
        direct,
        fit: info,
    };
    Ok(assemble(base, &span))
}

struct Base<'a> {
    cap: &'a Capture,
    rows: &'a Rows,
    fit_raw: &'a Fit,
    s: &'a RecoverSettings,
    tz: condition::TimeZero,
    clip: &'a condition::Clipping,
    measured: Option<MeasuredPulse>,
    curves: Curves,
    noise: NoiseInfo,
    direct: DirectTerm,
    fit: FitInfo,
}

fn assemble(b: Base, span: &Span) -> Recovery {
    let p = &b.curves.modes;
    let modes = fitted_modes(p, b.curves.pulse_width());
    let model_h =
        b.s.model
            .as_ref()
            .filter(|n| n.residues_known)
            .map(|n| Modal::new(n).impulse());
    let h_fn = model_h.as_ref().map(|f| move |t: f64| f.at(t));
    let h_dyn: Option<&dyn Fn(f64) -> f64> = h_fn.as_ref().map(|f| f as &dyn Fn(f64) -> f64);
    let readings = readings::readings(b.cap, &b.curves, h_dyn);
    let comparison = b.s.model.as_ref().map(|net| compare_model(&b, net, span));
    let h0_k = p.set.poles.len() * PER_MODE;
    let mut rec = Recovery {
        capture: capture_info(b.cap),
        time_zero: b.tz,
        noise: b.noise,
        baseline: baseline(p, b.fit.drift, b.curves.drift_scale),
        clipping: b.clip.clone(),
        pulse: pulse_info(b.s, &b.curves.pulse, b.measured),
        fit: b.fit,
        modes,
        h0: p.estimate(h0_k),
        direct: b.direct,
        readings,
        comparison,
        warnings: Vec::new(),
        curves: b.curves,
    };
    rec.warnings = warnings(&rec, b.s, span);
    rec
}

impl Curves {
    fn pulse_width(&self) -> f64 {
        // 50 % duration of the applied waveform: its area over its peak.
        let peak = self
            .pulse
            .breakpoints
            .iter()
            .map(|b| b.1.abs())
            .fold(0.0, f64::max);
        if peak > 0.0 {
            self.pulse.area().abs() / peak
        } else {
            0.0
        }
    }
}

/// Median of the samples before the pulse (where a noiseless record rests).
fn rest_level(cap: &Capture, start: f64) -> Option<f64> {
    let n = cap.time.partition_point(|&t| t < start);
    let from = n.saturating_sub(NOISE_SAMPLES);
    (n > 0).then(|| super::stats::median(&cap.output.values[from..n]))
}

fn measure_stimulus(cap: &Capture) -> Result<Option<MeasuredPulse>, RecoverError> {
    let Some(ch) = &cap.stimulus else {
        return Ok(None);
    };
    condition::measure_pulse(&cap.time, ch)
        .map(Some)
        .map_err(|(range, noise)| {
            RecoverError::Capture(CaptureError {
                file: cap.file.clone(),
                line: cap.lines.0,
                column: Some(ch.column),
                problem: Problem::NoStimulusPulse {
                    column_name: format!("\"{}\"", ch.name),
                    range,
                    noise,
                },
            })
        })
}

fn check_tail(span: &Span) -> Result<(), RecoverError> {
    let cap = span.cap;
    let err = |problem| {
        RecoverError::Capture(CaptureError {
            file: cap.file.clone(),
            line: cap.lines.1,
            column: Some(cap.output.column),
            problem,
        })
    };
    let last = *cap.time.last().unwrap_or(&0.0);
    if span.first_tail() >= cap.len() {
        return Err(err(Problem::NoSamplesAfterPulse {
            pulse_end: span.pulse_end + span.zero,
            record_end: last,
        }));
    }
    let (_, tail) = span.counts();
    if tail < MIN_TAIL {
        return Err(err(Problem::TooShortAfterPulse {
            needed: MIN_TAIL,
            found: tail,
            order: 1,
        }));
    }
    Ok(())
}

/// σ from the pre-trigger, or (provisionally) from the tail's differences.
fn noise(span: &Span) -> (f64, Option<condition::Noise>) {
    let y = &span.cap.output.values;
    let pre_end = span
        .cap
        .time
        .partition_point(|&t| t - span.zero < span.pulse_start);
    let from = pre_end.saturating_sub(NOISE_SAMPLES);
    let pre: Vec<f64> = (from..pre_end)
        .filter(|&i| !span.clip.is_clipped(i))
        .map(|i| y[i])
        .collect();
    let pre_noise = (pre.len() >= MIN_PRE).then(|| condition::noise(&pre));
    match pre_noise {
        Some(n) if n.sigma > 0.0 => (n.sigma, Some(n)),
        _ => {
            let first = span.first_tail();
            let tail: Vec<f64> = y[first..(first + NOISE_SAMPLES).min(y.len())].to_vec();
            let s = super::stats::noise_from_differences(&tail);
            let scale = tail.iter().map(|v| v.abs()).fold(0.0, f64::max);
            (s.max(1e-9 * scale).max(f64::MIN_POSITIVE), pre_noise)
        }
    }
}

/// A drift is fitted when the pre-trigger's least-squares slope exceeds 4 standard errors
/// (common practice, no source).
fn drift_significant(span: &Span, sigma: f64) -> bool {
    let pre_end = span
        .cap
        .time
        .partition_point(|&t| t - span.zero < span.pulse_start);
    if pre_end < MIN_PRE {
        return false;
    }
    let t = &span.cap.time[..pre_end];
    let y = &span.cap.output.values[..pre_end];
    let n = pre_end as f64;
    let tm = t.iter().sum::<f64>() / n;
    let ym = y.iter().sum::<f64>() / n;
    let (mut sxy, mut sxx) = (0.0, 0.0);
    for (ti, yi) in t.iter().zip(y) {
        sxy += (ti - tm) * (yi - ym);
        sxx += (ti - tm).powi(2);
    }
    if sxx <= 0.0 {
        return false;
    }
    let slope = sxy / sxx;
    (slope / (sigma / sxx.sqrt())).abs() > 4.0
}

/// When the blocks span more than [`fitting::BLOCK_SHARE`] of the fastest fitted time
/// scale, refit on shorter blocks from the chosen poles.
fn refine_blocks(span: &Span, rows: &Rows, fit: &Fit) -> Option<(Rows, Fit)> {
    let step = span.cap.uniform_step?;
    let pmax = fit.poles().iter().map(|p| p.norm()).fold(0.0, f64::max);
    let block = *rows.n.iter().max()? as f64;
    if block * step * pmax <= fitting::BLOCK_SHARE {
        return None;
    }
    let (_, tail) = span.counts();
    let want = (fitting::BLOCK_SHARE / (step * pmax)).floor().max(1.0);
    let max_tail = ((tail as f64 / want).ceil() as usize).min(fitting::MAX_TAIL_ROWS);
    let fine = fitting::rows(span, rows.sigma, rows.drift, max_tail);
    let refit = super::varpro::fit(&fine, &fit.kinds, &fit.poles())?;
    Some((fine, refit))
}

type Fitted = (Fit, Vec<fitting::CandidateSummary>, Option<Pencil>);

/// Bayesian information criterion of a fit on its rows (Schwarz 1978).
fn bic(fit: &Fit, rows: &Rows) -> f64 {
    fit.chi2 + (fit.theta.len() + fit.c.len()) as f64 * (rows.len() as f64).ln()
}

fn fit_stage(
    rows: &Rows,
    s: &RecoverSettings,
    pulse: &AppliedPulse,
    progress: &dyn Fn(usize, usize),
) -> Result<Fitted, RecoverError> {
    if s.order == Some(0) {
        return Err(RecoverError::Settings("--order must be at least 1".into()));
    }
    let pencil = fitting::run_pencil(rows, s.order);
    let span = rows
        .t
        .last()
        .map_or(0.0, |t| t - rows.end)
        .max(f64::MIN_POSITIVE);
    let mut starts: Vec<(StartOrigin, Vec<PoleKind>, Vec<C>)> = Vec::new();
    if let Some((pen, step)) = &pencil {
        let orders: Vec<(StartOrigin, usize)> = match s.order {
            Some(n) => vec![(StartOrigin::Forced, n)],
            None => vec![
                (StartOrigin::Pencil, pen.order),
                (StartOrigin::PencilLower, pen.order.saturating_sub(1)),
                (StartOrigin::PencilHigher, pen.order + 1),
            ],
        };
        for (origin, m) in orders {
            let (k, p) = fitting::starts(&pen.poles(m), *step, span);
            starts.push((origin, k, p));
        }
    }
    if s.order.is_none()
        && let Some(net) = &s.model
    {
        let (k, p) = fitting::starts(&model_starts(net, rows, pulse), 0.0, span);
        starts.push((StartOrigin::Model, k, p));
    }
    let total = starts.len();
    progress(0, total);
    let (fit, summaries) = fitting::choose(rows, starts).ok_or(RecoverError::NotConverged {
        step: "pole refinement (no start gave a usable fit: is there a response above the noise?)",
        iterations: super::varpro::MAX_ITERATIONS,
    })?;
    progress(total, total);
    let needed = 3 * (fit.theta.len() + fit.c.len());
    if rows.len() < needed {
        return Err(RecoverError::Settings(format!(
            "the record has {} usable rows, fewer than the {needed} a fit of {} mode(s) needs",
            rows.len(),
            fit.kinds.len()
        )));
    }
    Ok((fit, summaries, pencil.map(|(p, _)| p)))
}

/// The model's stable poles (upper members) whose tail would stand above the noise.
fn model_starts(net: &crate::network::Network, rows: &Rows, pulse: &AppliedPulse) -> Vec<C> {
    let tail_rows = rows.t.iter().filter(|&&t| t >= rows.end).count().max(1) as f64;
    let samples: f64 = rows
        .t
        .iter()
        .zip(&rows.n)
        .filter(|(t, _)| **t >= rows.end)
        .map(|(_, n)| *n as f64)
        .sum();
    let span = rows
        .t
        .last()
        .map_or(0.0, |t| t - rows.end)
        .max(f64::MIN_POSITIVE);
    let per_second = samples.max(tail_rows) / span;
    net.modes
        .iter()
        .filter(|m| m.pole.im >= 0.0 && m.pole.re < 0.0)
        .filter(|m| {
            if !net.residues_known {
                return true;
            }
            let w = if m.pole.im > 0.0 { 2.0 } else { 1.0 };
            let amp = w * (m.residues[0] * pulse.transform(m.pole)).norm();
            let seen = (per_second / -m.pole.re).clamp(1.0, samples.max(1.0));
            amp * seen.sqrt() > 2.0 * rows.sigma
        })
        .map(|m| m.pole)
        .collect()
}

/// Decide σ: with a usable pre-trigger keep it (widening the covariance when the residual
/// clearly exceeds it); without, take σ from the residual (χ² → dof), never below `floor`.
fn settle_noise(
    mut fit: Fit,
    sigma0: f64,
    pre: Option<condition::Noise>,
    floor: f64,
) -> (Fit, f64, NoiseInfo) {
    let dof = fit.dof.max(1) as f64;
    let red = fit.chi2 / dof;
    let from_pre = pre.is_some_and(|n| n.sigma > 0.0);
    // χ²/dof against σ² estimated from n pre-trigger samples: the ratio of two variance
    // estimates, whose spread is √(2/dof + 2/n); 3 of those is the limit (common practice,
    // no source).
    let n_pre = pre.map_or(1.0, |n| n.samples.max(1) as f64);
    let sigma = if from_pre {
        sigma0
    } else {
        (sigma0 * red.sqrt()).max(floor).max(f64::MIN_POSITIVE)
    };
    let scale = if !from_pre {
        (sigma / sigma0).powi(2)
    } else if red > 1.0 + 3.0 * (2.0 / dof + 2.0 / n_pre).sqrt() {
        red
    } else {
        1.0
    };
    if scale != 1.0 {
        fit.cov *= scale;
    }
    if !from_pre {
        let k = sigma0 / sigma;
        fit.residual.iter_mut().for_each(|r| *r *= k);
        fit.chi2 *= k * k;
    }
    let info = NoiseInfo {
        sigma,
        source: if from_pre {
            NoiseSource::PreTrigger
        } else {
            NoiseSource::FitResidual
        },
        pre_trigger: pre,
        at_floor: !from_pre && sigma <= floor,
    };
    (fit, scale, info)
}

fn fit_info(
    fit: &Fit,
    rows: &Rows,
    scale: f64,
    candidates: Vec<fitting::CandidateSummary>,
    pencil: Option<&Pencil>,
    drift: bool,
) -> FitInfo {
    let tail: Vec<f64> = rows
        .t
        .iter()
        .zip(&fit.residual)
        .filter(|(t, _)| **t >= rows.end)
        .map(|(_, r)| *r)
        .collect();
    let lags = (tail.len() / 5).clamp(1, 20);
    let q = super::stats::ljung_box(&tail, lags);
    let block = rows
        .t
        .iter()
        .zip(&rows.n)
        .filter(|(t, _)| **t >= rows.end)
        .map(|(_, n)| *n as usize)
        .max()
        .unwrap_or(1);
    FitInfo {
        rows: rows.len(),
        block,
        chi2: fit.chi2,
        dof: fit.dof,
        chi2_reduced: fit.chi2 / fit.dof.max(1) as f64,
        covariance_scale: scale,
        iterations: fit.iterations,
        converged: fit.converged,
        whiteness: (q, lags, super::stats::chi2_sf(q, lags as f64)),
        pencil: pencil.map(|p| PencilInfo {
            order: p.order,
            order_mdl: p.order_mdl,
            gap: p.gap,
            singular: p.singular.iter().take(16).copied().collect(),
        }),
        candidates,
        drift,
    }
}

fn fitted_modes(p: &Propagated, width: f64) -> Vec<FittedMode> {
    p.set
        .kinds
        .iter()
        .enumerate()
        .map(|(k, kind)| {
            let b = k * PER_MODE;
            let e = |i: usize| p.estimate(b + i);
            let pole = p.set.poles[k];
            let a = p.set.amplitudes[k];
            FittedMode {
                pole_re: e(0),
                pole_im: e(1),
                time_constant: e(2),
                natural_frequency: e(3),
                damping: e(4),
                residue_re: e(5),
                residue_im: e(6),
                residue_magnitude: e(7),
                amplitude_at_end: (a.re, a.im),
                pair: *kind == PoleKind::Pair,
                faster_than_pulse: 1.0 / pole.norm() < width,
            }
        })
        .collect()
}

fn baseline(p: &Propagated, drift: bool, scale: f64) -> (Estimate, Option<Estimate>) {
    let nt: usize = p.set.kinds.iter().map(|k| k.width()).sum();
    let nlin: usize = nt;
    let io = nt + nlin;
    let off = Estimate::new(p.beta[io], p.beta_cov[(io, io)]);
    let dr = drift.then(|| {
        let k = io + 1;
        Estimate::new(p.beta[k] / scale, p.beta_cov[(k, k)] / (scale * scale))
    });
    (off, dr)
}

/// The modes (upper members) as network modes, for exact responses.
pub(super) fn as_network_modes(set: &modes::ModeSet) -> Vec<Mode> {
    set.poles
        .iter()
        .zip(&set.residues)
        .map(|(p, r)| Mode {
            pole: *p,
            residues: vec![*r],
        })
        .collect()
}

/// D from the samples during the pulse: least squares of y − baseline − (modes ∗ x) on x.
fn direct_term(span: &Span, curves: &Curves, sigma: f64) -> DirectTerm {
    let cap = span.cap;
    let pulse = &curves.pulse;
    let peak = pulse
        .breakpoints
        .iter()
        .map(|b| b.1.abs())
        .fold(0.0, f64::max);
    let idx: Vec<usize> = (0..cap.len())
        .filter(|&i| {
            let t = cap.time[i] - curves.zero;
            t > pulse.start() && t < pulse.end() && !span.clip.is_clipped(i)
        })
        .filter(|&i| pulse.value(cap.time[i] - curves.zero).abs() > 0.1 * peak)
        .collect();
    let stride = idx.len().div_ceil(MAX_PULSE_SAMPLES).max(1);
    let idx: Vec<usize> = idx.into_iter().step_by(stride).collect();
    if idx.len() < 3 {
        return DirectTerm {
            estimate: None,
            samples: idx.len(),
            chi2_reduced: None,
            reason: Some(NoEstimate::TooFewSamplesInPulse),
        };
    }
    let p = &curves.modes;
    let kinds = p.set.kinds.clone();
    let drift = p.beta.len() > kinds.iter().map(|k| 2 * k.width()).sum::<usize>() + 1;
    let d_of = |beta: &[f64]| -> (f64, f64, f64) {
        let set = modes::mode_set(&kinds, beta, pulse, drift);
        let modal = Modal::from_modes(&as_network_modes(&set), 0.0);
        let driven = modal.drive(&pulse.breakpoints);
        let (mut sxy, mut sxx, mut syy) = (0.0, 0.0, 0.0);
        for &i in &idx {
            let t = cap.time[i] - curves.zero;
            let x = pulse.value(t);
            let base = set.offset + set.drift * t / curves.drift_scale;
            let y = cap.output.values[i] - base - driven.at(t);
            sxy += x * y;
            sxx += x * x;
            syy += y * y;
        }
        (sxy / sxx, sxx, syy)
    };
    let (d, sxx, syy) = d_of(&p.beta);
    let var = sigma * sigma / sxx + p.variance_of(&|b| d_of(b).0);
    let chi2 = (syy - d * d * sxx) / (sigma * sigma);
    DirectTerm {
        estimate: Some(Estimate::new(d, var)),
        samples: idx.len(),
        chi2_reduced: Some(chi2 / (idx.len() - 1) as f64),
        reason: None,
    }
}

fn capture_info(cap: &Capture) -> CaptureInfo {
    CaptureInfo {
        file: cap.file.clone(),
        samples: cap.len(),
        channel: (cap.output.name.clone(), cap.output.column),
        channel_unit: cap.output.unit.clone(),
        stimulus: cap.stimulus.as_ref().map(|c| (c.name.clone(), c.column)),
        uniform_step_s: cap.uniform_step,
        span_s: (cap.time[0], *cap.time.last().unwrap_or(&0.0)),
        axis: cap.axis.clone(),
        metadata: cap.meta.clone(),
        delimiter: cap.delimiter as char,
        decimal_comma: cap.decimal_comma,
    }
}

fn pulse_info(
    s: &RecoverSettings,
    applied: &AppliedPulse,
    measured: Option<MeasuredPulse>,
) -> PulseInfo {
    let st = &s.pulse;
    let stated = StatedPulse {
        amplitude: st.amplitude,
        duration_50_s: st.width_50(),
        rise_10_90_s: st.rise_10_90(),
        fall_10_90_s: st.fall_10_90(),
        area: st.area(),
    };
    let rel = |m: f64, s: f64| if s != 0.0 { (m - s) / s } else { 0.0 };
    let differences = measured.as_ref().map(|m| PulseDifferences {
        area: rel(applied.area(), stated.area),
        amplitude: rel(m.amplitude, stated.amplitude),
        duration_50: rel(m.duration_50_s, stated.duration_50_s),
        rise_10_90: rel(m.rise_10_90_s, stated.rise_10_90_s),
        fall_10_90: rel(m.fall_10_90_s, stated.fall_10_90_s),
    });
    PulseInfo {
        source: applied.source,
        stated_is_given: s.pulse_given,
        area: applied.area(),
        centroid_s: applied.centroid(),
        variance_s2: applied.variance(),
        end_s: applied.end(),
        stated,
        measured,
        differences,
    }
}

fn compare_model(b: &Base, net: &crate::network::Network, span: &Span) -> compare::Comparison {
    let p = &b.curves.modes;
    let (matches, extra, missing) = super::matching::match_modes(&p.set.poles, net);
    let direct = b
        .direct
        .estimate
        .and_then(|e| e.std.map(|s| (e.value, s * s)));
    let diffs = compare::differences(p, &matches, net, direct);
    let residual = Some(residual_vs_model(b, net, span));
    let parts = match (&b.s.netlist, net.residues_known) {
        (Some(spec), true) => parts::attribute(spec, net, p, &matches, direct),
        _ => None,
    };
    let within = parts
        .as_ref()
        .and_then(|a| a.joint.as_ref())
        .map(|j| j.within_tolerance);
    let (verdict, z_critical, largest) = compare::verdict(&diffs, residual.as_ref(), within);
    compare::Comparison {
        matches,
        extra_fitted: extra,
        unmatched_model: missing,
        differences: diffs,
        residual,
        z_critical,
        verdict,
        largest,
        parts,
    }
}

/// The capture (baseline removed) against the model's exact output for the applied pulse,
/// and the likelihood-ratio test of the model's modes on the fit's rows.
fn residual_vs_model(
    b: &Base,
    net: &crate::network::Network,
    span: &Span,
) -> compare::ResidualVsModel {
    let (mut chi2, mut max, mut count) = (0.0, 0.0f64, 0usize);
    if net.residues_known {
        let cap = b.cap;
        let modal = Modal::new(net);
        let driven = modal.drive(&b.curves.pulse.breakpoints);
        let free = driven.after_end();
        let start = cap
            .time
            .partition_point(|&t| t - b.curves.zero < b.curves.pulse.start());
        let stride = (cap.len() - start).div_ceil(MAX_MODEL_SAMPLES).max(1);
        for i in (start..cap.len()).step_by(stride) {
            if span.clip.is_clipped(i) {
                continue;
            }
            let t = cap.time[i] - b.curves.zero;
            let y = if t >= b.curves.end {
                free.at(t)
            } else {
                driven.at(t)
            };
            let z = (cap.output.values[i] - b.curves.baseline(t) - y) / b.noise.sigma;
            chi2 += z * z;
            max = max.max(z.abs());
            count += 1;
        }
    }
    let lr = likelihood_ratio(b.rows, b.fit_raw, net, &b.curves.pulse);
    let scale = b.fit.covariance_scale.max(f64::MIN_POSITIVE);
    compare::ResidualVsModel {
        samples: count,
        rms_sigma: (chi2 / count.max(1) as f64).sqrt(),
        max_sigma: max,
        delta_chi2: lr.map(|(d, _)| d / scale),
        dof: lr.map_or(0, |(_, k)| k),
        p_value: lr.map(|(d, k)| super::stats::chi2_sf((d / scale).max(0.0), k as f64)),
    }
}

/// χ² of the rows with the model's poles (and residues, when known) minus the free fit's
/// χ², with the number of parameters the model fixes. `None` for repeated model poles.
fn likelihood_ratio(
    rows: &Rows,
    fit: &Fit,
    net: &crate::network::Network,
    pulse: &AppliedPulse,
) -> Option<(f64, usize)> {
    let modes: Vec<&Mode> = net
        .modes
        .iter()
        .filter(|m| m.pole.im >= 0.0 && m.pole.re < 0.0)
        .collect();
    if modes.iter().any(|m| m.multiplicity() != 1) {
        return None;
    }
    let kinds: Vec<PoleKind> = modes
        .iter()
        .map(|m| {
            if m.pole.im > 0.0 {
                PoleKind::Pair
            } else {
                PoleKind::Real
            }
        })
        .collect();
    let poles: Vec<C> = modes.iter().map(|m| m.pole).collect();
    let theta = super::varpro::theta_of(&kinds, &poles);
    let d = super::varpro::design(rows, &kinds, &theta);
    let free = super::varpro::project(&super::varpro::design(rows, &fit.kinds, &fit.theta))?
        .0
        .chi2;
    let nlin: usize = kinds.iter().map(|k| k.width()).sum();
    let k_free = fit.theta.len() + fit.c.len();
    let (constrained, k_model) = if net.residues_known {
        let mut fixed = nalgebra::DVector::zeros(d.a.ncols());
        let mut col = 0;
        for (kind, m) in kinds.iter().zip(&modes) {
            let w = modes::weight(*kind);
            let c = m.residues[0] * pulse.transform(m.pole) * w;
            fixed[col] = c.re;
            if *kind == PoleKind::Pair {
                fixed[col + 1] = -c.im;
            }
            col += kind.width();
        }
        let rest = &d.b - &d.a * &fixed;
        let base = d.a.columns(nlin, d.a.ncols() - nlin).into_owned();
        let qr = base.clone().qr();
        let coef = qr
            .r()
            .solve_upper_triangular(&(qr.q().transpose() * &rest))?;
        ((rest - base * coef).norm_squared(), d.a.ncols() - nlin)
    } else {
        (super::varpro::project(&d)?.0.chi2, d.a.ncols())
    };
    Some((constrained - free, k_free.saturating_sub(k_model).max(1)))
}

fn warnings(r: &Recovery, s: &RecoverSettings, span: &Span) -> Vec<Warning> {
    let mut w = Vec::new();
    if r.clipping.samples > 0 {
        w.push(Warning::Clipped {
            samples: r.clipping.samples,
            runs: r.clipping.runs,
        });
    }
    let last = r.capture.span_s.1 - r.time_zero.capture_time_s;
    if let Some(run) = s.run
        && last < 0.99 * run
    {
        w.push(Warning::RecordShort {
            after_pulse_s: last - r.pulse.end_s,
            run_s: run,
        });
    }
    noise_warnings(r, span, &mut w);
    fit_warnings(r, &mut w);
    model_warnings(r, s, &mut w);
    w
}

fn noise_warnings(r: &Recovery, span: &Span, w: &mut Vec<Warning>) {
    match (&r.noise.pre_trigger, r.noise.source) {
        (_, NoiseSource::FitResidual) if span.counts().0 < MIN_PRE => {
            w.push(Warning::NoPreTrigger {
                samples: span.counts().0,
            })
        }
        (Some(n), _) if n.lag1.abs() > n.lag1_limit && n.lsb.is_none() => {
            w.push(Warning::NoiseNotWhite {
                lag1: n.lag1,
                limit: n.lag1_limit,
            })
        }
        _ => {}
    }
    match r.time_zero.source {
        TimeZeroSource::PlannedPreTrigger => w.push(Warning::TimeZeroFromPlan {
            capture_time_s: r.time_zero.capture_time_s,
        }),
        TimeZeroSource::FirstSample => w.push(Warning::TimeZeroAssumed {
            capture_time_s: r.time_zero.capture_time_s,
        }),
        _ => {}
    }
    if let Some(d) = &r.pulse.differences
        && d.area.abs() > 0.02
    {
        w.push(Warning::PulseDiffers {
            area_relative: d.area,
        });
    }
}

fn fit_warnings(r: &Recovery, w: &mut Vec<Warning>) {
    let f = &r.fit;
    if !f.converged {
        w.push(Warning::FitNotConverged {
            iterations: f.iterations,
        });
    }
    if f.whiteness.2 < 1e-3 && !r.noise.at_floor {
        w.push(Warning::ResidualNotWhite {
            q: f.whiteness.0,
            lags: f.whiteness.1,
            p_value: f.whiteness.2,
        });
    }
    if r.noise.source == NoiseSource::PreTrigger && f.covariance_scale > 1.0 {
        w.push(Warning::ResidualExceedsNoise {
            chi2_reduced: f.chi2_reduced,
        });
    }
    let chosen = r.modes.len();
    let best = f
        .candidates
        .iter()
        .map(|c| c.bic)
        .fold(f64::INFINITY, f64::min);
    if let Some(alt) = f
        .candidates
        .iter()
        .filter(|c| c.modes != chosen && c.bic - best < 2.0)
        .min_by(|a, b| a.bic.total_cmp(&b.bic))
    {
        w.push(Warning::OrderAmbiguous {
            modes: chosen,
            alternative: alt.modes,
            delta_bic: alt.bic - best,
        });
    }
    for m in r.modes.iter().filter(|m| m.faster_than_pulse) {
        w.push(Warning::PoleFasterThanPulse {
            pole_re: m.pole_re.value,
            pole_im: m.pole_im.value,
            time_scale_s: 1.0 / m.natural_frequency.value,
            pulse_width_s: r.curves.pulse_width(),
        });
    }
    if let Some(c) = r.direct.chi2_reduced {
        let n = r.direct.samples.saturating_sub(1).max(1) as f64;
        if super::stats::chi2_sf(c * n, n) < 1e-3 {
            w.push(Warning::PulseSamplesMisfit { chi2_reduced: c });
        }
    }
}

fn model_warnings(r: &Recovery, s: &RecoverSettings, w: &mut Vec<Warning>) {
    let (Some(c), Some(net)) = (&r.comparison, &s.model) else {
        return;
    };
    let sig = net.significance(0.01);
    let width = r.curves.pulse_width();
    for (re, im) in &c.unmatched_model {
        let k = net
            .modes
            .iter()
            .position(|m| m.pole.re == *re && m.pole.im == *im);
        if k.is_some_and(|k| sig.significant[k]) {
            let p = C::new(*re, *im);
            w.push(Warning::ModelModeNotSeen {
                pole_re: *re,
                pole_im: *im,
                hidden_by_pulse: p.norm() * width > 1.0,
            });
        }
    }
    if c.verdict == compare::Verdict::Inconsistent {
        let z = c.largest.map_or(0.0, |k| c.differences[k].z.abs());
        w.push(Warning::ModelInconsistent { z });
    }
}
