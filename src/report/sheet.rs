//! The generator settings sheet and the piecewise-linear stimulus export.

use super::words::{self, Context};
use crate::bench::{BenchPlan, HAZARD_VOLTS};
use crate::pipeline::PlanOutcome;
use crate::scenario::Scenario;
use crate::units::{Dim, Signal, eng};
use std::fmt::Write as _;

/// The settings sheet in the bench's terms, with both the generator and the ramp views.
pub fn generator_sheet(sc: &Scenario, out: &PlanOutcome) -> String {
    let b = &out.bench;
    let basis = words::run_basis_text(&out.prep.run_basis);
    let cx = &Context {
        drive: sc.drive,
        run_basis: &basis,
    };
    let warnings = &out.warnings;
    let p = &b.pulse;
    let dim = sc.drive.dim();
    let gen_ = sc.bench.generator.clone().unwrap_or_default();
    let mut s = String::new();
    let _ = writeln!(s, "pulseplan generator settings — {}", sc.file);
    if let Some(t) = &sc.title {
        let _ = writeln!(s, "{t}");
    }
    let _ = writeln!(s);
    let _ = writeln!(s, "GENERATOR VIEW (enter these on a bench pulse generator)");
    let load = match gen_.load_setting {
        Some(crate::bench::LoadSetting::Fifty) => {
            "50 Ω (the display shows the voltage across a matched 50 Ω load)"
        }
        _ => "high impedance (the display shows the open-circuit voltage)",
    };
    let _ = writeln!(s, "  output load setting      {load}");
    let at = match b.amplitude.peak_terminal {
        Some(t) => format!(
            "open-circuit level {}, {} at the circuit's input terminals",
            eng(p.amplitude, dim),
            eng(t, dim)
        ),
        None => format!("{} at the circuit input", eng(p.amplitude, dim)),
    };
    let _ = writeln!(
        s,
        "  high level               {}   (display value; {at})",
        eng(b.amplitude.display_amplitude, dim)
    );
    let _ = writeln!(s, "  low level                0");
    let _ = writeln!(
        s,
        "  pulse width (50 %)       {}",
        eng(p.width_50(), Dim::Time)
    );
    let _ = writeln!(
        s,
        "  leading edge (10–90 %)   {}",
        eng(p.rise_10_90(), Dim::Time)
    );
    let _ = writeln!(
        s,
        "  trailing edge (10–90 %)  {}",
        eng(p.fall_10_90(), Dim::Time)
    );
    match &b.period {
        Some(per) => {
            let _ = writeln!(
                s,
                "  period                   {}",
                eng(per.period, Dim::Time)
            );
        }
        None => {
            let _ = writeln!(
                s,
                "  period                   single shot (the network does not settle)"
            );
        }
    }
    let _ = writeln!(
        s,
        "  delay                    0 s (trigger the capture on the generator's sync output)"
    );
    let _ = writeln!(
        s,
        "  burst count              {}",
        if b.period.is_some() {
            b.capture.averages.max(1)
        } else {
            1
        }
    );
    let _ = writeln!(s);
    let _ = writeln!(
        s,
        "RAMP VIEW (simulator pulse sources: full ramps, flat top — do not mix with the above)"
    );
    let _ = writeln!(s, "  amplitude                {}", eng(p.amplitude, dim));
    let _ = writeln!(s, "  delay                    0 s");
    let _ = writeln!(s, "  rise time (0–100 %)      {}", eng(p.rise, Dim::Time));
    let _ = writeln!(s, "  flat top                 {}", eng(p.flat, Dim::Time));
    let _ = writeln!(s, "  fall time (100–0 %)      {}", eng(p.fall, Dim::Time));
    if let Some(per) = &b.period {
        let _ = writeln!(
            s,
            "  period                   {}",
            eng(per.period, Dim::Time)
        );
    }
    let _ = writeln!(s);
    let _ = writeln!(s, "CAPTURE");
    let c = &b.capture;
    let _ = writeln!(
        s,
        "  sample interval          {}  ({}Sa/s)",
        eng(c.sample_interval, Dim::Time),
        crate::units::eng_number(c.sample_rate, 4)
    );
    let _ = writeln!(
        s,
        "  record length            {}  ({} points)",
        eng(c.record_length, Dim::Time),
        c.points
    );
    let _ = writeln!(
        s,
        "  pre-trigger              {}",
        eng(c.pre_trigger, Dim::Time)
    );
    let _ = writeln!(
        s,
        "  trigger                  generator sync output, rising edge"
    );
    let _ = writeln!(s, "  averages                 {}", c.averages);
    if let Some((fine, coarse)) = &c.split {
        let _ = writeln!(
            s,
            "  memory too small: record 1 at {} for {}, record 2 at {} for {}",
            eng(fine.interval, Dim::Time),
            eng(fine.length, Dim::Time),
            eng(coarse.interval, Dim::Time),
            eng(coarse.length, Dim::Time)
        );
    }
    let _ = writeln!(s);
    let _ = writeln!(
        s,
        "READING: h(t) ≈ y(t) / area, area = {} (multiply the captured output by {})",
        words::with_unit(b.amplitude.scaling.area, sc.drive.area_unit()),
        crate::units::eng_number(b.amplitude.scaling.read_factor, 5).trim_end()
    );
    for n in &b.notes {
        let _ = writeln!(s, "NOTE: {}", words::note_text(n, sc.drive));
    }
    let hazardous = sc.drive == Signal::Voltage
        && (p.amplitude.abs() > HAZARD_VOLTS || b.amplitude.display_amplitude.abs() > HAZARD_VOLTS);
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
    for w in warnings {
        let _ = writeln!(s, "WARNING [{}]: {}", w.code(), words::warning_text(w, cx));
    }
    s
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
