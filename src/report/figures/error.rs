//! The error after the pulse, raw and centroid-aligned, relative to the normaliser, on a
//! logarithmic time axis from the pulse's end to the end of the run.

use super::axis::Axis;
use super::canvas::{
    ALIGNED, Area, BUDGET, EXTRA, Key, Meta, PREDICTED, components, curve, decimate, label, legend,
    panel, pe, percent_tick, render, time_tick, titled, y_range,
};
use crate::estimate::Metric;
use crate::plan::Prepared;
use crate::pulse::Trapezoid;
use crate::scenario::Scenario;
use crate::units::{Dim, eng, percent_unsigned};
use plotters::prelude::*;
use plotters::style::text_anchor::{HPos, Pos, VPos};
use std::io;

const COLUMNS: usize = 900;

/// Geometric times from the pulse's end to the run's end, dense enough for the fastest
/// oscillation everywhere.
pub(crate) fn log_grid(end: f64, run: f64, f_osc: f64) -> Vec<f64> {
    let ratio = (run / end).max(1.0 + 1e-9);
    // Step factor q with (q − 1)·t ≤ period / 16 at the run's end, and at least 2000 points.
    let per_step = if f_osc > 0.0 {
        (2.0 * std::f64::consts::PI / f_osc / 16.0 / run).min(0.01)
    } else {
        0.01
    };
    let n = ((ratio.ln() / (1.0 + per_step).ln()).ceil() as usize).clamp(2000, 20_000);
    let q = ratio.powf(1.0 / n as f64);
    let mut t: Vec<f64> = (0..=n).map(|k| end * q.powi(k as i32)).collect();
    if let Some(last) = t.last_mut() {
        *last = run;
    }
    t
}

/// A component's label and its (t, raw, aligned) relative errors.
pub(crate) type ErrorSeries = (String, Vec<(f64, f64, f64)>);

/// Raw and aligned relative errors of each component at the given times (after the pulse).
pub(crate) fn errors(
    sc: &Scenario,
    prep: &Prepared,
    pulse: &Trapezoid,
    times: &[f64],
) -> Vec<ErrorSeries> {
    let end = pulse.end();
    let c = pulse.centroid();
    let area = pulse.area();
    components(&sc.network, &prep.estimator)
        .into_iter()
        .map(|comp| {
            let y = comp.modal.drive(&pulse.breakpoints()).after_end();
            let n = comp.normaliser;
            // Merged mode by mode about the pulse's end, as the estimator does, so a small
            // difference of large responses keeps its digits.
            let raw = y.combine(1.0 / (area * n), &comp.h.reanchored(end), -1.0 / n);
            let aligned = y.combine(
                1.0 / (area * n),
                &comp.h.delayed(c).reanchored(end),
                -1.0 / n,
            );
            let pts = times
                .iter()
                .map(|&t| (t, raw.at(t), aligned.at(t)))
                .collect();
            (comp.label, pts)
        })
        .collect()
}

/// The error figure.
pub fn error_svg(
    sc: &Scenario,
    prep: &Prepared,
    pulse: &Trapezoid,
    run: f64,
) -> io::Result<String> {
    let end = pulse.end();
    let known = sc.network.residues_known;
    let f_osc = prep.estimator.ideal().frequencies().fold(0.0, f64::max);
    let times = log_grid(end, run.max(end * 1.001), f_osc);
    let data = errors(sc, prep, pulse, &times);
    let norm_text = match prep.estimator.normalised_by() {
        crate::estimate::NormalisedBy::H0Plus => "|h(0⁺)|",
        crate::estimate::NormalisedBy::Peak | crate::estimate::NormalisedBy::EachMode => "peak |h|",
    };
    let title = "Error after the pulse";
    let sub = if known {
        format!(
            "relative to {norm_text}; from the pulse's end ({}) to the end of the run ({})",
            eng(end, Dim::Time),
            eng(run, Dim::Time)
        )
    } else {
        "per mode, each relative to its own h(0⁺); residues unknown".to_string()
    };
    let window = if known {
        Some(prep.estimator.window(pulse, run))
    } else {
        None
    };
    let budget = sc.plan.target_error;
    let metric = sc.plan.metric;
    let mut meta = Meta::new(title);
    render(860, &mut meta, |root: &Area<'_>, meta: &mut Meta| {
        let body = titled(root, title, &sub)?;
        let mut keys = Vec::new();
        if known {
            keys.push(Key::line(PREDICTED, 2, "raw: y(t)/area − h(t)"));
            keys.push(Key::line(
                ALIGNED,
                2,
                "aligned: y(t)/area − h(t − centroid)",
            ));
        } else {
            for (i, (lab, _)) in data.iter().enumerate() {
                keys.push(Key::line(EXTRA[i % EXTRA.len()], 2, format!("mode {lab}")));
            }
        }
        if budget.is_some() {
            keys.push(Key::dashed(
                BUDGET,
                2,
                "8 5",
                "± budget (on its metric's panel)",
            ));
        }
        if window.is_some() {
            keys.push(Key::marker(ALIGNED, "window maximum"));
        }
        let body = legend(&body, &keys, meta)?;
        meta.dash(BUDGET, "8 5");
        let (top, bottom) = body.split_vertically(body.dim_in_pixel().1 as i32 / 2);
        let x = Axis::log(end, run.max(end * 1.001));
        for (pname, area, aligned) in [("raw", &top, false), ("aligned", &bottom, true)] {
            let pick = |p: &(f64, f64, f64)| if aligned { p.2 } else { p.1 };
            let (lo, hi) = y_range(data.iter().flat_map(|(_, v)| v.iter().map(pick)), 0.1);
            let y = Axis::linear(lo.min(0.0), hi.max(0.0));
            let caption = if aligned {
                "centroid-aligned error (y/area − h(t − c)) / normaliser"
            } else {
                "raw error (y/area − h(t)) / normaliser"
            };
            let mut ch = panel(
                area,
                x,
                y,
                "time t (s), logarithmic",
                "relative error",
                &time_tick,
                &percent_tick,
                Some(caption),
            )?;
            meta.panel(pname, &ch, &x, &y);
            for (i, (_, v)) in data.iter().enumerate() {
                let colour = if known {
                    if aligned { ALIGNED } else { PREDICTED }
                } else {
                    EXTRA[i % EXTRA.len()]
                };
                let pts: Vec<(f64, f64)> = v.iter().map(|p| (p.0, pick(p))).collect();
                curve(&mut ch, decimate(&pts, &x, COLUMNS), colour, 2)?;
                meta.series(pname, if known { pname } else { "mode" }, colour);
            }
            let on_this = matches!(
                (metric, aligned),
                (Metric::T0, false) | (Metric::T0Aligned | Metric::Window, true)
            );
            if let (Some(b), true) = (budget, on_this) {
                for s in [b, -b] {
                    if y.contains(s) {
                        super::canvas::segment(&mut ch, (x.lo, s), (x.hi, s), BUDGET, 2)?;
                    }
                }
                if !y.contains(b) && !y.contains(-b) {
                    label(
                        &mut ch,
                        (x.hi, y.hi),
                        (-6, 6),
                        &format!("budget ±{} lies outside this range", percent_unsigned(b)),
                        BUDGET,
                        Pos::new(HPos::Right, VPos::Top),
                    )?;
                }
            }
            if let (Some(w), true) = (window, aligned) {
                // The signed error at the window maximum.
                let e = errors(sc, prep, pulse, &[w.t_max])[0].1[0].2;
                if x.contains(w.t_max) && y.contains(e) {
                    ch.draw_series(std::iter::once(Circle::new(
                        (w.t_max, e),
                        5,
                        ALIGNED.filled(),
                    )))
                    .map_err(pe)?;
                    label(
                        &mut ch,
                        (w.t_max, e),
                        (10, if e >= 0.0 { -10 } else { 10 }),
                        &format!(
                            "max {} at {}",
                            percent_unsigned(w.max_rel),
                            eng(w.t_max, Dim::Time)
                        ),
                        ALIGNED,
                        Pos::new(HPos::Left, if e >= 0.0 { VPos::Bottom } else { VPos::Top }),
                    )?;
                    meta.point(pname, "window_max", w.t_max, e);
                }
            }
        }
        Ok(())
    })
}
