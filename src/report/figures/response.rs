//! Ideal h(t) against the predicted y(t)/area over the run, with a zoom on the first fastest
//! time scales, where the two differ most.

use super::axis::Axis;
use super::canvas::{
    Area, BAND, Component, DIRECT, IDEAL, INK, Key, Meta, PREDICTED, components, curve, decimate,
    label, legend, panel, pe, render, time_tick, titled, unit_tick, y_range,
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

/// The response figure for the planned (or assessed) pulse over the run.
pub fn response_svg(
    sc: &Scenario,
    prep: &Prepared,
    pulse: &Trapezoid,
    run: f64,
) -> io::Result<String> {
    let comps = components(&sc.network, &prep.estimator);
    let known = sc.network.residues_known;
    let end = pulse.end();
    let d = sc.network.direct;
    let title = "Response: ideal h(t) and predicted y(t)/area";
    let sub = if known {
        format!(
            "run {} · pulse width (50 %) {} · zoom on the first {}",
            eng(run, Dim::Time),
            eng(pulse.width_50(), Dim::Time),
            eng(zoom_span(prep, pulse, run), Dim::Time)
        )
    } else {
        "residues unknown: each mode drawn as e^(−t/τ) on its own scale (h/h(0⁺))".to_string()
    };
    let zoom = zoom_span(prep, pulse, run);
    let ydesc = if known {
        "h(t), y(t)/area (1/s)"
    } else {
        "per mode h/h(0⁺), y/(area·h(0⁺))"
    };
    let ytick = |v: &f64| {
        if known {
            unit_tick(*v, "/s")
        } else {
            super::canvas::ratio_tick(*v)
        }
    };

    // Samples.
    let n_main = points_for(&comps, run, prep.tau_plan);
    let scale = |c: &Component| if known { 1.0 } else { 1.0 / c.normaliser };
    // Stiff networks (the run many thousand fastest time scales long) get a logarithmic time
    // axis over the run, so the fast start and the slow tail both show.
    let log_main = run / prep.tau_plan > 1000.0;
    let main_lo = (prep.tau_plan / 20.0).min(end / 2.0);
    let t_log = if log_main {
        geometric(pulse, main_lo, run, 6000)
    } else {
        Vec::new()
    };
    let main: Vec<Vec<(f64, f64, f64)>> = comps
        .iter()
        .map(|c| {
            let k = scale(c);
            let v = if log_main {
                sample_at(c, pulse, &t_log)
            } else {
                sample(c, pulse, run, n_main)
            };
            v.into_iter().map(|(t, h, y)| (t, h * k, y * k)).collect()
        })
        .collect();
    let zoomed: Vec<Vec<(f64, f64, f64)>> = comps
        .iter()
        .map(|c| {
            let k = scale(c);
            sample(c, pulse, zoom, 4000)
                .into_iter()
                .map(|(t, h, y)| (t, h * k, y * k))
                .collect()
        })
        .collect();
    let direct: Vec<(f64, f64)> = if d != 0.0 && known {
        let mut v = vec![(0.0, 0.0)];
        v.extend(
            pulse
                .breakpoints()
                .into_iter()
                .map(|(t, u)| (t, d * u / pulse.area())),
        );
        v
    } else {
        Vec::new()
    };

    // Each panel's range follows h and the response after the pulse. Inside the pulse the
    // response (with the direct term) may spike far beyond: the spike is clipped when it would
    // flatten the rest more than threefold, and its extreme is written in the panel.
    let range = |data: &[Vec<(f64, f64, f64)>], extra: &[(f64, f64)]| {
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
    };
    let ((mlo, mhi), mclip) = range(&main, &[]);
    let ((zlo, zhi), zclip) = range(&zoomed, &direct);

    let mut meta = Meta::new(title);
    render(860, &mut meta, |root: &Area<'_>, meta: &mut Meta| {
        let body = titled(root, title, &sub)?;
        let mut keys = vec![
            Key::line(IDEAL, 6, "ideal h(t)"),
            Key::line(PREDICTED, 2, "predicted y(t)/area"),
        ];
        if !direct.is_empty() {
            keys.push(Key::dashed(
                DIRECT,
                2,
                "7 4",
                "direct term D·u(t)/area (part of y during the pulse)",
            ));
        }
        keys.push(Key::line(BAND, 12, "pulse duration"));
        let body = legend(&body, &keys, meta)?;
        let (top, bottom) = body.split_vertically(400);
        meta.dash(DIRECT, "7 4");

        for (pname, area, x, (lo, hi), data, clip) in [
            (
                "main",
                &top,
                if log_main {
                    Axis::log(main_lo, run)
                } else {
                    Axis::linear(0.0, run)
                },
                (mlo, mhi),
                &main,
                mclip,
            ),
            (
                "zoom",
                &bottom,
                Axis::linear(0.0, zoom),
                (zlo, zhi),
                &zoomed,
                zclip,
            ),
        ] {
            let y = Axis::linear(lo, hi);
            let caption = if pname == "main" {
                if log_main {
                    "over the run (logarithmic time)"
                } else {
                    "over the run"
                }
            } else {
                "zoom: the first fastest time scales"
            };
            let mut ch = panel(
                area,
                x,
                y,
                if pname == "main" && log_main {
                    "time t (s), logarithmic"
                } else {
                    "time t (s)"
                },
                ydesc,
                &time_tick,
                &ytick,
                Some(caption),
            )?;
            meta.panel(pname, &ch, &x, &y);
            // Pulse duration band.
            ch.draw_series(std::iter::once(Rectangle::new(
                [(x.clamp(0.0), y.lo), (x.clamp(end), y.hi)],
                BAND.filled(),
            )))
            .map_err(pe)?;
            for (i, series) in data.iter().enumerate() {
                let h: Vec<(f64, f64)> = series.iter().map(|p| (p.0, y.clamp(p.1))).collect();
                let p: Vec<(f64, f64)> = series.iter().map(|p| (p.0, y.clamp(p.2))).collect();
                curve(&mut ch, decimate(&h, &x, COLUMNS), IDEAL, 6)?;
                curve(&mut ch, decimate(&p, &x, COLUMNS), PREDICTED, 2)?;
                if i == 0 {
                    meta.series(pname, "ideal", IDEAL);
                    meta.series(pname, "predicted", PREDICTED);
                }
                if !known {
                    let t_lab = series
                        .iter()
                        .find(|s| s.0 >= x.hi * 0.02)
                        .copied()
                        .unwrap_or(series[0]);
                    label(
                        &mut ch,
                        (t_lab.0, y.clamp(t_lab.1)),
                        (6, -6),
                        &comps[i].label,
                        INK,
                        Pos::new(HPos::Left, VPos::Bottom),
                    )?;
                }
            }
            if let Some(peak) = clip {
                let top_side = peak > 0.0;
                label(
                    &mut ch,
                    (end.min(x.hi), if top_side { y.hi } else { y.lo }),
                    (8, if top_side { 6 } else { -6 }),
                    &format!(
                        "{} clipped: y/area reaches {} during the pulse",
                        if top_side { "↑" } else { "↓" },
                        unit_tick(peak, if known { "/s" } else { "" })
                    ),
                    INK,
                    Pos::new(HPos::Left, if top_side { VPos::Top } else { VPos::Bottom }),
                )?;
            }
            if pname == "zoom" && !direct.is_empty() {
                let pts: Vec<(f64, f64)> = direct.iter().map(|&(t, v)| (t, y.clamp(v))).collect();
                curve(&mut ch, pts, DIRECT, 2)?;
                meta.series(pname, "direct", DIRECT);
            }
        }
        Ok(())
    })
}

/// The zoom panel's span: a few fastest significant time scales, or a few pulse durations, within the run.
pub(crate) fn zoom_span(prep: &Prepared, pulse: &Trapezoid, run: f64) -> f64 {
    (6.0 * prep.tau_plan).max(4.0 * pulse.end()).min(run / 4.0)
}
