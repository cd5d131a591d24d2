//! The bench: generator, capture and circuit limits, and what they do to a planned pulse. One
//! step per concern, each with its own result: timing ([`timing`]), amplitude and range
//! ([`amplitude`]), noise and averages ([`noise`]), repetition ([`repeat`]) and the capture
//! ([`capture`]); [`fit`] runs them in that order.

pub mod amplitude;
pub mod capture;
pub mod noise;
pub mod repeat;
pub mod settings;
pub mod timing;

pub use amplitude::{AmplitudeFit, ScaleReason, Scaling};
pub use capture::{CapturePlan, Record};
pub use noise::{NoiseCurves, NoiseFit};
pub use repeat::PeriodChoice;
pub use settings::{
    Bench, BenchInput, Capture, Generator, HAZARD_VOLTS, Limits, LoadSetting, MATCHED_LOAD,
};
pub use timing::TimingChange;

use crate::estimate::ErrorEstimate;
use crate::notice::{Note, Warning};
use crate::plan::{PlanSettings, Prepared};
use crate::pulse::Trapezoid;
use serde::Serialize;

/// The plan as the bench will run it: each step's result.
#[derive(Debug, Clone, Serialize)]
pub struct BenchPlan {
    /// The pulse the bench stage started from (after the noise step's choice of width).
    #[serde(skip)]
    pub planned: Trapezoid,
    /// The pulse at the circuit's input (after every limit and rounding).
    #[serde(skip)]
    pub pulse: Trapezoid,
    /// Amplitude, display and range.
    #[serde(flatten)]
    pub amplitude: AmplitudeFit,
    /// Errors of the delivered pulse.
    #[serde(skip)]
    pub estimate: ErrorEstimate,
    /// Metric before and after rounding/limits changed the timing, when they did.
    pub timing_change: Option<TimingChange>,
    /// Repetition period (None when a mode does not decay: single shot only).
    pub period: Option<PeriodChoice>,
    /// Noise curves and averages.
    #[serde(flatten)]
    pub noise: NoiseFit,
    /// Capture settings.
    pub capture: CapturePlan,
    /// The budget the bench stage worked to: `[plan] target_error`, or without one the pulse's
    /// own error (at least 0.1 %).
    pub budget: f64,
    /// Warnings raised by the bench stage.
    #[serde(skip)]
    pub warnings: Vec<Warning>,
    /// Notes (what was changed and why).
    #[serde(skip)]
    pub notes: Vec<Note>,
}

/// The significant modes' time scales, for the capture plan.
fn dynamics(prep: &Prepared) -> Vec<capture::Dynamics> {
    let d: Vec<capture::Dynamics> = prep
        .facts
        .modes
        .iter()
        .filter(|m| m.significant && m.natural_frequency > 0.0)
        .map(|m| capture::Dynamics {
            scale: 1.0 / m.natural_frequency,
            decay: m.time_constant.unwrap_or(f64::INFINITY),
        })
        .collect();
    if d.is_empty() {
        vec![capture::Dynamics {
            scale: prep.tau_plan,
            decay: prep.tau_slow.unwrap_or(f64::INFINITY),
        }]
    } else {
        d
    }
}

/// The budget the bench works to: the user's, or the pulse's own error (at least 0.1 %).
fn working_budget(s: &PlanSettings, estimate: &ErrorEstimate) -> f64 {
    s.target_error
        .unwrap_or_else(|| estimate.metric(s.metric).max(1e-3))
}

/// Samples before the pulse that a record for the fit reading holds at least: the fit takes
/// the noise σ and the baseline from them, and a short pre-trigger (a tenth of a brief
/// record) leaves σ uncertain by tens of percent, which misleads the order choice (1000
/// samples hold σ to a few percent; our choice).
pub const FIT_PRE_SAMPLES: f64 = 1000.0;

/// Fit a planned pulse to the bench (`adapt`: timing and amplitude are changed to respect the
/// limits), or only check a given pulse against it (`adapt` false).
pub fn fit(inp: &BenchInput, prep: &Prepared, planned: &Trapezoid, adapt: bool) -> BenchPlan {
    fit_for(inp, prep, planned, adapt, None)
}

/// [`fit`] for a reading: `fitted` is `Some(averages)` when h is read by the modal fit: the
/// caller chose the averages (from the fit's bounds), the raw reading's noise step is skipped,
/// and the record runs the planned run past the pulse's end (the fit reads the record after
/// the pulse, however wide).
pub fn fit_for(
    inp: &BenchInput,
    prep: &Prepared,
    planned: &Trapezoid,
    adapt: bool,
    fitted: Option<u64>,
) -> BenchPlan {
    let gen_ = inp.bench.generator.clone().unwrap_or_default();
    let s = inp.plan;
    let est = &prep.estimator;
    let mut warnings = Vec::new();
    let mut notes = Vec::new();
    let timed = timing_step(planned, &gen_, adapt);
    notes.extend(timed.note);
    let amp = amplitude::fit(inp, prep, &timed.pulse, planned.area(), adapt);
    warnings.extend(amp.warnings.iter().cloned());
    notes.extend(amp.notes.iter().cloned());
    let pulse = amp.pulse;
    let estimate = est.estimate(&pulse, prep.run);
    let timing_change = timing::change(est, s, planned, &pulse, &estimate, prep.run);
    // The fit removes the pulse exactly: the raw reading's timing error does not apply to it.
    if adapt && fitted.is_none() {
        warnings.extend(timing::too_slow(s, timing_change));
    }
    let budget = working_budget(s, &estimate);
    let noise = noise_step(inp, prep, &pulse, &estimate, budget, fitted);
    let record_run = match fitted {
        Some(_) => prep.run + pulse.end(),
        None => prep.run,
    };
    warnings.extend(noise.warnings.iter().cloned());
    notes.extend(noise.notes.iter().cloned());
    let period = repeat::choose_period(
        est,
        &pulse,
        prep.run,
        budget,
        s.metric,
        inp.bench.generator.as_ref(),
    );
    warnings.extend(repeat::warnings(period.as_ref()));
    let averages = noise.fit.averages.unwrap_or(1);
    let cap = capture_step(inp, prep, &pulse, record_run, averages, fitted.is_some());
    let (w, n) = capture::warnings(&cap, &pulse);
    warnings.extend(w);
    notes.extend(n);
    BenchPlan {
        planned: *planned,
        pulse,
        amplitude: amp.fit,
        estimate,
        timing_change,
        period,
        noise: noise.fit,
        capture: cap,
        budget,
        warnings,
        notes,
    }
}

/// The timing step: the planned pulse fitted to the generator (`adapt`), or kept as it is.
fn timing_step(planned: &Trapezoid, gen_: &Generator, adapt: bool) -> timing::TimingFit {
    if adapt {
        timing::fit(planned, gen_)
    } else {
        timing::TimingFit {
            pulse: *planned,
            note: None,
        }
    }
}

/// The capture step: the record over `record_run` at `averages`, holding
/// [`FIT_PRE_SAMPLES`] before the pulse when h is read by the fit (`fitted`).
fn capture_step(
    inp: &BenchInput,
    prep: &Prepared,
    pulse: &Trapezoid,
    record_run: f64,
    averages: u64,
    fitted: bool,
) -> CapturePlan {
    let pre_samples = if fitted { FIT_PRE_SAMPLES } else { 0.0 };
    capture::plan_capture(
        pulse,
        &dynamics(prep),
        record_run,
        inp.bench.capture.as_ref(),
        averages,
        pre_samples,
    )
}

/// The noise step: for the fit reading the caller's `fitted` averages, otherwise the raw
/// reading's noise curves and the averages they need for the budget.
fn noise_step(
    inp: &BenchInput,
    prep: &Prepared,
    pulse: &Trapezoid,
    estimate: &ErrorEstimate,
    budget: f64,
    fitted: Option<u64>,
) -> noise::NoiseStep {
    match fitted {
        Some(n) => noise::NoiseStep {
            fit: NoiseFit {
                noise: None,
                averages: Some(n),
            },
            ..Default::default()
        },
        None => noise::assess(inp, prep, pulse, estimate, budget),
    }
}

/// With output noise, the width that needs the fewest averages to meet the budget, when it
/// differs from the planned width by more than 1 % (the widest pulse within the bias budget
/// would leave no room for noise). `delivered` is the bench's fit of the planned pulse.
pub fn better_width(
    inp: &BenchInput,
    prep: &Prepared,
    planned: &Trapezoid,
    delivered: &BenchPlan,
) -> Option<f64> {
    let sigma = inp.bench.capture.as_ref().and_then(|c| c.noise)?;
    delivered.noise.noise.as_ref()?;
    let limited = (!delivered.amplitude.scaling.reasons.is_empty())
        .then_some(delivered.pulse.amplitude.abs())
        .or(inp.area.level());
    let w_hi = planned.width_50();
    let (w, _) = noise::fewest_averages(
        &prep.estimator,
        inp.plan,
        limited,
        planned.area(),
        sigma,
        prep.run,
        w_hi,
        delivered.budget,
    )?;
    ((w / w_hi - 1.0).abs() > 0.01).then_some(w)
}
