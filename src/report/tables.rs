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

/// The bench summary as (label, sentence) pairs plus the notes still to print, shared by the
/// text and HTML reports. The noise notes (the bench's and the plan's choice of width) are
/// merged into one "noise" line: the width the plan uses, why, and the others as context.
pub(crate) fn bench_summary(
    sc: &crate::scenario::Scenario,
    b: &crate::bench::BenchPlan,
    plan_notes: &[crate::notice::Note],
) -> (Vec<(&'static str, String)>, Vec<String>) {
    use crate::notice::Note;
    let mut lines = bench_lines(sc, b);
    let mut rest = Vec::new();
    let mut at_pulse = None;
    for n in &b.notes {
        match n {
            Note::NoiseAtPulse { .. } => at_pulse = Some(n),
            // The two records have their own line.
            Note::TwoRecords { .. } => {}
            other => rest.push(super::words::note_text(other, sc.drive)),
        }
    }
    let fewest = plan_notes
        .iter()
        .find(|n| matches!(n, Note::FewestAverages { .. }));
    if let Some(Note::NoiseAtPulse {
        noise,
        bias,
        best_width,
    }) = at_pulse
    {
        lines.push((
            "noise",
            super::words::noise_text(b, *noise, *bias, *best_width, fewest),
        ));
    }
    (lines, rest)
}

/// The bench lines: the amplitude's, then the timing's.
fn bench_lines(
    sc: &crate::scenario::Scenario,
    b: &crate::bench::BenchPlan,
) -> Vec<(&'static str, String)> {
    let mut lines = amplitude_lines(sc, b);
    lines.extend(timing_lines(b));
    lines
}

/// The generator display setting, the pulse's area and read factor, and the peaks.
fn amplitude_lines(
    sc: &crate::scenario::Scenario,
    b: &crate::bench::BenchPlan,
) -> Vec<(&'static str, String)> {
    use crate::units::{eng_plain, plain};
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
    let u = super::words::Units::of(sc.drive, sc.output);
    let input = match a.peak_terminal {
        Some(t) => format!(
            "at the input terminals {} (source open-circuit level {})",
            eng(t, dim),
            eng(a.peak_input, dim)
        ),
        None => format!("input {}", eng(a.peak_input, dim)),
    };
    lines.push((
        "peaks",
        format!(
            "{input}, predicted output {} (its largest excursion)",
            u.output_value(a.output_extreme)
        ),
    ));
    lines
}

/// The repetition period, the capture settings and the split records when memory is short.
fn timing_lines(b: &crate::bench::BenchPlan) -> Vec<(&'static str, String)> {
    use crate::units::percent_unsigned;
    let mut lines = Vec::new();
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

/// The tolerance spreads as (quantity, [nominal, min, max]) cells: the fastest significant and
/// slowest time constants, and h(0⁺) when it is not zero.
pub(crate) fn tolerance_rows(
    t: &crate::tolerance::ToleranceReport,
    u: &super::words::Units,
) -> Vec<(&'static str, [String; 3])> {
    let time = |sp: &crate::tolerance::Spread| {
        [
            eng(sp.nominal, Dim::Time),
            eng(sp.min, Dim::Time),
            eng(sp.max, Dim::Time),
        ]
    };
    let mut rows = vec![
        ("fastest significant τ", time(&t.tau_fast)),
        ("slowest time constant", time(&t.tau_slow)),
    ];
    if t.h0.nominal != 0.0 {
        rows.push((
            "h(0⁺)",
            [
                u.h_value(t.h0.nominal),
                u.h_value(t.h0.min),
                u.h_value(t.h0.max),
            ],
        ));
    }
    rows
}

/// Where the pulse's level applies: at the circuit's input, or, for a circuit driven through a
/// source resistance, the source's open-circuit level behind it.
pub(crate) fn pulse_place(sc: &crate::scenario::Scenario) -> String {
    match source_resistance(sc) {
        Some(r) => format!(
            "the source's open-circuit level, behind its {} source resistance",
            eng(r, Dim::Resistance)
        ),
        None => "at the circuit's input".into(),
    }
}

/// The source resistance between a voltage source and the circuit's input terminals.
pub(crate) fn source_resistance(sc: &crate::scenario::Scenario) -> Option<f64> {
    match &sc.network_spec {
        crate::network::NetworkSpec::Netlist(n)
            if n.stimulus == crate::netlist::Stimulus::Voltage =>
        {
            n.source_resistance.filter(|&r| r > 0.0)
        }
        _ => None,
    }
}
