//! Finding the potential step: its onset, the segments between steps, the pre-step baseline and
//! the sign of the faradaic current.

use serde::Serialize;

/// How the step onset was found.
#[derive(Debug, Clone, PartialEq, Serialize)]
#[serde(rename_all = "snake_case", tag = "method")]
pub enum OnsetMethod {
    /// From a jump in the potential column.
    PotentialJump {
        /// Potential before the step, in V (median of the pre-step samples).
        from_v: f64,
        /// Potential after the step, in V (median of the first samples after it).
        to_v: f64,
    },
    /// From the jump of the current (no usable potential column).
    CurrentJump,
    /// The file starts at the step; its own time origin is kept.
    FileStart,
    /// The file starts at the step but its clock does not start near zero; the origin was put
    /// one sampling interval before the first sample (a warning says so).
    AssumedOneSampleBefore,
    /// Given by the user (or detection switched off: the file's clock is kept).
    Given,
}

/// The step onset.
#[derive(Debug, Clone, PartialEq, Serialize)]
pub struct Onset {
    /// Index of the first sample after the step.
    pub index: usize,
    /// Time of the onset on the file's own clock, in s; the trace's times are relative to it.
    pub file_time_s: f64,
    /// How it was found.
    pub method: OnsetMethod,
}

/// Sign of the faradaic current.
#[derive(Debug, Clone, Copy, PartialEq, Eq, Serialize)]
#[serde(rename_all = "snake_case")]
pub enum Polarity {
    /// Positive current: oxidation (IUPAC sign convention).
    Anodic,
    /// Negative current: reduction (IUPAC sign convention).
    Cathodic,
}

impl Polarity {
    /// +1 for anodic, −1 for cathodic: multiply a current by it to get the faradaic magnitude.
    pub fn factor(self) -> f64 {
        match self {
            Polarity::Anodic => 1.0,
            Polarity::Cathodic => -1.0,
        }
    }
}

/// What part of the experiment a segment is.
#[derive(Debug, Clone, Copy, PartialEq, Eq, Serialize)]
#[serde(rename_all = "snake_case")]
pub enum SegmentKind {
    /// Before the first step: the baseline.
    Baseline,
    /// After a potential step.
    Step,
}

/// A contiguous part of the trace at one applied potential.
#[derive(Debug, Clone, PartialEq, Serialize)]
pub struct Segment {
    /// Baseline or step.
    pub kind: SegmentKind,
    /// First sample index.
    pub start: usize,
    /// One past the last sample index.
    pub end: usize,
    /// Time of the segment's start relative to the trace's onset, in s (0 for the first step).
    pub start_time_s: f64,
    /// Median potential over the segment, in V, when the file has a potential column.
    pub potential_v: Option<f64>,
    /// Sign of the current in this segment relative to the baseline.
    pub polarity: Option<Polarity>,
}

impl Segment {
    /// Number of samples.
    pub fn len(&self) -> usize {
        self.end - self.start
    }

    /// Whether the segment holds no sample.
    pub fn is_empty(&self) -> bool {
        self.end == self.start
    }
}

/// Mean and spread of the pre-step current.
#[derive(Debug, Clone, PartialEq, Serialize)]
pub struct Baseline {
    /// Mean current in A.
    pub mean_a: f64,
    /// Sample standard deviation in A (0 for a single sample).
    pub sd_a: f64,
    /// Number of samples.
    pub points: usize,
}

impl Baseline {
    pub(crate) fn of(current: &[f64]) -> Option<Baseline> {
        if current.is_empty() {
            return None;
        }
        let n = current.len() as f64;
        let mean = current.iter().sum::<f64>() / n;
        let sd = if current.len() > 1 {
            (current.iter().map(|c| (c - mean).powi(2)).sum::<f64>() / (n - 1.0)).sqrt()
        } else {
            0.0
        };
        Some(Baseline {
            mean_a: mean,
            sd_a: sd,
            points: current.len(),
        })
    }
}

fn median(values: &mut [f64]) -> f64 {
    if values.is_empty() {
        return f64::NAN;
    }
    let mid = values.len() / 2;
    let (_, m, _) = values.select_nth_unstable_by(mid, f64::total_cmp);
    *m
}

/// Jumps in the potential: returns, for each step, the index of the first sample after it.
///
/// A jump is a change between neighbouring samples larger than both 5 % of the potential range
/// and 10 robust standard deviations of the sample-to-sample changes; changes that follow each
/// other (a step that takes a few samples to rise) are one step, and a step must hold for at
/// least three samples so that spikes are not taken for steps.
pub(crate) fn potential_steps(potential: &[f64]) -> Vec<usize> {
    let n = potential.len();
    if n < 4 {
        return Vec::new();
    }
    let (lo, hi) = potential
        .iter()
        .fold((f64::INFINITY, f64::NEG_INFINITY), |(a, b), &v| {
            (a.min(v), b.max(v))
        });
    let range = hi - lo;
    // Also catches a NaN range.
    if range.is_nan() || range <= 1e-3 {
        return Vec::new();
    }
    // A sparse sample of the differences is enough for their spread, and keeps this fast.
    let stride = (n / 200_000).max(1);
    let mut diffs: Vec<f64> = (0..n - 1)
        .step_by(stride)
        .map(|i| (potential[i + 1] - potential[i]).abs())
        .collect();
    let mad = median(&mut diffs);
    let threshold = (0.05 * range).max(10.0 * 1.4826 * mad).max(1e-3);
    let mut steps: Vec<usize> = Vec::new();
    let mut i = 0;
    while i + 1 < n {
        if (potential[i + 1] - potential[i]).abs() > threshold {
            let first = i + 1;
            let mut j = first;
            while j + 1 < n && (potential[j + 1] - potential[j]).abs() > threshold {
                j += 1;
            }
            // j is the first sample at the new level; require the level to hold.
            let holds = j + 3 <= n
                && potential[j..j + 3]
                    .iter()
                    .all(|v| (v - potential[j]).abs() <= threshold);
            let before = potential[first - 1];
            let moved = (potential[j] - before).abs() > threshold;
            if holds && moved {
                steps.push(first);
            }
            i = j;
        } else {
            i += 1;
        }
    }
    steps
}

/// The onset from the current alone: the largest jump before the current's peak magnitude,
/// when it stands well above the pre-step noise. Returns the index of the first sample after it.
pub(crate) fn current_step(current: &[f64]) -> Option<usize> {
    let n = current.len();
    if n < 8 {
        return None;
    }
    let peak = last_peak(current)?;
    if peak < 2 {
        return None;
    }
    let jump = (0..peak).max_by(|&a, &b| {
        (current[a + 1] - current[a])
            .abs()
            .total_cmp(&(current[b + 1] - current[b]).abs())
    })?;
    // At least two samples before the jump, so that the level before it means something.
    if jump < 1 {
        return None;
    }
    let mut pre: Vec<f64> = current[..=jump].to_vec();
    let level = median(&mut pre);
    let mut spread: Vec<f64> = current[..=jump].iter().map(|c| (c - level).abs()).collect();
    let noise = 1.4826 * median(&mut spread);
    let size = (current[jump + 1] - current[jump]).abs();
    let rise = (current[peak] - level).abs();
    (size > 0.3 * rise && rise > 20.0 * noise).then_some(jump + 1)
}

/// The last index of the largest magnitude in `values` (finite, as the importer keeps only
/// finite values): what `(0..n).max_by(|a, b| v[a].abs().total_cmp(&v[b].abs()))` returns, in
/// one pass of per-block maxima over four independent lanes, then a search of the last block
/// that holds the maximum.
fn last_peak(values: &[f64]) -> Option<usize> {
    const BLOCK: usize = 1024;
    let mut best = f64::NEG_INFINITY;
    let mut best_block = None;
    for (k, block) in values.chunks(BLOCK).enumerate() {
        let mut lanes = [0.0f64; 4];
        let mut quads = block.chunks_exact(4);
        for q in &mut quads {
            for (lane, v) in lanes.iter_mut().zip(q) {
                let a = v.abs();
                *lane = if a > *lane { a } else { *lane };
            }
        }
        let mut m = lanes
            .into_iter()
            .fold(0.0f64, |m, a| if a > m { a } else { m });
        for v in quads.remainder() {
            m = if v.abs() > m { v.abs() } else { m };
        }
        if m >= best {
            best = m;
            best_block = Some(k);
        }
    }
    let start = best_block? * BLOCK;
    let block = &values[start..(start + BLOCK).min(values.len())];
    block
        .iter()
        .rposition(|v| v.abs() == best)
        .map(|i| start + i)
}

/// Sign of the current in `current` relative to `reference`, from the mean over the segment.
pub(crate) fn polarity(current: &[f64], reference: f64) -> Option<Polarity> {
    if current.is_empty() {
        return None;
    }
    let stride = (current.len() / 1_000_000).max(1);
    let sum: f64 = current.iter().step_by(stride).map(|c| c - reference).sum();
    if sum > 0.0 {
        Some(Polarity::Anodic)
    } else if sum < 0.0 {
        Some(Polarity::Cathodic)
    } else {
        None
    }
}

pub(crate) fn median_of(values: &[f64]) -> f64 {
    // The median of a long segment is taken over a sparse sample: it only labels the level.
    let stride = (values.len() / 100_000).max(1);
    let mut v: Vec<f64> = values.iter().step_by(stride).copied().collect();
    median(&mut v)
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn last_peak_is_what_max_by_gives() {
        let reference = |v: &[f64]| (0..v.len()).max_by(|&a, &b| v[a].abs().total_cmp(&v[b].abs()));
        let mut state = 0x9E37_79B9_7F4A_7C15u64;
        let mut next = move || {
            state ^= state << 13;
            state ^= state >> 7;
            state ^= state << 17;
            state
        };
        for len in [0, 1, 3, 4, 5, 1023, 1024, 1025, 4099, 20_000] {
            for _ in 0..20 {
                // Few distinct values, so that ties (and -0.0 against 0.0) are common.
                let v: Vec<f64> = (0..len)
                    .map(|_| match next() % 7 {
                        0 => -0.0,
                        1 => 0.0,
                        k => (k as f64 - 4.0) * [1.0, 1e-9][(next() % 2) as usize],
                    })
                    .collect();
                assert_eq!(last_peak(&v), reference(&v), "{len}");
            }
        }
    }

    #[test]
    fn finds_single_and_double_steps() {
        let mut e = vec![0.0; 20];
        e.extend(vec![0.5; 30]);
        assert_eq!(potential_steps(&e), vec![20]);
        e.extend(vec![0.0; 30]);
        assert_eq!(potential_steps(&e), vec![20, 50]);
    }

    #[test]
    fn slow_rise_is_one_step_and_spikes_are_none() {
        let mut e = vec![0.0; 10];
        e.extend([0.2, 0.4]);
        e.extend(vec![0.5; 10]);
        assert_eq!(potential_steps(&e), vec![10]);
        let mut spiky = vec![0.1; 10];
        spiky[5] = 0.9;
        spiky.extend(vec![0.1; 10]);
        assert!(potential_steps(&spiky).is_empty());
    }

    #[test]
    fn current_jump_after_quiet_baseline() {
        let mut i: Vec<f64> = (0..10).map(|k| 1e-9 * (k % 3) as f64).collect();
        i.extend((1..50).map(|k| 1e-5 / (k as f64).sqrt()));
        assert_eq!(current_step(&i), Some(10));
        let decay: Vec<f64> = (1..50).map(|k| 1e-5 / (k as f64).sqrt()).collect();
        assert_eq!(current_step(&decay), None);
    }
}
