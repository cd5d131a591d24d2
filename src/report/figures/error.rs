//! The error after the pulse, raw and centroid-aligned, relative to the normaliser, on a
//! logarithmic time axis from the pulse's end to the end of the run.

use super::axis::Axis;
use super::canvas::{
    ALIGNED, Area, BUDGET, Chart, EXTRA, Key, Meta, PREDICTED, PanelSpec, Spot, components, curve,
    decimate, label, legend, marker, panel, percent_tick, render, segment, time_tick, titled,
    y_range,
};
use crate::estimate::{Metric, WindowError};
use crate::plan::Prepared;
use crate::pulse::Trapezoid;
use crate::scenario::Scenario;
use crate::units::{Dim, eng, percent_unsigned};
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

/// What the error figure shows, shared by its two panels.
struct ErrorView<'a> {
    sc: &'a Scenario,
    prep: &'a Prepared,
    pulse: &'a Trapezoid,
    data: &'a [ErrorSeries],
    window: Option<WindowError>,
    x: Axis,
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
    let view = ErrorView {
        sc,
        prep,
        pulse,
        data: &data,
        window: known.then(|| prep.estimator.window(pulse, run)),
        x: Axis::log(end, run.max(end * 1.001)),
    };
    let mut meta = Meta::new(title);
    render(860, &mut meta, |root: &Area<'_>, meta: &mut Meta| {
        let body = titled(root, title, &sub)?;
        let body = legend(&body, &error_keys(&view), meta)?;
        meta.dash(BUDGET, "8 5");
        let (top, bottom) = body.split_vertically(body.dim_in_pixel().1 as i32 / 2);
        error_panel(&top, &view, false, meta)?;
        error_panel(&bottom, &view, true, meta)?;
        Ok(())
    })
}

/// The legend of the error figure.
fn error_keys(view: &ErrorView<'_>) -> Vec<Key> {
    let mut keys = Vec::new();
    if view.sc.network.residues_known {
        keys.push(Key::line(PREDICTED, 2, "raw: y(t)/area − h(t)"));
        keys.push(Key::line(
            ALIGNED,
            2,
            "aligned: y(t)/area − h(t − centroid)",
        ));
    } else {
        for (i, (lab, _)) in view.data.iter().enumerate() {
            keys.push(Key::line(EXTRA[i % EXTRA.len()], 2, format!("mode {lab}")));
        }
    }
    if view.sc.plan.target_error.is_some() {
        keys.push(Key::dashed(
            BUDGET,
            2,
            "8 5",
            "± budget (on its metric's panel)",
        ));
    }
    if view.window.is_some() {
        keys.push(Key::marker(ALIGNED, "window maximum"));
    }
    keys
}

/// One panel: the raw or the aligned error, its budget lines, the window maximum, labels.
fn error_panel(
    area: &Area<'_>,
    view: &ErrorView<'_>,
    aligned: bool,
    meta: &mut Meta,
) -> io::Result<()> {
    let known = view.sc.network.residues_known;
    let pname = if aligned { "aligned" } else { "raw" };
    let pick = |p: &(f64, f64, f64)| if aligned { p.2 } else { p.1 };
    let (lo, hi) = y_range(view.data.iter().flat_map(|(_, v)| v.iter().map(pick)), 0.1);
    let (x, y) = (view.x, Axis::linear(lo.min(0.0), hi.max(0.0)));
    let spec = PanelSpec {
        name: pname,
        x,
        y,
        xdesc: "time t (s), logarithmic",
        ydesc: "relative error",
        xfmt: &time_tick,
        yfmt: &percent_tick,
        caption: Some(if aligned {
            "centroid-aligned error (y/area − h(t − c)) / normaliser"
        } else {
            "raw error (y/area − h(t)) / normaliser"
        }),
    };
    let mut ch = panel(area, &spec, meta)?;
    for (i, (_, v)) in view.data.iter().enumerate() {
        let colour = match (known, aligned) {
            (true, true) => ALIGNED,
            (true, false) => PREDICTED,
            (false, _) => EXTRA[i % EXTRA.len()],
        };
        let pts: Vec<(f64, f64)> = v.iter().map(|p| (p.0, pick(p))).collect();
        curve(&mut ch, meta, decimate(&pts, &x, COLUMNS), colour, 2)?;
        meta.series(pname, if known { pname } else { "mode" }, colour);
    }
    let metric = view.sc.plan.metric;
    let on_this = matches!(
        (metric, aligned),
        (Metric::T0, false) | (Metric::T0Aligned | Metric::Window, true)
    );
    let budget = view.sc.plan.target_error.filter(|_| on_this);
    if let Some(b) = budget {
        for s in [b, -b] {
            if y.contains(s) {
                segment(&mut ch, meta, (x.lo, s), (x.hi, s), BUDGET, 2)?;
            }
        }
    }
    let window_max = match (view.window, aligned) {
        (Some(w), true) => window_marker(&mut ch, meta, view, &w, (pname, &y))?,
        _ => None,
    };
    if let Some((at, text)) = window_max {
        let spots = [
            Spot::new(at, (10, -10), Pos::new(HPos::Left, VPos::Bottom)),
            Spot::new(at, (10, 10), Pos::new(HPos::Left, VPos::Top)),
            Spot::new(at, (-10, -10), Pos::new(HPos::Right, VPos::Bottom)),
            Spot::new(at, (-10, 10), Pos::new(HPos::Right, VPos::Top)),
        ];
        label(&mut ch, meta, &spots, &text, ALIGNED)?;
    }
    if let Some(b) = budget.filter(|&b| !y.contains(b) && !y.contains(-b)) {
        let corner = |at, dx, h| Spot::new(at, (dx, 6), Pos::new(h, VPos::Top));
        let spots = [
            corner((x.hi, y.hi), -6, HPos::Right),
            corner((x.lo, y.hi), 6, HPos::Left),
            Spot::new((x.hi, y.lo), (-6, -6), Pos::new(HPos::Right, VPos::Bottom)),
            Spot::new((x.lo, y.lo), (6, -6), Pos::new(HPos::Left, VPos::Bottom)),
        ];
        let text = format!("budget ±{} lies outside this range", percent_unsigned(b));
        label(&mut ch, meta, &spots, &text, BUDGET)?;
    }
    Ok(())
}

/// Mark the signed error at the window maximum; returns where it sits and its label text.
fn window_marker(
    ch: &mut Chart<'_, '_>,
    meta: &mut Meta,
    view: &ErrorView<'_>,
    w: &WindowError,
    (pname, y): (&str, &Axis),
) -> io::Result<Option<((f64, f64), String)>> {
    let e = errors(view.sc, view.prep, view.pulse, &[w.t_max])[0].1[0].2;
    if !view.x.contains(w.t_max) || !y.contains(e) {
        return Ok(None);
    }
    marker(ch, meta, (w.t_max, e), 5, ALIGNED)?;
    meta.point(pname, "window_max", w.t_max, e);
    let text = format!(
        "max {} at {}",
        percent_unsigned(w.max_rel),
        eng(w.t_max, Dim::Time)
    );
    Ok(Some(((w.t_max, e), text)))
}
