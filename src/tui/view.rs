//! Snapshots the renderer reads: header facts, criteria rows, findings, sparklines, chart
//! points.
//!
//! Built by the app layer when data or view settings change, never while drawing, so that
//! [`crate::tui::render()`] stays a pure function of state. Every string that came from a log
//! (run, source and series names, event messages, notes) is sanitised here.

use std::time::SystemTime;

use crate::judge::{Comparison, Criteria, CriterionResult, Finding, Judgement, Verdict};
use crate::record::{Role, Severity};
use crate::run::downsample::min_max;
use crate::run::store::{Series, SourceStore};

use super::LiveRun;
use super::format;
use super::sanitize::sanitized;
use super::theme::Glyphs;

/// How many findings and events the list keeps.
pub const MAX_ITEMS: usize = 300;
/// How many of each source's newest events are considered for the list.
const EVENTS_PER_SOURCE: usize = 200;
/// Cells in an overview sparkline.
pub const SPARK_CELLS: usize = 12;
/// Values looked at per sparkline cell (strided), so 200 runs of millions of records stay
/// cheap; spikes between samples can be missed, the full charts use every value.
const SPARK_SAMPLES_PER_CELL: usize = 256;

/// What the header says about reaching the target.
#[derive(Debug, Clone, Copy, PartialEq)]
pub enum Eta {
    /// Every criterion holds.
    Met,
    /// Estimated iterations still needed (slowest residual).
    Iterations(f64),
    /// A residual above its target is not falling.
    NotInReach,
    /// Not enough information yet.
    Unknown,
}

/// One row of the criteria checklist.
#[derive(Debug, Clone, PartialEq)]
pub struct CriterionRow {
    pub met: bool,
    pub series: String,
    /// `drop ≥ 3 dec`
    pub rule: String,
    /// `2.1 dec`
    pub value: String,
    pub default: bool,
}

/// Importance of a list entry.
#[derive(Debug, Clone, Copy, PartialEq, Eq, PartialOrd, Ord)]
pub enum Level {
    /// A finding that caused the verdict.
    Cause,
    Error,
    Warning,
    Info,
}

/// One entry of the findings and events list.
#[derive(Debug, Clone, PartialEq)]
pub struct Item {
    pub iteration: Option<i64>,
    pub tag: String,
    pub text: String,
    pub level: Level,
}

/// A first bulk read under way.
#[derive(Debug, Clone, PartialEq)]
pub struct Progress {
    pub label: String,
    pub read: u64,
    pub total: u64,
}

/// A series that can be charted.
#[derive(Debug, Clone, PartialEq)]
pub struct SeriesRef {
    pub source: usize,
    pub index: usize,
    /// Display name, unique within the run (`label:name` for a repeated name, as the judge
    /// names it).
    pub name: String,
    pub role: Role,
}

/// Everything the screens show about one run, except the charts of the open run.
#[derive(Debug, Clone, PartialEq)]
pub struct RunView {
    pub name: String,
    /// The judge's verdict.
    pub judged: Verdict,
    /// The verdict shown (stale applied).
    pub verdict: Verdict,
    pub since: Option<i64>,
    pub iteration: Option<i64>,
    pub records: usize,
    /// Restarts seen (segments beyond the first, largest over sources).
    pub restarts: usize,
    pub ended: bool,
    pub rate_per_min: Option<f64>,
    pub last_growth: Option<SystemTime>,
    pub eta: Eta,
    pub why: String,
    pub criteria: Vec<CriterionRow>,
    pub items: Vec<Item>,
    pub progress: Vec<Progress>,
    /// Sparkline levels 0..=7 of the leading residual; `None` where a cell has no data.
    pub spark: Vec<Option<u8>>,
    /// Leading residual and its last value (`p 3.2e-5`).
    pub leading: String,
    /// The criterion furthest from being met (`p drop 2.1/3 dec`), or `all 5 met`.
    pub worst: String,
    pub all_met: bool,
    /// Residuals first, then monitors, indicators and info series.
    pub series: Vec<SeriesRef>,
}

/// Inputs of [`build_run_view`] beyond the run itself.
pub struct ViewInputs<'a> {
    pub glyphs: &'a Glyphs,
    pub rate_per_min: Option<f64>,
    pub stale_limit: std::time::Duration,
}

/// Build the snapshot of `live` (with its `stale` flag and judgement as they are now).
pub fn build_run_view(live: &LiveRun, inp: &ViewInputs<'_>) -> RunView {
    let g = inp.glyphs;
    let ascii = g.ascii;
    let j = &live.judgement;
    let verdict = live.verdict();
    let series = chartable_series(live, ascii);
    let last_growth = live.activity.iter().filter_map(|a| a.last_growth).max();
    let progress = live
        .activity
        .iter()
        .zip(&live.store.sources)
        .filter_map(|(a, s)| {
            a.progress.map(|(read, total)| Progress {
                label: sanitized(&s.label, ascii),
                read,
                total,
            })
        })
        .collect();
    let restarts =
        live.store.sources.iter().map(|s| s.segments.len().saturating_sub(1)).max().unwrap_or(0);
    let (leading, spark) = leading_residual(live, &series, ascii);
    let (worst, all_met) = worst_criterion(&j.criteria, ascii);
    RunView {
        name: sanitized(&live.store.name, ascii),
        judged: j.verdict,
        verdict,
        since: j.since,
        iteration: live.store.last_iteration(),
        records: live.store.sources.iter().map(SourceStore::records).sum(),
        restarts,
        ended: live.store.ended(),
        rate_per_min: inp.rate_per_min,
        last_growth,
        eta: eta(j, verdict),
        why: why(live, inp),
        criteria: j.criteria.iter().map(|c| criterion_row(c, g)).collect(),
        items: items(live, inp),
        progress,
        spark,
        leading,
        worst,
        all_met,
        series,
    }
}

fn chartable_series(live: &LiveRun, ascii: bool) -> Vec<SeriesRef> {
    let names = live.store.series_names();
    let mut out = Vec::new();
    for (si, src) in live.store.sources.iter().enumerate() {
        for (i, s) in src.series().iter().enumerate() {
            let name = &names[si][i].name;
            out.push(SeriesRef {
                source: si,
                index: i,
                name: sanitized(name, ascii),
                role: s.role,
            });
        }
    }
    let rank = |r: Role| match r {
        Role::Residual => 0,
        Role::Monitor => 1,
        Role::Indicator => 2,
        Role::Info => 3,
    };
    out.sort_by_key(|s| rank(s.role));
    out
}

fn eta(j: &Judgement, verdict: Verdict) -> Eta {
    if verdict == Verdict::Converged {
        return Eta::Met;
    }
    if j.residuals.is_empty() {
        return Eta::Unknown;
    }
    let unmet_residual = |name: &str| {
        j.criteria
            .iter()
            .any(|c| c.series == name && !c.met && (c.unit == "dec" || c.name == "below"))
    };
    let mut worst: Option<f64> = None;
    for r in &j.residuals {
        match r.eta_iterations {
            Some(e) if e.is_finite() => worst = Some(worst.map_or(e, |w: f64| w.max(e))),
            _ if unmet_residual(&r.series) && r.slope_dec_per_kit >= 0.0 => return Eta::NotInReach,
            _ => {}
        }
    }
    match (worst, verdict) {
        (_, Verdict::Stalled | Verdict::Diverging) => Eta::NotInReach,
        (Some(e), _) => Eta::Iterations(e),
        (None, _) => Eta::Unknown,
    }
}

fn why(live: &LiveRun, inp: &ViewInputs<'_>) -> String {
    let ascii = inp.glyphs.ascii;
    let j = &live.judgement;
    let mut parts: Vec<String> = Vec::new();
    if live.stale && j.verdict != Verdict::Diverging {
        parts.push(format!(
            "log has not grown for over {} and shows no end-of-run mark",
            format::age(inp.stale_limit)
        ));
    }
    for &i in &j.causes {
        if let Some(f) = j.findings.get(i) {
            parts.push(finding_text(f, ascii));
        }
    }
    if parts.is_empty() {
        let records: usize = live.store.sources.iter().map(SourceStore::records).sum();
        if records == 0 {
            parts.push(if live.activity.iter().any(|a| a.progress.is_some()) {
                "reading the existing log".into()
            } else {
                "waiting for data".into()
            });
        } else if j.verdict == Verdict::Converged {
            let since = j.since.map(|s| format!(" since it {}", format::iteration(s)));
            parts.push(format!(
                "all {} criteria met{}",
                j.criteria.len(),
                since.unwrap_or_default()
            ));
        } else if let Some(r) = j
            .residuals
            .iter()
            .max_by(|a, b| a.last.partial_cmp(&b.last).unwrap_or(std::cmp::Ordering::Equal))
        {
            parts.push(format!(
                "{} at {}, {} dec/kit, {} dec below its peak",
                sanitized(&r.series, ascii),
                format::sci(r.last),
                format::short(r.slope_dec_per_kit),
                format::short(r.drop_dec)
            ));
        }
    }
    parts.join("; ")
}

/// The one-line text of a finding (sanitised).
pub fn finding_text(f: &Finding, ascii: bool) -> String {
    let detail = if f.detail.is_empty() {
        format!("{} = {}", f.statistic, format::short(f.value))
    } else {
        f.detail.clone()
    };
    let text = match &f.series {
        Some(s) if !detail.contains(s.as_str()) => format!("{s}: {detail}"),
        _ => detail,
    };
    sanitized(&text, ascii)
}

fn criterion_row(c: &CriterionResult, g: &Glyphs) -> CriterionRow {
    let cmp = match c.comparison {
        Comparison::AtLeast => g.ge,
        Comparison::AtMost => g.le,
    };
    let unit = if c.unit.is_empty() { String::new() } else { format!(" {}", c.unit) };
    CriterionRow {
        met: c.met,
        series: sanitized(&c.series, g.ascii),
        rule: sanitized(&format!("{} {cmp} {}{unit}", c.name, format::short(c.threshold)), g.ascii),
        value: sanitized(&format!("{}{unit}", format::short(c.value)), g.ascii),
        default: c.default,
    }
}

/// How far a criterion is from being met: 1 or more when met, towards 0 when far off.
fn progress_ratio(c: &CriterionResult) -> f64 {
    if !c.value.is_finite() {
        return 0.0;
    }
    let r = match c.comparison {
        Comparison::AtLeast => c.value / c.threshold,
        Comparison::AtMost => c.threshold / c.value,
    };
    if r.is_finite() {
        r.max(0.0)
    } else if c.met {
        1.0
    } else {
        0.0
    }
}

fn worst_criterion(criteria: &[CriterionResult], ascii: bool) -> (String, bool) {
    if criteria.is_empty() {
        return ("-".into(), false);
    }
    let worst = criteria.iter().filter(|c| !c.met).min_by(|a, b| {
        progress_ratio(a).partial_cmp(&progress_ratio(b)).unwrap_or(std::cmp::Ordering::Equal)
    });
    match worst {
        None => (format!("all {} met", criteria.len()), true),
        Some(c) => {
            let unit = if c.unit.is_empty() { String::new() } else { format!(" {}", c.unit) };
            let text = format!(
                "{} {} {}/{}{unit}",
                c.series,
                c.name,
                format::short(c.value),
                format::short(c.threshold)
            );
            (sanitized(&text, ascii), false)
        }
    }
}

fn items(live: &LiveRun, inp: &ViewInputs<'_>) -> Vec<Item> {
    let ascii = inp.glyphs.ascii;
    let j = &live.judgement;
    let mut pinned = Vec::new();
    if live.stale {
        pinned.push(Item {
            iteration: live.store.last_iteration(),
            tag: "stale".into(),
            text: format!(
                "no growth for over {}, no end-of-run mark",
                format::age(inp.stale_limit)
            ),
            level: Level::Cause,
        });
    }
    for &i in &j.causes {
        if let Some(f) = j.findings.get(i) {
            pinned.push(finding_item(f, Level::Cause, ascii));
        }
    }
    for src in &live.store.sources {
        if let Some(n) = src.notes.last() {
            pinned.push(Item {
                iteration: None,
                tag: "note".into(),
                text: sanitized(&format!("{}: {n}", src.label), ascii),
                level: Level::Warning,
            });
        }
        if let Some((it, msg)) = &src.ended {
            pinned.push(Item {
                iteration: Some(*it),
                tag: "end".into(),
                text: sanitized(msg, ascii),
                level: Level::Info,
            });
        }
    }
    let mut rest: Vec<Item> = Vec::new();
    for (i, f) in j.findings.iter().enumerate() {
        if !j.causes.contains(&i) {
            let level = if f.supports.is_some() { Level::Warning } else { Level::Info };
            rest.push(finding_item(f, level, ascii));
        }
    }
    for f in &live.extra_findings {
        rest.push(finding_item(f, Level::Info, ascii));
    }
    for src in &live.store.sources {
        // One entry per event rule (its newest message, how often, since when), so a
        // clipping notice printed every iteration does not push everything else away.
        let start = src.events.len().saturating_sub(EVENTS_PER_SOURCE * 50);
        let mut groups: Vec<(&str, usize, Option<i64>, &crate::record::Event)> = Vec::new();
        for ev in &src.events[start..] {
            match groups.iter_mut().find(|g| g.0 == ev.rule) {
                Some(g) => {
                    g.1 += 1;
                    g.3 = ev;
                }
                None => groups.push((&ev.rule, 1, ev.iteration, ev)),
            }
        }
        for (rule, count, first, ev) in groups {
            let text = if count > 1 {
                let since = first.map(|f| format!(", first at it {f}")).unwrap_or_default();
                let times = if ascii { "x" } else { "×" };
                format!("{} ({times}{count}{since})", ev.message)
            } else {
                ev.message.clone()
            };
            rest.push(Item {
                iteration: ev.iteration,
                tag: sanitized(rule, ascii),
                text: sanitized(&text, ascii),
                level: match ev.severity {
                    Severity::Error => Level::Error,
                    Severity::Warning => Level::Warning,
                    Severity::Info => Level::Info,
                },
            });
        }
    }
    // Newest first; stable, so entries of one iteration keep their order of arrival reversed
    // only by iteration.
    rest.sort_by_key(|i| std::cmp::Reverse(i.iteration));
    pinned.extend(rest);
    pinned.truncate(MAX_ITEMS);
    pinned
}

fn finding_item(f: &Finding, level: Level, ascii: bool) -> Item {
    Item {
        iteration: Some(f.last),
        tag: f.kind.as_str().to_string(),
        text: finding_text(f, ascii),
        level,
    }
}

/// The residual that matters most: the one named by the least-met residual criterion, else
/// the one with the highest last value. Returns its label and sparkline.
fn leading_residual(
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
            let label = format!("{} {}", r.name, s.last().map(format::sci).unwrap_or_default());
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

// ---------------------------------------------------------------------------------------
// Charts of the open run.

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

/// The chart of the focused monitor.
#[derive(Debug, Clone, PartialEq)]
pub struct MonitorChart {
    pub name: String,
    pub style: usize,
    pub points: Vec<(f64, f64)>,
    pub non_finite: Vec<(f64, f64)>,
    pub x: [f64; 2],
    pub y: [f64; 2],
    /// y is log10 of the value.
    pub log: bool,
    /// Mean over the final window (the judge's, or computed here when the judge has none).
    pub mean: Option<f64>,
    /// Lower and upper edge of the tolerance band (in chart y units).
    pub band: Option<(f64, f64)>,
    /// Tolerance band width, percent of the mean (the `band` criterion).
    pub band_pct: f64,
    pub last: f64,
    pub drift_pct: Option<f64>,
    pub note: Option<String>,
}

/// Charts of the open run.
#[derive(Debug, Clone, PartialEq, Default)]
pub struct DetailData {
    pub residual: Option<ResidualChart>,
    pub monitor: Option<MonitorChart>,
    /// Names of the monitors (and indicators, info series) that `←`/`→` can bring up.
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
struct XMap<'a> {
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

    fn x(&self, record: usize) -> f64 {
        let Some(&it) = self.iterations.get(record) else {
            return 0.0;
        };
        let k = self.seg_first.partition_point(|&f| f <= record);
        let off = if k == 0 { 0 } else { self.offsets[k - 1] };
        (it + off) as f64
    }
}

/// The value range `[start, end)` of `s` to chart: limited to `limit` records (pause) and to
/// x ≥ `x_from`.
fn value_range(s: &Series, xm: &XMap<'_>, limit: Option<usize>, x_from: f64) -> (usize, usize) {
    let end = match limit {
        Some(l) => s.first_value_at_or_after(l),
        None => s.len(),
    };
    let (mut lo, mut hi) = (0usize, end);
    while lo < hi {
        let mid = (lo + hi) / 2;
        if xm.x(s.record_of(mid)) < x_from { lo = mid + 1 } else { hi = mid }
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
        let monitor_names = view.series.iter().filter(|s| s.role != Role::Residual);
        return DetailData {
            monitor_names: monitor_names.map(|s| s.name.clone()).collect(),
            ..Default::default()
        };
    }
    let x_from = match spec.window {
        Window::All => f64::NEG_INFINITY,
        Window::Last(n) => x_max - n as f64,
    };
    let x_lo = x_from.max(x_min);
    let x = if x_max > x_lo { [x_lo, x_max] } else { [x_lo - 1.0, x_max + 1.0] };

    let buckets = spec.buckets.max(2);
    let mut lines = Vec::new();
    let mut non_finite = Vec::new();
    let (mut y_lo, mut y_hi) = (f64::INFINITY, f64::NEG_INFINITY);
    for (k, r) in view.series.iter().enumerate() {
        if r.role != Role::Residual {
            continue;
        }
        let s = series_of(r);
        let xm = &xmaps[r.source];
        let (a, b) = value_range(s, xm, limit_of(r.source), x_from);
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
            focused: spec.focus == Some(k),
            last,
        });
    }
    let residual = (!lines.is_empty()).then(|| {
        let (lo, hi) = if y_lo.is_finite() {
            let (lo, hi) = (y_lo.floor(), y_hi.ceil());
            if hi > lo { (lo, hi) } else { (lo - 1.0, hi + 1.0) }
        } else {
            (-6.0, 0.0)
        };
        for p in &mut non_finite {
            p.1 = hi;
        }
        ResidualChart { lines, non_finite, x, y: [lo, hi], restarts: view.restarts }
    });

    // Monitor chart: the focused non-residual series, else the first monitor.
    let others: Vec<usize> =
        (0..view.series.len()).filter(|&k| view.series[k].role != Role::Residual).collect();
    let shown = spec
        .focus
        .and_then(|f| others.iter().position(|&k| k == f))
        .or(if others.is_empty() { None } else { Some(0) });
    let monitor = shown.map(|pos| {
        let r = &view.series[others[pos]];
        monitor_chart(
            live,
            r,
            series_of(r),
            &xmaps[r.source],
            limit_of(r.source),
            x_from,
            x,
            spec,
            pos,
        )
    });
    DetailData {
        residual,
        monitor,
        monitor_names: others.iter().map(|&k| view.series[k].name.clone()).collect(),
        monitor_shown: shown,
    }
}

#[allow(clippy::too_many_arguments)]
fn monitor_chart(
    live: &LiveRun,
    r: &SeriesRef,
    s: &Series,
    xm: &XMap<'_>,
    limit: Option<usize>,
    x_from: f64,
    x: [f64; 2],
    spec: &ChartSpec,
    style: usize,
) -> MonitorChart {
    let (a, b) = value_range(s, xm, limit, x_from);
    let vals = &s.values()[a..b];
    let positive = vals.iter().filter(|v| v.is_finite()).all(|&v| v > 0.0);
    let log = spec.monitor_log && positive;
    let note = (spec.monitor_log && !positive)
        .then(|| "log scale needs positive values; linear shown".to_string());
    let ty = |v: f64| if log { v.log10() } else { v };
    let summary = live.judgement.monitors.iter().find(|m| m.series == r.name);
    let mean = summary.map(|m| m.mean).filter(|m| m.is_finite()).or_else(|| {
        let window = live.criteria.window.unwrap_or(Criteria::DEFAULT_WINDOW);
        let tail = &s.values()[s.len().min(b).saturating_sub(window)..b.min(s.len())];
        let finite: Vec<f64> = tail.iter().copied().filter(|v| v.is_finite()).collect();
        (!finite.is_empty()).then(|| finite.iter().sum::<f64>() / finite.len() as f64)
    });
    let band_pct = band_threshold(live, &r.name);
    let band = mean.and_then(|m| {
        let h = m.abs() * band_pct / 200.0;
        let (lo, hi) = (m - h, m + h);
        if log && lo <= 0.0 { None } else { Some((ty(lo), ty(hi))) }
    });
    let mut points = Vec::new();
    let mut non_finite = Vec::new();
    let (mut y_lo, mut y_hi) = (f64::INFINITY, f64::NEG_INFINITY);
    for bk in min_max(s.values(), a..b, spec.buckets.max(2)) {
        let bx = xm.x(s.record_of(bk.start));
        if bk.non_finite {
            non_finite.push((bx, f64::NAN));
        }
        for v in [bk.min, bk.max] {
            if v.is_finite() && (!log || v > 0.0) {
                let yv = ty(v);
                y_lo = y_lo.min(yv);
                y_hi = y_hi.max(yv);
                if points.last() != Some(&(bx, yv)) {
                    points.push((bx, yv));
                }
            }
        }
    }
    if let Some((lo, hi)) = band {
        y_lo = y_lo.min(lo);
        y_hi = y_hi.max(hi);
    }
    let y = if !y_lo.is_finite() {
        [0.0, 1.0]
    } else if y_hi > y_lo {
        let pad = (y_hi - y_lo) * 0.05;
        [y_lo - pad, y_hi + pad]
    } else {
        let pad = if y_lo == 0.0 { 1.0 } else { y_lo.abs() * 0.01 };
        [y_lo - pad, y_hi + pad]
    };
    for p in &mut non_finite {
        p.1 = y[1];
    }
    MonitorChart {
        name: r.name.clone(),
        style,
        points,
        non_finite,
        x,
        y,
        log,
        mean: mean.map(ty),
        band,
        band_pct,
        last: if b > 0 { s.values()[b - 1] } else { f64::NAN },
        drift_pct: summary.map(|m| m.drift_pct),
        note,
    }
}

/// The band criterion of a monitor: from the judge's result, the per-series override, the
/// run's criteria or the default (0.5 %, common practice).
fn band_threshold(live: &LiveRun, name: &str) -> f64 {
    if let Some(c) = live.judgement.criteria.iter().find(|c| c.series == name && c.name == "band") {
        return c.threshold;
    }
    let per_series = live
        .criteria
        .series
        .iter()
        .find(|(k, _)| crate::glob::matches(k, name))
        .and_then(|(_, v)| v.band);
    per_series.or(live.criteria.band).unwrap_or(Criteria::DEFAULT_BAND_PCT)
}

#[cfg(test)]
mod tests {
    use super::*;
    use crate::record::{Output, Record, SeriesInfo};
    use crate::run::RunStore;

    fn run_with(iters: &[i64]) -> LiveRun {
        let mut src = SourceStore::new("tarn.log", "tarn");
        src.apply([Output::Series(SeriesInfo { id: 0, name: "p".into(), role: Role::Residual })]);
        for &it in iters {
            src.apply([Output::Record(Record {
                iteration: Some(it),
                values: vec![(0, 10f64.powf(-(it as f64) / 4.0))],
                ..Default::default()
            })]);
        }
        let mut store = RunStore::new("r");
        store.sources.push(src);
        LiveRun::new(store, Criteria::default())
    }

    fn detail(live: &LiveRun, window: Window) -> DetailData {
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
        let live = run_with(&iters);
        let d = detail(&live, Window::All);
        let ch = d.residual.expect("residual chart");
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
        let live = run_with(&(1..=100).collect::<Vec<_>>());
        let ch = detail(&live, Window::Last(20)).residual.expect("chart");
        assert_eq!(ch.x, [80.0, 100.0]);
        assert_eq!(ch.lines[0].points.first().map(|p| p.0), Some(80.0));
    }

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

    #[test]
    fn the_worst_criterion_is_the_least_met() {
        let c = |series: &str, cmp, threshold, value, met| CriterionResult {
            name: "x".into(),
            series: series.into(),
            comparison: cmp,
            threshold,
            value,
            met,
            ..Default::default()
        };
        let list = vec![
            c("a", Comparison::AtLeast, 3.0, 2.7, false),
            c("b", Comparison::AtMost, 0.1, 0.5, false),
            c("c", Comparison::AtLeast, 3.0, 4.0, true),
        ];
        assert_eq!(worst_criterion(&list, false), ("b x 0.5/0.1".to_string(), false));
        assert_eq!(worst_criterion(&list[2..], false), ("all 1 met".to_string(), true));
        let nan = vec![c("n", Comparison::AtMost, 0.1, f64::NAN, false), list[0].clone()];
        assert!(worst_criterion(&nan, false).0.starts_with("n x nan"));
    }
}
