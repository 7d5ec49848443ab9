//! Shortening long series for drawing without hiding what a reader must see: per pixel column,
//! the lowest and the highest sample are kept, so spikes, steps and the noise envelope survive.

/// Keeps, for each pixel column, the samples with the lowest and the highest `y`, in their
/// original order. `points` are in pixel coordinates and ordered along x (either direction),
/// as a time series is; non-finite points are dropped. The result has at most two points per
/// column touched.
pub(crate) fn min_max_envelope(points: &[(f64, f64)]) -> Vec<(f64, f64)> {
    let mut out = Vec::new();
    // The current column and the indices of its lowest and highest sample.
    let mut current: Option<(i64, usize, usize)> = None;
    let flush = |out: &mut Vec<(f64, f64)>, c: Option<(i64, usize, usize)>| {
        if let Some((_, lo, hi)) = c {
            out.push(points[lo.min(hi)]);
            if lo != hi {
                out.push(points[lo.max(hi)]);
            }
        }
    };
    for (i, &(x, y)) in points.iter().enumerate() {
        if !(x.is_finite() && y.is_finite()) {
            continue;
        }
        let column = x.floor() as i64;
        match &mut current {
            Some((c, lo, hi)) if *c == column => {
                if y < points[*lo].1 {
                    *lo = i;
                }
                if y > points[*hi].1 {
                    *hi = i;
                }
            }
            _ => {
                flush(&mut out, current);
                current = Some((column, i, i));
            }
        }
    }
    flush(&mut out, current);
    out
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn keeps_the_extremes_of_every_column() {
        // 100 000 samples over 200 pixel columns, with one spike up and one down in the middle
        // of otherwise smooth data.
        let n = 100_000;
        let mut pts: Vec<(f64, f64)> = (0..n)
            .map(|i| {
                let x = 200.0 * i as f64 / n as f64;
                (x, (x * 0.05).sin())
            })
            .collect();
        pts[31_234].1 = 40.0;
        pts[77_001].1 = -40.0;
        let out = min_max_envelope(&pts);
        assert!(out.len() <= 2 * 200, "{} points", out.len());
        assert!(out.iter().any(|p| p.1 == 40.0));
        assert!(out.iter().any(|p| p.1 == -40.0));
        // Every column keeps its own minimum and maximum.
        for c in 0..200 {
            let col: Vec<f64> = pts
                .iter()
                .filter(|p| p.0.floor() as i64 == c)
                .map(|p| p.1)
                .collect();
            let (lo, hi) = col
                .iter()
                .fold((f64::INFINITY, f64::NEG_INFINITY), |(a, b), &y| {
                    (a.min(y), b.max(y))
                });
            let kept: Vec<f64> = out
                .iter()
                .filter(|p| p.0.floor() as i64 == c)
                .map(|p| p.1)
                .collect();
            assert!(kept.contains(&lo) && kept.contains(&hi), "column {c}");
        }
        // Order along x is kept.
        assert!(out.windows(2).all(|w| w[0].0 <= w[1].0));
    }

    #[test]
    fn decreasing_x_and_short_series_pass_through() {
        // A Cottrell plot runs right to left in time order; three points in three columns stay.
        let pts = [(30.5, 1.0), (20.5, 2.0), (10.5, 3.0)];
        assert_eq!(min_max_envelope(&pts), pts.to_vec());
        // The order inside a column follows the samples: here the maximum came first.
        let pts = [(5.1, 9.0), (5.2, 1.0), (5.3, 4.0)];
        assert_eq!(min_max_envelope(&pts), vec![(5.1, 9.0), (5.2, 1.0)]);
        assert!(min_max_envelope(&[(1.0, f64::NAN)]).is_empty());
    }
}
