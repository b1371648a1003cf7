//! The overview's picture of a run: its leading residual and a sparkline of it.

use crate::record::Role;

use super::{SeriesRef, progress_ratio};
use crate::tui::LiveRun;
use crate::tui::sanitize::sanitized;
use crate::view::number;

/// Cells in an overview sparkline.
pub const SPARK_CELLS: usize = 12;
/// Values looked at per sparkline cell (strided), so 200 runs of millions of records stay
/// cheap; spikes between samples can be missed, the full charts use every value.
const SPARK_SAMPLES_PER_CELL: usize = 256;

/// The residual that matters most: the one named by the least-met residual criterion, else
/// the one with the highest last value. Returns its label and sparkline.
pub fn leading_residual(
    live: &LiveRun,
    series: &[SeriesRef],
    ascii: bool,
) -> (String, Vec<Option<u8>>) {
    let residuals: Vec<&SeriesRef> = series.iter().filter(|s| s.role == Role::Residual).collect();
    let by_criterion = live
        .judgement
        .criteria
        .iter()
        .filter(|c| !c.met && residuals.iter().any(|r| r.name == c.series))
        .min_by(|a, b| {
            progress_ratio(a).partial_cmp(&progress_ratio(b)).unwrap_or(std::cmp::Ordering::Equal)
        })
        .and_then(|c| residuals.iter().find(|r| r.name == c.series).copied());
    let get = |r: &SeriesRef| &live.store.sources[r.source].series()[r.index];
    let chosen = by_criterion.or_else(|| {
        residuals.iter().copied().max_by(|a, b| {
            let la = get(a).last().filter(|v| v.is_finite()).unwrap_or(f64::NEG_INFINITY);
            let lb = get(b).last().filter(|v| v.is_finite()).unwrap_or(f64::NEG_INFINITY);
            la.partial_cmp(&lb).unwrap_or(std::cmp::Ordering::Equal)
        })
    });
    match chosen {
        None => ("-".into(), Vec::new()),
        Some(r) => {
            let s = get(r);
            let label =
                format!("{} {}", r.name, s.last().map(|v| number::sig(v, 2)).unwrap_or_default());
            (sanitized(&label, ascii), sparkline(s.values(), SPARK_CELLS))
        }
    }
}

/// Sparkline levels (0..=7) of log10 of the largest sampled value per cell.
pub fn sparkline(values: &[f64], cells: usize) -> Vec<Option<u8>> {
    let n = values.len();
    if n == 0 || cells == 0 {
        return Vec::new();
    }
    let k = cells.min(n);
    let mut raw: Vec<Option<f64>> = Vec::with_capacity(k);
    let mut non_finite = vec![false; k];
    for (b, nf) in non_finite.iter_mut().enumerate() {
        let s = b * n / k;
        let e = ((b + 1) * n / k).max(s + 1);
        let step = ((e - s) / SPARK_SAMPLES_PER_CELL).max(1);
        let mut best: Option<f64> = None;
        let mut i = s;
        while i < e {
            let v = values[i];
            if !v.is_finite() {
                *nf = true;
            } else if v > 0.0 {
                let l = v.log10();
                best = Some(best.map_or(l, |x: f64| x.max(l)));
            }
            i += step;
        }
        // Always include the cell's last value so the newest point is exact.
        let last = values[e - 1];
        if last.is_finite() && last > 0.0 {
            let l = last.log10();
            best = Some(best.map_or(l, |x: f64| x.max(l)));
        }
        raw.push(best);
    }
    let lo = raw.iter().flatten().copied().fold(f64::INFINITY, f64::min);
    let hi = raw.iter().flatten().copied().fold(f64::NEG_INFINITY, f64::max);
    raw.iter()
        .zip(non_finite)
        .map(|(v, nf)| {
            if nf {
                return Some(7);
            }
            v.map(|v| if hi > lo { (((v - lo) / (hi - lo)) * 7.0).round() as u8 } else { 3 })
        })
        .collect()
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn sparkline_levels_follow_log_values() {
        let v: Vec<f64> = (0..8).map(|i| 10f64.powi(-i)).collect();
        assert_eq!(
            sparkline(&v, 8),
            vec![Some(7), Some(6), Some(5), Some(4), Some(3), Some(2), Some(1), Some(0)]
        );
        assert_eq!(sparkline(&[1.0, f64::NAN, 1e-3], 3), vec![Some(7), Some(7), Some(0)]);
        assert_eq!(sparkline(&[0.0, -1.0], 2), vec![None, None]);
        assert!(sparkline(&[], 5).is_empty());
    }
}
