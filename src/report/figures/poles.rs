//! The pole map: poles (×) and zeros (○) in the s-plane, each mode annotated with its time
//! scales. Poles spread over decades are drawn on symmetric-logarithmic axes; when every pole
//! and zero is real the map is a strip along the real axis.

use super::axis::Axis;
use super::canvas::{
    Area, Chart, INK, Key, Meta, PanelSpec, RULE, Spot, Swatch, block, legend, panel, pe, place,
    render, segment, title_height, title_strip, unit_tick,
};
use crate::network::{Mode, Network};
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
/// Figure heights, px: the full plane, and the strip of an all-real map.
const PLANE_HEIGHT: u32 = 680;
const STRIP_HEIGHT: u32 = 330;

/// The real axis for a set of points: linear when the magnitudes stay within 30×, else asinh
/// (returned with the asinh core, or `None` for linear).
fn real_axis(pts: &[(f64, f64)]) -> (Axis, Option<f64>) {
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
        (Axis::linear(xmin - 0.15 * span, xmax + 0.25 * span), None)
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
        (x, Some(c))
    }
}

/// Both axes: the imaginary one matches the real one's scale, or is a strip of ±1 around
/// ω = 0 when every point is real.
fn axes(pts: &[(f64, f64)]) -> (Axis, Axis, bool) {
    let (x, core) = real_axis(pts);
    let ymax = pts.iter().map(|p| p.1.abs()).fold(0.0, f64::max);
    if ymax == 0.0 {
        return (x, Axis::linear(-1.0, 1.0), true);
    }
    let y = match core {
        None => {
            let ym = ymax * 1.25;
            Axis::linear(-ym, ym)
        }
        Some(c) => {
            let uy = x.scale.forward(ymax.max(c)) * 1.15 + 0.5;
            let top = x.scale.inverse(uy);
            Axis::symlog(-top, top, c)
        }
    };
    (x, y, false)
}

/// Significant modes in the order they are offered a label: slowest and fastest first, then
/// the rest by natural frequency.
fn label_order(net: &Network, is_sig: &dyn Fn(usize) -> bool) -> Vec<usize> {
    let mut cand: Vec<usize> = (0..net.modes.len())
        .filter(|&i| is_sig(i) && net.modes[i].pole.im >= 0.0)
        .collect();
    cand.sort_by(|&a, &b| {
        net.modes[a]
            .natural_frequency()
            .total_cmp(&net.modes[b].natural_frequency())
    });
    if cand.len() > 2 {
        let fastest = cand.pop().expect("more than two");
        cand.insert(1, fastest);
    }
    cand
}

/// The time-scale annotation of a mode.
fn mode_text(m: &Mode) -> String {
    let mult = if m.multiplicity() > 1 {
        format!(" (×{})", m.multiplicity())
    } else {
        String::new()
    };
    if m.pole.im == 0.0 {
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
    }
}

/// The pole map. `significant` flags each of `net.modes` (default: all significant); minor
/// poles are drawn pale and left unlabelled.
pub fn poles_svg(net: &Network, significant: Option<&[bool]>) -> io::Result<String> {
    let is_sig = |i: usize| significant.and_then(|s| s.get(i).copied()).unwrap_or(true);
    let mut pts: Vec<(f64, f64)> = net.modes.iter().map(|m| (m.pole.re, m.pole.im)).collect();
    pts.extend(net.zeros.iter().map(|z| (z.re, z.im)));
    let (x, y, strip) = axes(&pts);
    let title = "Pole map (s-plane)";
    let any_minor = (0..net.modes.len()).any(|i| !is_sig(i));
    let mut meta = Meta::new(title);
    let height = if strip { STRIP_HEIGHT } else { PLANE_HEIGHT };
    render(height, &mut meta, |root: &Area<'_>, meta: &mut Meta| {
        root.fill(&WHITE).map_err(pe)?;
        let (top, body) = root.split_vertically(title_height("sub"));
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
        let mut ch = map_panel(&body, &x, &y, strip, meta)?;
        draw_points(&mut ch, meta, net, &is_sig)?;
        let order = label_order(net, &is_sig);
        let mut labelled = 0;
        for &i in &order {
            if labelled < MAX_LABELS && label_mode(&mut ch, meta, &net.modes[i], strip)? {
                labelled += 1;
            }
        }
        title_strip(&top, title, &subtitle(&x, strip, labelled == order.len()))
    })
}

/// The map's panel, with the stability boundary and the real axis drawn.
fn map_panel<'a, 'b>(
    area: &'a Area<'b>,
    x: &Axis,
    y: &Axis,
    strip: bool,
    meta: &mut Meta,
) -> io::Result<Chart<'a, 'b>> {
    let tick = |v: f64, d: usize| unit_tick(v, "", d);
    let strip_tick = |v: f64, _: usize| if v == 0.0 { "0".into() } else { String::new() };
    let spec = PanelSpec {
        name: "poles",
        x: *x,
        y: *y,
        xdesc: "real part σ (rad/s)",
        ydesc: if strip {
            "ω (rad/s)"
        } else {
            "imaginary part ω (rad/s)"
        },
        xfmt: &tick,
        yfmt: if strip { &strip_tick } else { &tick },
        caption: None,
    };
    let mut ch = panel(area, &spec, meta)?;
    if x.contains(0.0) {
        segment(&mut ch, meta, (0.0, y.lo), (0.0, y.hi), RULE, 2)?;
    }
    segment(&mut ch, meta, (x.lo, 0.0), (x.hi, 0.0), MINOR, 1)?;
    Ok(ch)
}

/// Zeros as rings and poles as crosses (minor poles pale), each keeping labels off it.
fn draw_points(
    ch: &mut Chart<'_, '_>,
    meta: &mut Meta,
    net: &Network,
    is_sig: &dyn Fn(usize) -> bool,
) -> io::Result<()> {
    for z in &net.zeros {
        block(ch, meta, (z.re, z.im), 8);
        ch.draw_series(std::iter::once(Circle::new(
            (z.re, z.im),
            7,
            ZERO.stroke_width(2),
        )))
        .map_err(pe)?;
    }
    for (i, m) in net.modes.iter().enumerate() {
        let (colour, w) = if is_sig(i) { (INK, 3) } else { (MINOR, 2) };
        let at = (m.pole.re, m.pole.im);
        block(ch, meta, at, 8);
        ch.draw_series(std::iter::once(Cross::new(at, 7, colour.stroke_width(w))))
            .map_err(pe)?;
        meta.point(
            "poles",
            if is_sig(i) { "pole" } else { "minor_pole" },
            m.pole.re,
            m.pole.im,
        );
    }
    Ok(())
}

/// Label a mode next to its pole where there is room: beside it in the plane; in a strip,
/// turned upright just above or below it, so crowded poles each keep their own label. False
/// when there is no room.
fn label_mode(ch: &mut Chart<'_, '_>, meta: &mut Meta, m: &Mode, strip: bool) -> io::Result<bool> {
    let at = (m.pole.re, m.pole.im);
    let spots: Vec<Spot> = if strip {
        vec![
            Spot::upright(at, (0, -12), Pos::new(HPos::Left, VPos::Center)),
            Spot::upright(at, (0, 12), Pos::new(HPos::Right, VPos::Center)),
        ]
    } else {
        [(10, HPos::Left), (-10, HPos::Right)]
            .into_iter()
            .flat_map(|(dx, h)| {
                [
                    Spot::new(at, (dx, -10), Pos::new(h, VPos::Bottom)),
                    Spot::new(at, (dx, 10), Pos::new(h, VPos::Top)),
                ]
            })
            .collect()
    };
    place(ch, meta, &spots, &mode_text(m), INK, false)
}

/// The map's subtitle: its scales and whether every significant mode got a label.
fn subtitle(x: &Axis, strip: bool, all_labelled: bool) -> String {
    let scale = if matches!(x.scale, super::axis::Scale::Linear) {
        "linear axes"
    } else {
        "asinh axes: linear near 0, logarithmic further out"
    };
    let (lead, scales) = if strip {
        (
            "every pole and zero is real: a strip along ω = 0; ",
            "τ = 1/|p|",
        )
    } else {
        ("", "τ = 1/|Re p| (decay), 1/|p| (fastest time scale)")
    };
    let rest = if all_labelled {
        ""
    } else {
        "; labels where space allows"
    };
    format!("{lead}{scale}; {scales}{rest}")
}
