//! Splitting a line into fields and reading numbers, shared by the sniffer and the bulk parser.

use serde::Serialize;

/// What separates the fields of a row.
#[derive(Debug, Clone, Copy, PartialEq, Eq, Serialize)]
#[serde(rename_all = "snake_case")]
pub enum Delimiter {
    /// `,`
    Comma,
    /// `;`
    Semicolon,
    /// A tab character.
    Tab,
    /// One or more spaces or tabs.
    Whitespace,
}

impl Delimiter {
    /// A readable name for messages.
    pub fn name(self) -> &'static str {
        match self {
            Delimiter::Comma => "comma",
            Delimiter::Semicolon => "semicolon",
            Delimiter::Tab => "tab",
            Delimiter::Whitespace => "whitespace",
        }
    }

    fn byte(self) -> Option<u8> {
        match self {
            Delimiter::Comma => Some(b','),
            Delimiter::Semicolon => Some(b';'),
            Delimiter::Tab => Some(b'\t'),
            Delimiter::Whitespace => None,
        }
    }
}

/// The decimal mark of the numbers.
#[derive(Debug, Clone, Copy, PartialEq, Eq, Serialize)]
#[serde(rename_all = "snake_case")]
pub enum DecimalMark {
    /// `1.5`
    Point,
    /// `1,5`
    Comma,
}

/// Splits `line` (without its line ending) into fields. Double-quoted fields may contain the
/// delimiter; the quotes are removed (a doubled quote inside stays doubled, which no number has).
/// A trailing empty field after a final delimiter is dropped.
pub(crate) fn split<'a>(line: &'a [u8], delimiter: Delimiter, out: &mut Vec<&'a [u8]>) {
    out.clear();
    let n = line.len();
    let mut i = 0;
    match delimiter.byte() {
        None => {
            while i < n {
                while i < n && (line[i] == b' ' || line[i] == b'\t') {
                    i += 1;
                }
                if i >= n {
                    break;
                }
                if line[i] == b'"' {
                    let (field, next) = quoted(line, i);
                    out.push(field);
                    i = next;
                    while i < n && line[i] != b' ' && line[i] != b'\t' {
                        i += 1;
                    }
                } else {
                    let start = i;
                    while i < n && line[i] != b' ' && line[i] != b'\t' {
                        i += 1;
                    }
                    out.push(&line[start..i]);
                }
            }
        }
        Some(d) => {
            loop {
                // Skip spaces before a field so that a quote after ", " is still seen.
                let mut j = i;
                while j < n && line[j] == b' ' {
                    j += 1;
                }
                if j < n && line[j] == b'"' {
                    let (field, next) = quoted(line, j);
                    out.push(field);
                    i = next;
                    match memchr::memchr(d, &line[i.min(n)..]) {
                        Some(p) => i += p + 1,
                        None => break,
                    }
                } else {
                    match memchr::memchr(d, &line[i..]) {
                        Some(p) => {
                            out.push(&line[i..i + p]);
                            i += p + 1;
                        }
                        None => {
                            out.push(&line[i..]);
                            break;
                        }
                    }
                }
                if i >= n {
                    // A delimiter ended the line: the empty last field is dropped.
                    break;
                }
            }
            if let Some(last) = out.last()
                && last.iter().all(|b| *b == b' ')
                && out.len() > 1
            {
                out.pop();
            }
        }
    }
}

/// Reads a quoted field starting at the quote at `start`; returns its inside and the index after
/// the closing quote (or the end of the line when it is missing).
fn quoted(line: &[u8], start: usize) -> (&[u8], usize) {
    let n = line.len();
    let mut i = start + 1;
    while i < n {
        if line[i] == b'"' {
            if i + 1 < n && line[i + 1] == b'"' {
                i += 2;
                continue;
            }
            return (&line[start + 1..i], i + 1);
        }
        i += 1;
    }
    (&line[start + 1..], n)
}

/// Powers of ten that are exact in a double.
const EXACT_POW10: [f64; 23] = [
    1e0, 1e1, 1e2, 1e3, 1e4, 1e5, 1e6, 1e7, 1e8, 1e9, 1e10, 1e11, 1e12, 1e13, 1e14, 1e15, 1e16,
    1e17, 1e18, 1e19, 1e20, 1e21, 1e22,
];

/// Reads the number at the start of `bytes` when it has the simple shape of nearly every
/// exported value (`-1.234567e-05`, `0.0125`, `42`): optional sign, at most 19 digits, the
/// decimal mark, an exponent. Returns the value and the bytes used, or `None` for anything else
/// (the caller then takes the general path). The result is correctly rounded: a mantissa below
/// 2^53 times or divided by an exact power of ten up to 10^22 is one correctly rounded
/// operation (W. D. Clinger, "How to read floating point numbers accurately", PLDI 1990).
#[inline]
pub(crate) fn simple_number(bytes: &[u8], mark: u8) -> Option<(f64, usize)> {
    let n = bytes.len();
    let mut i = 0;
    let negative = match bytes.first() {
        Some(b'-') => {
            i = 1;
            true
        }
        Some(b'+') => {
            i = 1;
            false
        }
        _ => false,
    };
    let mut mantissa: u64 = 0;
    let mut digits = 0u32;
    let mut scale: i32 = 0;
    while i < n && bytes[i].is_ascii_digit() {
        mantissa = mantissa
            .wrapping_mul(10)
            .wrapping_add(u64::from(bytes[i] - b'0'));
        digits += 1;
        i += 1;
    }
    if i < n && bytes[i] == mark {
        i += 1;
        while i < n && bytes[i].is_ascii_digit() {
            mantissa = mantissa
                .wrapping_mul(10)
                .wrapping_add(u64::from(bytes[i] - b'0'));
            digits += 1;
            scale -= 1;
            i += 1;
        }
    }
    if digits == 0 || digits > 19 {
        return None;
    }
    if i < n && (bytes[i] == b'e' || bytes[i] == b'E') {
        i += 1;
        let mut exp_negative = false;
        if i < n && (bytes[i] == b'-' || bytes[i] == b'+') {
            exp_negative = bytes[i] == b'-';
            i += 1;
        }
        let start = i;
        let mut exp: i32 = 0;
        while i < n && bytes[i].is_ascii_digit() && i - start < 4 {
            exp = exp * 10 + i32::from(bytes[i] - b'0');
            i += 1;
        }
        if i == start || (i < n && bytes[i].is_ascii_digit()) {
            return None;
        }
        scale += if exp_negative { -exp } else { exp };
    }
    if mantissa > (1u64 << 53) {
        return None;
    }
    let m = mantissa as f64;
    let value = if scale == 0 {
        m
    } else if (1..=22).contains(&scale) {
        m * EXACT_POW10[scale as usize]
    } else if (-22..=-1).contains(&scale) {
        m / EXACT_POW10[(-scale) as usize]
    } else {
        return None;
    };
    Some((if negative { -value } else { value }, i))
}

/// Reads a number in plain or scientific notation with the given decimal mark. Surrounding spaces
/// are ignored. `NaN` and `inf` are read (as non-finite values) so the caller can name them.
pub(crate) fn number(field: &[u8], mark: DecimalMark) -> Option<f64> {
    let field = field.trim_ascii();
    if field.is_empty() || field.len() > 64 {
        return None;
    }
    match mark {
        DecimalMark::Point => fast_float2::parse(field).ok(),
        DecimalMark::Comma => {
            let mut buf = [0u8; 64];
            for (slot, &b) in buf.iter_mut().zip(field) {
                *slot = match b {
                    b',' => b'.',
                    // A point in a decimal-comma file is a thousands separator or a mistake;
                    // either way it is not the number we would read.
                    b'.' => return None,
                    _ => b,
                };
            }
            fast_float2::parse(&buf[..field.len()]).ok()
        }
    }
}

#[cfg(test)]
mod tests {
    use super::*;

    fn fields(line: &str, d: Delimiter) -> Vec<String> {
        let mut out = Vec::new();
        split(line.as_bytes(), d, &mut out);
        out.iter()
            .map(|f| String::from_utf8_lossy(f).into_owned())
            .collect()
    }

    #[test]
    fn splits_each_delimiter() {
        assert_eq!(fields("1,2,3", Delimiter::Comma), ["1", "2", "3"]);
        assert_eq!(fields("1,2,", Delimiter::Comma), ["1", "2"]);
        assert_eq!(fields("1;2", Delimiter::Semicolon), ["1", "2"]);
        assert_eq!(fields("1\t2", Delimiter::Tab), ["1", "2"]);
        assert_eq!(
            fields("  1   2\t 3 ", Delimiter::Whitespace),
            ["1", "2", "3"]
        );
        assert_eq!(fields("\"1,5\",\"2,5\"", Delimiter::Comma), ["1,5", "2,5"]);
        assert_eq!(fields("\"a\", \"b\"", Delimiter::Comma), ["a", "b"]);
        assert_eq!(
            fields("\"t (s)\" \"I (A)\"", Delimiter::Whitespace),
            ["t (s)", "I (A)"]
        );
        assert_eq!(fields(",", Delimiter::Comma), [""]);
    }

    #[test]
    fn simple_numbers_match_the_general_reader() {
        let cases = [
            "1.234567e-01",
            "-2.5e-6",
            "0.0125",
            "42",
            "+7.",
            ".5",
            "1E+3",
            "9007199254740992",
            "3.14159265358979",
            "1e22",
            "1e-22",
            "-0",
            "0.1",
        ];
        for text in cases {
            let (v, used) = simple_number(text.as_bytes(), b'.').expect(text);
            assert_eq!(used, text.len(), "{text}");
            assert_eq!(
                v.to_bits(),
                text.parse::<f64>().unwrap().to_bits(),
                "{text}"
            );
        }
        for text in [
            "abc",
            "-",
            "1e",
            "1e400",
            "123456789012345678",
            "12345678901234567890",
            "1e-30",
            ".",
        ] {
            let r = simple_number(text.as_bytes(), b'.');
            assert!(r.is_none_or(|(_, used)| used < text.len()), "{text}");
        }
        assert_eq!(simple_number(b"1,5;2", b','), Some((1.5, 3)));
    }

    #[test]
    fn reads_numbers() {
        assert_eq!(number(b" 1.5 ", DecimalMark::Point), Some(1.5));
        assert_eq!(number(b"-2.5e-6", DecimalMark::Point), Some(-2.5e-6));
        assert_eq!(number(b"1,5E-3", DecimalMark::Comma), Some(1.5e-3));
        assert_eq!(number(b"+.5", DecimalMark::Point), Some(0.5));
        assert_eq!(number(b"1.5", DecimalMark::Comma), None);
        assert_eq!(number(b"1.2.3", DecimalMark::Point), None);
        assert_eq!(number(b"abc", DecimalMark::Point), None);
        assert_eq!(number(b"", DecimalMark::Point), None);
        assert!(number(b"NaN", DecimalMark::Point).is_some_and(f64::is_nan));
        assert!(number(b"inf", DecimalMark::Point).is_some_and(f64::is_infinite));
    }
}
