//! The stimulus: one trapezoid with its amplitude, 50 % width, centroid and 10–90 % edges.

use super::axis::Axis;
use super::canvas::{
    Area, INK, MARK, Meta, PLANNED, PREDICTED, RULE, curve, label, panel, pe, render, segment,
    time_tick, titled,
};
use crate::pulse::Trapezoid;
use crate::units::Signal;
use crate::units::{Dim, eng, eng_sig};
use plotters::prelude::*;
use plotters::style::text_anchor::{HPos, Pos, VPos};
use std::io;

/// The pulse over its own duration, with the generator figures marked, and the rising and
/// falling edges enlarged below it so the 10–90 % transition durations can be read.
pub fn stimulus_svg(pulse: &Trapezoid, drive: Signal) -> io::Result<String> {
    let dim = drive.dim();
    let a = pulse.amplitude;
    let end = pulse.end();
    let (tr, flat, tf) = (pulse.rise, pulse.flat, pulse.fall);
    let t50r = tr / 2.0;
    let t50f = tr + flat + tf / 2.0;
    let c = pulse.centroid();
    let title = "Stimulus: the planned pulse";
    let sub = format!(
        "amplitude {}, width (50 %) {}, rise/fall 10–90 % {} / {}, centroid {}",
        eng(a, dim),
        eng(pulse.width_50(), Dim::Time),
        eng(pulse.rise_10_90(), Dim::Time),
        eng(pulse.fall_10_90(), Dim::Time),
        eng(c, Dim::Time)
    );
    let mut meta = Meta::new(title);
    let ytick = move |v: &f64| eng_sig(*v, dim, 3);
    let ydesc = format!(
        "drive {} ({})",
        if drive == Signal::Voltage {
            "voltage u(t)"
        } else {
            "current i(t)"
        },
        dim.print_symbol()
    );
    let (ylo, yhi) = if a >= 0.0 {
        (-0.08 * a, 1.25 * a)
    } else {
        (1.25 * a, -0.08 * a)
    };
    let shape: Vec<(f64, f64)> = {
        let mut v = vec![(-0.1 * end, 0.0)];
        v.extend(pulse.breakpoints());
        v.push((end * 1.1, 0.0));
        v
    };
    render(700, &mut meta, |root: &Area<'_>, meta: &mut Meta| {
        let body = titled(root, title, &sub)?;
        let (top, bottom) = body.split_vertically(360);
        let (left, right) = bottom.split_horizontally(super::canvas::WIDTH as i32 / 2);

        // Whole pulse.
        let x = Axis::linear(-0.1 * end, 1.1 * end);
        let y = Axis::linear(ylo, yhi);
        let mut ch = panel(&top, x, y, "time t (s)", &ydesc, &time_tick, &ytick, None)?;
        meta.panel("pulse", &ch, &x, &y);
        meta.series("pulse", "u", PREDICTED);
        meta.dash(RULE, "2 4");
        curve(&mut ch, shape.clone(), PREDICTED, 3)?;
        // Amplitude: a bracket from 0 to A left of the pulse.
        let xa = -0.05 * end;
        segment(&mut ch, (xa, 0.0), (xa, a), MARK, 2)?;
        for yv in [0.0, a] {
            segment(
                &mut ch,
                (xa - 0.012 * end, yv),
                (xa + 0.012 * end, yv),
                MARK,
                2,
            )?;
        }
        label(
            &mut ch,
            ((t50r + c) / 2.0, a),
            (0, -8),
            &format!("amplitude {}", eng(a, dim)),
            INK,
            Pos::new(HPos::Center, VPos::Bottom),
        )?;
        // 50 % width.
        segment(&mut ch, (t50r, a / 2.0), (t50f, a / 2.0), PLANNED, 2)?;
        for t in [t50r, t50f] {
            segment(&mut ch, (t, 0.44 * a), (t, 0.56 * a), PLANNED, 2)?;
        }
        label(
            &mut ch,
            ((t50r + c) / 2.0, a / 2.0),
            (0, -6),
            &format!("width (50 %) {}", eng(pulse.width_50(), Dim::Time)),
            PLANNED,
            Pos::new(HPos::Center, VPos::Bottom),
        )?;
        // Centroid.
        segment(&mut ch, (c, 0.0), (c, 1.1 * a), RULE, 2)?;
        label(
            &mut ch,
            (c, 0.22 * a),
            (8, 0),
            &format!("centroid {}", eng(c, Dim::Time)),
            INK,
            Pos::new(HPos::Left, VPos::Center),
        )?;
        meta.point("pulse", "centroid", c, 0.0);
        meta.point("pulse", "width50_start", t50r, a / 2.0);
        meta.point("pulse", "width50_end", t50f, a / 2.0);
        // 10 % and 90 % points on both edges.
        let edge_pts = [
            0.1 * tr,
            0.9 * tr,
            tr + flat + 0.1 * tf,
            tr + flat + 0.9 * tf,
        ];
        ch.draw_series(
            edge_pts
                .iter()
                .map(|&t| Circle::new((t, pulse.value(t)), 4, MARK.filled())),
        )
        .map_err(pe)?;

        edge_panel(&left, pulse, true, &ydesc, &ytick, meta)?;
        edge_panel(&right, pulse, false, &ydesc, &ytick, meta)?;
        Ok(())
    })
}

/// One enlarged edge with its 10 % and 90 % crossings and the transition duration.
fn edge_panel(
    area: &Area<'_>,
    pulse: &Trapezoid,
    rising: bool,
    ydesc: &str,
    ytick: &dyn Fn(&f64) -> String,
    meta: &mut Meta,
) -> io::Result<()> {
    let a = pulse.amplitude;
    let ramp = if rising { pulse.rise } else { pulse.fall };
    let span = ramp.max(pulse.width_50() * 1e-3);
    let t0 = if rising { 0.0 } else { pulse.rise + pulse.flat };
    let x = Axis::linear(t0 - 0.5 * span, t0 + ramp + 0.5 * span);
    let (ylo, yhi) = if a >= 0.0 {
        (-0.3 * a, 1.15 * a)
    } else {
        (1.15 * a, -0.3 * a)
    };
    let y = Axis::linear(ylo, yhi);
    let name = if rising { "rise" } else { "fall" };
    let caption = if rising {
        format!(
            "rising edge: 10–90 % {}",
            eng(pulse.rise_10_90(), Dim::Time)
        )
    } else {
        format!(
            "falling edge: 10–90 % {}",
            eng(pulse.fall_10_90(), Dim::Time)
        )
    };
    let mut ch = panel(
        area,
        x,
        y,
        "time t (s)",
        ydesc,
        &time_tick,
        ytick,
        Some(&caption),
    )?;
    meta.panel(name, &ch, &x, &y);
    let mut pts = vec![(x.lo, pulse.value(x.lo))];
    pts.extend(pulse.breakpoints().into_iter().filter(|p| x.contains(p.0)));
    pts.push((x.hi, pulse.value(x.hi)));
    pts.sort_by(|p, q| p.0.total_cmp(&q.0));
    curve(&mut ch, pts, PREDICTED, 3)?;
    let (t10, t90) = if rising {
        (t0 + 0.1 * ramp, t0 + 0.9 * ramp)
    } else {
        (t0 + 0.9 * ramp, t0 + 0.1 * ramp)
    };
    // Level labels on the side where the pulse is at zero, clear of the edge.
    let (lx, lpos, loff) = if rising {
        (x.lo, Pos::new(HPos::Left, VPos::Bottom), (4, -4))
    } else {
        (x.hi, Pos::new(HPos::Right, VPos::Bottom), (-4, -4))
    };
    for (lvl, txt) in [(0.1, "10 %"), (0.9, "90 %")] {
        segment(&mut ch, (x.lo, lvl * a), (x.hi, lvl * a), RULE, 1)?;
        label(&mut ch, (lx, lvl * a), loff, txt, RULE, lpos)?;
    }
    let (first, second) = (t10.min(t90), t10.max(t90));
    ch.draw_series(
        [t10, t90]
            .iter()
            .map(|&t| Circle::new((t, pulse.value(t)), 4, MARK.filled())),
    )
    .map_err(pe)?;
    // The 10–90 % transition duration, between the crossings.
    let yb = 0.5 * a;
    segment(&mut ch, (first, yb), (second, yb), PLANNED, 2)?;
    for t in [first, second] {
        segment(&mut ch, (t, 0.1 * a), (t, 0.9 * a), PLANNED, 1)?;
    }
    let (anchor, off) = if rising {
        (Pos::new(HPos::Left, VPos::Center), (10, 0))
    } else {
        (Pos::new(HPos::Right, VPos::Center), (-10, 0))
    };
    let (at, at_ramp) = if rising {
        (second, t0 + ramp)
    } else {
        (first, t0)
    };
    let d1090 = if rising {
        pulse.rise_10_90()
    } else {
        pulse.fall_10_90()
    };
    label(
        &mut ch,
        (at, yb),
        off,
        &format!("10–90 % {}", eng(d1090, Dim::Time)),
        PLANNED,
        anchor,
    )?;
    // The full 0–100 % ramp, below the baseline.
    let yr = -0.15 * a;
    segment(&mut ch, (t0, yr), (t0 + ramp, yr), MARK, 2)?;
    for t in [t0, t0 + ramp] {
        segment(&mut ch, (t, yr - 0.05 * a), (t, yr + 0.05 * a), MARK, 2)?;
    }
    label(
        &mut ch,
        (at_ramp, yr),
        off,
        &format!("full ramp {}", eng(ramp, Dim::Time)),
        MARK,
        anchor,
    )?;
    Ok(())
}
