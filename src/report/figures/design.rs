//! The design curve: the budgeted error metric against the pulse's 50 % width, on log–log
//! axes, with the budget, the rule-of-thumb width, the planned width and the width cap.

use super::axis::Axis;
use super::canvas::{
    Area, BAND, BUDGET, Chart, EXTRA, Key, MARK, Meta, PLANNED, PREDICTED, RULE, Spot, curve,
    label, marker, panel, pe, render, segment, titled, width_legend, width_spec,
};
use crate::estimate::Metric;
use crate::pipeline::PlanOutcome;
use crate::plan::tied_pulse;
use crate::scenario::Scenario;
use crate::units::{Dim, eng, percent_unsigned};
use plotters::prelude::*;
use plotters::style::text_anchor::{HPos, Pos, VPos};
use std::io;

/// A further curve on the design figure, in the same units: |relative error| (a fraction)
/// against the 50 % width (s). Other analyses (the noise share of a reading, the total of noise
/// and pulse error) pass theirs here.
#[derive(Debug, Clone, PartialEq)]
pub struct ExtraCurve {
    /// Legend text.
    pub label: String,
    /// (width s, |relative error|) points, in increasing width.
    pub points: Vec<(f64, f64)>,
}

/// The swept design curve and the widths the plan picked.
#[derive(Debug, Clone, PartialEq)]
pub struct DesignCurve {
    /// The metric swept (the scenario's budget metric).
    pub metric: Metric,
    /// (width s, |metric| as a fraction), increasing width.
    pub points: Vec<(f64, f64)>,
    /// Rule-of-thumb width, s.
    pub rule_width: f64,
    /// Planned width, s.
    pub planned_width: f64,
    /// The metric at the planned width.
    pub planned_value: f64,
    /// Widest width the planner allows (fastest significant time scale / min_width_ratio), s.
    pub cap_width: f64,
    /// The budget, when one was given.
    pub budget: Option<f64>,
    /// Fastest time scale 1/max|p| over every mode, significant or not, s.
    pub fastest: f64,
}

/// Decades the sweep may reach below its first choice of narrowest width.
const EXTRA_DECADES: i32 = 6;

/// Sweep the metric over `n` widths (log-spaced, plus the rule-of-thumb and planned widths),
/// exactly as the planner's search evaluates it: `tied_pulse(area, w, edge_ratio)`, run at
/// least twice the pulse's end. `progress(done, total)` is called after each width.
///
/// The sweep starts below the rule-of-thumb, planned and fastest widths, and further down
/// (a decade at a time) until the narrowest pulse does at least as well as the planned one: a
/// mode faster than the pulse's time scale makes a hump near its own time scale, which a
/// sweep starting on it would cut in two (it then reads as a spike at the left).
pub fn design_curve(
    sc: &Scenario,
    out: &PlanOutcome,
    n: usize,
    progress: &mut dyn FnMut(usize, usize),
) -> DesignCurve {
    let s = &sc.plan;
    let prep = &out.prep;
    let rule_width = prep.tau_plan / s.width_ratio;
    let planned_width = out.pulse.width_50();
    let cap_width = crate::plan::width_cap(prep, s).width(prep.tau_plan);
    let f = |w: f64| {
        let p = tied_pulse(sc.area.area(w), w, s.edge_ratio);
        let run = prep.run.max(p.end() * 2.0);
        prep.estimator.metric(&p, s.metric, run)
    };
    let planned_value = f(planned_width);
    let floor = prep.estimator.rounding_floor();
    let mut lo = rule_width.min(planned_width).min(prep.tau_fast) / 30.0;
    for _ in 0..EXTRA_DECADES {
        if f(lo) <= planned_value.max(floor) {
            break;
        }
        lo /= 10.0;
    }
    // Up to a few times the planned width (or the user's cap): wider pulses only leave the
    // budget further behind, and near the run length the metric loses its meaning.
    let user_cap = s.min_width_ratio.map_or(0.0, |_| cap_width * 1.5);
    let hi = (planned_width * 8.0).max(user_cap);
    let n = n.max(2);
    let mut widths: Vec<f64> = (0..n)
        .map(|k| lo * (hi / lo).powf(k as f64 / (n - 1) as f64))
        .collect();
    widths.push(rule_width);
    widths.push(planned_width);
    widths.sort_by(f64::total_cmp);
    widths.dedup();
    let total = widths.len();
    let mut points = Vec::with_capacity(total);
    for (i, &w) in widths.iter().enumerate() {
        let v = if w == planned_width {
            planned_value
        } else {
            f(w)
        };
        points.push((w, v));
        progress(i + 1, total);
    }
    DesignCurve {
        metric: s.metric,
        points,
        rule_width,
        planned_width,
        planned_value,
        cap_width,
        budget: s.target_error,
        fastest: prep.tau_fast,
    }
}

/// Split a curve where it has no logarithm (zero crossings of the signed error).
fn positive_runs(points: &[(f64, f64)], floor: f64) -> Vec<Vec<(f64, f64)>> {
    let mut out: Vec<Vec<(f64, f64)>> = vec![Vec::new()];
    for &(w, v) in points {
        if v > 0.0 && v.is_finite() && w > 0.0 {
            out.last_mut()
                .expect("at least one run")
                .push((w, v.max(floor)));
        } else if !out.last().is_some_and(Vec::is_empty) {
            out.push(Vec::new());
        }
    }
    out.retain(|r| r.len() >= 2);
    out
}

/// The value at a fraction of an axis's length.
fn along(axis: &Axis, f: f64) -> f64 {
    let (a, b) = (axis.scale.forward(axis.lo), axis.scale.forward(axis.hi));
    axis.scale.inverse(a + f * (b - a))
}

/// The design figure's axes and the floor below which values are drawn at the floor.
fn design_axes(dc: &DesignCurve, extra_curves: &[ExtraCurve]) -> (Axis, Axis, f64) {
    let x = Axis::log(dc.points[0].0, dc.points[dc.points.len() - 1].0);
    let all = dc
        .points
        .iter()
        .map(|p| p.1)
        .chain(
            extra_curves
                .iter()
                .flat_map(|c| c.points.iter().map(|p| p.1)),
        )
        .chain(dc.budget)
        .filter(|v| *v > 0.0 && v.is_finite());
    let (mut vmin, mut vmax) = (f64::INFINITY, 0.0f64);
    for v in all {
        vmin = vmin.min(v);
        vmax = vmax.max(v);
    }
    if !vmin.is_finite() {
        (vmin, vmax) = (1e-6, 1.0);
    }
    // Zero crossings dive towards 0: keep at most ten decades below the top in view.
    let floor = vmin.max(vmax * 1e-10);
    (x, Axis::log(floor / 1.6, vmax * 1.8), floor)
}

/// The design figure. `extra_curves` are drawn too (noise and total, from the bundle).
pub fn design_svg(dc: &DesignCurve, extra_curves: &[ExtraCurve]) -> io::Result<String> {
    let (x, y, floor) = design_axes(dc, extra_curves);
    let title = "Design curve: error against pulse width";
    let sub = format!(
        "{} error (|relative|) of a pulse with edges tied to the width, log–log",
        dc.metric.name()
    );
    let mut meta = Meta::new(title);
    render(640, &mut meta, |root: &Area<'_>, meta: &mut Meta| {
        let body = titled(root, title, &sub)?;
        let mut keys = vec![Key::line(
            PREDICTED,
            3,
            format!("{} error", dc.metric.name()),
        )];
        for (i, c) in extra_curves.iter().enumerate() {
            keys.push(Key::line(EXTRA[i % EXTRA.len()], 3, c.label.clone()));
        }
        if dc.budget.is_some() {
            keys.push(Key::dashed(BUDGET, 2, "8 5", "budget"));
        }
        keys.push(Key::dashed(RULE, 2, "10 4 2 4", "rule-of-thumb width"));
        if shows_fastest(dc, &x) {
            keys.push(Key::dashed(
                MARK,
                1,
                "3 3",
                "fastest time scale of any mode",
            ));
        }
        keys.push(Key::marker(PLANNED, "planned width"));
        keys.push(Key::line(BAND, 12, "wider than the cap"));
        let body = width_legend(&body, &keys, meta)?;
        let mut ch = panel(&body, &width_spec("design", x, y, "|relative error|"), meta)?;
        design_lines(&mut ch, meta, dc, extra_curves, (&x, &y, floor))?;
        design_labels(&mut ch, meta, dc, (&x, &y, floor))
    })
}

/// True when a mode faster than the planned scale has its time scale inside the sweep (it
/// explains a hump there), so the figure marks it.
fn shows_fastest(dc: &DesignCurve, x: &Axis) -> bool {
    dc.fastest < dc.rule_width.max(dc.planned_width) && x.contains(dc.fastest)
}

/// The cap band, the curves, the budget and rule-of-thumb lines and the planned marker.
fn design_lines(
    ch: &mut Chart<'_, '_>,
    meta: &mut Meta,
    dc: &DesignCurve,
    extra_curves: &[ExtraCurve],
    (x, y, floor): (&Axis, &Axis, f64),
) -> io::Result<()> {
    if dc.cap_width < x.hi {
        ch.draw_series(std::iter::once(Rectangle::new(
            [(dc.cap_width.max(x.lo), y.lo), (x.hi, y.hi)],
            BAND.filled(),
        )))
        .map_err(pe)?;
    }
    for (i, c) in extra_curves.iter().enumerate() {
        for run in positive_runs(&c.points, floor) {
            curve(ch, meta, run, EXTRA[i % EXTRA.len()], 3)?;
        }
        meta.series("design", &format!("extra{i}"), EXTRA[i % EXTRA.len()]);
    }
    for run in positive_runs(&dc.points, floor) {
        curve(ch, meta, run, PREDICTED, 3)?;
    }
    meta.series("design", "metric", PREDICTED);
    if let Some(b) = dc.budget {
        segment(ch, meta, (x.lo, b), (x.hi, b), BUDGET, 2)?;
    }
    let rule = (dc.rule_width, y.lo);
    segment(ch, meta, rule, (dc.rule_width, y.hi), RULE, 2)?;
    if shows_fastest(dc, x) {
        meta.dash(MARK, "3 3");
        segment(ch, meta, (dc.fastest, y.lo), (dc.fastest, y.hi), MARK, 1)?;
    }
    let pv = dc.planned_value.max(floor);
    segment(
        ch,
        meta,
        (dc.planned_width, y.lo),
        (dc.planned_width, pv),
        PLANNED,
        1,
    )?;
    marker(ch, meta, (dc.planned_width, pv), 6, PLANNED)?;
    meta.point("design", "planned", dc.planned_width, dc.planned_value);
    Ok(())
}

/// Labels for the planned point, the budget, the rule of thumb and the cap, each where it
/// collides with nothing drawn.
fn design_labels(
    ch: &mut Chart<'_, '_>,
    meta: &mut Meta,
    dc: &DesignCurve,
    (x, y, floor): (&Axis, &Axis, f64),
) -> io::Result<()> {
    let pos = Pos::new;
    let planned = (dc.planned_width, dc.planned_value.max(floor));
    let around = [
        Spot::new(planned, (10, 8), pos(HPos::Left, VPos::Top)),
        Spot::new(planned, (-10, -8), pos(HPos::Right, VPos::Bottom)),
        Spot::new(planned, (10, -8), pos(HPos::Left, VPos::Bottom)),
        Spot::new(planned, (-10, 8), pos(HPos::Right, VPos::Top)),
    ];
    let text = format!(
        "planned {} ({})",
        eng(dc.planned_width, Dim::Time),
        percent_unsigned(dc.planned_value)
    );
    label(ch, meta, &around, &text, PLANNED)?;
    if let Some(b) = dc.budget {
        let spots: Vec<Spot> = [0.0, 0.2, 0.4, 0.6]
            .iter()
            .flat_map(|&f| {
                let at = (along(x, f), b);
                [
                    Spot::new(at, (8, -4), pos(HPos::Left, VPos::Bottom)),
                    Spot::new(at, (8, 4), pos(HPos::Left, VPos::Top)),
                ]
            })
            .collect();
        label(
            ch,
            meta,
            &spots,
            &format!("budget {}", percent_unsigned(b)),
            BUDGET,
        )?;
    }
    let spots: Vec<Spot> = [0.94, 0.75, 0.5, 0.25, 0.06]
        .iter()
        .flat_map(|&f| {
            let at = (dc.rule_width, along(y, f));
            [
                Spot::new(at, (-6, 0), pos(HPos::Right, VPos::Center)),
                Spot::new(at, (6, 0), pos(HPos::Left, VPos::Center)),
            ]
        })
        .collect();
    let text = format!("rule of thumb {}", eng(dc.rule_width, Dim::Time));
    label(ch, meta, &spots, &text, RULE)?;
    mark_labels(ch, meta, dc, (x, y))
}

/// Labels for the fastest time scale (when marked) and the cap.
fn mark_labels(
    ch: &mut Chart<'_, '_>,
    meta: &mut Meta,
    dc: &DesignCurve,
    (x, y): (&Axis, &Axis),
) -> io::Result<()> {
    let pos = Pos::new;
    if shows_fastest(dc, x) {
        let spots: Vec<Spot> = [0.06, 0.25, 0.5, 0.75, 0.94]
            .iter()
            .flat_map(|&f| {
                let at = (dc.fastest, along(y, f));
                [
                    Spot::new(at, (6, 0), pos(HPos::Left, VPos::Center)),
                    Spot::new(at, (-6, 0), pos(HPos::Right, VPos::Center)),
                ]
            })
            .collect();
        let text = format!("fastest time scale {}", eng(dc.fastest, Dim::Time));
        label(ch, meta, &spots, &text, MARK)?;
    }
    if dc.cap_width < x.hi {
        let at = dc.cap_width.max(x.lo);
        let spots = [
            Spot::new((at, y.lo), (6, -6), pos(HPos::Left, VPos::Bottom)),
            Spot::new((at, y.hi), (6, 6), pos(HPos::Left, VPos::Top)),
            Spot::new((at, along(y, 0.5)), (6, 0), pos(HPos::Left, VPos::Center)),
        ];
        label(
            ch,
            meta,
            &spots,
            &format!("cap {}", eng(dc.cap_width, Dim::Time)),
            RULE,
        )?;
    }
    Ok(())
}
