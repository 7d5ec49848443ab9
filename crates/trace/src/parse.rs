//! The bulk parser: reads the data rows in chunks, splits each chunk on line boundaries across
//! threads, and keeps only the columns the trace needs.

use std::io::Read;

use crate::error::ImportError;
use crate::fields::{self, DecimalMark, Delimiter};
use crate::sniff::MAX_LINE;

/// Bytes read per chunk; each chunk is split across the threads.
const CHUNK: usize = 8 << 20;
/// Below this many bytes a chunk is parsed on one thread.
const PARALLEL_MIN: usize = 1 << 20;

/// What the bulk parser needs to know.
#[derive(Debug, Clone)]
pub(crate) struct Spec {
    pub delimiter: Delimiter,
    pub decimal: DecimalMark,
    pub eol: u8,
    /// Fields expected per row.
    pub fields: usize,
    /// Field indices (from 0) to keep, in output order.
    pub wanted: Vec<usize>,
    pub threads: usize,
}

/// Why a row was not used.
#[derive(Debug, Clone, PartialEq)]
pub(crate) enum Problem {
    Ragged { found: usize },
    NotNumber { column: usize, text: String },
    NonFinite { column: usize, text: String },
}

/// A row that was not used.
#[derive(Debug, Clone, PartialEq)]
pub(crate) struct Bad {
    pub line: u64,
    pub problem: Problem,
}

/// The rows of a data region.
#[derive(Debug, Default)]
pub(crate) struct Parsed {
    pub columns: Vec<Vec<f64>>,
    pub bad: Vec<Bad>,
    /// Blank lines inside the data region (harmless, but they shift line numbers).
    pub blank: Vec<u64>,
    pub first_line: u64,
    /// Whether the last line had no line ending (a cut-off export often ends so).
    pub ends_without_eol: bool,
    /// Number of the last line seen.
    pub last_line: u64,
    /// The first line longer than [`MAX_LINE`], if any: the caller turns it into an error.
    pub too_long: Option<u64>,
}

impl Parsed {
    fn new(width: usize, first_line: u64, capacity: usize) -> Parsed {
        Parsed {
            columns: (0..width).map(|_| Vec::with_capacity(capacity)).collect(),
            first_line,
            last_line: first_line.saturating_sub(1),
            ..Parsed::default()
        }
    }

    /// Moves the rows of `other` (parsed with line numbers counted from `other.first_line`)
    /// to the end of `self`, leaving `other` empty with its allocations kept for reuse.
    fn append(&mut self, other: &mut Parsed) {
        for (a, b) in self.columns.iter_mut().zip(&mut other.columns) {
            a.append(b);
        }
        self.bad.append(&mut other.bad);
        self.blank.append(&mut other.blank);
        self.last_line = self.last_line.max(other.last_line);
        self.too_long = self.too_long.or(other.too_long.take());
    }

    /// Renumbers lines parsed as if the part started at line `from` to start at `to`.
    fn shift_lines(&mut self, from: u64, to: u64) {
        let shift = |l: &mut u64| *l = *l - from + to;
        self.bad.iter_mut().for_each(|b| shift(&mut b.line));
        self.blank.iter_mut().for_each(shift);
        shift(&mut self.last_line);
        if let Some(l) = self.too_long.as_mut() {
            shift(l);
        }
        self.first_line = to;
    }

    /// The line a row came from, counting the lines that held no row.
    pub(crate) fn line_of_row(&self, row: usize) -> u64 {
        let mut line = self.first_line + row as u64;
        let (mut i, mut j) = (0, 0);
        loop {
            let next_bad = self.bad.get(i).map(|b| b.line);
            let next_blank = self.blank.get(j).copied();
            let next = match (next_bad, next_blank) {
                (Some(a), Some(b)) => a.min(b),
                (Some(a), None) => a,
                (None, Some(b)) => b,
                (None, None) => break,
            };
            if next > line {
                break;
            }
            line += 1;
            if next_bad == Some(next) {
                i += 1;
            } else {
                j += 1;
            }
        }
        line
    }
}

/// Marks a field that is not kept.
const SKIP: u8 = u8::MAX;

/// The fast path for one row of simple numbers separated by a single byte, starting at `pos`
/// in `bytes`: one pass over the row, no field list, no separate search for the line ending.
/// Returns the start of the next line, or `None` when the row needs the general path (quotes,
/// spaces, unusual numbers, a wrong field count, the last line of the block), which then also
/// produces any message.
#[inline]
fn fast_row(
    bytes: &[u8],
    mut pos: usize,
    format: (u8, u8, u8),
    slots: &[u8],
    values: &mut [f64],
) -> Option<usize> {
    let (delimiter, mark, eol) = format;
    let n = bytes.len();
    let last = slots.len() - 1;
    for (f, &slot) in slots.iter().enumerate() {
        if slot == SKIP {
            while pos < n && bytes[pos] != delimiter && bytes[pos] != eol {
                pos += 1;
            }
        } else {
            let (v, used) = fields::simple_number(&bytes[pos..], mark)?;
            values[slot as usize] = v;
            pos += used;
        }
        if f < last {
            if pos >= n || bytes[pos] != delimiter {
                return None;
            }
            pos += 1;
        }
    }
    if pos < n && bytes[pos] == delimiter {
        pos += 1;
    }
    if pos < n && bytes[pos] == b'\r' && eol == b'\n' {
        pos += 1;
    }
    (pos < n && bytes[pos] == eol).then_some(pos + 1)
}

/// [`fast_row`] for a row of exactly two simple numbers: `a<d>b<eol>` (a trailing delimiter and
/// a CR before the LF allowed). Returns both values and the start of the next line.
#[inline]
fn fast_pair(bytes: &[u8], pos: usize, d: u8, mark: u8, eol: u8) -> Option<(f64, f64, usize)> {
    let (a, used) = fields::simple_number(&bytes[pos..], mark)?;
    let mut p = pos + used;
    if bytes.get(p) != Some(&d) {
        return None;
    }
    p += 1;
    let (b, used) = fields::simple_number(&bytes[p..], mark)?;
    p += used;
    if bytes.get(p) == Some(&d) {
        p += 1;
    }
    if eol == b'\n' && bytes.get(p) == Some(&b'\r') {
        p += 1;
    }
    (bytes.get(p) == Some(&eol)).then_some((a, b, p + 1))
}

/// Parses the lines of `bytes` (which ends on a line boundary or at the end of the file) into
/// `out`, numbering them from `first_line`; returns the number of lines.
fn parse_part(bytes: &[u8], first_line: u64, spec: &Spec, out: &mut Parsed) -> u64 {
    let mut cells: Vec<&[u8]> = Vec::with_capacity(spec.fields + 2);
    let mut values = vec![0.0; spec.wanted.len()];
    let mark = match spec.decimal {
        DecimalMark::Point => b'.',
        DecimalMark::Comma => b',',
    };
    let fast = match spec.delimiter {
        Delimiter::Whitespace => None,
        Delimiter::Comma => Some((b',', mark, spec.eol)),
        Delimiter::Semicolon => Some((b';', mark, spec.eol)),
        Delimiter::Tab => Some((b'\t', mark, spec.eol)),
    };
    let mut slots = vec![SKIP; spec.fields];
    for (k, &f) in spec.wanted.iter().enumerate() {
        if let Some(s) = slots.get_mut(f) {
            *s = k as u8;
        }
    }
    let n = bytes.len();
    let mut pos = 0;
    let mut line_no = first_line;
    // The commonest table of all, two numeric columns both kept, gets its own loop.
    let pair = spec.fields == 2 && spec.wanted.len() == 2 && spec.wanted[0] != spec.wanted[1];
    while pos < n {
        if pair && let Some((d, mark, eol)) = fast {
            let mut run = 0u64;
            while let Some((a, b, next)) = fast_pair(bytes, pos, d, mark, eol) {
                let (x, y) = if spec.wanted[0] == 0 { (a, b) } else { (b, a) };
                out.columns[0].push(x);
                out.columns[1].push(y);
                pos = next;
                run += 1;
            }
            line_no += run;
            if run > 0 {
                continue;
            }
        }
        if let Some(format) = fast
            && let Some(next) = fast_row(bytes, pos, format, &slots, &mut values)
        {
            for (col, v) in out.columns.iter_mut().zip(&values) {
                col.push(*v);
            }
            pos = next;
            line_no += 1;
            continue;
        }
        let end = memchr::memchr(spec.eol, &bytes[pos..]).map_or(n, |p| pos + p);
        if end - pos > MAX_LINE {
            out.too_long = Some(line_no);
            return line_no - first_line + 1;
        }
        let mut line = &bytes[pos..end];
        if spec.eol == b'\n' && line.last() == Some(&b'\r') {
            line = &line[..line.len() - 1];
        }
        pos = end + 1;
        if line.iter().all(u8::is_ascii_whitespace) {
            out.blank.push(line_no);
            line_no += 1;
            continue;
        }
        fields::split(line, spec.delimiter, &mut cells);
        if cells.len() != spec.fields {
            out.bad.push(Bad {
                line: line_no,
                problem: Problem::Ragged { found: cells.len() },
            });
            line_no += 1;
            continue;
        }
        let mut problem = None;
        for (slot, &idx) in values.iter_mut().zip(&spec.wanted) {
            match fields::number(cells[idx], spec.decimal) {
                Some(v) if v.is_finite() => *slot = v,
                Some(_) => {
                    problem = Some(Problem::NonFinite {
                        column: idx + 1,
                        text: shorten(cells[idx]),
                    });
                    break;
                }
                None => {
                    problem = Some(Problem::NotNumber {
                        column: idx + 1,
                        text: shorten(cells[idx]),
                    });
                    break;
                }
            }
        }
        match problem {
            None => {
                for (col, v) in out.columns.iter_mut().zip(&values) {
                    col.push(*v);
                }
            }
            Some(problem) => out.bad.push(Bad {
                line: line_no,
                problem,
            }),
        }
        line_no += 1;
    }
    if line_no > first_line {
        out.last_line = out.last_line.max(line_no - 1);
    }
    line_no - first_line
}

fn shorten(field: &[u8]) -> String {
    let text = String::from_utf8_lossy(field.trim_ascii());
    if text.chars().count() > 24 {
        let cut: String = text.chars().take(24).collect();
        format!("{cut}…")
    } else {
        text.into_owned()
    }
}

/// Splits `block` into up to `parts` pieces that end on line boundaries.
fn split_lines(block: &[u8], parts: usize, eol: u8) -> Vec<&[u8]> {
    let mut out = Vec::with_capacity(parts);
    let mut start = 0;
    for k in 1..parts {
        let target = block.len() * k / parts;
        if target <= start {
            continue;
        }
        match memchr::memchr(eol, &block[target..]) {
            Some(p) => {
                out.push(&block[start..=target + p]);
                start = target + p + 1;
            }
            None => break,
        }
    }
    if start < block.len() {
        out.push(&block[start..]);
    }
    out
}

/// Parses a block into `into`, the first part on this thread straight into it and the other
/// parts on scoped threads into reusable scratch space; returns the number of lines.
fn parse_block(
    block: &[u8],
    first_line: u64,
    spec: &Spec,
    into: &mut Parsed,
    scratch: &mut Vec<Parsed>,
) -> u64 {
    if spec.threads <= 1 || block.len() < PARALLEL_MIN {
        return parse_part(block, first_line, spec, into);
    }
    let parts = split_lines(block, spec.threads, spec.eol);
    while scratch.len() + 1 < parts.len() {
        scratch.push(Parsed::new(spec.wanted.len(), 1, block.len() / 20));
    }
    let (first_lines, other_lines) = std::thread::scope(|scope| {
        let handles: Vec<_> = parts[1..]
            .iter()
            .zip(scratch.iter_mut())
            .map(|(p, s)| {
                scope.spawn(move || {
                    s.first_line = 1;
                    s.last_line = 0;
                    parse_part(p, 1, spec, s)
                })
            })
            .collect();
        let first = parse_part(parts[0], first_line, spec, into);
        let others: Vec<u64> = handles
            .into_iter()
            .map(|h| match h.join() {
                Ok(lines) => lines,
                // A panic in a worker is a bug in this crate; re-raise it where it can be seen.
                Err(panic) => std::panic::resume_unwind(panic),
            })
            .collect();
        (first, others)
    });
    let mut line = first_line + first_lines;
    for (s, lines) in scratch.iter_mut().zip(other_lines) {
        s.shift_lines(1, line);
        into.append(s);
        line += lines;
    }
    line - first_line
}

/// Parses the data region: `head` holds its first bytes, `rest` the remainder of the file.
pub(crate) fn parse_stream(
    head: &[u8],
    rest: &mut dyn Read,
    first_line: u64,
    spec: &Spec,
    capacity: usize,
    file: &str,
) -> Result<Parsed, ImportError> {
    let mut out = Parsed::new(spec.wanted.len(), first_line, capacity);
    let mut scratch = Vec::new();
    let mut buf: Vec<u8> = Vec::with_capacity(CHUNK + MAX_LINE);
    buf.extend_from_slice(head);
    let mut line = first_line;
    let mut at_eof = false;
    let too_long = |line| ImportError::LineTooLong {
        file: file.to_owned(),
        line,
        limit: MAX_LINE,
    };
    loop {
        while !at_eof && buf.len() < CHUNK {
            let want = (CHUNK - buf.len()) as u64;
            match rest.take(want).read_to_end(&mut buf) {
                Ok(0) => at_eof = true,
                Ok(_) => {}
                Err(e) if e.kind() == std::io::ErrorKind::Interrupted => {}
                Err(error) => {
                    return Err(ImportError::Io {
                        file: file.to_owned(),
                        error,
                    });
                }
            }
        }
        if at_eof {
            if !buf.is_empty() {
                out.ends_without_eol = buf.last() != Some(&spec.eol);
                parse_block(&buf, line, spec, &mut out, &mut scratch);
            }
            return match out.too_long {
                Some(l) => Err(too_long(l)),
                None => Ok(out),
            };
        }
        // No line ending in a whole chunk: a line far longer than any table row.
        let Some(last) = memchr::memrchr(spec.eol, &buf) else {
            return Err(too_long(line));
        };
        line += parse_block(&buf[..=last], line, spec, &mut out, &mut scratch);
        if let Some(l) = out.too_long {
            return Err(too_long(l));
        }
        buf.drain(..=last);
    }
}

#[cfg(test)]
mod tests {
    use super::*;

    fn spec(threads: usize) -> Spec {
        Spec {
            delimiter: Delimiter::Comma,
            decimal: DecimalMark::Point,
            eol: b'\n',
            fields: 2,
            wanted: vec![0, 1],
            threads,
        }
    }

    #[test]
    fn threads_agree_with_one() {
        let mut text = String::new();
        for i in 0..200_000 {
            text.push_str(&format!("{},{}\n", i as f64 * 1e-3, (i as f64).sqrt()));
            if i % 50_000 == 7 {
                text.push_str("oops,1\n\n");
            }
        }
        let one =
            parse_stream(text.as_bytes(), &mut std::io::empty(), 5, &spec(1), 0, "x").unwrap();
        let two =
            parse_stream(text.as_bytes(), &mut std::io::empty(), 5, &spec(3), 0, "x").unwrap();
        assert_eq!(one.columns, two.columns);
        assert_eq!(one.bad, two.bad);
        assert_eq!(one.blank, two.blank);
        assert_eq!(one.columns[0].len(), 200_000);
        assert_eq!(one.bad.len(), 4);
        // Row 8 (the ninth row) sits after the first bad line and its blank line.
        assert_eq!(one.line_of_row(8), 5 + 8 + 2);
        assert_eq!(one.line_of_row(7), 5 + 7);
    }

    #[test]
    fn long_line_is_refused() {
        let mut text = b"1,2\n".to_vec();
        text.extend(std::iter::repeat_n(b'7', MAX_LINE + 10));
        let err = parse_stream(&text, &mut std::io::empty(), 1, &spec(1), 0, "x").unwrap_err();
        assert!(
            matches!(err, ImportError::LineTooLong { line: 2, .. }),
            "{err}"
        );
    }
}
