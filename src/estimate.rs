//! Error metrics between the finite-pulse response and the ideal impulse response.
//!
//! Definitions (shared across the project):
//! - raw error at t = 0⁺: reading y(end)/area minus h(0⁺);
//! - aligned error: y(end)/area minus h(end − centroid);
//! - window errors: y(t)/area − h(t − centroid) for end ≤ t ≤ run, max and RMS;
//! - relative figures divide by |h(0⁺)|, or by peak |h| when h(0⁺) = 0, and are signed.

use crate::network::{Mode, Network};
use crate::pulse::Trapezoid;
use crate::response::{FreeResponse, Modal};
use serde::Serialize;

/// Which error figure a budget applies to.
#[derive(Debug, Clone, Copy, PartialEq, Eq, Serialize)]
pub enum Metric {
    /// Raw reading at t = 0⁺: y(end)/area vs h(0⁺).
    #[serde(rename = "t0")]
    T0,
    /// Centroid-aligned reading: y(end)/area vs h(end − centroid).
    #[serde(rename = "t0-aligned")]
    T0Aligned,
    /// Largest error over the window after the pulse.
    #[serde(rename = "window")]
    Window,
}

impl Metric {
    /// Name as written in scenarios and reports.
    pub fn name(self) -> &'static str {
        match self {
            Metric::T0 => "t0",
            Metric::T0Aligned => "t0-aligned",
            Metric::Window => "window",
        }
    }
}

/// Fraction of the peak below which |h| counts as settled (0.1 %).
pub const SETTLE_FRACTION: f64 = 1e-3;

/// What the ideal impulse response looks like over time.
#[derive(Debug, Clone, PartialEq, Serialize)]
pub struct IdealShape {
    /// h(0⁺).
    #[serde(skip)]
    pub h0: f64,
    /// Peak |h(t)| for t > 0 over the examined span.
    pub peak: f64,
    /// Time of that peak.
    pub t_peak: f64,
    /// Time after which |h| stays below 0.1 % of its peak; `None` when h does not decay.
    #[serde(rename = "settle_time")]
    pub settle: Option<f64>,
}

/// Grid points per time scale 1/|p| of the fastest mode still alive (a quarter radian of
/// the fastest oscillation between samples, finer than 24 points a period).
const POINTS_PER_SCALE: f64 = 4.0;
/// Largest number of samples of h (the spacing widens beyond it).
pub const MAX_SHAPE_POINTS: usize = 1_000_000;
/// Modes whose envelope is below this fraction of the peak no longer set the grid spacing.
const ALIVE_FRACTION: f64 = 1e-12;

/// One sample of h and h′.
#[derive(Clone, Copy)]
struct Sample {
    t: f64,
    h: f64,
    dh: f64,
}

/// Sample times on [t0, t1]: each step is 1/(POINTS_PER_SCALE·ω(t)), ω(t) the largest |p| of
/// the modes whose envelope is still above the floor at t (their lifetimes from
/// [`FreeResponse::lifetimes`]). Fast modes die early, so the grid is fine only where
/// they matter: a few points per mode and per e-fold instead of a uniform scan.
fn adaptive_times(life: &[(f64, f64)], t0: f64, t1: f64) -> Vec<f64> {
    // Suffix maxima of |p| over the modes sorted by lifetime: ω(t) in one binary search.
    let mut by_life: Vec<(f64, f64)> = life.iter().map(|&(w, l)| (l, w)).collect();
    by_life.sort_by(|a, b| a.0.total_cmp(&b.0));
    let mut suffix = vec![0.0f64; by_life.len() + 1];
    for i in (0..by_life.len()).rev() {
        suffix[i] = suffix[i + 1].max(by_life[i].1);
    }
    let omega = |t: f64| suffix[by_life.partition_point(|x| x.0 <= t)];
    let floor_step = (t1 - t0) / MAX_SHAPE_POINTS as f64;
    let mut stretch = 1.0;
    for _ in 0..32 {
        let mut times = vec![t0];
        let mut t = t0;
        while t < t1 && times.len() <= MAX_SHAPE_POINTS {
            let w = omega(t);
            let step = if w > 0.0 {
                stretch / (POINTS_PER_SCALE * w)
            } else {
                t1 - t
            };
            t = (t + step.max(floor_step)).min(t1);
            times.push(t);
        }
        if times.len() <= MAX_SHAPE_POINTS + 1 {
            return times;
        }
        stretch *= 2.0;
    }
    vec![t0, t1]
}

/// A lower estimate of the peak of |h| (h at t = 0 and at 64 log-spaced times), only to set
/// the floor below which a mode no longer matters for the grid.
fn rough_peak(h: &FreeResponse, net: &Network, span: f64) -> f64 {
    let start = (net.tau_fast() * 0.1).min(span / 10.0);
    let ratio = (span / start).powf(1.0 / 63.0);
    (0..64)
        .map(|k| h.at(start * ratio.powi(k)).abs())
        .fold(h.at(0.0).abs(), f64::max)
}

/// Bisection on h′ in [a, b] (h′(a), h′(b) of opposite signs): the extremum of h inside.
/// Most sign changes of h′ refined by bisection in one scan (see [`bounded`]).
const MAX_EXTREMA: usize = 4096;

fn extremum(dh: &FreeResponse, h: &FreeResponse, a: Sample, b: Sample) -> Sample {
    let (mut lo, mut hi) = (a.t, b.t);
    let s_lo = a.dh.signum();
    for _ in 0..200 {
        let mid = 0.5 * (lo + hi);
        if mid <= lo || mid >= hi {
            break;
        }
        if dh.at(mid).signum() == s_lo {
            lo = mid;
        } else {
            hi = mid;
        }
    }
    let t = 0.5 * (lo + hi);
    Sample {
        t,
        h: h.at(t),
        dh: 0.0,
    }
}

/// Sample h and h′ on [t0, t1] and add each interior extremum of h that could matter (an
/// interval where h′ changes sign and |h| at either end is within a factor 2 of `level`).
fn scan(
    h: &FreeResponse,
    dh: &FreeResponse,
    life: &[(f64, f64)],
    t0: f64,
    t1: f64,
) -> (Vec<Sample>, Vec<Sample>) {
    let samples: Vec<Sample> = adaptive_times(life, t0, t1)
        .into_iter()
        .map(|t| Sample {
            t,
            h: h.at(t),
            dh: dh.at(t),
        })
        .collect();
    let level = samples.iter().map(|s| s.h.abs()).fold(0.0, f64::max) * SETTLE_FRACTION;
    let candidates: Vec<usize> = (0..samples.len().saturating_sub(1))
        .filter(|&i| {
            let (a, b) = (samples[i], samples[i + 1]);
            a.dh * b.dh < 0.0 && a.h.abs().max(b.h.abs()) >= 0.5 * level
        })
        .collect();
    let extrema = bounded(candidates, &samples)
        .into_iter()
        .map(|i| extremum(dh, h, samples[i], samples[i + 1]))
        .collect();
    (samples, extrema)
}

/// At most [`MAX_EXTREMA`] sign changes of h′ are refined: where there are more (an
/// oscillation the grid no longer resolves, a lightly damped mode over a very long span),
/// the half with the largest |h| at an end (for the peak) and the latest half (for the
/// settling time), in time order.
fn bounded(mut candidates: Vec<usize>, samples: &[Sample]) -> Vec<usize> {
    if candidates.len() <= MAX_EXTREMA {
        return candidates;
    }
    let size = |i: usize| samples[i].h.abs().max(samples[i + 1].h.abs());
    let latest = candidates.split_off(candidates.len() - MAX_EXTREMA / 2);
    candidates.sort_by(|&a, &b| size(b).total_cmp(&size(a)));
    candidates.truncate(MAX_EXTREMA / 2);
    candidates.extend(latest);
    candidates.sort_unstable();
    candidates
}

impl IdealShape {
    /// Examine h(t): peak and settling time, from the modes. h and h′ are sampled on a grid
    /// set by the modes still alive (see `adaptive_times`); extrema are the roots of h′ found
    /// by bisection where it changes sign; the span ends where the envelope bound
    /// Σ|r|·t^(k−1)·e^(Re p·t) is below 0.1 % of the peak (stable networks), or at 10 slowest
    /// time scales otherwise.
    pub fn of(net: &Network, h: &FreeResponse) -> IdealShape {
        let h0 = net.h0_plus();
        let base = net
            .tau_slow()
            .unwrap_or_else(|| 1.0 / min_nonzero_freq(net).max(f64::MIN_POSITIVE));
        let mut span = 10.0 * base;
        let dh = h.derivative(1);
        let floor = (ALIVE_FRACTION * rough_peak(h, net, span)).max(f64::MIN_POSITIVE);
        let life = h.lifetimes(floor);
        let (mut samples, mut extrema) = scan(h, &dh, &life, 0.0, span);
        let best = |s: &[Sample], e: &[Sample]| {
            s.iter()
                .chain(e)
                .map(|x| (x.h.abs(), x.t))
                .fold((0.0, 0.0), |b, c| if c.0 > b.0 { c } else { b })
        };
        let (mut peak, mut t_peak) = best(&samples, &extrema);
        if !net.stable() {
            return IdealShape {
                h0,
                peak,
                t_peak,
                settle: None,
            };
        }
        // Extend until the envelope bound is below the settling threshold.
        let first = span;
        let mut guard = 0;
        while h.envelope(span) > SETTLE_FRACTION * peak && guard < 40 {
            span *= 2.0;
            guard += 1;
        }
        if span > first {
            let (s2, e2) = scan(h, &dh, &life, first, span);
            samples.extend_from_slice(&s2[1..]);
            extrema.extend(e2);
            (peak, t_peak) = best(&samples, &extrema);
        }
        let settle = settle_time(h, &samples, &extrema, SETTLE_FRACTION * peak);
        IdealShape {
            h0,
            peak,
            t_peak,
            settle,
        }
    }
}

/// The last time |h| is at or above `thr`: the later of the last sample and the last
/// extremum above it, then the crossing to the next sample by bisection.
fn settle_time(h: &FreeResponse, samples: &[Sample], extrema: &[Sample], thr: f64) -> Option<f64> {
    let last_sample = samples.iter().rposition(|s| s.h.abs() >= thr);
    let last_extremum = extrema
        .iter()
        .filter(|e| e.h.abs() >= thr)
        .map(|e| e.t)
        .fold(None, |m: Option<f64>, t| Some(m.map_or(t, |m| m.max(t))));
    let from = match (last_sample.map(|i| samples[i].t), last_extremum) {
        (None, None) => return None,
        (a, b) => a.into_iter().chain(b).fold(f64::NEG_INFINITY, f64::max),
    };
    let next = samples.partition_point(|s| s.t <= from);
    if next >= samples.len() {
        return Some(from);
    }
    // Bisect the crossing between `from` (above) and the next sample (below).
    let (mut a, mut b) = (from, samples[next].t);
    for _ in 0..60 {
        let mid = (a + b) / 2.0;
        if h.at(mid).abs() >= thr {
            a = mid;
        } else {
            b = mid;
        }
    }
    Some(b)
}

/// Golden-section refinement of a maximum of f on [a, b].
fn refine_max(f: &dyn Fn(f64) -> f64, mut a: f64, mut b: f64) -> (f64, f64) {
    let g = (5f64.sqrt() - 1.0) / 2.0;
    let mut c = b - g * (b - a);
    let mut d = a + g * (b - a);
    let (mut fc, mut fd) = (f(c), f(d));
    for _ in 0..80 {
        if fc > fd {
            b = d;
            d = c;
            fd = fc;
            c = b - g * (b - a);
            fc = f(c);
        } else {
            a = c;
            c = d;
            fc = fd;
            d = a + g * (b - a);
            fd = f(d);
        }
        if (b - a) <= 1e-9 * b.abs() {
            break;
        }
    }
    let t = (a + b) / 2.0;
    (t, f(t))
}

fn min_nonzero_freq(net: &Network) -> f64 {
    net.modes
        .iter()
        .map(Mode::natural_frequency)
        .filter(|&w| w > 0.0)
        .fold(f64::INFINITY, f64::min)
}

/// What the relative figures are divided by.
#[derive(Debug, Clone, Copy, PartialEq, Eq, Serialize)]
pub enum NormalisedBy {
    /// |h(0⁺)|.
    #[serde(rename = "h0_plus")]
    H0Plus,
    /// Peak |h| (used when h(0⁺) = 0).
    #[serde(rename = "peak")]
    Peak,
    /// Networks with unknown residues: each mode against its own h(0⁺).
    #[serde(rename = "each mode's own h(0+)")]
    EachMode,
}

impl NormalisedBy {
    /// Name used in reports and JSON.
    pub fn name(self) -> &'static str {
        match self {
            NormalisedBy::H0Plus => "h0_plus",
            NormalisedBy::Peak => "peak",
            NormalisedBy::EachMode => "each mode's own h(0+)",
        }
    }
}

/// One reading against its ideal value.
#[derive(Debug, Clone, Copy, PartialEq, Serialize)]
pub struct Reading {
    /// y(end)/area.
    pub reading: f64,
    /// The ideal value it stands for.
    pub ideal: f64,
    /// reading − ideal.
    pub abs: f64,
    /// (reading − ideal)/normaliser.
    pub rel: f64,
}

/// Errors over the window after the pulse.
#[derive(Debug, Clone, Copy, PartialEq, Serialize)]
pub struct WindowError {
    /// max |y/area − h(t − c)| / normaliser.
    pub max_rel: f64,
    /// Time of that maximum.
    pub t_max: f64,
    /// RMS of the same over [end, run] / normaliser.
    pub rms_rel: f64,
}

/// First-order analytic estimate: for a unit-area pulse y ≈ h(t − c) + ½σ²h″(t − c).
///
/// It is printed only inside its validity: when the terms it leaves out, bounded mode by mode
/// (|rₖ|·|remainder of the moment expansion at pₖ|, see
/// [`Trapezoid::expansion_remainders`]), stay below [`FIRST_ORDER_VALIDITY`] of it — that is,
/// when the pulse is short against the local time scale of h.
#[derive(Debug, Clone, Copy, PartialEq, Serialize)]
pub struct FirstOrder {
    /// Raw error at 0⁺ ≈ h′(0⁺)δ + ½(σ² + δ²)h″(0⁺), δ = end − c (the reading at the pulse's
    /// end to second order in the pulse's extent), relative (None outside its validity).
    pub t0_rel: Option<f64>,
    /// Aligned error ≈ ½σ²h″(end − c), relative (None outside its validity).
    pub t0_aligned_rel: Option<f64>,
    /// The pulse's standard deviation σ about its centroid, s.
    pub sigma: f64,
    /// Bound on the left-out terms of the raw estimate, relative (None: not finite).
    pub t0_remainder: Option<f64>,
    /// Bound on the left-out terms of the aligned estimate, relative.
    pub t0_aligned_remainder: Option<f64>,
    /// Rounding level of `t0_rel` (derivatives of the modal sum amplify rounding by |p|).
    pub t0_floor: f64,
    /// Rounding level of `t0_aligned_rel`.
    pub t0_aligned_floor: f64,
}

/// The first-order estimate is shown when the terms it leaves out are below this share of it
/// (our choice).
pub const FIRST_ORDER_VALIDITY: f64 = 0.1;

/// The full error estimate for one pulse.
#[derive(Debug, Clone, PartialEq, Serialize)]
pub struct ErrorEstimate {
    /// Raw error at t = 0⁺.
    pub t0: Reading,
    /// Centroid-aligned error.
    pub t0_aligned: Reading,
    /// Window errors.
    pub window: WindowError,
    /// Which normaliser.
    pub normalised_by: NormalisedBy,
    /// Its value.
    pub normaliser: f64,
    /// Analytic estimate beside the exact figures.
    pub first_order: FirstOrder,
    /// For time-constant-only networks: the estimate per mode (each e^(−t/τ)).
    #[serde(skip_serializing_if = "Vec::is_empty")]
    pub per_mode: Vec<ModeError>,
    /// Relative rounding level of these figures (from the size of the modal sum).
    #[serde(rename = "rounding_floor")]
    pub floor: f64,
}

/// One mode's errors, for networks whose residues are unknown (each mode e^(−t/τ) alone).
#[derive(Debug, Clone, PartialEq, Serialize)]
pub struct ModeError {
    /// The mode's time constant, s.
    pub time_constant: f64,
    /// Raw error at 0⁺, relative to the mode's own h(0⁺).
    pub t0_rel: f64,
    /// Aligned error, relative.
    pub t0_aligned_rel: f64,
    /// Window maximum, relative.
    pub window_max_rel: f64,
    /// Window RMS, relative.
    pub window_rms_rel: f64,
    /// The mode's full estimate.
    #[serde(skip)]
    pub estimate: ErrorEstimate,
}

impl ModeError {
    fn new(time_constant: f64, e: ErrorEstimate) -> ModeError {
        ModeError {
            time_constant,
            t0_rel: e.t0.rel,
            t0_aligned_rel: e.t0_aligned.rel,
            window_max_rel: e.window.max_rel,
            window_rms_rel: e.window.rms_rel,
            estimate: e,
        }
    }
}

impl ErrorEstimate {
    /// The value of a metric (magnitude).
    pub fn metric(&self, m: Metric) -> f64 {
        match m {
            Metric::T0 => self.t0.rel.abs(),
            Metric::T0Aligned => self.t0_aligned.rel.abs(),
            Metric::Window => self.window.max_rel,
        }
    }
}

/// One cursor reading: the ideal and predicted values at a chosen instant.
#[derive(Debug, Clone, Copy, PartialEq, Serialize)]
pub struct Cursor {
    /// Time, s.
    pub t: f64,
    /// Ideal h(t).
    pub ideal: f64,
    /// h(t − centroid), the ideal the reading stands for once the pulse delay is allowed for.
    pub ideal_aligned: f64,
    /// Predicted y(t)/area.
    pub predicted: f64,
    /// predicted − ideal.
    pub difference: f64,
    /// predicted − ideal_aligned.
    pub difference_aligned: f64,
}

/// Cursor readings for a network without an estimator (the response table).
pub fn cursors(net: &Network, pulse: &Trapezoid, times: &[f64]) -> Vec<Cursor> {
    let modal = Modal::new(net);
    let h = modal.impulse();
    read_cursors(&modal, &h, pulse, times)
}

fn read_cursors(modal: &Modal, h: &FreeResponse, pulse: &Trapezoid, times: &[f64]) -> Vec<Cursor> {
    let driven = modal.drive(&pulse.breakpoints());
    let c = pulse.centroid();
    let area = pulse.area();
    times
        .iter()
        .map(|&t| {
            // h at t = 0 is h(0⁺) (the impulse's own δ term is not a value).
            let ideal = if t >= 0.0 { h.at(t) } else { 0.0 };
            let ideal_aligned = if t >= c { h.at(t - c) } else { 0.0 };
            let predicted = driven.at(t) / area;
            Cursor {
                t,
                ideal,
                ideal_aligned,
                predicted,
                difference: predicted - ideal,
                difference_aligned: predicted - ideal_aligned,
            }
        })
        .collect()
}

/// The network's exact machinery, prepared once and reused for many pulses.
#[derive(Debug, Clone)]
pub struct Estimator {
    modes: Vec<Mode>,
    modal: Modal,
    h: FreeResponse,
    h0: f64,
    normalised_by: NormalisedBy,
    normaliser: f64,
    /// For networks with unknown residues: one estimator per mode.
    per_mode: Vec<(f64, Estimator)>,
    /// ε·Σ|r|/normaliser: relative rounding level of figures from the modal sum.
    floor: f64,
}

impl Estimator {
    /// Prepare for a network whose ideal shape is already known.
    pub fn new(net: &Network, shape: &IdealShape) -> Estimator {
        let modal = Modal::new(net);
        let h = modal.impulse();
        let per_mode = if net.residues_known {
            Vec::new()
        } else {
            net.modes
                .iter()
                .map(|m| {
                    let single = Network {
                        modes: vec![m.clone()],
                        residues_known: true,
                        ..net.clone()
                    };
                    let h1 = Modal::new(&single).impulse();
                    let shape1 = IdealShape::of(&single, &h1);
                    (m.time_constant(), Estimator::new(&single, &shape1))
                })
                .collect()
        };
        let h0 = shape.h0;
        let (normalised_by, normaliser) = if !net.h0_negligible() && h0.abs() > 1e-9 * shape.peak {
            (NormalisedBy::H0Plus, h0.abs())
        } else {
            (NormalisedBy::Peak, shape.peak)
        };
        // Size of the modal sum (Laurent coefficients scaled to the slowest time scale).
        let scale_t = net.tau_slow().unwrap_or_else(|| net.tau_fast());
        let modal_size: f64 = net
            .modes
            .iter()
            .map(|m| {
                m.residues
                    .iter()
                    .enumerate()
                    .map(|(k, r)| r.norm() * scale_t.powi(k as i32))
                    .fold(0.0, f64::max)
            })
            .sum();
        let floor = f64::EPSILON * modal_size / normaliser;
        Estimator {
            modes: net.modes.clone(),
            modal,
            h,
            h0,
            normalised_by,
            normaliser,
            per_mode,
            floor,
        }
    }

    /// Relative rounding level of figures computed from the modal sum (ε·Σ|r|/normaliser).
    pub fn rounding_floor(&self) -> f64 {
        self.floor
    }

    /// The ideal impulse response.
    pub fn ideal(&self) -> &FreeResponse {
        &self.h
    }

    /// The modal realization.
    pub fn modal(&self) -> &Modal {
        &self.modal
    }

    /// Which normaliser relative figures use.
    pub fn normalised_by(&self) -> NormalisedBy {
        self.normalised_by
    }

    /// Its value.
    pub fn normaliser(&self) -> f64 {
        self.normaliser
    }

    /// Just the t = 0⁺ readings (cheap: used inside width searches).
    pub fn readings(&self, pulse: &Trapezoid) -> (Reading, Reading) {
        let end = pulse.end();
        let reading = self.modal.drive(&pulse.breakpoints()).at(end) / pulse.area();
        let raw_ideal = self.h0;
        let aligned_ideal = self.h.at(end - pulse.centroid());
        let mk = |ideal: f64| Reading {
            reading,
            ideal,
            abs: reading - ideal,
            rel: (reading - ideal) / self.normaliser,
        };
        (mk(raw_ideal), mk(aligned_ideal))
    }

    /// One metric's magnitude for a pulse (worst mode for networks with unknown residues).
    pub fn metric(&self, pulse: &Trapezoid, metric: Metric, run: f64) -> f64 {
        if !self.per_mode.is_empty() {
            return self
                .per_mode
                .iter()
                .map(|(_, e)| e.metric(pulse, metric, run))
                .fold(0.0, f64::max);
        }
        match metric {
            Metric::T0 => self.readings(pulse).0.rel.abs(),
            Metric::T0Aligned => self.readings(pulse).1.rel.abs(),
            Metric::Window => self.window_with(pulse, run, false).max_rel,
        }
    }

    /// Cursor readings of the ideal and predicted responses at the given instants.
    pub fn cursors(&self, pulse: &Trapezoid, times: &[f64]) -> Vec<Cursor> {
        read_cursors(&self.modal, &self.h, pulse, times)
    }

    /// Window errors over [end, run].
    pub fn window(&self, pulse: &Trapezoid, run: f64) -> WindowError {
        self.window_with(pulse, run, true)
    }

    /// Window errors; the RMS (an exact Gram sum over pairs of modes) only when asked for.
    fn window_with(&self, pulse: &Trapezoid, run: f64, with_rms: bool) -> WindowError {
        let end = pulse.end();
        if run <= end {
            return WindowError {
                max_rel: 0.0,
                t_max: end,
                rms_rel: 0.0,
            };
        }
        let c = pulse.centroid();
        let area = pulse.area();
        let y = self.modal.drive(&pulse.breakpoints()).after_end();
        // e(t) = y(t)/area − h(t − c), merged mode by mode about the pulse end.
        let shifted = self.h.delayed(c).reanchored(end);
        let e = y.combine(
            1.0 / (area * self.normaliser),
            &shifted,
            -1.0 / self.normaliser,
        );
        let err = |t: f64| e.at(t);
        let span = run - end;
        let rms_rel = if with_rms {
            (e.integral_square(span) / span).sqrt()
        } else {
            0.0
        };
        // Geometric points near the end (where the fast modes move), then a uniform scan in
        // segments whose step follows the modes still alive.
        let fast = 1.0 / self.modal_fastest();
        let start = (fast * 1e-4).min(span / 10.0);
        let ratio = (span / start).powf(1.0 / 120.0);
        let mut best = (err(end).abs(), end);
        for k in 0..=120 {
            let t = end + start * ratio.powi(k);
            let e = err(t).abs();
            if e > best.0 {
                best = (e, t);
            }
        }
        let (scanned, dt) = scan_max(&e, end, span, WINDOW_ALIVE * best.0);
        if scanned.0 > best.0 {
            best = scanned;
        }
        // Refine around the best sample.
        let half = (best.1 - end).max(dt) * 0.05 + dt;
        let a = (best.1 - half).max(end);
        let b = (best.1 + half).min(run);
        let (t_ref, v_ref) = refine_max(&|t| err(t).abs(), a, b);
        if v_ref > best.0 {
            best = (v_ref, t_ref);
        }
        WindowError {
            max_rel: best.0,
            t_max: best.1,
            rms_rel,
        }
    }

    fn modal_fastest(&self) -> f64 {
        self.h
            .frequencies()
            .fold(0.0, f64::max)
            .max(f64::MIN_POSITIVE)
    }

    /// The full estimate for a pulse, over a run.
    pub fn estimate(&self, pulse: &Trapezoid, run: f64) -> ErrorEstimate {
        if !self.per_mode.is_empty() {
            let per: Vec<ModeError> = self
                .per_mode
                .iter()
                .map(|(tau, e)| ModeError::new(*tau, e.estimate(pulse, run)))
                .collect();
            return worst_of(per);
        }
        let (t0, t0_aligned) = self.readings(pulse);
        let window = self.window(pulse, run);
        let first_order = self.first_order(pulse);
        ErrorEstimate {
            t0,
            t0_aligned,
            window,
            normalised_by: self.normalised_by,
            normaliser: self.normaliser,
            first_order,
            per_mode: Vec::new(),
            floor: self.floor,
        }
    }
}

impl Estimator {
    /// The first-order estimates with their validity (see [`FirstOrder`]).
    pub fn first_order(&self, pulse: &Trapezoid) -> FirstOrder {
        let c = pulse.centroid();
        let delta = pulse.end() - c;
        let var = pulse.variance();
        let d1 = self.h.derivative(1);
        let d2 = self.h.derivative(2);
        // Rounding of the derivative sums Σ|pⁿ r| sets how small these can be resolved.
        let size = |n: i32| -> f64 {
            self.h
                .frequencies()
                .zip(self.h.magnitudes())
                .map(|(w, q)| w.powi(n) * q)
                .sum::<f64>()
                * f64::EPSILON
                / self.normaliser
        };
        let t0_rel =
            (d1.at(0.0) * delta + 0.5 * (var + delta * delta) * d2.at(0.0)) / self.normaliser;
        let aligned_rel = 0.5 * var * d2.at(delta) / self.normaliser;
        let t0_floor = size(1) * delta + size(2) * 0.5 * (var + delta * delta);
        let aligned_floor = size(2) * 0.5 * var;
        let (rem_aligned, rem_raw) = self.remainders(pulse, delta);
        let within = |v: f64, rem: Option<f64>, floor: f64| {
            rem.is_some_and(|r| {
                r <= FIRST_ORDER_VALIDITY * v.abs() || r.max(v.abs()) <= 10.0 * floor
            })
        };
        FirstOrder {
            t0_rel: within(t0_rel, rem_raw, t0_floor).then_some(t0_rel),
            t0_aligned_rel: within(aligned_rel, rem_aligned, aligned_floor).then_some(aligned_rel),
            sigma: var.sqrt(),
            t0_remainder: rem_raw,
            t0_aligned_remainder: rem_aligned,
            t0_floor,
            t0_aligned_floor: aligned_floor,
        }
    }

    /// Bounds on the terms the aligned and raw first-order estimates leave out, relative:
    /// Σₖ |rₖ|·|e^(pₖ(end−c))|·|aligned remainder at pₖ| and Σₖ |rₖ|·|raw remainder at pₖ|, a
    /// repeated mode counted with its size Σⱼ|rⱼ|/|p|^(j−1). `None` when a mode is too fast for
    /// the expansion to mean anything.
    fn remainders(&self, pulse: &Trapezoid, delta: f64) -> (Option<f64>, Option<f64>) {
        let mut aligned = 0.0;
        let mut raw = 0.0;
        for m in &self.modes {
            let weight = m.size();
            if weight == 0.0 {
                continue;
            }
            let Some((ra, rr)) = pulse.expansion_remainders(m.pole) else {
                return (None, None);
            };
            aligned += weight * (m.pole * delta).exp().norm() * ra.norm();
            raw += weight * rr.norm();
        }
        let finite = |v: f64| (v.is_finite()).then_some(v / self.normaliser);
        (finite(aligned), finite(raw))
    }
}

/// Number of uniform window samples: enough for the oscillations and the fastest decay.
fn window_points(fastest: f64, span: f64) -> usize {
    let per_scale = 8.0;
    let want = span * fastest * per_scale;
    (want.ceil() as usize).clamp(2000, 200_000)
}

/// Modes whose envelope is below this share of the largest error seen so far are left out of
/// the window scan (they cannot move its maximum by more than that).
const WINDOW_ALIVE: f64 = 1e-9;

/// The largest |e| on a uniform scan of [end, end + span], in segments between the modes'
/// lifetimes: each segment sums only the modes still above `floor` and steps by 1/8 of their
/// fastest time scale (at least 2000 points over the span, at most 200 000 per segment).
/// Returns (|e|, t) at the maximum and the step there.
fn scan_max(e: &FreeResponse, end: f64, span: f64, floor: f64) -> ((f64, f64), f64) {
    let life = e.lifetimes(floor.max(f64::MIN_POSITIVE));
    // Segment edges where the fastest mode still alive slows by at least half: fewer segments,
    // each still stepping by the fastest of its modes.
    let mut by_life: Vec<(f64, f64)> = life.iter().map(|&(w, l)| (l, w)).collect();
    by_life.sort_by(|a, b| a.0.total_cmp(&b.0));
    let mut edges = vec![0.0];
    let mut omega_here = by_life.iter().map(|x| x.1).fold(0.0, f64::max);
    for (i, &(l, _)) in by_life.iter().enumerate() {
        let after = by_life[i + 1..].iter().map(|x| x.1).fold(0.0, f64::max);
        if l > 0.0 && l < span && after < 0.5 * omega_here {
            edges.push(l);
            omega_here = after;
        }
    }
    edges.push(span);
    let mut best = ((0.0, end), span / 1999.0);
    for w in edges.windows(2) {
        let (a, b) = (w[0], w[1]);
        let keep: Vec<bool> = life.iter().map(|l| l.1 > a).collect();
        let omega = life
            .iter()
            .zip(&keep)
            .filter(|(_, k)| **k)
            .map(|(l, _)| l.0)
            .fold(0.0, f64::max);
        // Counted in f64 and bounded before the cast: a huge span × ω must not wrap.
        let by_omega = ((b - a) * omega * 8.0).ceil().min(1e9) as usize + 2;
        let by_share = ((b - a) / span * 2000.0).ceil().min(1e9) as usize + 2;
        let n = window_points(omega.max(f64::MIN_POSITIVE), span)
            .min(by_omega)
            .max(by_share)
            .min(200_000);
        let dt = (b - a) / (n - 1) as f64;
        let part = e.with_terms(&keep);
        for (k, v) in part.uniform(end + a, dt, n).iter().enumerate() {
            if v.abs() > best.0.0 {
                best = ((v.abs(), end + a + k as f64 * dt), dt);
            }
        }
    }
    best
}

/// For networks with unknown residues: report the worst mode per metric.
fn worst_of(per: Vec<ModeError>) -> ErrorEstimate {
    let pick = |key: &dyn Fn(&ErrorEstimate) -> f64| {
        per.iter()
            .max_by(|a, b| key(&a.estimate).total_cmp(&key(&b.estimate)))
            .map(|p| p.estimate.clone())
            .expect("a network has at least one mode")
    };
    let t0 = pick(&|e| e.t0.rel.abs());
    let al = pick(&|e| e.t0_aligned.rel.abs());
    let win = pick(&|e| e.window.max_rel);
    let rms = pick(&|e| e.window.rms_rel);
    ErrorEstimate {
        t0: t0.t0,
        t0_aligned: al.t0_aligned,
        window: WindowError {
            rms_rel: rms.window.rms_rel,
            ..win.window
        },
        normalised_by: NormalisedBy::EachMode,
        normaliser: 1.0,
        first_order: FirstOrder {
            t0_rel: t0.first_order.t0_rel,
            t0_aligned_rel: al.first_order.t0_aligned_rel,
            sigma: t0.first_order.sigma,
            t0_remainder: t0.first_order.t0_remainder,
            t0_aligned_remainder: al.first_order.t0_aligned_remainder,
            t0_floor: t0.first_order.t0_floor,
            t0_aligned_floor: al.first_order.t0_aligned_floor,
        },
        floor: per.iter().map(|p| p.estimate.floor).fold(0.0, f64::max),
        per_mode: per,
    }
}

#[cfg(test)]
mod tests {
    use super::*;
    use crate::network::NetworkSpec;

    fn est(spec: NetworkSpec) -> (Network, Estimator, IdealShape) {
        let net = Network::from_spec(&spec).unwrap();
        let h = Modal::new(&net).impulse();
        let shape = IdealShape::of(&net, &h);
        let e = Estimator::new(&net, &shape);
        (net, e, shape)
    }

    #[test]
    fn peak_and_settling_of_an_underdamped_pair() {
        // ω0²/(s² + 2αs + ω0²): h = (ω0²/ωd)·e^(−αt)·sin(ωd·t), whose first maximum is where
        // tan(ωd·t) = ωd/α (closed form). Every later maximum is smaller, so that is the peak.
        let (w0, alpha) = (2e4f64, 3e3f64);
        let wd = (w0 * w0 - alpha * alpha).sqrt();
        let (_, _, shape) = est(NetworkSpec::Polynomial {
            numerator: vec![w0 * w0],
            denominator: vec![1.0, 2.0 * alpha, w0 * w0],
        });
        let t_peak = (wd / alpha).atan() / wd;
        let peak = w0 * w0 / wd * (-alpha * t_peak).exp() * (wd * t_peak).sin();
        assert!(
            (shape.t_peak - t_peak).abs() <= 1e-14 * t_peak,
            "{}",
            shape.t_peak
        );
        assert!((shape.peak - peak).abs() <= 1e-14 * peak);
        // Settled once the last extremum above 0.1 % of the peak has passed: |h| at the
        // settling time is the threshold itself (the crossing), and no later maximum of
        // |h| (at ωd·t = atan(ωd/α) + kπ) reaches it.
        let settle = shape.settle.unwrap();
        let h = |t: f64| w0 * w0 / wd * (-alpha * t).exp() * (wd * t).sin();
        assert!((h(settle).abs() - 1e-3 * peak).abs() <= 1e-9 * peak);
        let k_next = ((wd * settle - (wd / alpha).atan()) / std::f64::consts::PI).ceil();
        let t_next = ((wd / alpha).atan() + k_next * std::f64::consts::PI) / wd;
        assert!(h(t_next).abs() < 1e-3 * peak);
    }

    #[test]
    fn single_pole_reading_and_first_order() {
        // Rectangle into a/(s+a): reading/ideal = (1 − e^(−x))/x (handbook closed form), whose
        // Taylor series −x/2 + x²/6 − x³/24 … the estimate h′(0⁺)δ + ½(σ² + δ²)h″(0⁺) matches to
        // second order (δ = w/2, σ² = w²/12).
        let a = 100.0;
        let (_, e, shape) = est(NetworkSpec::Polynomial {
            numerator: vec![a],
            denominator: vec![1.0, a],
        });
        assert!((shape.peak - a).abs() < 1e-9 * a);
        let x = 0.01;
        let p = Trapezoid {
            amplitude: a / x,
            rise: 0.0,
            flat: x / a,
            fall: 0.0,
        };
        let est = e.estimate(&p, 1.0);
        let want = (-(-x).exp_m1()) / x - 1.0;
        assert!((est.t0.rel - want).abs() < 1e-12);
        let first = est
            .first_order
            .t0_rel
            .expect("a 1 % pulse is inside the expansion");
        assert!((first - (-x / 2.0 + x * x / 6.0)).abs() < 1e-12);
        assert!((first - want).abs() < x.powi(3) / 24.0 * 1.01);
        // Aligned at the centroid: (reading − h(w/2))/h(0⁺) = (1 − e^(−x))/x − e^(−x/2) (closed form).
        let want_al = (-(-x).exp_m1()) / x - (-x / 2.0).exp();
        assert!((est.t0_aligned.rel - want_al).abs() < 1e-12);
        // After the pulse the error is proportional to h, so the window max is at the end.
        assert!((est.window.max_rel - want_al.abs()).abs() < 1e-9);
    }

    #[test]
    fn settle_time_of_single_pole() {
        // |h| = a·e^(−at) falls to 0.1 % of its peak at t = ln(1000)/a (closed form).
        let a = 50.0;
        let (_, _, shape) = est(NetworkSpec::Polynomial {
            numerator: vec![a],
            denominator: vec![1.0, a],
        });
        let want = 1000f64.ln() / a;
        assert!((shape.settle.unwrap() - want).abs() < 1e-9 * want);
    }

    #[test]
    fn low_pass_rlc_is_normalised_by_peak() {
        // ω0²/(s² + 2ζω0 s + ω0²): h(0⁺) = 0 (initial-value theorem, relative degree 2); the
        // peak of h is ω0/√(1−ζ²)·e^(−ζ φ/√(1−ζ²)) at t = φ/ω_d, φ = arccos ζ (closed form).
        let (w0, z) = (1000.0f64, 0.3f64);
        let (_, e, shape) = est(NetworkSpec::Polynomial {
            numerator: vec![w0 * w0],
            denominator: vec![1.0, 2.0 * z * w0, w0 * w0],
        });
        let phi = z.acos();
        let wd = w0 * (1.0 - z * z).sqrt();
        let want = w0 / (1.0 - z * z).sqrt() * (-z * w0 * phi / wd).exp() * phi.sin();
        assert!(
            (shape.peak - want).abs() < 1e-9 * want,
            "{} {}",
            shape.peak,
            want
        );
        assert_eq!(e.normalised_by(), NormalisedBy::Peak);
    }
}
