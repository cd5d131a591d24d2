//! The human-readable text report.

use super::words::{self, Context, with_unit};
use crate::bench::BenchPlan;
use crate::estimate::Cursor;
use crate::estimate::ErrorEstimate;
use crate::network::Network;
use crate::notice::Warning;
use crate::pipeline::{AssessOutcome, PlanOutcome};
use crate::plan::{Prepared, Target};
use crate::pulse::Trapezoid;
use crate::scenario::Scenario;
use crate::units::{Dim, eng, eng_number, percent, percent_unsigned, plain};
use std::fmt::Write as _;

fn pole_text(z: num_complex::Complex64) -> String {
    let re = eng_number(z.re, 5);
    if z.im == 0.0 {
        re.trim_end().to_string()
    } else {
        let im = eng_number(z.im.abs(), 5);
        format!(
            "{} {} j{}",
            re.trim_end(),
            if z.im < 0.0 { "−" } else { "+" },
            im.trim_end()
        )
    }
}

fn value_text(v: f64) -> String {
    crate::units::eng_plain(v, 5)
}

/// The network section of the text report.
fn network_text(s: &mut String, net: &Network, prep: &Prepared) {
    let _ = writeln!(s, "Network ({}, order {})", net.form.name(), net.order());
    let _ = writeln!(
        s,
        "  {:<26} {:>4}  {:<30} {:>10} {:>12} {:>8} {:>9}",
        "pole [rad/s]", "m", "residues r1, r2… [1/s^k]", "τ", "|p|", "ζ", "share"
    );
    // Long tables keep the significant modes and summarise the rest.
    let long = net.modes.len() > 24;
    let mut hidden = 0usize;
    let mut hidden_share = 0.0f64;
    for (i, m) in net.modes.iter().enumerate() {
        if long && (!prep.significant[i] || i >= 40) {
            hidden += 1;
            hidden_share = hidden_share.max(prep.shares[i]);
            continue;
        }
        let [res, tau, zeta] = super::tables::mode_cells(net, m, pole_text);
        let share = if net.residues_known {
            format!(
                "{}{}",
                percent_unsigned(prep.shares[i]),
                if prep.significant[i] { "" } else { "°" }
            )
        } else {
            "–".into()
        };
        let _ = writeln!(
            s,
            "  {:<26} {:>4}  {:<30} {:>10} {:>12} {:>8} {:>9}",
            pole_text(m.pole),
            m.multiplicity(),
            res,
            tau,
            eng(m.natural_frequency(), Dim::AngularFrequency),
            zeta,
            share
        );
    }
    if hidden > 0 {
        let _ = writeln!(
            s,
            "  … {hidden} more modes not listed (each under {} of the response; all kept in every error figure)",
            percent_unsigned(hidden_share.max(1e-12))
        );
    }
    if net.residues_known {
        let _ = writeln!(
            s,
            "  share: the mode's part of Σ|r|/|Re p| (its bound on ∫|h|); ° below the significance threshold"
        );
    }
    if !net.zeros.is_empty() {
        let zs: Vec<String> = net.zeros.iter().map(|&z| pole_text(z)).collect();
        let _ = writeln!(s, "  zeros [rad/s]: {}", zs.join(", "));
    }
    if net.residues_known {
        if net.direct != 0.0 {
            let _ = writeln!(
                s,
                "  direct term D          {}   (h holds D·δ(t): during the pulse the output carries D × the input)",
                plain(net.direct)
            );
        } else {
            let _ = writeln!(s, "  direct term D          0");
        }
        if net.is_improper() {
            let _ = writeln!(
                s,
                "  improper part          {}   (coefficients of s, s², …: δ′, δ″ terms, left out)",
                net.improper
                    .iter()
                    .map(|&q| plain(q))
                    .collect::<Vec<_>>()
                    .join(", ")
            );
        }
        let _ = writeln!(
            s,
            "  h(0⁺)                  {} /s from the modes, {} /s by the initial-value theorem",
            value_text(net.h0_plus()),
            value_text(net.h0_ivt)
        );
        let _ = writeln!(
            s,
            "  peak |h|               {} /s at {}",
            value_text(prep.shape.peak),
            eng(prep.shape.t_peak, Dim::Time)
        );
    } else {
        let _ = writeln!(
            s,
            "  residues unknown: each mode is taken as e^(−t/τ) and errors are per mode"
        );
    }
    let _ = writeln!(
        s,
        "  fastest time scale     {}   (1/max|p|)",
        eng(prep.tau_fast, Dim::Time)
    );
    if prep.tau_plan != prep.tau_fast {
        let _ = writeln!(
            s,
            "  fastest significant    {}   (the pulse is sized against this; every mode stays in the error figures)",
            eng(prep.tau_plan, Dim::Time)
        );
    }
    match prep.tau_slow {
        Some(t) => {
            let _ = writeln!(
                s,
                "  slowest time constant  {}   (1/min|Re p|)",
                eng(t, Dim::Time)
            );
        }
        None => {
            let _ = writeln!(s, "  slowest time constant  none: no mode decays");
        }
    }
    if let Some(ts) = prep.shape.settle {
        let _ = writeln!(
            s,
            "  settles (|h| < 0.1 % of peak) after {}",
            eng(ts, Dim::Time)
        );
    }
    let _ = writeln!(
        s,
        "  stable                 {}",
        if net.stable() { "yes" } else { "NO" }
    );
}

fn pulse_text(s: &mut String, heading: &str, p: &Trapezoid, run: f64, sc: &Scenario) {
    let amp_dim = sc.drive.dim();
    let _ = writeln!(s, "{heading}");
    let _ = writeln!(
        s,
        "  amplitude {}   area {}   centroid {}   ends at {}",
        eng(p.amplitude, amp_dim),
        with_unit(p.area(), sc.drive.area_unit()),
        eng(p.centroid(), Dim::Time),
        eng(p.end(), Dim::Time)
    );
    let _ = writeln!(
        s,
        "  generator view: width (50 %) {}   rise 10–90 % {}   fall 10–90 % {}",
        eng(p.width_50(), Dim::Time),
        eng(p.rise_10_90(), Dim::Time),
        eng(p.fall_10_90(), Dim::Time)
    );
    let _ = writeln!(
        s,
        "  ramp view:      flat top {}   full rise {}   full fall {}",
        eng(p.flat, Dim::Time),
        eng(p.rise, Dim::Time),
        eng(p.fall, Dim::Time)
    );
    let _ = writeln!(s, "  run (record length) {}", eng(run, Dim::Time));
}

/// A signed relative error, or "≈ 0" when it is below ten times the rounding floor.
fn rel_text(v: f64, floor: f64) -> String {
    let lim = 10.0 * floor;
    if v.abs() < lim {
        format!("≈ 0 (below {:.0e} %)", lim * 100.0)
    } else {
        percent(v)
    }
}

fn error_text(s: &mut String, e: &ErrorEstimate) {
    let norm = match e.normalised_by {
        crate::estimate::NormalisedBy::H0Plus => "|h(0⁺)|",
        crate::estimate::NormalisedBy::Peak => "peak |h| (h(0⁺) = 0)",
        crate::estimate::NormalisedBy::EachMode => "each mode's own h(0⁺)",
    };
    if e.per_mode.is_empty() {
        let _ = writeln!(s, "Predicted error (exact; relative to {norm})");
        let _ = writeln!(
            s,
            "  at t = 0⁺, raw      reading {} /s vs h(0⁺) {} /s: {}   (first-order estimate {})",
            value_text(e.t0.reading),
            value_text(e.t0.ideal),
            rel_text(e.t0.rel, e.floor),
            rel_text(e.first_order.t0_rel, e.first_order.t0_floor)
        );
        let _ = writeln!(
            s,
            "  at t = 0⁺, aligned  vs h(end − centroid) {} /s: {}   (first-order estimate ½σ²h″: {})",
            value_text(e.t0_aligned.ideal),
            rel_text(e.t0_aligned.rel, e.floor),
            rel_text(e.first_order.t0_aligned_rel, e.first_order.t0_aligned_floor)
        );
    } else {
        let _ = writeln!(
            s,
            "Predicted error per mode (exact; each relative to its own h(0⁺))"
        );
        let _ = writeln!(
            s,
            "  {:>10}  {:>14}  {:>14}  {:>14}",
            "τ", "raw at 0⁺", "aligned", "window max"
        );
        for m in &e.per_mode {
            let _ = writeln!(
                s,
                "  {:>10}  {:>14}  {:>14}  {:>14}",
                eng(m.time_constant, Dim::Time),
                percent(m.t0_rel),
                percent(m.t0_aligned_rel),
                percent_unsigned(m.window_max_rel)
            );
        }
        let _ = writeln!(
            s,
            "  worst mode: raw {}, aligned {}",
            percent(e.t0.rel),
            percent(e.t0_aligned.rel)
        );
    }
    let _ = writeln!(
        s,
        "  over the window     max {} (at {}), RMS {}   [y(t)/area vs h(t − centroid), end ≤ t ≤ run]",
        percent_unsigned(e.window.max_rel),
        eng(e.window.t_max, Dim::Time),
        percent_unsigned(e.window.rms_rel)
    );
}

fn bench_text(s: &mut String, b: &BenchPlan, sc: &Scenario) {
    let _ = writeln!(s, "On the bench");
    for (label, line) in super::tables::bench_lines(sc, b) {
        let _ = writeln!(s, "  {label:<18} {line}");
    }
    for n in &b.notes {
        let _ = writeln!(s, "  note: {}", words::note_text(n, sc.drive));
    }
    let _ = writeln!(s);
}

fn tolerance_text(s: &mut String, out: &PlanOutcome) {
    let Some(t) = &out.tolerance else { return };
    let how = match t.method {
        crate::tolerance::Method::Corners { count } => format!("{count} corners"),
        crate::tolerance::Method::MonteCarlo { samples, seed } => {
            format!("{samples} Monte Carlo samples, uniform within each band, seed {seed}")
        }
    };
    let _ = writeln!(s, "Tolerances ({how})");
    let row = |s: &mut String, name: &str, sp: &crate::tolerance::Spread, dim: Dim| {
        let _ = writeln!(
            s,
            "  {name:<28} nominal {:>12}   range {} … {}",
            eng(sp.nominal, dim),
            eng(sp.min, dim),
            eng(sp.max, dim)
        );
    };
    row(s, "fastest significant τ", &t.tau_fast, Dim::Time);
    row(s, "slowest time constant", &t.tau_slow, Dim::Time);
    if t.h0.nominal != 0.0 {
        let _ = writeln!(
            s,
            "  {:<28} nominal {:>12}   range {} … {}  (/s)",
            "h(0⁺)",
            value_text(t.h0.nominal),
            value_text(t.h0.min),
            value_text(t.h0.max)
        );
    }
    if t.sensitivities.is_empty() {
        let _ = writeln!(
            s,
            "  per-part sensitivities need at least 10 samples per toleranced part"
        );
    } else {
        let _ = writeln!(
            s,
            "  parts that dominate (normalised sensitivity ∂ln q/∂ln x; influence = max|S| × tolerance):"
        );
    }
    for sens in t.sensitivities.iter().take(6) {
        let _ = writeln!(
            s,
            "    {:<10} ±{:<8} τ_fast {:+.3}  τ_slow {:+.3}  h(0⁺) {:+.3}  influence {}",
            sens.part,
            percent_unsigned(sens.tolerance),
            sens.tau_fast,
            sens.tau_slow,
            sens.h0,
            percent_unsigned(sens.influence())
        );
    }
    if let Some(r) = out.robust {
        let _ = writeln!(
            s,
            "  robust plan: width {} (nominal network alone: {}), run {} (nominal: {})",
            eng(r.width, Dim::Time),
            eng(r.nominal_width, Dim::Time),
            eng(r.run, Dim::Time),
            eng(r.nominal_run, Dim::Time)
        );
    }
    let _ = writeln!(s);
}

fn cursors_text(s: &mut String, cs: &[Cursor]) {
    if cs.is_empty() {
        return;
    }
    let _ = writeln!(s, "Cursors");
    let _ = writeln!(
        s,
        "  {:>12}  {:>14}  {:>14}  {:>14}  {:>14}",
        "t", "ideal h(t)", "y(t)/area", "difference", "vs h(t − c)"
    );
    for c in cs {
        let _ = writeln!(
            s,
            "  {:>12}  {:>14}  {:>14}  {:>14}  {:>14}",
            eng(c.t, Dim::Time),
            value_text(c.ideal),
            value_text(c.predicted),
            value_text(c.predicted - c.ideal),
            value_text(c.predicted - c.ideal_aligned)
        );
    }
    let _ = writeln!(s);
}

fn warnings_text(s: &mut String, ws: &[Warning], cx: &Context) {
    if ws.is_empty() {
        let _ = writeln!(s, "No warnings.");
        return;
    }
    let _ = writeln!(s, "Warnings");
    for w in ws {
        let _ = writeln!(s, "  [{}] {}", w.code(), words::warning_text(w, cx));
    }
}

fn header(s: &mut String, sc: &Scenario, verb: &str) {
    let _ = writeln!(
        s,
        "pulseplan {verb} — {}{}",
        sc.file,
        sc.title
            .as_ref()
            .map(|t| format!(": {t}"))
            .unwrap_or_default()
    );
    let _ = writeln!(s);
}

/// Text report for `plan`.
pub fn plan_text(sc: &Scenario, out: &PlanOutcome, cs: &[Cursor]) -> String {
    let mut s = String::new();
    header(&mut s, sc, "plan");
    network_text(&mut s, &sc.network, &out.prep);
    let _ = writeln!(s);
    let rule_heading = format!(
        "Rule of thumb (common practice, no source): width = fastest significant time scale/{}, edges = width/{}",
        sc.plan.width_ratio, sc.plan.edge_ratio
    );
    pulse_text(&mut s, &rule_heading, &out.rule, out.prep.run, sc);
    let _ = writeln!(
        s,
        "  errors: raw at 0⁺ {}, aligned {}, window max {}",
        percent(out.rule_estimate.t0.rel),
        percent(out.rule_estimate.t0_aligned.rel),
        percent_unsigned(out.rule_estimate.window.max_rel)
    );
    let _ = writeln!(s);
    budget_text(&mut s, sc, out);
    let _ = writeln!(s);
    pulse_text(
        &mut s,
        "Recommended pulse (at the circuit's input)",
        &out.pulse,
        out.prep.run,
        sc,
    );
    let basis = words::run_basis_text(&out.prep.run_basis);
    let _ = writeln!(s, "  run length basis: {basis}");
    let _ = writeln!(s);
    bench_text(&mut s, &out.bench, sc);
    tolerance_text(&mut s, out);
    for n in &out.notes {
        let _ = writeln!(s, "Note: {}", words::note_text(n, sc.drive));
    }
    if !out.notes.is_empty() {
        let _ = writeln!(s);
    }
    error_text(&mut s, &out.estimate);
    let _ = writeln!(s);
    cursors_text(&mut s, cs);
    let cx = Context {
        drive: sc.drive,
        run_basis: &basis,
    };
    warnings_text(&mut s, &out.warnings, &cx);
    s
}

fn budget_text(s: &mut String, sc: &Scenario, out: &PlanOutcome) {
    let widening = out.budget.as_ref().and_then(|b| b.widening).unwrap_or(1.0);
    match out.budget.as_ref().map(|b| &b.target) {
        Some(Target::Met { width, value }) => {
            let _ = writeln!(
                s,
                "Error budget: {} on the {} error → widest width {} (error {}), {:.2}× the rule-of-thumb width",
                percent_unsigned(sc.plan.target_error.unwrap_or(0.0)),
                sc.plan.metric.name(),
                eng(*width, Dim::Time),
                percent_unsigned(*value),
                widening
            );
        }
        Some(Target::Capped {
            width,
            value,
            ratio,
        }) => {
            let _ = writeln!(
                s,
                "Error budget: {} on the {} error would allow a wider pulse; capped at (fastest significant time scale)/{} = {} \
                 (error {}), {:.2}× the rule-of-thumb width",
                percent_unsigned(sc.plan.target_error.unwrap_or(0.0)),
                sc.plan.metric.name(),
                ratio,
                eng(*width, Dim::Time),
                percent_unsigned(*value),
                widening
            );
        }
        Some(Target::Unreachable { .. }) => {
            let _ = writeln!(
                s,
                "Error budget cannot be met (see warnings); the rule-of-thumb pulse stands."
            );
        }
        None => {
            let _ = writeln!(
                s,
                "No error budget given ([plan] target_error): the rule-of-thumb pulse is recommended."
            );
        }
    }
}

/// Text report for `assess`.
pub fn assess_text(sc: &Scenario, out: &AssessOutcome, cs: &[Cursor]) -> String {
    let mut s = String::new();
    header(&mut s, sc, "assess");
    network_text(&mut s, &sc.network, &out.prep);
    let _ = writeln!(s);
    pulse_text(&mut s, "Pulse assessed ([pulse])", &out.pulse, out.run, sc);
    let _ = writeln!(s);
    bench_text(&mut s, &out.bench, sc);
    error_text(&mut s, &out.estimate);
    let _ = writeln!(s);
    cursors_text(&mut s, cs);
    let basis = words::run_basis_text(&out.prep.run_basis);
    let cx = Context {
        drive: sc.drive,
        run_basis: &basis,
    };
    warnings_text(&mut s, &out.warnings, &cx);
    s
}
