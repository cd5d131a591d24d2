//! How a capture file is laid out: metadata lines, the header (names, optional units), the
//! delimiter and decimal mark, and where the data rows begin.
//!
//! Detection reads at most [`SEARCH_LINES`] lines. A data row is a line whose every field,
//! under one delimiter, is a number; the delimiter tried first is ';', then tab, then ','.
//! The header is the non-numeric line (or two: names, then units) just above the first data
//! row with the same number of fields; every line above it is metadata.

use super::error::Problem;
use serde::Serialize;

/// Lines searched for the first data row.
pub const SEARCH_LINES: usize = 2000;

/// Metadata the reader recognises (everything else is counted and skipped).
#[derive(Debug, Clone, Default, PartialEq, Serialize)]
pub struct Metadata {
    /// Sample interval, s.
    pub interval_s: Option<f64>,
    /// Stated number of points.
    pub record_points: Option<f64>,
    /// Time of the first sample relative to the trigger, s.
    pub start_s: Option<f64>,
    /// Trigger position: time after the first sample, s.
    pub trigger_s: Option<f64>,
    /// Trigger position as a sample index (0-based).
    pub trigger_index: Option<f64>,
    /// Vertical unit for channels whose header states none.
    pub unit: Option<String>,
    /// Probe factor: the values are multiplied by it.
    pub probe_factor: Option<f64>,
    /// Metadata lines not recognised (skipped).
    pub skipped_lines: usize,
}

/// The layout found.
#[derive(Debug, Clone, PartialEq)]
pub struct Layout {
    /// Field delimiter.
    pub delimiter: u8,
    /// Numbers use ',' as the decimal mark.
    pub decimal_comma: bool,
    /// Header names (empty when the file has no header).
    pub names: Vec<String>,
    /// Units from the header cells or a units row (one per field, may be empty).
    pub units: Vec<String>,
    /// Byte offset of the first data row.
    pub data_offset: usize,
    /// 1-based line of the first data row.
    pub data_line: usize,
    /// Fields per data row.
    pub fields: usize,
    /// Line of the header, when there is one.
    pub header_line: Option<usize>,
    /// Recognised metadata.
    pub meta: Metadata,
}

/// Parse one numeric cell (surrounding blanks allowed; with a decimal comma, ',' is the mark).
pub fn number(field: &[u8], decimal_comma: bool) -> Result<f64, NumError> {
    let f = field.trim_ascii();
    if f.is_empty() {
        return Err(NumError::Empty);
    }
    let mark = if decimal_comma { b',' } else { b'.' };
    if let Some(v) = fast_decimal(f, mark) {
        return Ok(v);
    }
    let parsed = if decimal_comma && f.contains(&b',') {
        let fixed: Vec<u8> = f
            .iter()
            .map(|&b| if b == b',' { b'.' } else { b })
            .collect();
        std::str::from_utf8(&fixed)
            .ok()
            .and_then(|s| s.parse::<f64>().ok())
    } else {
        // std's parser implements Eisel–Lemire (Lemire 2021), correct for every input.
        std::str::from_utf8(f)
            .ok()
            .and_then(|s| s.parse::<f64>().ok())
    };
    match parsed {
        Some(v) if v.is_finite() => Ok(v),
        Some(_) => Err(NumError::NotFinite),
        None => Err(NumError::NotANumber),
    }
}

/// Exact powers of ten representable in f64.
const POW10: [f64; 23] = [
    1e0, 1e1, 1e2, 1e3, 1e4, 1e5, 1e6, 1e7, 1e8, 1e9, 1e10, 1e11, 1e12, 1e13, 1e14, 1e15, 1e16,
    1e17, 1e18, 1e19, 1e20, 1e21, 1e22,
];

/// Clinger's fast path (Clinger 1990, "How to read floating point numbers accurately"):
/// a decimal with at most 15 significant digits m and a power of ten |e| ≤ 22 is m·10^e
/// (or m/10^−e) with both operands exact, so one correctly rounded operation gives the
/// correctly rounded value. Anything else returns `None` for the general parser.
fn fast_decimal(f: &[u8], mark: u8) -> Option<f64> {
    let (neg, mut i) = match f.first()? {
        b'-' => (true, 1),
        b'+' => (false, 1),
        _ => (false, 0),
    };
    let (mut m, mut digits, mut exp, mut seen) = (0u64, 0u32, 0i32, false);
    let mut frac = false;
    while i < f.len() {
        let b = f[i];
        if b.is_ascii_digit() {
            seen = true;
            if m != 0 || b != b'0' {
                digits += 1;
            }
            if digits > 15 {
                return None;
            }
            m = m * 10 + u64::from(b - b'0');
            if frac {
                exp -= 1;
            }
        } else if b == mark && !frac {
            frac = true;
        } else {
            break;
        }
        i += 1;
    }
    if !seen {
        return None;
    }
    if i < f.len() {
        if f[i] != b'e' && f[i] != b'E' {
            return None;
        }
        let rest = &f[i + 1..];
        let (sign, digits) = match rest.first()? {
            b'-' => (-1, &rest[1..]),
            b'+' => (1, &rest[1..]),
            _ => (1, rest),
        };
        if digits.is_empty() || digits.len() > 4 || !digits.iter().all(u8::is_ascii_digit) {
            return None;
        }
        let e = digits
            .iter()
            .fold(0i32, |a, &d| a * 10 + i32::from(d - b'0'));
        exp += sign * e;
    }
    let mf = m as f64;
    let v = if exp >= 0 {
        mf * *POW10.get(exp as usize)?
    } else {
        mf / *POW10.get((-exp) as usize)?
    };
    Some(if neg { -v } else { v })
}

/// Why a cell is not a usable number.
#[derive(Debug, Clone, Copy, PartialEq, Eq)]
pub enum NumError {
    /// Empty cell.
    Empty,
    /// NaN or infinite.
    NotFinite,
    /// Anything else.
    NotANumber,
}

/// Split one line into fields with the csv crate.
fn fields_of(line: &[u8], delimiter: u8) -> Vec<Vec<u8>> {
    let mut rd = csv::ReaderBuilder::new()
        .has_headers(false)
        .delimiter(delimiter)
        .flexible(true)
        .from_reader(line);
    let mut rec = csv::ByteRecord::new();
    match rd.read_byte_record(&mut rec) {
        Ok(true) => rec.iter().map(|f| f.to_vec()).collect(),
        _ => Vec::new(),
    }
}

/// Whether a line is a data row under a delimiter: ≥ 2 fields, each a number (non-finite
/// numbers count as numbers here, so that the reader can name them as such).
fn numeric_row(line: &[u8], delimiter: u8) -> Option<(usize, bool)> {
    let fs = fields_of(line, delimiter);
    if fs.len() < 2 {
        return None;
    }
    let comma = delimiter != b',' && fs.iter().any(|f| f.contains(&b','));
    fs.iter()
        .all(|f| {
            !matches!(
                number(f, comma),
                Err(NumError::NotANumber | NumError::Empty)
            )
        })
        .then_some((fs.len(), comma))
}

/// Lines of the head of the file: (byte offset, content without the line end).
fn head_lines(bytes: &[u8]) -> Vec<(usize, &[u8])> {
    let mut out = Vec::new();
    let mut start = 0;
    while start < bytes.len() && out.len() < SEARCH_LINES {
        let end = bytes[start..]
            .iter()
            .position(|&b| b == b'\n')
            .map_or(bytes.len(), |p| start + p);
        let mut line = &bytes[start..end];
        if line.last() == Some(&b'\r') {
            line = &line[..line.len() - 1];
        }
        out.push((start, line));
        start = end + 1;
    }
    out
}

/// Find the layout of a capture file.
pub fn detect(bytes: &[u8]) -> Result<Layout, (usize, Problem)> {
    let lines = head_lines(bytes);
    let found = lines.iter().enumerate().find_map(|(i, (_, l))| {
        [b';', b'\t', b',']
            .into_iter()
            .find_map(|d| numeric_row(l, d).map(|(n, c)| (i, d, n, c)))
    });
    let Some((first, delimiter, fields, decimal_comma)) = found else {
        return Err((
            lines.len().max(1),
            Problem::NoData {
                searched: lines.len(),
            },
        ));
    };
    let text_row = |i: usize| -> Option<Vec<String>> {
        let (_, l) = lines.get(i)?;
        let fs = fields_of(l, delimiter);
        (fs.len() == fields && !l.trim_ascii().is_empty()).then(|| {
            fs.iter()
                .map(|f| String::from_utf8_lossy(f).trim().to_string())
                .collect()
        })
    };
    let (names, mut units, header_line, meta_end) = header_rows(first, &text_row);
    let names_split: Vec<(String, String)> = names.iter().map(|n| split_unit(n)).collect();
    if units.is_empty() {
        units = names_split.iter().map(|(_, u)| u.clone()).collect();
    }
    let names = names_split.into_iter().map(|(n, _)| n).collect();
    let mut meta = Metadata::default();
    for (line_no, (_, l)) in lines.iter().enumerate().take(meta_end) {
        read_meta_line(l, delimiter, decimal_comma, &mut meta).map_err(|p| (line_no + 1, p))?;
    }
    Ok(Layout {
        delimiter,
        decimal_comma,
        names,
        units,
        data_offset: lines[first].0,
        data_line: first + 1,
        fields,
        header_line,
        meta,
    })
}

type HeaderRows = (Vec<String>, Vec<String>, Option<usize>, usize);

/// Header names, a units row if present, the header's line, and where metadata ends.
fn header_rows(first: usize, text_row: &dyn Fn(usize) -> Option<Vec<String>>) -> HeaderRows {
    if first == 0 {
        return (Vec::new(), Vec::new(), None, 0);
    }
    let Some(last) = text_row(first - 1) else {
        return (Vec::new(), Vec::new(), None, first);
    };
    // Two text rows of the same width: names above, units below (when the lower one holds
    // only short unit-like cells).
    if first >= 2
        && let Some(above) = text_row(first - 2)
        && last.iter().all(|c| c.is_empty() || is_unit(c))
        && last.iter().any(|c| is_unit(c))
        && above.iter().all(|c| number(c.as_bytes(), false).is_err())
    {
        return (above, last, Some(first - 1), first - 2);
    }
    (last, Vec::new(), Some(first), first - 1)
}

/// A cell of a units row: a time, voltage or current unit with an optional prefix ("ms", "mV").
fn is_unit(cell: &str) -> bool {
    use crate::units::{Dim, parse_quantity};
    let c = cell.trim_matches(|ch| ch == '(' || ch == ')' || ch == '[' || ch == ']');
    !c.is_empty()
        && [Dim::Time, Dim::Voltage, Dim::Current]
            .into_iter()
            .any(|d| parse_quantity(&format!("1 {c}"), d).is_ok())
}

/// "out (mV)", "out [mV]" or "out/mV" → ("out", "mV"); otherwise (name, "").
pub fn split_unit(cell: &str) -> (String, String) {
    let c = cell.trim();
    for (open, close) in [('(', ')'), ('[', ']')] {
        if c.ends_with(close)
            && let Some(p) = c.rfind(open)
        {
            let unit = c[p + open.len_utf8()..c.len() - close.len_utf8()].trim();
            return (c[..p].trim().to_string(), unit.to_string());
        }
    }
    if let Some(p) = c.rfind('/') {
        let unit = c[p + 1..].trim();
        if !unit.is_empty() && !unit.contains(' ') && p > 0 {
            return (c[..p].trim().to_string(), unit.to_string());
        }
    }
    (c.to_string(), String::new())
}

/// Lower-case a key and reduce punctuation to single spaces.
fn normalise_key(key: &str) -> String {
    key.to_lowercase()
        .chars()
        .map(|c| if c.is_alphanumeric() { c } else { ' ' })
        .collect::<String>()
        .split_whitespace()
        .collect::<Vec<_>>()
        .join(" ")
}

#[derive(Clone, Copy)]
enum Key {
    Interval,
    Rate,
    Points,
    Start,
    PreTrigger,
    Trigger,
    Unit,
    Probe,
}

const KEYS: &[(&str, Key)] = &[
    ("sample interval", Key::Interval),
    ("sampling interval", Key::Interval),
    ("interval", Key::Interval),
    ("time step", Key::Interval),
    ("dt", Key::Interval),
    ("sample rate", Key::Rate),
    ("sampling rate", Key::Rate),
    ("record length", Key::Points),
    ("points", Key::Points),
    ("start time", Key::Start),
    ("start", Key::Start),
    ("pre trigger", Key::PreTrigger),
    ("pretrigger", Key::PreTrigger),
    ("trigger position", Key::Trigger),
    ("trigger", Key::Trigger),
    ("units", Key::Unit),
    ("unit", Key::Unit),
    ("vertical unit", Key::Unit),
    ("probe factor", Key::Probe),
    ("probe", Key::Probe),
    ("attenuation", Key::Probe),
];

/// Split a metadata line into key and value at the delimiter, ':' or '='.
fn key_value(line: &str, delimiter: u8) -> Option<(String, String)> {
    let body = line.trim().trim_start_matches('#').trim();
    let seps = [delimiter as char, ':', '='];
    let p = body.find(|c| seps.contains(&c))?;
    let key = body[..p].trim().to_string();
    let rest = body[p + 1..].trim();
    // The value is the first non-empty field after the key.
    let value = rest
        .split(delimiter as char)
        .map(str::trim)
        .find(|v| !v.is_empty())?
        .trim_matches('"')
        .to_string();
    Some((key, value))
}

fn read_meta_line(
    line: &[u8],
    delimiter: u8,
    decimal_comma: bool,
    meta: &mut Metadata,
) -> Result<(), Problem> {
    let text = std::str::from_utf8(line).map_err(|_| Problem::NotText)?;
    if text.trim().is_empty() {
        return Ok(());
    }
    let Some((key, value)) = key_value(text, delimiter) else {
        meta.skipped_lines += 1;
        return Ok(());
    };
    let norm = normalise_key(&key);
    let Some(&(_, k)) = KEYS.iter().find(|(name, _)| *name == norm) else {
        meta.skipped_lines += 1;
        return Ok(());
    };
    let value = if decimal_comma {
        value.replace(',', ".")
    } else {
        value
    };
    let bad = |expected| Problem::BadMetadata {
        key: key.clone(),
        expected,
        found: value.clone(),
    };
    let time = |v: &str| crate::units::parse_quantity(v, crate::units::Dim::Time);
    match k {
        Key::Interval => meta.interval_s = Some(positive(time(&value).ok()).ok_or(bad("a time"))?),
        Key::Rate => {
            let r = crate::units::parse_quantity(&value, crate::units::Dim::Frequency).ok();
            meta.interval_s = Some(1.0 / positive(r).ok_or(bad("a frequency"))?);
        }
        Key::Points => {
            meta.record_points = Some(positive(value.parse().ok()).ok_or(bad("a count"))?)
        }
        Key::Start => meta.start_s = Some(time(&value).map_err(|_| bad("a time"))?),
        Key::PreTrigger => meta.start_s = Some(-time(&value).map_err(|_| bad("a time"))?),
        // A trigger position written some other way (a level, a clock time) is skipped.
        Key::Trigger => {
            if read_trigger(&value, meta).is_none() {
                meta.skipped_lines += 1;
            }
        }
        Key::Unit => meta.unit = Some(value.clone()),
        Key::Probe => {
            let v = value.trim_end_matches(['x', 'X', '×']).trim();
            meta.probe_factor = Some(positive(v.parse().ok()).ok_or(bad("a number"))?);
        }
    }
    Ok(())
}

fn positive(v: Option<f64>) -> Option<f64> {
    v.filter(|v| v.is_finite() && *v > 0.0)
}

/// A trigger position is a plain sample index or a time with its unit.
fn read_trigger(value: &str, meta: &mut Metadata) -> Option<()> {
    if let Ok(i) = value.parse::<f64>() {
        (i.is_finite() && i >= 0.0 && i.fract() == 0.0).then(|| meta.trigger_index = Some(i))
    } else {
        let t = crate::units::parse_quantity(value, crate::units::Dim::Time).ok()?;
        meta.trigger_s = Some(t);
        Some(())
    }
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn detects_semicolon_decimal_comma_with_metadata_and_units_row() {
        let text = "Instrument;bench 3\nSample interval;1,0e-6\nProbe;10x\nt;out;in\ns;mV;V\n0,0;1,5;0\n1e-6;2,5;1\n";
        let l = detect(text.as_bytes()).unwrap();
        assert_eq!(l.delimiter, b';');
        assert!(l.decimal_comma);
        assert_eq!(l.names, ["t", "out", "in"]);
        assert_eq!(l.units, ["s", "mV", "V"]);
        assert_eq!(l.data_line, 6);
        assert_eq!(l.meta.interval_s, Some(1e-6));
        assert_eq!(l.meta.probe_factor, Some(10.0));
        assert_eq!(l.meta.skipped_lines, 1);
    }

    #[test]
    fn detects_tab_and_comma_layouts() {
        let l = detect(b"time (ms)\tv [V]\n0\t1\n1\t2\n").unwrap();
        assert_eq!((l.delimiter, l.decimal_comma), (b'\t', false));
        assert_eq!(l.names, ["time", "v"]);
        assert_eq!(l.units, ["ms", "V"]);
        let l = detect(b"# a comment\n0.0,1\n1.0,2\n").unwrap();
        assert_eq!((l.delimiter, l.data_line, l.names.len()), (b',', 2, 0));
    }

    #[test]
    fn no_data_is_an_error() {
        assert!(matches!(
            detect(b"just text\nmore text\n"),
            Err((_, Problem::NoData { .. }))
        ));
    }

    #[test]
    fn fast_path_agrees_with_the_general_parser() {
        // Clinger 1990: the fast path is correctly rounded, so it must equal std's result
        // bit for bit wherever it applies.
        let cases = [
            "1.234567e-03",
            "-9.87654321e+02",
            "0.000001",
            "123456789012345",
            "+4.5E6",
            "7",
            "-0.0",
            "3.141592653589793",
            "1e22",
            "2.5e-22",
            "0.1",
            "1.7976931348623157e308",
            "12345678901234567",
            "1e-300",
        ];
        for c in cases {
            let want: f64 = c.parse().unwrap();
            assert_eq!(
                number(c.as_bytes(), false).unwrap().to_bits(),
                want.to_bits(),
                "{c}"
            );
        }
        assert_eq!(number(b"1,5e-3", true).unwrap(), 1.5e-3);
        assert_eq!(number(b"nan", false), Err(NumError::NotFinite));
        assert_eq!(number(b"1.2.3", false), Err(NumError::NotANumber));
        assert_eq!(number(b"12x", false), Err(NumError::NotANumber));
    }

    #[test]
    fn split_units() {
        assert_eq!(split_unit("out (mV)"), ("out".into(), "mV".into()));
        assert_eq!(split_unit("t/s"), ("t".into(), "s".into()));
        assert_eq!(split_unit("plain"), ("plain".into(), String::new()));
    }
}
