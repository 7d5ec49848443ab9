//! Reads the current–time files potentiostats export into a clean [`Trace`]: SI columns (s, A,
//! V, C), the units and column names found, the preamble kept as metadata, the step onset, the
//! segments between potential steps, the pre-step baseline and the sign of the current.
//!
//! The dialect is detected from the first megabyte: comma, semicolon, tab or whitespace
//! separators, decimal points or commas, quotes, a UTF-8 byte-order mark, UTF-16 text, CRLF, LF
//! or CR line endings, a free-text or `key = value` preamble, a header with units in any of the
//! usual spellings (or a separate units row, or no header at all). The bulk of the file is then
//! parsed in chunks across threads.
//!
//! Problems it can recover from (a few unreadable rows, a cut-off last row) become
//! [`ImportWarning`]s that count and locate every skipped row; anything else is an
//! [`ImportError`] naming the file, the line and what was expected.
//!
//! ```
//! use diffusor_trace::{import_bytes, ImportOptions, Polarity};
//!
//! let text = "# synthetic example\nt (ms);I (µA)\n0;0\n1;0\n2;80,0\n3;56,6\n4;46,2\n5;40,0\n\
//!             6;35,8\n7;32,7\n8;30,2\n9;28,3\n10;26,7\n11;25,3\n";
//! let trace = import_bytes("example.csv", text.as_bytes(), &ImportOptions::default())?;
//! assert_eq!(trace.rows(), 12);
//! assert_eq!(trace.current_a[2], 80.0e-6);
//! assert_eq!(trace.polarity, Some(Polarity::Anodic));
//! // The step happened between 1 ms and 2 ms; time is re-zeroed there.
//! assert!((trace.time_s[2] - 0.5e-3).abs() < 1e-12);
//! # Ok::<(), diffusor_trace::ImportError>(())
//! ```
#![deny(missing_docs)]

mod columns;
mod error;
mod fields;
mod onset;
mod parse;
mod progress;
mod sniff;
mod units;

use std::io::Read;
use std::path::Path;

pub use columns::{ColumnInfo, Provenance};
pub use error::{ImportError, ImportWarning, WarningKind};
pub use fields::{DecimalMark, Delimiter};
pub use onset::{Baseline, Onset, OnsetMethod, Polarity, Segment, SegmentKind};
pub use progress::Progress;
pub use sniff::{Dialect, LineEnding, MetadataLine, TextEncoding};
pub use units::{Quantity, Unit, format_si};

use parse::{Parsed, Problem};

/// The fewest data rows a trace may have: fewer than any fit can use with its windows.
pub const MIN_ROWS: usize = 10;

/// A column chosen by the user: by its position (from 1) or by its header text.
#[derive(Debug, Clone, PartialEq, Eq)]
pub enum ColumnChoice {
    /// Position in the row, from 1.
    Number(usize),
    /// Header name or full header text, compared without regard to case.
    Name(String),
}

impl ColumnChoice {
    /// Reads `3` as a position and anything else as a name.
    pub fn parse(text: &str) -> ColumnChoice {
        match text.trim().parse::<usize>() {
            Ok(n) => ColumnChoice::Number(n),
            Err(_) => ColumnChoice::Name(text.trim().to_owned()),
        }
    }
}

/// Where the time origin of the step is taken from.
#[derive(Debug, Clone, Copy, PartialEq, Default)]
pub enum OnsetChoice {
    /// Detect the step from the potential column, else from the current (the default).
    #[default]
    Detect,
    /// Keep the file's own clock: no re-zeroing, one step segment.
    FileClock,
    /// The step happened at this time on the file's clock, in s.
    At(f64),
}

/// Choices that beat the importer's guesses.
#[derive(Debug, Clone)]
pub struct ImportOptions {
    /// Which column is time.
    pub time_column: Option<ColumnChoice>,
    /// Which column is current.
    pub current_column: Option<ColumnChoice>,
    /// Which column is potential.
    pub potential_column: Option<ColumnChoice>,
    /// Which column is charge.
    pub charge_column: Option<ColumnChoice>,
    /// Unit of the time column.
    pub time_unit: Option<Unit>,
    /// Unit of the current column.
    pub current_unit: Option<Unit>,
    /// Unit of the potential column.
    pub potential_unit: Option<Unit>,
    /// Unit of the charge column.
    pub charge_unit: Option<Unit>,
    /// Where the time origin is.
    pub onset: OnsetChoice,
    /// Largest share of unreadable rows skipped with a warning (at least 3 rows are always
    /// allowed); more is an error. Default 1 %.
    pub max_bad_fraction: f64,
    /// Threads for the bulk parse; 0 picks the number of cores.
    pub threads: usize,
    /// Where the import reports how far it has got, and is told to stop.
    pub progress: Option<std::sync::Arc<Progress>>,
}

impl Default for ImportOptions {
    fn default() -> Self {
        ImportOptions {
            time_column: None,
            current_column: None,
            potential_column: None,
            charge_column: None,
            time_unit: None,
            current_unit: None,
            potential_unit: None,
            charge_unit: None,
            onset: OnsetChoice::Detect,
            max_bad_fraction: 0.01,
            threads: 0,
            progress: None,
        }
    }
}

/// A current–time trace in SI units.
#[derive(Debug, Clone)]
pub struct Trace {
    /// File name or label it was read from.
    pub file: String,
    /// How the file was written.
    pub dialect: Dialect,
    /// Every column of the table, with the role and unit decided for it.
    pub columns: Vec<ColumnInfo>,
    /// Preamble lines.
    pub metadata: Vec<MetadataLine>,
    /// Time in s since the step onset (negative before it), strictly increasing.
    pub time_s: Vec<f64>,
    /// Current in A, with the file's sign.
    pub current_a: Vec<f64>,
    /// Potential in V, when the file has it.
    pub potential_v: Option<Vec<f64>>,
    /// Charge in C, when the file has it.
    pub charge_c: Option<Vec<f64>>,
    /// The step onset.
    pub onset: Onset,
    /// Baseline (if any) and step segments, in time order.
    pub segments: Vec<Segment>,
    /// Mean and spread of the pre-step current, when there are pre-step samples.
    pub baseline: Option<Baseline>,
    /// Sign of the faradaic current after the first step.
    pub polarity: Option<Polarity>,
    /// Everything the importer recovered from.
    pub warnings: Vec<ImportWarning>,
}

impl Trace {
    /// Number of samples.
    pub fn rows(&self) -> usize {
        self.time_s.len()
    }

    /// Median sampling interval in s.
    pub fn sampling_interval_s(&self) -> f64 {
        median_interval(&self.time_s)
    }

    /// The step segments (not the baseline).
    pub fn steps(&self) -> impl Iterator<Item = &Segment> {
        self.segments.iter().filter(|s| s.kind == SegmentKind::Step)
    }

    /// The current of a segment with the faradaic sign made positive (multiplied by the
    /// segment's polarity, so noise around zero keeps its sign), in A.
    pub fn faradaic_current_a(&self, segment: &Segment) -> Vec<f64> {
        let f = segment
            .polarity
            .or(self.polarity)
            .map_or(1.0, Polarity::factor);
        self.current_a[segment.start..segment.end]
            .iter()
            .map(|c| c * f)
            .collect()
    }

    /// The times of a segment measured from its own step, in s.
    pub fn segment_time_s(&self, segment: &Segment) -> Vec<f64> {
        self.time_s[segment.start..segment.end]
            .iter()
            .map(|t| t - segment.start_time_s)
            .collect()
    }

    /// The column that holds `quantity`, if any.
    pub fn column(&self, quantity: Quantity) -> Option<&ColumnInfo> {
        self.columns.iter().find(|c| c.role == Some(quantity))
    }
}

fn median_interval(time: &[f64]) -> f64 {
    if time.len() < 2 {
        return f64::NAN;
    }
    let stride = (time.len() / 100_000).max(1);
    let mut d: Vec<f64> = (1..time.len())
        .step_by(stride)
        .map(|i| time[i] - time[i - 1])
        .collect();
    let mid = d.len() / 2;
    *d.select_nth_unstable_by(mid, f64::total_cmp).1
}

/// The first index `i` with `t[i] <= t[i - 1]`, if any. Blocks of samples are first tested
/// with a branch-free fold the compiler can vectorise; only a block that fails is searched.
fn first_not_increasing(t: &[f64]) -> Option<usize> {
    const BLOCK: usize = 4096;
    let mut start = 1;
    while start < t.len() {
        let end = (start + BLOCK).min(t.len());
        let pairs = t[start - 1..end].windows(2);
        if pairs.fold(false, |bad, w| bad | (w[1] <= w[0])) {
            return (start..end).find(|&i| t[i] <= t[i - 1]);
        }
        start = end;
    }
    None
}

/// Reads a file.
pub fn import_path(path: &Path, options: &ImportOptions) -> Result<Trace, ImportError> {
    let file = path.display().to_string();
    let io = |error| ImportError::Io {
        file: file.clone(),
        error,
    };
    let mut f = std::fs::File::open(path).map_err(io)?;
    let total = f.metadata().map(|m| m.len()).ok();
    let mut head = Vec::with_capacity(sniff::SNIFF_BYTES);
    (&mut f)
        .take(sniff::SNIFF_BYTES as u64)
        .read_to_end(&mut head)
        .map_err(io)?;
    let at_eof = head.len() < sniff::SNIFF_BYTES;
    if let Some(order) = sniff::utf16_order(&head) {
        f.read_to_end(&mut head).map_err(io)?;
        let text = sniff::decode_utf16(&head, order, &file)?;
        return import_decoded(&file, &text, order, options);
    }
    import_from(&file, &head, at_eof, &mut f, total, None, options)
}

/// Reads a file already in memory; `name` labels it in messages.
pub fn import_bytes(
    name: &str,
    bytes: &[u8],
    options: &ImportOptions,
) -> Result<Trace, ImportError> {
    if let Some(order) = sniff::utf16_order(bytes) {
        let text = sniff::decode_utf16(bytes, order, name)?;
        return import_decoded(name, &text, order, options);
    }
    let cut = bytes.len().min(sniff::SNIFF_BYTES);
    let mut rest = &bytes[cut..];
    import_from(
        name,
        &bytes[..cut],
        cut == bytes.len(),
        &mut rest,
        Some(bytes.len() as u64),
        None,
        options,
    )
}

fn import_decoded(
    file: &str,
    text: &[u8],
    encoding: TextEncoding,
    options: &ImportOptions,
) -> Result<Trace, ImportError> {
    let cut = text.len().min(sniff::SNIFF_BYTES);
    let mut rest = &text[cut..];
    import_from(
        file,
        &text[..cut],
        cut == text.len(),
        &mut rest,
        Some(text.len() as u64),
        Some(encoding),
        options,
    )
}

fn import_from(
    file: &str,
    head: &[u8],
    at_eof: bool,
    rest: &mut (dyn Read + Send),
    total_bytes: Option<u64>,
    decoded_from: Option<TextEncoding>,
    options: &ImportOptions,
) -> Result<Trace, ImportError> {
    if head.iter().all(u8::is_ascii_whitespace) && at_eof {
        return Err(ImportError::Empty {
            file: file.to_owned(),
        });
    }
    let (start, encoding) = match decoded_from {
        Some(e) => (0, e),
        None if head.starts_with(&[0xEF, 0xBB, 0xBF]) => (3, TextEncoding::Utf8Bom),
        None => {
            // A multi-byte character cut at the end of the head is still UTF-8.
            let utf8 = match std::str::from_utf8(head) {
                Ok(_) => true,
                Err(e) => e.error_len().is_none(),
            };
            (
                0,
                if utf8 {
                    TextEncoding::Utf8
                } else {
                    TextEncoding::Latin1
                },
            )
        }
    };
    let head = &head[start..];
    sniff::check_text(head, file)?;
    let sniffed = sniff::sniff(head, at_eof, encoding, file)?;
    let mut warnings = Vec::new();
    if let Some(e) = decoded_from {
        warnings.push(ImportWarning {
            kind: WarningKind::Decoded,
            message: format!("decoded from {} text", e.name()),
            lines: Vec::new(),
        });
    }
    if encoding == TextEncoding::Latin1 {
        warnings.push(ImportWarning {
            kind: WarningKind::Decoded,
            message: "the text is not UTF-8; header and metadata were read as Latin-1".to_owned(),
            lines: Vec::new(),
        });
    }
    let (columns, roles) = assign_columns(&sniffed, options, file, &mut warnings)?;

    let wanted: Vec<usize> = [roles.time, roles.current]
        .into_iter()
        .chain(roles.potential)
        .chain(roles.charge)
        .collect();
    let data = &head[sniffed.data_offset..];
    let remaining =
        total_bytes.map(|total| total.saturating_sub((start + sniffed.data_offset) as u64));
    let threads = if remaining.is_some_and(|r| r < parse::PARALLEL_MIN) {
        // One block: not worth a thread.
        1
    } else if options.threads == 0 {
        std::thread::available_parallelism()
            .map_or(1, usize::from)
            .min(8)
    } else {
        options.threads
    };
    let spec = parse::Spec {
        delimiter: sniffed.dialect.delimiter,
        decimal: sniffed.dialect.decimal,
        eol: sniffed.dialect.line_ending.byte(),
        fields: sniffed.dialect.fields,
        wanted,
        threads,
        block: parse::BLOCK,
        progress: options.progress.clone(),
    };
    if let (Some(p), Some(total)) = (&options.progress, total_bytes) {
        p.set_total(total);
        p.add_parsed((start + sniffed.data_offset) as u64);
    }
    let capacity = match remaining {
        Some(remaining) => {
            let lines = memchr::memchr_iter(spec.eol, data).count().max(1);
            let per_line = (data.len() / lines).max(1) as u64;
            (remaining / per_line + 16) as usize
        }
        None => 0,
    };
    let parsed = parse::parse_stream(
        data,
        rest,
        sniffed.dialect.first_data_line,
        &spec,
        capacity,
        file,
    )?;
    build_trace(file, sniffed, columns, &roles, parsed, options, warnings)
}

/// Field indices (from 0) chosen for each role.
struct Roles {
    time: usize,
    current: usize,
    potential: Option<usize>,
    charge: Option<usize>,
}

fn choice_index(
    choice: &ColumnChoice,
    columns: &[ColumnInfo],
    quantity: Quantity,
    file: &str,
) -> Result<usize, ImportError> {
    let found = match choice {
        ColumnChoice::Number(n) => (*n >= 1 && *n <= columns.len()).then(|| n - 1),
        ColumnChoice::Name(name) => columns
            .iter()
            .position(|c| c.name.eq_ignore_ascii_case(name) || c.header.eq_ignore_ascii_case(name)),
    };
    found.ok_or_else(|| ImportError::NoSuchColumn {
        file: file.to_owned(),
        quantity,
        wanted: match choice {
            ColumnChoice::Number(n) => n.to_string(),
            ColumnChoice::Name(s) => s.clone(),
        },
        available: describe_columns(columns),
    })
}

fn describe_columns(columns: &[ColumnInfo]) -> String {
    columns
        .iter()
        .map(|c| {
            if c.header.is_empty() {
                format!("{}", c.number)
            } else {
                format!("{} {:?}", c.number, c.header)
            }
        })
        .collect::<Vec<_>>()
        .join(", ")
}

fn assign_columns(
    sniffed: &sniff::Sniffed,
    options: &ImportOptions,
    file: &str,
    warnings: &mut Vec<ImportWarning>,
) -> Result<(Vec<ColumnInfo>, Roles), ImportError> {
    let k = sniffed.dialect.fields;
    let mut cols: Vec<ColumnInfo> = (0..k)
        .map(|i| {
            let header = sniffed
                .header
                .as_ref()
                .and_then(|h| h.get(i))
                .cloned()
                .unwrap_or_default();
            let (name, mut unit_text) = columns::split_header(&header);
            if let Some(u) = sniffed.units.as_ref().and_then(|u| u.get(i))
                && !u.is_empty()
            {
                unit_text = Some(u.clone());
            }
            let unit = unit_text.as_deref().and_then(Unit::parse);
            let by_name = columns::role_from_name(&name);
            let role = unit.as_ref().map(|u| u.quantity).or(by_name);
            if let (Some(u), Some(n)) = (&unit, by_name)
                && u.quantity != n
            {
                warnings.push(ImportWarning {
                    kind: WarningKind::RoleUnitConflict,
                    message: format!(
                        "column {} {header:?}: the name suggests {} but the unit {} measures {}; the unit was trusted",
                        i + 1,
                        n.name(),
                        u.symbol,
                        u.quantity.name()
                    ),
                    lines: Vec::new(),
                });
            }
            ColumnInfo {
                number: i + 1,
                header,
                name,
                unit_text,
                role,
                role_provenance: Provenance::Header,
                unit,
                unit_provenance: Provenance::Header,
            }
        })
        .collect();

    // Explicit choices first: they take the role away from any other column.
    let choices = [
        (Quantity::Time, &options.time_column),
        (Quantity::Current, &options.current_column),
        (Quantity::Potential, &options.potential_column),
        (Quantity::Charge, &options.charge_column),
    ];
    for (q, choice) in choices {
        if let Some(choice) = choice {
            let idx = choice_index(choice, &cols, q, file)?;
            for c in &mut cols {
                if c.role == Some(q) {
                    c.role = None;
                }
            }
            cols[idx].role = Some(q);
            cols[idx].role_provenance = Provenance::Override;
        }
    }
    let first = |cols: &[ColumnInfo], q| cols.iter().position(|c| c.role == Some(q));

    // Guesses from the values, when the header did not say.
    let sample = &sniffed.sample;
    let column_values = |i: usize| sample.iter().map(move |r| r[i]);
    let mut time = first(&cols, Quantity::Time);
    if time.is_none() {
        time = (0..k).find(|&i| {
            cols[i].role.is_none() && {
                let v: Vec<f64> = column_values(i).collect();
                v.len() >= 2 && v.windows(2).all(|w| w[1] > w[0])
            }
        });
        if let Some(i) = time {
            cols[i].role = Some(Quantity::Time);
            cols[i].role_provenance = Provenance::Assumed;
            warnings.push(ImportWarning {
                kind: WarningKind::RoleAssumed,
                message: format!(
                    "column {} taken as time (the first strictly increasing column); choose another with --time-col",
                    i + 1
                ),
                lines: Vec::new(),
            });
        }
    }
    let Some(time) = time else {
        return Err(ImportError::MissingColumn {
            file: file.to_owned(),
            quantity: Quantity::Time,
            available: describe_columns(&cols),
        });
    };
    let mut current = first(&cols, Quantity::Current);
    if current.is_none() {
        let free: Vec<usize> = (0..k).filter(|&i| cols[i].role.is_none()).collect();
        // A column with few distinct values is an applied potential, not a current.
        let stepped = |i: usize| {
            let mut v: Vec<f64> = column_values(i).collect();
            v.sort_by(f64::total_cmp);
            v.dedup();
            v.len() <= (sample.len() / 20).max(3)
        };
        if first(&cols, Quantity::Potential).is_none()
            && free.len() >= 2
            && let Some(&p) = free.iter().find(|&&i| stepped(i))
        {
            cols[p].role = Some(Quantity::Potential);
            cols[p].role_provenance = Provenance::Assumed;
            warnings.push(ImportWarning {
                kind: WarningKind::RoleAssumed,
                message: format!(
                    "column {} taken as potential (it holds few distinct values); choose another with --potential-col",
                    p + 1
                ),
                lines: Vec::new(),
            });
        }
        current = (0..k)
            .find(|&i| cols[i].role.is_none() && !stepped(i))
            .or_else(|| (0..k).find(|&i| cols[i].role.is_none()));
        if let Some(i) = current {
            cols[i].role = Some(Quantity::Current);
            cols[i].role_provenance = Provenance::Assumed;
            warnings.push(ImportWarning {
                kind: WarningKind::RoleAssumed,
                message: format!(
                    "column {} taken as current (the header does not name one); choose another with --current-col",
                    i + 1
                ),
                lines: Vec::new(),
            });
        }
    }
    let Some(current) = current else {
        return Err(ImportError::MissingColumn {
            file: file.to_owned(),
            quantity: Quantity::Current,
            available: describe_columns(&cols),
        });
    };
    let roles = Roles {
        time,
        current,
        potential: first(&cols, Quantity::Potential),
        charge: first(&cols, Quantity::Charge),
    };
    // Columns with a role that are not used (a second time column, say) lose it.
    for (i, c) in cols.iter_mut().enumerate() {
        let used = i == roles.time
            || i == roles.current
            || Some(i) == roles.potential
            || Some(i) == roles.charge;
        if !used {
            c.role = None;
        }
    }

    // Units: the user's, else the header's, else SI with a warning.
    let unit_choices = [
        (Quantity::Time, &options.time_unit),
        (Quantity::Current, &options.current_unit),
        (Quantity::Potential, &options.potential_unit),
        (Quantity::Charge, &options.charge_unit),
    ];
    for c in &mut cols {
        let Some(q) = c.role else {
            continue;
        };
        let given = unit_choices
            .iter()
            .find(|(uq, _)| *uq == q)
            .and_then(|(_, u)| u.as_ref());
        if let Some(u) = given {
            if u.quantity != q {
                return Err(ImportError::WrongUnit {
                    file: file.to_owned(),
                    quantity: q,
                    unit: u.symbol.clone(),
                });
            }
            c.unit = Some(u.clone());
            c.unit_provenance = Provenance::Override;
        } else if let Some(u) = &c.unit {
            if u.quantity != q {
                return Err(ImportError::WrongUnit {
                    file: file.to_owned(),
                    quantity: q,
                    unit: u.symbol.clone(),
                });
            }
        } else {
            c.unit = Some(Unit::si(q));
            c.unit_provenance = Provenance::Assumed;
            warnings.push(ImportWarning {
                kind: WarningKind::UnitAssumed,
                message: format!(
                    "no unit for the {} column {}; assumed {} (set it with --{}-unit)",
                    q.name(),
                    c.number,
                    q.si_symbol(),
                    q.name()
                ),
                lines: Vec::new(),
            });
        }
    }
    Ok((cols, roles))
}

fn describe_problem(p: &Problem, fields: usize) -> (usize, String, String) {
    match p {
        Problem::Ragged { found } => (
            (*found).min(fields) + 1,
            format!("{fields} fields"),
            format!("{found} fields"),
        ),
        Problem::NotNumber { column, text } => (*column, "a number".to_owned(), text.clone()),
        Problem::NonFinite { column, text } => {
            (*column, "a finite number".to_owned(), text.clone())
        }
    }
}

fn line_list(lines: &[u64]) -> String {
    let shown: Vec<String> = lines.iter().take(10).map(u64::to_string).collect();
    if lines.len() > 10 {
        format!("{} and {} more", shown.join(", "), lines.len() - 10)
    } else {
        shown.join(", ")
    }
}

fn build_trace(
    file: &str,
    sniffed: sniff::Sniffed,
    columns: Vec<ColumnInfo>,
    roles: &Roles,
    mut parsed: Parsed,
    options: &ImportOptions,
    mut warnings: Vec<ImportWarning>,
) -> Result<Trace, ImportError> {
    let fields = sniffed.dialect.fields;
    let rows = parsed.columns[0].len();
    // A cut-off last row is its own warning, not counted against the allowance.
    let mut truncated = None;
    if parsed.ends_without_eol
        && parsed
            .bad
            .last()
            .is_some_and(|b| b.line == parsed.last_line)
    {
        truncated = parsed.bad.pop();
    }
    let total = rows + parsed.bad.len();
    let allowed = ((options.max_bad_fraction * total as f64) as usize).max(3);
    if let Some(first) = parsed.bad.first() {
        let (column, expected, found) = describe_problem(&first.problem, fields);
        if parsed.bad.len() > allowed {
            return Err(ImportError::BadRows {
                file: file.to_owned(),
                line: first.line,
                column,
                expected,
                found,
                bad: parsed.bad.len(),
                total,
                allowed,
            });
        }
        let lines: Vec<u64> = parsed.bad.iter().map(|b| b.line).collect();
        warnings.push(ImportWarning {
            kind: WarningKind::SkippedRows,
            message: format!(
                "skipped {} unreadable row{} (line{} {}); the first: column {column}, expected {expected}, found {found:?}",
                lines.len(),
                if lines.len() == 1 { "" } else { "s" },
                if lines.len() == 1 { "" } else { "s" },
                line_list(&lines),
            ),
            lines,
        });
    }
    if let Some(t) = truncated {
        warnings.push(ImportWarning {
            kind: WarningKind::TruncatedLastRow,
            message: format!(
                "the last row (line {}) is cut short and was skipped; the export may be incomplete",
                t.line
            ),
            lines: vec![t.line],
        });
    }
    if rows < MIN_ROWS {
        return Err(ImportError::TooFewRows {
            file: file.to_owned(),
            rows,
            needed: MIN_ROWS,
        });
    }

    // To SI.
    let mut out_cols = std::mem::take(&mut parsed.columns).into_iter();
    let mut take = |field: usize| {
        let mut v = out_cols.next().unwrap_or_default();
        if let Some(u) = columns[field].unit.as_ref().filter(|u| u.to_si != 1.0) {
            v.iter_mut().for_each(|x| *x = u.to_si_value(*x));
        }
        v
    };
    let mut time_s = take(roles.time);
    let current_a = take(roles.current);
    let potential_v = roles.potential.map(&mut take);
    let charge_c = roles.charge.map(&mut take);

    if let Some(i) = first_not_increasing(&time_s) {
        let line = parsed.line_of_row(i);
        return Err(if time_s[i] == time_s[i - 1] {
            ImportError::DuplicateTime {
                file: file.to_owned(),
                line,
                time_s: time_s[i],
            }
        } else {
            ImportError::TimeBackwards {
                file: file.to_owned(),
                line,
                previous_s: time_s[i - 1],
                time_s: time_s[i],
            }
        });
    }

    // Onset and segments.
    let dt = median_interval(&time_s);
    let mut starts: Vec<usize> = Vec::new();
    let onset = match options.onset {
        OnsetChoice::FileClock => Onset {
            index: 0,
            file_time_s: 0.0,
            method: OnsetMethod::Given,
        },
        OnsetChoice::At(t) => {
            let index = time_s.partition_point(|&x| x < t);
            starts.push(index);
            Onset {
                index,
                file_time_s: t,
                method: OnsetMethod::Given,
            }
        }
        OnsetChoice::Detect => {
            let steps = potential_v
                .as_deref()
                .map(onset::potential_steps)
                .unwrap_or_default();
            if let (Some(&first), Some(e)) = (steps.first(), potential_v.as_deref()) {
                starts = steps.clone();
                let next = steps.get(1).copied().unwrap_or(e.len());
                let after = &e[first..next.min(first + 50)];
                Onset {
                    index: first,
                    file_time_s: 0.5 * (time_s[first - 1] + time_s[first]),
                    method: OnsetMethod::PotentialJump {
                        from_v: onset::median_of(&e[first.saturating_sub(50)..first]),
                        to_v: onset::median_of(after),
                    },
                }
            } else if let Some(i) = onset::current_step(&current_a) {
                starts.push(i);
                Onset {
                    index: i,
                    file_time_s: 0.5 * (time_s[i - 1] + time_s[i]),
                    method: OnsetMethod::CurrentJump,
                }
            } else if time_s[0] >= 0.0 && time_s[0] <= 2.0 * dt {
                starts.push(0);
                Onset {
                    index: 0,
                    file_time_s: 0.0,
                    method: OnsetMethod::FileStart,
                }
            } else {
                starts.push(0);
                warnings.push(ImportWarning {
                    kind: WarningKind::OriginAssumed,
                    message: format!(
                        "the file starts after the step and its clock starts at {} s; the step was assumed one sampling interval ({} s) before the first sample; let the fit refine t0",
                        time_s[0], dt
                    ),
                    lines: Vec::new(),
                });
                Onset {
                    index: 0,
                    file_time_s: time_s[0] - dt,
                    method: OnsetMethod::AssumedOneSampleBefore,
                }
            }
        }
    };
    if onset.file_time_s != 0.0 {
        let t0 = onset.file_time_s;
        time_s.iter_mut().for_each(|t| *t -= t0);
        // Subtraction keeps the order but can merge samples whose spacing is below the
        // precision of their magnitude.
        if let Some(i) = first_not_increasing(&time_s) {
            return Err(ImportError::TimeResolution {
                file: file.to_owned(),
                line: parsed.line_of_row(i),
                time_s: time_s[i] + t0,
            });
        }
    }
    let n = time_s.len();
    if starts.is_empty() {
        starts.push(0);
    }
    let baseline = (starts[0] > 0)
        .then(|| Baseline::of(&current_a[..starts[0]]))
        .flatten();
    let reference = baseline.as_ref().map_or(0.0, |b| b.mean_a);
    let mut segments = Vec::new();
    if starts[0] > 0 {
        segments.push(Segment {
            kind: SegmentKind::Baseline,
            start: 0,
            end: starts[0],
            start_time_s: time_s[0],
            potential_v: potential_v
                .as_deref()
                .map(|e| onset::median_of(&e[..starts[0]])),
            polarity: None,
        });
    }
    for (k, &s) in starts.iter().enumerate() {
        let end = starts.get(k + 1).copied().unwrap_or(n);
        let start_time_s = if k == 0 {
            0.0
        } else {
            0.5 * (time_s[s - 1] + time_s[s])
        };
        segments.push(Segment {
            kind: SegmentKind::Step,
            start: s,
            end,
            start_time_s,
            potential_v: potential_v.as_deref().map(|e| onset::median_of(&e[s..end])),
            polarity: onset::polarity(&current_a[s..end], reference),
        });
    }
    let polarity = segments
        .iter()
        .find(|s| s.kind == SegmentKind::Step)
        .and_then(|s| s.polarity);

    Ok(Trace {
        file: file.to_owned(),
        dialect: sniffed.dialect,
        columns,
        metadata: sniffed.metadata,
        time_s,
        current_a,
        potential_v,
        charge_c,
        onset,
        segments,
        baseline,
        polarity,
        warnings,
    })
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn first_not_increasing_is_the_first_failing_index() {
        let reference = |t: &[f64]| (1..t.len()).find(|&i| t[i] <= t[i - 1]);
        let rising: Vec<f64> = (0..20_000).map(|i| i as f64 * 1e-3).collect();
        assert_eq!(first_not_increasing(&rising), None);
        assert_eq!(first_not_increasing(&[]), None);
        assert_eq!(first_not_increasing(&[1.0]), None);
        for at in [1, 2, 4095, 4096, 4097, 8192, 12_000, 19_999] {
            for fault in [0.0, -1.0, f64::NAN] {
                let mut t = rising.clone();
                // An equal time, a step back, or a NaN (which compares false, as in the reference).
                t[at] = if fault.is_nan() {
                    f64::NAN
                } else {
                    t[at - 1] + fault
                };
                assert_eq!(first_not_increasing(&t), reference(&t), "{at} {fault}");
                t[at + 100.min(19_999 - at)] = -5.0;
                assert_eq!(first_not_increasing(&t), reference(&t), "{at} {fault}");
            }
        }
    }
}
