//! The chart of the focused monitor (or indicator, or info series), by one rule for every
//! monitor: the whole history, with a y-range taken from the part after the start-up transient
//! (earlier values are clipped to the edge and the clip is marked), plus a strip zoomed on the
//! judged window. The mean, the tolerance band and the confidence interval of the mean are
//! drawn only where they apply: a band only for a series that has a band criterion, mean and
//! interval only for monitors. A series that is never negative gets no negative axis.

use crate::judge::{Criteria, MonitorSummary, Reference};
use crate::record::Role;
use crate::run::downsample::min_max;
use crate::run::store::Series;
use crate::view::evidence;

use super::{Ctx, XMap, value_range};
use crate::tui::LiveRun;
use crate::tui::view::SeriesRef;

/// Horizontal marks of a monitor plot, in chart y units.
#[derive(Debug, Clone, Copy, PartialEq, Default)]
pub struct Marks {
    /// Mean over the judged window (monitors only).
    pub mean: Option<f64>,
    /// Edges of the tolerance band of the `band` criterion (only where one applies).
    pub band: Option<(f64, f64)>,
    /// Edges of the 95 % confidence interval of the mean (from the judge).
    pub ci: Option<(f64, f64)>,
}

impl Marks {
    fn extend(&self, lo: &mut f64, hi: &mut f64) {
        let edges = [self.mean.map(|m| (m, m)), self.band, self.ci];
        for (a, b) in edges.into_iter().flatten() {
            if a.is_finite() && b.is_finite() {
                *lo = lo.min(a.min(b));
                *hi = hi.max(a.max(b));
            }
        }
    }
}

/// The strip zoomed on the judged window.
#[derive(Debug, Clone, PartialEq)]
pub struct Zoom {
    pub points: Vec<(f64, f64)>,
    pub x: [f64; 2],
    pub y: [f64; 2],
    /// First and last iteration of the window (for the label).
    pub iterations: (i64, i64),
    /// The window is the judge's (else the last criteria window, before any judgement).
    pub judged: bool,
}

/// The chart of the focused monitor (or indicator, or info series).
#[derive(Debug, Clone, PartialEq)]
pub struct MonitorChart {
    pub name: String,
    pub role: Role,
    pub style: usize,
    /// The whole shown history.
    pub points: Vec<(f64, f64)>,
    pub non_finite: Vec<(f64, f64)>,
    pub x: [f64; 2],
    pub y: [f64; 2],
    /// y is log10 of the value.
    pub log: bool,
    /// Start-up values outside `y` were drawn at its edge, up to this x and iteration.
    pub clipped_until: Option<(f64, i64)>,
    pub marks: Marks,
    /// Full width of the tolerance band, percent of the reference (the mean, or the
    /// reference of a near-zero monitor), when a band applies; absolute when `band_abs`.
    pub band_pct: Option<f64>,
    /// The band criterion is absolute (`band_abs`, in the monitor's unit).
    pub band_abs: bool,
    /// The reference relative limits are measured against when it is not the mean (a
    /// near-zero monitor, a `scale` from `settle.toml`), absolute.
    pub reference: Option<f64>,
    /// Iterations in the judged window (the judge's count).
    pub window_iterations: Option<usize>,
    /// Half-width of the confidence interval of the mean, absolute.
    pub ci_half: Option<f64>,
    pub last: f64,
    pub drift_pct: Option<f64>,
    pub note: Option<String>,
    pub zoom: Option<Zoom>,
    /// What the judge says of this monitor beyond its numbers, worded by
    /// [`crate::view::evidence`]: not judged (round-off only), the window used, the
    /// reference of a near-zero monitor. Shown in the panel's title.
    pub evidence: Vec<String>,
}

pub(super) fn monitor_chart(
    ctx: &Ctx<'_>,
    r: &SeriesRef,
    s: &Series,
    style: usize,
) -> MonitorChart {
    let live = ctx.live;
    let xm = &ctx.xmaps[r.source];
    let (a, b) = value_range(s, xm, ctx.limit(r.source), ctx.x_from);
    let vals = &s.values()[a..b];
    let finite = || vals.iter().copied().filter(|v| v.is_finite());
    let positive = finite().all(|v| v > 0.0);
    let never_negative = finite().all(|v| v >= 0.0);
    let log = ctx.spec.monitor_log && positive;
    let note = (ctx.spec.monitor_log && !positive)
        .then(|| "log scale needs positive values; linear shown".to_string());
    let ty = |v: f64| if log { v.log10() } else { v };
    let summary = live.judgement.monitors.iter().find(|m| m.series == r.name);
    let window = live.criteria.window.unwrap_or(Criteria::DEFAULT_WINDOW);

    // Judged window: the judge's, or the last criteria window.
    let end = b.min(s.len());
    let win_start = match summary {
        Some(m) => {
            let mut k = end;
            while k > 0 && xm.iteration(s.record_of(k - 1)) >= m.window_first {
                k -= 1;
            }
            k
        }
        None => end.saturating_sub(window),
    };
    let is_monitor = r.role == Role::Monitor;
    let mean = if is_monitor { window_mean(summary, &s.values()[win_start..end]) } else { None };
    let band_pct = if is_monitor { band_threshold(live, &r.name) } else { None };
    let band_abs = live
        .judgement
        .criteria
        .iter()
        .any(|c| c.series == r.name && c.name == "band" && c.unit.is_empty());
    // Relative limits are relative to the judge's reference: the mean, or for a monitor
    // whose mean is near zero the reference it was measured against.
    let reference = summary
        .filter(|m| m.reference != Reference::Mean && m.reference_value.is_finite())
        .map(|m| m.reference_value.abs())
        .or(mean.map(f64::abs));
    let band_half = band_pct
        .and_then(|p| if band_abs { Some(p / 2.0) } else { reference.map(|r| r * p / 200.0) });
    let ci_half = summary.map(|m| m.ci_half).filter(|c| c.is_finite() && *c > 0.0);
    let marks = scaled_marks(mean, band_half, ci_half, log);
    let evidence = summary.map(monitor_evidence).unwrap_or_default();

    // The whole history; its y-range from the part after the start-up transient.
    let settle_from = summary.and_then(|m| m.transient_end);
    let mut points = Vec::new();
    let mut non_finite = Vec::new();
    let (mut y_lo, mut y_hi) = (f64::INFINITY, f64::NEG_INFINITY);
    let (mut all_lo, mut all_hi) = (f64::INFINITY, f64::NEG_INFINITY);
    for bk in min_max(s.values(), a..b, ctx.spec.buckets.max(2)) {
        let bx = xm.x(s.record_of(bk.start));
        let settled = settle_from.is_none_or(|t| xm.iteration(s.record_of(bk.start)) >= t);
        if bk.non_finite {
            non_finite.push((bx, f64::NAN));
        }
        for v in [bk.min, bk.max] {
            if v.is_finite() && (!log || v > 0.0) {
                let yv = ty(v);
                all_lo = all_lo.min(yv);
                all_hi = all_hi.max(yv);
                if settled {
                    y_lo = y_lo.min(yv);
                    y_hi = y_hi.max(yv);
                }
                if points.last() != Some(&(bx, yv)) {
                    points.push((bx, yv));
                }
            }
        }
    }
    if !y_lo.is_finite() {
        (y_lo, y_hi) = (all_lo, all_hi);
    }
    marks.extend(&mut y_lo, &mut y_hi);
    let y = padded(y_lo, y_hi, never_negative && !log);
    let clipped = all_lo < y[0] || all_hi > y[1];
    let clipped_until = match (clipped, settle_from) {
        (true, Some(t)) => {
            (a..end).find(|&i| xm.iteration(s.record_of(i)) >= t).map(|i| (xm.x(s.record_of(i)), t))
        }
        _ => None,
    };
    for p in &mut points {
        p.1 = p.1.clamp(y[0], y[1]);
    }
    for p in &mut non_finite {
        p.1 = y[1];
    }
    let zoom = is_monitor
        .then(|| zoom(ctx, s, xm, (win_start, end), &marks, never_negative && !log, ty))
        .flatten()
        .map(|mut z| {
            z.judged = summary.is_some();
            z
        });
    MonitorChart {
        name: r.name.clone(),
        role: r.role,
        style,
        points,
        non_finite,
        x: ctx.x,
        y,
        log,
        clipped_until,
        marks,
        band_pct,
        band_abs,
        reference: summary
            .filter(|m| m.reference != Reference::Mean && m.reference_value.is_finite())
            .map(|m| m.reference_value.abs()),
        window_iterations: summary.map(|m| m.window).filter(|&w| w > 0),
        ci_half,
        last: if b > 0 { s.values()[b - 1] } else { f64::NAN },
        drift_pct: summary.map(|m| m.drift_pct),
        note,
        zoom,
        evidence,
    }
}

/// The judge's evidence on one monitor, in the shared wording: round-off only (not judged),
/// else the window its criteria were computed over and a reference other than the mean.
fn monitor_evidence(m: &MonitorSummary) -> Vec<String> {
    if m.round_off {
        return vec![evidence::ROUND_OFF_WORDS.to_string()];
    }
    let mut out = Vec::new();
    if m.window > 0 {
        out.push(evidence::window_words(m.window));
    }
    out.extend(evidence::reference_words(m));
    out
}

/// The window strip: values `range` of `s`, scaled to themselves and the marks.
fn zoom(
    ctx: &Ctx<'_>,
    s: &Series,
    xm: &XMap<'_>,
    (start, end): (usize, usize),
    marks: &Marks,
    never_negative: bool,
    ty: impl Fn(f64) -> f64,
) -> Option<Zoom> {
    if end <= start + 1 {
        return None;
    }
    let mut points = Vec::new();
    let (mut lo, mut hi) = (f64::INFINITY, f64::NEG_INFINITY);
    for bk in min_max(s.values(), start..end, (ctx.spec.buckets / 2).max(2)) {
        let bx = xm.x(s.record_of(bk.start));
        for v in [bk.min, bk.max] {
            let yv = ty(v);
            if yv.is_finite() {
                lo = lo.min(yv);
                hi = hi.max(yv);
                if points.last() != Some(&(bx, yv)) {
                    points.push((bx, yv));
                }
            }
        }
    }
    if !lo.is_finite() {
        return None;
    }
    // Scaled to the values, the mean and its interval: the tolerance band is drawn when it
    // falls inside, but does not flatten the settling the strip is there to show.
    Marks { band: None, ..*marks }.extend(&mut lo, &mut hi);
    let (x0, x1) = (xm.x(s.record_of(start)), xm.x(s.record_of(end - 1)));
    Some(Zoom {
        points,
        x: if x1 > x0 { [x0, x1] } else { [x0 - 1.0, x1 + 1.0] },
        y: padded(lo, hi, never_negative),
        iterations: (xm.iteration(s.record_of(start)), xm.iteration(s.record_of(end - 1))),
        judged: false,
    })
}

/// The mean over the judged window: the judge's, or computed from `tail` before the first
/// judgement.
fn window_mean(summary: Option<&MonitorSummary>, tail: &[f64]) -> Option<f64> {
    summary.map(|m| m.mean).filter(|m| m.is_finite()).or_else(|| {
        let finite: Vec<f64> = tail.iter().copied().filter(|v| v.is_finite()).collect();
        (!finite.is_empty()).then(|| finite.iter().sum::<f64>() / finite.len() as f64)
    })
}

/// Mean, band (`band_half`: half its width, absolute) and interval in chart units (log10
/// when `log`; marks at or below zero are left out on a log chart).
fn scaled_marks(mean: Option<f64>, band_half: Option<f64>, ci: Option<f64>, log: bool) -> Marks {
    let ty = |v: f64| if log { (v > 0.0).then(|| v.log10()) } else { Some(v) };
    let pair = |m: f64, h: f64| Some((ty(m - h)?, ty(m + h)?));
    let Some(m) = mean else { return Marks::default() };
    Marks { mean: ty(m), band: band_half.and_then(|h| pair(m, h)), ci: ci.and_then(|c| pair(m, c)) }
}

/// Bounds around `[lo, hi]` with 5 % room, never below zero for a series that never is (a
/// confidence interval reaching below zero is clipped rather than given a negative axis).
fn padded(lo: f64, hi: f64, never_negative: bool) -> [f64; 2] {
    let [a, b] = if !lo.is_finite() {
        [0.0, 1.0]
    } else if hi > lo {
        let pad = (hi - lo) * 0.05;
        [lo - pad, hi + pad]
    } else {
        let pad = if lo == 0.0 { 1.0 } else { lo.abs() * 0.01 };
        [lo - pad, hi + pad]
    };
    if never_negative { [a.max(0.0), b] } else { [a, b] }
}

/// The band criterion of a monitor: from the judge's result, else the per-series override,
/// the run's criteria or the default (0.5 %, common practice). `None` when the series is
/// explicitly left out of the judgement.
fn band_threshold(live: &LiveRun, name: &str) -> Option<f64> {
    if let Some(c) = live.judgement.criteria.iter().find(|c| c.series == name && c.name == "band") {
        return Some(c.threshold);
    }
    if !live.judgement.criteria.is_empty() {
        // Judged, and no band criterion for this series: none applies.
        return None;
    }
    let per_series =
        live.criteria.series.iter().find(|(k, _)| crate::glob::matches(k, name)).map(|(_, v)| v);
    if per_series.is_some_and(|v| v.ignore || v.role.is_some_and(|r| r != Role::Monitor)) {
        return None;
    }
    Some(
        per_series
            .and_then(|v| v.band)
            .or(live.criteria.band)
            .unwrap_or(Criteria::DEFAULT_BAND_PCT),
    )
}

#[cfg(test)]
mod tests {
    use super::*;
    use crate::judge::{Comparison, CriterionResult};
    use crate::tui::view::Window;
    use crate::tui::view::chart::tests::{detail, run};

    /// A pressure monitor falling from 745 to about -5 over 300 iterations, then settling
    /// (invented numbers), judged with its transient ending at 300.
    fn settling_pressure() -> LiveRun {
        let n = 1000;
        let v: Vec<f64> = (1..=n)
            .map(|i| {
                let x = i as f64;
                -5.0 + 750.0 * (-x / 25.0).exp() + 0.01 * (x / 9.0).sin()
            })
            .collect();
        let mut live = run(&(1..=n as i64).collect::<Vec<_>>(), Some((Role::Monitor, &v)));
        live.judgement.monitors.push(MonitorSummary {
            series: "m".into(),
            mean: -5.0,
            ci_half: 0.002,
            window_first: 501,
            window_last: 1000,
            transient_end: Some(300),
            ..Default::default()
        });
        live.judgement.criteria.push(CriterionResult {
            name: "band".into(),
            series: "m".into(),
            comparison: Comparison::AtMost,
            threshold: 0.5,
            unit: "%".into(),
            ..Default::default()
        });
        live
    }

    #[test]
    fn a_monitor_shows_its_history_scaled_to_the_settled_part_and_a_window_strip() {
        let live = settling_pressure();
        let m = detail(&live, Window::All).monitor.expect("monitor chart");
        // The whole history is drawn...
        assert_eq!(m.x, [1.0, 1000.0]);
        assert_eq!(m.points.first().map(|p| p.0), Some(1.0));
        // ...with a y-range from the part after the transient (about -5 ± 0.0125 for the
        // band), so the start-up at 745 is clipped to the top edge and marked.
        assert!(m.y[1] < -4.9 && m.y[0] > -5.1, "{:?}", m.y);
        assert_eq!(m.clipped_until.map(|c| c.1), Some(300));
        assert!(m.points.iter().all(|p| p.1 >= m.y[0] && p.1 <= m.y[1]));
        // Mean, band (0.5 % wide: ±0.0125) and CI (±0.002) are there.
        assert_eq!(m.marks.mean, Some(-5.0));
        let (lo, hi) = m.marks.band.expect("band");
        assert!((lo + 5.0125).abs() < 1e-12 && (hi + 4.9875).abs() < 1e-12);
        assert_eq!(m.marks.ci, Some((-5.002, -4.998)));
        // The strip covers the judged window only.
        let z = m.zoom.expect("window strip");
        assert_eq!((z.x, z.iterations, z.judged), ([501.0, 1000.0], (501, 1000), true));
        assert!(z.points.iter().all(|p| p.0 >= 501.0));
    }

    #[test]
    fn indicators_get_no_band_and_positive_series_no_negative_axis() {
        // A continuity error growing from 1e-3 to 2e-3: never negative, an indicator.
        let v: Vec<f64> = (0..200).map(|i| 1e-3 * (1.0 + i as f64 / 200.0)).collect();
        let live = run(&(1..=200).collect::<Vec<_>>(), Some((Role::Indicator, &v)));
        let m = detail(&live, Window::All).monitor.expect("chart");
        assert_eq!(m.marks, Marks::default());
        assert_eq!(m.band_pct, None);
        assert!(m.zoom.is_none());
        assert!(m.y[0] >= 0.0, "{:?}", m.y);
        // The same values as a monitor before any judgement: the default band applies.
        let live = run(&(1..=200).collect::<Vec<_>>(), Some((Role::Monitor, &v)));
        let m = detail(&live, Window::All).monitor.expect("chart");
        assert_eq!(m.band_pct, Some(Criteria::DEFAULT_BAND_PCT));
        assert!(m.marks.band.is_some() && m.y[0] >= 0.0);
        // A sweep count that touches zero keeps zero as its floor.
        let v: Vec<f64> = (0..200).map(|i| (i % 3) as f64).collect();
        let live = run(&(1..=200).collect::<Vec<_>>(), Some((Role::Indicator, &v)));
        assert_eq!(detail(&live, Window::All).monitor.expect("chart").y[0], 0.0);
    }
}
