//! The capture plan: sample interval, record length with pre-trigger, memory, averaging.

use super::settings::Capture;
use crate::notice::{Note, Warning};
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
    /// Whether the two records together resolve every mode (true when one record fits).
    pub split_resolves: bool,
    /// Record memory worked to, points.
    pub memory: f64,
    /// True when `memory` is [`DEFAULT_MAX_POINTS`], assumed for want of `[capture] max_points`.
    pub memory_assumed: bool,
    /// Samples across the 50 % width actually obtained (below the aim when the rate is limited).
    pub samples_across_pulse: f64,
    /// What to trigger on.
    pub trigger: Trigger,
}

/// Record memory assumed when `[capture] max_points` is not given: 10 M points (a common
/// figure for bench oscilloscopes; common practice, no source).
pub const DEFAULT_MAX_POINTS: f64 = 1e7;

/// A mode the capture must resolve: its time scale 1/|p| and decay time 1/|Re p| (s).
#[derive(Debug, Clone, Copy, PartialEq)]
pub struct Dynamics {
    /// 1/|p|, s.
    pub scale: f64,
    /// 1/|Re p|, s (infinite for a mode that does not decay).
    pub decay: f64,
}

/// Plan the capture for a pulse, the significant modes' dynamics and the run. When one record
/// at the fine interval does not fit the memory (stated, or [`DEFAULT_MAX_POINTS`]), it is
/// split into a fine record over the start and a coarse one over the whole run.
pub fn plan_capture(
    pulse: &Trapezoid,
    dynamics: &[Dynamics],
    run: f64,
    capture: Option<&Capture>,
    averages: u64,
    min_pre_samples: f64,
) -> CapturePlan {
    let tau_fast = dynamics
        .iter()
        .map(|d| d.scale)
        .fold(f64::INFINITY, f64::min);
    let want = (pulse.width_50() / SAMPLES_PER_WIDTH).min(tau_fast / SAMPLES_PER_TIME_SCALE);
    let min_interval = capture
        .and_then(|c| c.max_sample_rate)
        .map_or(0.0, |r| 1.0 / r);
    let interval = want.max(min_interval);
    let share_pre = run / (1.0 - PRE_TRIGGER_SHARE) * PRE_TRIGGER_SHARE;
    let pre_trigger = share_pre.max(min_pre_samples * interval);
    let record_length = if pre_trigger > share_pre {
        run + pre_trigger
    } else {
        run / (1.0 - PRE_TRIGGER_SHARE)
    };
    // Counted in f64: a huge ratio must not wrap a cast.
    let count = (record_length / interval).ceil() + 1.0;
    let points = if count < u64::MAX as f64 {
        count as u64
    } else {
        u64::MAX
    };
    let stated = capture.and_then(|c| c.max_points);
    let max_points = stated.unwrap_or(DEFAULT_MAX_POINTS);
    let fits_memory = count <= max_points;
    let split = (!fits_memory).then(|| split_records(interval, record_length, max_points));
    let split_resolves = split.is_none_or(|(fine, coarse)| resolves(&fine, &coarse, dynamics));
    CapturePlan {
        sample_interval: interval,
        sample_rate: 1.0 / interval,
        pre_trigger,
        record_length,
        points,
        averages,
        fits_memory,
        split,
        split_resolves,
        memory: max_points,
        memory_assumed: stated.is_none(),
        samples_across_pulse: pulse.width_50() / interval,
        trigger: Trigger::GeneratorSync,
    }
}

/// A fine record at `interval` filling the memory, and a coarse one over the whole record.
fn split_records(interval: f64, record_length: f64, max_points: f64) -> (Record, Record) {
    let mp = max_points.floor().max(2.0);
    let fine = Record {
        interval,
        length: interval * (mp - 1.0),
        points: mp as u64,
    };
    let coarse = Record {
        interval: record_length / (mp - 1.0),
        length: record_length,
        points: mp as u64,
    };
    (fine, coarse)
}

/// Whether two records together resolve every mode: each mode is either sampled finely enough
/// by the coarse record, or has decayed to 0.1 % (ln 1000 decay times) within the fine record.
fn resolves(fine: &Record, coarse: &Record, dynamics: &[Dynamics]) -> bool {
    dynamics.iter().all(|d| {
        coarse.interval <= d.scale / SAMPLES_PER_TIME_SCALE || fine.length >= 1000f64.ln() * d.decay
    })
}

/// Warnings and notes about the capture: memory too small even for two records, too few
/// samples across the pulse, the memory assumed, the two records planned.
pub fn warnings(cap: &CapturePlan, pulse: &Trapezoid) -> (Vec<Warning>, Vec<Note>) {
    let mut out = Vec::new();
    let mut notes = Vec::new();
    if cap.memory_assumed && !cap.fits_memory {
        notes.push(Note::MemoryAssumed { points: cap.memory });
    }
    match (&cap.split, cap.split_resolves) {
        (Some((fine, coarse)), true) => notes.push(Note::TwoRecords {
            needed: cap.points,
            memory: cap.memory,
            fine_interval: fine.interval,
            fine_length: fine.length,
            coarse_interval: coarse.interval,
        }),
        (Some(_), false) => out.push(Warning::CaptureMemory {
            points: cap.points,
            interval: cap.sample_interval,
            record: cap.record_length,
            memory: cap.memory,
        }),
        (None, _) => {}
    }
    if cap.samples_across_pulse < SAMPLES_PER_WIDTH * (1.0 - 1e-9) {
        out.push(Warning::CaptureUndersampled {
            samples: cap.samples_across_pulse,
            width: pulse.width_50(),
        });
    }
    (out, notes)
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
        let dynamics = [Dynamics {
            scale: 1e-4,
            decay: 1e-4,
        }];
        let plan = plan_capture(&p, &dynamics, 1.0, Some(&c), 4, 0.0);
        assert!(plan.sample_rate <= 2.5e9 * (1.0 + 1e-12));
        assert!((plan.sample_interval - 1e-7).abs() < 1e-20);
        assert!(!plan.fits_memory);
        let (fine, coarse) = plan.split.unwrap();
        assert!(fine.points as f64 <= 1e6 && coarse.points as f64 <= 1e6);
        assert!(coarse.length >= 1.0);
        assert!((plan.record_length - plan.pre_trigger - 1.0).abs() < 1e-12);
    }
}
