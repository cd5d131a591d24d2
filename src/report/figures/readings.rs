//! The fit reading's figure: predicted uncertainty against pulse width for the three readings
//! at the fit plan's test time (raw and aligned: bias + 95 % noise; fit: its 95 % Cramér–Rao
//! interval), with the budget, the rule-of-thumb, budget-plan and fit-plan widths.

use super::axis::Axis;
use super::canvas::{
    ALIGNED, Area, BUDGET, EXTRA, Key, Meta, PLANNED, PREDICTED, PanelSpec, RULE, Spot, curve,
    label, legend, marker, panel, percent_tick, render, segment, time_tick, titled,
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
        let mut keys = vec![Key::line(PREDICTED, 3, "raw reading")];
        if fp.curve.aligned.is_some() {
            keys.push(Key::line(ALIGNED, 3, "aligned reading"));
        }
        keys.push(Key::line(FIT, 3, "modal fit (Cramér–Rao)"));
        keys.push(Key::dashed(BUDGET, 2, "8 5", "budget"));
        keys.push(Key::dashed(RULE, 2, "10 4 2 4", "rule-of-thumb width"));
        keys.push(Key::marker(PLANNED, "fit plan"));
        let body = legend(&body, &keys, meta)?;
        meta.dash(BUDGET, "8 5");
        meta.dash(RULE, "10 4 2 4");
        let spec = PanelSpec {
            name: "readings",
            x,
            y,
            xdesc: "pulse width at 50 % (s)",
            ydesc: "relative uncertainty",
            xfmt: &time_tick,
            yfmt: &percent_tick,
            caption: None,
        };
        let mut ch = panel(&body, &spec, meta)?;
        let c = &fp.curve;
        curve(&mut ch, meta, points(&c.widths, &c.raw, &y), PREDICTED, 3)?;
        meta.series("readings", "raw", PREDICTED);
        if let Some(a) = &c.aligned {
            curve(&mut ch, meta, points(&c.widths, a, &y), ALIGNED, 3)?;
            meta.series("readings", "aligned", ALIGNED);
        }
        curve(&mut ch, meta, points(&c.fit_widths, &c.fit, &y), FIT, 3)?;
        meta.series("readings", "fit", FIT);
        segment(
            &mut ch,
            meta,
            (x.lo, fp.budget),
            (x.hi, fp.budget),
            BUDGET,
            2,
        )?;
        let pos = Pos::new;
        for r in &fp.comparison {
            let v = y.clamp(r.at_equal_time.max(y.lo));
            match r.plan {
                Which::RuleOfThumb => {
                    segment(&mut ch, meta, (r.width, y.lo), (r.width, y.hi), RULE, 2)?;
                }
                Which::Budget => marker(&mut ch, meta, (r.width, v), 5, PREDICTED)?,
                Which::Fit => {
                    marker(&mut ch, meta, (r.width, v), 6, PLANNED)?;
                    meta.point("readings", "fit-plan", r.width, r.at_equal_time);
                }
            }
        }
        for r in &fp.comparison {
            let v = y.clamp(r.at_equal_time.max(y.lo));
            let (text, colour) = match r.plan {
                Which::RuleOfThumb => continue,
                Which::Budget => (
                    format!(
                        "budget plan {} (±{})",
                        eng(r.width, Dim::Time),
                        percent_unsigned(r.at_equal_time)
                    ),
                    PREDICTED,
                ),
                Which::Fit => (
                    format!(
                        "fit plan {} (±{})",
                        eng(r.width, Dim::Time),
                        percent_unsigned(r.at_equal_time)
                    ),
                    PLANNED,
                ),
            };
            let spots = [
                Spot::new((r.width, v), (10, 8), pos(HPos::Left, VPos::Top)),
                Spot::new((r.width, v), (-10, -8), pos(HPos::Right, VPos::Bottom)),
                Spot::new((r.width, v), (10, -8), pos(HPos::Left, VPos::Bottom)),
                Spot::new((r.width, v), (-10, 8), pos(HPos::Right, VPos::Top)),
            ];
            label(&mut ch, meta, &spots, &text, colour)?;
        }
        let b = (x.lo, fp.budget);
        label(
            &mut ch,
            meta,
            &[
                Spot::new(b, (8, -4), pos(HPos::Left, VPos::Bottom)),
                Spot::new(b, (8, 4), pos(HPos::Left, VPos::Top)),
            ],
            &format!("budget {}", percent_unsigned(fp.budget)),
            BUDGET,
        )?;
        Ok(())
    })
}
