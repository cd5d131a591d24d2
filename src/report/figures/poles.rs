//! The pole map: poles (×) and zeros (○) in the s-plane, each mode annotated with its time
//! scales. Poles spread over decades are drawn on symmetric-logarithmic axes.

use super::axis::Axis;
use super::canvas::{
    Area, INK, Key, Meta, RULE, Swatch, label, legend, panel, pe, render, titled, unit_tick,
};
use crate::network::Network;
use crate::units::{Dim, eng};
use plotters::prelude::*;
use plotters::style::text_anchor::{HPos, Pos, VPos};
use std::io;

/// Colour of minor (not significant) poles.
pub const MINOR: RGBColor = RGBColor(0xA4, 0xA9, 0xAF);
/// Colour of zeros.
pub const ZERO: RGBColor = RGBColor(0x2E, 0x7D, 0x4F);

/// Most modes annotated with their time scales before the map only labels the extremes.
const MAX_LABELS: usize = 14;

/// Axes for a set of points: linear when the magnitudes stay within 30×, else asinh.
fn axes(pts: &[(f64, f64)]) -> (Axis, Axis) {
    let mags: Vec<f64> = pts
        .iter()
        .flat_map(|p| [p.0.abs(), p.1.abs()])
        .filter(|v| *v > 0.0)
        .collect();
    let big = mags.iter().copied().fold(0.0, f64::max).max(1e-300);
    let small = mags.iter().copied().fold(f64::INFINITY, f64::min).min(big);
    let xmin = pts.iter().map(|p| p.0).fold(0.0, f64::min);
    let xmax = pts.iter().map(|p| p.0).fold(0.0, f64::max);
    let ymax = pts.iter().map(|p| p.1.abs()).fold(0.0, f64::max);
    if big / small <= 30.0 {
        let span = (xmax - xmin).max(ymax).max(big);
        let ym = if ymax > 0.0 { ymax * 1.25 } else { span * 0.5 };
        (
            Axis::linear(xmin - 0.15 * span, xmax + 0.25 * span),
            Axis::linear(-ym, ym),
        )
    } else {
        let c = small / 2.0;
        let sx = Axis::symlog(xmin, xmax, c);
        let u = |v: f64| sx.scale.forward(v);
        let (ua, ub) = (u(xmin), u(xmax));
        let pad = 0.12 * (ub - ua).max(1.0);
        let x = Axis::symlog(
            sx.scale.inverse(ua - pad),
            sx.scale.inverse(ub + 2.0 * pad),
            c,
        );
        let uy = u(ymax.max(c)) * 1.15 + 0.5;
        let y = Axis::symlog(-sx.scale.inverse(uy), sx.scale.inverse(uy), c);
        (x, y)
    }
}

/// The pole map. `significant` flags each of `net.modes` (default: all significant); minor
/// poles are drawn pale and left unlabelled.
pub fn poles_svg(net: &Network, significant: Option<&[bool]>) -> io::Result<String> {
    let is_sig = |i: usize| significant.and_then(|s| s.get(i).copied()).unwrap_or(true);
    let mut pts: Vec<(f64, f64)> = net.modes.iter().map(|m| (m.pole.re, m.pole.im)).collect();
    pts.extend(net.zeros.iter().map(|z| (z.re, z.im)));
    let (x, y) = axes(&pts);
    let symlog = !matches!(x.scale, super::axis::Scale::Linear);
    let title = "Pole map (s-plane)";
    // Label significant modes where there is room: slowest and fastest first, then the rest,
    // skipping any label that would overlap one already placed (about 150 × 20 px).
    let mut cand: Vec<usize> = (0..net.modes.len())
        .filter(|&i| is_sig(i) && net.modes[i].pole.im >= 0.0)
        .collect();
    cand.sort_by(|&a, &b| {
        net.modes[a]
            .natural_frequency()
            .total_cmp(&net.modes[b].natural_frequency())
    });
    let total = cand.len();
    if total > 2 {
        let fastest = cand.pop().expect("more than two");
        cand.insert(1, fastest);
    }
    let mut labelled: Vec<usize> = Vec::new();
    let mut placed: Vec<(f64, f64)> = Vec::new();
    for i in cand {
        let p = net.modes[i].pole;
        let at = (x.fraction(p.re) * 830.0, y.fraction(p.im) * 520.0);
        if placed
            .iter()
            .all(|q| (q.0 - at.0).abs() > 150.0 || (q.1 - at.1).abs() > 20.0)
            && labelled.len() < MAX_LABELS
        {
            labelled.push(i);
            placed.push(at);
        }
    }
    let all_labelled = labelled.len() == total;
    let sub = format!(
        "{}; τ = 1/|Re p| (decay), 1/|p| (fastest time scale){}",
        if symlog {
            "axes scaled by asinh: linear near 0, logarithmic further out"
        } else {
            "linear axes"
        },
        if all_labelled {
            ""
        } else {
            "; labels where space allows"
        }
    );
    let any_minor = (0..net.modes.len()).any(|i| !is_sig(i));
    let mut meta = Meta::new(title);
    render(680, &mut meta, |root: &Area<'_>, meta: &mut Meta| {
        let body = titled(root, title, &sub)?;
        let mut keys = vec![Key {
            width: 3,
            ..Key::shaped(INK, Swatch::Cross, "pole")
        }];
        if any_minor {
            keys.push(Key::shaped(MINOR, Swatch::Cross, "pole, not significant"));
        }
        if !net.zeros.is_empty() {
            keys.push(Key::shaped(ZERO, Swatch::Ring, "zero"));
        }
        keys.push(Key::line(RULE, 2, "imaginary axis: stability boundary"));
        let body = legend(&body, &keys, meta)?;
        let tick = |v: &f64| unit_tick(*v, "");
        let mut ch = panel(
            &body,
            x,
            y,
            "real part σ (rad/s)",
            "imaginary part ω (rad/s)",
            &tick,
            &tick,
            None,
        )?;
        meta.panel("poles", &ch, &x, &y);
        if x.contains(0.0) {
            super::canvas::segment(&mut ch, (0.0, y.lo), (0.0, y.hi), RULE, 2)?;
        }
        super::canvas::segment(&mut ch, (x.lo, 0.0), (x.hi, 0.0), MINOR, 1)?;
        for z in &net.zeros {
            ch.draw_series(std::iter::once(Circle::new(
                (z.re, z.im),
                7,
                ZERO.stroke_width(2),
            )))
            .map_err(pe)?;
        }
        for (i, m) in net.modes.iter().enumerate() {
            let (colour, w) = if is_sig(i) { (INK, 3) } else { (MINOR, 2) };
            ch.draw_series(std::iter::once(Cross::new(
                (m.pole.re, m.pole.im),
                7,
                colour.stroke_width(w),
            )))
            .map_err(pe)?;
            meta.point(
                "poles",
                if is_sig(i) { "pole" } else { "minor_pole" },
                m.pole.re,
                m.pole.im,
            );
        }
        for &i in &labelled {
            let m = &net.modes[i];
            let mult = if m.multiplicity() > 1 {
                format!(" (×{})", m.multiplicity())
            } else {
                String::new()
            };
            let text = if m.pole.im == 0.0 {
                if m.pole.re == 0.0 {
                    format!("integrator{mult}")
                } else {
                    format!("τ {}{mult}", eng(m.time_constant(), Dim::Time))
                }
            } else {
                let tau = if m.pole.re == 0.0 {
                    "τ ∞".to_string()
                } else {
                    format!("τ {}", eng(m.time_constant(), Dim::Time))
                };
                format!("{tau}, 1/|p| {}{mult}", eng(m.time_scale(), Dim::Time))
            };
            label(
                &mut ch,
                (m.pole.re, m.pole.im),
                (10, -8),
                &text,
                INK,
                Pos::new(HPos::Left, VPos::Bottom),
            )?;
        }
        Ok(())
    })
}
