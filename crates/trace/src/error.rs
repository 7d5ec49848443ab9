//! Errors and warnings of the importer.

use serde::Serialize;

use crate::units::Quantity;

/// Why a file could not be read as a current–time trace.
///
/// Every variant names the file (`file`, last in the message) and, where one exists, the line
/// and column, and says what was expected.
#[derive(Debug, thiserror::Error)]
#[non_exhaustive]
pub enum ImportError {
    /// The operating system refused to read the file.
    #[error("cannot read the file ({error}): {file}")]
    Io {
        /// File name or label.
        file: String,
        /// The underlying error.
        error: std::io::Error,
    },
    /// The import was stopped through its [`crate::Progress`].
    #[error("reading was cancelled: {file}")]
    Cancelled {
        /// File name or label.
        file: String,
    },
    /// The file holds no bytes, or only whitespace.
    #[error("the file is empty: {file}")]
    Empty {
        /// File name or label.
        file: String,
    },
    /// The bytes are not text.
    #[error(
        "this is not a text file (binary byte 0x{byte:02x} at offset {offset}); export the trace as CSV or text: {file}"
    )]
    Binary {
        /// File name or label.
        file: String,
        /// Byte offset of the first offending byte.
        offset: u64,
        /// The offending byte.
        byte: u8,
    },
    /// Text in an encoding that could not be decoded.
    #[error("cannot decode the text ({detail}): {file}")]
    Encoding {
        /// File name or label.
        file: String,
        /// What went wrong.
        detail: String,
    },
    /// A line longer than the importer accepts; tables of numbers never need one.
    #[error(
        "line {line} is longer than {limit} bytes with no line break; this does not look like a current–time table: {file}"
    )]
    LineTooLong {
        /// File name or label.
        file: String,
        /// Line number (from 1).
        line: u64,
        /// The limit in bytes.
        limit: usize,
    },
    /// No block of numeric rows with at least two columns was found.
    #[error(
        "no table of numbers found in the first {lines} lines (expected rows of at least two numeric columns, such as time and current): {file}"
    )]
    NoTable {
        /// File name or label.
        file: String,
        /// Number of lines examined.
        lines: usize,
    },
    /// A header (or preamble) but no data rows under it.
    #[error("the header on line {line} has no data rows under it: {file}")]
    HeaderOnly {
        /// File name or label.
        file: String,
        /// Line of the header.
        line: u64,
    },
    /// Only one numeric column: there is no current next to the time, or vice versa.
    #[error(
        "only one numeric column from line {line}; a trace needs time and current (check the separator): {file}"
    )]
    SingleColumn {
        /// File name or label.
        file: String,
        /// First data line.
        line: u64,
    },
    /// A column needed for the trace could not be identified.
    #[error(
        "no {} column found among {available}; name it with the {} option: {file}",
        quantity.name(),
        override_hint(*quantity)
    )]
    MissingColumn {
        /// File name or label.
        file: String,
        /// The quantity that is missing.
        quantity: Quantity,
        /// The columns there are, for the message.
        available: String,
    },
    /// A column chosen by the user does not exist.
    #[error("the {} column {wanted:?} is not in the file (columns: {available}): {file}", quantity.name())]
    NoSuchColumn {
        /// File name or label.
        file: String,
        /// The quantity it was chosen for.
        quantity: Quantity,
        /// What the user asked for.
        wanted: String,
        /// The columns there are.
        available: String,
    },
    /// A unit that does not measure what its column holds.
    #[error("the unit {unit:?} does not measure {}: {file}", quantity.name())]
    WrongUnit {
        /// File name or label.
        file: String,
        /// The column's quantity.
        quantity: Quantity,
        /// The unit given.
        unit: String,
    },
    /// Too many rows could not be read to trust the rest.
    #[error(
        "line {line}, column {column}: expected {expected}, found {found:?} ({bad} of {total} data rows unreadable, more than the {allowed} allowed): {file}"
    )]
    BadRows {
        /// File name or label.
        file: String,
        /// First unreadable line.
        line: u64,
        /// Column of the first problem (from 1).
        column: usize,
        /// What was expected there.
        expected: String,
        /// What was found (shortened).
        found: String,
        /// Number of unreadable rows.
        bad: usize,
        /// Number of data rows in all.
        total: usize,
        /// How many may be skipped with a warning.
        allowed: usize,
    },
    /// Time decreases from one row to the next.
    #[error(
        "line {line}: time goes backwards ({time_s} s after {previous_s} s); a trace must be in time order: {file}"
    )]
    TimeBackwards {
        /// File name or label.
        file: String,
        /// Line of the later row.
        line: u64,
        /// Time of the row before, in seconds.
        previous_s: f64,
        /// Time of this row, in seconds.
        time_s: f64,
    },
    /// Two rows with the same time.
    #[error(
        "line {line}: duplicate timestamp {time_s} s (same as the row before); each sample needs its own time: {file}"
    )]
    DuplicateTime {
        /// File name or label.
        file: String,
        /// Line of the repeated row.
        line: u64,
        /// The repeated time in seconds.
        time_s: f64,
    },
    /// Times so large compared with their spacing that moving the origin to the step merges
    /// neighbouring samples.
    #[error(
        "line {line}: the times are too large for their spacing ({time_s} s); neighbouring samples become equal once the origin moves to the step: {file}"
    )]
    TimeResolution {
        /// File name or label.
        file: String,
        /// Line of the first merged row.
        line: u64,
        /// Its time on the file's clock, in s.
        time_s: f64,
    },
    /// Fewer rows than any fit can use.
    #[error(
        "only {rows} data {}; a fit needs at least {needed} (was the export cut short?): {file}",
        if *rows == 1 { "row" } else { "rows" }
    )]
    TooFewRows {
        /// File name or label.
        file: String,
        /// Rows read.
        rows: usize,
        /// Rows needed.
        needed: usize,
    },
}

fn override_hint(quantity: Quantity) -> &'static str {
    match quantity {
        Quantity::Time => "--time-col",
        Quantity::Current => "--current-col",
        Quantity::Potential => "--potential-col",
        Quantity::Charge => "--charge-col",
    }
}

/// The kind of a warning, for programs that act on them.
#[derive(Debug, Clone, Copy, PartialEq, Eq, Serialize)]
#[serde(rename_all = "snake_case")]
#[non_exhaustive]
pub enum WarningKind {
    /// Rows that could not be read were skipped.
    SkippedRows,
    /// The last row was cut short and skipped.
    TruncatedLastRow,
    /// A unit was assumed because the file did not state one.
    UnitAssumed,
    /// A column's role was guessed from its position or values.
    RoleAssumed,
    /// The header's name and unit disagree; the unit was trusted.
    RoleUnitConflict,
    /// The time origin of the step could not be seen in the file and was assumed.
    OriginAssumed,
    /// The text was decoded from an encoding other than UTF-8.
    Decoded,
}

/// A problem the importer recovered from. Nothing is dropped without one.
#[derive(Debug, Clone, PartialEq, Serialize)]
pub struct ImportWarning {
    /// What kind of problem.
    pub kind: WarningKind,
    /// A readable sentence.
    pub message: String,
    /// Every line concerned (from 1), for skipped rows.
    pub lines: Vec<u64>,
}
