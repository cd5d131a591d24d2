//! The human-readable text report.

use super::words::{self, Context, Units, with_unit};
use crate::bench::BenchPlan;
use crate::estimate::Cursor;
use crate::estimate::ErrorEstimate;
use crate::network::Network;
use crate::notice::{Note, Severity, Warning};
use crate::pipeline::{AssessOutcome, PlanOutcome};
use crate::plan::Prepared;
use crate::pulse::Trapezoid;
use crate::scenario::Scenario;
use crate::units::{Dim, eng, percent_unsigned, plain};
use std::fmt::Write as _;

fn pole_text(z: num_complex::Complex64) -> String {
    words::complex_text(z)
}

/// The network section of the text report.
fn network_text(s: &mut String, net: &Network, prep: &Prepared, u: &Units) {
    let _ = writeln!(s, "Network ({}, order {})", net.form.name(), net.order());
    let _ = writeln!(
        s,
        "  {:<26} {:>4}  {:<30} {:>10} {:>12} {:>8} {:>9}",
        "pole [rad/s]",
        "m",
        format!("residues r1, r2… [{}]", u.residue),
        "τ",
        "|p|",
        "ζ",
        "share"
    );
    mode_rows(s, net, prep);
    network_terms(s, net, prep, u);
    time_scales(s, net, prep);
}

/// One row per mode (a long table keeps the significant modes and summarises the rest), and
/// the note on the share column.
fn mode_rows(s: &mut String, net: &Network, prep: &Prepared) {
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
}

/// The zeros, the direct and improper terms, h(0⁺) both ways and the peak of |h|.
fn network_terms(s: &mut String, net: &Network, prep: &Prepared, u: &Units) {
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
            "  h(0⁺)                  {} from the modes, {} by the initial-value theorem",
            u.h_value(net.h0_plus()),
            u.h_value(net.h0_ivt)
        );
        let _ = writeln!(
            s,
            "  peak |h|               {} at {}",
            u.h_value(prep.shape.peak),
            eng(prep.shape.t_peak, Dim::Time)
        );
    } else {
        let _ = writeln!(
            s,
            "  residues unknown: each mode is taken as e^(−t/τ) and errors are per mode"
        );
    }
}

/// The fastest, planned and slowest time scales, the settling time and stability.
fn time_scales(s: &mut String, net: &Network, prep: &Prepared) {
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
fn error_text(s: &mut String, e: &ErrorEstimate, u: &Units) {
    let norm = match e.normalised_by {
        crate::estimate::NormalisedBy::H0Plus => "|h(0⁺)|",
        crate::estimate::NormalisedBy::Peak => "peak |h| (h(0⁺) = 0)",
        crate::estimate::NormalisedBy::EachMode => "each mode's own h(0⁺)",
    };
    if e.per_mode.is_empty() {
        let _ = writeln!(s, "Predicted error (exact; relative to {norm})");
        let _ = writeln!(
            s,
            "  at t = 0⁺, raw      reading {} vs h(0⁺) {}: {}   (first-order estimate {})",
            u.h_value(e.t0.reading),
            u.h_value(e.t0.ideal),
            words::relative(e.t0.rel, e.floor),
            words::first_order_text(e.first_order.t0_rel, e.first_order.t0_floor)
        );
        let _ = writeln!(
            s,
            "  at t = 0⁺, aligned  vs h(end − centroid) {}: {}   (first-order estimate ½σ²h″: {})",
            u.h_value(e.t0_aligned.ideal),
            words::relative(e.t0_aligned.rel, e.floor),
            words::first_order_text(e.first_order.t0_aligned_rel, e.first_order.t0_aligned_floor)
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
                words::relative(m.t0_rel, m.estimate.floor),
                words::relative(m.t0_aligned_rel, m.estimate.floor),
                percent_unsigned(m.window_max_rel)
            );
        }
        let _ = writeln!(
            s,
            "  worst mode: raw {}, aligned {}",
            words::relative(e.t0.rel, e.floor),
            words::relative(e.t0_aligned.rel, e.floor)
        );
    }
    let _ = writeln!(
        s,
        "  over the window     max {} (at {}), RMS {}   [y(t)/area vs h(t − centroid), end ≤ t ≤ run]",
        words::magnitude(e.window.max_rel, e.floor),
        eng(e.window.t_max, Dim::Time),
        words::magnitude(e.window.rms_rel, e.floor)
    );
}

fn bench_text(s: &mut String, b: &BenchPlan, sc: &Scenario, plan_notes: &[Note]) {
    let _ = writeln!(s, "On the bench");
    let (lines, notes) = super::tables::bench_summary(sc, b, plan_notes);
    for (label, line) in lines {
        let _ = writeln!(s, "  {label:<18} {line}");
    }
    for n in notes {
        let _ = writeln!(s, "  note: {n}");
    }
    let _ = writeln!(s);
}

fn tolerance_text(s: &mut String, out: &PlanOutcome, u: &Units) {
    let Some(t) = &out.tolerance else { return };
    let how = match t.method {
        crate::tolerance::Method::Corners { count } => format!("{count} corners"),
        crate::tolerance::Method::MonteCarlo { samples, seed } => {
            format!("{samples} Monte Carlo samples, uniform within each band, seed {seed}")
        }
    };
    let _ = writeln!(s, "Tolerances ({how})");
    for (name, [nominal, min, max]) in super::tables::tolerance_rows(t, u) {
        let _ = writeln!(
            s,
            "  {name:<28} nominal {nominal:>12}   range {min} … {max}"
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
            "    {:<10} ±{:<8} τ_fast {:>6}  τ_slow {:>6}  h(0⁺) {:>6}  influence {}",
            sens.part,
            percent_unsigned(sens.tolerance),
            words::signed3(sens.tau_fast),
            words::signed3(sens.tau_slow),
            words::signed3(sens.h0),
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

fn cursors_text(s: &mut String, cs: &[Cursor], u: &Units) {
    if cs.is_empty() {
        return;
    }
    let _ = writeln!(s, "Cursors (h and y/area in {})", u.h);
    let _ = writeln!(
        s,
        "  {:>12}  {:>16}  {:>16}  {:>16}  {:>16}",
        "t", "ideal h(t)", "y(t)/area", "y/area − h(t)", "y/area − h(t − c)"
    );
    for c in cs {
        let _ = writeln!(
            s,
            "  {:>12}  {:>16}  {:>16}  {:>16}  {:>16}",
            eng(c.t, Dim::Time),
            u.h_value(c.ideal),
            u.h_value(c.predicted),
            u.h_value(c.difference),
            u.h_value(c.difference_aligned)
        );
    }
    let _ = writeln!(s);
}

fn warnings_text(s: &mut String, ws: &[Warning], cx: &Context) {
    let (act, info): (Vec<&Warning>, Vec<&Warning>) =
        ws.iter().partition(|w| w.severity() == Severity::Act);
    if !info.is_empty() {
        let _ = writeln!(s, "Notes");
        for w in info {
            let _ = writeln!(s, "  [{}] {}", w.code(), words::warning_text(w, cx));
        }
        let _ = writeln!(s);
    }
    if act.is_empty() {
        let _ = writeln!(s, "No warnings.");
        return;
    }
    let _ = writeln!(s, "Warnings");
    for w in act {
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

/// The report's opening: its header and the network section, and the units it is read in.
fn opening(sc: &Scenario, command: &str, prep: &Prepared) -> (String, Units) {
    let mut s = String::new();
    let u = Units::of(sc.drive, sc.output);
    header(&mut s, sc, command);
    network_text(&mut s, &sc.network, prep, &u);
    let _ = writeln!(s);
    (s, u)
}

/// Text report for `plan`.
pub fn plan_text(sc: &Scenario, out: &PlanOutcome, cs: &[Cursor]) -> String {
    let (mut s, u) = opening(sc, "plan", &out.prep);
    let rule_heading = format!(
        "Rule of thumb (common practice, no source): width = fastest significant time scale/{}, edges = width/{}",
        sc.plan.width_ratio, sc.plan.edge_ratio
    );
    pulse_text(&mut s, &rule_heading, &out.rule, out.prep.run, sc);
    let _ = writeln!(
        s,
        "  errors: raw at 0⁺ {}, aligned {}, window max {}",
        words::relative(out.rule_estimate.t0.rel, out.rule_estimate.floor),
        words::relative(out.rule_estimate.t0_aligned.rel, out.rule_estimate.floor),
        words::magnitude(out.rule_estimate.window.max_rel, out.rule_estimate.floor)
    );
    let _ = writeln!(s);
    budget_text(&mut s, sc, out);
    let _ = writeln!(s);
    let reading = if out.fit.is_some() {
        ", for the fit reading"
    } else {
        ""
    };
    let heading = format!(
        "Recommended pulse ({}{reading})",
        super::tables::pulse_place(sc)
    );
    pulse_text(&mut s, &heading, &out.pulse, out.prep.run, sc);
    let basis = words::run_basis_text(&out.prep.run_basis);
    let _ = writeln!(s, "  run length basis: {basis}");
    let _ = writeln!(s);
    bench_text(&mut s, &out.bench, sc, &out.notes);
    if let Some(fp) = &out.fit {
        fit_text(&mut s, &super::fitting::fit_words(fp, sc));
    }
    tolerance_text(&mut s, out, &u);
    let plan_notes: Vec<&Note> = out
        .notes
        .iter()
        .filter(|n| !matches!(n, Note::FewestAverages { .. }))
        .collect();
    for n in &plan_notes {
        let _ = writeln!(s, "Note: {}", words::note_text(n, sc.drive));
    }
    if !plan_notes.is_empty() {
        let _ = writeln!(s);
    }
    if out.fit.is_some() {
        let _ = writeln!(
            s,
            "For reference only: the raw and aligned readings of this pulse (the fit removes the pulse, so these biases \
             do not apply to it)"
        );
    }
    error_text(&mut s, &out.estimate, &u);
    let _ = writeln!(s);
    cursors_text(&mut s, cs, &u);
    let cx = Context {
        drive: sc.drive,
        run_basis: &basis,
    };
    warnings_text(&mut s, &out.warnings, &cx);
    s
}

fn fit_text(s: &mut String, w: &super::fitting::FitWords) {
    let _ = writeln!(s, "{}", w.heading);
    for line in &w.summary {
        let _ = writeln!(s, "  {line}");
    }
    let _ = writeln!(
        s,
        "  predicted 95 % intervals (Cramér–Rao bound of the fit):"
    );
    let wide = w
        .intervals
        .iter()
        .map(|c| c[0].chars().count())
        .max()
        .unwrap_or(0);
    for c in &w.intervals {
        let pad = wide - c[0].chars().count();
        let _ = writeln!(s, "    {}{}   {}   {}", c[0], " ".repeat(pad), c[1], c[2]);
    }
    let _ = writeln!(s, "  {}", w.compare_heading);
    let mut widths: Vec<usize> = w.columns.iter().map(|c| c.chars().count()).collect();
    for r in &w.rows {
        for (k, c) in r.iter().enumerate() {
            widths[k] = widths[k].max(c.chars().count());
        }
    }
    let line = |cells: &[String]| {
        cells
            .iter()
            .zip(&widths)
            .map(|(c, &n)| format!("{c}{}", " ".repeat(n - c.chars().count())))
            .collect::<Vec<_>>()
            .join("  ")
    };
    let _ = writeln!(s, "    {}", line(&w.columns).trim_end());
    for r in &w.rows {
        let _ = writeln!(s, "    {}", line(r).trim_end());
    }
    let _ = writeln!(s, "  {}", w.verdict);
    let _ = writeln!(s);
}

fn budget_text(s: &mut String, sc: &Scenario, out: &PlanOutcome) {
    let _ = writeln!(s, "{}", words::budget_text(out.budget.as_ref(), &sc.plan));
}

/// Text report for `assess`.
pub fn assess_text(sc: &Scenario, out: &AssessOutcome, cs: &[Cursor]) -> String {
    let (mut s, u) = opening(sc, "assess", &out.prep);
    let heading = format!(
        "Pulse assessed ([pulse], {})",
        super::tables::pulse_place(sc)
    );
    pulse_text(&mut s, &heading, &out.pulse, out.run, sc);
    let _ = writeln!(s);
    bench_text(&mut s, &out.bench, sc, &[]);
    error_text(&mut s, &out.estimate, &u);
    let _ = writeln!(s);
    cursors_text(&mut s, cs, &u);
    let basis = words::run_basis_text(&out.prep.run_basis);
    let cx = Context {
        drive: sc.drive,
        run_basis: &basis,
    };
    warnings_text(&mut s, &out.warnings, &cx);
    s
}
