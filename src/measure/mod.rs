//! Recovering h(t) from a capture: read the record, condition it (time zero, baseline,
//! noise, clipping, the pulse actually applied), fit its modes (matrix pencil, then
//! variable projection), remove the pulse exactly (rₖ = cₖ/P(pₖ)), and compare the result
//! with the scenario's model, naming the parts that explain a difference.
//!
//! The entry point is [`recover`]; its result [`Recovery`] holds numbers only (SI units),
//! and its warnings are codes with numbers ([`Warning`]); wording lives in the renderers.
//! This module depends only on `units`, `pulse`, `network`, `netlist` and `response`.

pub mod capture;
pub mod compare;
pub mod condition;
pub mod curves;
pub mod deconvolve;
pub mod error;
pub mod fitting;
pub mod layout;
pub mod matching;
pub mod modes;
pub mod parts;
pub mod pencil;
pub mod readings;
mod run;
pub mod stats;
pub mod varpro;

pub use capture::{Capture, ChannelRef, ReadOptions, read};
pub use curves::{Curves, NoEstimate};
pub use error::{CaptureError, Problem, RecoverError};
pub use modes::Estimate;
pub use run::{recover, recover_with_progress};

use crate::netlist::NetlistSpec;
use crate::network::Network;
use crate::pulse::Trapezoid;
use serde::Serialize;

/// What the recovery needs besides the capture. The caller fills it from a scenario.
#[derive(Debug, Clone)]
pub struct RecoverSettings {
    /// The pulse applied as stated (the scenario's `[pulse]`) or planned; replaced by the
    /// measured one when the capture has a stimulus channel.
    pub pulse: Trapezoid,
    /// True when `pulse` is the scenario's own `[pulse]`, false when it was planned.
    pub pulse_given: bool,
    /// The scenario's model, for the comparison and as a starting point of the fit.
    pub model: Option<Network>,
    /// The circuit behind the model, for naming the parts that explain a difference.
    pub netlist: Option<NetlistSpec>,
    /// Planned pre-trigger (time from the first sample to the trigger), s.
    pub pre_trigger: Option<f64>,
    /// Delay from the trigger to the start of the pulse, s.
    pub trigger_delay: f64,
    /// Capture time at which the pulse starts (overrides all but a stimulus channel), s.
    pub t0: Option<f64>,
    /// Number of modes to fit (a conjugate pair counts as two), instead of choosing.
    pub order: Option<usize>,
    /// Planned record length after the pulse, s (a shorter record is warned about).
    pub run: Option<f64>,
    /// Fit a linear baseline drift: `None` decides from the pre-trigger.
    pub drift: Option<bool>,
}

impl RecoverSettings {
    /// Settings for a pulse with nothing else known.
    pub fn new(pulse: Trapezoid) -> RecoverSettings {
        RecoverSettings {
            pulse,
            pulse_given: true,
            model: None,
            netlist: None,
            pre_trigger: None,
            trigger_delay: 0.0,
            t0: None,
            order: None,
            run: None,
            drift: None,
        }
    }
}

/// A warning: a stable kebab-case code (the `code` field in JSON) and its numbers.
#[derive(Debug, Clone, PartialEq, Serialize)]
#[serde(tag = "code", rename_all = "kebab-case")]
pub enum Warning {
    /// Samples at the record's extreme codes were excluded.
    Clipped {
        /// Clipped samples.
        samples: usize,
        /// Runs of them.
        runs: usize,
    },
    /// The record after the pulse is shorter than the planned run.
    RecordShort {
        /// Record after the pulse, s.
        after_pulse_s: f64,
        /// Planned run, s.
        run_s: f64,
    },
    /// Too few samples before the pulse: noise σ taken from the fit's residual.
    NoPreTrigger {
        /// Pre-trigger samples found.
        samples: usize,
    },
    /// The pre-trigger noise is correlated (lag-1 autocorrelation beyond 3/√n).
    NoiseNotWhite {
        /// r₁.
        lag1: f64,
        /// 3/√n.
        limit: f64,
    },
    /// The fit's residual is not white (Ljung–Box).
    ResidualNotWhite {
        /// Q.
        q: f64,
        /// Lags.
        lags: usize,
        /// Tail probability.
        p_value: f64,
    },
    /// The fit's residual is larger than the pre-trigger noise; intervals were widened.
    ResidualExceedsNoise {
        /// χ²/dof.
        chi2_reduced: f64,
    },
    /// Another order fits almost as well (BIC within 2).
    OrderAmbiguous {
        /// Modes chosen.
        modes: usize,
        /// Modes of the close alternative.
        alternative: usize,
        /// BIC difference.
        delta_bic: f64,
    },
    /// A fitted pole is faster than the pulse: the tail barely shows it.
    PoleFasterThanPulse {
        /// Re p, rad/s.
        pole_re: f64,
        /// Im p, rad/s.
        pole_im: f64,
        /// 1/|p|, s.
        time_scale_s: f64,
        /// Pulse duration at 50 %, s.
        pulse_width_s: f64,
    },
    /// A significant model mode is not seen in the tail.
    ModelModeNotSeen {
        /// Re p, rad/s.
        pole_re: f64,
        /// Im p, rad/s.
        pole_im: f64,
        /// Whether the pulse is longer than the mode's time scale (else it is below noise).
        hidden_by_pulse: bool,
    },
    /// The pole refinement stopped at its iteration bound.
    FitNotConverged {
        /// Iterations used.
        iterations: usize,
    },
    /// Time zero was taken from the plan's pre-trigger.
    TimeZeroFromPlan {
        /// Capture time used, s.
        capture_time_s: f64,
    },
    /// Nothing located the pulse: time zero is the first sample.
    TimeZeroAssumed {
        /// Capture time used, s.
        capture_time_s: f64,
    },
    /// The measured pulse's area differs from the stated one by more than 2 %.
    PulseDiffers {
        /// (measured − stated)/stated area.
        area_relative: f64,
    },
    /// The samples during the pulse disagree with the fitted modes plus a direct term.
    PulseSamplesMisfit {
        /// χ²/dof of those samples.
        chi2_reduced: f64,
    },
    /// The capture is inconsistent with the model.
    ModelInconsistent {
        /// Largest |difference|/uncertainty.
        z: f64,
    },
}

impl Warning {
    /// The stable code.
    pub fn code(&self) -> &'static str {
        match self {
            Warning::Clipped { .. } => "clipped",
            Warning::RecordShort { .. } => "record-short",
            Warning::NoPreTrigger { .. } => "no-pre-trigger",
            Warning::NoiseNotWhite { .. } => "noise-not-white",
            Warning::ResidualNotWhite { .. } => "residual-not-white",
            Warning::ResidualExceedsNoise { .. } => "residual-exceeds-noise",
            Warning::OrderAmbiguous { .. } => "order-ambiguous",
            Warning::PoleFasterThanPulse { .. } => "pole-faster-than-pulse",
            Warning::ModelModeNotSeen { .. } => "model-mode-not-seen",
            Warning::FitNotConverged { .. } => "fit-not-converged",
            Warning::TimeZeroFromPlan { .. } => "time-zero-from-plan",
            Warning::TimeZeroAssumed { .. } => "time-zero-assumed",
            Warning::PulseDiffers { .. } => "pulse-differs",
            Warning::PulseSamplesMisfit { .. } => "pulse-samples-misfit",
            Warning::ModelInconsistent { .. } => "model-inconsistent",
        }
    }
}

/// What was read.
#[derive(Debug, Clone, PartialEq, Serialize)]
pub struct CaptureInfo {
    /// File.
    pub file: String,
    /// Samples.
    pub samples: usize,
    /// Output channel name and column.
    pub channel: (String, usize),
    /// Output channel unit as written.
    pub channel_unit: String,
    /// Stimulus channel name and column.
    pub stimulus: Option<(String, usize)>,
    /// Uniform step, s (None for non-uniform steps).
    pub uniform_step_s: Option<f64>,
    /// First and last sample time (capture's own time), s.
    pub span_s: (f64, f64),
    /// How time was obtained.
    pub axis: capture::TimeAxis,
    /// Recognised metadata.
    pub metadata: layout::Metadata,
    /// Field delimiter as a character.
    pub delimiter: char,
    /// Decimal comma.
    pub decimal_comma: bool,
}

/// Where σ came from.
#[derive(Debug, Clone, Copy, PartialEq, Eq, Serialize)]
#[serde(rename_all = "kebab-case")]
pub enum NoiseSource {
    /// The pre-trigger samples.
    PreTrigger,
    /// The fit's residual (no usable pre-trigger).
    FitResidual,
}

/// The noise used as the fit's weight.
#[derive(Debug, Clone, PartialEq, Serialize)]
pub struct NoiseInfo {
    /// σ of one sample (V or A).
    pub sigma: f64,
    /// Where it came from.
    pub source: NoiseSource,
    /// The pre-trigger estimate and its whiteness.
    pub pre_trigger: Option<condition::Noise>,
    /// σ sits at the numerical floor (a noiseless record): its residual is rounding, not
    /// noise, and is not tested for whiteness.
    pub at_floor: bool,
}

/// The pulse used to remove the pulse's effect.
#[derive(Debug, Clone, PartialEq, Serialize)]
pub struct PulseInfo {
    /// Stated/planned or measured.
    pub source: deconvolve::PulseSource,
    /// Whether the stated pulse is the scenario's own `[pulse]` (else planned).
    pub stated_is_given: bool,
    /// Area, V·s or A·s.
    pub area: f64,
    /// Centroid since time zero, s.
    pub centroid_s: f64,
    /// Variance of the shape, s².
    pub variance_s2: f64,
    /// End (last breakpoint) since time zero, s.
    pub end_s: f64,
    /// The stated pulse: amplitude, 50 % duration, 10–90 % rise and fall, area.
    pub stated: StatedPulse,
    /// The measured pulse, with a stimulus channel.
    pub measured: Option<condition::MeasuredPulse>,
    /// Relative differences measured vs stated (area, 50 % duration, rise, fall, amplitude).
    pub differences: Option<PulseDifferences>,
}

/// The stated pulse's figures.
#[derive(Debug, Clone, Copy, PartialEq, Serialize)]
pub struct StatedPulse {
    /// Amplitude.
    pub amplitude: f64,
    /// 50 % duration, s.
    pub duration_50_s: f64,
    /// 10–90 % rise, s.
    pub rise_10_90_s: f64,
    /// 90–10 % fall, s.
    pub fall_10_90_s: f64,
    /// Area.
    pub area: f64,
}

/// Measured vs stated, each (measured − stated)/stated.
#[derive(Debug, Clone, Copy, PartialEq, Serialize)]
pub struct PulseDifferences {
    /// Area.
    pub area: f64,
    /// Amplitude.
    pub amplitude: f64,
    /// 50 % duration.
    pub duration_50: f64,
    /// 10–90 % rise.
    pub rise_10_90: f64,
    /// 90–10 % fall.
    pub fall_10_90: f64,
}

/// The fit's figures of merit.
#[derive(Debug, Clone, PartialEq, Serialize)]
pub struct FitInfo {
    /// Rows fitted (samples or block means).
    pub rows: usize,
    /// Samples per block after the pulse (1: every sample is a row).
    pub block: usize,
    /// χ² at the optimum, weighted by σ.
    pub chi2: f64,
    /// Degrees of freedom.
    pub dof: usize,
    /// χ²/dof.
    pub chi2_reduced: f64,
    /// Factor applied to the covariance (1, or χ²/dof when the residual exceeds the noise).
    pub covariance_scale: f64,
    /// Iterations of the chosen refinement.
    pub iterations: usize,
    /// Whether it converged.
    pub converged: bool,
    /// Ljung–Box statistic of the residual after the pulse, its lags and tail probability.
    pub whiteness: (f64, usize, f64),
    /// The pencil: its order, the MDL order and the singular-value gap.
    pub pencil: Option<PencilInfo>,
    /// Every refined start.
    pub candidates: Vec<fitting::CandidateSummary>,
    /// Whether a drift was fitted.
    pub drift: bool,
}

/// What the matrix pencil said.
#[derive(Debug, Clone, PartialEq, Serialize)]
pub struct PencilInfo {
    /// Order by the singular values (or forced).
    pub order: usize,
    /// Order by MDL.
    pub order_mdl: usize,
    /// s_M/s_(M+1).
    pub gap: Option<f64>,
    /// Leading singular values (up to 16).
    pub singular: Vec<f64>,
}

/// One fitted mode (a conjugate pair is one mode with its upper pole).
#[derive(Debug, Clone, PartialEq, Serialize)]
pub struct FittedMode {
    /// Re p, rad/s.
    pub pole_re: Estimate,
    /// Im p, rad/s (0 for a real pole).
    pub pole_im: Estimate,
    /// 1/|Re p|, s.
    pub time_constant: Estimate,
    /// |p|, rad/s.
    pub natural_frequency: Estimate,
    /// −Re p/|p|.
    pub damping: Estimate,
    /// Re r (1/s).
    pub residue_re: Estimate,
    /// Im r.
    pub residue_im: Estimate,
    /// |r|.
    pub residue_magnitude: Estimate,
    /// The mode's amplitude at the pulse end (re, im): the tail is Re(c·e^(p(t−T))).
    pub amplitude_at_end: (f64, f64),
    /// A conjugate pair.
    pub pair: bool,
    /// 1/|p| shorter than the pulse's 50 % duration.
    pub faster_than_pulse: bool,
}

/// The direct term D (h holds D·δ(t)), from the samples during the pulse.
#[derive(Debug, Clone, PartialEq, Serialize)]
pub struct DirectTerm {
    /// D with its uncertainty, when computable.
    pub estimate: Option<Estimate>,
    /// Samples used.
    pub samples: usize,
    /// χ²/dof of those samples after the fit.
    pub chi2_reduced: Option<f64>,
    /// Why there is no estimate.
    pub reason: Option<NoEstimate>,
}

/// The recovery's result.
#[derive(Debug, Clone, Serialize)]
pub struct Recovery {
    /// What was read.
    pub capture: CaptureInfo,
    /// Time zero.
    pub time_zero: condition::TimeZero,
    /// Noise.
    pub noise: NoiseInfo,
    /// Baseline offset (V or A) and drift (per second), from the fit.
    pub baseline: (Estimate, Option<Estimate>),
    /// Clipped samples.
    pub clipping: condition::Clipping,
    /// The pulse used.
    pub pulse: PulseInfo,
    /// The fit.
    pub fit: FitInfo,
    /// The fitted modes.
    pub modes: Vec<FittedMode>,
    /// h(0⁺) from the fitted modes.
    pub h0: Estimate,
    /// The direct term.
    pub direct: DirectTerm,
    /// The three readings side by side.
    pub readings: readings::Readings,
    /// Measured vs the model.
    pub comparison: Option<compare::Comparison>,
    /// Warnings.
    pub warnings: Vec<Warning>,
    /// What renderers need to evaluate h(t) and the fitted capture.
    #[serde(skip)]
    pub curves: Curves,
}
