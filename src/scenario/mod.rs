//! Scenario files: the TOML schema, validation with file:line messages, and conversion into
//! the model types the rest of the library uses.

mod circuit;
mod instruments;
mod reader;

pub use reader::ScenarioError;
use reader::{Qty, Reader, SList, SQty};

use crate::bench::Bench;
use crate::estimate::Metric;
use crate::network::{Network, NetworkError, NetworkSpec};
use crate::plan::{AreaRule, MetricChoice, PlanSettings};
use crate::pulse::{Convention, Trapezoid};
use crate::units::{self, Dim, Signal};
use serde::Deserialize;
use std::ops::Range;
use std::path::Path;
use toml::Spanned;

/// The user's own pulse from `[pulse]`.
#[derive(Debug, Clone, PartialEq)]
pub struct GivenPulse {
    /// The trapezoid it describes.
    pub pulse: Trapezoid,
    /// The convention its figures were written in.
    pub convention: Convention,
    /// Planned record length, if stated.
    pub run: Option<f64>,
}

/// A validated scenario.
#[derive(Debug, Clone)]
pub struct Scenario {
    /// File name as given.
    pub file: String,
    /// Short name (file stem), for output folders.
    pub name: String,
    /// Optional title.
    pub title: Option<String>,
    /// The network specification.
    pub network_spec: NetworkSpec,
    /// The analysed network.
    pub network: Network,
    /// Drive kind.
    pub drive: Signal,
    /// What the output is: a voltage, or a current (a netlist's `current_through`).
    pub output: Signal,
    /// How the pulse's area is chosen.
    pub area: AreaRule,
    /// Plan settings.
    pub plan: PlanSettings,
    /// The user's own pulse, if any.
    pub pulse: Option<GivenPulse>,
    /// The bench: generator, capture and circuit limits (all optional).
    pub bench: Bench,
}

#[derive(Debug, Deserialize)]
#[serde(deny_unknown_fields)]
pub(crate) struct RawScenario {
    title: Option<String>,
    network: Option<Spanned<RawNetwork>>,
    drive: Option<Spanned<RawDrive>>,
    plan: Option<RawPlan>,
    pulse: Option<Spanned<RawPulse>>,
    pub(crate) generator: Option<Spanned<instruments::RawGenerator>>,
    pub(crate) capture: Option<Spanned<instruments::RawCapture>>,
    pub(crate) limits: Option<Spanned<instruments::RawLimits>>,
}

#[derive(Debug, Deserialize)]
#[serde(deny_unknown_fields)]
struct RawNetwork {
    time_constants: Option<SList>,
    numerator: Option<SList>,
    denominator: Option<SList>,
    poles: Option<SList>,
    zeros: Option<SList>,
    gain: Option<SQty>,
    input: Option<Spanned<String>>,
    output: Option<Spanned<circuit::RawOutput>>,
    source_resistance: Option<SQty>,
    parts: Option<Spanned<Vec<Spanned<circuit::RawPart>>>>,
}

#[derive(Debug, Deserialize)]
#[serde(deny_unknown_fields)]
struct RawDrive {
    kind: Option<Spanned<String>>,
    output: Option<Spanned<String>>,
    area: Option<SQty>,
}

#[derive(Debug, Deserialize)]
#[serde(deny_unknown_fields)]
struct RawPlan {
    target_error: Option<SQty>,
    metric: Option<Spanned<String>>,
    width_ratio: Option<SQty>,
    edge_ratio: Option<SQty>,
    min_width_ratio: Option<SQty>,
    significance: Option<SQty>,
    samples: Option<SQty>,
    seed: Option<SQty>,
    settle_multiple: Option<SQty>,
}

#[derive(Debug, Deserialize)]
#[serde(deny_unknown_fields)]
struct RawPulse {
    amplitude: Option<SQty>,
    width: Option<SQty>,
    rise: Option<SQty>,
    fall: Option<SQty>,
    convention: Option<Spanned<String>>,
    run: Option<SQty>,
}

/// The largest scenario file read, bytes (a scenario of 10 000 parts is under 1 MiB).
pub const MAX_SCENARIO_BYTES: u64 = 16 << 20;

fn file_error(file: &str, message: String) -> ScenarioError {
    ScenarioError {
        file: file.to_string(),
        line: 0,
        key: String::new(),
        message,
    }
}

/// The file's text: a regular file, at most [`MAX_SCENARIO_BYTES`], valid UTF-8.
fn read_text(path: &Path, file: &str) -> Result<String, ScenarioError> {
    use std::io::Read;
    let cannot =
        |e: std::io::Error| file_error(file, format!("cannot read the scenario file: {e}"));
    let meta = std::fs::metadata(path).map_err(cannot)?;
    if !meta.is_file() {
        return Err(file_error(
            file,
            "is not a regular file: give the path of a scenario file (folders, pipes and devices are not read)".into(),
        ));
    }
    let too_big = || {
        file_error(
            file,
            format!(
                "is larger than the {} MiB a scenario may have",
                MAX_SCENARIO_BYTES >> 20
            ),
        )
    };
    if meta.len() > MAX_SCENARIO_BYTES {
        return Err(too_big());
    }
    let mut bytes = Vec::new();
    std::fs::File::open(path)
        .and_then(|f| f.take(MAX_SCENARIO_BYTES + 1).read_to_end(&mut bytes))
        .map_err(cannot)?;
    if bytes.len() as u64 > MAX_SCENARIO_BYTES {
        return Err(too_big());
    }
    String::from_utf8(bytes).map_err(|e| {
        let at = e.utf8_error().valid_up_to();
        let head = &e.as_bytes()[..at];
        let line = head.iter().filter(|&&b| b == b'\n').count() + 1;
        let column = at - head.iter().rposition(|&b| b == b'\n').map_or(0, |i| i + 1) + 1;
        ScenarioError {
            file: file.to_string(),
            line,
            key: "(text)".into(),
            message: format!(
                "byte {column} of this line is not valid UTF-8 (save the file as UTF-8)"
            ),
        }
    })
}

/// Read and validate a scenario file.
pub fn load(path: &Path) -> Result<Scenario, ScenarioError> {
    let file = path.display().to_string();
    let text = read_text(path, &file)?;
    let name = path
        .file_stem()
        .map(|s| s.to_string_lossy().into_owned())
        .unwrap_or_else(|| "scenario".into());
    parse(&file, &name, &text)
}

/// Parse and validate scenario text (`file` is used in messages only).
pub fn parse(file: &str, name: &str, text: &str) -> Result<Scenario, ScenarioError> {
    let rd = Reader::new(file, text);
    let raw: RawScenario = toml::from_str(text).map_err(|e| {
        let span = e.span();
        let mut msg = e.message().trim().to_string();
        if msg.contains("invalid float") || msg.contains("invalid number") || msg.contains("string values must be quoted") {
            msg.push_str(" (quantities with prefixes or units must be quoted, e.g. \"25.13k\" or \"4.7 nF\")");
        }
        rd.err(span.as_ref(), "(syntax)", msg)
    })?;
    let net_raw = raw
        .network
        .as_ref()
        .ok_or_else(|| rd.err(None, "network", "the [network] section is missing: give time_constants, numerator/denominator, poles/zeros/gain, or a netlist (input, output, parts)"))?;
    let (drive, output_kind, area) = drive(&rd, raw.drive.as_ref())?;
    let bench = instruments::bench(&rd, &raw.generator, &raw.capture, &raw.limits, drive)?;
    let generator_resistance = bench.generator.as_ref().and_then(|g| g.output_resistance);
    let network_spec = network_spec(&rd, net_raw, drive, generator_resistance)?;
    let network = Network::from_spec(&network_spec).map_err(|e| network_error(&rd, net_raw, e))?;
    let output = output_kind_of(&rd, raw.drive.as_ref(), &network_spec, output_kind)?;

    let mut plan = plan_settings(&rd, raw.plan.as_ref())?;
    settle_metric(&rd, raw.plan.as_ref(), &network, &mut plan)?;
    let pulse = match &raw.pulse {
        Some(p) => Some(given_pulse(&rd, p, drive)?),
        None => None,
    };
    Ok(Scenario {
        file: file.to_string(),
        name: name.to_string(),
        title: raw.title,
        network_spec,
        network,
        drive,
        area,
        output,
        plan,
        pulse,
        bench,
    })
}

fn network_spec(
    rd: &Reader,
    net: &Spanned<RawNetwork>,
    drive: Signal,
    generator_resistance: Option<f64>,
) -> Result<NetworkSpec, ScenarioError> {
    let n = net.get_ref();
    let forms: Vec<(&str, Range<usize>)> = [
        (
            "time_constants",
            n.time_constants.as_ref().map(|l| l.span()),
        ),
        (
            "numerator/denominator",
            n.numerator
                .as_ref()
                .or(n.denominator.as_ref())
                .map(|l| l.span()),
        ),
        (
            "poles/zeros/gain",
            n.poles
                .as_ref()
                .or(n.zeros.as_ref())
                .map(|l| l.span())
                .or(n.gain.as_ref().map(|g| g.span())),
        ),
        (
            "parts/input/output",
            n.parts
                .as_ref()
                .map(|l| l.span())
                .or(n.input.as_ref().map(|i| i.span()))
                .or(n.output.as_ref().map(|o| o.span()))
                .or(n.source_resistance.as_ref().map(|o| o.span())),
        ),
    ]
    .into_iter()
    .filter_map(|(name, span)| span.map(|s| (name, s)))
    .collect();
    match forms.len() {
        0 => {
            return Err(rd.err(
                Some(&net.span()),
                "network",
                "no network form given: use time_constants, numerator/denominator, poles/zeros/gain, or a netlist (input, output, parts)",
            ));
        }
        1 => {}
        _ => {
            let mut sorted = forms.clone();
            sorted.sort_by_key(|f| f.1.start);
            return Err(rd.err(
                Some(&sorted[1].1),
                &format!("network.{}", sorted[1].0.split('/').next().unwrap_or("")),
                format!(
                    "two network forms at once ({} and {}); give exactly one",
                    sorted[0].0, sorted[1].0
                ),
            ));
        }
    }
    if n.parts.is_some() || n.input.is_some() || n.output.is_some() || n.source_resistance.is_some()
    {
        let c = circuit::RawCircuit {
            input: n.input.as_ref(),
            output: n.output.as_ref(),
            source_resistance: n.source_resistance.as_ref(),
            parts: n.parts.as_ref(),
        };
        return Ok(NetworkSpec::Netlist(circuit::netlist_spec(
            rd,
            &net.span(),
            c,
            drive,
            generator_resistance,
        )?));
    }
    if let Some(l) = &n.time_constants {
        let taus = rd.list(l, "network.time_constants", Dim::Time)?;
        if taus.is_empty() {
            return Err(rd.err(Some(&l.span()), "network.time_constants", "is empty"));
        }
        for (i, (t, q)) in taus.iter().zip(l.get_ref()).enumerate() {
            if *t <= 0.0 {
                return Err(rd.err(
                    Some(&q.span()),
                    &format!("network.time_constants[{i}]"),
                    format!("time constant must be positive, got {}", rd.shown(q)),
                ));
            }
        }
        return Ok(NetworkSpec::TimeConstants(taus));
    }
    if n.numerator.is_some() || n.denominator.is_some() {
        let num_l = n.numerator.as_ref().ok_or_else(|| {
            rd.err(
                Some(&net.span()),
                "network.numerator",
                "denominator given without numerator",
            )
        })?;
        let den_l = n.denominator.as_ref().ok_or_else(|| {
            rd.err(
                Some(&num_l.span()),
                "network.denominator",
                "numerator given without denominator",
            )
        })?;
        let numerator = rd.list(num_l, "network.numerator", Dim::Number)?;
        let denominator = rd.list(den_l, "network.denominator", Dim::Number)?;
        if denominator.iter().all(|&c| c == 0.0) {
            return Err(rd.err(
                Some(&den_l.span()),
                "network.denominator",
                "is zero (or empty): H(s) would be undefined",
            ));
        }
        if numerator.iter().all(|&c| c == 0.0) {
            return Err(rd.err(
                Some(&num_l.span()),
                "network.numerator",
                "is zero (or empty): the network has no response to measure",
            ));
        }
        if denominator.len() - denominator.iter().position(|&c| c != 0.0).unwrap_or(0) < 2 {
            return Err(rd.err(
                Some(&den_l.span()),
                "network.denominator",
                "is a constant: H(s) has no poles, so there is no impulse response to plan for",
            ));
        }
        return Ok(NetworkSpec::Polynomial {
            numerator,
            denominator,
        });
    }
    let poles_l = n.poles.as_ref().ok_or_else(|| {
        rd.err(
            Some(&net.span()),
            "network.poles",
            "zeros/gain given without poles",
        )
    })?;
    let poles = rd.complex_list(poles_l, "network.poles")?;
    if poles.is_empty() {
        return Err(rd.err(Some(&poles_l.span()), "network.poles", "is empty"));
    }
    let zeros = match &n.zeros {
        Some(z) => rd.complex_list(z, "network.zeros")?,
        None => Vec::new(),
    };
    let gain = match &n.gain {
        Some(g) => rd.number(g, "network.gain", Dim::Number)?,
        None => 1.0,
    };
    if gain == 0.0 {
        let span = n.gain.as_ref().map(|g| g.span());
        return Err(rd.err(
            span.as_ref(),
            "network.gain",
            "is zero: the network has no response",
        ));
    }
    for (key, list, values) in [
        ("network.poles", poles_l, &poles),
        ("network.zeros", n.zeros.as_ref().unwrap_or(poles_l), &zeros),
    ] {
        for (i, z) in values.iter().enumerate() {
            let tol = 1e-12 * z.norm();
            if z.im != 0.0 && !values.iter().any(|w| (w - z.conj()).norm() <= tol) {
                let span = list.get_ref().get(i).map(|q| q.span());
                return Err(rd.err(
                    span.as_ref(),
                    &format!("{key}[{i}]"),
                    format!(
                        "complex value {}{:+}j has no conjugate partner {}{:+}j in the list; conjugate pairs are required",
                        z.re, z.im, z.re, -z.im
                    ),
                ));
            }
        }
    }
    Ok(NetworkSpec::ZeroPoleGain { zeros, poles, gain })
}

fn network_error(rd: &Reader, net: &Spanned<RawNetwork>, e: NetworkError) -> ScenarioError {
    match e {
        NetworkError::Netlist(ne) => {
            // Errors without a part line concern the input or output: point at that key.
            let n = net.get_ref();
            let output_names: Vec<String> = match n.output.as_ref().map(|o| o.get_ref()) {
                Some(circuit::RawOutput::Node(a)) => vec![a.clone()],
                Some(circuit::RawOutput::Pair(v)) => v.clone(),
                Some(circuit::RawOutput::Through { current_through }) => {
                    vec![current_through.clone()]
                }
                None => Vec::new(),
            };
            let span = if output_names.iter().any(|o| ne.culprit.contains(o.as_str())) {
                n.output.as_ref().map(|o| o.span())
            } else if n.input.as_ref().is_some_and(|i| ne.culprit == *i.get_ref()) {
                n.input.as_ref().map(|i| i.span())
            } else {
                None
            };
            let key = match &span {
                // An error with a part's line is that part's (a duplicate name, a bad value…).
                _ if ne.line.is_some() => "network.parts",
                Some(_) if n.input.as_ref().is_some_and(|i| ne.culprit == *i.get_ref()) => {
                    "network.input"
                }
                Some(_) => "network.output",
                None => "network",
            };
            ScenarioError {
                file: rd.file.to_string(),
                line: ne
                    .line
                    .or_else(|| span.as_ref().map(|s| rd.line_of(s)))
                    .unwrap_or_else(|| rd.line_of(&net.span())),
                key: format!("{key}: {}", ne.culprit),
                message: ne.message,
            }
        }
        other => rd.err(Some(&net.span()), "network", other.to_string()),
    }
}

/// The output's kind: a netlist says it (a current through a part, else a voltage); the
/// transfer-function forms take `[drive] output` (default: a voltage).
fn output_kind_of(
    rd: &Reader,
    d: Option<&Spanned<RawDrive>>,
    spec: &NetworkSpec,
    given: Option<Signal>,
) -> Result<Signal, ScenarioError> {
    let NetworkSpec::Netlist(n) = spec else {
        return Ok(given.unwrap_or(Signal::Voltage));
    };
    let own = match n.output {
        crate::netlist::Output::CurrentThrough(_) => Signal::Current,
        _ => Signal::Voltage,
    };
    if given.is_some_and(|g| g != own) {
        let span = d
            .and_then(|d| d.get_ref().output.as_ref())
            .map(|o| o.span());
        return Err(rd.err(
            span.as_ref(),
            "drive.output",
            "contradicts the netlist's output (network.output decides it for a circuit: a node or \
             a pair is a voltage, current_through a current); leave drive.output out",
        ));
    }
    Ok(own)
}

/// A signal kind written as "voltage" or "current".
fn signal(rd: &Reader, k: &Spanned<String>, key: &str) -> Result<Signal, ScenarioError> {
    match k.get_ref().as_str() {
        "voltage" => Ok(Signal::Voltage),
        "current" => Ok(Signal::Current),
        other => Err(rd.err(
            Some(&k.span()),
            key,
            format!("\"{other}\" is not a signal kind; use \"voltage\" or \"current\""),
        )),
    }
}

/// `[drive]`: the drive's kind, the output's kind (transfer-function forms), the area rule.
fn drive(
    rd: &Reader,
    d: Option<&Spanned<RawDrive>>,
) -> Result<(Signal, Option<Signal>, AreaRule), ScenarioError> {
    let Some(d) = d else {
        return Ok((
            Signal::Voltage,
            None,
            AreaRule::default_for(Signal::Voltage),
        ));
    };
    let raw = d.get_ref();
    let kind = match &raw.kind {
        None => Signal::Voltage,
        Some(k) => signal(rd, k, "drive.kind")?,
    };
    let output = raw
        .output
        .as_ref()
        .map(|k| signal(rd, k, "drive.output"))
        .transpose()?;
    let area = match &raw.area {
        None => AreaRule::default_for(kind),
        Some(q) => AreaRule::Given {
            area: area_value(rd, q, kind)?,
        },
    };
    Ok((kind, output, area))
}

/// An area in V·s (voltage drive) or A·s (current drive); the other kind's unit is refused.
fn area_value(rd: &Reader, q: &SQty, kind: Signal) -> Result<f64, ScenarioError> {
    let Qty::Text(t) = q.get_ref() else {
        return rd.positive(q, "drive.area", Dim::Number);
    };
    let other = match kind {
        Signal::Voltage => Signal::Current,
        Signal::Current => Signal::Voltage,
    };
    if strip_area_unit(t, other) != t.trim() {
        return Err(rd.err(
            Some(&q.span()),
            "drive.area",
            format!(
                "\"{t}\" is in {}, but a {} drive's area is in {} (e.g. \"10 n{}\")",
                other.area_unit(),
                match kind {
                    Signal::Voltage => "voltage",
                    Signal::Current => "current",
                },
                kind.area_unit(),
                kind.area_unit()
            ),
        ));
    }
    let stripped = Spanned::new(q.span(), Qty::Text(strip_area_unit(t, kind).to_string()));
    rd.positive(&stripped, "drive.area", Dim::Number)
}

fn strip_area_unit(text: &str, kind: Signal) -> &str {
    let units: &[&str] = match kind {
        Signal::Voltage => &["V·s", "V*s", "Vs", "V s"],
        Signal::Current => &["A·s", "A*s", "As", "A s"],
    };
    let t = text.trim();
    units
        .iter()
        .find_map(|u| t.strip_suffix(u))
        .map_or(t, str::trim)
}

/// The default metric for the network when none is given; a reading at 0⁺ is refused for a
/// network whose h(0⁺) = 0 (it would be compared with zero).
fn settle_metric(
    rd: &Reader,
    p: Option<&RawPlan>,
    net: &Network,
    s: &mut PlanSettings,
) -> Result<(), ScenarioError> {
    if s.metric_choice == MetricChoice::ByNetwork {
        s.metric = crate::plan::default_metric(net);
        return Ok(());
    }
    if s.metric != Metric::Window && net.h0_negligible() && net.residues_known {
        let span = p.and_then(|p| p.metric.as_ref()).map(|m| m.span());
        return Err(rd.err(
            span.as_ref(),
            "plan.metric",
            format!(
                "\"{}\" judges the reading at the pulse's end, but h(0⁺) = 0 for this network (its \
                 response starts from zero, so that reading is compared with ≈ 0 and means nothing). Use \
                 metric = \"window\" (the error over the whole window, against the peak |h|), or leave \
                 metric out for that default",
                s.metric.name()
            ),
        ));
    }
    Ok(())
}

fn plan_settings(rd: &Reader, p: Option<&RawPlan>) -> Result<PlanSettings, ScenarioError> {
    let mut s = PlanSettings::default();
    let Some(p) = p else { return Ok(s) };
    if let Some(q) = &p.target_error {
        let v = rd.fraction(q, "plan.target_error")?;
        if v <= 0.0 {
            return Err(rd.err(
                Some(&q.span()),
                "plan.target_error",
                format!("must be positive, got {}", rd.shown(q)),
            ));
        }
        if v >= 1.0 {
            return Err(rd.err(
                Some(&q.span()),
                "plan.target_error",
                format!(
                    "{} is not a useful error budget; give e.g. \"1 %\"",
                    units::percent(v)
                ),
            ));
        }
        s.target_error = Some(v);
    }
    if let Some(m) = &p.metric {
        s.metric_choice = MetricChoice::Given;
        s.metric = match m.get_ref().as_str() {
            "t0" => Metric::T0,
            "t0-aligned" => Metric::T0Aligned,
            "window" => Metric::Window,
            other => {
                return Err(rd.err(
                    Some(&m.span()),
                    "plan.metric",
                    format!(
                        "\"{other}\" is not a metric; use \"t0\", \"t0-aligned\" or \"window\""
                    ),
                ));
            }
        };
    }
    if let Some(q) = &p.width_ratio {
        s.width_ratio = rd.positive(q, "plan.width_ratio", Dim::Number)?;
    }
    if let Some(q) = &p.samples {
        s.samples = Some(rd.positive(q, "plan.samples", Dim::Number)? as usize);
    }
    if let Some(q) = &p.seed {
        let v = rd.number(q, "plan.seed", Dim::Number)?;
        if v < 0.0 || v.fract() != 0.0 {
            return Err(rd.err(Some(&q.span()), "plan.seed", "must be a whole number ≥ 0"));
        }
        s.seed = v as u64;
    }
    if let Some(q) = &p.significance {
        let v = rd.fraction(q, "plan.significance")?;
        if !(0.0..1.0).contains(&v) {
            return Err(rd.err(
                Some(&q.span()),
                "plan.significance",
                "must be between 0 and 100 %",
            ));
        }
        s.significance = v;
    }
    if let Some(q) = &p.min_width_ratio {
        s.min_width_ratio = Some(rd.positive(q, "plan.min_width_ratio", Dim::Number)?);
    }
    if let Some(q) = &p.edge_ratio {
        s.edge_ratio = rd.positive(q, "plan.edge_ratio", Dim::Number)?;
        if s.edge_ratio <= 1.25 {
            return Err(rd.err(
                Some(&q.span()),
                "plan.edge_ratio",
                "must exceed 1.25: slower edges leave no flat top at the 50 % width",
            ));
        }
    }
    if let Some(q) = &p.settle_multiple {
        s.settle_multiple = rd.positive(q, "plan.settle_multiple", Dim::Number)?;
    }
    Ok(s)
}

fn given_pulse(
    rd: &Reader,
    p: &Spanned<RawPulse>,
    kind: Signal,
) -> Result<GivenPulse, ScenarioError> {
    let raw = p.get_ref();
    let need = |q: &Option<SQty>, key: &str| {
        q.clone()
            .ok_or_else(|| rd.err(Some(&p.span()), key, "is required in [pulse]"))
    };
    let amplitude = rd.number(
        &need(&raw.amplitude, "pulse.amplitude")?,
        "pulse.amplitude",
        kind.dim(),
    )?;
    if amplitude == 0.0 {
        let span = raw.amplitude.as_ref().map(|q| q.span());
        return Err(rd.err(span.as_ref(), "pulse.amplitude", "is zero: no pulse"));
    }
    let width_q = need(&raw.width, "pulse.width")?;
    let width = rd.positive(&width_q, "pulse.width", Dim::Time)?;
    let edge = |q: &Option<SQty>, key: &str| -> Result<f64, ScenarioError> {
        match q {
            None => Err(rd.err(
                Some(&p.span()),
                key,
                "is required in [pulse]: the edge's duration (10–90 % in the generator convention, \
                 the full ramp in the ramp convention); write \"0 s\" for an ideal edge",
            )),
            Some(q) => {
                let v = rd.number(q, key, Dim::Time)?;
                if v < 0.0 {
                    return Err(rd.err(Some(&q.span()), key, "must not be negative"));
                }
                Ok(v)
            }
        }
    };
    let rise = edge(&raw.rise, "pulse.rise")?;
    let fall = edge(&raw.fall, "pulse.fall")?;
    let convention = match &raw.convention {
        None => Convention::Generator,
        Some(c) => match c.get_ref().as_str() {
            "generator" => Convention::Generator,
            "ramp" => Convention::Ramp,
            other => {
                return Err(rd.err(
                    Some(&c.span()),
                    "pulse.convention",
                    format!("\"{other}\" is not a convention; use \"generator\" or \"ramp\""),
                ));
            }
        },
    };
    let run = match &raw.run {
        None => None,
        Some(q) => Some(rd.positive(q, "pulse.run", Dim::Time)?),
    };
    let pulse = Trapezoid::from_convention(amplitude, width, rise, fall, convention)
        .map_err(|e| rd.err(Some(&width_q.span()), "pulse.width", e.to_string()))?;
    Ok(GivenPulse {
        pulse,
        convention,
        run,
    })
}

#[cfg(test)]
mod tests {
    use super::*;

    const FULL: &str = r#"
title = "Servo-valve driver loop filter, impulse test"   # optional
[network]
time_constants = ["12 ms", "300 us"]
[drive]
kind = "voltage"
area = 1.0
[plan]
target_error = "1 %"
metric = "t0"
width_ratio = 100
edge_ratio = 100
settle_multiple = 5
[pulse]
amplitude = "2 kV"
width = "500 ns"
rise = "5 ns"
fall = "5 ns"
convention = "generator"
"#;

    #[test]
    fn documented_schema_parses() {
        let s = parse("t.toml", "t", FULL).unwrap();
        assert_eq!(s.network.modes.len(), 2);
        assert_eq!(s.plan.target_error, Some(0.01));
        let p = s.pulse.unwrap().pulse;
        assert!((p.amplitude - 2000.0).abs() < 1e-12);
        assert!((p.width_50() - 500e-9).abs() < 1e-20);
    }

    #[test]
    fn errors_name_key_and_line() {
        let cases: &[(&str, &str, usize)] = &[
            (
                "[network]\ntime_constants = [\"4.7 nf\"]\n",
                "network.time_constants[0]",
                2,
            ),
            ("[drive]\nkind = \"voltage\"\n", "network", 1),
            (
                "[network]\ntime_constants = [\"1 ms\"]\nnumerator = [1.0]\ndenominator = [1.0, 2.0]\n",
                "network.numerator",
                3,
            ),
            (
                "[network]\npoles = [\n \"-1+2j\",\n \"-1-3j\"]\n",
                "network.poles[0]",
                3,
            ),
            (
                "[network]\nnumerator = [1.0]\ndenominator = [0, 0.0]\n",
                "network.denominator",
                3,
            ),
            (
                "[network]\nnumerator = [1.0]\ndenominator = [1.0, nan]\n",
                "network.denominator[1]",
                3,
            ),
            (
                "[network]\nnumerator = [1.0]\ndenominator = [1.0, \"NaN\"]\n",
                "network.denominator[1]",
                3,
            ),
        ];
        for (text, key, line) in cases {
            let e = parse("bad.toml", "bad", text).unwrap_err();
            assert_eq!(&e.key, key, "{e}");
            assert_eq!(e.line, *line, "{e}");
            assert!(e.to_string().starts_with(&format!("bad.toml:{line}:")));
        }
    }
}
