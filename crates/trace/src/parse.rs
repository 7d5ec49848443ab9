//! The bulk parser: reads the data rows in chunks, splits each chunk on line boundaries across
//! threads, and keeps only the columns the trace needs.

use std::io::Read;
use std::sync::{Condvar, Mutex, PoisonError};

use crate::error::ImportError;
use crate::fields::{self, DecimalMark, Delimiter};
use crate::sniff::MAX_LINE;

/// Bytes a worker reads and parses at a time: small enough that a block and its columns stay
/// in the core's cache between the read and the join.
pub(crate) const BLOCK: usize = 1 << 20;
/// Below this many bytes the data are parsed on the calling thread alone.
pub(crate) const PARALLEL_MIN: u64 = 1 << 20;

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
    /// Workers, the calling thread among them.
    pub threads: usize,
    /// Bytes read per block ([`BLOCK`] but in tests).
    pub block: usize,
    /// Counts the bytes of each block taken, and says when to stop.
    pub progress: Option<std::sync::Arc<crate::Progress>>,
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

    /// Moves the line records of `other` (all but its columns, which the caller copies) to
    /// the end of `self`.
    fn append_lines(&mut self, other: &mut Parsed) {
        self.bad.append(&mut other.bad);
        self.blank.append(&mut other.blank);
        self.last_line = self.last_line.max(other.last_line);
        self.too_long = self.too_long.or(other.too_long.take());
        self.ends_without_eol |= other.ends_without_eol;
    }

    /// Renumbers lines parsed as if the part started at line `from` to start at `to`.
    fn shift_lines(&mut self, from: u64, to: u64) {
        let shift = |l: &mut u64| *l = *l + to - from;
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
/// a CR before the LF allowed). Returns both values, the start of the next line and the
/// lengths of the two numbers.
#[inline]
fn fast_pair(
    bytes: &[u8],
    pos: usize,
    d: u8,
    mark: u8,
    eol: u8,
) -> Option<(f64, f64, usize, usize, usize)> {
    let (a, used_a) = fields::simple_number(&bytes[pos..], mark)?;
    let mut p = pos + used_a;
    if bytes.get(p) != Some(&d) {
        return None;
    }
    p += 1;
    let (b, used_b) = fields::simple_number(&bytes[p..], mark)?;
    p += used_b;
    if bytes.get(p) == Some(&d) {
        p += 1;
    }
    if eol == b'\n' && bytes.get(p) == Some(&b'\r') {
        p += 1;
    }
    (bytes.get(p) == Some(&eol)).then_some((a, b, p + 1, used_a, used_b))
}

/// The layout of a row of two numbers that [`fast_pair`] read: the shape of each number
/// (without a minus sign, which may come and go) and what follows the second before the line
/// ending (nothing, the delimiter, a CR or both).
#[derive(Debug, Clone, Copy)]
struct PairLayout {
    a: fields::Shape,
    b: fields::Shape,
    tail: [u8; 2],
    tail_len: usize,
}

impl PairLayout {
    /// The layout of the row at `pos` that [`fast_pair`] read with the lengths `used_a`,
    /// `used_b` and found to end before `next`.
    fn learn(
        bytes: &[u8],
        pos: usize,
        used: (usize, usize),
        next: usize,
        mark: u8,
    ) -> Option<Self> {
        let unsigned = |text: &[u8]| {
            let text = text.strip_prefix(b"-").unwrap_or(text);
            fields::Shape::learn(text, mark)
        };
        let a = unsigned(&bytes[pos..pos + used.0])?;
        let b_start = pos + used.0 + 1;
        let b = unsigned(&bytes[b_start..b_start + used.1])?;
        let tail = &bytes[b_start + used.1..next - 1];
        let mut layout = PairLayout {
            a,
            b,
            tail: [0; 2],
            tail_len: tail.len(),
        };
        layout.tail.get_mut(..tail.len())?.copy_from_slice(tail);
        Some(layout)
    }

    /// Reads the row at `pos` when it has this layout, as [`fast_pair`] would, without looking
    /// for the ends of its fields: both numbers come from one 16-byte load each.
    #[inline(always)]
    fn read(&self, bytes: &[u8], pos: usize, d: u8, eol: u8) -> Option<(f64, f64, usize)> {
        let negative_a = bytes.get(pos) == Some(&b'-');
        let pa = pos + usize::from(negative_a);
        let a = self.a.read(fields::window_at(bytes, pa)?)?;
        let da = pa + self.a.len;
        if bytes.get(da) != Some(&d) {
            return None;
        }
        let negative_b = bytes.get(da + 1) == Some(&b'-');
        let pb = da + 1 + usize::from(negative_b);
        let b = self.b.read(fields::window_at(bytes, pb)?)?;
        let end = pb + self.b.len;
        let tail_ok = match self.tail_len {
            0 => true,
            1 => bytes.get(end) == Some(&self.tail[0]),
            _ => bytes.get(end) == Some(&self.tail[0]) && bytes.get(end + 1) == Some(&self.tail[1]),
        };
        if !tail_ok || bytes.get(end + self.tail_len) != Some(&eol) {
            return None;
        }
        Some((
            if negative_a { -a } else { a },
            if negative_b { -b } else { b },
            end + self.tail_len + 1,
        ))
    }
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
            let swap = spec.wanted[0] != 0;
            let mut run = 0u64;
            // Rows of the last row's layout are read without a search; any other row goes to
            // `fast_pair`, and its layout is learnt (ever more rarely while no layout holds,
            // so that a file of ever-changing layouts loses little to the learning).
            let mut layout: Option<PairLayout> = None;
            let mut misses = 0u32;
            // The columns as locals while the loop runs, so their lengths can stay in registers.
            let mut first = std::mem::take(&mut out.columns[0]);
            let mut second = std::mem::take(&mut out.columns[1]);
            loop {
                if let Some(l) = &layout {
                    let start = run;
                    while let Some((a, b, next)) = l.read(bytes, pos, d, eol) {
                        let (x, y) = if swap { (b, a) } else { (a, b) };
                        first.push(x);
                        second.push(y);
                        pos = next;
                        run += 1;
                    }
                    if run > start {
                        misses = 0;
                    }
                }
                let Some((a, b, next, used_a, used_b)) = fast_pair(bytes, pos, d, mark, eol) else {
                    break;
                };
                misses = misses.saturating_add(1);
                if misses.is_power_of_two() {
                    layout = PairLayout::learn(bytes, pos, (used_a, used_b), next, mark);
                }
                let (x, y) = if swap { (b, a) } else { (a, b) };
                first.push(x);
                second.push(y);
                pos = next;
                run += 1;
            }
            out.columns[0] = first;
            out.columns[1] = second;
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

/// Where the workers take their blocks from: the source, read in turn under a lock.
struct Feed<'a> {
    rest: &'a mut (dyn Read + Send),
    /// The start of a line cut off at the end of the previous block (or the sniffed head).
    carry: Vec<u8>,
    /// Sequence number of the next block.
    next: u64,
    /// Nothing more to read: the end of the source, an error, or a line too long.
    done: bool,
    error: Option<std::io::Error>,
}

/// A parsed block, its lines numbered from 1 until it is joined to the output in order.
struct Block {
    parsed: Parsed,
    lines: u64,
}

/// Where the workers put their blocks: the output's line records, joined in file order.
struct Sink {
    /// Everything but the columns, which go to [`Output`].
    out: Parsed,
    /// Sequence number of the next block to join.
    next: u64,
    /// Number of the first line of that block.
    line: u64,
    /// Number of the first row of that block.
    rows: usize,
    /// Blocks parsed ahead of their turn.
    pending: std::collections::BTreeMap<u64, Block>,
    /// Emptied blocks, kept for their allocations.
    free: Vec<Parsed>,
    /// A worker panicked: the others stop instead of waiting for its block.
    failed: bool,
}

/// Blocks a worker may parse ahead of the join before it waits; bounds the memory held.
const AHEAD: usize = 8;

/// Takes the next block from the feed into `buf`: a whole number of lines (all the rest at
/// the end of the source). Returns its sequence number and whether it is the last, or `None`
/// when there is nothing more to read.
fn take_block(
    feed: &mut Feed<'_>,
    buf: &mut Vec<u8>,
    eol: u8,
    block: usize,
) -> Option<(u64, BlockEnd)> {
    if feed.done {
        return None;
    }
    buf.clear();
    buf.append(&mut feed.carry);
    let mut target = block;
    let end = loop {
        if buf.len() < target {
            let want = (target - buf.len()) as u64;
            if let Err(e) = feed.rest.take(want).read_to_end(buf) {
                feed.error = Some(e);
                feed.done = true;
                return None;
            }
        }
        if buf.len() < target {
            break BlockEnd::Last;
        }
        if let Some(last) = memchr::memrchr(eol, buf) {
            feed.carry.extend_from_slice(&buf[last + 1..]);
            buf.truncate(last + 1);
            break BlockEnd::Lines;
        }
        if buf.len() > MAX_LINE {
            break BlockEnd::NoLineEnd;
        }
        target += block;
    };
    if end != BlockEnd::Lines {
        feed.done = true;
    }
    let seq = feed.next;
    feed.next += 1;
    Some((seq, end))
}

#[derive(Debug, Clone, Copy, PartialEq)]
enum BlockEnd {
    /// The block ends with a line ending and more follows.
    Lines,
    /// The end of the source.
    Last,
    /// More than [`MAX_LINE`] bytes without a line ending.
    NoLineEnd,
}

/// Joins `block` (number `seq`) to the output, with every block after it that is waiting:
/// their line records go into the sink, and their columns, each with the row it starts at,
/// into `ready` for the caller to copy to the [`Output`] outside the lock.
fn join(sink: &mut Sink, seq: u64, block: Block, ready: &mut Vec<(usize, Parsed)>) {
    sink.pending.insert(seq, block);
    while let Some(mut b) = sink.pending.remove(&sink.next) {
        sink.next += 1;
        // Nothing after a line that is too long counts: it ends the import.
        if sink.out.too_long.is_some() {
            b.parsed.columns.iter_mut().for_each(Vec::clear);
            sink.free.push(b.parsed);
            continue;
        }
        b.parsed.shift_lines(1, sink.line);
        sink.out.append_lines(&mut b.parsed);
        sink.line += b.lines;
        let rows = b.parsed.columns.first().map_or(0, Vec::len);
        ready.push((sink.rows, b.parsed));
        sink.rows += rows;
    }
}

/// Rows per lock of the output: blocks next to each other in the file meet in one slab at
/// most, and each copies the rest of its rows without waiting.
const SLAB: usize = 1 << 14;

/// The output columns, allocated for the estimated rows and cut into slabs that the workers
/// fill in parallel (so the page faults of fresh memory are taken on every thread); rows
/// beyond the estimate are kept aside and appended in order at the end.
struct Output<'a> {
    slabs: Vec<Vec<Mutex<&'a mut [f64]>>>,
    capacity: usize,
    overflow: Mutex<Vec<(usize, Vec<Vec<f64>>)>>,
}

impl<'a> Output<'a> {
    fn new(columns: &'a mut [Vec<f64>]) -> Output<'a> {
        let capacity = columns.first().map_or(0, Vec::len);
        Output {
            slabs: columns
                .iter_mut()
                .map(|c| c.chunks_mut(SLAB).map(Mutex::new).collect())
                .collect(),
            capacity,
            overflow: Mutex::new(Vec::new()),
        }
    }

    /// Copies `columns` (rows `first..` of the output) into place.
    fn put(&self, first: usize, columns: &[Vec<f64>]) {
        let end = first + columns.first().map_or(0, Vec::len);
        let fit = end.min(self.capacity);
        for (slabs, column) in self.slabs.iter().zip(columns) {
            let mut row = first;
            while row < fit {
                let (slab, offset) = (row / SLAB, row % SLAB);
                let n = (SLAB - offset).min(fit - row);
                let mut dest = slabs[slab].lock().unwrap_or_else(PoisonError::into_inner);
                dest[offset..offset + n].copy_from_slice(&column[row - first..row - first + n]);
                row += n;
            }
        }
        if end > self.capacity {
            let from = first.max(self.capacity);
            let rest = columns.iter().map(|c| c[from - first..].to_vec()).collect();
            self.overflow
                .lock()
                .unwrap_or_else(PoisonError::into_inner)
                .push((from, rest));
        }
    }
}

/// Marks the sink failed when a worker unwinds, so no other worker waits for it forever.
struct PanicGuard<'a>(&'a (Mutex<Sink>, Condvar));

impl Drop for PanicGuard<'_> {
    fn drop(&mut self) {
        if std::thread::panicking() {
            let mut sink = self.0.0.lock().unwrap_or_else(PoisonError::into_inner);
            sink.failed = true;
            self.0.1.notify_all();
        }
    }
}

/// One worker: takes blocks from the feed in turn, parses them and joins them to the sink.
fn work(feed: &Mutex<Feed<'_>>, sink: &(Mutex<Sink>, Condvar), output: &Output<'_>, spec: &Spec) {
    let _guard = PanicGuard(sink);
    let width = spec.wanted.len();
    let mut buf: Vec<u8> = Vec::with_capacity(spec.block.min(MAX_LINE) + MAX_LINE);
    loop {
        {
            // Wait while too many blocks are parsed ahead of the one the join needs.
            let mut s = sink.0.lock().unwrap_or_else(PoisonError::into_inner);
            while s.pending.len() >= AHEAD && !s.failed {
                s = sink.1.wait(s).unwrap_or_else(PoisonError::into_inner);
            }
            if s.failed || s.out.too_long.is_some() {
                return;
            }
        }
        let taken = {
            let mut f = feed.lock().unwrap_or_else(PoisonError::into_inner);
            take_block(&mut f, &mut buf, spec.eol, spec.block)
        };
        let Some((seq, end)) = taken else {
            return;
        };
        if let Some(p) = &spec.progress {
            p.add_parsed(buf.len() as u64);
            if p.is_cancelled() {
                let mut s = sink.0.lock().unwrap_or_else(PoisonError::into_inner);
                s.failed = true;
                sink.1.notify_all();
                return;
            }
        }
        let mut parsed = {
            let mut s = sink.0.lock().unwrap_or_else(PoisonError::into_inner);
            s.free.pop()
        }
        .unwrap_or_else(|| Parsed::new(width, 1, spec.block / 16));
        parsed.first_line = 1;
        parsed.last_line = 0;
        parsed.ends_without_eol = false;
        let lines = match end {
            BlockEnd::NoLineEnd => {
                parsed.too_long = Some(1);
                1
            }
            BlockEnd::Lines | BlockEnd::Last => {
                parsed.ends_without_eol =
                    end == BlockEnd::Last && buf.last().is_some_and(|b| *b != spec.eol);
                if buf.is_empty() {
                    0
                } else {
                    parse_part(&buf, 1, spec, &mut parsed)
                }
            }
        };
        let mut ready = Vec::new();
        {
            let mut s = sink.0.lock().unwrap_or_else(PoisonError::into_inner);
            join(&mut s, seq, Block { parsed, lines }, &mut ready);
        }
        sink.1.notify_all();
        for (first, mut parsed) in ready {
            output.put(first, &parsed.columns);
            parsed.columns.iter_mut().for_each(Vec::clear);
            let mut s = sink.0.lock().unwrap_or_else(PoisonError::into_inner);
            s.free.push(parsed);
        }
    }
}

/// Parses the data region: `head` holds its first bytes, `rest` the remainder of the file.
///
/// The source is read in blocks of [`BLOCK`] bytes cut at the last line ending; each of
/// `spec.threads` workers (the calling thread among them) takes the next block under a lock,
/// parses it into its own small columns while the others read and parse theirs, and joins it
/// to the output in file order, so reading, parsing and joining overlap and every block's
/// columns stay in cache until they are copied to the output.
pub(crate) fn parse_stream(
    head: &[u8],
    rest: &mut (dyn Read + Send),
    first_line: u64,
    spec: &Spec,
    capacity: usize,
    file: &str,
) -> Result<Parsed, ImportError> {
    let feed = Mutex::new(Feed {
        rest,
        carry: head.to_vec(),
        next: 0,
        done: false,
        error: None,
    });
    let width = spec.wanted.len();
    let sink = (
        Mutex::new(Sink {
            out: Parsed::new(width, first_line, 0),
            next: 0,
            line: first_line,
            rows: 0,
            pending: std::collections::BTreeMap::new(),
            free: Vec::new(),
            failed: false,
        }),
        Condvar::new(),
    );
    // Zeroed memory comes from the system untouched, so an estimate too large costs address
    // space, not pages.
    let mut columns: Vec<Vec<f64>> = (0..width).map(|_| vec![0.0; capacity]).collect();
    let overflow = {
        let output = Output::new(&mut columns);
        std::thread::scope(|scope| {
            for _ in 1..spec.threads {
                scope.spawn(|| work(&feed, &sink, &output, spec));
            }
            work(&feed, &sink, &output, spec);
        });
        output
            .overflow
            .into_inner()
            .unwrap_or_else(PoisonError::into_inner)
    };
    if spec.progress.as_ref().is_some_and(|p| p.is_cancelled()) {
        return Err(ImportError::Cancelled {
            file: file.to_owned(),
        });
    }
    let feed = feed.into_inner().unwrap_or_else(PoisonError::into_inner);
    let sink = sink.0.into_inner().unwrap_or_else(PoisonError::into_inner);
    let mut out = sink.out;
    if let Some(line) = out.too_long {
        return Err(ImportError::LineTooLong {
            file: file.to_owned(),
            line,
            limit: MAX_LINE,
        });
    }
    if let Some(error) = feed.error {
        return Err(ImportError::Io {
            file: file.to_owned(),
            error,
        });
    }
    columns.iter_mut().for_each(|c| c.truncate(sink.rows));
    let mut overflow = overflow;
    overflow.sort_unstable_by_key(|(first, _)| *first);
    for (_, rest) in overflow {
        for (c, r) in columns.iter_mut().zip(rest) {
            c.extend_from_slice(&r);
        }
    }
    out.columns = columns;
    Ok(out)
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
            block: BLOCK,
            progress: None,
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

    /// Every way of cutting the data into blocks, on any number of workers, with an estimate
    /// of the rows too small, right or too large, gives what one block on one thread gives:
    /// the same values, the same unreadable and blank lines, the same last line.
    #[test]
    fn blocks_and_workers_agree_with_one_block() {
        let mut text = String::new();
        for i in 0..5_000 {
            text.push_str(&format!(
                "{:.6e},{:.6e}\n",
                i as f64 * 1e-3,
                (i as f64).sqrt()
            ));
            match i % 997 {
                3 => text.push_str("oops,1\n"),
                5 => text.push('\n'),
                7 => text.push_str("1,2,3\n"),
                11 => text.push_str("4.5,NaN\r\n"),
                _ => {}
            }
        }
        text.push_str("9,9"); // no final line ending
        let bytes = text.as_bytes();
        let reference = |head: usize| {
            let mut one = spec(1);
            one.block = bytes.len() + 1;
            parse_stream(&bytes[..head], &mut &bytes[head..], 3, &one, 0, "x").unwrap()
        };
        let want = reference(0);
        // 5000 rows and the last; each bad kind and the blank line six times (i = k + 997 j).
        assert_eq!(want.columns[0].len(), 5_001);
        assert_eq!(want.bad.len(), 3 * 6);
        assert_eq!(want.blank.len(), 6);
        assert!(want.ends_without_eol);
        for (block, threads, capacity, head) in [
            (7, 1, 0, 0),
            (7, 4, 10, 13),
            (64, 2, 4_995, 100),
            (64, 3, 100_000, 0),
            (1000, 2, 2_000, 5_000),
            (4096, 8, 4_995, 1),
        ] {
            let mut sp = spec(threads);
            sp.block = block;
            let got =
                parse_stream(&bytes[..head], &mut &bytes[head..], 3, &sp, capacity, "x").unwrap();
            let case = format!("block {block}, threads {threads}, capacity {capacity}");
            assert_eq!(got.columns, want.columns, "{case}");
            assert_eq!(got.bad, want.bad, "{case}");
            assert_eq!(got.blank, want.blank, "{case}");
            assert_eq!(got.last_line, want.last_line, "{case}");
            assert_eq!(got.ends_without_eol, want.ends_without_eol, "{case}");
            assert_eq!(got.line_of_row(4_000), want.line_of_row(4_000), "{case}");
        }
        assert_eq!(reference(17).columns, want.columns);
    }

    /// Rows whose layout holds for a while and then changes (a sign that comes and goes, an
    /// exponent that gains a digit, more decimals, a CR, a trailing delimiter, a bad row) are
    /// read to the values the standard library reads from each field (`str::parse::<f64>`,
    /// correctly rounded), on one and on two workers.
    #[test]
    fn changing_row_layouts_read_as_the_standard_library_does() {
        let mut text = String::new();
        let mut want: (Vec<f64>, Vec<f64>) = (Vec::new(), Vec::new());
        let mut bad = Vec::new();
        let mut state = 0x2545_F491_4F6C_DD1Du64;
        let mut next = || {
            state ^= state << 13;
            state ^= state >> 7;
            state ^= state << 17;
            state
        };
        for (line, i) in (3u64..).zip(0..60_000u64) {
            let r = next();
            let t = (i + 1) as f64 * 1e-5 - 0.2;
            let c = ((r % 2001) as f64 - 1000.0) * 10f64.powi(-((i / 7000) as i32) - 3);
            let a = match (i / 5000) % 3 {
                0 => format!("{t:.6e}"),
                1 => format!("{t:.9E}"),
                _ => format!("{t}"),
            };
            let b = if (i / 3000) % 2 == 0 {
                format!("{c:.4e}")
            } else {
                format!("{c:.7}")
            };
            let tail = match (i / 11_000) % 3 {
                0 => "\n",
                1 => "\r\n",
                _ => ",\n",
            };
            if r % 4999 == 0 {
                text.push_str(&format!("{a},x{b}{tail}"));
                bad.push(line);
            } else {
                text.push_str(&format!("{a},{b}{tail}"));
                want.0.push(a.parse().unwrap());
                want.1.push(b.parse().unwrap());
            }
        }
        for threads in [1, 2] {
            let mut sp = spec(threads);
            sp.block = 1 << 16;
            let got = parse_stream(&[], &mut text.as_bytes(), 3, &sp, 0, "x").unwrap();
            let bits = |v: &[f64]| v.iter().map(|x| x.to_bits()).collect::<Vec<_>>();
            assert_eq!(bits(&got.columns[0]), bits(&want.0), "{threads}");
            assert_eq!(bits(&got.columns[1]), bits(&want.1), "{threads}");
            assert_eq!(got.bad.iter().map(|b| b.line).collect::<Vec<_>>(), bad);
        }
        assert!(!bad.is_empty());
    }

    #[test]
    fn long_line_is_refused_in_any_block() {
        let mut text = b"1,2\n3,4\n".to_vec();
        text.extend(std::iter::repeat_n(b'7', MAX_LINE + 10));
        text.extend_from_slice(b"\n5,6\n");
        for (block, threads) in [(BLOCK, 1), (4096, 2), (MAX_LINE / 3, 3)] {
            let mut sp = spec(threads);
            sp.block = block;
            let err = parse_stream(&[], &mut text.as_slice(), 1, &sp, 0, "x").unwrap_err();
            assert!(
                matches!(err, ImportError::LineTooLong { line: 3, .. }),
                "{block}: {err}"
            );
        }
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
