//! The bench sections: `[generator]`, `[capture]`, `[limits]`.

use super::reader::{Qty, Reader, SQty, ScenarioError};
use crate::bench::{Bench, Capture, Generator, Limits, LoadSetting};
use crate::units::{Dim, Signal};
use serde::Deserialize;
use toml::Spanned;

#[derive(Debug, Deserialize)]
#[serde(deny_unknown_fields)]
pub(crate) struct RawGenerator {
    max_amplitude: Option<SQty>,
    min_width: Option<SQty>,
    min_edge: Option<SQty>,
    max_edge: Option<SQty>,
    time_step: Option<SQty>,
    max_period: Option<SQty>,
    output_resistance: Option<SQty>,
    load_setting: Option<SQty>,
}

#[derive(Debug, Deserialize)]
#[serde(deny_unknown_fields)]
pub(crate) struct RawCapture {
    noise: Option<SQty>,
    max_sample_rate: Option<SQty>,
    max_points: Option<SQty>,
    max_averages: Option<SQty>,
}

#[derive(Debug, Deserialize)]
#[serde(deny_unknown_fields)]
pub(crate) struct RawLimits {
    max_input: Option<SQty>,
    max_output: Option<SQty>,
}

/// The largest record memory a capture may state, points (a petasample: beyond any scope, and
/// every count below it is exact in f64 and in u64).
pub const MAX_CAPTURE_POINTS: f64 = 1e15;

/// The most averages a capture may state.
pub const MAX_AVERAGES: f64 = 1e9;

fn opt(rd: &Reader, q: &Option<SQty>, key: &str, dim: Dim) -> Result<Option<f64>, ScenarioError> {
    q.as_ref().map(|q| rd.positive(q, key, dim)).transpose()
}

/// Output quantities may be volts or amperes (or a plain number); accept either symbol.
fn output_quantity(rd: &Reader, q: &Option<SQty>, key: &str) -> Result<Option<f64>, ScenarioError> {
    let Some(q) = q else { return Ok(None) };
    rd.positive(q, key, Dim::Voltage)
        .or_else(|_| rd.positive(q, key, Dim::Current))
        .map(Some)
}

fn load_setting(rd: &Reader, q: &SQty) -> Result<LoadSetting, ScenarioError> {
    let text = match q.get_ref() {
        Qty::Int(i) => i.to_string(),
        Qty::Float(f) => f.to_string(),
        Qty::Text(t) => t.trim().to_string(),
    };
    let norm = text.to_lowercase().replace([' ', '_'], "");
    match norm.as_str() {
        "high-z" | "highz" | "hi-z" | "hiz" | "open" => Ok(LoadSetting::HighZ),
        "50" | "50.0" | "50ω" | "50ohm" => Ok(LoadSetting::Fifty),
        _ => Err(rd.err(
            Some(&q.span()),
            "generator.load_setting",
            format!("\"{text}\" is not a load setting; use \"high-z\" or \"50\""),
        )),
    }
}

/// Read the bench sections.
pub(crate) fn bench(
    rd: &Reader,
    generator: &Option<Spanned<RawGenerator>>,
    capture: &Option<Spanned<RawCapture>>,
    limits: &Option<Spanned<RawLimits>>,
    drive: Signal,
) -> Result<Bench, ScenarioError> {
    let generator = generator
        .as_ref()
        .map(|g| generator_section(rd, g.get_ref(), drive))
        .transpose()?;
    let capture = capture
        .as_ref()
        .map(|c| capture_section(rd, c.get_ref()))
        .transpose()?;
    let limits = limits
        .as_ref()
        .map(|l| -> Result<Limits, ScenarioError> {
            let l = l.get_ref();
            Ok(Limits {
                max_input: opt(rd, &l.max_input, "limits.max_input", drive.dim())?,
                max_output: output_quantity(rd, &l.max_output, "limits.max_output")?,
            })
        })
        .transpose()?;
    Ok(Bench {
        generator,
        capture,
        limits,
    })
}

/// The `[generator]` section: its limits, output resistance and load setting, with
/// min_edge ≤ max_edge.
fn generator_section(
    rd: &Reader,
    g: &RawGenerator,
    drive: Signal,
) -> Result<Generator, ScenarioError> {
    let gen_ = Generator {
        max_amplitude: opt(rd, &g.max_amplitude, "generator.max_amplitude", drive.dim())?,
        min_width: opt(rd, &g.min_width, "generator.min_width", Dim::Time)?,
        min_edge: opt(rd, &g.min_edge, "generator.min_edge", Dim::Time)?,
        max_edge: opt(rd, &g.max_edge, "generator.max_edge", Dim::Time)?,
        time_step: opt(rd, &g.time_step, "generator.time_step", Dim::Time)?,
        max_period: opt(rd, &g.max_period, "generator.max_period", Dim::Time)?,
        output_resistance: g
            .output_resistance
            .as_ref()
            .map(|q| {
                let v = rd.number(q, "generator.output_resistance", Dim::Resistance)?;
                if v < 0.0 {
                    return Err(rd.err(
                        Some(&q.span()),
                        "generator.output_resistance",
                        "must not be negative",
                    ));
                }
                Ok(v)
            })
            .transpose()?,
        load_setting: g
            .load_setting
            .as_ref()
            .map(|q| load_setting(rd, q))
            .transpose()?,
    };
    if let (Some(lo), Some(hi), Some(q)) = (gen_.min_edge, gen_.max_edge, &g.max_edge)
        && lo > hi
    {
        return Err(rd.err(
            Some(&q.span()),
            "generator.max_edge",
            "is shorter than min_edge",
        ));
    }
    Ok(gen_)
}

/// The `[capture]` section: noise, sample rate, and the point and average counts in range.
fn capture_section(rd: &Reader, c: &RawCapture) -> Result<Capture, ScenarioError> {
    let cap = Capture {
        noise: output_quantity(rd, &c.noise, "capture.noise")?,
        max_sample_rate: opt(
            rd,
            &c.max_sample_rate,
            "capture.max_sample_rate",
            Dim::Frequency,
        )?,
        max_points: opt(rd, &c.max_points, "capture.max_points", Dim::Number)?,
        max_averages: opt(rd, &c.max_averages, "capture.max_averages", Dim::Number)?,
    };
    count_in_range(
        rd,
        cap.max_points,
        &c.max_points,
        "capture.max_points",
        2.0,
        MAX_CAPTURE_POINTS,
    )?;
    count_in_range(
        rd,
        cap.max_averages,
        &c.max_averages,
        "capture.max_averages",
        1.0,
        MAX_AVERAGES,
    )?;
    Ok(cap)
}

/// Refuse a stated count outside `lo ..= hi`, naming the key at its line.
fn count_in_range(
    rd: &Reader,
    value: Option<f64>,
    q: &Option<SQty>,
    key: &str,
    lo: f64,
    hi: f64,
) -> Result<(), ScenarioError> {
    if let (Some(v), Some(q)) = (value, q)
        && !(lo..=hi).contains(&v)
    {
        return Err(rd.err(
            Some(&q.span()),
            key,
            format!("must be between {lo} and {hi:e}"),
        ));
    }
    Ok(())
}
