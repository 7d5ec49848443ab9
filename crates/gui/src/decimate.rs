//! Fewer points to draw than a trace holds: a min/max envelope per pixel column, so a line of
//! millions of samples is drawn from a few thousand points and still shows every spike.

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

#[cfg(test)]
mod tests {
    use super::*;

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
