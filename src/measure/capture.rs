//! Reading a capture: a text record from a scope or a simulator (CSV, semicolon or tab
//! separated), with an optional metadata block, a header, a time or index column and one or
//! more channels. Only the time column and the channels asked for are parsed.
//!
//! Large files are parsed on two threads (the data rows split at a line boundary), each with
//! the csv crate's byte records.

use super::error::{CaptureError, Problem};
use super::layout::{self, Layout, Metadata, NumError};
use crate::units::{Dim, parse_quantity};
use serde::Serialize;
use std::path::Path;

/// Largest file read, bytes (2 GiB).
pub const MAX_BYTES: u64 = 2 << 30;
/// Most data rows read.
pub const MAX_ROWS: usize = 50_000_000;
/// Files above this size are parsed on two threads.
const SPLIT_BYTES: usize = 4 << 20;
/// Steps within this fraction of the mean step count as uniform (printed times carry
/// rounding); common practice, no source.
const UNIFORM_TOLERANCE: f64 = 0.05;

/// A channel by name (case-insensitive) or by number (1 = first column after time/index).
#[derive(Debug, Clone, PartialEq, Eq)]
pub enum ChannelRef {
    /// Header name.
    Name(String),
    /// 1-based channel number.
    Number(usize),
}

impl ChannelRef {
    /// Digits → a number, anything else → a name.
    pub fn parse(text: &str) -> ChannelRef {
        match text.trim().parse::<usize>() {
            Ok(n) => ChannelRef::Number(n),
            Err(_) => ChannelRef::Name(text.trim().to_string()),
        }
    }
}

/// What to read.
#[derive(Debug, Clone, Default)]
pub struct ReadOptions {
    /// The output channel (default: the first channel that is not the stimulus).
    pub channel: Option<ChannelRef>,
    /// A channel that recorded the pulse itself.
    pub stimulus: Option<ChannelRef>,
    /// Sample interval for an index column, overriding the metadata, s.
    pub interval: Option<f64>,
}

/// How time was obtained.
#[derive(Debug, Clone, PartialEq, Serialize)]
#[serde(tag = "kind", rename_all = "kebab-case")]
pub enum TimeAxis {
    /// A time column (scaled to seconds).
    Column {
        /// Unit factor applied (1 for seconds).
        scale: f64,
    },
    /// An index column: t = start + index × interval.
    Index {
        /// Time of index 0 relative to the trigger, s (0 when not stated).
        start_s: f64,
        /// Sample interval, s.
        interval_s: f64,
        /// Whether the start (or trigger position) was stated in the file.
        start_stated: bool,
    },
}

/// One channel's samples.
#[derive(Debug, Clone, PartialEq)]
pub struct Channel {
    /// Name from the header, or "channel N".
    pub name: String,
    /// Unit as written (may be empty).
    pub unit: String,
    /// 1-based column in the file.
    pub column: usize,
    /// Factor applied to the written values (unit prefix × probe factor).
    pub scale: f64,
    /// Samples in SI units.
    pub values: Vec<f64>,
}

/// A capture read from a file.
#[derive(Debug, Clone, PartialEq)]
pub struct Capture {
    /// The file as given.
    pub file: String,
    /// Sample times, s, increasing (the trigger at 0 when the file says so).
    pub time: Vec<f64>,
    /// The output channel.
    pub output: Channel,
    /// The stimulus channel, if asked for.
    pub stimulus: Option<Channel>,
    /// How time was obtained.
    pub axis: TimeAxis,
    /// The uniform step when the times are uniform (within [`UNIFORM_TOLERANCE`]), s.
    pub uniform_step: Option<f64>,
    /// Recognised metadata.
    pub meta: Metadata,
    /// Field delimiter.
    pub delimiter: u8,
    /// Decimal comma.
    pub decimal_comma: bool,
    /// Line of the first and of the last data row.
    pub lines: (usize, usize),
}

impl Capture {
    /// Number of samples.
    pub fn len(&self) -> usize {
        self.time.len()
    }

    /// True when there are no samples.
    pub fn is_empty(&self) -> bool {
        self.time.is_empty()
    }
}

/// Read a capture file (a regular file of at most [`MAX_BYTES`]).
pub fn read(path: &Path, opts: &ReadOptions) -> Result<Capture, CaptureError> {
    let file = path.display().to_string();
    let fail = |line, problem| CaptureError {
        file: file.clone(),
        line,
        column: None,
        problem,
    };
    let md = std::fs::metadata(path).map_err(|e| fail(1, Problem::Io(e.to_string())))?;
    if !md.is_file() {
        return Err(fail(1, Problem::NotRegular));
    }
    if md.len() > MAX_BYTES {
        return Err(fail(
            1,
            Problem::TooLarge {
                bytes: md.len(),
                max: MAX_BYTES,
            },
        ));
    }
    let bytes = std::fs::read(path).map_err(|e| fail(1, Problem::Io(e.to_string())))?;
    parse(&file, &bytes, opts)
}

/// Parse capture text (`file` names it in messages).
pub fn parse(file: &str, bytes: &[u8], opts: &ReadOptions) -> Result<Capture, CaptureError> {
    let err = |line, column, problem| CaptureError {
        file: file.to_string(),
        line,
        column,
        problem,
    };
    if bytes.len() as u64 > MAX_BYTES {
        return Err(err(
            1,
            None,
            Problem::TooLarge {
                bytes: bytes.len() as u64,
                max: MAX_BYTES,
            },
        ));
    }
    let lay = layout::detect(bytes).map_err(|(l, p)| err(l, None, p))?;
    let header_line = lay.header_line.unwrap_or(lay.data_line);
    let out_col = pick(&lay, opts.channel.as_ref(), opts.stimulus.as_ref(), true)
        .map_err(|p| err(header_line, None, p))?;
    let stim_col = match &opts.stimulus {
        Some(s) => Some(pick(&lay, Some(s), None, false).map_err(|p| err(header_line, None, p))?),
        None => None,
    };
    let mut cols = vec![0, out_col];
    cols.extend(stim_col);
    let names: Vec<String> = cols.iter().map(|&c| column_name(&lay, c)).collect();
    let data = parse_rows(
        &bytes[lay.data_offset..],
        lay.data_line,
        &cols,
        &lay,
        &names,
    )
    .map_err(|(l, c, p)| err(l, Some(c), p))?;
    let last_line = data.last_line;
    let mut columns = data.columns.into_iter();
    let first = columns.next().unwrap_or_default();
    let (time, axis) = time_axis(first, &lay, opts).map_err(|(c, p)| err(header_line, c, p))?;
    check_increasing(&time, lay.data_line, &data.row_lines).map_err(|(l, p)| err(l, Some(1), p))?;
    let channel = |col: usize, values: Vec<f64>| {
        make_channel(&lay, col, values).map_err(|p| err(header_line, Some(col + 1), p))
    };
    let output = channel(out_col, columns.next().unwrap_or_default())?;
    let stimulus = match stim_col {
        Some(c) => Some(channel(c, columns.next().unwrap_or_default())?),
        None => None,
    };
    let uniform_step = uniform_step(&time);
    Ok(Capture {
        file: file.to_string(),
        time: regularise(time, uniform_step),
        output,
        stimulus,
        axis,
        uniform_step,
        meta: lay.meta.clone(),
        delimiter: lay.delimiter,
        decimal_comma: lay.decimal_comma,
        lines: (lay.data_line, last_line),
    })
}

fn column_name(lay: &Layout, col: usize) -> String {
    match lay.names.get(col) {
        Some(n) if !n.is_empty() => format!("{} (\"{n}\")", col + 1),
        _ => format!("{}", col + 1),
    }
}

/// The 0-based field of a channel reference; channel numbers count from the column after
/// the time/index column.
fn pick(
    lay: &Layout,
    want: Option<&ChannelRef>,
    avoid: Option<&ChannelRef>,
    is_output: bool,
) -> Result<usize, Problem> {
    let available = || {
        (1..lay.fields)
            .map(|c| match lay.names.get(c) {
                Some(n) if !n.is_empty() => format!("{c}: {n}"),
                _ => format!("{c}"),
            })
            .collect::<Vec<_>>()
            .join(", ")
    };
    let find = |r: &ChannelRef| -> Option<usize> {
        match r {
            ChannelRef::Number(n) => (*n >= 1 && *n < lay.fields).then_some(*n),
            ChannelRef::Name(name) => (1..lay.fields).find(|&c| {
                lay.names
                    .get(c)
                    .is_some_and(|h| h.eq_ignore_ascii_case(name))
            }),
        }
    };
    if let Some(r) = want {
        return find(r).ok_or_else(|| Problem::UnknownChannel {
            wanted: match r {
                ChannelRef::Name(n) => n.clone(),
                ChannelRef::Number(n) => n.to_string(),
            },
            available: available(),
        });
    }
    debug_assert!(is_output);
    let skip = avoid.and_then(find);
    (1..lay.fields)
        .find(|&c| Some(c) != skip)
        .ok_or_else(|| Problem::UnknownChannel {
            wanted: "an output channel besides the stimulus".into(),
            available: available(),
        })
}

/// Columns parsed from the data rows.
struct Rows {
    columns: Vec<Vec<f64>>,
    /// For chunk k > 0: (row index where it starts, line of that row); lines inside a chunk
    /// are consecutive except for skipped blank lines, so errors are named while parsing.
    row_lines: Vec<(usize, usize)>,
    last_line: usize,
}

type RowError = (usize, usize, Problem);

fn parse_rows(
    data: &[u8],
    first_line: usize,
    cols: &[usize],
    lay: &Layout,
    names: &[String],
) -> Result<Rows, RowError> {
    let split = if data.len() > SPLIT_BYTES {
        data[data.len() / 2..]
            .iter()
            .position(|&b| b == b'\n')
            .map(|p| data.len() / 2 + p + 1)
    } else {
        None
    };
    let Some(mid) = split.filter(|&m| m < data.len()) else {
        let c = parse_chunk(data, first_line, cols, lay, names)?;
        return Ok(Rows {
            last_line: c.last_line,
            columns: c.columns,
            row_lines: vec![(0, first_line)],
        });
    };
    let second_line = first_line + data[..mid].iter().filter(|&&b| b == b'\n').count();
    let (a, b) = std::thread::scope(|s| {
        let hb = s.spawn(|| parse_chunk(&data[mid..], second_line, cols, lay, names));
        let a = parse_chunk(&data[..mid], first_line, cols, lay, names);
        (a, hb.join().expect("the parser thread does not panic"))
    });
    let a = a?;
    let b = b?;
    let start_b = a.columns[0].len();
    if start_b + b.columns[0].len() > MAX_ROWS {
        return Err((b.last_line, 1, Problem::TooManyRows { max: MAX_ROWS }));
    }
    let columns = a
        .columns
        .into_iter()
        .zip(b.columns)
        .map(|(mut x, y)| {
            x.extend_from_slice(&y);
            x
        })
        .collect();
    Ok(Rows {
        columns,
        row_lines: vec![(0, first_line), (start_b, b.first_row_line)],
        last_line: b.last_line.max(a.last_line),
    })
}

struct Chunk {
    columns: Vec<Vec<f64>>,
    first_row_line: usize,
    last_line: usize,
}

fn parse_chunk(
    data: &[u8],
    first_line: usize,
    cols: &[usize],
    lay: &Layout,
    names: &[String],
) -> Result<Chunk, RowError> {
    let mut rd = csv::ReaderBuilder::new()
        .has_headers(false)
        .delimiter(lay.delimiter)
        .flexible(true)
        .from_reader(data);
    let est = (data.len() / (lay.fields * 8 + 1)).min(MAX_ROWS);
    let mut columns: Vec<Vec<f64>> = cols.iter().map(|_| Vec::with_capacity(est)).collect();
    // Every row holds at least the header's fields (more are allowed: a trailing delimiter).
    let need = lay.fields.max(cols.iter().max().map_or(1, |m| m + 1));
    let mut rec = csv::ByteRecord::new();
    let mut last_line = first_line;
    let mut first_row_line = None;
    loop {
        let more = rd
            .read_byte_record(&mut rec)
            .map_err(|e| (last_line, 1, Problem::Io(e.to_string())))?;
        if !more {
            break;
        }
        let line = first_line + rec.position().map_or(1, |p| p.line() as usize) - 1;
        last_line = line;
        if rec.len() == 1 && rec.get(0).is_some_and(|f| f.trim_ascii().is_empty()) {
            continue;
        }
        first_row_line.get_or_insert(line);
        if rec.len() < need {
            let p = Problem::TooFewFields {
                expected: need,
                found: rec.len(),
            };
            return Err((line, rec.len() + 1, p));
        }
        if columns[0].len() >= MAX_ROWS {
            return Err((line, 1, Problem::TooManyRows { max: MAX_ROWS }));
        }
        for (k, &c) in cols.iter().enumerate() {
            let cell = &rec[c];
            let v = layout::number(cell, lay.decimal_comma)
                .map_err(|e| (line, c + 1, cell_problem(e, cell, &names[k])))?;
            columns[k].push(v);
        }
    }
    Ok(Chunk {
        columns,
        first_row_line: first_row_line.unwrap_or(first_line),
        last_line,
    })
}

fn cell_problem(e: NumError, cell: &[u8], column_name: &str) -> Problem {
    let found: String = String::from_utf8_lossy(cell.trim_ascii())
        .chars()
        .take(40)
        .collect();
    let column_name = column_name.to_string();
    match e {
        NumError::Empty => Problem::Empty { column_name },
        NumError::NotFinite => Problem::NotFinite { column_name, found },
        NumError::NotANumber => Problem::NotANumber { column_name, found },
    }
}

/// Whether the first column is an index (by its header name, or, without one, because it
/// holds consecutive integers).
fn is_index_column(lay: &Layout, first: &[f64]) -> bool {
    let name = lay
        .names
        .first()
        .map(|n| n.to_lowercase())
        .unwrap_or_default();
    match name.as_str() {
        "index" | "idx" | "n" | "no" | "#" | "sample" | "samples" | "point" | "points" => true,
        "t" | "time" | "times" | "x" => false,
        _ => {
            first.len() >= 2
                && first.iter().take(64).all(|v| v.fract() == 0.0)
                && first.windows(2).take(64).all(|w| w[1] - w[0] == 1.0)
        }
    }
}

type AxisError = (Option<usize>, Problem);

fn time_axis(
    first: Vec<f64>,
    lay: &Layout,
    opts: &ReadOptions,
) -> Result<(Vec<f64>, TimeAxis), AxisError> {
    if !is_index_column(lay, &first) {
        let unit = lay.units.first().cloned().unwrap_or_default();
        let scale = if unit.is_empty() {
            1.0
        } else {
            parse_quantity(&format!("1 {unit}"), Dim::Time).map_err(|_| {
                let cell = lay.names.first().cloned().unwrap_or_default();
                (
                    Some(1),
                    Problem::BadUnit {
                        cell: format!("{cell} ({unit})"),
                        expected: "time",
                    },
                )
            })?
        };
        let time = first.into_iter().map(|t| t * scale).collect();
        return Ok((time, TimeAxis::Column { scale }));
    }
    let interval = opts
        .interval
        .or(lay.meta.interval_s)
        .ok_or((Some(1), Problem::MissingInterval))?;
    let m = &lay.meta;
    let (start, stated) = match (m.start_s, m.trigger_s, m.trigger_index) {
        (Some(s), _, _) => (s, true),
        (None, Some(t), _) => (-t, true),
        (None, None, Some(i)) => (-i * interval, true),
        _ => (0.0, false),
    };
    let time = first.iter().map(|&i| start + i * interval).collect();
    Ok((
        time,
        TimeAxis::Index {
            start_s: start,
            interval_s: interval,
            start_stated: stated,
        },
    ))
}

/// The line of row `i` (rows of a chunk are on consecutive lines unless blank lines were
/// skipped, which only makes this a lower bound: it is used for messages only).
fn line_of(row: usize, row_lines: &[(usize, usize)]) -> usize {
    let k = row_lines.partition_point(|(r, _)| *r <= row).max(1) - 1;
    row_lines[k].1 + (row - row_lines[k].0)
}

fn check_increasing(
    time: &[f64],
    _first_line: usize,
    row_lines: &[(usize, usize)],
) -> Result<(), (usize, Problem)> {
    match time.windows(2).position(|w| w[1] <= w[0]) {
        None => Ok(()),
        Some(i) => Err((
            line_of(i + 1, row_lines),
            Problem::TimeNotIncreasing {
                previous: time[i],
                this: time[i + 1],
            },
        )),
    }
}

fn make_channel(lay: &Layout, col: usize, mut values: Vec<f64>) -> Result<Channel, Problem> {
    let unit = lay
        .units
        .get(col)
        .filter(|u| !u.is_empty())
        .cloned()
        .or_else(|| lay.meta.unit.clone())
        .unwrap_or_default();
    let prefix = if unit.is_empty() {
        1.0
    } else {
        [Dim::Voltage, Dim::Current]
            .into_iter()
            .find_map(|d| parse_quantity(&format!("1 {unit}"), d).ok())
            .unwrap_or(1.0)
    };
    let scale = prefix * lay.meta.probe_factor.unwrap_or(1.0);
    if scale != 1.0 {
        values.iter_mut().for_each(|v| *v *= scale);
    }
    Ok(Channel {
        name: lay
            .names
            .get(col)
            .filter(|n| !n.is_empty())
            .cloned()
            .unwrap_or_else(|| format!("channel {col}")),
        unit,
        column: col + 1,
        scale,
        values,
    })
}

/// The mean step when every step is within [`UNIFORM_TOLERANCE`] of it.
fn uniform_step(time: &[f64]) -> Option<f64> {
    let n = time.len();
    if n < 2 {
        return None;
    }
    let step = (time[n - 1] - time[0]) / (n - 1) as f64;
    let ok = time
        .iter()
        .enumerate()
        .all(|(i, &t)| (t - (time[0] + i as f64 * step)).abs() <= UNIFORM_TOLERANCE * step);
    ok.then_some(step)
}

/// On a uniform record, replace printed times by t₀ + i·Δ (removes their rounding).
fn regularise(mut time: Vec<f64>, step: Option<f64>) -> Vec<f64> {
    if let Some(dt) = step {
        let t0 = time[0];
        time.iter_mut()
            .enumerate()
            .for_each(|(i, t)| *t = t0 + i as f64 * dt);
    }
    time
}

#[cfg(test)]
mod tests {
    use super::*;

    fn read_text(text: &str, opts: &ReadOptions) -> Result<Capture, CaptureError> {
        parse("cap.csv", text.as_bytes(), opts)
    }

    #[test]
    fn time_column_units_and_channels() {
        let text = "t (ms),out (mV),stim (V)\n0,1,0\n0.5,2,5\n1.0,3,0\n";
        let opts = ReadOptions {
            stimulus: Some(ChannelRef::parse("stim")),
            ..Default::default()
        };
        let c = read_text(text, &opts).unwrap();
        assert_eq!(c.time, [0.0, 0.5e-3, 1.0e-3]);
        assert_eq!(c.output.values, [1e-3, 2e-3, 3e-3]);
        assert_eq!(c.stimulus.unwrap().values, [0.0, 5.0, 0.0]);
        assert_eq!(c.uniform_step, Some(0.5e-3));
        assert_eq!(c.lines, (2, 4));
    }

    #[test]
    fn index_column_with_metadata_interval_and_trigger() {
        let text = "Sample interval: 2 us\nTrigger position: 2\nProbe factor: 10\nindex;v\n0;0,1\n1;0,2\n2;0,3\n3;0,4\n";
        let c = read_text(text, &ReadOptions::default()).unwrap();
        assert!(matches!(
            c.axis,
            TimeAxis::Index {
                start_stated: true,
                ..
            }
        ));
        assert!((c.time[2]).abs() < 1e-18);
        assert!((c.time[3] - 2e-6).abs() < 1e-18);
        assert!((c.output.values[0] - 1.0).abs() < 1e-15);
    }

    #[test]
    fn malformed_rows_name_line_and_column() {
        let cases: &[(&str, usize, Option<usize>)] = &[
            ("t,y\n0,1\n1,abc\n", 3, Some(2)),
            ("t,y\n0,1\n1,nan\n", 3, Some(2)),
            ("t,y\n0,1\n1,\n", 3, Some(2)),
            ("t,y\n0,1\n2,1\n1,1\n", 4, Some(1)),
            ("t,y\n0,1\n2,1\n2,1\n", 4, Some(1)),
            ("t,y,z\n0,1,1\n1,2\n", 3, Some(3)),
            ("index,y\n0,1\n1,1\n", 1, Some(1)),
        ];
        for (text, line, col) in cases {
            let e = read_text(text, &ReadOptions::default()).unwrap_err();
            assert_eq!((e.line, e.column), (*line, *col), "{text:?}: {e}");
        }
    }

    #[test]
    fn unknown_channel_lists_the_channels() {
        let opts = ReadOptions {
            channel: Some(ChannelRef::parse("nope")),
            ..Default::default()
        };
        let e = read_text("t,a,b\n0,1,2\n1,1,2\n", &opts).unwrap_err();
        assert!(e.to_string().contains("1: a, 2: b"), "{e}");
    }

    #[test]
    fn large_files_split_across_threads_keep_order_and_lines() {
        let mut text = String::from("t,y\n");
        let n = 400_000;
        for i in 0..n {
            text.push_str(&format!("{},{}\n", i as f64 * 1e-6, i));
        }
        let c = read_text(&text, &ReadOptions::default()).unwrap();
        assert_eq!(c.len(), n);
        assert!(
            c.output
                .values
                .iter()
                .enumerate()
                .all(|(i, &v)| v == i as f64)
        );
        assert_eq!(c.lines.1, n + 1);
        text.push_str("1e9,oops\n");
        let e = read_text(&text, &ReadOptions::default()).unwrap_err();
        assert_eq!((e.line, e.column), (n + 2, Some(2)));
    }
}
