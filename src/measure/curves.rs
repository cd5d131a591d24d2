//! The fitted curves a recovery hands its renderers, and why a figure may be absent.

use super::{deconvolve, modes, stats};
use serde::Serialize;

/// Why a figure is absent.
#[derive(Debug, Clone, Copy, PartialEq, Eq, Serialize)]
#[serde(rename_all = "kebab-case")]
pub enum NoEstimate {
    /// Fewer than 3 samples fall inside the pulse.
    TooFewSamplesInPulse,
    /// The model's residues are unknown.
    ModelResiduesUnknown,
    /// No model.
    NoModel,
    /// The pulse is too wide for the ½σ²h″ series to be a correction.
    SeriesNotConvergent,
}

/// The fitted curves, for renderers (CSV, figures).
#[derive(Debug, Clone)]
pub struct Curves {
    /// Modes with their joint covariance.
    pub modes: modes::Propagated,
    /// Capture time of time zero, s.
    pub zero: f64,
    /// Pulse end, s since time zero.
    pub end: f64,
    /// Drift column's time scale, s.
    pub drift_scale: f64,
    /// The applied pulse.
    pub pulse: deconvolve::AppliedPulse,
    /// D, for the output during the pulse.
    pub direct: f64,
}

impl Curves {
    /// h(t) with its 95 % half-width, t since time zero (t > 0).
    pub fn h_band(&self, t: f64) -> (f64, f64) {
        let (h, var) = self.modes.h_with_variance(t);
        (h, stats::z95() * var.sqrt())
    }

    /// The fitted baseline at t since time zero.
    pub fn baseline(&self, t: f64) -> f64 {
        let s = &self.modes.set;
        s.offset + s.drift * t / self.drift_scale
    }

    /// The fitted modes' output after the pulse at t since time zero (baseline excluded).
    pub fn tail(&self, t: f64) -> f64 {
        if t < self.end {
            return 0.0;
        }
        self.modes.set.tail(t - self.end, 0)
    }
}
