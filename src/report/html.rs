//! The one-page HTML report: one self-contained file (inline CSS and SVG, no scripts, no
//! external references) that prints cleanly to PDF.

use super::figures::Figure;
use super::markup::escape;
use super::words::{self, Context, Units};
use crate::bench::BenchPlan;
use crate::estimate::{ErrorEstimate, NormalisedBy, Reading};
use crate::network::{Network, NetworkSpec};
use crate::notice::Note;
use crate::notice::Warning;
use crate::pipeline::{AssessOutcome, PlanOutcome};
use crate::plan::Prepared;
use crate::pulse::Trapezoid;
use crate::scenario::Scenario;
use crate::units::{Dim, Signal, eng, percent_unsigned, plain};
use num_complex::Complex64;
use std::fmt::Write as _;

const CSS: &str = r#"
:root { --ink:#22262b; --soft:#5d646c; --line:#d5d9de; --accent:#114b63; --warm:#b0692e; --paper:#fbfaf7; --tint:#eef3f6; --warn:#fff4e5; --warnline:#d08a2f; }
* { box-sizing: border-box; }
body { margin:0; background:var(--paper); color:var(--ink); font:15px/1.45 system-ui, -apple-system, "Segoe UI", Roboto, "Noto Sans", "DejaVu Sans", sans-serif; }
main { max-width: 1040px; margin: 0 auto; padding: 28px 32px 48px; }
header.top { border-bottom: 3px solid var(--accent); padding-bottom: 12px; margin-bottom: 18px; }
header.top .kicker { font-size: 12px; letter-spacing: .08em; text-transform: uppercase; color: var(--soft); }
h1 { font-size: 26px; margin: 4px 0 2px; }
h2 { font-size: 19px; margin: 30px 0 10px; padding-bottom: 4px; border-bottom: 1px solid var(--line); color: var(--accent); }
h3 { font-size: 16px; margin: 18px 0 6px; }
.file { color: var(--soft); font-family: ui-monospace, "DejaVu Sans Mono", monospace; font-size: 13px; overflow-wrap: anywhere; }
.cards { display: grid; grid-template-columns: repeat(auto-fit, minmax(210px, 1fr)); gap: 10px; margin: 14px 0; }
.card { background: #fff; border: 1px solid var(--line); border-left: 4px solid var(--accent); padding: 8px 12px; }
.card .k { font-size: 12px; color: var(--soft); text-transform: uppercase; letter-spacing: .05em; }
.card .v { font-size: 18px; font-weight: 600; }
.card.alert { border-left-color: var(--warnline); }
table { border-collapse: collapse; width: 100%; margin: 6px 0 10px; background: #fff; font-variant-numeric: tabular-nums; }
th, td { border: 1px solid var(--line); padding: 4px 8px; text-align: left; vertical-align: top; }
thead th { background: var(--tint); font-weight: 600; }
tbody th { font-weight: 500; color: var(--soft); white-space: nowrap; }
td.num { text-align: right; white-space: nowrap; }
tr.group th { background: #f6f7f8; color: var(--ink); font-weight: 600; }
.formula { font-family: "DejaVu Serif", Georgia, serif; font-size: 17px; background: #fff; border: 1px solid var(--line); padding: 8px 12px; display: inline-block; max-width: 100%; overflow-x: auto; }
.table-box { max-width: 100%; overflow-x: auto; margin: 6px 0 10px; }
.table-box > table { margin: 0; }
.note { color: var(--soft); font-size: 13px; }
figure { margin: 18px 0; background: #fff; border: 1px solid var(--line); padding: 8px; }
figure svg { width: 100%; height: auto; display: block; }
figcaption { font-size: 13px; color: var(--soft); padding: 6px 4px 0; }
ul.warnings { list-style: none; padding: 0; }
ul.warnings li { background: var(--warn); border-left: 4px solid var(--warnline); padding: 6px 10px; margin: 6px 0; }
ul.warnings code { font-weight: 700; color: #7a3e0c; }
.ok { background: var(--tint); border-left: 4px solid var(--accent); padding: 6px 10px; }
ul.cautions li { margin: 4px 0; }
footer { margin-top: 36px; font-size: 12px; color: var(--soft); border-top: 1px solid var(--line); padding-top: 8px; }
@page { size: A4; margin: 14mm 12mm; }
@media print {
  body { background: #fff; font-size: 11pt; }
  main { max-width: none; padding: 0; }
  h1, h2, h3 { break-after: avoid; page-break-after: avoid; }
  table, figure, .cards, ul.warnings li { break-inside: avoid; page-break-inside: avoid; }
  .table-box, .formula { overflow: visible; }
  td.num, tbody th { white-space: normal; }
  section.figures { break-before: page; page-break-before: always; }
  figure { border: none; padding: 0; }
  .card, table, figure { background: #fff; }
}
"#;

fn num(v: f64) -> String {
    crate::units::eng_plain(v, 5)
}

fn complex_text(z: Complex64) -> String {
    words::complex_text(z)
}

/// A plain coefficient as HTML, without engineering prefixes (which would read as units):
/// 0.25, 52.5, 3.16×10<sup>9</sup>.
fn coef_html(v: f64) -> String {
    let a = v.abs();
    if a == 0.0 || (1e-3..1e6).contains(&a) {
        let t = format!("{v:.6}");
        let t = t.trim_end_matches('0').trim_end_matches('.');
        // Keep six significant digits at most.
        let sig = format!("{:.*e}", 5, v);
        let back: f64 = sig.parse().unwrap_or(v);
        if (back - v).abs() <= 1e-12 * a {
            return t.to_string();
        }
        return format!("{back}");
    }
    let e = a.log10().floor() as i32;
    let m = v / 10f64.powi(e);
    let mt = format!("{m:.5}");
    let mt = mt.trim_end_matches('0').trim_end_matches('.');
    format!("{mt}×10<sup>{e}</sup>")
}

/// A polynomial in s (descending powers) as HTML.
fn poly_html(c: &[f64]) -> String {
    let n = c.len().saturating_sub(1);
    let mut out = String::new();
    for (i, &a) in c.iter().enumerate() {
        if a == 0.0 {
            continue;
        }
        let k = n - i;
        let sign = if a < 0.0 { "−" } else { "+" };
        if out.is_empty() {
            if a < 0.0 {
                out.push('−');
            }
        } else {
            let _ = write!(out, " {sign} ");
        }
        let mag = a.abs();
        let coef = if k > 0 && mag == 1.0 {
            String::new()
        } else {
            coef_html(mag)
        };
        let s = match k {
            0 => String::new(),
            1 => "s".into(),
            _ => format!("s<sup>{k}</sup>"),
        };
        let join = if !coef.is_empty() && !s.is_empty() {
            "·"
        } else {
            ""
        };
        let _ = write!(out, "{coef}{join}{s}");
    }
    if out.is_empty() { "0".into() } else { out }
}

fn factors(roots: &[Complex64]) -> String {
    if roots.is_empty() {
        return "1".into();
    }
    roots
        .iter()
        .map(|r| {
            if *r == Complex64::new(0.0, 0.0) {
                "s".to_string()
            } else {
                format!("(s − ({}))", escape(&complex_text(*r)))
            }
        })
        .collect::<Vec<_>>()
        .join("")
}

fn network_function(spec: &NetworkSpec) -> String {
    match spec {
        NetworkSpec::TimeConstants(taus) => format!(
            "Only time constants are known: poles at −1/τ for τ = {}. The residues are unknown, so \
             every mode is taken as e<sup>−t/τ</sup> and errors are given per mode.",
            escape(
                &taus
                    .iter()
                    .map(|&t| eng(t, Dim::Time))
                    .collect::<Vec<_>>()
                    .join(", ")
            )
        ),
        NetworkSpec::Polynomial {
            numerator,
            denominator,
        } => format!(
            "<span class=\"formula\">H(s) = ({}) / ({})</span>",
            poly_html(numerator),
            poly_html(denominator)
        ),
        NetworkSpec::ZeroPoleGain { zeros, poles, gain } => format!(
            "<span class=\"formula\">H(s) = {} · {} / {}</span>",
            escape(&num(*gain)),
            factors(zeros),
            factors(poles)
        ),
        _ => "Given as a netlist: the network function's poles, zeros and residues follow below."
            .into(),
    }
}

fn modes_table(s: &mut String, net: &Network, significant: &[bool], u: &Units) {
    let _ = writeln!(
        s,
        "<table><thead><tr><th>pole (rad/s)</th><th>m</th><th>residues r₁, r₂… ({})</th>\
         <th>τ = 1/|Re p|</th><th>|p|</th><th>ζ</th><th>significant</th></tr></thead><tbody>",
        escape(&u.residue).replace("^k", "<sup>k</sup>")
    );
    // Long tables keep the significant modes and count the rest.
    let long = net.modes.len() > 40;
    let mut skipped = 0;
    for (i, m) in net.modes.iter().enumerate() {
        let sig = significant.get(i).copied().unwrap_or(true);
        if long && (!sig || i >= 40) {
            skipped += 1;
            continue;
        }
        let [res, tau, zeta] = super::tables::mode_cells(net, m, complex_text);
        let _ = writeln!(
            s,
            "<tr><td class=\"num\">{}</td><td class=\"num\">{}</td><td>{}</td><td class=\"num\">{}</td>\
             <td class=\"num\">{}</td><td class=\"num\">{}</td><td>{}</td></tr>",
            escape(&complex_text(m.pole)),
            m.multiplicity(),
            escape(&res),
            escape(&tau),
            escape(&eng(m.natural_frequency(), Dim::AngularFrequency)),
            escape(&zeta),
            if sig { "yes" } else { "no" }
        );
    }
    if skipped > 0 {
        let _ = writeln!(
            s,
            "<tr><td colspan=\"7\" class=\"note\">{skipped} further modes not listed \
             (insignificant, or beyond the first 40); all of them are in plan.json and in every figure.</td></tr>"
        );
    }
    let _ = writeln!(s, "</tbody></table>");
}

/// The bench section: display amplitude, scaling, period, capture, notes.
fn bench_html(s: &mut String, sc: &Scenario, b: &BenchPlan, plan_notes: &[Note]) {
    let _ = writeln!(s, "<section><h2>On the bench</h2><table><tbody>");
    let (lines, notes) = super::tables::bench_summary(sc, b, plan_notes);
    for (label, line) in lines {
        text_row(s, label, &[line]);
    }
    let _ = writeln!(s, "</tbody></table>");
    for n in notes {
        let _ = writeln!(s, "<p class=\"note\">{}</p>", escape(&n));
    }
    let _ = writeln!(s, "</section>");
}

/// The tolerance section, when parts carry tolerances.
fn tolerance_html(s: &mut String, out: &PlanOutcome, u: &Units) {
    let Some(t) = &out.tolerance else { return };
    let how = match t.method {
        crate::tolerance::Method::Corners { count } => format!("{count} corners"),
        crate::tolerance::Method::MonteCarlo { samples, seed } => {
            format!("{samples} Monte Carlo samples (uniform in each band, seed {seed})")
        }
    };
    let _ = writeln!(
        s,
        "<section><h2>Tolerances</h2><p class=\"note\">{}</p><table><thead><tr><th>quantity</th><th>nominal</th><th>min</th><th>max</th></tr></thead><tbody>",
        escape(&how)
    );
    for (name, cells) in super::tables::tolerance_rows(t, u) {
        row(s, name, &cells);
    }
    let _ = writeln!(s, "</tbody></table>");
    if !t.sensitivities.is_empty() {
        let _ = writeln!(
            s,
            "<table><thead><tr><th>part</th><th>tolerance</th><th>∂ln τ_fast/∂ln x</th><th>∂ln τ_slow/∂ln x</th><th>∂ln h(0⁺)/∂ln x</th></tr></thead><tbody>"
        );
        for x in t.sensitivities.iter().take(8) {
            row(
                s,
                &x.part,
                &[
                    percent_unsigned(x.tolerance),
                    format!("{:+.3}", x.tau_fast),
                    format!("{:+.3}", x.tau_slow),
                    format!("{:+.3}", x.h0),
                ],
            );
        }
        let _ = writeln!(s, "</tbody></table>");
    }
    if let Some(r) = out.robust {
        let _ = writeln!(
            s,
            "<p>Robust plan: width {} (the nominal network alone allows {}), run {} (nominal {}).</p>",
            escape(&eng(r.width, Dim::Time)),
            escape(&eng(r.nominal_width, Dim::Time)),
            escape(&eng(r.run, Dim::Time)),
            escape(&eng(r.nominal_run, Dim::Time))
        );
    }
    let _ = writeln!(s, "</section>");
}

/// The fit reading's plan: summary, predicted intervals, the three plans side by side.
fn fit_html(s: &mut String, w: &super::fitting::FitWords) {
    let _ = writeln!(
        s,
        "<section><h2>Fit reading</h2><p>{}</p>",
        escape(&w.heading)
    );
    for line in &w.summary {
        let _ = writeln!(s, "<p>{}</p>", escape(line));
    }
    let _ = writeln!(
        s,
        "<table><caption>Predicted 95 % intervals (Cramér–Rao bound of the fit)</caption>\
         <tr><th>quantity</th><th>value ± half-width</th><th>relative</th></tr>"
    );
    for c in &w.intervals {
        text_row(s, &c[0], &c[1..]);
    }
    let _ = writeln!(s, "</table>");
    let _ = write!(
        s,
        "<table><caption>{}</caption><tr>",
        escape(&w.compare_heading)
    );
    for c in &w.columns {
        let _ = write!(s, "<th>{}</th>", escape(c));
    }
    let _ = writeln!(s, "</tr>");
    for r in &w.rows {
        row(s, &r[0], &r[1..]);
    }
    let _ = writeln!(
        s,
        "</table><p class=\"note\">{}</p></section>",
        escape(&w.verdict)
    );
}

/// A row whose cells are prose (left-aligned, wrapping).
fn text_row(s: &mut String, head: &str, cells: &[String]) {
    let _ = write!(s, "<tr><th>{}</th>", escape(head));
    for c in cells {
        let _ = write!(s, "<td>{}</td>", escape(c));
    }
    let _ = writeln!(s, "</tr>");
}

fn row(s: &mut String, head: &str, cells: &[String]) {
    let _ = write!(s, "<tr><th>{}</th>", escape(head));
    for c in cells {
        let _ = write!(s, "<td class=\"num\">{}</td>", escape(c));
    }
    let _ = writeln!(s, "</tr>");
}

fn group(s: &mut String, head: &str, span: usize) {
    let _ = writeln!(
        s,
        "<tr class=\"group\"><th colspan=\"{}\">{}</th></tr>",
        span + 1,
        escape(head)
    );
}

fn pulses_table(s: &mut String, cols: &[(&str, &Trapezoid)], run: f64, drive: Signal) {
    let _ = write!(s, "<table><thead><tr><th></th>");
    for (h, _) in cols {
        let _ = write!(s, "<th>{}</th>", escape(h));
    }
    let _ = writeln!(s, "</tr></thead><tbody>");
    let n = cols.len();
    let each =
        |f: &dyn Fn(&Trapezoid) -> String| cols.iter().map(|(_, p)| f(p)).collect::<Vec<_>>();
    let t = |v: f64| eng(v, Dim::Time);
    row(s, "amplitude", &each(&|p| eng(p.amplitude, drive.dim())));
    row(
        s,
        "area",
        &each(&|p| words::with_unit(p.area(), drive.area_unit())),
    );
    group(s, "generator view (IEEE Std 181 terms)", n);
    row(s, "width at 50 %", &each(&|p| t(p.width_50())));
    row(s, "rise 10–90 %", &each(&|p| t(p.rise_10_90())));
    row(s, "fall 10–90 %", &each(&|p| t(p.fall_10_90())));
    group(s, "ramp view (simulator pulse sources)", n);
    row(s, "flat top", &each(&|p| t(p.flat)));
    row(s, "full rise 0–100 %", &each(&|p| t(p.rise)));
    row(s, "full fall 100–0 %", &each(&|p| t(p.fall)));
    group(s, "timing", n);
    row(s, "centroid", &each(&|p| t(p.centroid())));
    row(s, "ends at", &each(&|p| t(p.end())));
    row(s, "run (record length)", &each(&|_| t(run)));
    let _ = writeln!(s, "</tbody></table>");
}

/// The error table: exact signed figures for known residues, else one row per mode.
fn errors_table(s: &mut String, e: &ErrorEstimate, u: &Units) {
    if e.per_mode.is_empty() {
        exact_errors_table(s, e, u);
    } else {
        per_mode_errors_table(s, e);
    }
}

/// The exact readings, ideals, errors and first-order estimates of t0, t0-aligned and the window.
fn exact_errors_table(s: &mut String, e: &ErrorEstimate, u: &Units) {
    let norm = match e.normalised_by {
        NormalisedBy::H0Plus => "|h(0⁺)|",
        NormalisedBy::Peak => "the peak |h| (h(0⁺) = 0)",
        NormalisedBy::EachMode => "each mode's own h(0⁺)",
    };
    let _ = writeln!(
        s,
        "<p class=\"note\">Exact figures, signed, relative to {} = {}.</p>",
        escape(norm),
        escape(&u.h_value(e.normaliser))
    );
    let _ = writeln!(
        s,
        "<table><thead><tr><th>metric</th><th>reading y/area</th><th>ideal</th><th>error</th>\
         <th>first-order estimate</th></tr></thead><tbody>"
    );
    let t0_first = words::first_order_text(e.first_order.t0_rel, e.first_order.t0_floor);
    exact_row(
        s,
        "t0 (raw): y(end)/area vs h(0⁺)",
        &e.t0,
        e.floor,
        u,
        &t0_first,
        "",
    );
    let aligned_first =
        words::first_order_text(e.first_order.t0_aligned_rel, e.first_order.t0_aligned_floor);
    let head = "t0-aligned: vs h(end − centroid)";
    exact_row(
        s,
        head,
        &e.t0_aligned,
        e.floor,
        u,
        &aligned_first,
        " (½σ²h″)",
    );
    let _ = writeln!(
        s,
        "<tr><th>window: y(t)/area vs h(t − c), end ≤ t ≤ run</th><td colspan=\"2\">maximum at {}</td>\
         <td class=\"num\">{}</td><td class=\"num\">RMS {}</td></tr>",
        escape(&eng(e.window.t_max, Dim::Time)),
        escape(&percent_unsigned(e.window.max_rel)),
        escape(&percent_unsigned(e.window.rms_rel))
    );
    let _ = writeln!(s, "</tbody></table>");
}

/// One reading's row of the exact table: reading, ideal, error and first-order estimate
/// (followed by `basis`, the estimate's term).
fn exact_row(
    s: &mut String,
    head: &str,
    r: &Reading,
    floor: f64,
    u: &Units,
    first_order: &str,
    basis: &str,
) {
    let _ = writeln!(
        s,
        "<tr><th>{head}</th><td class=\"num\">{}</td><td class=\"num\">{}</td>\
         <td class=\"num\">{}</td><td class=\"num\">{}{basis}</td></tr>",
        escape(&u.h_value(r.reading)),
        escape(&u.h_value(r.ideal)),
        escape(&words::relative(r.rel, floor)),
        escape(first_order)
    );
}

/// Residues unknown: each mode's errors on its own, and the worst mode.
fn per_mode_errors_table(s: &mut String, e: &ErrorEstimate) {
    let _ = writeln!(
        s,
        "<p class=\"note\">Residues unknown: each mode e<sup>−t/τ</sup> is assessed on its own, \
         relative to its own h(0⁺); the worst mode leads each metric.</p>"
    );
    let _ = writeln!(
        s,
        "<table><thead><tr><th>mode τ</th><th>raw at 0⁺</th><th>aligned</th><th>window max</th>\
         <th>window RMS</th></tr></thead><tbody>"
    );
    for m in &e.per_mode {
        let _ = writeln!(
            s,
            "<tr><th>{}</th><td class=\"num\">{}</td><td class=\"num\">{}</td><td class=\"num\">{}</td>\
             <td class=\"num\">{}</td></tr>",
            escape(&eng(m.time_constant, Dim::Time)),
            escape(&words::relative(m.t0_rel, m.estimate.floor)),
            escape(&words::relative(m.t0_aligned_rel, m.estimate.floor)),
            escape(&percent_unsigned(m.window_max_rel)),
            escape(&percent_unsigned(m.window_rms_rel))
        );
    }
    let _ = writeln!(
        s,
        "<tr><th>worst mode</th><td class=\"num\">{}</td><td class=\"num\">{}</td><td class=\"num\">{}</td>\
         <td class=\"num\">{}</td></tr>",
        escape(&words::relative(e.t0.rel, e.floor)),
        escape(&words::relative(e.t0_aligned.rel, e.floor)),
        escape(&percent_unsigned(e.window.max_rel)),
        escape(&percent_unsigned(e.window.rms_rel))
    );
    let _ = writeln!(s, "</tbody></table>");
}

fn budget_text(sc: &Scenario, out: &PlanOutcome) -> String {
    words::budget_text(out.budget.as_ref(), &sc.plan)
}

/// One list item per warning: its code and its sentence.
fn warning_items(s: &mut String, ws: &[&Warning], cx: &Context) {
    for w in ws {
        let _ = writeln!(
            s,
            "<li><code>{}</code> {}</li>",
            escape(w.code()),
            escape(&words::warning_text(w, cx))
        );
    }
}

fn warnings_html(s: &mut String, ws: &[Warning], cx: &Context) {
    let (act, info): (Vec<&Warning>, Vec<&Warning>) = ws
        .iter()
        .partition(|w| w.severity() == crate::notice::Severity::Act);
    if !info.is_empty() {
        let _ = writeln!(s, "<h3>Notes</h3><ul class=\"notes\">");
        warning_items(s, &info, cx);
        let _ = writeln!(s, "</ul>");
    }
    if act.is_empty() {
        let _ = writeln!(s, "<p class=\"ok\">No warnings.</p>");
        return;
    }
    let _ = writeln!(s, "<ul class=\"warnings\">");
    warning_items(s, &act, cx);
    let _ = writeln!(s, "</ul>");
}

/// Put every table in its own box that scrolls sideways when the table is wider than the
/// page, so a narrow window never scrolls the whole page.
fn boxed_tables(html: &str) -> String {
    html.replace("<table>", "<div class=\"table-box\"><table>")
        .replace("</table>", "</table></div>")
}

/// Strip what an inline SVG does not need in HTML (the XML namespace, fixed pixel size).
pub fn inline_svg(svg: &str) -> String {
    let mut s = svg.replacen(" xmlns=\"http://www.w3.org/2000/svg\"", "", 1);
    if let Some(i) = s.find("<svg")
        && let Some(j) = s[i..].find('>')
    {
        let mut cleaned = s[i..i + j].to_string();
        for attr in ["width", "height"] {
            if let Some(a) = cleaned.find(&format!(" {attr}=\""))
                && let Some(b) = cleaned[a + attr.len() + 3..].find('"')
            {
                let end = a + attr.len() + 3 + b + 1;
                cleaned.replace_range(a..end, "");
            }
        }
        cleaned.push_str(" role=\"img\"");
        s.replace_range(i..i + j, &cleaned);
    }
    // Drop an XML declaration if any.
    if let Some(rest) = s.strip_prefix("<?xml")
        && let Some(k) = rest.find("?>")
    {
        s = rest[k + 2..].to_string();
    }
    s
}

/// The network's sections: its modes, its facts and its time scales.
fn network_sections(s: String, sc: &Scenario, prep: &Prepared) -> String {
    let s = network_html(s, sc, prep);
    let s = network_facts_html(s, sc, prep);
    time_scales_html(s, sc, prep)
}

/// The HTML report for `plan`, with the given figures inlined in order.
pub fn plan_html(sc: &Scenario, out: &PlanOutcome, figures: &[Figure]) -> String {
    let mut s = String::with_capacity(64 * 1024);
    let prep = &out.prep;
    s = head_html(s, sc, "pulse plan");
    s = summary_html(s, sc, out);
    s = network_sections(s, sc, prep);
    s = plan_section_html(s, sc, out);
    let u = Units::of(sc.drive, sc.output);
    bench_html(&mut s, sc, &out.bench, &out.notes);
    if let Some(fp) = &out.fit {
        fit_html(&mut s, &super::fitting::fit_words(fp, sc));
    }
    tolerance_html(&mut s, out, &u);
    let widened = out.budget.as_ref().is_some_and(|b| b.widening.is_some());
    let heading = "Predicted error of the recommended pulse";
    let rule = widened.then_some(&out.rule_estimate);
    s = errors_section_html(s, heading, &out.estimate, rule, &u);
    s = warnings_section_html(s, sc, prep, &out.estimate, &out.warnings);
    s = figures_html(s, sc, figures);
    boxed_tables(&s)
}

/// The HTML report for `assess`: the network, the pulse given, the bench's check of it, its
/// predicted errors and warnings, and the figures.
pub fn assess_html(sc: &Scenario, out: &AssessOutcome, figures: &[Figure]) -> String {
    let mut s = String::with_capacity(64 * 1024);
    let prep = &out.prep;
    s = head_html(s, sc, "pulse assessed");
    s = network_sections(s, sc, prep);
    let _ = writeln!(
        s,
        "<section><h2>Pulse assessed ([pulse], {})</h2>",
        escape(&super::tables::pulse_place(sc))
    );
    pulses_table(&mut s, &[("given", &out.pulse)], out.run, sc.drive);
    let _ = writeln!(s, "</section>");
    let u = Units::of(sc.drive, sc.output);
    bench_html(&mut s, sc, &out.bench, &[]);
    s = errors_section_html(
        s,
        "Predicted error of the given pulse",
        &out.estimate,
        None,
        &u,
    );
    s = warnings_section_html(s, sc, prep, &out.estimate, &out.warnings);
    s = figures_html(s, sc, figures);
    boxed_tables(&s)
}

fn head_html(mut s: String, sc: &Scenario, kind: &str) -> String {
    let title = sc.title.clone().unwrap_or_else(|| sc.name.clone());
    let _ = writeln!(
        s,
        "<!DOCTYPE html>\n<html lang=\"en\">\n<head>\n<meta charset=\"utf-8\">\n\
         <meta name=\"viewport\" content=\"width=device-width, initial-scale=1\">\n\
         <title>{} — {kind}</title>\n<style>{CSS}</style>\n</head>\n<body>\n<main>",
        escape(&title)
    );
    let _ = writeln!(
        s,
        "<header class=\"top\"><div class=\"kicker\">pulseplan {} · {kind}</div><h1>{}</h1>\
         <div class=\"file\">{}</div></header>",
        env!("CARGO_PKG_VERSION"),
        escape(&title),
        escape(&sc.file)
    );
    s
}

/// The summary: the cards, then the scenario, drive and budget.
fn summary_html(mut s: String, sc: &Scenario, out: &PlanOutcome) -> String {
    // Summary.
    let _ = writeln!(
        s,
        "<section class=\"summary\"><h2>Summary</h2><div class=\"cards\">"
    );
    s = cards_html(s, sc, out);
    let _ = writeln!(s, "</div>");
    let _ = writeln!(
        s,
        "<table><tbody>\
         <tr><th>scenario</th><td>{}</td></tr>\
         <tr><th>drive</th><td>{}, area {}</td></tr>\
         <tr><th>budget</th><td>{}</td></tr></tbody></table>",
        escape(&sc.name),
        if sc.drive == Signal::Voltage {
            "voltage"
        } else {
            "current"
        },
        escape(&words::area_rule_text(&sc.area, sc.drive)),
        escape(&budget_text(sc, out))
    );
    let _ = writeln!(s, "</section>");
    s
}

/// The summary cards: the figures a bench user needs first.
fn cards_html(mut s: String, sc: &Scenario, out: &PlanOutcome) -> String {
    let p = &out.pulse;
    let e = &out.estimate;
    let dim = sc.drive.dim();
    let metric_value = e.metric(sc.plan.metric);
    let card = |s: &mut String, k: &str, v: &str, alert: bool| {
        let _ = writeln!(
            s,
            "<div class=\"card{}\"><div class=\"k\">{}</div><div class=\"v\">{}</div></div>",
            if alert { " alert" } else { "" },
            escape(k),
            escape(v)
        );
    };
    card(
        &mut s,
        "width at 50 %",
        &eng(p.width_50(), Dim::Time),
        false,
    );
    card(
        &mut s,
        "amplitude",
        &eng(p.amplitude, dim),
        sc.drive == Signal::Voltage && p.amplitude.abs() > crate::bench::HAZARD_VOLTS,
    );
    card(
        &mut s,
        "edges 10–90 %",
        &format!(
            "{} / {}",
            eng(p.rise_10_90(), Dim::Time),
            eng(p.fall_10_90(), Dim::Time)
        ),
        false,
    );
    card(
        &mut s,
        &format!("{} error", sc.plan.metric.name()),
        &percent_unsigned(metric_value),
        sc.plan
            .target_error
            .is_some_and(|b| metric_value > b * (1.0 + 1e-9)),
    );
    card(&mut s, "run", &eng(out.prep.run, Dim::Time), false);
    let b = &out.bench;
    card(
        &mut s,
        "period",
        &b.period
            .as_ref()
            .map_or("single shots".into(), |p| eng(p.period, Dim::Time)),
        b.period.as_ref().is_some_and(|p| !p.met),
    );
    card(
        &mut s,
        "sample rate",
        &format!("{}Sa/s", crate::units::eng_number(b.capture.sample_rate, 4)),
        !b.capture.fits_memory,
    );
    card(
        &mut s,
        "warnings",
        &out.warnings.len().to_string(),
        !out.warnings.is_empty(),
    );
    s
}

/// The network function and the modes table.
fn network_html(mut s: String, sc: &Scenario, prep: &Prepared) -> String {
    // Network.
    let net = &sc.network;
    let _ = writeln!(
        s,
        "<section><h2>Network function and modes</h2><p>{}</p>",
        network_function(&sc.network_spec)
    );
    let _ = writeln!(
        s,
        "<p class=\"note\">{} form, order {}.</p>",
        escape(net.form.name()),
        net.order()
    );
    let u = Units::of(sc.drive, sc.output);
    modes_table(&mut s, net, &prep.significant, &u);
    s
}

/// Zeros, direct term, improper part, h(0⁺) and peak.
fn network_facts_html(mut s: String, sc: &Scenario, prep: &Prepared) -> String {
    let net = &sc.network;
    let u = Units::of(sc.drive, sc.output);
    let _ = writeln!(s, "<table><tbody>");
    if !net.zeros.is_empty() {
        let zs: Vec<String> = net.zeros.iter().map(|&z| complex_text(z)).collect();
        text_row(&mut s, "zeros (rad/s)", &[zs.join(", ")]);
    }
    if net.residues_known {
        text_row(
            &mut s,
            "direct term D",
            &[if net.direct != 0.0 {
                format!(
                    "{} (h holds D·δ(t): during the pulse the output carries D × the input)",
                    plain(net.direct)
                )
            } else {
                "0".into()
            }],
        );
        if net.is_improper() {
            text_row(
                &mut s,
                "improper part",
                &[format!(
                    "{} (δ′, δ″… terms, left out of every figure)",
                    net.improper
                        .iter()
                        .map(|&q| plain(q))
                        .collect::<Vec<_>>()
                        .join(", ")
                )],
            );
        }
        text_row(
            &mut s,
            "h(0⁺)",
            &[format!(
                "{} from the modes, {} by the initial-value theorem",
                u.h_value(net.h0_plus()),
                u.h_value(net.h0_ivt)
            )],
        );
        text_row(
            &mut s,
            "peak |h|",
            &[format!(
                "{} at {}",
                u.h_value(prep.shape.peak),
                eng(prep.shape.t_peak, Dim::Time)
            )],
        );
    }
    s
}

/// Time scales, settling and stability; closes the network section.
fn time_scales_html(mut s: String, sc: &Scenario, prep: &Prepared) -> String {
    let net = &sc.network;
    row(
        &mut s,
        "fastest time scale 1/max|p|",
        &[eng(prep.tau_fast, Dim::Time)],
    );
    if prep.tau_plan != prep.tau_fast {
        text_row(
            &mut s,
            "fastest significant time scale",
            &[format!(
                "{} (the pulse is sized against this; every mode stays in the error figures)",
                eng(prep.tau_plan, Dim::Time)
            )],
        );
    }
    row(
        &mut s,
        "slowest time constant 1/min|Re p|",
        &[prep
            .tau_slow
            .map_or("none: no mode decays".into(), |t| eng(t, Dim::Time))],
    );
    if let Some(ts) = prep.shape.settle {
        row(
            &mut s,
            "settles (|h| < 0.1 % of peak)",
            &[eng(ts, Dim::Time)],
        );
    }
    row(
        &mut s,
        "stable",
        &[if net.stable() { "yes" } else { "NO" }.into()],
    );
    let _ = writeln!(s, "</tbody></table></section>");
    s
}

/// The pulse plan: budget, rule of thumb, the pulses in both views, the run.
fn plan_section_html(mut s: String, sc: &Scenario, out: &PlanOutcome) -> String {
    let prep = &out.prep;
    // Plan.
    let _ = writeln!(s, "<section><h2>Pulse plan</h2>");
    let _ = writeln!(
        s,
        "<p>{}</p><p class=\"note\">Rule of thumb (common practice, no source): width = fastest significant time scale/{}, \
         edges = width/{}. Both views describe the same trapezoid: type the generator view into a \
         bench generator, the ramp view into a simulator's pulse source.</p>",
        escape(&budget_text(sc, out)),
        sc.plan.width_ratio,
        sc.plan.edge_ratio
    );
    if out.budget.as_ref().is_some_and(|b| b.widening.is_some()) {
        pulses_table(
            &mut s,
            &[("rule of thumb", &out.rule), ("recommended", &out.pulse)],
            prep.run,
            sc.drive,
        );
    } else {
        pulses_table(&mut s, &[("recommended", &out.pulse)], prep.run, sc.drive);
    }
    let _ = writeln!(
        s,
        "<p class=\"note\">Run length basis: {}.</p></section>",
        escape(&words::run_basis_text(&prep.run_basis))
    );
    s
}

/// The predicted error of the recommended pulse.
fn errors_section_html(
    mut s: String,
    heading: &str,
    e: &ErrorEstimate,
    rule: Option<&ErrorEstimate>,
    u: &Units,
) -> String {
    let _ = writeln!(s, "<section><h2>{}</h2>", escape(heading));
    errors_table(&mut s, e, u);
    if let Some(r) = rule {
        let _ = writeln!(
            s,
            "<p class=\"note\">For comparison, the rule-of-thumb pulse: raw {}, aligned {}, window max {}.</p>",
            escape(&words::relative(r.t0.rel, r.floor)),
            escape(&words::relative(r.t0_aligned.rel, r.floor)),
            escape(&percent_unsigned(r.window.max_rel))
        );
    }
    let _ = writeln!(s, "</section>");
    s
}

/// Warnings and cautions.
fn warnings_section_html(
    mut s: String,
    sc: &Scenario,
    prep: &Prepared,
    e: &ErrorEstimate,
    warnings: &[Warning],
) -> String {
    // Warnings and cautions.
    let _ = writeln!(s, "<section><h2>Warnings</h2>");
    let basis = words::run_basis_text(&prep.run_basis);
    let cx = Context {
        drive: sc.drive,
        run_basis: &basis,
    };
    warnings_html(&mut s, warnings, &cx);
    let _ = writeln!(
        s,
        "<h3>Cautions</h3><ul class=\"cautions\">\
         <li>A narrow pulse of a given area needs a large amplitude. Above {} V (the usual \
         extra-low-voltage limit) use a smaller area and scale the reading back by 1/area; \
         hazardous voltages need suitable equipment and insulation, and local electrical-safety \
         rules and qualified practice apply. These figures do not replace them.</li>\
         <li>The predictions are exact for the model given. A real circuit is linear only over a \
         range: keep the pulse within its ratings and linear range.</li>\
         <li>Relative errors are referred to {}, as stated with every figure.</li></ul></section>",
        crate::bench::HAZARD_VOLTS,
        match e.normalised_by {
            NormalisedBy::H0Plus => "|h(0⁺)|",
            NormalisedBy::Peak => "the peak |h|",
            NormalisedBy::EachMode => "each mode's own h(0⁺)",
        }
    );
    s
}

/// The figures, inlined, and the footer.
fn figures_html(mut s: String, sc: &Scenario, figures: &[Figure]) -> String {
    // Figures.
    if !figures.is_empty() {
        let _ = writeln!(s, "<section class=\"figures\"><h2>Figures</h2>");
        for f in figures {
            let _ = writeln!(
                s,
                "<figure id=\"fig-{}\">\n{}\n<figcaption>{}</figcaption></figure>",
                escape(f.file.trim_end_matches(".svg")),
                inline_svg(&f.svg),
                escape(&f.caption)
            );
        }
        let _ = writeln!(s, "</section>");
    }
    let _ = writeln!(
        s,
        "<footer>Written by pulseplan {} from {}. Responses are exact for the modal model \
         (no time step); figures are sampled from the same closed forms.</footer>\n</main>\n</body>\n</html>",
        env!("CARGO_PKG_VERSION"),
        escape(&sc.file)
    );
    s
}
