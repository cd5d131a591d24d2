//! Three readings of h side by side, each with what it assumes:
//!
//! * raw — y(t)/area read as h(t − T): the pulse taken as an impulse at its end T;
//! * aligned — y(t)/area read as h(t − c), c the pulse's centroid, less the second-order
//!   term ½σₓ²h″ (σₓ² the pulse's variance about its centroid: the moment expansion of
//!   the convolution) where that term is a correction, i.e. σₓ·max|p| < ½ (common
//!   practice, no source);
//! * modal — h(t) = Σ rₖ e^(pₖt) from the fitted modes with the pulse removed exactly.

use super::capture::Capture;
use super::curves::{Curves, NoEstimate};
use super::modes::{Estimate, PER_MODE, Propagated};
use serde::Serialize;

/// The three readings at the pulse's end and at a few instants.
#[derive(Debug, Clone, PartialEq, Serialize)]
pub struct Readings {
    /// Pulse area used to scale y.
    pub area: f64,
    /// Raw: y(T)/area, read as h(0⁺) (from the fitted tail, free of sample noise).
    pub raw_h0: Estimate,
    /// The instant the aligned reading at T refers to: T − c, s.
    pub aligned_at_s: f64,
    /// Aligned without the correction: y(T)/area, read as h(T − c).
    pub aligned: Estimate,
    /// Aligned with ½σₓ²h″ removed.
    pub aligned_corrected: Option<Estimate>,
    /// Why there is no corrected value.
    pub correction_reason: Option<NoEstimate>,
    /// Modal h(0⁺).
    pub modal_h0: Estimate,
    /// Modal h(T − c), for comparison with the aligned reading.
    pub modal_at_aligned: Estimate,
    /// The model's h(0⁺) and h(T − c), when its residues are known.
    pub model: Option<(f64, f64)>,
    /// The readings at a few instants.
    pub table: Vec<ReadingRow>,
}

/// The three readings of h at one instant t (since the impulse).
#[derive(Debug, Clone, PartialEq, Serialize)]
pub struct ReadingRow {
    /// t, s.
    pub t_s: f64,
    /// Raw reading from the capture's samples: (y(t + T) − baseline)/area.
    pub raw: Option<f64>,
    /// Aligned reading from the samples: (y(t + c) − baseline)/area − ½σₓ²h″.
    pub aligned: Option<f64>,
    /// Modal h(t).
    pub modal: Estimate,
    /// The model's h(t).
    pub model: Option<f64>,
}

/// Whether the ½σₓ²h″ term is a correction for this pulse and these poles.
pub fn correction_meaningful(variance: f64, poles: &[num_complex::Complex64]) -> bool {
    let pmax = poles.iter().map(|p| p.norm()).fold(0.0, f64::max);
    variance.sqrt() * pmax < 0.5
}

/// Linear interpolation of the capture (baseline removed) at t since time zero.
pub fn sample_at(cap: &Capture, curves: &Curves, t: f64) -> Option<f64> {
    let tc = t + curves.zero;
    let k = cap.time.partition_point(|&x| x < tc);
    if k == 0 || k >= cap.len() {
        return None;
    }
    let (t0, t1) = (cap.time[k - 1], cap.time[k]);
    let (y0, y1) = (cap.output.values[k - 1], cap.output.values[k]);
    let y = y0 + (y1 - y0) * (tc - t0) / (t1 - t0);
    Some(y - curves.baseline(t))
}

/// Build the readings. `model_h` evaluates the model's h(t) when its residues are known.
pub fn readings(cap: &Capture, curves: &Curves, model_h: Option<&dyn Fn(f64) -> f64>) -> Readings {
    let p: &Propagated = &curves.modes;
    let area = curves.pulse.area();
    let (c, var_x, end) = (curves.pulse.centroid(), curves.pulse.variance(), curves.end);
    let nm = p.set.poles.len() * PER_MODE;
    let (i0, iy, iy2) = (nm, nm + 1, nm + 2);
    let scaled = |k: usize| Estimate::new(p.values[k] / area, p.cov[(k, k)] / (area * area));
    let meaningful = correction_meaningful(var_x, &p.set.poles);
    let corrected = meaningful.then(|| {
        let a = -0.5 * var_x;
        let value = (p.values[iy] + a * p.values[iy2]) / area;
        let var = p.cov[(iy, iy)] + 2.0 * a * p.cov[(iy, iy2)] + a * a * p.cov[(iy2, iy2)];
        Estimate::new(value, var / (area * area))
    });
    let aligned_at = end - c;
    let (h_al, v_al) = p.h_with_variance(aligned_at);
    let table = instants(curves)
        .into_iter()
        .map(|t| row(cap, curves, t, meaningful, model_h))
        .collect();
    Readings {
        area,
        raw_h0: scaled(iy),
        aligned_at_s: aligned_at,
        aligned: scaled(iy),
        aligned_corrected: corrected,
        correction_reason: (!meaningful).then_some(NoEstimate::SeriesNotConvergent),
        modal_h0: Estimate::new(p.values[i0], p.cov[(i0, i0)]),
        modal_at_aligned: Estimate::new(h_al, v_al),
        model: model_h.map(|f| (f(0.0), f(aligned_at))),
        table,
    }
}

/// Instants for the table: T − c, then 0.1, 0.3, 1, 2 and 4 slowest time constants.
fn instants(curves: &Curves) -> Vec<f64> {
    let first = curves.end - curves.pulse.centroid();
    let slow = curves
        .modes
        .set
        .poles
        .iter()
        .map(|p| -1.0 / p.re)
        .fold(0.0, f64::max);
    let mut t: Vec<f64> = std::iter::once(first)
        .chain([0.1, 0.3, 1.0, 2.0, 4.0].iter().map(|k| k * slow))
        .filter(|&x| x >= first)
        .collect();
    t.dedup_by(|a, b| (*a - *b).abs() <= 1e-12 * b.abs());
    t
}

fn row(
    cap: &Capture,
    curves: &Curves,
    t: f64,
    meaningful: bool,
    model_h: Option<&dyn Fn(f64) -> f64>,
) -> ReadingRow {
    let area = curves.pulse.area();
    let (c, var_x, end) = (curves.pulse.centroid(), curves.pulse.variance(), curves.end);
    let raw = sample_at(cap, curves, t + end).map(|y| y / area);
    let aligned = sample_at(cap, curves, t + c).map(|y| {
        let corr = if meaningful && t + c >= end {
            0.5 * var_x * curves.modes.set.tail(t + c - end, 2)
        } else {
            0.0
        };
        (y - corr) / area
    });
    let (h, var) = curves.modes.h_with_variance(t);
    ReadingRow {
        t_s: t,
        raw,
        aligned,
        modal: Estimate::new(h, var),
        model: model_h.map(|f| f(t)),
    }
}
