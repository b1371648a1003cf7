//! Min/max buckets of a series for charts, computed without copying the series.
//!
//! A chart N columns wide asks for N buckets over an index range; each bucket keeps the
//! minimum and maximum of its finite values (so spikes survive) and whether it held a
//! non-finite value (so a NaN is drawn, not hidden).

/// One bucket of a downsampled series.
#[derive(Debug, Clone, Copy, PartialEq)]
pub struct Bucket {
    /// Index range `[start, end)` of the values in the bucket.
    pub start: usize,
    pub end: usize,
    /// Minimum and maximum of the finite values (NaN when the bucket has none).
    pub min: f64,
    pub max: f64,
    /// Last value of the bucket (finite or not).
    pub last: f64,
    pub non_finite: bool,
}

/// Split `values[range]` into at most `buckets` contiguous buckets of near-equal size.
///
/// With fewer values than buckets, each value is its own bucket.
pub fn min_max(values: &[f64], range: std::ops::Range<usize>, buckets: usize) -> Vec<Bucket> {
    let start = range.start.min(values.len());
    let end = range.end.min(values.len()).max(start);
    let n = end - start;
    if n == 0 || buckets == 0 {
        return Vec::new();
    }
    let k = buckets.min(n);
    let mut out = Vec::with_capacity(k);
    for b in 0..k {
        let s = start + b * n / k;
        let e = start + (b + 1) * n / k;
        let mut min = f64::INFINITY;
        let mut max = f64::NEG_INFINITY;
        let mut non_finite = false;
        for &v in &values[s..e] {
            if v.is_finite() {
                min = min.min(v);
                max = max.max(v);
            } else {
                non_finite = true;
            }
        }
        if min > max {
            min = f64::NAN;
            max = f64::NAN;
        }
        out.push(Bucket { start: s, end: e, min, max, last: values[e - 1], non_finite });
    }
    out
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn buckets_cover_the_range_and_keep_extremes() {
        let v: Vec<f64> = (0..10).map(|i| i as f64).collect();
        let b = min_max(&v, 0..10, 3);
        assert_eq!(b.len(), 3);
        assert_eq!((b[0].start, b[0].end, b[0].min, b[0].max), (0, 3, 0.0, 2.0));
        assert_eq!((b[2].start, b[2].end, b[2].min, b[2].max), (6, 10, 6.0, 9.0));
    }

    #[test]
    fn non_finite_values_are_flagged_not_hidden() {
        let v = [1.0, f64::NAN, 3.0, f64::INFINITY];
        let b = min_max(&v, 0..4, 2);
        assert!(b[0].non_finite && b[1].non_finite);
        assert_eq!((b[0].min, b[0].max), (1.0, 1.0));
        let only_nan = min_max(&[f64::NAN], 0..1, 5);
        assert!(only_nan[0].min.is_nan());
    }

    #[test]
    fn short_series_and_bad_ranges() {
        assert_eq!(min_max(&[1.0, 2.0], 0..2, 10).len(), 2);
        assert!(min_max(&[1.0], 5..9, 4).is_empty());
        assert!(min_max(&[], 0..0, 4).is_empty());
    }
}
