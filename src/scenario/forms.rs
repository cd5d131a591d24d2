//! The four forms of `[network]`: time constants, transfer polynomials, poles/zeros/gain, or
//! a netlist; exactly one is given, and each becomes a `NetworkSpec`.

use super::circuit;
use super::reader::{COEFFICIENT_RANGE, Reader, SList, SQty, ScenarioError};
use crate::network::{NetworkError, NetworkSpec};
use crate::units::{Dim, Signal};
use serde::Deserialize;
use std::ops::Range;
use toml::Spanned;

#[derive(Debug, Deserialize)]
#[serde(deny_unknown_fields)]
pub(crate) struct RawNetwork {
    pub(crate) time_constants: Option<SList>,
    pub(crate) numerator: Option<SList>,
    pub(crate) denominator: Option<SList>,
    pub(crate) poles: Option<SList>,
    pub(crate) zeros: Option<SList>,
    pub(crate) gain: Option<SQty>,
    pub(crate) input: Option<Spanned<String>>,
    pub(crate) output: Option<Spanned<circuit::RawOutput>>,
    pub(crate) source_resistance: Option<SQty>,
    pub(crate) parts: Option<Spanned<Vec<Spanned<circuit::RawPart>>>>,
}

/// Which forms the `[network]` table uses, with the span of each; exactly one is allowed.
fn one_form(rd: &Reader, net: &Spanned<RawNetwork>) -> Result<(), ScenarioError> {
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
        0 => Err(rd.err(
            Some(&net.span()),
            "network",
            "no network form given: use time_constants, numerator/denominator, poles/zeros/gain, or a netlist (input, output, parts)",
        )),
        1 => Ok(()),
        _ => {
            let mut sorted = forms.clone();
            sorted.sort_by_key(|f| f.1.start);
            Err(rd.err(
                Some(&sorted[1].1),
                &format!("network.{}", sorted[1].0.split('/').next().unwrap_or("")),
                format!(
                    "two network forms at once ({} and {}); give exactly one",
                    sorted[0].0, sorted[1].0
                ),
            ))
        }
    }
}

/// The `[network]` table as a `NetworkSpec`.
pub(crate) fn network_spec(
    rd: &Reader,
    net: &Spanned<RawNetwork>,
    drive: Signal,
    generator_resistance: Option<f64>,
) -> Result<NetworkSpec, ScenarioError> {
    one_form(rd, net)?;
    let n = net.get_ref();
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
        return time_constants(rd, l);
    }
    if n.numerator.is_some() || n.denominator.is_some() {
        return polynomials(rd, net);
    }
    zero_pole_gain(rd, net)
}

fn time_constants(rd: &Reader, l: &SList) -> Result<NetworkSpec, ScenarioError> {
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
    Ok(NetworkSpec::TimeConstants(taus))
}

fn polynomials(rd: &Reader, net: &Spanned<RawNetwork>) -> Result<NetworkSpec, ScenarioError> {
    let n = net.get_ref();
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
    let numerator = rd.list_within(num_l, "network.numerator", Dim::Number, COEFFICIENT_RANGE)?;
    let denominator =
        rd.list_within(den_l, "network.denominator", Dim::Number, COEFFICIENT_RANGE)?;
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
    Ok(NetworkSpec::Polynomial {
        numerator,
        denominator,
    })
}

fn zero_pole_gain(rd: &Reader, net: &Spanned<RawNetwork>) -> Result<NetworkSpec, ScenarioError> {
    let n = net.get_ref();
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
        Some(g) => rd.number_within(g, "network.gain", Dim::Number, COEFFICIENT_RANGE)?,
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
    conjugates_complete(rd, "network.poles", poles_l, &poles)?;
    if let Some(zl) = &n.zeros {
        conjugates_complete(rd, "network.zeros", zl, &zeros)?;
    }
    Ok(NetworkSpec::ZeroPoleGain { zeros, poles, gain })
}

/// Every complex value of a list has its conjugate in the list (a real circuit's roots).
fn conjugates_complete(
    rd: &Reader,
    key: &str,
    list: &SList,
    values: &[num_complex::Complex64],
) -> Result<(), ScenarioError> {
    for (i, z) in values.iter().enumerate() {
        let tol = 1e-12 * z.norm();
        if z.im != 0.0 && !values.iter().any(|w| (w - z.conj()).norm() <= tol) {
            let item: Option<&SQty> = list.get_ref().get(i);
            return Err(rd.err(
                item.map(|q| q.span()).as_ref(),
                &format!("{key}[{i}]"),
                format!(
                    "complex value {} has no conjugate partner ({}{:+e}j) in the list; conjugate pairs are required",
                    item.map_or_else(|| "here".into(), |q| rd.shown(q)),
                    z.re,
                    -z.im
                ),
            ));
        }
    }
    Ok(())
}

/// A netlist error as a scenario error, pointing at the part, input or output to blame.
pub(crate) fn network_error(
    rd: &Reader,
    net: &Spanned<RawNetwork>,
    e: NetworkError,
) -> ScenarioError {
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
