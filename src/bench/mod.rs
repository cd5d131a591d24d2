//! The bench: generator, capture and circuit limits, and what they do to a planned pulse. One
//! step per concern, each with its own result: timing ([`timing`]), amplitude and range
//! ([`amplitude`]), noise and averages ([`noise`]), repetition ([`repeat`]) and the capture
//! ([`capture`]); [`fit`] runs them in that order.

pub mod amplitude;
pub mod capture;
pub mod noise;
pub mod repeat;
pub mod timing;

pub use amplitude::{AmplitudeFit, ScaleReason, Scaling};
pub use capture::{CapturePlan, Record};
pub use noise::{NoiseCurves, NoiseFit};
pub use repeat::PeriodChoice;
pub use timing::TimingChange;

use crate::estimate::ErrorEstimate;
use crate::notice::{Note, Warning};
use crate::plan::{PlanSettings, Prepared};
use crate::pulse::Trapezoid;
use crate::units::Signal;
use serde::Serialize;

/// The usual extra-low-voltage limit for a pulse generator's output: 60 V (the common touch-safe
/// DC figure for safety extra-low voltage; recalled from memory of common practice, no source checked).
pub const HAZARD_VOLTS: f64 = 60.0;

/// Which load the generator's amplitude display assumes.
#[derive(Debug, Clone, Copy, PartialEq, Eq)]
pub enum LoadSetting {
    /// The display shows the open-circuit voltage.
    HighZ,
    /// The display shows the voltage across a matched 50 Ω load.
    Fifty,
}

impl LoadSetting {
    /// Name as written in scenarios and sheets.
    pub fn name(self) -> &'static str {
        match self {
            LoadSetting::HighZ => "high-z",
            LoadSetting::Fifty => "50",
        }
    }
}

/// `[generator]`: the pulse source's limits.
#[derive(Debug, Clone, PartialEq, Default)]
pub struct Generator {
    /// Largest amplitude it delivers into the load it sees (V or A).
    pub max_amplitude: Option<f64>,
    /// Shortest 50 % width, s.
    pub min_width: Option<f64>,
    /// Fastest 10–90 % edge, s.
    pub min_edge: Option<f64>,
    /// Slowest 10–90 % edge, s.
    pub max_edge: Option<f64>,
    /// Timing resolution: width, edges and period are multiples of it, s.
    pub time_step: Option<f64>,
    /// Longest period, s.
    pub max_period: Option<f64>,
    /// Output (source) resistance, Ω.
    pub output_resistance: Option<f64>,
    /// Load the display assumes.
    pub load_setting: Option<LoadSetting>,
}

/// `[capture]`: the recording instrument.
#[derive(Debug, Clone, PartialEq, Default)]
pub struct Capture {
    /// RMS noise at the output in one acquisition.
    pub noise: Option<f64>,
    /// Highest sample rate, samples/s.
    pub max_sample_rate: Option<f64>,
    /// Record memory, points.
    pub max_points: Option<f64>,
    /// Most averages it can take.
    pub max_averages: Option<f64>,
}

/// `[limits]`: the circuit under test.
#[derive(Debug, Clone, PartialEq, Default)]
pub struct Limits {
    /// Largest input it tolerates / stays linear at.
    pub max_input: Option<f64>,
    /// Linear output range (peak).
    pub max_output: Option<f64>,
}

/// Everything the bench sections say (all optional: absent means an unconstrained simulator).
#[derive(Debug, Clone, PartialEq, Default)]
pub struct Bench {
    /// `[generator]`.
    pub generator: Option<Generator>,
    /// `[capture]`.
    pub capture: Option<Capture>,
    /// `[limits]`.
    pub limits: Option<Limits>,
}

/// Load resistance the "50" setting assumes, Ω.
pub const MATCHED_LOAD: f64 = 50.0;

impl Generator {
    /// Ratio of the amplitude at a high-impedance circuit input to the amplitude the
    /// generator's display shows. With the "50" setting the display assumes a matched load,
    /// v_load = v_open·50/(50 + R_out) (voltage divider), so an unloaded input sees
    /// (50 + R_out)/50 times the display: twice it for a 50 Ω source.
    pub fn open_over_display(&self) -> f64 {
        match (self.load_setting, self.output_resistance) {
            (Some(LoadSetting::Fifty), Some(r)) => (MATCHED_LOAD + r) / MATCHED_LOAD,
            (Some(LoadSetting::Fifty), None) => 2.0,
            _ => 1.0,
        }
    }

    /// Round a time to the timing resolution (nearest multiple, at least one step).
    pub fn round_time(&self, t: f64) -> f64 {
        match self.time_step {
            Some(step) if step > 0.0 => ((t / step).round().max(1.0)) * step,
            _ => t,
        }
    }

    /// Round a time to the resolution while staying within [lo, hi]: the nearest multiple,
    /// moved one step inwards when rounding crossed a limit.
    pub fn fit_time(&self, t: f64, lo: f64, hi: f64) -> f64 {
        let Some(step) = self.time_step.filter(|&s| s > 0.0) else {
            return t;
        };
        let mut r = self.round_time(t);
        if r < lo * (1.0 - 1e-12) {
            r = (lo / step - 1e-9).ceil() * step;
        }
        if r > hi * (1.0 + 1e-12) {
            r = ((hi / step + 1e-9).floor() * step).max(step);
        }
        r
    }
}

/// What the bench stage needs to know besides the pulse: the drive, the plan settings and the
/// bench sections.
#[derive(Debug, Clone, Copy)]
pub struct BenchInput<'a> {
    /// Voltage or current drive.
    pub drive: Signal,
    /// `[plan]`.
    pub plan: &'a PlanSettings,
    /// `[generator]`, `[capture]`, `[limits]`.
    pub bench: &'a Bench,
    /// Whether the residues (and so the size of h) are known.
    pub residues_known: bool,
}

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

/// The budget the bench works to: the user's, or the pulse's own error (at least 0.1 %).
fn working_budget(s: &PlanSettings, estimate: &ErrorEstimate) -> f64 {
    s.target_error
        .unwrap_or_else(|| estimate.metric(s.metric).max(1e-3))
}

/// Fit a planned pulse to the bench (`adapt`: timing and amplitude are changed to respect the
/// limits), or only check a given pulse against it (`adapt` false).
pub fn fit(inp: &BenchInput, prep: &Prepared, planned: &Trapezoid, adapt: bool) -> BenchPlan {
    let gen_ = inp.bench.generator.clone().unwrap_or_default();
    let s = inp.plan;
    let est = &prep.estimator;
    let mut warnings = Vec::new();
    let mut notes = Vec::new();
    let timed = if adapt {
        timing::fit(planned, &gen_)
    } else {
        timing::TimingFit {
            pulse: *planned,
            note: None,
        }
    };
    notes.extend(timed.note);
    let amp = amplitude::fit(inp, prep, &timed.pulse, planned.area(), adapt);
    warnings.extend(amp.warnings.iter().cloned());
    notes.extend(amp.notes.iter().cloned());
    let pulse = amp.pulse;
    let estimate = est.estimate(&pulse, prep.run);
    let timing_change = timing::change(est, s, planned, &pulse, &estimate, prep.run);
    if adapt {
        warnings.extend(timing::too_slow(s, timing_change));
    }
    let budget = working_budget(s, &estimate);
    let noise = noise::assess(inp, prep, &pulse, &estimate, budget);
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
    let cap = capture::plan_capture(
        &pulse,
        prep.tau_plan,
        prep.run,
        inp.bench.capture.as_ref(),
        noise.fit.averages.unwrap_or(1),
    );
    warnings.extend(capture::warnings(&cap, &pulse));
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

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn fifty_ohm_setting_doubles_into_high_impedance() {
        // Voltage divider: a 50 Ω source set for a 50 Ω load shows v_open/2, so an unloaded input
        // sees twice the display; a 600 Ω source shows v_open·50/650.
        let g = Generator {
            output_resistance: Some(50.0),
            load_setting: Some(LoadSetting::Fifty),
            ..Generator::default()
        };
        assert_eq!(g.open_over_display(), 2.0);
        let g = Generator {
            output_resistance: Some(600.0),
            ..g
        };
        assert!((g.open_over_display() - 13.0).abs() < 1e-15);
        let g = Generator {
            load_setting: Some(LoadSetting::HighZ),
            ..g
        };
        assert_eq!(g.open_over_display(), 1.0);
    }
}
