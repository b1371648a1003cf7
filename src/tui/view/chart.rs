//! Chart data of the open run: the residual chart here, the chart of the focused monitor in
//! [`monitor`], as points in chart units, computed when data or view settings change (never
//! while drawing). Both share one x axis: iterations, restarts drawn end to end.

pub mod monitor;

pub use monitor::{Marks, MonitorChart, Zoom};

use crate::record::Role;
use crate::run::downsample::min_max;
use crate::run::store::{Series, SourceStore};

use super::{RunView, SeriesRef};
use crate::tui::LiveRun;

/// Which trailing range the charts show.
#[derive(Debug, Clone, Copy, PartialEq, Eq, Default)]
pub enum Window {
    #[default]
    All,
    /// The last N iterations.
    Last(usize),
}

/// One line of the residual chart.
#[derive(Debug, Clone, PartialEq)]
pub struct ChartLine {
    pub name: String,
    /// (x, log10 value) points, min and max of each bucket.
    pub points: Vec<(f64, f64)>,
    /// Index into the series palette and marker list.
    pub style: usize,
    pub focused: bool,
    pub last: f64,
}

/// The residual chart of the open run.
#[derive(Debug, Clone, PartialEq)]
pub struct ResidualChart {
    pub lines: Vec<ChartLine>,
    /// Points where a bucket held NaN/inf, drawn at the top.
    pub non_finite: Vec<(f64, f64)>,
    pub x: [f64; 2],
    /// log10 bounds, whole decades.
    pub y: [f64; 2],
    pub restarts: usize,
}

/// Charts of the open run.
#[derive(Debug, Clone, PartialEq, Default)]
pub struct DetailData {
    pub residual: Option<ResidualChart>,
    pub monitor: Option<MonitorChart>,
    /// Names of the series other than residuals, in focus order.
    pub monitor_names: Vec<String>,
    /// Index in `monitor_names` of the charted one.
    pub monitor_shown: Option<usize>,
}

/// Settings of the chart build.
#[derive(Debug, Clone, Copy, PartialEq)]
pub struct ChartSpec {
    pub window: Window,
    /// Index into [`RunView::series`] of the focused series.
    pub focus: Option<usize>,
    pub monitor_log: bool,
    /// Buckets across the chart (columns × marker resolution).
    pub buckets: usize,
}

/// Maps a source's records to chart x: the iteration, with later segments shifted so that
/// restarts are drawn end to end.
pub(super) struct XMap<'a> {
    iterations: &'a [i64],
    seg_first: Vec<usize>,
    offsets: Vec<i64>,
}

impl<'a> XMap<'a> {
    fn new(src: &'a SourceStore) -> Self {
        let iterations = src.iterations();
        let mut seg_first = Vec::new();
        let mut offsets = Vec::new();
        for seg in &src.segments {
            let f = seg.first_record.min(iterations.len());
            if f >= iterations.len() {
                continue;
            }
            let off = match (seg_first.last(), offsets.last()) {
                (Some(_), Some(&prev_off)) if f > 0 => {
                    let prev_x = iterations[f - 1] + prev_off;
                    prev_x + 1 - iterations[f]
                }
                _ => 0,
            };
            if seg_first.last() == Some(&f) {
                continue;
            }
            seg_first.push(f);
            offsets.push(off);
        }
        XMap { iterations, seg_first, offsets }
    }

    pub(super) fn x(&self, record: usize) -> f64 {
        let Some(&it) = self.iterations.get(record) else {
            return 0.0;
        };
        let k = self.seg_first.partition_point(|&f| f <= record);
        let off = if k == 0 { 0 } else { self.offsets[k - 1] };
        (it + off) as f64
    }

    pub(super) fn iteration(&self, record: usize) -> i64 {
        self.iterations.get(record).copied().unwrap_or(0)
    }
}

/// The value range `[start, end)` of `s` to chart: limited to `limit` records (pause) and to
/// x ≥ `x_from`.
pub(super) fn value_range(
    s: &Series,
    xm: &XMap<'_>,
    limit: Option<usize>,
    x_from: f64,
) -> (usize, usize) {
    let end = match limit {
        Some(l) => s.first_value_at_or_after(l),
        None => s.len(),
    };
    first_at_or_after(end, x_from, |k| xm.x(s.record_of(k)))
}

/// First index below `end` whose x is at least `x_from` (x grows with the index).
fn first_at_or_after(end: usize, x_from: f64, x: impl Fn(usize) -> f64) -> (usize, usize) {
    let (mut lo, mut hi) = (0usize, end);
    while lo < hi {
        let mid = (lo + hi) / 2;
        if x(mid) < x_from { lo = mid + 1 } else { hi = mid }
    }
    (lo, end)
}

/// Build the charts of `live` as shown by `view` (pass `limits` per source while paused).
pub fn build_detail(
    live: &LiveRun,
    view: &RunView,
    spec: &ChartSpec,
    limits: Option<&[usize]>,
) -> DetailData {
    let xmaps: Vec<XMap<'_>> = live.store.sources.iter().map(XMap::new).collect();
    let limit_of = |src: usize| limits.and_then(|l| l.get(src).copied());
    let series_of = |r: &SeriesRef| &live.store.sources[r.source].series()[r.index];
    let others: Vec<usize> =
        (0..view.series.len()).filter(|&k| view.series[k].role != Role::Residual).collect();
    let monitor_names = others.iter().map(|&k| view.series[k].name.clone()).collect();
    // Overall x range across every charted series, so all charts share it.
    let mut x_max = f64::NEG_INFINITY;
    let mut x_min = f64::INFINITY;
    for r in &view.series {
        let s = series_of(r);
        let (a, b) = value_range(s, &xmaps[r.source], limit_of(r.source), f64::NEG_INFINITY);
        if b > a {
            x_min = x_min.min(xmaps[r.source].x(s.record_of(a)));
            x_max = x_max.max(xmaps[r.source].x(s.record_of(b - 1)));
        }
    }
    if !x_max.is_finite() {
        return DetailData { monitor_names, ..Default::default() };
    }
    let x_from = match spec.window {
        Window::All => f64::NEG_INFINITY,
        Window::Last(n) => x_max - n as f64,
    };
    let x_lo = x_from.max(x_min);
    let x = if x_max > x_lo { [x_lo, x_max] } else { [x_lo - 1.0, x_max + 1.0] };
    let ctx = Ctx { live, xmaps: &xmaps, limits, spec, x_from, x };
    let residual = residual_chart(&ctx, view);

    // Monitor chart: the focused non-residual series, else the first one.
    let shown = spec
        .focus
        .and_then(|f| others.iter().position(|&k| k == f))
        .or(if others.is_empty() { None } else { Some(0) });
    let monitor = shown.map(|pos| {
        let r = &view.series[others[pos]];
        monitor::monitor_chart(&ctx, r, series_of(r), pos)
    });
    DetailData { residual, monitor, monitor_names, monitor_shown: shown }
}

/// What every chart of one build shares.
pub(super) struct Ctx<'a> {
    pub(super) live: &'a LiveRun,
    pub(super) xmaps: &'a [XMap<'a>],
    pub(super) limits: Option<&'a [usize]>,
    pub(super) spec: &'a ChartSpec,
    pub(super) x_from: f64,
    pub(super) x: [f64; 2],
}

impl Ctx<'_> {
    pub(super) fn limit(&self, source: usize) -> Option<usize> {
        self.limits.and_then(|l| l.get(source).copied())
    }
}

fn residual_chart(ctx: &Ctx<'_>, view: &RunView) -> Option<ResidualChart> {
    let buckets = ctx.spec.buckets.max(2);
    let mut lines = Vec::new();
    let mut non_finite = Vec::new();
    let (mut y_lo, mut y_hi) = (f64::INFINITY, f64::NEG_INFINITY);
    for (k, r) in view.series.iter().enumerate() {
        if r.role != Role::Residual {
            continue;
        }
        let s = &ctx.live.store.sources[r.source].series()[r.index];
        let xm = &ctx.xmaps[r.source];
        let (a, b) = value_range(s, xm, ctx.limit(r.source), ctx.x_from);
        let mut points = Vec::new();
        for bk in min_max(s.values(), a..b, buckets) {
            let bx = xm.x(s.record_of(bk.start));
            if bk.non_finite {
                non_finite.push((bx, f64::NAN));
            }
            for v in [bk.min, bk.max] {
                if v.is_finite() && v > 0.0 {
                    let l = v.log10();
                    y_lo = y_lo.min(l);
                    y_hi = y_hi.max(l);
                    if points.last() != Some(&(bx, l)) {
                        points.push((bx, l));
                    }
                }
            }
        }
        let last = if b > 0 { s.values()[b - 1] } else { f64::NAN };
        lines.push(ChartLine {
            name: r.name.clone(),
            points,
            style: lines.len(),
            focused: ctx.spec.focus == Some(k),
            last,
        });
    }
    if lines.is_empty() {
        return None;
    }
    let (lo, hi) = if y_lo.is_finite() {
        let (lo, hi) = (y_lo.floor(), y_hi.ceil());
        if hi > lo { (lo, hi) } else { (lo - 1.0, hi + 1.0) }
    } else {
        (-6.0, 0.0)
    };
    for p in &mut non_finite {
        p.1 = hi;
    }
    Some(ResidualChart { lines, non_finite, x: ctx.x, y: [lo, hi], restarts: view.restarts })
}

#[cfg(test)]
pub(super) mod tests {
    use super::*;
    use crate::judge::Criteria;
    use crate::record::{Output, Record, SeriesInfo};
    use crate::run::RunStore;
    use crate::tui::theme::Glyphs;
    use crate::tui::view::{ViewInputs, build_run_view};

    /// A run of one residual `p` and, when given, a series `m` of `role` with `values`
    /// (iterations 1, 2, ...).
    pub(super) fn run(iters: &[i64], other: Option<(Role, &[f64])>) -> LiveRun {
        let mut src = SourceStore::new("tarn.log", "tarn");
        src.apply([Output::Series(SeriesInfo { id: 0, name: "p".into(), role: Role::Residual })]);
        if let Some((role, _)) = other {
            src.apply([Output::Series(SeriesInfo { id: 1, name: "m".into(), role })]);
        }
        for (k, &it) in iters.iter().enumerate() {
            let mut values = vec![(0, 10f64.powf(-(it as f64) / 4.0))];
            if let Some((_, v)) = other {
                values.push((1, v[k]));
            }
            src.apply([Output::Record(Record {
                iteration: Some(it),
                values,
                ..Default::default()
            })]);
        }
        let mut store = RunStore::new("r");
        store.sources.push(src);
        LiveRun::new(store, Criteria::default())
    }

    pub(super) fn detail(live: &LiveRun, window: Window) -> DetailData {
        let g = Glyphs::unicode(true);
        let inp = ViewInputs { glyphs: &g, rate_per_min: None, stale_limit: Default::default() };
        let view = build_run_view(live, &inp);
        let spec = ChartSpec { window, focus: None, monitor_log: false, buckets: 100 };
        build_detail(live, &view, &spec, None)
    }

    #[test]
    fn restarts_are_drawn_end_to_end() {
        // 1..=10, then the solver restarts at 5 and runs to 8.
        let iters: Vec<i64> = (1..=10).chain(5..=8).collect();
        let live = run(&iters, None);
        let ch = detail(&live, Window::All).residual.expect("residual chart");
        assert_eq!(ch.x, [1.0, 14.0]);
        assert_eq!(ch.restarts, 1);
        let xs: Vec<f64> = ch.lines[0].points.iter().map(|p| p.0).collect();
        assert_eq!(xs, (1..=14).map(|x| x as f64).collect::<Vec<_>>());
        // log10 of 10^(-it/4): the first point is -0.25, the one after the restart -1.25.
        assert!((ch.lines[0].points[0].1 + 0.25).abs() < 1e-12);
        assert!((ch.lines[0].points[10].1 + 1.25).abs() < 1e-12);
        assert_eq!(ch.y, [-3.0, 0.0]);
    }

    #[test]
    fn the_window_keeps_the_last_iterations() {
        let live = run(&(1..=100).collect::<Vec<_>>(), None);
        let ch = detail(&live, Window::Last(20)).residual.expect("chart");
        assert_eq!(ch.x, [80.0, 100.0]);
        assert_eq!(ch.lines[0].points.first().map(|p| p.0), Some(80.0));
    }
}
