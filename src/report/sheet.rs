//! The generator settings sheet and the piecewise-linear stimulus export.

use super::words::{self, Context};
use crate::bench::{BenchPlan, HAZARD_VOLTS};
use crate::pipeline::PlanOutcome;
use crate::scenario::Scenario;
use crate::units::{Dim, Signal, eng};
use std::fmt::Write as _;

/// One section of the sheet: a heading and (label, value) rows.
fn section(s: &mut String, heading: &str, rows: &[(&str, String)]) {
    let _ = writeln!(s, "{heading}");
    for (label, value) in rows {
        let _ = writeln!(s, "  {label:<24} {value}");
    }
    let _ = writeln!(s);
}

fn generator_rows(sc: &Scenario, b: &BenchPlan) -> Vec<(&'static str, String)> {
    let p = &b.pulse;
    let dim = sc.drive.dim();
    let t = |v: f64| eng(v, Dim::Time);
    let load = match sc.bench.generator.as_ref().and_then(|g| g.load_setting) {
        Some(crate::bench::LoadSetting::Fifty) => {
            "50 Ω (the display shows the voltage across a matched 50 Ω load)"
        }
        _ => "high impedance (the display shows the open-circuit voltage)",
    };
    let at = match b.amplitude.peak_terminal {
        Some(term) => format!(
            "open-circuit level {}, {} at the circuit's input terminals",
            eng(p.amplitude, dim),
            eng(term, dim)
        ),
        None => format!("{} at the circuit input", eng(p.amplitude, dim)),
    };
    let period = b.period.as_ref().map_or(
        "single shot (the network does not settle)".to_string(),
        |per| t(per.period),
    );
    let burst = if b.period.is_some() {
        b.capture.averages.max(1)
    } else {
        1
    };
    vec![
        ("output load setting", load.to_string()),
        (
            "high level",
            format!(
                "{}   (display value; {at})",
                eng(b.amplitude.display_amplitude, dim)
            ),
        ),
        ("low level", "0".into()),
        ("pulse width (50 %)", t(p.width_50())),
        ("leading edge (10–90 %)", t(p.rise_10_90())),
        ("trailing edge (10–90 %)", t(p.fall_10_90())),
        ("period", period),
        (
            "delay",
            "0 s (trigger the capture on the generator's sync output)".into(),
        ),
        ("burst count", burst.to_string()),
    ]
}

fn ramp_rows(sc: &Scenario, b: &BenchPlan) -> Vec<(&'static str, String)> {
    let p = &b.pulse;
    let t = |v: f64| eng(v, Dim::Time);
    let mut rows = vec![
        ("amplitude", eng(p.amplitude, sc.drive.dim())),
        ("delay", "0 s".into()),
        ("rise time (0–100 %)", t(p.rise)),
        ("flat top", t(p.flat)),
        ("fall time (100–0 %)", t(p.fall)),
    ];
    if let Some(per) = &b.period {
        rows.push(("period", t(per.period)));
    }
    rows
}

fn capture_rows(b: &BenchPlan) -> Vec<(&'static str, String)> {
    let c = &b.capture;
    let t = |v: f64| eng(v, Dim::Time);
    let mut rows = vec![
        (
            "sample interval",
            format!(
                "{}  ({}Sa/s)",
                t(c.sample_interval),
                crate::units::eng_number(c.sample_rate, 4)
            ),
        ),
        (
            "record length",
            format!("{}  ({} points)", t(c.record_length), c.points),
        ),
        ("pre-trigger", t(c.pre_trigger)),
        ("trigger", "generator sync output, rising edge".into()),
        ("averages", c.averages.to_string()),
    ];
    if let Some((fine, coarse)) = &c.split {
        rows.push((
            "two records",
            format!(
                "record 1 every {} for {}, record 2 every {} for {}",
                t(fine.interval),
                t(fine.length),
                t(coarse.interval),
                t(coarse.length)
            ),
        ));
    }
    rows
}

/// The settings sheet in the bench's terms, with both the generator and the ramp views.
pub fn generator_sheet(sc: &Scenario, out: &PlanOutcome) -> String {
    let b = &out.bench;
    let basis = words::run_basis_text(&out.prep.run_basis);
    let cx = &Context {
        drive: sc.drive,
        run_basis: &basis,
    };
    let mut s = String::new();
    let _ = writeln!(s, "pulseplan generator settings — {}", sc.file);
    if let Some(t) = &sc.title {
        let _ = writeln!(s, "{t}");
    }
    let _ = writeln!(s);
    let gen_head = "GENERATOR VIEW (enter these on a bench pulse generator)";
    section(&mut s, gen_head, &generator_rows(sc, b));
    let ramp_head =
        "RAMP VIEW (simulator pulse sources: full ramps, flat top — do not mix with the above)";
    section(&mut s, ramp_head, &ramp_rows(sc, b));
    section(&mut s, "CAPTURE", &capture_rows(b));
    let _ = writeln!(
        s,
        "READING: h(t) ≈ y(t) / area, area = {} (multiply the captured output by {})",
        words::with_unit(b.amplitude.scaling.area, sc.drive.area_unit()),
        crate::units::eng_number(b.amplitude.scaling.read_factor, 5).trim_end()
    );
    for n in &b.notes {
        let _ = writeln!(s, "NOTE: {}", words::note_text(n, sc.drive));
    }
    cautions(&mut s, sc, b);
    for w in &out.warnings {
        let _ = writeln!(s, "WARNING [{}]: {}", w.code(), words::warning_text(w, cx));
    }
    s
}

fn cautions(s: &mut String, sc: &Scenario, b: &BenchPlan) {
    let hazardous = sc.drive == Signal::Voltage
        && (b.pulse.amplitude.abs() > HAZARD_VOLTS
            || b.amplitude.display_amplitude.abs() > HAZARD_VOLTS);
    let _ = writeln!(s);
    if hazardous {
        let _ = writeln!(
            s,
            "CAUTION: this pulse exceeds {HAZARD_VOLTS} V, the usual extra-low-voltage limit. Use equipment \
             rated for it, and follow local electrical-safety rules and qualified practice."
        );
    }
    let _ = writeln!(
        s,
        "CAUTION: check that the circuit under test tolerates this pulse (ratings, linear range) before applying it."
    );
}

/// One period of the stimulus as piecewise-linear (time, value) points with full-ramp
/// corners, for simulators and arbitrary waveform generators.
pub fn stimulus_csv(b: &BenchPlan, unit: &str) -> String {
    let p = &b.pulse;
    let end_of_period = b.period.as_ref().map_or(2.0 * p.end(), |per| per.period);
    let mut s = format!("time_s,value_{unit}\n");
    // Every corner, in order; a zero-length ramp appears as two points at one time (a jump).
    for (t, u) in p
        .breakpoints()
        .into_iter()
        .chain(std::iter::once((end_of_period, 0.0)))
    {
        let _ = writeln!(s, "{t:.12e},{u:.12e}");
    }
    s
}
