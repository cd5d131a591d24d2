//! The figures' data, not their pixels: curves drawn in the SVGs are mapped back through the
//! axis mapping each figure records in its metadata and compared with response.csv and with the
//! planner's own numbers; the HTML report is checked for escaping and self-containment.

use pulseplan::pipeline::{self, PlanOutcome};
use pulseplan::plan;
use pulseplan::report::{self, figures};
use pulseplan::scenario::{self, Scenario};
use std::path::PathBuf;

fn scratch(name: &str) -> PathBuf {
    let dir = std::env::temp_dir().join(format!("pulseplan-fig-{}-{name}", std::process::id()));
    let _ = std::fs::remove_dir_all(&dir);
    std::fs::create_dir_all(&dir).unwrap();
    dir
}

/// Lag-lead network (biproper, D = 0.25), the shipped demo's values, with a budget.
const LAG_LEAD: &str = r#"
title = "Lag-lead <test> & \"quotes\" 'single' </script>"
[network]
numerator   = [0.25, 52.5]
denominator = [1.0, 840]
[drive]
kind = "voltage"
area = "1 mV·s"
[plan]
target_error = "0.02 %"
metric = "t0-aligned"
"#;

/// Lightly damped pair with a zero at the origin (h(0⁺) = gain), window metric.
const TANK: &str = r#"
[network]
poles = ["-12.566k+250.99kj", "-12.566k-250.99kj"]
zeros = ["0"]
gain  = "25.13k"
[drive]
kind = "current"
area = "1 nA·s"
[plan]
target_error = "0.02 %"
metric = "window"
"#;

fn planned(text: &str, name: &str) -> (Scenario, PlanOutcome) {
    let sc = scenario::parse(&format!("{name}.toml"), name, text).unwrap();
    let out = pipeline::plan(&sc);
    (sc, out)
}

/// A panel's mapping as recorded in the figure's metadata.
#[derive(Debug, Clone)]
struct Panel {
    px: (f64, f64),
    py: (f64, f64),
    xs: String,
    x: (f64, f64),
    ys: String,
    y: (f64, f64),
}

fn fwd(scale: &str, v: f64) -> f64 {
    if scale == "log10" {
        v.log10()
    } else if let Some(c) = scale.strip_prefix("asinh:") {
        (v / c.parse::<f64>().unwrap()).asinh()
    } else {
        v
    }
}

fn inv(scale: &str, u: f64) -> f64 {
    if scale == "log10" {
        10f64.powf(u)
    } else if let Some(c) = scale.strip_prefix("asinh:") {
        c.parse::<f64>().unwrap() * u.sinh()
    } else {
        u
    }
}

impl Panel {
    fn to_px(&self, x: f64, y: f64) -> (f64, f64) {
        let fx = (fwd(&self.xs, x) - fwd(&self.xs, self.x.0))
            / (fwd(&self.xs, self.x.1) - fwd(&self.xs, self.x.0));
        let fy = (fwd(&self.ys, y) - fwd(&self.ys, self.y.0))
            / (fwd(&self.ys, self.y.1) - fwd(&self.ys, self.y.0));
        (
            self.px.0 + fx * (self.px.1 - self.px.0),
            self.py.0 + fy * (self.py.1 - self.py.0),
        )
    }
    fn to_data(&self, px: f64, py: f64) -> (f64, f64) {
        let fx = (px - self.px.0) / (self.px.1 - self.px.0);
        let fy = (py - self.py.0) / (self.py.1 - self.py.0);
        let ux = fwd(&self.xs, self.x.0) + fx * (fwd(&self.xs, self.x.1) - fwd(&self.xs, self.x.0));
        let uy = fwd(&self.ys, self.y.0) + fy * (fwd(&self.ys, self.y.1) - fwd(&self.ys, self.y.0));
        (inv(&self.xs, ux), inv(&self.ys, uy))
    }
    fn inside(&self, p: (f64, f64)) -> bool {
        let (x0, x1) = (self.px.0.min(self.px.1), self.px.0.max(self.px.1));
        let (y0, y1) = (self.py.0.min(self.py.1), self.py.0.max(self.py.1));
        p.0 >= x0 - 1.0 && p.0 <= x1 + 1.0 && p.1 >= y0 - 1.0 && p.1 <= y1 + 1.0
    }
}

fn meta_lines(svg: &str) -> Vec<String> {
    let start = svg
        .find("<metadata id=\"pulseplan-figure\">")
        .expect("metadata");
    let end = svg[start..].find("</metadata>").unwrap() + start;
    svg[start..end]
        .lines()
        .skip(1)
        .map(str::to_string)
        .collect()
}

fn panel(svg: &str, name: &str) -> Panel {
    let line = meta_lines(svg)
        .into_iter()
        .find(|l| l.starts_with(&format!("panel {name} ")))
        .unwrap_or_else(|| panic!("no panel {name}"));
    let t: Vec<&str> = line.split_whitespace().collect();
    let f = |i: usize| t[i].parse::<f64>().unwrap();
    Panel {
        px: (f(2), f(3)),
        xs: t[4].to_string(),
        x: (f(5), f(6)),
        py: (f(7), f(8)),
        ys: t[9].to_string(),
        y: (f(10), f(11)),
    }
}

fn series_colour(svg: &str, panel: &str, name: &str) -> String {
    meta_lines(svg)
        .into_iter()
        .find(|l| l.starts_with(&format!("series {panel} {name} ")))
        .unwrap_or_else(|| panic!("no series {name}"))
        .split_whitespace()
        .nth(3)
        .unwrap()
        .to_string()
}

fn attr(tag: &str, name: &str) -> Option<String> {
    let key = format!(" {name}=\"");
    let i = tag.find(&key)? + key.len();
    let j = tag[i..].find('"')? + i;
    Some(tag[i..j].to_string())
}

/// Polylines of a colour whose points all lie inside the panel.
fn polylines(svg: &str, colour: &str, p: &Panel) -> Vec<Vec<(f64, f64)>> {
    svg.lines()
        .filter(|l| l.trim_start().starts_with("<polyline"))
        .filter(|l| attr(l, "stroke").as_deref() == Some(colour))
        .map(|l| {
            attr(l, "points")
                .unwrap()
                .split_whitespace()
                .map(|xy| {
                    let (x, y) = xy.split_once(',').unwrap();
                    (x.parse().unwrap(), y.parse().unwrap())
                })
                .collect::<Vec<(f64, f64)>>()
        })
        .filter(|pts| pts.len() >= 2 && pts.iter().all(|&q| p.inside(q)))
        .collect()
}

fn circles(svg: &str, fill: &str, p: &Panel) -> Vec<(f64, f64)> {
    svg.lines()
        .filter(|l| l.trim_start().starts_with("<circle"))
        .filter(|l| attr(l, "fill").as_deref() == Some(fill))
        .map(|l| {
            (
                attr(l, "cx").unwrap().parse().unwrap(),
                attr(l, "cy").unwrap().parse().unwrap(),
            )
        })
        .filter(|&c| p.inside(c))
        .collect()
}

/// Distance from a point to a polyline, px.
fn distance(pt: (f64, f64), line: &[(f64, f64)]) -> f64 {
    line.windows(2)
        .map(|w| {
            let (a, b) = (w[0], w[1]);
            let (dx, dy) = (b.0 - a.0, b.1 - a.1);
            let len2 = dx * dx + dy * dy;
            let s = if len2 == 0.0 {
                0.0
            } else {
                (((pt.0 - a.0) * dx + (pt.1 - a.1) * dy) / len2).clamp(0.0, 1.0)
            };
            let (qx, qy) = (a.0 + s * dx, a.1 + s * dy);
            ((pt.0 - qx).powi(2) + (pt.1 - qy).powi(2)).sqrt()
        })
        .fold(f64::INFINITY, f64::min)
}

fn read_csv(path: &std::path::Path) -> Vec<Vec<f64>> {
    let text = std::fs::read_to_string(path).unwrap();
    text.lines()
        .skip(1)
        .map(|l| l.split(',').map(|v| v.parse().unwrap()).collect())
        .collect()
}

/// Every CSV row in a panel's range lies on the drawn curve to plotting precision (the curve is
/// drawn on integer pixels: within 2 px, the polyline's rounding plus the CSV point's).
fn check_curve_against_csv(
    svg: &str,
    panel_name: &str,
    series: &str,
    rows: &[Vec<f64>],
    col: usize,
    t_from: f64,
) -> usize {
    let p = panel(svg, panel_name);
    let colour = series_colour(svg, panel_name, series);
    let lines = polylines(svg, &colour, &p);
    assert_eq!(lines.len(), 1, "one {series} polyline in {panel_name}");
    let line = &lines[0];
    // The curve covers the panel from left to right.
    let (xmin, xmax) = line
        .iter()
        .fold((f64::INFINITY, f64::NEG_INFINITY), |a, q| {
            (a.0.min(q.0), a.1.max(q.0))
        });
    assert!(xmin <= p.px.0.min(p.px.1) + 1.0 && xmax >= p.px.0.max(p.px.1) - 1.0);
    let mut checked = 0;
    for r in rows {
        let (t, v) = (r[0], r[col]);
        if t < t_from || t > p.x.1 || v < p.y.0 || v > p.y.1 {
            continue;
        }
        let q = p.to_px(t, v);
        let d = distance(q, line);
        assert!(
            d <= 2.0,
            "{panel_name}/{series}: CSV point t = {t:e}, v = {v:e} is {d:.2} px from the curve"
        );
        checked += 1;
    }
    checked
}

#[test]
fn response_curves_match_response_csv() {
    for (text, name) in [(LAG_LEAD, "laglead"), (TANK, "tank")] {
        let (sc, out) = planned(text, name);
        let dir = scratch(name);
        let written = report::write_bundle(&dir, &sc, &out).unwrap();
        let names: Vec<String> = written
            .iter()
            .map(|p| p.file_name().unwrap().to_string_lossy().into_owned())
            .collect();
        for want in [
            "stimulus.svg",
            "response.svg",
            "error.svg",
            "design.svg",
            "poles.svg",
            "report.html",
            "response.csv",
            "plan.json",
        ] {
            assert!(names.contains(&want.to_string()), "{want} written");
            assert!(dir.join(want).exists());
        }
        let svg = std::fs::read_to_string(dir.join("response.svg")).unwrap();
        let rows = read_csv(&dir.join("response.csv"));
        let end = out.pulse.end();
        // Main panel: after the pulse (inside it the spike is clipped to the panel).
        let n = check_curve_against_csv(&svg, "main", "predicted", &rows, 2, end);
        assert!(n > 1000, "{name}: {n} CSV rows checked in the main panel");
        let n = check_curve_against_csv(&svg, "main", "ideal", &rows, 1, f64::MIN_POSITIVE);
        assert!(n > 1000);
        // Zoom panel: everything, the pulse included.
        let n = check_curve_against_csv(&svg, "zoom", "predicted", &rows, 2, 0.0);
        assert!(n >= 60, "{name}: {n} CSV rows checked in the zoom panel");
        check_curve_against_csv(&svg, "zoom", "ideal", &rows, 1, f64::MIN_POSITIVE);
    }
}

#[test]
fn direct_term_copy_is_drawn_where_d_is_nonzero() {
    let (sc, out) = planned(LAG_LEAD, "laglead-d");
    let svg = figures::response_svg(&sc, &out.prep, &out.pulse, out.prep.run).unwrap();
    let p = panel(&svg, "zoom");
    let colour = series_colour(&svg, "zoom", "direct");
    let lines = polylines(&svg, &colour, &p);
    assert_eq!(lines.len(), 1);
    assert!(svg.contains(&format!("stroke=\"{colour}\" stroke-dasharray")));
    // Its flat top, D·A/area = D/width, towers over h here: the panel clips it at its top edge
    // and states the extreme value.
    let top = out.pulse.amplitude * sc.network.direct / out.pulse.area();
    let mid = out.pulse.rise + out.pulse.flat / 2.0;
    assert!(top > p.y.1, "the direct copy exceeds the zoom range");
    let q = p.to_px(mid, p.y.1);
    assert!(distance(q, &lines[0]) <= 1.5);
    let stated = format!(
        "reaches {}/s during the pulse",
        pulseplan::units::eng_number(top, 3)
    );
    assert!(svg.contains(&stated), "{stated}");
    // The tank has no direct term: no such series.
    let (sc, out) = planned(TANK, "tank-d");
    let svg = figures::response_svg(&sc, &out.prep, &out.pulse, out.prep.run).unwrap();
    assert!(!meta_lines(&svg).iter().any(|l| l.contains(" direct ")));
}

#[test]
fn design_marker_sits_at_the_planned_width_and_value() {
    for (text, name) in [(LAG_LEAD, "laglead"), (TANK, "tank")] {
        let (sc, out) = planned(text, name);
        let dc = figures::design_curve(&sc, &out, 80, &mut |_, _| {});
        let svg = figures::design_svg(&dc, &[]).unwrap();
        let p = panel(&svg, "design");
        assert_eq!(p.xs, "log10");
        assert_eq!(p.ys, "log10");
        let marks = circles(&svg, &figures::hex(figures::canvas::PLANNED), &p);
        assert_eq!(marks.len(), 1, "{name}: one planned marker in the panel");
        let (w, v) = p.to_data(marks[0].0, marks[0].1);
        // The planner's own numbers: the planned width and its metric (exact estimator).
        let want_w = out.pulse.width_50();
        let run = out.prep.run.max(out.pulse.end() * 2.0);
        let want_v = out.prep.estimator.metric(&out.pulse, sc.plan.metric, run);
        let px_per_decade_x = (p.px.1 - p.px.0).abs() / (p.x.1 / p.x.0).log10();
        let px_per_decade_y = (p.py.1 - p.py.0).abs() / (p.y.1 / p.y.0).log10();
        assert!(
            ((w / want_w).log10() * px_per_decade_x).abs() <= 1.0,
            "{name}: marker at {w:e}, planned {want_w:e}"
        );
        assert!(
            ((v / want_v).log10() * px_per_decade_y).abs() <= 1.0,
            "{name}: marker value {v:e}, planned {want_v:e}"
        );
        // The budget line lies at the budget.
        let budget = sc.plan.target_error.unwrap();
        let lines = polylines(&svg, &figures::hex(figures::canvas::BUDGET), &p);
        assert_eq!(lines.len(), 1);
        let want_y = p.to_px(p.x.0, budget).1;
        assert!(lines[0].iter().all(|q| (q.1 - want_y).abs() <= 1.0));
        // The curve's vertices are the estimator's metric at their widths (3 px: x rounding
        // times the local log–log slope, plus y rounding).
        let curve = polylines(&svg, &figures::hex(figures::canvas::PREDICTED), &p);
        assert!(!curve.is_empty());
        let mut checked = 0;
        for q in curve.iter().flatten().step_by(7) {
            let (w, _) = p.to_data(q.0, q.1);
            let pulse = plan::tied_pulse(sc.area.area(w), w, sc.plan.edge_ratio);
            let m = out.prep.estimator.metric(
                &pulse,
                sc.plan.metric,
                out.prep.run.max(pulse.end() * 2.0),
            );
            if m <= p.y.0 || m >= p.y.1 {
                continue;
            }
            let want = p.to_px(w, m);
            assert!(
                (want.1 - q.1).abs() <= 3.0,
                "{name}: curve at w = {w:e} drawn at y {} px, metric maps to {} px",
                q.1,
                want.1
            );
            checked += 1;
        }
        assert!(checked >= 5);
        // The rule-of-thumb line sits at the fastest significant time scale / width_ratio.
        let rule = polylines(&svg, &figures::hex(figures::canvas::RULE), &p);
        let want_x = p.to_px(out.prep.tau_plan / sc.plan.width_ratio, p.y.0).0;
        assert!(
            rule.iter()
                .any(|l| l.iter().all(|q| (q.0 - want_x).abs() <= 1.0))
        );
    }
}

#[test]
fn extra_design_curves_are_drawn_when_given() {
    let (sc, out) = planned(TANK, "tank-extra");
    let dc = figures::design_curve(&sc, &out, 40, &mut |_, _| {});
    let noise: Vec<(f64, f64)> = dc
        .points
        .iter()
        .map(|&(w, _)| (w, 1e-6 / w.sqrt() * 1e-1))
        .collect();
    let extra = [figures::ExtraCurve {
        label: "noise share".into(),
        points: noise,
    }];
    let svg = figures::design_svg(&dc, &extra).unwrap();
    assert!(svg.contains("noise share"));
    let p = panel(&svg, "design");
    assert!(!polylines(&svg, &figures::hex(figures::canvas::EXTRA[0]), &p).is_empty());
}

#[test]
fn design_sweep_reports_progress() {
    let (sc, out) = planned(LAG_LEAD, "laglead-progress");
    let mut calls = Vec::new();
    let dc = figures::design_curve(&sc, &out, 30, &mut |d, t| calls.push((d, t)));
    assert_eq!(calls.len(), dc.points.len());
    assert_eq!(
        calls.last().copied(),
        Some((dc.points.len(), dc.points.len()))
    );
}

#[test]
fn stimulus_draws_the_trapezoid_and_its_marks() {
    let (sc, out) = planned(LAG_LEAD, "laglead-stim");
    let svg = figures::stimulus_svg(&out.pulse, sc.drive).unwrap();
    let p = panel(&svg, "pulse");
    let colour = series_colour(&svg, "pulse", "u");
    let lines = polylines(&svg, &colour, &p);
    assert_eq!(lines.len(), 1);
    // Every breakpoint of the pulse is on the drawn outline.
    for (t, u) in out.pulse.breakpoints() {
        assert!(distance(p.to_px(t, u), &lines[0]) <= 1.0);
    }
    // Engineering units on the ticks and the marked figures.
    assert!(svg.contains("µs"));
    assert!(svg.contains("width (50 %)"));
    assert!(svg.contains("centroid"));
    assert!(svg.contains("10–90 %"));
    // The edge panels exist.
    panel(&svg, "rise");
    panel(&svg, "fall");
}

#[test]
fn error_window_maximum_marker_matches_the_estimate() {
    let (sc, out) = planned(TANK, "tank-err");
    let svg = figures::error_svg(&sc, &out.prep, &out.pulse, out.prep.run).unwrap();
    let p = panel(&svg, "aligned");
    assert_eq!(p.xs, "log10");
    let marks = circles(&svg, &figures::hex(figures::canvas::ALIGNED), &p);
    assert_eq!(marks.len(), 1);
    let (t, e) = p.to_data(marks[0].0, marks[0].1);
    let w = out.estimate.window;
    let px_per_decade = (p.px.1 - p.px.0).abs() / (p.x.1 / p.x.0).log10();
    assert!(((t / w.t_max).log10() * px_per_decade).abs() <= 1.0);
    let px_per_unit = (p.py.1 - p.py.0).abs() / (p.y.1 - p.y.0);
    assert!((e.abs() - w.max_rel).abs() * px_per_unit <= 1.0);
}

#[test]
fn pole_map_marks_poles_and_significance() {
    let (sc, _) = planned(TANK, "tank-poles");
    let svg = figures::poles_svg(&sc.network, None).unwrap();
    let lines = meta_lines(&svg);
    assert_eq!(
        lines
            .iter()
            .filter(|l| l.starts_with("point poles pole "))
            .count(),
        2
    );
    assert!(svg.contains("τ 79.58 µs"), "time constant annotated");
    let flags = [true, false];
    let svg = figures::poles_svg(&sc.network, Some(&flags)).unwrap();
    let lines = meta_lines(&svg);
    assert_eq!(
        lines
            .iter()
            .filter(|l| l.starts_with("point poles minor_pole "))
            .count(),
        1
    );
    // A stiff network is drawn on asinh axes, every pole inside the panel.
    let stiff = "[network]\npoles = [\"-0.5\", \"-300k+400kj\", \"-300k-400kj\"]\nzeros = [\"-2\"]\ngain = \"62.5G\"\n";
    let (sc, _) = planned(stiff, "stiff");
    let svg = figures::poles_svg(&sc.network, None).unwrap();
    let p = panel(&svg, "poles");
    assert!(p.xs.starts_with("asinh:"));
    for m in &sc.network.modes {
        let q = p.to_px(m.pole.re, m.pole.im);
        assert!(p.inside(q), "pole {} inside the map", m.pole);
    }
}

#[test]
fn residues_unknown_networks_get_per_mode_figures() {
    let text = "[network]\ntime_constants = [\"9.1 ms\", \"220 us\"]\n[drive]\narea = \"100 uV·s\"\n[plan]\ntarget_error = \"0.5 %\"\n";
    let (sc, out) = planned(text, "taus");
    let dir = scratch("taus");
    report::write_bundle(&dir, &sc, &out).unwrap();
    let svg = std::fs::read_to_string(dir.join("response.svg")).unwrap();
    assert!(svg.contains("τ = 9.1 ms") && svg.contains("τ = 220 µs"));
    let html = std::fs::read_to_string(dir.join("report.html")).unwrap();
    assert!(html.contains("Residues unknown"));
}

#[test]
fn html_report_is_self_contained_and_escaped() {
    let (sc, out) = planned(LAG_LEAD, "laglead-html");
    let dir = scratch("html");
    report::write_bundle(&dir, &sc, &out).unwrap();
    let html = std::fs::read_to_string(dir.join("report.html")).unwrap();
    assert!(!html.contains("http://") && !html.contains("https://"));
    assert!(!html.to_lowercase().contains("<script"));
    assert!(!html.contains("<link") && !html.contains("@import") && !html.contains("url("));
    // The scenario's title is escaped wherever it appears.
    assert!(!html.contains("<test>"));
    assert!(html.contains(
        "Lag-lead &lt;test&gt; &amp; &quot;quotes&quot; &#39;single&#39; &lt;/script&gt;"
    ));
    // All five figures are inlined, plus the plan in both views, errors and warnings.
    assert_eq!(html.matches("<svg").count(), 5);
    for want in [
        "generator view",
        "ramp view",
        "width at 50 %",
        "rise 10–90 %",
        "flat top",
        "full rise 0–100 %",
        "t0-aligned",
        "Warnings",
        "Cautions",
        "@media print",
        "H(s) = (0.25·s + 52.5) / (s + 840)",
    ] {
        assert!(html.contains(want), "report.html lacks {want:?}");
    }
    // The JSON written beside it is the planner's.
    let json: serde_json::Value =
        serde_json::from_str(&std::fs::read_to_string(dir.join("plan.json")).unwrap()).unwrap();
    assert_eq!(
        json["pulse"]["width"].as_f64().unwrap(),
        out.pulse.width_50()
    );
}

/// `tick PANEL AXIS VALUE LABEL` lines: the labels of one axis, in the order listed.
fn tick_labels(svg: &str, panel: &str, axis: &str) -> Vec<String> {
    let head = format!("tick {panel} {axis} ");
    meta_lines(svg)
        .iter()
        .filter_map(|l| l.strip_prefix(&head))
        .map(|rest| rest.split_once(' ').unwrap().1.to_string())
        .collect()
}

/// Texts of the SVG, trimmed.
fn svg_texts(svg: &str) -> Vec<String> {
    svg.split("<text")
        .skip(1)
        .map(|t| {
            let body = &t[t.find('>').unwrap() + 1..t.find("</text>").unwrap()];
            body.trim().to_string()
        })
        .collect()
}

#[test]
fn edge_zoom_tick_labels_are_distinct() {
    use pulseplan::pulse::Trapezoid;
    use pulseplan::units::Signal;
    // A 110 ns pulse with 1.1 ns edges: at three digits its falling edge's ticks read
    // "110 ns" three times; so do 1.31 µs with 13 ns edges and 1 s with 1 ns edges (the edge
    // zoom spans at least a thousandth of the width, so five digits always tell them apart).
    for (width, edge) in [(110e-9, 1.1e-9), (1.31e-6, 13e-9), (1.0, 1e-9)] {
        let pulse = Trapezoid::with_area(1e-6, width, edge).unwrap();
        let svg = figures::stimulus_svg(&pulse, Signal::Voltage).unwrap();
        let texts = svg_texts(&svg);
        for name in ["pulse", "rise", "fall"] {
            for axis in ["x", "y"] {
                let labels = tick_labels(&svg, name, axis);
                assert!(labels.len() >= 2, "{name}/{axis}: {labels:?}");
                for (i, l) in labels.iter().enumerate() {
                    assert!(
                        !labels[i + 1..].contains(l),
                        "{width:e}: {name}/{axis} repeats {l:?} in {labels:?}"
                    );
                    assert!(texts.contains(l), "{l:?} is drawn");
                }
            }
        }
    }
}

/// A placed label's box: `label PANEL X0 Y0 X1 Y1 TEXT`.
fn label_boxes(svg: &str) -> Vec<([f64; 4], String)> {
    meta_lines(svg)
        .iter()
        .filter_map(|l| l.strip_prefix("label "))
        .map(|rest| {
            let t: Vec<&str> = rest.splitn(6, ' ').collect();
            let f = |i: usize| t[i].parse::<f64>().unwrap();
            ([f(1), f(2), f(3), f(4)], t[5].to_string())
        })
        .collect()
}

/// Drawn strokes (polylines at full opacity, background colours aside) as pixel paths.
fn strokes(svg: &str) -> Vec<Vec<(f64, f64)>> {
    let background = ["#E4E6E9", "#DCE4EE", "#FFFFFF"];
    svg.lines()
        .filter(|l| l.trim_start().starts_with("<polyline"))
        .filter(|l| attr(l, "opacity").as_deref() == Some("1"))
        .filter(|l| !background.contains(&attr(l, "stroke").unwrap_or_default().as_str()))
        .map(|l| {
            attr(l, "points")
                .unwrap()
                .split_whitespace()
                .map(|xy| {
                    let (x, y) = xy.split_once(',').unwrap();
                    (x.parse().unwrap(), y.parse().unwrap())
                })
                .collect()
        })
        .collect()
}

/// Does the segment a–b enter the box? (Sampled every half pixel: plenty for a test.)
fn crosses(a: (f64, f64), b: (f64, f64), r: &[f64; 4]) -> bool {
    let n = (((b.0 - a.0).abs() + (b.1 - a.1).abs()) * 2.0)
        .ceil()
        .max(1.0) as usize;
    (0..=n).any(|k| {
        let s = k as f64 / n as f64;
        let (x, y) = (a.0 + s * (b.0 - a.0), a.1 + s * (b.1 - a.1));
        x > r[0] && x < r[2] && y > r[1] && y < r[3]
    })
}

/// Every placed label is clear of the other labels and of every drawn stroke.
fn assert_labels_clear(svg: &str, what: &str) {
    let labels = label_boxes(svg);
    let lines = strokes(svg);
    for (i, (a, ta)) in labels.iter().enumerate() {
        for (b, tb) in &labels[i + 1..] {
            let apart = a[2] <= b[0] || b[2] <= a[0] || a[3] <= b[1] || b[3] <= a[1];
            assert!(apart, "{what}: labels {ta:?} and {tb:?} overlap");
        }
        for l in &lines {
            assert!(
                !l.windows(2).any(|w| crosses(w[0], w[1], a)),
                "{what}: label {ta:?} is crossed by a stroke"
            );
        }
    }
}

/// Eight sections of 1 kΩ and 1 nF: all-real poles, most of them minor at the far end.
fn rc_ladder(sections: usize) -> String {
    let mut parts = String::new();
    for k in 1..=sections {
        let prev = if k == 1 {
            "in".to_string()
        } else {
            format!("n{}", k - 1)
        };
        parts.push_str(&format!(
            "  {{ name = \"R{k}\", kind = \"resistor\", nodes = [\"{prev}\", \"n{k}\"], value = \"1k\" }},\n  \
             {{ name = \"C{k}\", kind = \"capacitor\", nodes = [\"n{k}\", \"gnd\"], value = \"1n\" }},\n"
        ));
    }
    format!(
        "[network]\ninput = \"in\"\noutput = \"n{sections}\"\nparts = [\n{parts}]\n[drive]\nkind = \"voltage\"\narea = \"1 mV·s\"\n[plan]\ntarget_error = \"0.5 %\"\nmetric = \"window\"\n"
    )
}

#[test]
fn labels_collide_with_nothing() {
    let ladder = rc_ladder(8);
    for (text, name) in [
        (LAG_LEAD, "laglead"),
        (TANK, "tank"),
        (ladder.as_str(), "ladder"),
    ] {
        let (sc, out) = planned(text, name);
        let figs = figures::plan_figures(&sc, &out, &Default::default(), &mut |_, _| {}).unwrap();
        for f in &figs {
            assert_labels_clear(&f.svg, &format!("{name}/{}", f.file));
        }
        // The planned point and the budget are labelled in the design figure.
        let design = &figs[3].svg;
        let texts: Vec<String> = label_boxes(design).into_iter().map(|l| l.1).collect();
        assert!(
            texts.iter().any(|t| t.starts_with("planned ")),
            "{name}: {texts:?}"
        );
        assert!(
            texts.iter().any(|t| t.starts_with("budget ")),
            "{name}: {texts:?}"
        );
    }
}

#[test]
fn stimulus_marks_stay_within_the_pulse() {
    let (sc, out) = planned(TANK, "tank-marks");
    let svg = figures::stimulus_svg(&out.pulse, sc.drive).unwrap();
    let p = panel(&svg, "pulse");
    let outline = series_colour(&svg, "pulse", "u");
    let x_zero = p.to_px(0.0, p.y.0).0;
    for l in svg
        .lines()
        .filter(|l| l.trim_start().starts_with("<polyline"))
    {
        // The outline itself, and the axes (drawn faded), may start left of t = 0.
        if attr(l, "stroke").as_deref() == Some(outline.as_str())
            || attr(l, "opacity").as_deref() != Some("1")
        {
            continue;
        }
        let pts: Vec<(f64, f64)> = attr(l, "points")
            .unwrap()
            .split_whitespace()
            .map(|xy| {
                let (x, y) = xy.split_once(',').unwrap();
                (x.parse().unwrap(), y.parse().unwrap())
            })
            .collect();
        if pts.iter().all(|&q| p.inside(q)) {
            assert!(
                pts.iter().all(|q| q.0 >= x_zero - 1.0),
                "a mark left of t = 0: {l}"
            );
        }
    }
}

#[test]
fn all_real_pole_map_is_a_strip() {
    let (sc, _) = planned(&rc_ladder(8), "ladder-poles");
    assert!(sc.network.modes.iter().all(|m| m.pole.im == 0.0));
    let svg = figures::poles_svg(&sc.network, None).unwrap();
    let p = panel(&svg, "poles");
    let (w, h) = ((p.px.1 - p.px.0).abs(), (p.py.1 - p.py.0).abs());
    assert!(h <= w / 4.0, "strip {w} × {h} px");
    assert_eq!(tick_labels(&svg, "poles", "y"), ["0"]);
    assert!(svg.contains("every pole and zero is real"));
    for m in &sc.network.modes {
        assert!(p.inside(p.to_px(m.pole.re, 0.0)));
    }
    // A complex pair keeps the whole plane.
    let (sc, _) = planned(TANK, "tank-plane");
    let svg = figures::poles_svg(&sc.network, None).unwrap();
    let p = panel(&svg, "poles");
    assert!((p.py.1 - p.py.0).abs() > (p.px.1 - p.px.0).abs() / 2.0);
}

#[test]
fn response_over_the_run_shows_the_dynamics() {
    // 50 interlaced real poles over six decades: h does nearly all its moving in the first
    // 2 % of the run, so the run is drawn on a logarithmic time axis.
    let text = include_str!("reference/scenarios/order50_interlaced.toml");
    let (sc, out) = planned(text, "order50");
    let svg = figures::response_svg(&sc, &out.prep, &out.pulse, out.prep.run).unwrap();
    let p = panel(&svg, "main");
    assert_eq!(p.xs, "log10");
    let ideal = series_colour(&svg, "main", "ideal");
    for name in ["main", "zoom"] {
        let p = panel(&svg, name);
        let lines = polylines(&svg, &ideal, &p);
        let line = lines.iter().max_by_key(|l| l.len()).unwrap();
        let last = line.last().unwrap().1;
        let h = (p.py.1 - p.py.0).abs();
        let moving: Vec<f64> = line
            .iter()
            .filter(|q| (q.1 - last).abs() > 0.02 * h)
            .map(|q| q.0)
            .collect();
        let spread = moving.iter().cloned().fold(f64::NEG_INFINITY, f64::max)
            - moving.iter().cloned().fold(f64::INFINITY, f64::min);
        let width = (p.px.1 - p.px.0).abs();
        assert!(
            spread >= 0.1 * width,
            "{name}: h moves over {spread} of {width} px"
        );
    }
    // A plain lag-lead network keeps a linear run.
    let (sc, out) = planned(LAG_LEAD, "laglead-run");
    let svg = figures::response_svg(&sc, &out.prep, &out.pulse, out.prep.run).unwrap();
    assert_eq!(panel(&svg, "main").xs, "linear");
}

#[test]
fn html_tables_scroll_in_their_own_boxes_and_cards_give_the_bench_rates() {
    let (sc, out) = planned(LAG_LEAD, "laglead-cards");
    let html = report::plan_html(&sc, &out, &[]);
    let tables = html.matches("<table>").count();
    assert!(tables >= 5);
    assert_eq!(
        html.matches("<div class=\"table-box\"><table>").count(),
        tables
    );
    assert!(html.contains(".table-box { max-width: 100%; overflow-x: auto;"));
    let period = pulseplan::units::eng(
        out.bench.period.unwrap().period,
        pulseplan::units::Dim::Time,
    );
    assert!(html.contains(&format!(
        "<div class=\"k\">period</div><div class=\"v\">{period}</div>"
    )));
    assert!(html.contains("<div class=\"k\">sample rate</div>"));
    // Headings keep with what follows on paper.
    assert!(html.contains("h1, h2, h3 { break-after: avoid; page-break-after: avoid; }"));
}

#[test]
fn design_sweep_shows_a_fast_mode_hump_whole() {
    // A minor 143 ns mode: widths near it read h badly (a hump well above 100 %), while the
    // plan is sized on the slow modes. The sweep must start where narrower pulses do better
    // than the planned one, not on top of the hump.
    let text = include_str!("browser/minor-fast-mode.toml");
    let (sc, out) = planned(text, "minor-fast");
    let dc = figures::design_curve(&sc, &out, 80, &mut |_, _| {});
    let first = dc.points[0];
    assert!(
        first.0 <= out.prep.tau_fast / 30.0,
        "starts at {:e}",
        first.0
    );
    assert!(
        first.1 <= dc.planned_value,
        "{first:?} vs {:e}",
        dc.planned_value
    );
    let peak = dc
        .points
        .iter()
        .filter(|p| p.0 < dc.planned_width)
        .map(|p| p.1)
        .fold(0.0, f64::max);
    assert!(peak > 1.0, "the hump is drawn: {peak}");
    let svg = figures::design_svg(&dc, &[]).unwrap();
    assert!(svg.contains("fastest time scale 142.9 ns"));
    assert_labels_clear(&svg, "minor-fast/design.svg");
}
