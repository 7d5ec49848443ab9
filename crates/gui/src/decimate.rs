//! Fewer points to draw than a trace holds: a min/max envelope per pixel column, so a line of
//! millions of samples is drawn from a few thousand points and still shows every spike.
//!
//! [`envelope`] scans every sample in view, which is too slow for ten million of them at every
//! frame (about a hundred milliseconds here). [`Pyramid`] precomputes, once per import or fit and
//! off the UI thread, the lowest and highest sample of blocks of 32, 64, 128… samples;
//! [`envelope_fast`] then finds each pixel column's index range by bisection and its extremes
//! from a few blocks, so a frame costs about `columns × log(n)` whatever the trace's length.

use std::ops::Range;

/// The points of `x(i)`, `y(i)` for `i` in `indices` reduced to at most two per column of
/// `columns` equal columns across `x_lo..x_hi`: the lowest and the highest point of each column,
/// in the order they occur. When the range holds no more than two points per column they are
/// returned as they are. `x` must be monotonic over `indices` (either way); points with a
/// non-finite coordinate are skipped, and points outside `x_lo..x_hi` fall into the end columns.
pub fn envelope(
    indices: Range<usize>,
    x: impl Fn(usize) -> f64,
    y: impl Fn(usize) -> f64,
    x_lo: f64,
    x_hi: f64,
    columns: usize,
) -> Vec<[f64; 2]> {
    let columns = columns.max(1);
    let count = indices.len();
    if count <= 2 * columns || !(x_hi > x_lo) {
        return indices
            .map(|i| [x(i), y(i)])
            .filter(|p| p[0].is_finite() && p[1].is_finite())
            .collect();
    }
    let scale = columns as f64 / (x_hi - x_lo);
    let column_of = |xv: f64| -> usize {
        let c = ((xv - x_lo) * scale).floor();
        if c <= 0.0 {
            0
        } else {
            (c as usize).min(columns - 1)
        }
    };
    let mut out = Vec::with_capacity(2 * columns + 2);
    let mut current: Option<Column> = None;
    for i in indices {
        let (xv, yv) = (x(i), y(i));
        if !(xv.is_finite() && yv.is_finite()) {
            continue;
        }
        let col = column_of(xv);
        match &mut current {
            Some(c) if c.column == col => c.add(i, [xv, yv]),
            _ => {
                if let Some(done) = current.take() {
                    done.push_to(&mut out);
                }
                current = Some(Column::new(col, i, [xv, yv]));
            }
        }
    }
    if let Some(done) = current {
        done.push_to(&mut out);
    }
    out
}

/// The lowest and highest point of one pixel column, with their indices.
struct Column {
    column: usize,
    low: (usize, [f64; 2]),
    high: (usize, [f64; 2]),
}

impl Column {
    fn new(column: usize, i: usize, p: [f64; 2]) -> Column {
        Column {
            column,
            low: (i, p),
            high: (i, p),
        }
    }

    fn add(&mut self, i: usize, p: [f64; 2]) {
        if p[1] < self.low.1[1] {
            self.low = (i, p);
        }
        if p[1] > self.high.1[1] {
            self.high = (i, p);
        }
    }

    /// The extremes in the order they were sampled, once when they are the same point.
    fn push_to(&self, out: &mut Vec<[f64; 2]>) {
        let (first, second) = if self.low.0 <= self.high.0 {
            (self.low, self.high)
        } else {
            (self.high, self.low)
        };
        out.push(first.1);
        if second.0 != first.0 {
            out.push(second.1);
        }
    }
}

/// The index range of the samples whose time lies in `t_lo..=t_hi`, widened by one sample on
/// each side so that a line drawn through them reaches the edges of the view. `time_s` must be
/// increasing.
pub fn index_range(time_s: &[f64], t_lo: f64, t_hi: f64) -> Range<usize> {
    let a = time_s.partition_point(|&t| t < t_lo).saturating_sub(1);
    let b = (time_s.partition_point(|&t| t <= t_hi) + 1).min(time_s.len());
    a..b.max(a)
}

/// log2 of the smallest block of a [`Pyramid`]: 32 samples, so the levels take about 3/4 of
/// the series' memory (24 bytes per 32 samples, over all levels) and a query scans at most 62
/// single samples.
const BASE_SHIFT: u32 = 5;
/// No sample in the block is finite.
const NONE: u32 = u32::MAX;

/// The lowest and highest finite sample of a block: their indices and, so that a query does
/// not jump about the series to compare them, their values.
#[derive(Debug, Clone, Copy)]
struct Block {
    lo: u32,
    hi: u32,
    lo_v: f64,
    hi_v: f64,
}

impl Block {
    const EMPTY: Block = Block {
        lo: NONE,
        hi: NONE,
        lo_v: f64::NAN,
        hi_v: f64::NAN,
    };

    fn one(i: u32, v: f64) -> Block {
        Block {
            lo: i,
            hi: i,
            lo_v: v,
            hi_v: v,
        }
    }

    /// `self` followed by `b`: on a tie the earlier sample is kept.
    fn merge(self, b: Block) -> Block {
        let mut out = self;
        if b.lo != NONE && (out.lo == NONE || b.lo_v < out.lo_v) {
            out.lo = b.lo;
            out.lo_v = b.lo_v;
        }
        if b.hi != NONE && (out.hi == NONE || b.hi_v > out.hi_v) {
            out.hi = b.hi;
            out.hi_v = b.hi_v;
        }
        out
    }
}

/// The lowest and highest finite sample of every aligned block of `32·2^k` samples, for each
/// level `k`, of one series.
#[derive(Debug, Clone, Default)]
pub struct Pyramid {
    levels: Vec<Vec<Block>>,
    len: usize,
}

impl Pyramid {
    /// The pyramid of `y`; empty (so [`Pyramid::extremes`] scans) for a series too long to
    /// index with `u32`.
    pub fn new(y: &[f64]) -> Pyramid {
        if u32::try_from(y.len()).is_err() {
            return Pyramid::default();
        }
        let base = 1usize << BASE_SHIFT;
        let mut first: Vec<Block> = Vec::with_capacity(y.len() / base + 1);
        for (b, chunk) in y.chunks(base).enumerate() {
            let start = b * base;
            let mut block = Block::EMPTY;
            for (k, &v) in chunk.iter().enumerate() {
                if v.is_finite() {
                    // In range: start + k < y.len() ≤ u32::MAX, checked above.
                    block = block.merge(Block::one((start + k) as u32, v));
                }
            }
            first.push(block);
        }
        let mut levels = vec![first];
        while let Some(last) = levels.last()
            && last.len() > 1
        {
            let next = last
                .chunks(2)
                .map(|pair| pair.iter().fold(Block::EMPTY, |acc, b| acc.merge(*b)))
                .collect();
            levels.push(next);
        }
        Pyramid {
            levels,
            len: y.len(),
        }
    }

    /// The indices of the lowest and highest finite sample of `y[range]`, where `y` is the
    /// series the pyramid was built from; `None` when none is finite.
    pub fn extremes(&self, y: &[f64], range: Range<usize>) -> Option<(usize, usize)> {
        let end = range.end.min(y.len());
        let mut acc = Block::EMPTY;
        let mut i = range.start;
        let usable = self.len == y.len() && !self.levels.is_empty();
        while i < end {
            // The largest block that starts at i (its alignment) and ends by `end` (its size),
            // found from the bits of i and of the length left rather than by trying each level.
            let level = if usable {
                let aligned = if i == 0 { u32::MAX } else { i.trailing_zeros() };
                let fits = (end - i).ilog2();
                let shift = aligned.min(fits);
                (shift >= BASE_SHIFT)
                    .then(|| ((shift - BASE_SHIFT) as usize).min(self.levels.len() - 1))
            } else {
                None
            };
            match level {
                Some(k) => {
                    let shift = BASE_SHIFT as usize + k;
                    acc = acc.merge(self.levels[k][i >> shift]);
                    i += 1 << shift;
                }
                None => {
                    if y[i].is_finite() {
                        // i < y.len() ≤ u32::MAX when usable; otherwise the cast is checked.
                        let Ok(k) = u32::try_from(i) else { return None };
                        acc = acc.merge(Block::one(k, y[i]));
                    }
                    i += 1;
                }
            }
        }
        (acc.lo != NONE).then_some((acc.lo as usize, acc.hi as usize))
    }
}

/// The first index in `range` for which `pred` is false, `pred` being true then false along
/// the range.
fn partition(range: Range<usize>, pred: impl Fn(usize) -> bool) -> usize {
    let (mut lo, mut hi) = (range.start, range.end);
    while lo < hi {
        let mid = lo + (hi - lo) / 2;
        if pred(mid) {
            lo = mid + 1;
        } else {
            hi = mid;
        }
    }
    lo
}

/// What [`envelope`] returns, found without visiting every sample: the columns' index ranges
/// by bisection on `x`, their extremes from `pyramid` (built from the raw series `y_raw`). `y(i)` must be an
/// increasing function of `y_raw[i]` (a positive scale factor, a logarithm), so that the
/// extremes of one are those of the other; a point whose `y` is not finite is left out. `x`
/// must be finite and monotonic over `indices`; when its ends are not finite this falls back to
/// [`envelope`].
pub fn envelope_fast(
    indices: Range<usize>,
    x: impl Fn(usize) -> f64,
    (y_raw, pyramid): (&[f64], &Pyramid),
    y: impl Fn(usize) -> f64,
    x_lo: f64,
    x_hi: f64,
    columns: usize,
) -> Vec<[f64; 2]> {
    let columns = columns.max(1);
    let indices = indices.start..indices.end.min(y_raw.len()).max(indices.start);
    let count = indices.len();
    let ends_finite = count > 0 && x(indices.start).is_finite() && x(indices.end - 1).is_finite();
    if count <= 2 * columns || !(x_hi > x_lo) || !ends_finite {
        return envelope(indices, x, y, x_lo, x_hi, columns);
    }
    let scale = columns as f64 / (x_hi - x_lo);
    let column_of = |xv: f64| -> usize {
        let c = ((xv - x_lo) * scale).floor();
        if c <= 0.0 {
            0
        } else {
            (c as usize).min(columns - 1)
        }
    };
    let increasing = x(indices.end - 1) >= x(indices.start);
    let mut out = Vec::with_capacity(2 * columns + 2);
    let mut start = indices.start;
    let first_col = column_of(x(indices.start));
    let last_col = column_of(x(indices.end - 1));
    let mut col = first_col;
    loop {
        // Where the samples of this column end.
        let end = if col == last_col {
            indices.end
        } else if increasing {
            partition(start..indices.end, |i| column_of(x(i)) <= col)
        } else {
            partition(start..indices.end, |i| column_of(x(i)) >= col)
        };
        if end > start
            && let Some((lo, hi)) = pyramid.extremes(y_raw, start..end)
        {
            let (a, b) = if lo <= hi { (lo, hi) } else { (hi, lo) };
            for i in [a, b].into_iter().take(if a == b { 1 } else { 2 }) {
                let p = [x(i), y(i)];
                if p[0].is_finite() && p[1].is_finite() {
                    out.push(p);
                }
            }
        }
        if end >= indices.end || col == last_col {
            break;
        }
        start = end;
        col = column_of(x(start));
    }
    out
}

/// The naive peer of [`envelope`] for the benchmark: every `stride`-th sample of the range,
/// enough to give about `2·columns` points. It is fast but drops spikes between the strides.
pub fn stride(
    indices: Range<usize>,
    x: impl Fn(usize) -> f64,
    y: impl Fn(usize) -> f64,
    columns: usize,
) -> Vec<[f64; 2]> {
    let step = (indices.len() / (2 * columns.max(1))).max(1);
    indices
        .step_by(step)
        .map(|i| [x(i), y(i)])
        .filter(|p| p[0].is_finite() && p[1].is_finite())
        .collect()
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn the_pyramid_finds_the_same_extremes_as_a_scan() {
        // A wiggle with non-finite samples, queried over ranges of every alignment.
        let y: Vec<f64> = (0..5000)
            .map(|i| {
                if i % 97 == 3 {
                    f64::NAN
                } else {
                    ((i * 7919) % 1013) as f64 - 500.0
                }
            })
            .collect();
        let p = Pyramid::new(&y);
        let fixed = [
            (0, 5000),
            (1, 4999),
            (31, 33),
            (32, 64),
            (100, 3000),
            (4990, 5000),
            (3, 4),
        ];
        let spread = (0..5000)
            .step_by(173)
            .flat_map(|a| ((a + 1)..=5000).step_by(211).map(move |b| (a, b)));
        for (a, b) in fixed.into_iter().chain(spread) {
            let scan = |better: fn(f64, f64) -> bool| {
                (a..b)
                    .filter(|&i| y[i].is_finite())
                    .fold(None, |m: Option<usize>, i| match m {
                        Some(j) if !better(y[i], y[j]) => Some(j),
                        _ => Some(i),
                    })
            };
            let got = p.extremes(&y, a..b);
            let want = scan(|u, v| u < v).zip(scan(|u, v| u > v));
            // Ties may pick another index with the same value.
            assert_eq!(
                got.map(|(l, h)| (y[l], y[h])),
                want.map(|(l, h)| (y[l], y[h])),
                "{a}..{b}"
            );
        }
        assert_eq!(p.extremes(&y, 3..4), None, "a NaN alone has no extremes");
    }

    #[test]
    fn the_fast_envelope_draws_what_the_scan_draws() {
        // A decaying transient on log time with a spike, as the transient plot shows it.
        let n = 300_000;
        let t: Vec<f64> = (1..=n).map(|i| i as f64 * 1e-4).collect();
        let mut i_a: Vec<f64> = t.iter().map(|t| 1e-5 / t.sqrt()).collect();
        i_a[123_456] = 1.0;
        let p = Pyramid::new(&i_a);
        let x = |k: usize| t[k].log10();
        let (lo, hi) = (x(0), x(n - 1));
        for cols in [200, 1000] {
            let slow = envelope(0..n, x, |k| i_a[k], lo, hi, cols);
            let fast = envelope_fast(0..n, x, (&i_a, &p), |k| i_a[k], lo, hi, cols);
            assert_eq!(fast, slow, "{cols} columns");
        }
        // On a decreasing axis (the Cottrell plot's 1/√t) too.
        let xd = |k: usize| 1.0 / t[k].sqrt();
        let slow = envelope(1000..n, xd, |k| i_a[k], xd(n - 1), xd(1000), 500);
        let fast = envelope_fast(
            1000..n,
            xd,
            (&i_a, &p),
            |k| i_a[k],
            xd(n - 1),
            xd(1000),
            500,
        );
        assert_eq!(fast, slow);
    }

    #[test]
    fn a_million_points_become_two_per_column_and_keep_their_spikes() {
        let n = 1_000_000;
        let spike_at = 654_321;
        let y = |i: usize| {
            if i == spike_at {
                50.0
            } else if i == spike_at + 1 {
                -50.0
            } else {
                (i as f64 * 0.001).sin()
            }
        };
        let pts = envelope(0..n, |i| i as f64, y, 0.0, n as f64, 800);
        assert!(pts.len() <= 1600, "{} points", pts.len());
        // The spike and the dip survive: the envelope keeps each column's extremes.
        assert!(pts.iter().any(|p| p == &[spike_at as f64, 50.0]));
        assert!(pts.iter().any(|p| p == &[(spike_at + 1) as f64, -50.0]));
        // The points stay in order along x, so the line does not double back.
        assert!(pts.windows(2).all(|w| w[0][0] <= w[1][0]));
    }

    #[test]
    fn few_points_are_returned_as_they_are_without_non_finite_ones() {
        let ys = [1.0, f64::NAN, 3.0];
        let pts = envelope(0..3, |i| i as f64, |i| ys[i], 0.0, 2.0, 100);
        assert_eq!(pts, vec![[0.0, 1.0], [2.0, 3.0]]);
    }

    #[test]
    fn a_decreasing_axis_works_too() {
        // x = 1/√t falls as t grows, as on a Cottrell plot.
        let n = 100_000;
        let x = |i: usize| 1.0 / ((i + 1) as f64).sqrt();
        let pts = envelope(0..n, x, |i| i as f64, x(n - 1), x(0), 100);
        assert!(pts.len() <= 200);
        assert_eq!(pts.first(), Some(&[1.0, 0.0]));
    }

    #[test]
    fn the_index_range_reaches_one_sample_past_each_edge() {
        let t = [0.1, 0.2, 0.3, 0.4, 0.5];
        assert_eq!(index_range(&t, 0.25, 0.35), 1..4);
        assert_eq!(index_range(&t, 0.0, 1.0), 0..5);
        assert_eq!(index_range(&t, 2.0, 3.0), 4..5);
    }
}
