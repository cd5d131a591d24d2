//! The stimulus: one trapezoid with its amplitude, 50 % width, centroid and 10–90 % edges.
//! Every mark sits within the pulse's own span, from t = 0 to its end.

use super::axis::Axis;
use super::canvas::{
    Area, Chart, INK, MARK, Meta, PLANNED, PREDICTED, PanelSpec, RULE, Spot, curve, label, marker,
    panel, render, segment, time_tick, titled,
};
use crate::pulse::Trapezoid;
use crate::units::Signal;
use crate::units::{Dim, eng, eng_sig};
use plotters::style::text_anchor::{HPos, Pos, VPos};
use std::io;

/// Text for the drive axis.
fn drive_desc(drive: Signal) -> String {
    format!(
        "drive {} ({})",
        if drive == Signal::Voltage {
            "voltage u(t)"
        } else {
            "current i(t)"
        },
        drive.dim().print_symbol()
    )
}

/// A value range around 0 and `a`, with room `below` and `above` (fractions of |a|).
fn level_range(a: f64, below: f64, above: f64) -> Axis {
    if a >= 0.0 {
        Axis::linear(-below * a, above * a)
    } else {
        Axis::linear(above * a, -below * a)
    }
}

/// The drive axis of the stimulus panels: its description and tick labels.
struct Level<'s> {
    desc: &'s str,
    tick: &'s dyn Fn(f64, usize) -> String,
}

/// A panel of the drive level against time t, with an optional caption above it.
fn level_panel<'a, 'b>(
    area: &'a Area<'b>,
    name: &str,
    (x, y): (Axis, Axis),
    level: &Level<'_>,
    caption: Option<&str>,
    meta: &mut Meta,
) -> io::Result<Chart<'a, 'b>> {
    let spec = PanelSpec {
        name,
        x,
        y,
        xdesc: "time t (s)",
        ydesc: level.desc,
        xfmt: &time_tick,
        yfmt: level.tick,
        caption,
    };
    panel(area, &spec, meta)
}

/// The pulse over its own duration, with the generator figures marked, and the rising and
/// falling edges enlarged below it so the 10–90 % transition durations can be read.
pub fn stimulus_svg(pulse: &Trapezoid, drive: Signal) -> io::Result<String> {
    let dim = drive.dim();
    let title = "Stimulus: the pulse";
    let sub = format!(
        "amplitude {}, width (50 %) {}, rise/fall 10–90 % {} / {}, centroid {}",
        eng(pulse.amplitude, dim),
        eng(pulse.width_50(), Dim::Time),
        eng(pulse.rise_10_90(), Dim::Time),
        eng(pulse.fall_10_90(), Dim::Time),
        eng(pulse.centroid(), Dim::Time)
    );
    let mut meta = Meta::new(title);
    let ytick = move |v: f64, d: usize| eng_sig(v, dim, d);
    let ydesc = drive_desc(drive);
    render(700, &mut meta, |root: &Area<'_>, meta: &mut Meta| {
        let body = titled(root, title, &sub)?;
        let (top, bottom) = body.split_vertically(360);
        let (left, right) = bottom.split_horizontally(super::canvas::WIDTH as i32 / 2);
        let level = Level {
            desc: &ydesc,
            tick: &ytick,
        };
        whole_pulse(&top, pulse, drive, &level, meta)?;
        edge_panel(&left, pulse, true, &level, meta)?;
        edge_panel(&right, pulse, false, &level, meta)?;
        Ok(())
    })
}

/// The whole pulse with its amplitude, 50 % width, centroid and 10 %/90 % points.
fn whole_pulse(
    area: &Area<'_>,
    pulse: &Trapezoid,
    drive: Signal,
    level: &Level<'_>,
    meta: &mut Meta,
) -> io::Result<()> {
    let a = pulse.amplitude;
    let end = pulse.end();
    let (tr, flat, tf) = (pulse.rise, pulse.flat, pulse.fall);
    let (t50r, t50f, c) = (tr / 2.0, tr + flat + tf / 2.0, pulse.centroid());
    let x = Axis::linear(-0.1 * end, 1.1 * end);
    let y = level_range(a, 0.08, 1.25);
    let mut ch = level_panel(area, "pulse", (x, y), level, None, meta)?;
    meta.series("pulse", "u", PREDICTED);
    meta.dash(RULE, "2 4");
    let mut shape = vec![(x.lo, 0.0)];
    shape.extend(pulse.breakpoints());
    shape.push((x.hi, 0.0));
    curve(&mut ch, meta, shape, PREDICTED, 3)?;
    // Amplitude: a bracket from 0 to A inside the flat top, between the centroid and the fall.
    let ta = c + 0.6 * (tr + flat - c);
    bracket(&mut ch, meta, (ta, 0.0), (ta, a), (0.012 * end, 0.0), MARK)?;
    // 50 % width and centroid.
    bracket(
        &mut ch,
        meta,
        (t50r, a / 2.0),
        (t50f, a / 2.0),
        (0.0, 0.06 * a),
        PLANNED,
    )?;
    segment(&mut ch, meta, (c, 0.0), (c, 1.1 * a), RULE, 2)?;
    for t in [
        0.1 * tr,
        0.9 * tr,
        tr + flat + 0.1 * tf,
        tr + flat + 0.9 * tf,
    ] {
        marker(&mut ch, meta, (t, pulse.value(t)), 4, MARK)?;
    }
    meta.point("pulse", "centroid", c, 0.0);
    meta.point("pulse", "width50_start", t50r, a / 2.0);
    meta.point("pulse", "width50_end", t50f, a / 2.0);
    pulse_labels(&mut ch, meta, pulse, drive, ta)
}

/// Labels for the whole pulse's amplitude (beside its bracket at `ta`), 50 % width and
/// centroid.
fn pulse_labels(
    ch: &mut Chart<'_, '_>,
    meta: &mut Meta,
    pulse: &Trapezoid,
    drive: Signal,
    ta: f64,
) -> io::Result<()> {
    let a = pulse.amplitude;
    let (t50r, c) = (pulse.rise / 2.0, pulse.centroid());
    let dim = drive.dim();
    let (up, down) = (VPos::Bottom, VPos::Top);
    let (above, below) = if a >= 0.0 { (up, down) } else { (down, up) };
    let side = |at, dx: i32, h: HPos, v: VPos| Spot::new(at, (dx, 0), Pos::new(h, v));
    label(
        ch,
        meta,
        &[
            side((ta, 0.75 * a), -8, HPos::Right, VPos::Center),
            side((ta, 0.75 * a), 8, HPos::Left, VPos::Center),
            side((ta, 0.3 * a), -8, HPos::Right, VPos::Center),
        ],
        &format!("amplitude {}", eng(a, dim)),
        INK,
    )?;
    label(
        ch,
        meta,
        &[
            Spot::new(
                ((t50r + c) / 2.0, a / 2.0),
                (0, -8),
                Pos::new(HPos::Center, above),
            ),
            Spot::new(
                ((t50r + c) / 2.0, a / 2.0),
                (0, 8),
                Pos::new(HPos::Center, below),
            ),
        ],
        &format!("width (50 %) {}", eng(pulse.width_50(), Dim::Time)),
        PLANNED,
    )?;
    label(
        ch,
        meta,
        &[
            side((c, 0.22 * a), 8, HPos::Left, VPos::Center),
            side((c, 0.22 * a), -8, HPos::Right, VPos::Center),
        ],
        &format!("centroid {}", eng(c, Dim::Time)),
        INK,
    )?;
    Ok(())
}

/// A dimension line from `a` to `b` with end caps of half-extent `cap` (data units, x and y).
fn bracket(
    ch: &mut Chart<'_, '_>,
    meta: &mut Meta,
    a: (f64, f64),
    b: (f64, f64),
    cap: (f64, f64),
    colour: plotters::style::RGBColor,
) -> io::Result<()> {
    segment(ch, meta, a, b, colour, 2)?;
    for p in [a, b] {
        segment(
            ch,
            meta,
            (p.0 - cap.0, p.1 - cap.1),
            (p.0 + cap.0, p.1 + cap.1),
            colour,
            2,
        )?;
    }
    Ok(())
}

/// One enlarged edge with its 10 % and 90 % crossings and the transition duration.
fn edge_panel(
    area: &Area<'_>,
    pulse: &Trapezoid,
    rising: bool,
    level: &Level<'_>,
    meta: &mut Meta,
) -> io::Result<()> {
    let a = pulse.amplitude;
    let ramp = if rising { pulse.rise } else { pulse.fall };
    let span = ramp.max(pulse.width_50() * 1e-3);
    let t0 = if rising { 0.0 } else { pulse.rise + pulse.flat };
    let x = Axis::linear(t0 - 0.5 * span, t0 + ramp + 0.5 * span);
    let y = level_range(a, 0.3, 1.15);
    let name = if rising { "rise" } else { "fall" };
    let d1090 = if rising {
        pulse.rise_10_90()
    } else {
        pulse.fall_10_90()
    };
    let caption = format!(
        "{} edge: 10–90 % {}",
        if rising { "rising" } else { "falling" },
        eng(d1090, Dim::Time)
    );
    let mut ch = level_panel(area, name, (x, y), level, Some(&caption), meta)?;
    let mut pts = vec![(x.lo, pulse.value(x.lo))];
    pts.extend(pulse.breakpoints().into_iter().filter(|p| x.contains(p.0)));
    pts.push((x.hi, pulse.value(x.hi)));
    pts.sort_by(|p, q| p.0.total_cmp(&q.0));
    curve(&mut ch, meta, pts, PREDICTED, 3)?;
    for lvl in [0.1, 0.9] {
        segment(&mut ch, meta, (x.lo, lvl * a), (x.hi, lvl * a), RULE, 1)?;
    }
    edge_marks(&mut ch, meta, pulse, rising, (t0, ramp, d1090), &x)
}

/// The marks of an edge panel: crossings, the 10–90 % and full-ramp durations, level labels.
fn edge_marks(
    ch: &mut Chart<'_, '_>,
    meta: &mut Meta,
    pulse: &Trapezoid,
    rising: bool,
    (t0, ramp, d1090): (f64, f64, f64),
    x: &Axis,
) -> io::Result<()> {
    let a = pulse.amplitude;
    let (first, second) = (t0 + 0.1 * ramp, t0 + 0.9 * ramp);
    for t in [first, second] {
        marker(ch, meta, (t, pulse.value(t)), 4, MARK)?;
    }
    let (yb, yr) = (0.5 * a, -0.15 * a);
    segment(ch, meta, (first, yb), (second, yb), PLANNED, 2)?;
    for t in [first, second] {
        segment(ch, meta, (t, 0.1 * a), (t, 0.9 * a), PLANNED, 1)?;
    }
    bracket(ch, meta, (t0, yr), (t0 + ramp, yr), (0.0, 0.05 * a), MARK)?;
    // Labels on the side where the pulse is at zero, clear of the edge.
    let (lx, h, dx) = if rising {
        (x.lo, HPos::Left, 4)
    } else {
        (x.hi, HPos::Right, -4)
    };
    let (up, down) = if a >= 0.0 {
        (VPos::Bottom, VPos::Top)
    } else {
        (VPos::Top, VPos::Bottom)
    };
    for (lvl, txt) in [(0.1, "10 %"), (0.9, "90 %")] {
        let spots = [
            Spot::new((lx, lvl * a), (dx, -4), Pos::new(h, up)),
            Spot::new((lx, lvl * a), (dx, 4), Pos::new(h, down)),
        ];
        label(ch, meta, &spots, txt, RULE)?;
    }
    let (beside, out) = if rising {
        (second, (HPos::Left, 10))
    } else {
        (first, (HPos::Right, -10))
    };
    let (ramp_end, far) = if rising {
        (t0 + ramp, t0)
    } else {
        (t0, t0 + ramp)
    };
    let at = |t: f64, v: f64| Spot::new((t, v), (out.1, 0), Pos::new(out.0, VPos::Center));
    let back = |t: f64, v: f64| Spot::new((t, v), (-out.1, 0), Pos::new(flip(out.0), VPos::Center));
    label(
        ch,
        meta,
        &[
            at(beside, yb),
            back(if rising { first } else { second }, yb),
        ],
        &format!("10–90 % {}", eng(d1090, Dim::Time)),
        PLANNED,
    )?;
    label(
        ch,
        meta,
        &[at(ramp_end, yr), back(far, yr)],
        &format!("full ramp {}", eng(ramp, Dim::Time)),
        MARK,
    )?;
    Ok(())
}

fn flip(h: HPos) -> HPos {
    match h {
        HPos::Left => HPos::Right,
        HPos::Right => HPos::Left,
        HPos::Center => HPos::Center,
    }
}
