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

/// The 16 bytes at `i` as one little-endian word (the first byte lowest), when there are 16.
#[inline(always)]
pub(crate) fn window_at(bytes: &[u8], i: usize) -> Option<u128> {
    let chunk: [u8; 16] = bytes.get(i..i + 16)?.try_into().ok()?;
    Some(u128::from_le_bytes(chunk))
}

/// Every byte of a 16-byte word set to `b`.
const fn splat(b: u8) -> u128 {
    u128::from_le_bytes([b; 16])
}

/// Combines eight digit values (0 to 9, the first, most significant, in the lowest byte) into
/// their value with three multiplications (the SWAR combination of D. Lemire, "Number parsing
/// at a gigabyte per second", Software: Practice and Experience 51, 2021).
#[inline(always)]
fn eight_digits(v: u64) -> u64 {
    let v = v.wrapping_mul(10).wrapping_add(v >> 8);
    ((v & 0x0000_00FF_0000_00FF)
        .wrapping_mul(100 + (1_000_000 << 32))
        .wrapping_add(((v >> 16) & 0x0000_00FF_0000_00FF).wrapping_mul(1 + (10_000 << 32))))
        >> 32
}

/// The layout of an unsigned number in plain or scientific notation (`1.234567e-05`,
/// `0.0125`): which of its bytes are digits, where the mark, the exponent letter and its sign
/// are. Learnt from one value, it reads every following value of the same layout from one
/// 16-byte load with no search for the field's end and no per-byte loop: exported columns
/// keep one layout for thousands of rows (a fixed count of significant digits, an exponent
/// that changes rarely).
#[derive(Debug, Clone, Copy, PartialEq)]
pub(crate) struct Shape {
    /// Bytes of the number.
    pub len: usize,
    /// 0x80 in every byte that must be a digit.
    digit_mask: u128,
    /// 0xFF in every byte that must equal `literal` (mark, exponent letter, exponent sign).
    literal_mask: u128,
    literal: u128,
    /// Keeps the bytes before the mark; the bytes after it move down one to close the gap.
    before_mark: u128,
    /// Mantissa digits, 1 to 15 (so the mantissa is below 2^53).
    digits: u32,
    /// Whether the mantissa (digits and mark) lies in the first eight bytes.
    mantissa_in_low: bool,
    /// Digits after the mark, subtracted from the exponent.
    fraction: i32,
    /// Whether the exponent digits lie in the second eight bytes (else in the first).
    exp_high: bool,
    /// Shift (bits) that brings the first exponent digit to the lowest byte of its word.
    exp_shift: u32,
    /// Keeps the exponent's digit values: 0, 0xFF or 0xFFFF for 0, 1 or 2 digits.
    exp_keep: u64,
    /// Multiplier that puts the exponent's value in the second byte: 0x100 for one digit,
    /// 0x0A01 for two (the first digit times 10 plus the second).
    exp_combine: u64,
    /// +1, or -1 for a negative exponent.
    exp_sign: i32,
}

impl Shape {
    /// Learns the layout of `text`, a whole unsigned number with the decimal mark `mark`, when
    /// it is one that [`Shape::read`] can read exactly: at most 16 bytes, 1 to 15 mantissa
    /// digits, at most two exponent digits (both in the first or both in the second eight
    /// bytes).
    pub(crate) fn learn(text: &[u8], mark: u8) -> Option<Shape> {
        let len = text.len();
        if len == 0 || len > 16 {
            return None;
        }
        let mut shape = Shape {
            len,
            digit_mask: 0,
            literal_mask: 0,
            literal: 0,
            before_mark: u128::MAX,
            digits: 0,
            mantissa_in_low: false,
            fraction: 0,
            exp_high: false,
            exp_shift: 0,
            exp_keep: 0,
            exp_combine: 0,
            exp_sign: 1,
        };
        let literal = |shape: &mut Shape, i: usize| {
            shape.literal_mask |= 0xFF << (8 * i);
            shape.literal |= u128::from(text[i]) << (8 * i);
        };
        let digit = |i: usize| text.get(i).is_some_and(u8::is_ascii_digit);
        let mut i = 0;
        while digit(i) {
            shape.digit_mask |= 0x80 << (8 * i);
            i += 1;
        }
        shape.digits = i as u32;
        if text.get(i) == Some(&mark) {
            literal(&mut shape, i);
            shape.before_mark = (1u128 << (8 * i)) - 1;
            i += 1;
            while digit(i) {
                shape.digit_mask |= 0x80 << (8 * i);
                shape.fraction += 1;
                i += 1;
            }
            shape.digits += shape.fraction as u32;
        }
        if !(1..=15).contains(&shape.digits) {
            return None;
        }
        shape.mantissa_in_low = i <= 8;
        if matches!(text.get(i), Some(b'e' | b'E')) {
            literal(&mut shape, i);
            i += 1;
            if matches!(text.get(i), Some(b'-' | b'+')) {
                if text[i] == b'-' {
                    shape.exp_sign = -1;
                }
                literal(&mut shape, i);
                i += 1;
            }
            let at = i;
            while digit(i) {
                shape.digit_mask |= 0x80 << (8 * i);
                i += 1;
            }
            let (keep, combine) = match i - at {
                1 => (0xFF, 0x100),
                2 => (0xFFFF, 0x0A01),
                _ => return None,
            };
            // Both exponent digits in one of the two words (a number that puts them astride
            // is left to the bytewise reader).
            if at < 8 && i > 8 {
                return None;
            }
            shape.exp_high = at >= 8;
            shape.exp_shift = 8 * (at % 8) as u32;
            shape.exp_keep = keep;
            shape.exp_combine = combine;
        }
        (i == len).then_some(shape)
    }

    /// Reads the unsigned number of exactly this layout at the start of the 16 bytes `window`
    /// (first byte lowest; the bytes after the number are not looked at), or `None` when the
    /// bytes do not have the layout or the value needs more than one exact operation. The
    /// result is correctly rounded, as [`simple_number`]'s is (Clinger's fast path).
    #[inline(always)]
    pub(crate) fn read(&self, window: u128) -> Option<f64> {
        // Digits become 0..=9 and every other byte 10 or more. For ASCII bytes the addition
        // carries out of no byte; a byte of 0x80 or above can only set more flags, never
        // clear one, so it can only send the number to the careful path.
        let x = window ^ splat(b'0');
        let not_digit = (x.wrapping_add(splat(0x76)) | x) & splat(0x80);
        if (not_digit & self.digit_mask) | ((window & self.literal_mask) ^ self.literal) != 0 {
            return None;
        }
        let mantissa = if self.mantissa_in_low {
            // The common case (`1.234567e-05`, `0.0125`): one 64-bit word holds the mantissa.
            let (x, keep) = (x as u64, self.before_mark as u64);
            let joined = (x & keep) | ((x >> 8) & !keep);
            eight_digits(joined << (8 * (8 - self.digits)))
        } else {
            let d = (x & self.before_mark) | ((x >> 8) & !self.before_mark);
            if self.digits <= 8 {
                eight_digits((d as u64) << (8 * (8 - self.digits)))
            } else {
                let high = self.digits - 8;
                eight_digits((d as u64) << (8 * (8 - high))) * 100_000_000
                    + eight_digits((d >> (8 * high)) as u64)
            }
        };
        let word = if self.exp_high {
            (x >> 64) as u64
        } else {
            x as u64
        };
        let exp = ((((word >> self.exp_shift) & self.exp_keep) * self.exp_combine) >> 8) & 0xFF;
        let scale = exp as i32 * self.exp_sign - self.fraction;
        let m = mantissa as f64;
        if (0..=22).contains(&scale) {
            Some(m * EXACT_POW10[scale as usize])
        } else if (-22..0).contains(&scale) {
            Some(m / EXACT_POW10[(-scale) as usize])
        } else {
            None
        }
    }
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

    /// A small deterministic generator (xorshift64*, S. Vigna, "An experimental exploration of
    /// Marsaglia's xorshift generators, scrambled", ACM TOMS 42, 2016), so failures repeat.
    struct Rng(u64);

    impl Rng {
        fn next(&mut self) -> u64 {
            self.0 ^= self.0 >> 12;
            self.0 ^= self.0 << 25;
            self.0 ^= self.0 >> 27;
            self.0.wrapping_mul(0x2545_F491_4F6C_DD1D)
        }

        fn below(&mut self, n: u64) -> u64 {
            self.next() % n
        }
    }

    /// Unsigned number-like text of the shapes exports use and some they do not: fixed
    /// scientific notation with 0 to 16 decimals, shortest round-trip output, plain decimals,
    /// random digit strings with leading zeros, exponents past the exact-power limit, and
    /// malformed pieces.
    fn number_text(rng: &mut Rng) -> String {
        let digits = |rng: &mut Rng, n: u64| -> String {
            (0..n)
                .map(|_| char::from(b'0' + rng.below(10) as u8))
                .collect()
        };
        match rng.below(5) {
            0 => {
                let v = (rng.next() >> 11) as f64 / (1u64 << 53) as f64
                    * 10f64.powi(rng.below(60) as i32 - 30);
                let p = rng.below(17) as usize;
                match rng.below(3) {
                    0 => format!("{v:.p$e}"),
                    1 => format!("{v:.p$E}"),
                    _ => format!("{v:.p$}"),
                }
            }
            1 => format!("{}", f64::from_bits(rng.next() >> 2).abs()),
            2 => {
                let (ni, nf) = (rng.below(9), rng.below(12));
                let int = digits(rng, ni);
                let frac = digits(rng, nf);
                let mark = if rng.below(5) == 0 { "" } else { "." };
                let exp = match rng.below(4) {
                    0 => String::new(),
                    1 => format!("e{}", rng.below(60) as i64 - 30),
                    2 => format!(
                        "E{}{}",
                        ["+", "-", ""][rng.below(3) as usize],
                        rng.below(40)
                    ),
                    _ => format!("e-{:02}", rng.below(30)),
                };
                format!("{int}{mark}{frac}{exp}")
            }
            3 => {
                let pieces = [
                    "1", "0", "9", ".", "e", "E", "-", "+", "5", "x", " ", ":", "/",
                ];
                (0..1 + rng.below(12))
                    .map(|_| pieces[rng.below(pieces.len() as u64) as usize])
                    .collect()
            }
            _ => {
                let edges = [
                    "9007199254740992",
                    "999999999999999",
                    "9999999.99999999",
                    "1e22",
                    "1e23",
                    "1e-22",
                    "1.5e-22",
                    "9.99999999999999e-9",
                    "0.0000000e0",
                    "0",
                    "5.",
                    ".5",
                    "7.e3",
                    "1234567.1234567",
                    "0.30000000000000004",
                ];
                edges[rng.below(edges.len() as u64) as usize].to_owned()
            }
        }
    }

    /// The 16-byte window of `text` followed by what follows numbers in a row.
    fn window_of(text: &str, mark: u8) -> Option<(u128, Vec<u8>)> {
        let mut bytes = text.as_bytes().to_vec();
        if mark == b',' {
            bytes
                .iter_mut()
                .filter(|b| **b == b'.')
                .for_each(|b| *b = b',');
        }
        let row = [bytes.clone(), b";2.5e-3\r\n1;1;1;1;1;1".to_vec()].concat();
        Some((window_at(&row, 0)?, bytes))
    }

    #[test]
    fn shapes_read_exactly_what_the_standard_library_reads() {
        // A shape learnt from one number reads that number and any other of its layout to the
        // correctly rounded value (checked against `str::parse::<f64>`, which the standard
        // library documents as correctly rounded), agrees with `simple_number` on it, and
        // refuses every number of another layout.
        let mut rng = Rng(0x9E37_79B9_7F4A_7C15);
        let (mut learnt, mut read_other) = (0, 0);
        for k in 0..200_000 {
            let mark = if k % 5 == 0 { b',' } else { b'.' };
            let first = number_text(&mut rng);
            let Some((w1, t1)) = window_of(&first, mark) else {
                continue;
            };
            let Some(shape) = Shape::learn(&t1, mark) else {
                continue;
            };
            learnt += 1;
            assert_eq!(shape.len, t1.len());
            let parse = |t: &[u8]| {
                std::str::from_utf8(t)
                    .unwrap()
                    .replace(',', ".")
                    .parse::<f64>()
                    .unwrap()
            };
            if let Some(v) = shape.read(w1) {
                assert_eq!(v.to_bits(), parse(&t1).to_bits(), "{first}");
                let simple = simple_number(&t1, mark).map(|(v, used)| (v.to_bits(), used));
                assert_eq!(simple, Some((v.to_bits(), t1.len())), "{first}");
            } else {
                // Refused only when the value needs more than one exact operation.
                assert!(simple_number(&t1, mark).is_none(), "{first}");
            }
            let other = number_text(&mut rng);
            let Some((w2, t2)) = window_of(&other, mark) else {
                continue;
            };
            if let Some(v) = shape.read(w2) {
                // Only the first `len` bytes are read; the caller checks what follows them.
                read_other += 1;
                let head = &t2[..shape.len];
                assert_eq!(
                    Shape::learn(head, mark),
                    Some(shape),
                    "{first} then {other}"
                );
                assert_eq!(v.to_bits(), parse(head).to_bits(), "{first} then {other}");
            }
        }
        // The generator must exercise both sides, not only the refusals.
        assert!(
            learnt > 80_000 && read_other > 5_000,
            "{learnt} {read_other}"
        );
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
