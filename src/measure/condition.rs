//! Conditioning a capture: time zero, the noise σ and its whiteness from the pre-trigger,
//! clipped samples, and the pulse actually applied, measured on a stimulus channel with the
//! reference levels and durations of IEEE Std 181-2011 (state levels by the histogram mode
//! method; 10 %, 50 % and 90 % reference levels; pulse duration between the 50 % instants;
//! transition durations between the 10 % and 90 % instants).

use super::capture::{Capture, Channel, TimeAxis};
use super::deconvolve::{AppliedPulse, PulseSource};
use super::stats;
use serde::Serialize;

/// Most breakpoints kept from a measured stimulus (block means beyond that).
pub const MAX_STIMULUS_POINTS: usize = 20_000;
/// Histogram bins for the state levels (IEEE Std 181 leaves the count to the user; common
/// practice, no source).
const HISTOGRAM_BINS: usize = 1024;
/// A stimulus whose amplitude is below this many noise σ shows no pulse (common practice,
/// no source).
const MIN_STIMULUS_SNR: f64 = 10.0;

/// Where time zero (the start of the pulse) came from.
#[derive(Debug, Clone, Copy, PartialEq, Eq, Serialize)]
#[serde(rename_all = "kebab-case")]
pub enum TimeZeroSource {
    /// The stimulus channel's 50 % crossing, less half the measured full rise.
    Stimulus,
    /// `--t0` (or the caller's explicit value).
    Given,
    /// The capture's own time axis: the trigger at t = 0 (plus the stated delay).
    Trigger,
    /// An index column without a start: the planned pre-trigger.
    PlannedPreTrigger,
    /// Nothing said where the pulse starts: the first sample.
    FirstSample,
}

/// Time zero in the capture's time.
#[derive(Debug, Clone, Copy, PartialEq, Serialize)]
pub struct TimeZero {
    /// Capture time of the pulse's start, s.
    pub capture_time_s: f64,
    /// Where it came from.
    pub source: TimeZeroSource,
}

/// Decide time zero: stimulus, else `given`, else the time axis's trigger, else the planned
/// pre-trigger, else the first sample.
pub fn time_zero(
    cap: &Capture,
    measured: Option<&MeasuredPulse>,
    given: Option<f64>,
    pre_trigger: Option<f64>,
    trigger_delay: f64,
) -> TimeZero {
    let (capture_time_s, source) = if let Some(m) = measured {
        (m.time_zero_capture_s, TimeZeroSource::Stimulus)
    } else if let Some(t) = given {
        (t, TimeZeroSource::Given)
    } else {
        match (&cap.axis, pre_trigger) {
            (TimeAxis::Column { .. }, _)
            | (
                TimeAxis::Index {
                    start_stated: true, ..
                },
                _,
            ) => (trigger_delay, TimeZeroSource::Trigger),
            (TimeAxis::Index { start_s, .. }, Some(pre)) => {
                (start_s + pre, TimeZeroSource::PlannedPreTrigger)
            }
            (TimeAxis::Index { .. }, None) => (cap.time[0], TimeZeroSource::FirstSample),
        }
    };
    TimeZero {
        capture_time_s,
        source,
    }
}

/// The noise of one sample, from the pre-trigger.
#[derive(Debug, Clone, Copy, PartialEq, Serialize)]
pub struct Noise {
    /// σ of one sample (V or A).
    pub sigma: f64,
    /// Pre-trigger samples it came from.
    pub samples: usize,
    /// Lag-1 autocorrelation of the pre-trigger (after removing a straight line).
    pub lag1: f64,
    /// The limit |r₁| beyond which the noise is not white, 3/√n (Bartlett 1946: r₁ of
    /// white noise has standard error 1/√n).
    pub lag1_limit: f64,
    /// Smallest step between distinct sample values when the record is visibly quantised.
    pub lsb: Option<f64>,
}

/// Noise from pre-trigger values: the RMS about a fitted straight line (the efficient
/// estimate for white Gaussian noise), unless it exceeds the robust MAD-of-differences
/// estimate by more than a quarter (spikes or steps in the pre-trigger; common practice, no
/// source), and never below the LSB/√12 of uniform quantisation error (Widrow 1956) on a
/// visibly quantised record.
pub fn noise(pre: &[f64]) -> Noise {
    let n = pre.len();
    let lsb = quantum(pre);
    let detrended = detrend(pre);
    let rms = (detrended.iter().map(|v| v * v).sum::<f64>() / (n.max(3) - 2) as f64).sqrt();
    let robust = stats::noise_from_differences(pre);
    let mut sigma = if robust > 0.0 && rms > 1.25 * robust {
        robust
    } else {
        rms
    };
    if let Some(q) = lsb {
        sigma = sigma.max(q / 12f64.sqrt());
    }
    let lag1 = stats::autocorrelation(&detrended, 1)[0];
    Noise {
        sigma,
        samples: n,
        lag1,
        lag1_limit: 3.0 / (n.max(1) as f64).sqrt(),
        lsb,
    }
}

/// The smallest positive gap between distinct values, when there are few distinct values
/// (at most a quarter of the samples): the record is then quantised.
fn quantum(v: &[f64]) -> Option<f64> {
    if v.len() < 16 {
        return None;
    }
    let mut s = v.to_vec();
    s.sort_by(f64::total_cmp);
    s.dedup();
    if s.len() * 4 > v.len() || s.len() < 2 {
        return None;
    }
    s.windows(2)
        .map(|w| w[1] - w[0])
        .fold(None, |m: Option<f64>, d| Some(m.map_or(d, |m| m.min(d))))
}

fn detrend(v: &[f64]) -> Vec<f64> {
    let n = v.len() as f64;
    if v.len() < 3 {
        return v.to_vec();
    }
    let xm = (n - 1.0) / 2.0;
    let ym = v.iter().sum::<f64>() / n;
    let (mut sxy, mut sxx) = (0.0, 0.0);
    for (i, y) in v.iter().enumerate() {
        let dx = i as f64 - xm;
        sxy += dx * (y - ym);
        sxx += dx * dx;
    }
    let b = sxy / sxx;
    v.iter()
        .enumerate()
        .map(|(i, y)| y - ym - b * (i as f64 - xm))
        .collect()
}

/// Samples at the record's extreme codes.
#[derive(Debug, Clone, Default, PartialEq, Serialize)]
pub struct Clipping {
    /// Clipped samples.
    pub samples: usize,
    /// Runs of clipped samples.
    pub runs: usize,
    /// Upper code when clipped there.
    pub high: Option<f64>,
    /// Lower code when clipped there.
    pub low: Option<f64>,
    /// Per-sample flags (empty when nothing is clipped).
    #[serde(skip)]
    pub mask: Vec<bool>,
}

impl Clipping {
    /// Whether sample i is clipped.
    pub fn is_clipped(&self, i: usize) -> bool {
        self.mask.get(i).copied().unwrap_or(false)
    }
}

/// Find clipping: the extreme value of the record held for a run of ≥ 3 samples and more
/// often than the next value inward — a pile-up at the converter's limit, which a smooth
/// peak does not make (common practice, no source). A level equal to the `baseline` (the
/// pre-trigger's median: a noiseless record rests there) is not clipping.
pub fn clipping(y: &[f64], baseline: Option<f64>) -> Clipping {
    let mut out = Clipping::default();
    if y.len() < 8 {
        return out;
    }
    let (lo, hi) = y
        .iter()
        .fold((f64::INFINITY, f64::NEG_INFINITY), |(a, b), &v| {
            (a.min(v), b.max(v))
        });
    if lo >= hi {
        return out;
    }
    let rests = |level: f64| baseline.is_some_and(|b| (level - b).abs() <= 1e-9 * (hi - lo));
    for (level, upper) in [(hi, true), (lo, false)] {
        if !rests(level) && clipped_at(y, level, upper) {
            if out.mask.is_empty() {
                out.mask = vec![false; y.len()];
            }
            for (m, &v) in out.mask.iter_mut().zip(y) {
                *m |= v == level;
            }
            if upper {
                out.high = Some(level);
            } else {
                out.low = Some(level);
            }
        }
    }
    out.samples = out.mask.iter().filter(|&&m| m).count();
    out.runs = out.mask.windows(2).filter(|w| w[1] && !w[0]).count()
        + usize::from(out.mask.first() == Some(&true));
    out
}

fn clipped_at(y: &[f64], level: f64, upper: bool) -> bool {
    let mut count = 0usize;
    let mut run = 0usize;
    let mut longest = 0usize;
    let mut inner = if upper {
        f64::NEG_INFINITY
    } else {
        f64::INFINITY
    };
    for &v in y {
        if v == level {
            count += 1;
            run += 1;
            longest = longest.max(run);
        } else {
            run = 0;
            inner = if upper { inner.max(v) } else { inner.min(v) };
        }
    }
    let inner_count = y.iter().filter(|&&v| v == inner).count();
    longest >= 3 && count > inner_count
}

/// The pulse measured on a stimulus channel (IEEE Std 181-2011 terms).
#[derive(Debug, Clone, PartialEq, Serialize)]
pub struct MeasuredPulse {
    /// Base state level (V or A).
    pub base: f64,
    /// Top state level.
    pub top: f64,
    /// top − base.
    pub amplitude: f64,
    /// Noise σ of the stimulus channel.
    pub noise: f64,
    /// Noise σ of each breakpoint (σ/√k when k samples were averaged into one).
    pub breakpoint_noise: f64,
    /// Capture time of the leading edge's 50 % instant, s.
    pub rise_50_capture_s: f64,
    /// Pulse duration (between the 50 % instants), s.
    pub duration_50_s: f64,
    /// Leading-edge 10–90 % transition duration, s.
    pub rise_10_90_s: f64,
    /// Trailing-edge 90–10 % transition duration, s.
    pub fall_10_90_s: f64,
    /// Capture time taken as time zero: the 50 % instant less half the full rise
    /// (10–90 % / 0.8), which is where a linear ramp starts, s.
    pub time_zero_capture_s: f64,
    /// The waveform (base removed) as breakpoints in time since time zero.
    #[serde(skip)]
    pub pulse: AppliedPulse,
}

/// State levels by the histogram mode method (IEEE Std 181-2011, 5.2.1): the modes of the
/// lower and upper halves of the histogram, each refined as the mean of the samples within
/// 4 noise σ of it (iterated: a window centred on the estimate converges on the level's mean,
/// where a window fixed to the bin grid would be biased by up to half a bin).
fn state_levels(v: &[f64], noise: f64) -> Option<(f64, f64)> {
    let (lo, hi) = v
        .iter()
        .fold((f64::INFINITY, f64::NEG_INFINITY), |(a, b), &x| {
            (a.min(x), b.max(x))
        });
    if lo >= hi {
        return None;
    }
    let bins = HISTOGRAM_BINS;
    let width = (hi - lo) / bins as f64;
    let bin = |x: f64| (((x - lo) / width) as usize).min(bins - 1);
    let mut hist = vec![0usize; bins];
    v.iter().for_each(|&x| hist[bin(x)] += 1);
    let mode = |r: std::ops::Range<usize>| {
        r.max_by_key(|&k| (hist[k], std::cmp::Reverse(k)))
            .unwrap_or(0)
    };
    let half = (4.0 * noise).max(1.5 * width);
    let refine = |k: usize| {
        let mut m = lo + (k as f64 + 0.5) * width;
        for _ in 0..4 {
            let (s, n) = v
                .iter()
                .filter(|&&x| (x - m).abs() < half)
                .fold((0.0, 0usize), |(s, n), &x| (s + x, n + 1));
            if n == 0 {
                break;
            }
            m = s / n as f64;
        }
        m
    };
    Some((refine(mode(0..bins / 2)), refine(mode(bins / 2..bins))))
}

/// Interpolated instant where `v` crosses `level` between samples i−1 and i.
fn crossing(t: &[f64], v: &[f64], i: usize, level: f64) -> f64 {
    let (t0, t1, v0, v1) = (t[i - 1], t[i], v[i - 1], v[i]);
    if v1 == v0 {
        return t1;
    }
    t0 + (level - v0) / (v1 - v0) * (t1 - t0)
}

/// Measure the pulse on a stimulus channel; `None` when it shows no pulse (an error for the
/// caller, which names the channel).
pub fn measure_pulse(time: &[f64], ch: &Channel) -> Result<MeasuredPulse, (f64, f64)> {
    let v = &ch.values;
    let noise = stats::noise_from_differences(&v[..v.len().min(100_000)]);
    // The histogram of at most a million evenly spaced samples has the same modes.
    let stride = v.len().div_ceil(1_000_000).max(1);
    let sub: Vec<f64> = v.iter().step_by(stride).copied().collect();
    let (base, top) = state_levels(&sub, noise).ok_or((0.0, noise))?;
    let amplitude = top - base;
    if amplitude <= MIN_STIMULUS_SNR * noise {
        return Err((amplitude, noise));
    }
    let level = |f: f64| base + f * amplitude;
    let up = |from: usize, l: f64| (from.max(1)..v.len()).find(|&i| v[i - 1] < l && v[i] >= l);
    let down = |from: usize, l: f64| (from.max(1)..v.len()).find(|&i| v[i - 1] > l && v[i] <= l);
    let bad = (amplitude, noise);
    let i50 = up(1, level(0.5)).ok_or(bad)?;
    let i10 = (1..=i50)
        .rev()
        .find(|&i| v[i - 1] < level(0.1) && v[i] >= level(0.1))
        .ok_or(bad)?;
    let i90 = up(i50, level(0.9)).ok_or(bad)?;
    let f50 = down(i90, level(0.5)).ok_or(bad)?;
    let f90 = (i90 + 1..=f50)
        .rev()
        .find(|&i| v[i - 1] > level(0.9) && v[i] <= level(0.9))
        .ok_or(bad)?;
    let f10 = down(f50, level(0.1)).ok_or(bad)?;
    let t = time;
    let rise50 = crossing(t, v, i50, level(0.5));
    let rise = crossing(t, v, i90, level(0.9)) - crossing(t, v, i10, level(0.1));
    let fall = crossing(t, v, f10, level(0.1)) - crossing(t, v, f90, level(0.9));
    let zero = rise50 - 0.5 * rise / crate::pulse::TEN_NINETY;
    let (pulse, k) = stimulus_breakpoints(t, v, base, (i10, f10), (rise, fall), zero);
    Ok(MeasuredPulse {
        base,
        top,
        amplitude,
        noise,
        breakpoint_noise: noise / (k as f64).sqrt(),
        rise_50_capture_s: rise50,
        duration_50_s: crossing(t, v, f50, level(0.5)) - rise50,
        rise_10_90_s: rise,
        fall_10_90_s: fall,
        time_zero_capture_s: zero,
        pulse,
    })
}

/// The stimulus as breakpoints over its edges with a guard of one full edge (at least two
/// samples) on either side, base removed, ends forced to zero; block means when long.
fn stimulus_breakpoints(
    t: &[f64],
    v: &[f64],
    base: f64,
    (i10, f10): (usize, usize),
    (rise, fall): (f64, f64),
    zero: f64,
) -> (AppliedPulse, usize) {
    let guard_before = t[i10] - rise / crate::pulse::TEN_NINETY;
    let guard_after = t[f10] + fall / crate::pulse::TEN_NINETY;
    let a = t[..i10]
        .iter()
        .rposition(|&x| x < guard_before)
        .unwrap_or(0)
        .min(i10.saturating_sub(2));
    let b = (f10 + t[f10..].iter().position(|&x| x > guard_after).unwrap_or(0))
        .max(f10 + 1)
        .min(t.len() - 1);
    let n = b - a + 1;
    let k = n.div_ceil(MAX_STIMULUS_POINTS).max(1);
    let mut bp: Vec<(f64, f64)> = (a..=b)
        .step_by(k)
        .map(|i| {
            let j = (i + k).min(b + 1);
            let m = (j - i) as f64;
            let tm = t[i..j].iter().sum::<f64>() / m;
            let vm = v[i..j].iter().sum::<f64>() / m;
            (tm - zero, vm - base)
        })
        .collect();
    if let Some(f) = bp.first_mut() {
        f.1 = 0.0;
    }
    if let Some(l) = bp.last_mut() {
        l.1 = 0.0;
    }
    let pulse = AppliedPulse {
        breakpoints: bp,
        source: PulseSource::Measured,
    };
    (pulse, k)
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn clipping_needs_a_pile_up_at_the_extreme() {
        // A clipped half-sine: the top code repeats; an unclipped one holds no run.
        let s: Vec<f64> = (0..200).map(|i| (i as f64 * 0.05).sin()).collect();
        assert_eq!(clipping(&s, None).samples, 0);
        let c: Vec<f64> = s.iter().map(|v| v.min(0.8)).collect();
        let k = clipping(&c, None);
        // A record resting at its lowest value before the response is not clipped there.
        let rest: Vec<f64> = std::iter::repeat_n(0.0, 50)
            .chain(s.iter().map(|v| v.abs()))
            .collect();
        assert_eq!(clipping(&rest, Some(0.0)).samples, 0);
        assert!(
            k.samples > 10 && k.high == Some(0.8) && k.low.is_none(),
            "{k:?}"
        );
    }

    #[test]
    fn ieee_181_levels_and_durations_of_a_sampled_trapezoid() {
        // A linear trapezoid: 10–90 % = 0.8 × full ramp, duration at 50 % = flat + ramps/2
        // (IEEE Std 181-2011 definitions applied to a piecewise-linear pulse).
        let dt = 1e-9;
        let (start, ramp, flat) = (100e-9, 40e-9, 200e-9);
        let x = |t: f64| {
            let u = t - start;
            if u <= 0.0 || u >= 2.0 * ramp + flat {
                0.0
            } else if u < ramp {
                u / ramp
            } else if u <= ramp + flat {
                1.0
            } else {
                (2.0 * ramp + flat - u) / ramp
            }
        };
        let time: Vec<f64> = (0..600).map(|i| i as f64 * dt).collect();
        let ch = Channel {
            name: "stim".into(),
            unit: "V".into(),
            column: 3,
            scale: 1.0,
            values: time.iter().map(|&t| 0.2 + 2.0 * x(t)).collect(),
        };
        let m = measure_pulse(&time, &ch).unwrap();
        assert!((m.amplitude - 2.0).abs() < 1e-9 && (m.base - 0.2).abs() < 1e-9);
        assert!((m.rise_10_90_s - 0.8 * ramp).abs() < 1e-15);
        assert!((m.duration_50_s - (flat + ramp)).abs() < 1e-15);
        assert!((m.time_zero_capture_s - start).abs() < 1e-15);
        // Area of the measured waveform: amplitude × 50 % duration.
        assert!((m.pulse.area() - 2.0 * (flat + ramp)).abs() < 1e-15);
    }
}
