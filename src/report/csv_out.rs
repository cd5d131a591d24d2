//! The response table as CSV, and atomic file writes.

use crate::estimate::cursors;
use crate::network::Network;
use crate::pulse::Trapezoid;
use std::io::Write as _;
use std::path::Path;

/// Rows of the response table: t, ideal h(t), y(t)/area, error, h(t − c), aligned error.
pub fn response_rows(net: &Network, pulse: &Trapezoid, run: f64, points: usize) -> Vec<[f64; 6]> {
    let mut times: Vec<f64> = (0..points)
        .map(|k| run * k as f64 / (points - 1).max(1) as f64)
        .collect();
    // Honour the breakpoints and resolve the pulse itself.
    let end = pulse.end();
    times.extend(pulse.breakpoints().iter().map(|b| b.0));
    times.extend((1..64).map(|k| end * k as f64 / 64.0));
    times.retain(|t| *t <= run);
    times.sort_by(f64::total_cmp);
    times.dedup();
    cursors(net, pulse, &times)
        .into_iter()
        .map(|c| {
            [
                c.t,
                c.ideal,
                c.predicted,
                c.predicted - c.ideal,
                c.ideal_aligned,
                c.predicted - c.ideal_aligned,
            ]
        })
        .collect()
}

/// Write the response CSV atomically (temporary file in the same folder, then rename).
pub fn write_response_csv(path: &Path, rows: &[[f64; 6]]) -> std::io::Result<()> {
    let mut buf = Vec::new();
    {
        let mut w = csv::Writer::from_writer(&mut buf);
        w.write_record([
            "t",
            "ideal",
            "predicted",
            "error",
            "ideal_aligned",
            "error_aligned",
        ])?;
        for r in rows {
            w.write_record(r.iter().map(|v| format!("{v:.17e}")))?;
        }
        w.flush()?;
    }
    write_atomic(path, &buf)
}

/// Write bytes to `path` via a temporary sibling and a rename, so no half-written file remains.
pub fn write_atomic(path: &Path, bytes: &[u8]) -> std::io::Result<()> {
    let dir = path
        .parent()
        .filter(|d| !d.as_os_str().is_empty())
        .unwrap_or(Path::new("."));
    let name = path
        .file_name()
        .map(|n| n.to_string_lossy().into_owned())
        .unwrap_or_else(|| "out".into());
    let tmp = dir.join(format!(".{name}.{}.tmp", std::process::id()));
    let result = (|| {
        let mut f = std::fs::File::create(&tmp)?;
        f.write_all(bytes)?;
        f.sync_all()?;
        std::fs::rename(&tmp, path)
    })();
    if result.is_err() {
        let _ = std::fs::remove_file(&tmp);
    }
    result
}
