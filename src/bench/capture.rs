//! The capture plan: sample interval, record length with pre-trigger, memory, averaging.

use super::settings::Capture;
use crate::notice::Warning;
use crate::pulse::Trapezoid;
use serde::Serialize;

/// Samples across the 50 % width (common practice, no source).
pub const SAMPLES_PER_WIDTH: f64 = 10.0;
/// Samples per fastest significant time scale (common practice, no source).
pub const SAMPLES_PER_TIME_SCALE: f64 = 20.0;
/// Share of the record before the trigger, to show the baseline (common practice, no source).
pub const PRE_TRIGGER_SHARE: f64 = 0.1;

/// A second, coarser record for the tail when one record cannot hold both the fine sampling
/// and the whole run.
#[derive(Debug, Clone, Copy, PartialEq, Serialize)]
pub struct Record {
    /// Sample interval, s.
    pub interval: f64,
    /// Record length, s.
    pub length: f64,
    /// Points.
    pub points: u64,
}

/// What the capture triggers on.
#[derive(Debug, Clone, Copy, PartialEq, Eq, Serialize)]
pub enum Trigger {
    /// The generator's sync (trigger) output, rising edge.
    #[serde(rename = "generator sync output, rising edge")]
    GeneratorSync,
}

/// Capture settings.
#[derive(Debug, Clone, PartialEq, Serialize)]
pub struct CapturePlan {
    /// Sample interval of the main record, s.
    pub sample_interval: f64,
    /// Its sample rate, samples/s.
    pub sample_rate: f64,
    /// Time before the trigger, s.
    pub pre_trigger: f64,
    /// Whole record length (pre-trigger + run), s.
    pub record_length: f64,
    /// Points in the record.
    pub points: u64,
    /// Averages per reading.
    pub averages: u64,
    /// False when the memory cannot hold the record at this interval.
    pub fits_memory: bool,
    /// When it does not fit: a fine record over the start and a coarse one over the run.
    pub split: Option<(Record, Record)>,
    /// Samples across the 50 % width actually obtained (below the aim when the rate is limited).
    pub samples_across_pulse: f64,
    /// What to trigger on.
    pub trigger: Trigger,
}

/// Plan the capture for a pulse, the fastest significant time scale and the run.
pub fn plan_capture(
    pulse: &Trapezoid,
    tau_fast: f64,
    run: f64,
    capture: Option<&Capture>,
    averages: u64,
) -> CapturePlan {
    let want = (pulse.width_50() / SAMPLES_PER_WIDTH).min(tau_fast / SAMPLES_PER_TIME_SCALE);
    let min_interval = capture
        .and_then(|c| c.max_sample_rate)
        .map_or(0.0, |r| 1.0 / r);
    let interval = want.max(min_interval);
    let record_length = run / (1.0 - PRE_TRIGGER_SHARE);
    let pre_trigger = record_length * PRE_TRIGGER_SHARE;
    let points = (record_length / interval).ceil() as u64 + 1;
    let max_points = capture.and_then(|c| c.max_points).unwrap_or(f64::INFINITY);
    let fits_memory = (points as f64) <= max_points;
    let split = (!fits_memory).then(|| {
        let mp = max_points.floor().max(2.0) as u64;
        let fine = Record {
            interval,
            length: interval * (mp - 1) as f64,
            points: mp,
        };
        let coarse_interval = record_length / (mp - 1) as f64;
        let coarse = Record {
            interval: coarse_interval,
            length: record_length,
            points: mp,
        };
        (fine, coarse)
    });
    CapturePlan {
        sample_interval: interval,
        sample_rate: 1.0 / interval,
        pre_trigger,
        record_length,
        points,
        averages,
        fits_memory,
        split,
        samples_across_pulse: pulse.width_50() / interval,
        trigger: Trigger::GeneratorSync,
    }
}

/// Warnings about the capture: memory too small, too few samples across the pulse.
pub fn warnings(cap: &CapturePlan, pulse: &Trapezoid) -> Vec<Warning> {
    let mut out = Vec::new();
    if !cap.fits_memory {
        out.push(Warning::CaptureMemory {
            points: cap.points,
            interval: cap.sample_interval,
            record: cap.record_length,
        });
    }
    if cap.samples_across_pulse < SAMPLES_PER_WIDTH * (1.0 - 1e-9) {
        out.push(Warning::CaptureUndersampled {
            samples: cap.samples_across_pulse,
            width: pulse.width_50(),
        });
    }
    out
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn memory_and_rate_limits() {
        let p = Trapezoid::with_area(1e-6, 1e-6, 1e-8).unwrap();
        let c = Capture {
            max_sample_rate: Some(2.5e9),
            max_points: Some(1e6),
            ..Capture::default()
        };
        let plan = plan_capture(&p, 1e-4, 1.0, Some(&c), 4);
        assert!(plan.sample_rate <= 2.5e9 * (1.0 + 1e-12));
        assert!((plan.sample_interval - 1e-7).abs() < 1e-20);
        assert!(!plan.fits_memory);
        let (fine, coarse) = plan.split.unwrap();
        assert!(fine.points as f64 <= 1e6 && coarse.points as f64 <= 1e6);
        assert!(coarse.length >= 1.0);
        assert!((plan.record_length - plan.pre_trigger - 1.0).abs() < 1e-12);
    }
}
