//! Ideal h(t) against the predicted y(t)/area over the run, with a zoom on the first fastest
//! time scales, where the two differ most.

use super::axis::{Axis, Scale};
use super::canvas::{
    Area, BAND, Chart, Component, DIRECT, IDEAL, INK, Key, Meta, PREDICTED, PanelSpec, Spot,
    components, curve, decimate, label, legend, panel, pe, ratio_tick, render, time_tick, titled,
    unit_tick, y_range,
};
use crate::plan::Prepared;
use crate::pulse::Trapezoid;
use crate::scenario::Scenario;
use crate::units::{Dim, eng};
use plotters::prelude::*;
use plotters::style::text_anchor::{HPos, Pos, VPos};
use std::io;

/// Pixel columns a panel's curves are thinned to.
const COLUMNS: usize = 900;

/// (t, h(t), y(t)/area) for one component on [0, span]: `n` uniform points (by the running
/// exponentials of the exact evaluators) plus the pulse's breakpoints and a fine grid inside the
/// pulse (h at t = 0 is h(0⁺)).
pub(crate) fn sample(
    c: &Component,
    pulse: &Trapezoid,
    span: f64,
    n: usize,
) -> Vec<(f64, f64, f64)> {
    let driven = c.modal.drive(&pulse.breakpoints());
    let area = pulse.area();
    let n = n.max(2);
    let dt = span / (n - 1) as f64;
    let ys = driven.uniform(0.0, dt, n);
    let hs = c.h.uniform(0.0, dt, n);
    let mut out: Vec<(f64, f64, f64)> = (0..n)
        .map(|k| (k as f64 * dt, hs[k], ys[k] / area))
        .collect();
    let end = pulse.end();
    let mut extra: Vec<f64> = pulse.breakpoints().iter().map(|b| b.0).collect();
    extra.extend((1..256).map(|k| end * k as f64 / 256.0));
    extra.retain(|&t| t <= span);
    out.extend(
        extra
            .into_iter()
            .map(|t| (t, c.h.at(t), driven.at(t) / area)),
    );
    out.sort_by(|a, b| a.0.total_cmp(&b.0));
    out.dedup_by(|a, b| a.0 == b.0);
    out
}

/// (t, h(t), y(t)/area) for one component at the given times, one by one.
pub(crate) fn sample_at(c: &Component, pulse: &Trapezoid, times: &[f64]) -> Vec<(f64, f64, f64)> {
    let driven = c.modal.drive(&pulse.breakpoints());
    let area = pulse.area();
    times
        .iter()
        .map(|&t| (t, c.h.at(t), driven.at(t) / area))
        .collect()
}

/// Geometric times on [lo, hi] (n of them) plus the pulse's breakpoints inside.
pub(crate) fn geometric(pulse: &Trapezoid, lo: f64, hi: f64, n: usize) -> Vec<f64> {
    let q = (hi / lo).powf(1.0 / (n - 1) as f64);
    let mut t: Vec<f64> = (0..n).map(|k| lo * q.powi(k as i32)).collect();
    t.extend(
        pulse
            .breakpoints()
            .iter()
            .map(|b| b.0)
            .filter(|&b| b > lo && b < hi),
    );
    t.sort_by(f64::total_cmp);
    t.dedup();
    t
}

/// Uniform points needed to resolve the fastest motion over a span (bounded).
pub(crate) fn points_for(comp: &[Component], span: f64, tau_fast: f64) -> usize {
    let f_osc = comp
        .iter()
        .flat_map(|c| c.h.frequencies().collect::<Vec<_>>())
        .fold(0.0, f64::max);
    let by_osc = span * f_osc / (2.0 * std::f64::consts::PI) * 24.0;
    let by_fast = span / tau_fast * 3.0;
    (by_osc.max(by_fast).ceil() as usize).clamp(4000, 100_000)
}

/// Samples of (t, h, y/area) per component.
type Samples = Vec<Vec<(f64, f64, f64)>>;

/// The times by which h(t) has done 2 % and 98 % of its moving: its total variation
/// Σ|Δh| on a geometric grid from `start` to `run` (each component on its own scale).
pub(crate) fn dynamics(comps: &[Component], start: f64, run: f64) -> (f64, f64) {
    let n = 1200;
    let q = (run / start).powf(1.0 / (n - 1) as f64);
    let times: Vec<f64> = (0..n).map(|k| start * q.powi(k as i32)).collect();
    let mut moved = vec![0.0; n];
    for c in comps {
        let mut prev = c.h.at(times[0]) / c.normaliser;
        for k in 1..n {
            let v = c.h.at(times[k]) / c.normaliser;
            moved[k] += (v - prev).abs();
            prev = v;
        }
    }
    for k in 1..n {
        moved[k] += moved[k - 1];
    }
    let total = moved[n - 1];
    if total.is_nan() || total <= 0.0 {
        return (start, run);
    }
    let at = |f: f64| times[moved.iter().position(|&m| m >= f * total).unwrap_or(n - 1)];
    (at(0.02), at(0.98))
}

/// Where h does its moving: the times by which it has done 2 % and 98 % of it (see
/// [`dynamics`]), from a start well before the pulse's end and its fastest time scale.
pub(crate) fn moving_span(
    comps: &[Component],
    prep: &Prepared,
    pulse: &Trapezoid,
    run: f64,
) -> (f64, f64, f64) {
    let start = (prep.tau_fast / 10.0)
        .min(pulse.end() / 10.0)
        .max(run * 1e-12);
    let (early, late) = dynamics(comps, start, run);
    (start, early, late)
}

/// The time axis over the run: linear, or logarithmic when the network is stiff (the run
/// many thousand fastest time scales long) or when h does its moving within the first tenth
/// of the run, where a linear axis would show a flat line.
pub(crate) fn run_axis(
    prep: &Prepared,
    pulse: &Trapezoid,
    run: f64,
    moving: (f64, f64, f64),
) -> Axis {
    let (start, early, late) = moving;
    let stiff = run / prep.tau_plan > 1000.0;
    if stiff || late < 0.1 * run {
        let lo = (prep.tau_plan / 20.0)
            .min(pulse.end() / 2.0)
            .min(early / 2.0);
        Axis::log(lo.max(start), run)
    } else {
        Axis::linear(0.0, run)
    }
}

/// Each component's samples over an axis, scaled to its own normaliser when residues are
/// unknown.
fn samples(comps: &[Component], pulse: &Trapezoid, x: &Axis, n: usize, known: bool) -> Samples {
    comps
        .iter()
        .map(|c| {
            let k = if known { 1.0 } else { 1.0 / c.normaliser };
            let v = if x.scale == Scale::Log {
                sample_at(c, pulse, &geometric(pulse, x.lo, x.hi, 6000))
            } else {
                sample(c, pulse, x.hi, n)
            };
            v.into_iter().map(|(t, h, y)| (t, h * k, y * k)).collect()
        })
        .collect()
}

/// A panel's value range: h and the response after the pulse, and the response during the
/// pulse too unless its spike would flatten the rest more than threefold (then clipped, and
/// its extreme returned to be written in the panel).
fn value_range(data: &Samples, extra: &[(f64, f64)], end: f64) -> ((f64, f64), Option<f64>) {
    let core = y_range(
        data.iter().flatten().flat_map(|&(t, h, y)| {
            let after = if t >= end { y } else { h };
            [h, after]
        }),
        0.08,
    );
    let full = y_range(
        data.iter()
            .flatten()
            .flat_map(|&(_, h, y)| [h, y])
            .chain(extra.iter().map(|p| p.1)),
        0.08,
    );
    if full.1 - full.0 > 3.0 * (core.1 - core.0) {
        let peak = data
            .iter()
            .flatten()
            .filter(|p| p.0 < end)
            .map(|p| p.2)
            .chain(extra.iter().map(|p| p.1))
            .fold(0.0f64, |m, v| if v.abs() > m.abs() { v } else { m });
        (core, Some(peak))
    } else {
        (full, None)
    }
}

/// The direct term's copy of the pulse, D·u(t)/area (empty when D = 0 or residues are unknown).
fn direct_copy(sc: &Scenario, pulse: &Trapezoid) -> Vec<(f64, f64)> {
    let d = sc.network.direct;
    if d == 0.0 || !sc.network.residues_known {
        return Vec::new();
    }
    let mut v = vec![(0.0, 0.0)];
    v.extend(
        pulse
            .breakpoints()
            .into_iter()
            .map(|(t, u)| (t, d * u / pulse.area())),
    );
    v
}

/// The response figure's legend.
fn response_keys(direct: bool) -> Vec<Key> {
    let mut keys = vec![
        Key::line(IDEAL, 6, "ideal h(t)"),
        Key::line(PREDICTED, 2, "predicted y(t)/area"),
    ];
    if direct {
        keys.push(Key::dashed(
            DIRECT,
            2,
            "7 4",
            "direct term D·u(t)/area (part of y during the pulse)",
        ));
    }
    keys.push(Key::line(BAND, 12, "pulse duration"));
    keys
}

/// One panel of the response figure.
struct View<'a> {
    name: &'static str,
    caption: &'static str,
    x: Axis,
    data: &'a Samples,
    direct: &'a [(f64, f64)],
}

/// The response figure for the planned (or assessed) pulse over the run.
pub fn response_svg(
    sc: &Scenario,
    prep: &Prepared,
    pulse: &Trapezoid,
    run: f64,
) -> io::Result<String> {
    let comps = components(&sc.network, &prep.estimator);
    let known = sc.network.residues_known;
    let moving = moving_span(&comps, prep, pulse, run);
    let zoom = zoom_span(prep, pulse, run, moving.2);
    let title = "Response: ideal h(t) and predicted y(t)/area";
    let sub = if known {
        format!(
            "run {} · pulse width (50 %) {} · zoom on the first {}",
            eng(run, Dim::Time),
            eng(pulse.width_50(), Dim::Time),
            eng(zoom, Dim::Time)
        )
    } else {
        "residues unknown: each mode drawn as e^(−t/τ) on its own scale (h/h(0⁺))".to_string()
    };
    let main_x = run_axis(prep, pulse, run, moving);
    let zoom_x = Axis::linear(0.0, zoom);
    let main = samples(
        &comps,
        pulse,
        &main_x,
        points_for(&comps, run, prep.tau_plan),
        known,
    );
    let zoomed = samples(&comps, pulse, &zoom_x, 4000, known);
    let direct = direct_copy(sc, pulse);
    let mut meta = Meta::new(title);
    render(860, &mut meta, |root: &Area<'_>, meta: &mut Meta| {
        let body = titled(root, title, &sub)?;
        let body = legend(&body, &response_keys(!direct.is_empty()), meta)?;
        let (top, bottom) = body.split_vertically(400);
        meta.dash(DIRECT, "7 4");
        let log = main_x.scale == Scale::Log;
        let views = [
            (
                &top,
                View {
                    name: "main",
                    caption: if log {
                        "over the run (logarithmic time)"
                    } else {
                        "over the run"
                    },
                    x: main_x,
                    data: &main,
                    direct: &[],
                },
            ),
            (
                &bottom,
                View {
                    name: "zoom",
                    caption: "zoom: the first fastest time scales",
                    x: zoom_x,
                    data: &zoomed,
                    direct: &direct,
                },
            ),
        ];
        for (area, view) in views {
            draw_view(area, &view, sc, &comps, pulse.end(), meta)?;
        }
        Ok(())
    })
}

/// Draw one panel: the pulse band, h and y/area per component, the direct term's copy, then
/// the labels.
fn draw_view(
    area: &Area<'_>,
    view: &View<'_>,
    sc: &Scenario,
    comps: &[Component],
    end: f64,
    meta: &mut Meta,
) -> io::Result<()> {
    let known = sc.network.residues_known;
    let ((lo, hi), clip) = value_range(view.data, view.direct, end);
    let (x, y) = (view.x, Axis::linear(lo, hi));
    // The unit of h from the drive's and the output's kinds: /s, V/(A·s), A/(V·s).
    let h_unit = crate::units::h_unit(sc.drive, sc.output);
    let ydesc = if known {
        format!("h(t), y(t)/area ({h_unit})")
    } else {
        "per mode h/h(0⁺), y/(area·h(0⁺))".to_string()
    };
    let ytick = |v: f64, d: usize| {
        if known {
            unit_tick(v, &h_unit, d)
        } else {
            ratio_tick(v, d)
        }
    };
    let spec = PanelSpec {
        name: view.name,
        x,
        y,
        xdesc: if x.scale == Scale::Log {
            "time t (s), logarithmic"
        } else {
            "time t (s)"
        },
        ydesc: &ydesc,
        xfmt: &time_tick,
        yfmt: &ytick,
        caption: Some(view.caption),
    };
    let mut ch = panel(area, &spec, meta)?;
    ch.draw_series(std::iter::once(Rectangle::new(
        [(x.clamp(0.0), y.lo), (x.clamp(end), y.hi)],
        BAND.filled(),
    )))
    .map_err(pe)?;
    for series in view.data {
        let h: Vec<(f64, f64)> = series.iter().map(|p| (p.0, y.clamp(p.1))).collect();
        let p: Vec<(f64, f64)> = series.iter().map(|p| (p.0, y.clamp(p.2))).collect();
        curve(&mut ch, meta, decimate(&h, &x, COLUMNS), IDEAL, 6)?;
        curve(&mut ch, meta, decimate(&p, &x, COLUMNS), PREDICTED, 2)?;
    }
    meta.series(view.name, "ideal", IDEAL);
    meta.series(view.name, "predicted", PREDICTED);
    if !view.direct.is_empty() {
        let pts: Vec<(f64, f64)> = view.direct.iter().map(|&(t, v)| (t, y.clamp(v))).collect();
        curve(&mut ch, meta, pts, DIRECT, 2)?;
        meta.series(view.name, "direct", DIRECT);
    }
    if !known {
        mode_labels(&mut ch, meta, view.data, comps, &x, &y)?;
    }
    if let Some(peak) = clip {
        let unit = if known { h_unit.as_str() } else { "" };
        clip_label(&mut ch, meta, peak, end, unit, &x, &y)?;
    }
    Ok(())
}

/// Per-mode labels near the start of each mode's curve.
fn mode_labels(
    ch: &mut Chart<'_, '_>,
    meta: &mut Meta,
    data: &Samples,
    comps: &[Component],
    x: &Axis,
    y: &Axis,
) -> io::Result<()> {
    for (series, comp) in data.iter().zip(comps) {
        let Some(&first) = series.first() else {
            continue;
        };
        let p = series
            .iter()
            .find(|s| x.fraction(s.0) >= 0.02)
            .copied()
            .unwrap_or(first);
        let at = (p.0, y.clamp(p.1));
        let spots = [
            Spot::new(at, (6, -6), Pos::new(HPos::Left, VPos::Bottom)),
            Spot::new(at, (6, 6), Pos::new(HPos::Left, VPos::Top)),
        ];
        label(ch, meta, &spots, &comp.label, INK)?;
    }
    Ok(())
}

/// The note that the response's spike during the pulse was clipped, with its extreme.
fn clip_label(
    ch: &mut Chart<'_, '_>,
    meta: &mut Meta,
    peak: f64,
    end: f64,
    unit: &str,
    x: &Axis,
    y: &Axis,
) -> io::Result<()> {
    let top = peak > 0.0;
    let edge = if top { y.hi } else { y.lo };
    let v = if top { VPos::Top } else { VPos::Bottom };
    let dy = if top { 6 } else { -6 };
    let text = format!(
        "{} clipped: y/area reaches {} during the pulse",
        if top { "↑" } else { "↓" },
        unit_tick(peak, unit, 3)
    );
    let spots = [
        Spot::new((end.min(x.hi), edge), (8, dy), Pos::new(HPos::Left, v)),
        Spot::new((x.hi, edge), (-8, dy), Pos::new(HPos::Right, v)),
    ];
    label(ch, meta, &spots, &text, INK)?;
    Ok(())
}

/// The zoom panel's span: a few fastest significant time scales, or a few pulse durations,
/// within a quarter of the run — and no more than twice the time by which h has done 98 %
/// of its moving (`late`), so the zoom never shows a flat line.
pub(crate) fn zoom_span(prep: &Prepared, pulse: &Trapezoid, run: f64, late: f64) -> f64 {
    let by_scales = (6.0 * prep.tau_plan).max(4.0 * pulse.end());
    by_scales
        .min(2.0 * late)
        .max(4.0 * pulse.end())
        .min(run / 4.0)
}
