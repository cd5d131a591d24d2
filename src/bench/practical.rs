//! From the ideal plan to one the bench can deliver: generator timing and amplitude limits,
//! the circuit's input and output ranges, noise and averaging, repetition, capture.

use super::{CapturePlan, NoiseCurves, noise_curves, plan_capture, repeat::PeriodChoice};
use crate::estimate::ErrorEstimate;
use crate::plan::{Prepared, Warning};
use crate::pulse::{Convention, TEN_NINETY, Trapezoid};
use crate::report::with_unit;
use crate::scenario::Scenario;
use crate::units::{Dim, eng, percent_unsigned};

/// How the pulse's area was scaled to respect the limits.
#[derive(Debug, Clone, PartialEq)]
pub struct Scaling {
    /// Area the plan asked for.
    pub requested_area: f64,
    /// Area delivered.
    pub area: f64,
    /// Why it changed (empty when it did not).
    pub reasons: Vec<String>,
}

impl Scaling {
    /// h(t) ≈ y(t) × this (1/area).
    pub fn read_factor(&self) -> f64 {
        1.0 / self.area
    }
}

/// The plan as the bench will run it.
#[derive(Debug, Clone)]
pub struct BenchPlan {
    /// The pulse at the circuit's input (after every limit and rounding).
    pub pulse: Trapezoid,
    /// Amplitude to set on the generator's display (its load setting taken into account).
    pub display_amplitude: f64,
    /// Amplitude at the circuit / display amplitude.
    pub open_over_display: f64,
    /// Area scaling.
    pub scaling: Scaling,
    /// Predicted peak at the circuit's input (the pulse amplitude).
    pub peak_input: f64,
    /// Predicted peak |y| at the output over the run (direct-term copy included).
    pub peak_output: f64,
    /// Errors of the delivered pulse.
    pub estimate: ErrorEstimate,
    /// Metric before and after rounding/limits changed the timing, when they did.
    pub timing_change: Option<(f64, f64)>,
    /// Repetition period (None when a mode does not decay: single shot only).
    pub period: Option<PeriodChoice>,
    /// Noise curves, with `[capture] noise`.
    pub noise: Option<NoiseCurves>,
    /// Averages needed for the budget (None: not reachable, or no noise given).
    pub averages: Option<u64>,
    /// Capture settings.
    pub capture: CapturePlan,
    /// The budget the bench stage worked to: `[plan] target_error`, or without one the pulse's
    /// own error (at least 0.1 %).
    pub budget: f64,
    /// Warnings raised by the bench stage.
    pub warnings: Vec<Warning>,
    /// Plain notes (what was changed and why).
    pub notes: Vec<String>,
}

fn warn(code: &'static str, message: String) -> Warning {
    Warning { code, message }
}

/// Peak |y(t)| over [0, run] for a pulse (direct term included while the input is non-zero).
pub fn peak_output(prep: &Prepared, pulse: &Trapezoid, run: f64) -> f64 {
    let d = prep.estimator.modal().drive(&pulse.breakpoints());
    let end = pulse.end();
    let inside = (0..=200).map(|k| d.at(end * k as f64 / 200.0).abs());
    let span = (run - end).max(end);
    let n = 4000;
    let after = d.after_end();
    let uniform = after.uniform(end, span / (n - 1) as f64, n);
    let start = (prep.tau_fast * 1e-3).min(span / 10.0);
    let ratio = (span / start).powf(1.0 / 400.0);
    let geometric = (0..=400).map(|k| after.at(end + start * ratio.powi(k)).abs());
    inside
        .chain(uniform.iter().map(|v| v.abs()))
        .chain(geometric)
        .fold(0.0, f64::max)
}

/// Fit the planned pulse to the bench (`adapt`), or only check a given pulse against it.
pub fn practical(sc: &Scenario, prep: &Prepared, planned: &Trapezoid, adapt: bool) -> BenchPlan {
    let gen_ = sc.bench.generator.clone().unwrap_or_default();
    let limits = sc.bench.limits.clone().unwrap_or_default();
    let s = &sc.plan;
    let amp_dim = sc.drive.dim();
    let mut warnings = Vec::new();
    let mut notes = Vec::new();
    let mut reasons = Vec::new();
    let est = &prep.estimator;
    let run = prep.run;

    // Timing: width and edges within the generator's range, rounded to its resolution.
    let mut pulse = *planned;
    if adapt {
        let width0 = planned.width_50();
        let edge0 = planned.rise_10_90().max(planned.fall_10_90());
        let lo_edge = gen_.min_edge.unwrap_or(0.0);
        let hi_edge = gen_.max_edge.unwrap_or(f64::INFINITY);
        let edge = gen_.fit_time(edge0.clamp(lo_edge, hi_edge), lo_edge, hi_edge);
        // A trapezoid needs width ≥ full ramp (no negative flat top).
        let lo_width = gen_.min_width.unwrap_or(0.0).max(edge / TEN_NINETY);
        let width = gen_.fit_time(width0.max(lo_width), lo_width, f64::INFINITY);
        if width != width0 || edge != edge0 {
            notes.push(format!(
                "generator timing: width {} → {}, edges {} → {} (limits and {} resolution)",
                eng(width0, Dim::Time),
                eng(width, Dim::Time),
                eng(edge0, Dim::Time),
                eng(edge, Dim::Time),
                gen_.time_step.map_or("no".into(), |t| eng(t, Dim::Time))
            ));
        }
        let amplitude = planned.area() / width;
        pulse = Trapezoid::from_convention(amplitude, width, edge, edge, Convention::Generator)
            .unwrap_or(*planned);
    }

    // Amplitude: the generator's and the circuit's input limits.
    let requested_area = planned.area();
    let mut amp_limit = f64::INFINITY;
    if let Some(a) = gen_.max_amplitude {
        amp_limit = amp_limit.min(a);
    }
    if let Some(a) = limits.max_input {
        amp_limit = amp_limit.min(a);
    }
    if adapt && pulse.amplitude.abs() > amp_limit {
        let which = if limits
            .max_input
            .is_some_and(|m| m <= gen_.max_amplitude.unwrap_or(f64::INFINITY))
        {
            "the circuit's largest input ([limits] max_input)"
        } else {
            "the generator's largest amplitude ([generator] max_amplitude)"
        };
        reasons.push(format!(
            "amplitude {} exceeds {} of {}",
            eng(pulse.amplitude, amp_dim),
            which,
            eng(amp_limit, amp_dim)
        ));
        pulse.amplitude = amp_limit.copysign(pulse.amplitude);
    }
    // Output linear range.
    let mut peak_out = peak_output(prep, &pulse, run);
    if let Some(max_out) = limits.max_output.filter(|&m| adapt && peak_out > m) {
        let k = max_out / peak_out;
        reasons.push(format!(
            "the predicted output peak {} exceeds the linear output range ([limits] max_output) {}",
            fmt_plain(peak_out),
            fmt_plain(max_out)
        ));
        pulse.amplitude *= k;
        peak_out *= k;
    }
    if !adapt {
        if pulse.amplitude.abs() > amp_limit * (1.0 + 1e-12) {
            warnings.push(warn(
                "pulse-exceeds-limit",
                format!(
                    "the amplitude {} exceeds the stated limit of {}",
                    eng(pulse.amplitude, amp_dim),
                    eng(amp_limit, amp_dim)
                ),
            ));
        }
        if let Some(max_out) = limits.max_output.filter(|&m| peak_out > m) {
            warnings.push(warn(
                "output-beyond-range",
                format!(
                    "the predicted output peak {} exceeds the linear output range {}: reduce the amplitude by {:.3}×",
                    fmt_plain(peak_out),
                    fmt_plain(max_out),
                    max_out / peak_out
                ),
            ));
        }
        if let Some(w) = gen_.min_width.filter(|&w| pulse.width_50() < w) {
            warnings.push(warn(
                "pulse-exceeds-limit",
                format!(
                    "the width {} is below the generator's shortest {}",
                    eng(pulse.width_50(), Dim::Time),
                    eng(w, Dim::Time)
                ),
            ));
        }
    }
    let scaling = Scaling {
        requested_area,
        area: pulse.area(),
        reasons,
    };
    if !scaling.reasons.is_empty() {
        notes.push(format!(
            "area planned down from {} to {} ({}); read h(t) ≈ y(t) × {} (1/area)",
            with_unit(requested_area, sc.drive.area_unit()),
            with_unit(scaling.area, sc.drive.area_unit()),
            scaling.reasons.join("; "),
            fmt_plain(scaling.read_factor())
        ));
    }

    let estimate = est.estimate(&pulse, run);
    let before = est.metric(planned, s.metric, run);
    let after = estimate.metric(s.metric);
    let timing_change = (pulse.width_50() != planned.width_50()
        || pulse.rise != planned.rise
        || pulse.fall != planned.fall)
        .then_some((before, after));
    if let (Some((b, a)), Some(budget)) = (timing_change, s.target_error)
        && a > budget
        && adapt
    {
        warnings.push(warn(
            "generator-too-slow",
            format!(
                "the generator's timing limits move the {} error from {} to {}, beyond the {} budget",
                s.metric.name(),
                percent_unsigned(b),
                percent_unsigned(a),
                percent_unsigned(budget)
            ),
        ));
    }

    // Noise and averaging.
    // Without a budget, the pulse's own error (at least 0.1 %) stands in for it.
    let budget = s
        .target_error
        .unwrap_or_else(|| estimate.metric(s.metric).max(1e-3));
    let capture = sc.bench.capture.clone();
    let (noise, averages) = match capture.as_ref().and_then(|c| c.noise) {
        Some(sigma) if sc.network.residues_known => {
            let w_hi = prep.tau_plan / s.min_width_ratio;
            let w_lo = (w_hi / 1e4).min(pulse.width_50() / 10.0);
            let curves = noise_curves(est, s, pulse.amplitude, sigma, run, w_lo, w_hi);
            let bias_now = estimate.metric(s.metric);
            let noise_now = sigma / (pulse.area().abs() * est.normaliser());
            let room = budget - bias_now;
            let needed = (room > 0.0).then(|| ((noise_now / room).powi(2)).ceil().max(1.0) as u64);
            let max_avg = capture.as_ref().and_then(|c| c.max_averages);
            match (needed, max_avg) {
                (None, _) => warnings.push(warn(
                    "noise-budget-unreachable",
                    format!(
                        "the pulse's bias alone ({}) uses the whole {} budget: no averaging can help",
                        percent_unsigned(bias_now),
                        percent_unsigned(budget)
                    ),
                )),
                (Some(n), Some(m)) if n as f64 > m => warnings.push(warn(
                    "averages-exceed-capture",
                    format!(
                        "reaching the {} budget needs {n} averages (noise {} per acquisition), more than the {m} the capture allows",
                        percent_unsigned(budget),
                        percent_unsigned(noise_now)
                    ),
                )),
                _ => {}
            }
            notes.push(format!(
                "noise: {} of the reading per acquisition; bias {}; best width for bias + noise at this amplitude: {}",
                percent_unsigned(noise_now),
                percent_unsigned(bias_now),
                eng(curves.best_width, Dim::Time)
            ));
            (Some(curves), needed)
        }
        Some(_) => {
            notes.push(
                "noise not assessed: the residues (and so the size of h) are unknown for a network given by time constants"
                    .into(),
            );
            (None, None)
        }
        None => (None, None),
    };

    // Repetition.
    let period = super::choose_period(
        est,
        &pulse,
        run,
        budget,
        s.metric,
        sc.bench.generator.as_ref(),
    );
    match &period {
        None => warnings.push(warn(
            "single-shot-only",
            "a mode does not decay, so every earlier pulse of a train would still be present: run single shots, letting the circuit reset between them".into(),
        )),
        Some(p) if !p.met => warnings.push(warn(
            "period-too-short",
            format!(
                "the longest period available ({}) leaves a tail error of {} from earlier pulses, above a tenth of the budget ({})",
                eng(p.period, Dim::Time),
                percent_unsigned(p.tail),
                percent_unsigned(p.target)
            ),
        )),
        _ => {}
    }

    // Capture.
    let cap = plan_capture(
        &pulse,
        prep.tau_plan,
        run,
        capture.as_ref(),
        averages.unwrap_or(1),
    );
    if !cap.fits_memory {
        warnings.push(warn(
            "capture-memory",
            format!(
                "{} points are needed to sample at {} over {}, more than the memory holds: take two records (see the capture plan)",
                cap.points,
                eng(cap.sample_interval, Dim::Time),
                eng(cap.record_length, Dim::Time)
            ),
        ));
    }
    if cap.samples_across_pulse < super::capture::SAMPLES_PER_WIDTH * (1.0 - 1e-9) {
        warnings.push(warn(
            "capture-undersampled",
            format!(
                "at the highest sample rate only {:.1} samples fall across the {} pulse",
                cap.samples_across_pulse,
                eng(pulse.width_50(), Dim::Time)
            ),
        ));
    }
    let open_over_display = if sc.drive == crate::scenario::DriveKind::Voltage {
        gen_.open_over_display()
    } else {
        1.0
    };
    BenchPlan {
        display_amplitude: pulse.amplitude / open_over_display,
        open_over_display,
        peak_input: pulse.amplitude.abs(),
        peak_output: peak_out,
        pulse,
        scaling,
        estimate,
        timing_change,
        period,
        noise,
        averages,
        capture: cap,
        budget,
        warnings,
        notes,
    }
}

fn fmt_plain(v: f64) -> String {
    crate::units::eng_plain(v, 4)
}
