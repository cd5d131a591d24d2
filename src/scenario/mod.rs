//! Scenario files: the TOML schema, validation with file:line messages, and conversion into
//! the model types the rest of the library uses.

mod circuit;
mod forms;
mod instruments;
mod planning;
mod reader;

pub use planning::MAX_SAMPLES;
pub use reader::ScenarioError;
use reader::{Qty, Reader, SQty};

use crate::bench::Bench;
use crate::network::{Network, NetworkSpec};
use crate::plan::{AreaRule, PlanSettings};
use crate::pulse::{Convention, Trapezoid};
use crate::units::{Dim, Signal};
use serde::Deserialize;
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
    network: Option<Spanned<forms::RawNetwork>>,
    drive: Option<Spanned<RawDrive>>,
    plan: Option<planning::RawPlan>,
    pulse: Option<Spanned<RawPulse>>,
    pub(crate) generator: Option<Spanned<instruments::RawGenerator>>,
    pub(crate) capture: Option<Spanned<instruments::RawCapture>>,
    pub(crate) limits: Option<Spanned<instruments::RawLimits>>,
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
struct RawPulse {
    amplitude: Option<SQty>,
    width: Option<SQty>,
    rise: Option<SQty>,
    fall: Option<SQty>,
    convention: Option<Spanned<String>>,
    run: Option<SQty>,
}

/// The largest pole magnitude planned for, rad/s (time scales down to 10⁻²⁴ s; with a width
/// ratio up to 10⁹ the widths stay above 10⁻³³ s and their powers in the error expansions
/// finite).
pub const MAX_POLE: f64 = 1e24;

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
    let network_spec = forms::network_spec(&rd, net_raw, drive, generator_resistance)?;
    let network =
        Network::from_spec(&network_spec).map_err(|e| forms::network_error(&rd, net_raw, e))?;
    let output = output_kind_of(&rd, raw.drive.as_ref(), &network_spec, output_kind)?;
    if let Some(m) = network.modes.iter().find(|m| m.pole.norm() > MAX_POLE) {
        return Err(rd.err(
            Some(&net_raw.span()),
            "network",
            format!(
                "has a pole of magnitude {:.3e} rad/s, beyond the {MAX_POLE:e} rad/s pulseplan \
                 plans for (a pulse a thousand-millionth of its time scale would underflow the \
                 error figures)",
                m.pole.norm()
            ),
        ));
    }

    let mut plan = planning::plan_settings(&rd, raw.plan.as_ref())?;
    planning::settle_metric(&rd, raw.plan.as_ref(), &network, &mut plan)?;
    planning::unstable_growth(&rd, raw.plan.as_ref(), &network, &plan)?;
    if plan.reading == crate::plan::ReadingKind::Fit
        && bench.capture.as_ref().and_then(|c| c.noise).is_none()
    {
        let span = raw
            .plan
            .as_ref()
            .and_then(|p| p.reading.as_ref())
            .map(|r| r.span());
        return Err(rd.err(
            span.as_ref(),
            "plan.reading",
            "reading = \"fit\" plans the test by the fit's predicted uncertainty, which needs the output \
             noise: give [capture] noise (RMS of one acquisition, e.g. \"1 mV\")",
        ));
    }
    let pulse = match &raw.pulse {
        Some(p) => Some(given_pulse(&rd, p, drive)?),
        None => None,
    };
    unstable_over_pulse(&rd, &raw, &network, &bench, pulse.as_ref())?;
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

/// An unstable mode must not grow past e^[`planning::MAX_GROWTH`] across the pulse either:
/// a generator whose least width, edge or time step is long against the growth, or a given
/// pulse that long, is refused by name.
fn unstable_over_pulse(
    rd: &Reader,
    raw: &RawScenario,
    net: &Network,
    bench: &Bench,
    pulse: Option<&GivenPulse>,
) -> Result<(), ScenarioError> {
    let grow = net.modes.iter().map(|m| m.pole.re).fold(0.0f64, f64::max);
    if grow <= 0.0 {
        return Ok(());
    }
    let limit = planning::MAX_GROWTH / grow;
    if let Some(g) = &bench.generator {
        // A width rounds up to the time step and needs its edges: a few of each.
        let longest = [
            g.min_width,
            g.min_edge.map(|e| 3.0 * e),
            g.time_step.map(|t| 4.0 * t),
        ]
        .into_iter()
        .flatten()
        .fold(0.0f64, f64::max);
        if longest > limit {
            let span = raw.generator.as_ref().map(|g| g.span());
            return Err(rd.err(
                span.as_ref(),
                "generator",
                format!(
                    "its least width, edges or time step ({}) is long against the network's \
                     unstable mode (growing as e^({}·t)): beyond {} the mode grows past \
                     e^{} and the figures overflow f64",
                    crate::units::eng(longest, Dim::Time),
                    crate::units::eng(grow, Dim::AngularFrequency),
                    crate::units::eng(limit, Dim::Time),
                    planning::MAX_GROWTH
                ),
            ));
        }
    }
    if let Some(p) = pulse {
        let longest = p.pulse.end().max(p.run.unwrap_or(0.0));
        if longest > limit {
            let span = raw.pulse.as_ref().map(|p| p.span());
            return Err(rd.err(
                span.as_ref(),
                "pulse",
                format!(
                    "the pulse and its run ({}) are long against the network's unstable mode: \
                     beyond {} it grows past e^{} and the figures overflow f64",
                    crate::units::eng(longest, Dim::Time),
                    crate::units::eng(limit, Dim::Time),
                    planning::MAX_GROWTH
                ),
            ));
        }
    }
    Ok(())
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
