//! Reading values out of one scenario file: quantities as written, spans turned into line
//! numbers, and the error type every message uses.

use crate::units::{self, Dim};
use num_complex::Complex64;
use serde::Deserialize;
use std::ops::Range;
use toml::Spanned;

/// A bad scenario: where, which key, what is wrong.
#[derive(Debug, thiserror::Error, Clone, PartialEq)]
#[error("{}", self.shown())]
pub struct ScenarioError {
    /// File name as given.
    pub file: String,
    /// 1-based line; 0 when the problem concerns the file itself (it cannot be read).
    pub line: usize,
    /// Dotted key, e.g. `network.poles[1]`.
    pub key: String,
    /// What is wrong and what would be accepted.
    pub message: String,
}

impl ScenarioError {
    /// "file:line: key: message", or "file: message" for the file itself.
    fn shown(&self) -> String {
        if self.line == 0 {
            format!("{}: {}", self.file, self.message)
        } else {
            format!(
                "{}:{}: {}: {}",
                self.file, self.line, self.key, self.message
            )
        }
    }
}

/// Magnitudes of part values, times, areas, amplitudes, rates, poles and zeros (or 0): wide
/// enough for femtoseconds to centuries and milliohms to teraohms with room for their
/// products, narrow enough that products and squares of them stay finite in f64.
pub const QUANTITY_RANGE: (f64, f64) = (1e-30, 1e30);

/// Magnitudes of transfer-polynomial coefficients and of a zero-pole gain (or 0): a product of
/// many poles may be large, but a coefficient near the f64 limits overflows when the
/// polynomial is evaluated or rescaled.
pub const COEFFICIENT_RANGE: (f64, f64) = (1e-200, 1e200);

/// The most entries a list of time constants, coefficients, poles or zeros may have (the
/// network order is capped at the same figure).
pub const MAX_LIST: usize = 200;

/// A quantity as written: a TOML number or a string with engineering notation.
#[derive(Debug, Clone, Deserialize)]
#[serde(untagged)]
pub(crate) enum Qty {
    Int(i64),
    Float(f64),
    Text(String),
}

pub(crate) type SQty = Spanned<Qty>;
pub(crate) type SList = Spanned<Vec<SQty>>;

/// Reads one file's values, turning spans into line numbers for messages.
pub(crate) struct Reader<'a> {
    pub(crate) file: &'a str,
    text: &'a str,
    /// Byte offset of the start of each line after the first, ascending.
    line_starts: Vec<usize>,
}

impl<'a> Reader<'a> {
    /// Index the text's lines once, so every lookup is a binary search.
    pub(crate) fn new(file: &'a str, text: &'a str) -> Reader<'a> {
        let line_starts = text
            .bytes()
            .enumerate()
            .filter(|&(_, b)| b == b'\n')
            .map(|(i, _)| i + 1)
            .collect();
        Reader {
            file,
            text,
            line_starts,
        }
    }

    /// The value as the user wrote it (its source text), for messages: never a re-printed f64.
    pub(crate) fn shown(&self, q: &SQty) -> String {
        match q.get_ref() {
            Qty::Text(t) => format!("\"{t}\""),
            _ => self
                .text
                .get(q.span())
                .map_or_else(|| "the value".into(), |t| t.trim().to_string()),
        }
    }

    pub(crate) fn line_of(&self, span: &Range<usize>) -> usize {
        self.line_starts.partition_point(|&s| s <= span.start) + 1
    }

    pub(crate) fn err(
        &self,
        span: Option<&Range<usize>>,
        key: &str,
        message: impl Into<String>,
    ) -> ScenarioError {
        ScenarioError {
            file: self.file.to_string(),
            line: span.map_or(1, |s| self.line_of(s)),
            key: key.to_string(),
            message: message.into(),
        }
    }

    /// A value within [`QUANTITY_RANGE`] (or zero): part values, times, areas, amplitudes,
    /// rates, poles and zeros.
    pub(crate) fn number(&self, q: &SQty, key: &str, dim: Dim) -> Result<f64, ScenarioError> {
        self.number_within(q, key, dim, QUANTITY_RANGE)
    }

    /// A finite value whose magnitude is zero or within `(lo, hi)`, else an error naming the
    /// key and the range.
    pub(crate) fn number_within(
        &self,
        q: &SQty,
        key: &str,
        dim: Dim,
        range: (f64, f64),
    ) -> Result<f64, ScenarioError> {
        let v = match q.get_ref() {
            Qty::Int(i) => *i as f64,
            Qty::Float(f) => *f,
            Qty::Text(t) => units::parse_quantity(t, dim)
                .map_err(|e| self.err(Some(&q.span()), key, e.to_string()))?,
        };
        if !v.is_finite() {
            return Err(self.err(
                Some(&q.span()),
                key,
                format!("{} is not a finite number", self.shown(q)),
            ));
        }
        self.in_range(q, key, v, range)?;
        Ok(v)
    }

    /// Zero, or a magnitude within `(lo, hi)`: outside it f64 figures lose their digits or
    /// overflow further down (products of part values, squares of responses).
    fn in_range(
        &self,
        q: &SQty,
        key: &str,
        v: f64,
        (lo, hi): (f64, f64),
    ) -> Result<(), ScenarioError> {
        if v != 0.0 && !(lo..=hi).contains(&v.abs()) {
            return Err(self.err(
                Some(&q.span()),
                key,
                format!(
                    "{} is outside the range pulseplan computes in: its magnitude must be 0 or \
                     between {lo:e} and {hi:e}",
                    self.shown(q)
                ),
            ));
        }
        Ok(())
    }

    pub(crate) fn positive(&self, q: &SQty, key: &str, dim: Dim) -> Result<f64, ScenarioError> {
        let v = self.number(q, key, dim)?;
        if v <= 0.0 {
            return Err(self.err(
                Some(&q.span()),
                key,
                format!("must be positive, got {}", self.shown(q)),
            ));
        }
        Ok(v)
    }

    /// A fraction, written with its unit ("0.5 %", "200 ppm"): a plain number is refused,
    /// since 0.5 could mean 0.5 % or 50 %.
    pub(crate) fn fraction(&self, q: &SQty, key: &str) -> Result<f64, ScenarioError> {
        let with_unit = matches!(q.get_ref(), Qty::Text(t) if t.trim_end().ends_with('%') || t.trim_end().ends_with("ppm"));
        if !with_unit {
            return Err(self.err(
                Some(&q.span()),
                key,
                format!(
                    "{} has no unit: write it as a percentage, e.g. \"0.5 %\" (a plain 0.5 would read as 50 %)",
                    self.shown(q)
                ),
            ));
        }
        self.number(q, key, Dim::Fraction)
    }

    pub(crate) fn list(&self, l: &SList, key: &str, dim: Dim) -> Result<Vec<f64>, ScenarioError> {
        self.list_within(l, key, dim, QUANTITY_RANGE)
    }

    /// Refuse a list of more than [`MAX_LIST`] entries.
    fn list_length(&self, l: &SList, key: &str) -> Result<(), ScenarioError> {
        if l.get_ref().len() > MAX_LIST {
            return Err(self.err(
                Some(&l.span()),
                key,
                format!(
                    "has {} entries; at most {MAX_LIST} are read",
                    l.get_ref().len()
                ),
            ));
        }
        Ok(())
    }

    /// A list of values, each zero or of a magnitude within `range`.
    pub(crate) fn list_within(
        &self,
        l: &SList,
        key: &str,
        dim: Dim,
        range: (f64, f64),
    ) -> Result<Vec<f64>, ScenarioError> {
        self.list_length(l, key)?;
        l.get_ref()
            .iter()
            .enumerate()
            .map(|(i, q)| self.number_within(q, &format!("{key}[{i}]"), dim, range))
            .collect()
    }

    pub(crate) fn complex_list(
        &self,
        l: &SList,
        key: &str,
    ) -> Result<Vec<Complex64>, ScenarioError> {
        self.list_length(l, key)?;
        l.get_ref()
            .iter()
            .enumerate()
            .map(|(i, q)| {
                let k = format!("{key}[{i}]");
                let z = match q.get_ref() {
                    Qty::Int(v) => Complex64::new(*v as f64, 0.0),
                    Qty::Float(v) => Complex64::new(*v, 0.0),
                    Qty::Text(t) => units::parse_complex(t)
                        .map_err(|e| self.err(Some(&q.span()), &k, e.to_string()))?,
                };
                if !(z.re.is_finite() && z.im.is_finite()) {
                    return Err(self.err(Some(&q.span()), &k, "is not a finite number"));
                }
                self.in_range(q, &k, z.norm(), QUANTITY_RANGE)?;
                Ok(z)
            })
            .collect()
    }
}
