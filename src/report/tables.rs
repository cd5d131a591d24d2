//! Cells and lines that the text and HTML reports share: the modes table's cells and the
//! bench summary.

use super::words::with_unit;
use crate::network::{Mode, Network};
use crate::units::{Dim, eng};

/// The display cells every modes table shares: residues (joined, in the caller's complex
/// format), the time constant and the damping ratio.
pub(crate) fn mode_cells(
    net: &Network,
    m: &Mode,
    complex: fn(num_complex::Complex64) -> String,
) -> [String; 3] {
    let residues = if net.residues_known {
        m.residues
            .iter()
            .map(|&r| complex(r))
            .collect::<Vec<_>>()
            .join(", ")
    } else {
        "unknown".to_string()
    };
    let tau = if m.pole.re != 0.0 {
        eng(m.time_constant(), Dim::Time)
    } else {
        "∞".into()
    };
    let zeta = m.damping().map_or("–".into(), |d| format!("{d:.4}"));
    [residues, tau, zeta]
}

/// The bench summary as (label, sentence) pairs, shared by the text and HTML reports.
pub(crate) fn bench_lines(
    sc: &crate::scenario::Scenario,
    b: &crate::bench::BenchPlan,
) -> Vec<(&'static str, String)> {
    use crate::units::{eng_plain, percent_unsigned, plain};
    let dim = sc.drive.dim();
    let a = &b.amplitude;
    let mut lines = Vec::new();
    if a.open_over_display != 1.0 {
        lines.push((
            "generator display",
            format!(
                "set the high level to {} ({}× that reaches a high-impedance input: {})",
                eng(a.display_amplitude, dim),
                plain(a.open_over_display),
                eng(b.pulse.amplitude, dim)
            ),
        ));
    }
    lines.push((
        "area",
        format!(
            "{}, read h(t) ≈ y(t) × {}",
            with_unit(a.scaling.area, sc.drive.area_unit()),
            eng_plain(a.scaling.read_factor, 5)
        ),
    ));
    lines.push((
        "peaks",
        format!(
            "input {}, predicted output {}",
            eng(a.peak_input, dim),
            eng_plain(a.peak_output, 5)
        ),
    ));
    lines.push((
        "period",
        match &b.period {
            Some(p) => format!(
                "{} (earlier pulses add {}, target ≤ {})",
                eng(p.period, Dim::Time),
                percent_unsigned(p.tail),
                percent_unsigned(p.target)
            ),
            None => "single shots only (a mode does not decay)".into(),
        },
    ));
    let c = &b.capture;
    lines.push((
        "capture",
        format!(
            "every {} ({:.1} samples across the pulse), record {} with {} pre-trigger, {} points, {} average(s), trigger on the generator's sync output",
            eng(c.sample_interval, Dim::Time),
            c.samples_across_pulse,
            eng(c.record_length, Dim::Time),
            eng(c.pre_trigger, Dim::Time),
            c.points,
            c.averages
        ),
    ));
    if let Some((f, co)) = &c.split {
        lines.push((
            "two records",
            format!(
                "memory too small for one record: record 1 every {} for {}; record 2 every {} for {}",
                eng(f.interval, Dim::Time),
                eng(f.length, Dim::Time),
                eng(co.interval, Dim::Time),
                eng(co.length, Dim::Time)
            ),
        ));
    }
    lines
}
