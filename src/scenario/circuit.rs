//! The netlist form of `[network]`: input, output, source resistance and parts.

use super::reader::{Reader, SQty, ScenarioError};
use crate::netlist::{NetlistSpec, Output, Part, PartKind, Stimulus};
use crate::units::{Dim, Signal};
use serde::Deserialize;
use toml::Spanned;

/// The most parts a netlist may have. Circuits of resistors and capacitors (or resistors and
/// inductors) take the symmetric path, whose cost a 10 000-part ladder keeps to seconds;
/// other circuits are further held to `netlist::MAX_GENERAL_ORDER` unknowns.
pub const MAX_PARTS: usize = 10_000;

/// Where the output is taken.
#[derive(Debug, Clone, Deserialize)]
#[serde(untagged)]
pub(crate) enum RawOutput {
    Node(String),
    Pair(Vec<String>),
    Through { current_through: String },
}

/// One entry of `parts`.
#[derive(Debug, Clone, Deserialize)]
#[serde(deny_unknown_fields)]
pub(crate) struct RawPart {
    name: Option<String>,
    kind: Option<String>,
    nodes: Option<Vec<String>>,
    value: Option<SQty>,
    tolerance: Option<SQty>,
    inductors: Option<Vec<String>>,
    k: Option<SQty>,
    plus: Option<String>,
    minus: Option<String>,
    output: Option<String>,
    gain: Option<SQty>,
    gbw: Option<SQty>,
    control: Option<Vec<String>>,
    sense: Option<String>,
}

/// The netlist keys of `[network]`.
pub(crate) struct RawCircuit<'a> {
    pub input: Option<&'a Spanned<String>>,
    pub output: Option<&'a Spanned<RawOutput>>,
    pub source_resistance: Option<&'a SQty>,
    pub parts: Option<&'a Spanned<Vec<Spanned<RawPart>>>>,
}

fn pair(
    rd: &Reader,
    span: &std::ops::Range<usize>,
    key: &str,
    v: &Option<Vec<String>>,
) -> Result<[String; 2], ScenarioError> {
    match v.as_deref() {
        Some([a, b]) => Ok([a.clone(), b.clone()]),
        Some(other) => Err(rd.err(
            Some(span),
            key,
            format!("needs exactly two names, got {}", other.len()),
        )),
        None => Err(rd.err(Some(span), key, "is required for this kind of part")),
    }
}

/// Ground is "gnd" (or "ground"); a node named "0" is refused with what to write instead.
fn not_zero_ground(
    rd: &Reader,
    span: &std::ops::Range<usize>,
    key: &str,
    node: &str,
) -> Result<(), ScenarioError> {
    if node.trim() == "0" {
        return Err(rd.err(
            Some(span),
            key,
            "a node named \"0\" is not ground here: write \"gnd\" (or \"ground\") for the ground node",
        ));
    }
    Ok(())
}

fn need_str(
    rd: &Reader,
    span: &std::ops::Range<usize>,
    key: &str,
    v: &Option<String>,
) -> Result<String, ScenarioError> {
    v.clone()
        .ok_or_else(|| rd.err(Some(span), key, "is required for this kind of part"))
}

fn need_qty(
    rd: &Reader,
    span: &std::ops::Range<usize>,
    key: &str,
    v: &Option<SQty>,
    dim: Dim,
) -> Result<f64, ScenarioError> {
    match v {
        Some(q) => rd.number(q, key, dim),
        None => Err(rd.err(Some(span), key, "is required for this kind of part")),
    }
}

fn part(rd: &Reader, i: usize, sp: &Spanned<RawPart>) -> Result<Part, ScenarioError> {
    let span = sp.span();
    let p = sp.get_ref();
    let line = rd.line_of(&span);
    let base = format!("network.parts[{i}]");
    let name = p.name.clone().ok_or_else(|| {
        rd.err(
            Some(&span),
            &format!("{base}.name"),
            "every part needs a name",
        )
    })?;
    let key = |k: &str| format!("{base} ({name}).{k}");
    let named_nodes = p
        .nodes
        .iter()
        .chain(p.control.iter())
        .flatten()
        .chain([&p.plus, &p.minus, &p.output].into_iter().flatten());
    for n in named_nodes {
        not_zero_ground(rd, &span, &key("nodes"), n)?;
    }
    let kind_text = p
        .kind
        .clone()
        .ok_or_else(|| rd.err(Some(&span), &key("kind"), "every part needs a kind"))?;
    let kind = part_kind(rd, &span, &key, p, &kind_text)?;
    let tolerance = part_tolerance(rd, &key, p)?;
    Ok(Part {
        name,
        kind,
        line,
        tolerance,
    })
}

/// The part's kind and its values, by `kind`.
fn part_kind(
    rd: &Reader,
    span: &std::ops::Range<usize>,
    key: &dyn Fn(&str) -> String,
    p: &RawPart,
    kind_text: &str,
) -> Result<PartKind, ScenarioError> {
    let span = span.clone();
    let value = |dim: Dim| need_qty(rd, &span, &key("value"), &p.value, dim);
    let gain = |dim: Dim| need_qty(rd, &span, &key("gain"), &p.gain, dim);
    let nodes = || pair(rd, &span, &key("nodes"), &p.nodes);
    let control = || pair(rd, &span, &key("control"), &p.control);
    let sense = || need_str(rd, &span, &key("sense"), &p.sense);
    let kind = match kind_text {
        "resistor" => PartKind::Resistor {
            nodes: nodes()?,
            value: value(Dim::Resistance)?,
        },
        "capacitor" => PartKind::Capacitor {
            nodes: nodes()?,
            value: value(Dim::Capacitance)?,
        },
        "inductor" => PartKind::Inductor {
            nodes: nodes()?,
            value: value(Dim::Inductance)?,
        },
        "coupling" => PartKind::Coupling {
            inductors: pair(rd, &span, &key("inductors"), &p.inductors)?,
            k: need_qty(rd, &span, &key("k"), &p.k, Dim::Number)?,
        },
        "opamp" => PartKind::OpAmp {
            plus: need_str(rd, &span, &key("plus"), &p.plus)?,
            minus: need_str(rd, &span, &key("minus"), &p.minus)?,
            output: need_str(rd, &span, &key("output"), &p.output)?,
            gain: p
                .gain
                .as_ref()
                .map(|q| rd.positive(q, &key("gain"), Dim::Number))
                .transpose()?,
            gbw: p
                .gbw
                .as_ref()
                .map(|q| rd.positive(q, &key("gbw"), Dim::Frequency))
                .transpose()?,
        },
        "vcvs" => PartKind::Vcvs {
            nodes: nodes()?,
            control: control()?,
            gain: gain(Dim::Number)?,
        },
        "vccs" => PartKind::Vccs {
            nodes: nodes()?,
            control: control()?,
            gain: gain(Dim::Conductance)?,
        },
        "cccs" => PartKind::Cccs {
            nodes: nodes()?,
            sense: sense()?,
            gain: gain(Dim::Number)?,
        },
        "ccvs" => PartKind::Ccvs {
            nodes: nodes()?,
            sense: sense()?,
            gain: gain(Dim::Resistance)?,
        },
        other => {
            return Err(rd.err(
                Some(&span),
                &key("kind"),
                format!(
                    "\"{other}\" is not a part kind; use resistor, capacitor, inductor, coupling, opamp, vcvs, vccs, cccs or ccvs"
                ),
            ));
        }
    };
    Ok(kind)
}

/// The part's tolerance, a percentage in [0, 100 %).
fn part_tolerance(
    rd: &Reader,
    key: &dyn Fn(&str) -> String,
    p: &RawPart,
) -> Result<Option<f64>, ScenarioError> {
    p.tolerance
        .as_ref()
        .map(|q| {
            let t = rd.fraction(q, &key("tolerance"))?;
            if !(0.0..1.0).contains(&t) {
                return Err(rd.err(
                    Some(&q.span()),
                    &key("tolerance"),
                    "must be between 0 and 100 %",
                ));
            }
            Ok(t)
        })
        .transpose()
}

/// Build the netlist specification.
pub(crate) fn netlist_spec(
    rd: &Reader,
    net_span: &std::ops::Range<usize>,
    c: RawCircuit,
    drive: Signal,
    generator_resistance: Option<f64>,
) -> Result<NetlistSpec, ScenarioError> {
    let input = c.input.ok_or_else(|| {
        rd.err(
            Some(net_span),
            "network.input",
            "a netlist needs the input node",
        )
    })?;
    let output = c.output.ok_or_else(|| {
        rd.err(
            Some(net_span),
            "network.output",
            "a netlist needs the output (a node, [a, b], or { current_through = \"R1\" })",
        )
    })?;
    not_zero_ground(rd, &input.span(), "network.input", input.get_ref())?;
    let out = netlist_output(rd, output)?;
    let parts = netlist_parts(rd, net_span, c.parts)?;
    let source_resistance = source_resistance(rd, c.source_resistance, generator_resistance)?;
    Ok(NetlistSpec {
        input: input.get_ref().clone(),
        output: out,
        source_resistance,
        stimulus: match drive {
            Signal::Voltage => Stimulus::Voltage,
            Signal::Current => Stimulus::Current,
        },
        parts,
    })
}

/// The output: a node, two nodes, or a part's current (no node named "0").
fn netlist_output(rd: &Reader, output: &Spanned<RawOutput>) -> Result<Output, ScenarioError> {
    let named: Vec<&String> = match output.get_ref() {
        RawOutput::Node(n) => vec![n],
        RawOutput::Pair(v) => v.iter().collect(),
        RawOutput::Through { .. } => Vec::new(),
    };
    for n in named {
        not_zero_ground(rd, &output.span(), "network.output", n)?;
    }
    Ok(match output.get_ref() {
        RawOutput::Node(n) => Output::Node(n.clone()),
        RawOutput::Pair(v) if v.len() == 2 => Output::Differential(v[0].clone(), v[1].clone()),
        RawOutput::Pair(v) => {
            return Err(rd.err(
                Some(&output.span()),
                "network.output",
                format!("a differential output needs two nodes, got {}", v.len()),
            ));
        }
        RawOutput::Through { current_through } => Output::CurrentThrough(current_through.clone()),
    })
}

/// The parts: present, at most [`MAX_PARTS`], each read, not empty.
fn netlist_parts(
    rd: &Reader,
    net_span: &std::ops::Range<usize>,
    parts: Option<&Spanned<Vec<Spanned<RawPart>>>>,
) -> Result<Vec<Part>, ScenarioError> {
    let parts_l = parts
        .ok_or_else(|| rd.err(Some(net_span), "network.parts", "a netlist needs its parts"))?;
    if parts_l.get_ref().len() > MAX_PARTS {
        return Err(rd.err(
            Some(&parts_l.span()),
            "network.parts",
            format!(
                "has {} parts; at most {MAX_PARTS} are analysed",
                parts_l.get_ref().len()
            ),
        ));
    }
    let parts = parts_l
        .get_ref()
        .iter()
        .enumerate()
        .map(|(i, p)| part(rd, i, p))
        .collect::<Result<Vec<_>, _>>()?;
    if parts.is_empty() {
        return Err(rd.err(Some(&parts_l.span()), "network.parts", "is empty"));
    }
    Ok(parts)
}

/// The source resistance: stated (not negative, agreeing with the generator's output
/// resistance when both are given) or the generator's.
fn source_resistance(
    rd: &Reader,
    stated: Option<&SQty>,
    generator_resistance: Option<f64>,
) -> Result<Option<f64>, ScenarioError> {
    let Some(q) = stated else {
        return Ok(generator_resistance);
    };
    let v = rd.number(q, "network.source_resistance", Dim::Resistance)?;
    if v < 0.0 {
        return Err(rd.err(
            Some(&q.span()),
            "network.source_resistance",
            "must not be negative",
        ));
    }
    if let Some(g) = generator_resistance.filter(|&g| (g - v).abs() > 1e-9 * v.max(g)) {
        return Err(rd.err(
            Some(&q.span()),
            "network.source_resistance",
            format!(
                "{} disagrees with [generator] output_resistance ({}); they describe the same resistance, give one",
                rd.shown(q),
                crate::units::eng(g, Dim::Resistance)
            ),
        ));
    }
    Ok(Some(v))
}
