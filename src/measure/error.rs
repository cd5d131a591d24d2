//! Errors of the recovery: a bad capture names the file, line, column and what was expected.

/// What is wrong at a place in a capture file.
#[derive(Debug, Clone, PartialEq, thiserror::Error)]
pub enum Problem {
    /// A cell that is not a number.
    #[error("expected a number in column {column_name}, found \"{found}\"")]
    NotANumber {
        /// Name of the column (header or "column N").
        column_name: String,
        /// The cell as written (shortened).
        found: String,
    },
    /// An empty cell.
    #[error("expected a number in column {column_name}, found an empty cell")]
    Empty {
        /// Name of the column.
        column_name: String,
    },
    /// NaN or infinite.
    #[error("expected a finite number in column {column_name}, found \"{found}\"")]
    NotFinite {
        /// Name of the column.
        column_name: String,
        /// The cell as written.
        found: String,
    },
    /// A row with fewer fields than the columns that are read.
    #[error("expected at least {expected} fields, found {found}")]
    TooFewFields {
        /// Fields needed.
        expected: usize,
        /// Fields present.
        found: usize,
    },
    /// Time that does not increase.
    #[error("expected time to increase: {this:e} s follows {previous:e} s")]
    TimeNotIncreasing {
        /// Time of the previous row, s.
        previous: f64,
        /// Time of this row, s.
        this: f64,
    },
    /// No numeric rows where data was expected.
    #[error(
        "expected rows of numbers separated by ',', ';' or tab (a time or index column and at least one channel), found none in the first {searched} lines"
    )]
    NoData {
        /// Lines searched.
        searched: usize,
    },
    /// The file is larger than the reader accepts.
    #[error("the file has {bytes} bytes; at most {max} are read")]
    TooLarge {
        /// Size of the file.
        bytes: u64,
        /// Accepted maximum.
        max: u64,
    },
    /// More rows than the reader accepts.
    #[error("more than {max} data rows; at most {max} are read")]
    TooManyRows {
        /// Accepted maximum.
        max: usize,
    },
    /// Not a regular file (a folder, device or pipe).
    #[error("expected a regular file")]
    NotRegular,
    /// The file cannot be read.
    #[error("cannot read: {0}")]
    Io(String),
    /// The file is not UTF-8 text where text was expected.
    #[error("expected text (UTF-8) in the header or metadata")]
    NotText,
    /// `--channel`/`--stimulus` names no column.
    #[error("expected a channel named or numbered {wanted:?}; the file has {available}")]
    UnknownChannel {
        /// What was asked for.
        wanted: String,
        /// The channels present, listed.
        available: String,
    },
    /// An index column without a sample interval.
    #[error(
        "expected a sample interval for the index column (a metadata line such as \"sample interval, 1e-6\" or --interval)"
    )]
    MissingInterval,
    /// A unit that does not fit the column.
    #[error("expected a {expected} unit in the header cell \"{cell}\"")]
    BadUnit {
        /// The header cell.
        cell: String,
        /// What kind of unit was expected.
        expected: &'static str,
    },
    /// A metadata value that cannot be read.
    #[error("expected {expected} for the metadata key \"{key}\", found \"{found}\"")]
    BadMetadata {
        /// The key.
        key: String,
        /// What kind of value was expected.
        expected: &'static str,
        /// The value as written.
        found: String,
    },
    /// Too few rows to fit anything.
    #[error("expected at least {needed} data rows, found {found}")]
    TooFewRows {
        /// Rows needed.
        needed: usize,
        /// Rows found.
        found: usize,
    },
    /// No usable samples after the pulse ends.
    #[error(
        "expected samples after the pulse ends at {pulse_end:e} s (capture time), but the record ends at {record_end:e} s"
    )]
    NoSamplesAfterPulse {
        /// End of the pulse in the capture's time, s.
        pulse_end: f64,
        /// Last sample time, s.
        record_end: f64,
    },
    /// Too few usable samples after the pulse to fit the modes.
    #[error(
        "expected at least {needed} unclipped samples after the pulse to fit {order} mode(s), found {found}"
    )]
    TooShortAfterPulse {
        /// Samples needed.
        needed: usize,
        /// Samples found.
        found: usize,
        /// Model order being fitted.
        order: usize,
    },
    /// The stimulus channel shows no pulse.
    #[error(
        "expected a pulse in the stimulus channel {column_name}: its range {range:e} is not above its noise {noise:e}"
    )]
    NoStimulusPulse {
        /// The channel.
        column_name: String,
        /// Max − min.
        range: f64,
        /// Its noise estimate.
        noise: f64,
    },
}

/// A bad capture: where and what.
#[derive(Debug, Clone, PartialEq, thiserror::Error)]
#[error("{file}:{line}{}: {problem}", column.map(|c| format!(":{c}")).unwrap_or_default())]
pub struct CaptureError {
    /// The file as given.
    pub file: String,
    /// 1-based line.
    pub line: usize,
    /// 1-based column (field), when one is to blame.
    pub column: Option<usize>,
    /// What is wrong.
    pub problem: Problem,
}

/// Why a recovery could not be made.
#[derive(Debug, Clone, PartialEq, thiserror::Error)]
pub enum RecoverError {
    /// The capture is unusable.
    #[error("{0}")]
    Capture(#[from] CaptureError),
    /// The settings are inconsistent (e.g. a forced order of zero).
    #[error("{0}")]
    Settings(String),
    /// An iterative step did not converge within its bound.
    #[error("the {step} did not converge within {iterations} iterations")]
    NotConverged {
        /// Which step.
        step: &'static str,
        /// Its iteration bound.
        iterations: usize,
    },
}
