//! A series as the analyses see it: the latest segment, trailing windows by iteration, the
//! store's running aggregates when given ([`super::history`]), and the whole-run scans used
//! without them (non-finite values).
//!
//! Windows are found by binary search on the iteration numbers of the latest segment and are
//! capped at [`MAX_WINDOW_POINTS`] values, so every windowed test costs O(window), not
//! O(run). Several values with the same iteration number (inner iterations kept with the
//! repeat policy `all`) are collapsed to the last one, which is the converged inner value.

use std::ops::Range;

use super::history::History;
use super::types::SeriesInput;

/// Most values a windowed test looks at (the newest ones).
pub const MAX_WINDOW_POINTS: usize = 16_384;

/// Values of one window, finite only, one per iteration.
#[derive(Debug, Clone, Default, PartialEq)]
pub struct Window {
    pub its: Vec<i64>,
    pub vals: Vec<f64>,
}

impl Window {
    pub fn len(&self) -> usize {
        self.vals.len()
    }

    pub fn is_empty(&self) -> bool {
        self.vals.is_empty()
    }

    /// Iterations spanned, last − first (0 when empty).
    pub fn span(&self) -> i64 {
        match (self.its.first(), self.its.last()) {
            (Some(a), Some(b)) => b.saturating_sub(*a),
            _ => 0,
        }
    }

    pub fn its_f64(&self) -> Vec<f64> {
        let last = self.its.last().copied().unwrap_or(0);
        self.its.iter().map(|i| i.saturating_sub(last) as f64).collect()
    }

    /// Mean iteration spacing between samples (1 for a one-value-per-iteration history).
    pub fn spacing(&self) -> f64 {
        if self.len() < 2 { 1.0 } else { self.span() as f64 / (self.len() - 1) as f64 }
    }

    /// Drop the oldest values until at most `keep` remain.
    pub fn keep_newest(&mut self, keep: usize) {
        if self.len() > keep {
            let cut = self.len() - keep;
            self.its.drain(..cut);
            self.vals.drain(..cut);
        }
    }

    /// The part from iteration `from` on.
    pub fn from_iteration(&self, from: i64) -> Window {
        let k = self.its.partition_point(|&i| i < from);
        Window { its: self.its[k..].to_vec(), vals: self.vals[k..].to_vec() }
    }
}

/// Values [`View::spacing_at`] reads a log's cadence from (ours: as many as a stall window
/// asks for).
pub const SPACING_VALUES: usize = 30;

/// A borrowed view of one series with its latest segment located.
#[derive(Debug, Clone, Copy)]
pub struct View<'s> {
    pub its: &'s [i64],
    pub vals: &'s [f64],
    /// Index of the first value of the latest segment.
    pub seg: usize,
    /// Number of segments.
    pub segments: usize,
    /// The store's aggregates of exactly these values, when given (`None` otherwise).
    pub history: Option<&'s History>,
}

impl<'s> View<'s> {
    /// `None` when the series is empty.
    pub fn new(s: &'s SeriesInput<'_>) -> Option<View<'s>> {
        let n = s.values.len().min(s.iterations.len());
        if n == 0 {
            return None;
        }
        let seg = s.segment_starts.iter().copied().filter(|&i| i < n).max().unwrap_or(0);
        let segments = s.segment_starts.iter().filter(|&&i| i < n).count().max(1);
        let history = s.history.filter(|h| h.len() == n && s.values.len() == n);
        Some(View { its: &s.iterations[..n], vals: &s.values[..n], seg, segments, history })
    }

    pub fn len(&self) -> usize {
        self.vals.len()
    }

    /// Always false for a constructed view (kept for the `len` convention).
    pub fn is_empty(&self) -> bool {
        self.vals.is_empty()
    }

    pub fn last_it(&self) -> i64 {
        self.its[self.len() - 1]
    }

    pub fn seg_first_it(&self) -> i64 {
        self.its[self.seg]
    }

    /// Mean iterations between the latest segment's last [`SPACING_VALUES`] values up to `t`
    /// (1 for a log printed every iteration, 10 for one printed every tenth; 1 with fewer
    /// than two values). The latest values, because a solver may change how often it prints
    /// (every iteration at the start, every tenth later).
    pub fn spacing_at(&self, t: i64) -> f64 {
        let end = self.end_at(t);
        let from = end.saturating_sub(SPACING_VALUES).max(self.seg);
        if end < from + 2 {
            return 1.0;
        }
        self.its[end - 1].saturating_sub(self.its[from]) as f64 / (end - 1 - from) as f64
    }

    /// Iterations that `values` values span at the log's latest cadence up to `t`
    /// ([`Self::spacing_at`]): how long a window must be to hold that many of them.
    pub fn span_of(&self, values: usize, t: i64) -> usize {
        (values as f64 * self.spacing_at(t)).ceil() as usize
    }

    /// Index one past the last value with iteration ≤ `t` in the latest segment.
    pub fn end_at(&self, t: i64) -> usize {
        self.seg + self.its[self.seg..].partition_point(|&i| i <= t)
    }

    /// Index range of the latest segment's values with iteration in `(t − w, t]`.
    pub fn range(&self, t: i64, w: usize) -> Range<usize> {
        let end = self.end_at(t);
        let from = t.saturating_sub(w as i64);
        let start = self.seg + self.its[self.seg..end].partition_point(|&i| i <= from);
        start..end
    }

    /// The window `(t − w, t]` of the latest segment, values mapped by `f` (non-finite
    /// results dropped), one value per iteration, at most [`MAX_WINDOW_POINTS`].
    pub fn window_map(&self, t: i64, w: usize, f: impl Fn(f64) -> f64) -> Window {
        let r = self.range(t, w);
        // Look only at a bounded tail: collapsing duplicates can only shrink it.
        let start = r.start.max(r.end.saturating_sub(MAX_WINDOW_POINTS * 4));
        let mut out = Window::default();
        for i in start..r.end {
            let v = f(self.vals[i]);
            let it = self.its[i];
            if out.its.last() == Some(&it) {
                // Same iteration again (inner iterations): keep the last value.
                out.its.pop();
                out.vals.pop();
            }
            if v.is_finite() {
                out.its.push(it);
                out.vals.push(v);
            }
        }
        out.keep_newest(MAX_WINDOW_POINTS);
        out
    }

    /// The window of raw values ending at the last iteration.
    pub fn window(&self, w: usize) -> Window {
        self.window_map(self.last_it(), w, |v| v)
    }

    /// First index of a non-finite value at or after `from`.
    pub fn first_non_finite(&self, from: usize) -> Option<usize> {
        self.vals[from..].iter().position(|v| !v.is_finite()).map(|i| i + from)
    }
}

/// Length of the start-up in iterations at the beginning of every segment.
///
/// Residuals often rise in the first tens to hundreds of iterations while the flow develops,
/// and monitors ramp up from zero: a rise of a decade or two there is not
/// divergence. 200 is our reading of "tens to hundreds". The allowance excuses only that:
/// growth by many orders of magnitude against the segment's first values, an indicator
/// pinned at its maximum, sustained exponential growth and a growing oscillation are
/// divergence inside it too (see `health`).
pub const STARTUP_ITERATIONS: i64 = 200;

/// Values at the start of a segment that stand for its "early range": what the quantity was
/// before anything developed (ours: a few iterations, before a blow-up can have started).
pub const EARLY_VALUES: usize = 10;

/// Largest finite |value| among the first [`EARLY_VALUES`] values of the latest segment
/// (`None` when there is none).
pub fn early_max_abs(v: &View<'_>) -> Option<f64> {
    let end = (v.seg + EARLY_VALUES).min(v.len());
    let m = v.vals[v.seg..end]
        .iter()
        .filter(|x| x.is_finite())
        .map(|x| x.abs())
        .fold(f64::NAN, f64::max);
    m.is_finite().then_some(m)
}

/// First iteration after the start-up of a segment that began at `seg_first`.
pub fn startup_end(seg_first: i64) -> i64 {
    seg_first.saturating_add(STARTUP_ITERATIONS)
}

/// End of the start-up of a segment that began at `seg_first` and has reached `last_it`:
/// [`STARTUP_ITERATIONS`], or the segment's first fifth while it is shorter than five times
/// that. A run of a few hundred iterations develops its flow in proportion (a short run's
/// transients are short), and a fixed 200 iterations would leave a 300-iteration run a
/// third of its length to be judged on; the stall test of a finished short run takes the
/// same fifth.
pub fn startup_end_within(seg_first: i64, last_it: i64) -> i64 {
    let seg_len = last_it.saturating_sub(seg_first).saturating_add(1).max(0);
    startup_end(seg_first).min(seg_first.saturating_add(seg_len / 5))
}

/// Medians of consecutive blocks of 5 values `f(x)` of `v` (a cheap outlier-proof summary for
/// running minima); values whose `f(x)` is not finite and positive are skipped. Returns
/// `(offset + index of the block's last value, median)`.
pub fn block_medians(v: &[f64], offset: usize, f: impl Fn(f64) -> f64) -> Vec<(usize, f64)> {
    let mut out = Vec::with_capacity(v.len() / 5 + 1);
    let mut buf = [0.0f64; 5];
    let mut k = 0;
    for (i, x) in v.iter().enumerate() {
        let x = f(*x);
        if !(x.is_finite() && x > 0.0) {
            continue;
        }
        buf[k] = x;
        k += 1;
        if k == 5 {
            let mut b = buf;
            b.sort_by(f64::total_cmp);
            out.push((offset + i, b[2]));
            k = 0;
        }
    }
    out
}

#[cfg(test)]
pub(in crate::judge) mod tests {
    use super::*;
    use std::borrow::Cow;

    /// A series named `s` for tests, with its segment starts (indices).
    pub(in crate::judge) fn input(
        its: Vec<i64>,
        vals: Vec<f64>,
        segs: Vec<usize>,
    ) -> SeriesInput<'static> {
        SeriesInput {
            name: Cow::Borrowed("s"),
            iterations: Cow::Owned(its),
            values: Cow::Owned(vals),
            segment_starts: segs,
            ..Default::default()
        }
    }

    #[test]
    fn the_spacing_is_the_latest_cadence_of_the_latest_segment() {
        // Printed every iteration to it 100, then every tenth to it 600; a restart at it 300
        // printed every fifth to it 450.
        let mut its: Vec<i64> = (1..=100).collect();
        its.extend((11..=60).map(|k| 10 * k));
        let restart = its.len();
        its.extend((60..=90).map(|k| 5 * k));
        let vals = vec![1.0; its.len()];
        let first = input(its[..restart].to_vec(), vals[..restart].to_vec(), vec![0]);
        let v = View::new(&first).expect("non-empty");
        assert_eq!(v.spacing_at(600), 10.0);
        assert_eq!(v.spacing_at(100), 1.0);
        // Over the last 30 values up to it 300: 20 printed every tenth, ten every iteration.
        assert!((v.spacing_at(300) - 209.0 / 29.0).abs() < 1e-12);
        let both = input(its, vals, vec![0, restart]);
        let v = View::new(&both).expect("non-empty");
        assert_eq!(v.spacing_at(450), 5.0);
        // A segment of one value has no cadence yet.
        let one = input(vec![7], vec![1.0], vec![0]);
        assert_eq!(View::new(&one).expect("non-empty").spacing_at(7), 1.0);
    }

    #[test]
    fn windows_use_the_latest_segment_and_collapse_repeats() {
        // Segment 1: it 1..=10; segment 2 restarts at it 5 and runs to 12, with it 12 twice.
        let mut its: Vec<i64> = (1..=10).collect();
        its.extend([5, 6, 7, 8, 9, 10, 11, 12, 12]);
        let vals: Vec<f64> = (0..its.len()).map(|i| i as f64).collect();
        let s = input(its, vals, vec![0, 10]);
        let v = View::new(&s).expect("non-empty");
        assert_eq!((v.seg, v.segments, v.last_it()), (10, 2, 12));
        let w = v.window(4);
        assert_eq!(w.its, vec![9, 10, 11, 12]);
        assert_eq!(w.vals, vec![14.0, 15.0, 16.0, 18.0]);
        let all = v.window(1000);
        assert_eq!(all.its.first(), Some(&5));
    }

    #[test]
    fn a_short_segment_has_a_fifth_of_it_for_its_start_up() {
        // (first iteration, last iteration) → end of the start-up.
        for ((first, last), end) in [
            ((1, 300), 61),
            ((1, 999), 200),
            ((1, 1000), 201),
            ((1, 4000), 201),
            ((1001, 1300), 1061),
        ] {
            assert_eq!(startup_end_within(first, last), end, "{first}..{last}");
        }
    }

    #[test]
    fn medians_skip_non_finite() {
        let v = [5.0, 1.0, f64::NAN, 4.0, 2.0, 3.0, 9.0, -1.0];
        assert_eq!(block_medians(&v, 0, |x| x), vec![(5, 3.0)]);
        assert_eq!(block_medians(&v, 10, f64::abs), vec![(15, 3.0)]);
        assert_eq!(startup_end(1000), 1200);
    }
}
