//! Reports: the text report, the JSON object, the response CSV, and atomic file writes.
//! Each format has its own submodule; they share the cursor readings defined here.

pub mod bundle;
mod csv_out;
pub mod figures;
pub mod html;
mod json;
pub mod markup;
pub mod sheet;
mod text;
pub mod words;

pub use bundle::{BundleOptions, write_bundle, write_bundle_with};
pub use csv_out::{response_rows, write_atomic, write_response_csv};
pub use html::plan_html;
pub use json::{assess_json, plan_json};
pub use sheet::{generator_sheet, stimulus_csv};
pub use text::{assess_text, plan_text};
pub use words::with_unit;

pub use crate::estimate::Cursor;
use crate::network::{Mode, Network};
use crate::pulse::Trapezoid;
use crate::response::Modal;
use crate::units::{Dim, eng};

/// Read cursors on the predicted and ideal responses.
pub fn cursors(net: &Network, pulse: &Trapezoid, times: &[f64]) -> Vec<Cursor> {
    let modal = Modal::new(net);
    let h = modal.impulse();
    let driven = modal.drive(&pulse.breakpoints());
    let c = pulse.centroid();
    let area = pulse.area();
    times
        .iter()
        .map(|&t| {
            let ideal = if t > 0.0 { h.at(t) } else { 0.0 };
            let ideal_aligned = if t > c { h.at(t - c) } else { 0.0 };
            let predicted = driven.at(t) / area;
            Cursor {
                t,
                ideal,
                ideal_aligned,
                predicted,
                difference: predicted - ideal,
                difference_aligned: predicted - ideal_aligned,
            }
        })
        .collect()
}

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
