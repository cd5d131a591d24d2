//! The response table as CSV, and atomic file writes.
//!
//! The uniform points after the pulse are evaluated on the library's uniform-grid path
//! (running exponentials per mode, re-anchored exactly; `FreeResponse::uniform`); the points
//! during the pulse and the breakpoints are evaluated one by one, exactly. Numbers are
//! written in their shortest round-trip form (Ryū, Adams 2018) and streamed into a
//! temporary file beside the target, renamed into place at the end.

use crate::network::Network;
use crate::pulse::Trapezoid;
use crate::response::{FreeResponse, Modal};
use std::path::Path;

/// The most log-spaced points the response table adds to its uniform grid.
pub const LOG_POINTS: usize = 4000;

/// Log-spaced times from a thousandth of the fastest time scale (or of the pulse, when that is
/// shorter) to the run: they follow the dynamics, which a uniform grid over a long run may step
/// right over (a microsecond resonance in a ten-second record).
pub fn log_times(net: &Network, pulse: &Trapezoid, run: f64, count: usize) -> Vec<f64> {
    let fast = net.tau_fast().min(pulse.end()).max(run * 1e-15);
    let start = (fast * 1e-3).min(run / 10.0);
    if count < 2 || !(start > 0.0 && run > start) {
        return Vec::new();
    }
    let ratio = (run / start).powf(1.0 / (count - 1) as f64);
    (0..count).map(|k| start * ratio.powi(k as i32)).collect()
}

/// Rows of the response table: t, ideal h(t), y(t)/area, error, h(t − c), aligned error.
///
/// `points` uniform points over [0, run] (at most [`crate::response::MAX_GRID_POINTS`]; more
/// are clamped to it), plus the pulse's breakpoints, 63 points across the pulse, and `extra`
/// times (e.g. [`log_times`]), each evaluated exactly.
pub fn response_rows(
    net: &Network,
    pulse: &Trapezoid,
    run: f64,
    points: usize,
    extra_times: &[f64],
) -> Vec<[f64; 6]> {
    let n = points.clamp(1, crate::response::MAX_GRID_POINTS);
    let span = (n - 1).max(1) as f64;
    let uniform_t = |k: usize| run * k as f64 / span;
    // Honour the breakpoints and resolve the pulse itself.
    let end = pulse.end();
    let mut extra: Vec<f64> = pulse.breakpoints().iter().map(|b| b.0).collect();
    extra.extend((1..64).map(|k| end * k as f64 / 64.0));
    extra.extend_from_slice(extra_times);
    extra.retain(|t| (0.0..=run).contains(t));
    extra.sort_by(f64::total_cmp);
    extra.dedup();
    let modal = Modal::new(net);
    let h = modal.impulse();
    let driven = modal.drive(&pulse.breakpoints());
    let (c, area) = (pulse.centroid(), pulse.area());
    let at = |t: f64| -> [f64; 3] {
        [
            if t > 0.0 { h.at(t) } else { 0.0 },
            driven.at(t) / area,
            if t > c { h.at(t - c) } else { 0.0 },
        ]
    };
    // Columns on the uniform grid: each is a free response from some index on.
    let dt = run / span;
    let first = |pred: &dyn Fn(f64) -> bool| (0..n).find(|&k| pred(uniform_t(k))).unwrap_or(n);
    let grid = |f: &FreeResponse, from: usize| -> Vec<f64> {
        if from >= n {
            return Vec::new();
        }
        f.uniform(uniform_t(from), dt, n - from)
    };
    let k_h = first(&|t| t > 0.0);
    let k_y = first(&|t| t >= end);
    let k_c = first(&|t| t > c);
    let cols = [
        (k_h, grid(&h, k_h)),
        (
            k_y,
            grid(&driven.after_end(), k_y)
                .iter()
                .map(|y| y / area)
                .collect(),
        ),
        (k_c, grid(&h.delayed(c), k_c)),
    ];
    let uniform_row = |k: usize| -> [f64; 3] {
        let direct = at(uniform_t(k));
        let mut v = [0.0; 3];
        for (j, (from, col)) in cols.iter().enumerate() {
            v[j] = if k >= *from { col[k - from] } else { direct[j] };
        }
        v
    };
    let row = |t: f64, v: [f64; 3]| [t, v[0], v[1], v[1] - v[0], v[2], v[1] - v[2]];
    let mut rows = Vec::with_capacity(n + extra.len());
    let mut e = extra.iter().peekable();
    for k in 0..n {
        let t = uniform_t(k);
        while let Some(&&x) = e.peek() {
            if x >= t {
                break;
            }
            rows.push(row(x, at(x)));
            e.next();
        }
        if e.peek().is_some_and(|&&x| x == t) {
            e.next();
        }
        rows.push(row(t, uniform_row(k)));
    }
    rows.extend(e.map(|&x| row(x, at(x))));
    rows
}

/// Write the response CSV atomically (temporary file in the same folder, then rename),
/// streaming the rows through a buffer.
pub fn write_response_csv(path: &Path, rows: &[[f64; 6]]) -> std::io::Result<()> {
    super::files::write_atomic_with(path, &mut |w| {
        w.write_all(b"t,ideal,predicted,error,ideal_aligned,error_aligned\n")?;
        let mut buf = ryu::Buffer::new();
        let mut line = Vec::with_capacity(6 * 25);
        for r in rows {
            line.clear();
            for (i, v) in r.iter().enumerate() {
                if i > 0 {
                    line.push(b',');
                }
                line.extend_from_slice(buf.format(*v).as_bytes());
            }
            line.push(b'\n');
            w.write_all(&line)?;
        }
        Ok(())
    })
}
