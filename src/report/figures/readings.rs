//! The fit reading's figure: predicted uncertainty against pulse width for the three readings
//! at the fit plan's test time (raw and aligned: bias + 95 % noise; fit: its 95 % Cramér–Rao
//! interval), with the budget, the rule-of-thumb, budget-plan and fit-plan widths.

use super::axis::Axis;
use super::canvas::{
    ALIGNED, Area, BUDGET, Chart, EXTRA, Key, Meta, PLANNED, PREDICTED, RULE, Spot, curve, label,
    marker, panel, render, segment, titled, width_legend, width_spec,
};
use crate::fitplan::{FitPlan, Which};
use crate::units::{Dim, eng, percent_unsigned};
use plotters::style::text_anchor::{HPos, Pos, VPos};
use std::io;

const FIT: plotters::style::RGBColor = EXTRA[0];

fn axes(fp: &FitPlan) -> (Axis, Axis) {
    let c = &fp.curve;
    let mut xs: Vec<f64> = c.widths.clone();
    xs.extend(fp.comparison.iter().map(|r| r.width));
    let (xlo, xhi) = xs
        .iter()
        .fold((f64::INFINITY, 0.0f64), |(a, b), &v| (a.min(v), b.max(v)));
    let ys = c
        .raw
        .iter()
        .chain(c.aligned.iter().flatten())
        .chain(&c.fit)
        .chain(std::iter::once(&fp.budget))
        .copied()
        .filter(|v| *v > 0.0 && v.is_finite());
    let (mut lo, mut hi) = ys.fold((f64::INFINITY, 0.0f64), |(a, b), v| (a.min(v), b.max(v)));
    if !lo.is_finite() {
        (lo, hi) = (1e-6, 1.0);
    }
    let lo = lo.max(hi * 1e-12);
    (
        Axis::log(xlo / 1.3, xhi * 1.3),
        Axis::log(lo / 1.6, hi * 1.8),
    )
}

fn points(xs: &[f64], ys: &[f64], y: &Axis) -> Vec<(f64, f64)> {
    xs.iter()
        .zip(ys)
        .filter(|(_, v)| v.is_finite() && **v > 0.0)
        .map(|(&w, &v)| (w, y.clamp(v)))
        .collect()
}

/// The figure.
pub fn readings_svg(fp: &FitPlan) -> io::Result<String> {
    let (x, y) = axes(fp);
    let title = "Readings compared: predicted uncertainty against pulse width";
    let sub = format!(
        "relative, at the fit plan's test time {}: raw and aligned bias + 95 % noise, the fit's 95 % interval; log–log",
        eng(fp.curve.test_time, Dim::Time)
    );
    let mut meta = Meta::new(title);
    render(640, &mut meta, |root: &Area<'_>, meta: &mut Meta| {
        let body = titled(root, title, &sub)?;
        let body = width_legend(&body, &keys(fp), meta)?;
        let spec = width_spec("readings", x, y, "relative uncertainty");
        let mut ch = panel(&body, &spec, meta)?;
        reading_curves(&mut ch, meta, fp, &y)?;
        segment(
            &mut ch,
            meta,
            (x.lo, fp.budget),
            (x.hi, fp.budget),
            BUDGET,
            2,
        )?;
        plan_marks(&mut ch, meta, fp, &y)?;
        plan_labels(&mut ch, meta, fp, &y)?;
        budget_label(&mut ch, meta, fp, &x)
    })
}

/// The legend: the three readings, the budget, the rule-of-thumb width and the fit plan.
fn keys(fp: &FitPlan) -> Vec<Key> {
    let mut keys = vec![Key::line(PREDICTED, 3, "raw reading")];
    if fp.curve.aligned.is_some() {
        keys.push(Key::line(ALIGNED, 3, "aligned reading"));
    }
    keys.push(Key::line(FIT, 3, "modal fit (Cramér–Rao)"));
    keys.push(Key::dashed(BUDGET, 2, "8 5", "budget"));
    keys.push(Key::dashed(RULE, 2, "10 4 2 4", "rule-of-thumb width"));
    keys.push(Key::marker(PLANNED, "fit plan"));
    keys
}

/// The raw, aligned and fit curves against width.
fn reading_curves(
    ch: &mut Chart<'_, '_>,
    meta: &mut Meta,
    fp: &FitPlan,
    y: &Axis,
) -> io::Result<()> {
    let c = &fp.curve;
    curve(ch, meta, points(&c.widths, &c.raw, y), PREDICTED, 3)?;
    meta.series("readings", "raw", PREDICTED);
    if let Some(a) = &c.aligned {
        curve(ch, meta, points(&c.widths, a, y), ALIGNED, 3)?;
        meta.series("readings", "aligned", ALIGNED);
    }
    curve(ch, meta, points(&c.fit_widths, &c.fit, y), FIT, 3)?;
    meta.series("readings", "fit", FIT);
    Ok(())
}

/// The rule-of-thumb width as a vertical line, the budget and fit plans as markers.
fn plan_marks(ch: &mut Chart<'_, '_>, meta: &mut Meta, fp: &FitPlan, y: &Axis) -> io::Result<()> {
    for r in &fp.comparison {
        let v = y.clamp(r.at_equal_time.max(y.lo));
        match r.plan {
            Which::RuleOfThumb => {
                segment(ch, meta, (r.width, y.lo), (r.width, y.hi), RULE, 2)?;
            }
            Which::Budget => marker(ch, meta, (r.width, v), 5, PREDICTED)?,
            Which::Fit => {
                marker(ch, meta, (r.width, v), 6, PLANNED)?;
                meta.point("readings", "fit-plan", r.width, r.at_equal_time);
            }
        }
    }
    Ok(())
}

/// The budget and fit plans' labels (width and interval) beside their markers.
fn plan_labels(ch: &mut Chart<'_, '_>, meta: &mut Meta, fp: &FitPlan, y: &Axis) -> io::Result<()> {
    let pos = Pos::new;
    for r in &fp.comparison {
        let v = y.clamp(r.at_equal_time.max(y.lo));
        let (name, colour) = match r.plan {
            Which::RuleOfThumb => continue,
            Which::Budget => ("budget plan", PREDICTED),
            Which::Fit => ("fit plan", PLANNED),
        };
        let text = format!(
            "{name} {} (±{})",
            eng(r.width, Dim::Time),
            percent_unsigned(r.at_equal_time)
        );
        let spots = [
            Spot::new((r.width, v), (10, 8), pos(HPos::Left, VPos::Top)),
            Spot::new((r.width, v), (-10, -8), pos(HPos::Right, VPos::Bottom)),
            Spot::new((r.width, v), (10, -8), pos(HPos::Left, VPos::Bottom)),
            Spot::new((r.width, v), (-10, 8), pos(HPos::Right, VPos::Top)),
        ];
        label(ch, meta, &spots, &text, colour)?;
    }
    Ok(())
}

/// The budget line's label at its left end.
fn budget_label(ch: &mut Chart<'_, '_>, meta: &mut Meta, fp: &FitPlan, x: &Axis) -> io::Result<()> {
    let pos = Pos::new;
    let b = (x.lo, fp.budget);
    label(
        ch,
        meta,
        &[
            Spot::new(b, (8, -4), pos(HPos::Left, VPos::Bottom)),
            Spot::new(b, (8, 4), pos(HPos::Left, VPos::Top)),
        ],
        &format!("budget {}", percent_unsigned(fp.budget)),
        BUDGET,
    )?;
    Ok(())
}
