//! Working out how a file was written: encoding, line ending, delimiter, decimal mark, preamble,
//! header and where the numbers start. Only the first part of a file is examined.

use serde::Serialize;

use crate::error::ImportError;
use crate::fields::{self, DecimalMark, Delimiter};
use crate::units::Unit;

/// How many bytes are examined to work out the dialect.
pub(crate) const SNIFF_BYTES: usize = 1 << 20;
/// The longest line accepted anywhere in a file.
pub(crate) const MAX_LINE: usize = 1 << 20;
/// How many lines are examined at most.
const SNIFF_LINES: usize = 4000;

/// The text encoding a file was decoded from.
#[derive(Debug, Clone, Copy, PartialEq, Eq, Serialize)]
#[serde(rename_all = "snake_case")]
pub enum TextEncoding {
    /// UTF-8 (or plain ASCII).
    Utf8,
    /// UTF-8 with a byte-order mark.
    Utf8Bom,
    /// UTF-16, little-endian.
    Utf16Le,
    /// UTF-16, big-endian.
    Utf16Be,
    /// Not valid UTF-8: header text read as Latin-1 (numbers are ASCII either way).
    Latin1,
}

impl TextEncoding {
    /// The usual name of the encoding.
    pub fn name(self) -> &'static str {
        match self {
            TextEncoding::Utf8 => "UTF-8",
            TextEncoding::Utf8Bom => "UTF-8 with BOM",
            TextEncoding::Utf16Le => "UTF-16LE",
            TextEncoding::Utf16Be => "UTF-16BE",
            TextEncoding::Latin1 => "Latin-1",
        }
    }
}

/// Line endings of the file.
#[derive(Debug, Clone, Copy, PartialEq, Eq, Serialize)]
#[serde(rename_all = "snake_case")]
pub enum LineEnding {
    /// `\n`
    Lf,
    /// `\r\n`
    CrLf,
    /// `\r` alone.
    Cr,
}

impl LineEnding {
    /// The usual name of the line ending.
    pub fn name(self) -> &'static str {
        match self {
            LineEnding::Lf => "LF",
            LineEnding::CrLf => "CRLF",
            LineEnding::Cr => "CR",
        }
    }

    pub(crate) fn byte(self) -> u8 {
        match self {
            LineEnding::Lf | LineEnding::CrLf => b'\n',
            LineEnding::Cr => b'\r',
        }
    }
}

/// The dialect of a file as detected.
#[derive(Debug, Clone, PartialEq, Serialize)]
pub struct Dialect {
    /// Text encoding.
    pub encoding: TextEncoding,
    /// Line ending.
    pub line_ending: LineEnding,
    /// Field separator.
    pub delimiter: Delimiter,
    /// Decimal mark of the numbers.
    pub decimal: DecimalMark,
    /// Whether fields were quoted.
    pub quoted: bool,
    /// Line of the column names (from 1), if the file has a header.
    pub header_line: Option<u64>,
    /// Line of a separate units row under the names, if there is one.
    pub units_line: Option<u64>,
    /// First line of numbers (from 1).
    pub first_data_line: u64,
    /// Number of fields per data row.
    pub fields: usize,
}

/// One line of the preamble, kept as metadata.
#[derive(Debug, Clone, PartialEq, Serialize)]
pub struct MetadataLine {
    /// Line number (from 1).
    pub line: u64,
    /// The key of a `key = value`, `key: value` or `key<sep>value` line.
    pub key: Option<String>,
    /// The value, or the whole line for free text.
    pub value: String,
}

/// What the sniffer learned.
#[derive(Debug)]
pub(crate) struct Sniffed {
    pub dialect: Dialect,
    pub header: Option<Vec<String>>,
    pub units: Option<Vec<String>>,
    pub metadata: Vec<MetadataLine>,
    /// Byte offset of the first data line in the examined bytes.
    pub data_offset: usize,
    /// Numeric rows seen while sniffing (NaN where a field was unreadable), for guessing roles
    /// when there is no header.
    pub sample: Vec<Vec<f64>>,
}

/// Looks at the first bytes for a byte-order mark or the zero bytes of UTF-16 text.
pub(crate) fn utf16_order(head: &[u8]) -> Option<TextEncoding> {
    if head.starts_with(&[0xFF, 0xFE]) {
        return Some(TextEncoding::Utf16Le);
    }
    if head.starts_with(&[0xFE, 0xFF]) {
        return Some(TextEncoding::Utf16Be);
    }
    // Without a mark: ASCII text in UTF-16 has a zero in every other byte.
    let probe = &head[..head.len().min(512) & !1];
    if probe.len() < 8 {
        return None;
    }
    let pairs = probe.len() / 2;
    let odd_zero = probe
        .chunks_exact(2)
        .filter(|p| p[1] == 0 && p[0] != 0)
        .count();
    let even_zero = probe
        .chunks_exact(2)
        .filter(|p| p[0] == 0 && p[1] != 0)
        .count();
    if odd_zero * 10 >= pairs * 9 {
        Some(TextEncoding::Utf16Le)
    } else if even_zero * 10 >= pairs * 9 {
        Some(TextEncoding::Utf16Be)
    } else {
        None
    }
}

/// Decodes UTF-16 bytes into UTF-8.
pub(crate) fn decode_utf16(
    bytes: &[u8],
    order: TextEncoding,
    file: &str,
) -> Result<Vec<u8>, ImportError> {
    let body = if bytes.starts_with(&[0xFF, 0xFE]) || bytes.starts_with(&[0xFE, 0xFF]) {
        &bytes[2..]
    } else {
        bytes
    };
    if body.len() % 2 != 0 {
        return Err(ImportError::Encoding {
            file: file.to_owned(),
            detail: "UTF-16 text with an odd number of bytes".to_owned(),
        });
    }
    let units = body.chunks_exact(2).map(|p| match order {
        TextEncoding::Utf16Be => u16::from_be_bytes([p[0], p[1]]),
        _ => u16::from_le_bytes([p[0], p[1]]),
    });
    let mut out = String::with_capacity(body.len() / 2);
    for (i, c) in char::decode_utf16(units).enumerate() {
        match c {
            Ok(c) => out.push(c),
            Err(_) => {
                return Err(ImportError::Encoding {
                    file: file.to_owned(),
                    detail: format!("unpaired UTF-16 surrogate at byte {}", 2 * i + 2),
                });
            }
        }
    }
    Ok(out.into_bytes())
}

/// Checks the head of a (non-UTF-16) file for bytes no text has.
pub(crate) fn check_text(head: &[u8], file: &str) -> Result<(), ImportError> {
    let mut control = 0usize;
    for (i, &b) in head.iter().enumerate() {
        let bad = matches!(b, 0x00..=0x08 | 0x0E..=0x1A | 0x1C..=0x1F | 0x7F);
        if b == 0 {
            return Err(ImportError::Binary {
                file: file.to_owned(),
                offset: i as u64,
                byte: b,
            });
        }
        if bad {
            control += 1;
            if control > 8 && control * 100 > (i + 1) {
                return Err(ImportError::Binary {
                    file: file.to_owned(),
                    offset: i as u64,
                    byte: b,
                });
            }
        }
    }
    Ok(())
}

/// Decodes a header or preamble line: UTF-8 when it is, Latin-1 otherwise.
pub(crate) fn text(line: &[u8], encoding: TextEncoding) -> String {
    match (encoding, std::str::from_utf8(line)) {
        (TextEncoding::Latin1, _) | (_, Err(_)) => line.iter().map(|&b| char::from(b)).collect(),
        (_, Ok(s)) => s.to_owned(),
    }
}

#[derive(Clone, Copy, Debug, PartialEq)]
enum Class {
    Blank,
    /// All fields numbers (or empty), with this many fields.
    Numeric(usize),
    Text,
}

struct Candidate {
    delimiter: Delimiter,
    decimal: DecimalMark,
    /// Index (into the examined lines) of the first data line.
    start: usize,
    fields: usize,
    good: usize,
}

fn classify(line: &[u8], delimiter: Delimiter, decimal: DecimalMark) -> Class {
    if line.iter().all(u8::is_ascii_whitespace) {
        return Class::Blank;
    }
    let mut cells = Vec::new();
    fields::split(line, delimiter, &mut cells);
    let mut numbers = 0;
    for f in &cells {
        if f.trim_ascii().is_empty() {
            continue;
        }
        if fields::number(f, decimal).is_none() {
            return Class::Text;
        }
        numbers += 1;
    }
    if numbers >= 1 {
        Class::Numeric(cells.len())
    } else {
        Class::Text
    }
}

fn evaluate(lines: &[&[u8]], delimiter: Delimiter, decimal: DecimalMark) -> Option<Candidate> {
    let classes: Vec<Class> = lines
        .iter()
        .map(|l| classify(l, delimiter, decimal))
        .collect();
    // The modal field count of the numeric lines.
    let mut counts: Vec<(usize, usize)> = Vec::new();
    for c in &classes {
        if let Class::Numeric(k) = c {
            match counts.iter_mut().find(|(kk, _)| kk == k) {
                Some((_, n)) => *n += 1,
                None => counts.push((*k, 1)),
            }
        }
    }
    let (fields, _) = counts
        .iter()
        .copied()
        .max_by_key(|&(k, n)| (n, std::cmp::Reverse(k)))?;
    let good = |i: usize| classes[i] == Class::Numeric(fields);
    // The data start: the first good line followed by two more good lines (blank lines do not
    // count), or by good lines to the end of what was examined.
    let nonblank: Vec<usize> = (0..classes.len())
        .filter(|&i| classes[i] != Class::Blank)
        .collect();
    let start_pos = (0..nonblank.len()).find(|&p| {
        let run = &nonblank[p..nonblank.len().min(p + 3)];
        run.iter().all(|&i| good(i))
    })?;
    let start = nonblank[start_pos];
    let good_count = nonblank[start_pos..].iter().filter(|&&i| good(i)).count();
    Some(Candidate {
        delimiter,
        decimal,
        start,
        fields,
        good: good_count,
    })
}

/// Examines the head of decoded text. `at_eof` says whether `head` is the whole file.
pub(crate) fn sniff(
    head: &[u8],
    at_eof: bool,
    encoding: TextEncoding,
    file: &str,
) -> Result<Sniffed, ImportError> {
    if head.iter().all(u8::is_ascii_whitespace) {
        return Err(ImportError::Empty {
            file: file.to_owned(),
        });
    }
    let line_ending = if let Some(p) = memchr::memchr(b'\n', head) {
        if p > 0 && head[p - 1] == b'\r' {
            LineEnding::CrLf
        } else {
            LineEnding::Lf
        }
    } else if memchr::memchr(b'\r', head).is_some() {
        LineEnding::Cr
    } else if at_eof {
        LineEnding::Lf
    } else {
        return Err(ImportError::LineTooLong {
            file: file.to_owned(),
            line: 1,
            limit: MAX_LINE,
        });
    };
    let eol = line_ending.byte();
    // Line spans (start, end without the ending).
    let mut spans: Vec<(usize, usize)> = Vec::new();
    let mut pos = 0;
    while pos < head.len() && spans.len() < SNIFF_LINES {
        match memchr::memchr(eol, &head[pos..]) {
            Some(p) => {
                let mut end = pos + p;
                if end > pos && head[end - 1] == b'\r' {
                    end -= 1;
                }
                spans.push((pos, end));
                pos += p + 1;
            }
            None => {
                // The last line counts only when the whole file is here.
                if at_eof {
                    let mut end = head.len();
                    if end > pos && head[end - 1] == b'\r' {
                        end -= 1;
                    }
                    spans.push((pos, end));
                }
                break;
            }
        }
    }
    let lines: Vec<&[u8]> = spans.iter().map(|&(s, e)| &head[s..e]).collect();

    let mut best: Option<Candidate> = None;
    for delimiter in [
        Delimiter::Tab,
        Delimiter::Semicolon,
        Delimiter::Comma,
        Delimiter::Whitespace,
    ] {
        for decimal in [DecimalMark::Point, DecimalMark::Comma] {
            // Comma with comma decimals is only readable with quoted fields; unquoted, it ties
            // with the point reading, which is tried first and wins.
            let Some(c) = evaluate(&lines, delimiter, decimal) else {
                continue;
            };
            if c.fields < 2 {
                continue;
            }
            // More good rows win; ties go to the earlier (more explicit) dialect.
            if best.as_ref().is_none_or(|b| c.good > b.good) {
                best = Some(c);
            }
        }
    }
    let Some(best) = best else {
        // Is there a single numeric column? Then the separator or the export is wrong.
        if let Some(c) = evaluate(&lines, Delimiter::Whitespace, DecimalMark::Point)
            .or_else(|| evaluate(&lines, Delimiter::Whitespace, DecimalMark::Comma))
            && c.fields == 1
        {
            return Err(ImportError::SingleColumn {
                file: file.to_owned(),
                line: c.start as u64 + 1,
            });
        }
        // A row or two of numbers, too few to make a table: say so, rather than call the
        // last line a header.
        if at_eof {
            let rows = [
                Delimiter::Tab,
                Delimiter::Semicolon,
                Delimiter::Comma,
                Delimiter::Whitespace,
            ]
            .into_iter()
            .flat_map(|d| [DecimalMark::Point, DecimalMark::Comma].map(move |m| (d, m)))
            .map(|(d, m)| {
                lines
                    .iter()
                    .filter(|l| matches!(classify(l, d, m), Class::Numeric(k) if k >= 2))
                    .count()
            })
            .max()
            .unwrap_or(0);
            if rows > 0 {
                return Err(ImportError::TooFewRows {
                    file: file.to_owned(),
                    rows,
                    needed: crate::MIN_ROWS,
                });
            }
        }
        // A header with nothing under it?
        let nonblank: Vec<usize> = (0..lines.len())
            .filter(|&i| !lines[i].iter().all(u8::is_ascii_whitespace))
            .collect();
        if let Some(&last) = nonblank.last()
            && nonblank.len() <= 50
            && lines[last].iter().any(|b| matches!(b, b',' | b';' | b'\t'))
        {
            return Err(ImportError::HeaderOnly {
                file: file.to_owned(),
                line: last as u64 + 1,
            });
        }
        return Err(ImportError::NoTable {
            file: file.to_owned(),
            lines: lines.len(),
        });
    };

    // Header: the non-blank line just above the data, if it has about as many cells.
    let mut cells_buf = Vec::new();
    let mut cells_of = |i: usize| -> Vec<String> {
        fields::split(lines[i], best.delimiter, &mut cells_buf);
        cells_buf
            .iter()
            .map(|c| text(c, encoding).trim().replace("\"\"", "\""))
            .collect()
    };
    let above = |i: usize| {
        (0..i)
            .rev()
            .find(|&j| !lines[j].iter().all(u8::is_ascii_whitespace))
    };
    let mut header = None;
    let mut units = None;
    let mut header_line = None;
    let mut units_line = None;
    let mut preamble_end = best.start;
    if let Some(h) = above(best.start) {
        let cells = cells_of(h);
        let is_text = cells
            .iter()
            .any(|c| fields::number(c.as_bytes(), best.decimal).is_none());
        // A `key = value` line is metadata even when it splits into as many cells as a row.
        let key_value = cells.iter().any(|c| c == "=") || lines[h].windows(3).any(|w| w == b" = ");
        if is_text && !key_value && cells.len() >= 2 && cells.len() <= best.fields {
            let all_units = cells
                .iter()
                .all(|c| c.is_empty() || Unit::parse(c).is_some());
            let names_above = above(h).map(|n| (n, cells_of(n)));
            match names_above {
                Some((n, names))
                    if all_units
                        && names.len() == cells.len()
                        && names.iter().any(|c| Unit::parse(c).is_none()) =>
                {
                    header = Some(names);
                    units = Some(cells);
                    header_line = Some(n as u64 + 1);
                    units_line = Some(h as u64 + 1);
                    preamble_end = n;
                }
                _ => {
                    header = Some(cells);
                    header_line = Some(h as u64 + 1);
                    preamble_end = h;
                }
            }
        }
    }
    let quoted = lines[best.start..]
        .iter()
        .take(50)
        .chain(header_line.map(|l| lines[l as usize - 1]).iter())
        .any(|l| l.contains(&b'"'));

    let metadata = lines[..preamble_end]
        .iter()
        .enumerate()
        .filter(|(_, l)| !l.iter().all(u8::is_ascii_whitespace))
        .map(|(i, l)| metadata_line(i as u64 + 1, &text(l, encoding), best.delimiter))
        .collect();

    let mut sample = Vec::new();
    let mut buf = Vec::new();
    for l in lines[best.start..].iter().take(2000) {
        fields::split(l, best.delimiter, &mut buf);
        if buf.len() == best.fields {
            sample.push(
                buf.iter()
                    .map(|f| fields::number(f, best.decimal).unwrap_or(f64::NAN))
                    .collect(),
            );
        }
    }

    Ok(Sniffed {
        dialect: Dialect {
            encoding,
            line_ending,
            delimiter: best.delimiter,
            decimal: best.decimal,
            quoted,
            header_line,
            units_line,
            first_data_line: best.start as u64 + 1,
            fields: best.fields,
        },
        header,
        units,
        metadata,
        data_offset: spans[best.start].0,
        sample,
    })
}

fn metadata_line(line: u64, text: &str, delimiter: Delimiter) -> MetadataLine {
    let t = text.trim().trim_start_matches(['#', '%', ';']).trim();
    let starts_with_letter = t.chars().next().is_some_and(char::is_alphabetic);
    if starts_with_letter {
        let seps: &[char] = match delimiter {
            Delimiter::Comma => &['=', ':', ','],
            Delimiter::Semicolon => &['=', ':', ';'],
            Delimiter::Tab => &['=', ':', '\t'],
            Delimiter::Whitespace => &['=', ':'],
        };
        // The earliest separator wins, so "Date: 12:30" has the key "Date".
        if let Some(pos) = t.find(seps) {
            let key = t[..pos].trim();
            let value = t[pos + 1..].trim().trim_matches('"').trim();
            if !key.is_empty() && key.len() <= 80 {
                return MetadataLine {
                    line,
                    key: Some(key.trim_matches('"').to_owned()),
                    value: value.to_owned(),
                };
            }
        }
    }
    MetadataLine {
        line,
        key: None,
        value: t.to_owned(),
    }
}

#[cfg(test)]
mod tests {
    use super::*;

    fn sniffed(text: &str) -> Sniffed {
        sniff(text.as_bytes(), true, TextEncoding::Utf8, "t.csv").expect("sniff")
    }

    #[test]
    fn finds_each_dialect() {
        let cases = [
            (
                "t,i\n0.1,2\n0.2,3\n0.3,4\n",
                Delimiter::Comma,
                DecimalMark::Point,
            ),
            (
                "t;i\n0,1;2,5\n0,2;3,5\n0,3;4\n",
                Delimiter::Semicolon,
                DecimalMark::Comma,
            ),
            (
                "t\ti\n0,1\t2,5\n0,2\t3\n0,3\t4\n",
                Delimiter::Tab,
                DecimalMark::Comma,
            ),
            (
                "t i\n0.1 2\n0.2 3\n0.3 4\n",
                Delimiter::Whitespace,
                DecimalMark::Point,
            ),
            (
                "t;i\n0.1;2\n0.2;3\n0.3;4\n",
                Delimiter::Semicolon,
                DecimalMark::Point,
            ),
        ];
        for (text, d, m) in cases {
            let s = sniffed(text);
            assert_eq!((s.dialect.delimiter, s.dialect.decimal), (d, m), "{text:?}");
            assert_eq!(s.dialect.first_data_line, 2, "{text:?}");
            assert_eq!(s.header.as_ref().map(Vec::len), Some(2), "{text:?}");
        }
    }

    #[test]
    fn keeps_preamble_as_metadata() {
        let s = sniffed(
            "Synthetic run 4\nscan = step\nSample rate: 1 kHz\n\nTime (s),Current (uA)\n1,2\n2,3\n3,4\n",
        );
        assert_eq!(s.dialect.header_line, Some(5));
        assert_eq!(s.metadata.len(), 3);
        assert_eq!(s.metadata[0].key, None);
        assert_eq!(s.metadata[1].key.as_deref(), Some("scan"));
        assert_eq!(s.metadata[2].value, "1 kHz");
    }

    #[test]
    fn reads_a_separate_units_row() {
        let s = sniffed("Time;Current\ns;mA\n0,1;2\n0,2;3\n0,3;4\n");
        assert_eq!(s.dialect.header_line, Some(1));
        assert_eq!(s.dialect.units_line, Some(2));
        assert_eq!(
            s.units.as_deref(),
            Some(&["s".to_owned(), "mA".to_owned()][..])
        );
    }
}
