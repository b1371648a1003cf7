//! The content of a report, computed once and shared by the HTML and Markdown writers: plain
//! text tables (not yet escaped) and the plots.
//!
//! Keeping the rows here means both formats show the same numbers with the same words; the
//! writers only decide markup and escaping.

use crate::judge::{Judgement, MonitorSummary, RunInput};
use crate::record::{Role, Severity};
use crate::report::ReportInput;
use crate::report::gci::{GciResult, GridSize};
use crate::report::provenance::{criteria_in_effect, format_utc};
use crate::report::svg::{self, Line, MonitorMarks, Target};
use crate::report::text::{
    bytes, criterion_words, evidence, iteration, kind_words, num, p_value, range, threshold_text,
    with_unit,
};

/// How a cell is shown: plain, a right-aligned number, a criterion state, or a hash.
#[derive(Debug, Clone, Copy, PartialEq, Eq)]
pub enum Class {
    Text,
    Num,
    Met,
    Unmet,
    Mono,
}

impl Class {
    pub fn css(self) -> Option<&'static str> {
        match self {
            Class::Text => None,
            Class::Num => Some("num"),
            Class::Met => Some("met"),
            Class::Unmet => Some("unmet"),
            Class::Mono => Some("hash"),
        }
    }
}

#[derive(Debug, Clone)]
pub struct Cell {
    pub text: String,
    pub class: Class,
}

fn t(s: impl Into<String>) -> Cell {
    Cell { text: s.into(), class: Class::Text }
}

fn n(s: impl Into<String>) -> Cell {
    Cell { text: s.into(), class: Class::Num }
}

fn mono(s: impl Into<String>) -> Cell {
    Cell { text: s.into(), class: Class::Mono }
}

/// A table of plain text; writers escape every cell.
#[derive(Debug, Clone, Default)]
pub struct Table {
    /// CSS class of the HTML table, for column widths.
    pub class: Option<&'static str>,
    pub head: Vec<&'static str>,
    pub rows: Vec<Vec<Cell>>,
}

/// A series of the run, named as the judge names it, with the source it came from.
pub struct SeriesView<'a> {
    pub source: &'a str,
    pub input: crate::judge::SeriesInput<'a>,
}

/// The run's series in judge order (unique names, `label:name` for duplicates).
pub fn series_views<'a>(input: &ReportInput<'a>) -> Vec<SeriesView<'a>> {
    let RunInput { series, .. } = input.run.judge_input();
    let labels = input
        .run
        .sources
        .iter()
        .flat_map(|src| src.series().iter().map(move |_| src.label.as_str()));
    series.into_iter().zip(labels).map(|(input, source)| SeriesView { source, input }).collect()
}

fn line<'a>(v: &'a SeriesView<'a>, style: usize) -> Line<'a> {
    Line {
        name: &v.input.name,
        iterations: &v.input.iterations,
        values: &v.input.values,
        segment_starts: &v.input.segment_starts,
        style,
    }
}

/// The residual plot with the thresholds of `below` and `drop` criteria.
pub fn residual_svg(input: &ReportInput<'_>, views: &[SeriesView<'_>], standalone: bool) -> String {
    let residuals: Vec<&SeriesView<'_>> =
        views.iter().filter(|v| v.input.role == Role::Residual).collect();
    let lines: Vec<Line<'_>> = residuals.iter().enumerate().map(|(i, v)| line(v, i)).collect();
    let style_of = |series: &str| residuals.iter().position(|v| v.input.name == series);
    let mut targets = Vec::new();
    for c in &input.judgement.criteria {
        let Some(style) = style_of(&c.series) else { continue };
        let value = match c.name.as_str() {
            "below" => c.threshold,
            "drop" => match input.judgement.residuals.iter().find(|r| r.series == c.series) {
                Some(r) => r.peak / 10f64.powf(c.threshold),
                None => continue,
            },
            _ => continue,
        };
        targets.push(Target { series: c.series.clone(), rule: threshold_text(c), value, style });
    }
    svg::residual_plot(&lines, &targets, standalone)
}

/// One monitor to plot, with its summary when the judge produced one.
pub struct MonitorView<'a> {
    pub view: &'a SeriesView<'a>,
    pub summary: Option<&'a MonitorSummary>,
}

/// Monitors in the judge's order, then any other monitor series.
pub fn monitors<'a>(judgement: &'a Judgement, views: &'a [SeriesView<'a>]) -> Vec<MonitorView<'a>> {
    let mut out: Vec<MonitorView<'a>> = Vec::new();
    for m in &judgement.monitors {
        if let Some(v) = views.iter().find(|v| v.input.name == m.series) {
            out.push(MonitorView { view: v, summary: Some(m) });
        }
    }
    for v in views.iter().filter(|v| v.input.role == Role::Monitor) {
        if !out.iter().any(|m| m.view.input.name == v.input.name) {
            out.push(MonitorView { view: v, summary: None });
        }
    }
    out
}

pub fn monitor_svg(m: &MonitorView<'_>, index: usize, standalone: bool) -> String {
    let marks = match m.summary {
        Some(s) => MonitorMarks {
            window: Some((s.window_first, s.window_last)),
            mean: Some(s.mean),
            ci_half: Some(s.ci_half),
            transient_end: s.transient_end,
            extrapolated: s.extrapolated,
        },
        None => MonitorMarks::default(),
    };
    svg::monitor_plot(&line(m.view, index), &marks, standalone)
}

/// A short caption for a monitor plot.
pub fn monitor_caption(m: &MonitorView<'_>) -> String {
    match m.summary {
        Some(s) => format!(
            "{}: final window iterations {}, mean {} ± {} (95 % CI){}.",
            m.view.input.name,
            range(s.window_first, s.window_last),
            num(s.mean),
            num(s.ci_half),
            match s.transient_end {
                Some(e) =>
                    format!("; start-up transient up to iteration {} excluded", iteration(e)),
                None => String::new(),
            }
        ),
        None => format!("{}: no window summary from the judge.", m.view.input.name),
    }
}

/// Criterion | series | threshold | final value | met | held since | threshold from.
pub fn criteria_table(j: &Judgement) -> Table {
    let mut t = Table {
        class: None,
        head: vec![
            "criterion",
            "series",
            "threshold",
            "final value",
            "met",
            "held since",
            "threshold from",
        ],
        rows: Vec::new(),
    };
    for c in &j.criteria {
        t.rows.push(vec![
            self::t(criterion_words(&c.name)),
            self::t(&c.series),
            n(threshold_text(c)),
            n(with_unit(c.value, &c.unit)),
            if c.met {
                Cell { text: "✓ met".into(), class: Class::Met }
            } else {
                Cell { text: "✗ not met".into(), class: Class::Unmet }
            },
            n(c.since.map_or("—".into(), |s| format!("it {}", iteration(s)))),
            self::t(if c.default { "default (common practice)" } else { "set by user" }),
        ]);
    }
    t
}

/// Residual | last | peak | drop | trend | iterations to target.
pub fn residual_table(j: &Judgement) -> Table {
    let mut t = Table {
        class: None,
        head: vec![
            "residual",
            "last value",
            "peak",
            "drop from peak",
            "trend, dec per 1000 it (95 % CI)",
            "est. iterations to target",
        ],
        rows: Vec::new(),
    };
    for r in &j.residuals {
        t.rows.push(vec![
            self::t(&r.series),
            n(num(r.last)),
            n(num(r.peak)),
            n(with_unit(r.drop_dec, "dec")),
            n(format!(
                "{} ({} … {})",
                num(r.slope_dec_per_kit),
                num(r.slope_ci.0),
                num(r.slope_ci.1)
            )),
            n(r.eta_iterations.map_or("—".into(), |e| iteration(e.round() as i64))),
        ]);
    }
    t
}

/// Per monitor: final value, mean ± CI, window, transient, drift, band, iterative error,
/// extrapolated value.
pub fn monitor_table(ms: &[MonitorView<'_>]) -> Table {
    let mut t = Table {
        class: None,
        head: vec![
            "monitor",
            "final value",
            "mean ± 95 % CI",
            "final window",
            "transient excluded up to",
            "drift",
            "band",
            "iterative error (est.)",
            "extrapolated value",
        ],
        rows: Vec::new(),
    };
    for m in ms {
        let last = m.view.input.values.last().copied().unwrap_or(f64::NAN);
        let row = match m.summary {
            Some(s) => {
                let rel = if s.mean != 0.0 { 100.0 * s.ci_half / s.mean.abs() } else { f64::NAN };
                vec![
                    self::t(&s.series),
                    n(num(s.last)),
                    n(format!("{} ± {} ({} %)", num(s.mean), num(s.ci_half), num(rel))),
                    n(format!("it {}", range(s.window_first, s.window_last))),
                    n(s.transient_end.map_or("—".into(), |e| format!("it {}", iteration(e)))),
                    n(with_unit(s.drift_pct, "%")),
                    n(with_unit(s.band_pct, "%")),
                    n(s.iterative_error.map_or("—".into(), num)),
                    n(s.extrapolated.map_or("—".into(), num)),
                ]
            }
            None => {
                let mut row = vec![self::t(&*m.view.input.name), n(num(last))];
                row.extend((0..7).map(|_| n("—")));
                row
            }
        };
        t.rows.push(row);
    }
    t
}

/// The unit of a finding's amplitude: decades for residuals, percent for monitors.
fn amplitude_unit(views: &[SeriesView<'_>], series: Option<&str>) -> &'static str {
    match series.and_then(|s| views.iter().find(|v| v.input.name == s)).map(|v| v.input.role) {
        Some(Role::Residual) => "dec",
        Some(Role::Monitor) => "%",
        _ => "",
    }
}

/// One line per cause: "kind, series: detail" and its evidence.
pub fn why(j: &Judgement, views: &[SeriesView<'_>]) -> Vec<(String, String, String)> {
    j.causes
        .iter()
        .filter_map(|&i| j.findings.get(i))
        .map(|f| {
            let head = match &f.series {
                Some(s) => format!("{}, {s}", kind_words(f.kind)),
                None => kind_words(f.kind).to_string(),
            };
            (head, f.detail.clone(), evidence(f, amplitude_unit(views, f.series.as_deref())))
        })
        .collect()
}

/// What to say when no finding is listed as a cause.
pub fn why_empty(j: &Judgement) -> &'static str {
    match j.verdict {
        crate::judge::Verdict::Converged => {
            "Every criterion in effect holds at the end of the data (see the criteria table)."
        }
        _ => "The judge recorded no single deciding finding for this verdict.",
    }
}

/// Every finding with its evidence.
pub fn findings_table(j: &Judgement, views: &[SeriesView<'_>]) -> Table {
    let mut t = Table {
        class: Some("findings"),
        head: vec![
            "iterations",
            "finding",
            "series",
            "statistic = value (threshold)",
            "p\u{2011}value",
            "period",
            "amplitude",
            "argues for",
            "detail",
        ],
        rows: Vec::new(),
    };
    for (i, f) in j.findings.iter().enumerate() {
        let unit = amplitude_unit(views, f.series.as_deref());
        let cause = j.causes.contains(&i);
        let kind = if cause {
            format!("{} (deciding)", kind_words(f.kind))
        } else {
            kind_words(f.kind).to_string()
        };
        t.rows.push(vec![
            n(range(f.first, f.last)),
            Cell { text: kind, class: if cause { Class::Unmet } else { Class::Text } },
            self::t(f.series.clone().unwrap_or_else(|| "—".into())),
            self::t(match f.threshold {
                Some(th) => format!("{} = {} ({})", f.statistic, num(f.value), num(th)),
                None => format!("{} = {}", f.statistic, num(f.value)),
            }),
            n(f.p_value.map_or("—".into(), p_value)),
            n(f.period.map_or("—".into(), |p| format!("{} it", num(p)))),
            n(f.amplitude.map_or("—".into(), |a| with_unit(a, unit))),
            self::t(f.supports.map_or("— (information)", |v| v.as_str())),
            self::t(&f.detail),
        ]);
    }
    t
}

/// Informational findings are counted, so a reader sees what the judge looked at.
pub fn findings_summary(j: &Judgement) -> String {
    let info = j.findings.iter().filter(|f| f.supports.is_none()).count();
    format!(
        "{} findings, {} of them informational; {} decided the verdict.",
        j.findings.len(),
        info,
        j.causes.len()
    )
}

/// Per source: what was read.
pub fn sources_table(input: &ReportInput<'_>) -> Table {
    let mut t = Table {
        class: None,
        head: vec![
            "source",
            "parser",
            "records",
            "lines read",
            "used",
            "skipped",
            "restarts",
            "warnings",
            "errors",
            "end of run",
        ],
        rows: Vec::new(),
    };
    for s in &input.run.sources {
        let count = |sev: Severity| s.events.iter().filter(|e| e.severity == sev).count();
        t.rows.push(vec![
            self::t(&s.label),
            self::t(&s.parser),
            n(count_text(s.records() as u64)),
            n(count_text(s.stats.lines)),
            n(count_text(s.stats.used)),
            n(count_text(s.stats.skipped)),
            n(s.segments.len().saturating_sub(1).to_string()),
            n(count(Severity::Warning).to_string()),
            n(count(Severity::Error).to_string()),
            self::t(match &s.ended {
                Some((it, msg)) => format!("at it {}: {msg}", iteration(*it)),
                None => "no end-of-run mark".into(),
            }),
        ]);
    }
    t
}

/// The last warnings and errors the parsers recognised.
pub fn messages_table(input: &ReportInput<'_>, max: usize) -> Table {
    let mut t = Table {
        class: None,
        head: vec!["source", "line", "iteration", "severity", "rule", "message"],
        rows: Vec::new(),
    };
    let mut all: Vec<(&str, &crate::record::Event)> = input
        .run
        .sources
        .iter()
        .flat_map(|s| s.events.iter().map(move |e| (s.label.as_str(), e)))
        .filter(|(_, e)| e.severity >= Severity::Warning)
        .collect();
    let skip = all.len().saturating_sub(max);
    for (src, e) in all.drain(skip..) {
        let msg: String = if e.message.chars().count() > 240 {
            e.message.chars().take(239).chain(['…']).collect()
        } else {
            e.message.clone()
        };
        t.rows.push(vec![
            self::t(src),
            n(e.line.to_string()),
            n(e.iteration.map_or("—".into(), iteration)),
            self::t(e.severity.as_str()),
            self::t(&e.rule),
            self::t(msg),
        ]);
    }
    t
}

/// Grid inputs: grid | rank | size | h | value | iterative error.
pub fn gci_grids_table(r: &GciResult) -> Table {
    let mut t = Table {
        class: None,
        head: vec!["grid", "rank", "given size", "cell size h", "value", "iterative error (est.)"],
        rows: Vec::new(),
    };
    for (k, g) in r.grids.iter().enumerate() {
        t.rows.push(vec![
            self::t(&g.name),
            self::t(["1 (finest)", "2", "3 (coarsest)"][k]),
            n(match g.size {
                GridSize::Cells(c) => format!("{c} cells"),
                GridSize::Spacing(h) => format!("spacing {}", num(h)),
            }),
            n(num(g.h)),
            n(num(g.value)),
            n(g.iterative_error.map_or("—".into(), num)),
        ]);
    }
    t
}

/// GCI results: quantity | fine pair (1–2) | coarse pair (2–3).
pub fn gci_results_table(r: &GciResult) -> Table {
    let pct = |v: f64| format!("{} %", num(100.0 * v));
    let rows: [(&str, String, String); 7] = [
        ("refinement ratio r", num(r.fine.ratio), num(r.coarse.ratio)),
        ("difference ε", num(r.eps21), num(r.eps32)),
        ("extrapolated value φ_ext", num(r.fine.extrapolated), num(r.coarse.extrapolated)),
        ("approximate relative error e_a", pct(r.fine.e_a), pct(r.coarse.e_a)),
        ("extrapolated relative error e_ext", pct(r.fine.e_ext), pct(r.coarse.e_ext)),
        ("GCI of the finer grid (Fs = 1.25)", pct(r.fine.gci_fine), pct(r.coarse.gci_fine)),
        ("GCI of the coarser grid (Roache)", pct(r.fine.gci_coarse), pct(r.coarse.gci_coarse)),
    ];
    Table {
        class: None,
        head: vec!["quantity", "pair 2–1 (fine)", "pair 3–2 (coarse)"],
        rows: rows.into_iter().map(|(a, b, c)| vec![t(a), n(b), n(c)]).collect(),
    }
}

/// The summary sentence of a mesh study.
pub fn gci_summary(r: &GciResult) -> String {
    format!(
        "Apparent order p = {} ({}, {} fixed-point iterations); {} convergence. Fine-grid value \
         {} with a discretisation uncertainty of ± {} (GCI {} %), extrapolated value {}. \
         Asymptotic-range ratio GCI32 / (r21^p · GCI21) = {} (near 1 in the asymptotic range).",
        num(r.order),
        if r.order_iterations == 0 { "explicit, equal ratios" } else { "iterated" },
        r.order_iterations,
        if r.oscillatory() { "oscillatory" } else { "monotonic" },
        num(r.grids[0].value),
        num(r.fine_uncertainty()),
        num(100.0 * r.fine.gci_fine),
        num(r.fine.extrapolated),
        num(r.asymptotic_ratio),
    )
}

/// Note on what the GCI covers.
pub const GCI_NOTE: &str = "Method: Celik et al. (2008), J. Fluids Eng. 130(7) 078001, with \
    safety factor 1.25. The GCI estimates discretisation uncertainty only; it assumes the three \
    grids are in the asymptotic range and says nothing about modelling error.";

/// Key-value rows of the provenance header.
pub fn provenance_facts(input: &ReportInput<'_>) -> Vec<(&'static str, String)> {
    let p = input.provenance;
    vec![
        ("settle version", p.settle_version.clone()),
        ("command line", shell_join(&p.command_line)),
        ("analysed at (UTC)", format_utc(p.analysed_at)),
    ]
}

pub fn parsers_table(input: &ReportInput<'_>) -> Table {
    Table {
        class: None,
        head: vec!["parser definition", "origin", "SHA-256 of the definition"],
        rows: input
            .provenance
            .parsers
            .iter()
            .map(|p| vec![t(&p.name), t(&p.origin), mono(&p.sha256)])
            .collect(),
    }
}

pub fn files_table(input: &ReportInput<'_>) -> Table {
    Table {
        class: None,
        head: vec!["file", "size", "modified (UTC)", "SHA-256 of the content"],
        rows: input
            .provenance
            .sources
            .iter()
            .map(|s| {
                vec![
                    t(s.path.display().to_string()),
                    n(bytes(s.size)),
                    n(s.mtime.map_or("unknown".into(), format_utc)),
                    mono(&s.sha256),
                ]
            })
            .collect(),
    }
}

/// The criteria settings in effect: as recorded in the provenance, or computed from the
/// criteria when the provenance recorded none.
pub fn criteria_settings(input: &ReportInput<'_>) -> Vec<(String, String, bool)> {
    if input.provenance.criteria.is_empty() {
        criteria_in_effect(input.criteria)
    } else {
        input.provenance.criteria.clone()
    }
}

pub fn criteria_settings_table(input: &ReportInput<'_>) -> Table {
    Table {
        class: None,
        head: vec!["setting", "value", "from"],
        rows: criteria_settings(input)
            .iter()
            .map(|(k, v, d)| {
                vec![t(k), n(v), t(if *d { "default (common practice)" } else { "set by user" })]
            })
            .collect(),
    }
}

/// A count with grouped digits.
fn count_text(c: u64) -> String {
    iteration(i64::try_from(c).unwrap_or(i64::MAX))
}

/// Join arguments for display, quoting those a shell would split or expand.
pub fn shell_join(args: &[String]) -> String {
    args.iter()
        .map(|a| {
            let plain = !a.is_empty()
                && a.chars().all(|c| c.is_ascii_alphanumeric() || "-_./=:,+@%".contains(c));
            if plain { a.clone() } else { format!("'{}'", a.replace('\'', "'\\''")) }
        })
        .collect::<Vec<_>>()
        .join(" ")
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn shell_join_quotes_what_needs_it() {
        let args: Vec<String> =
            ["settle", "report", "my case/run.log", "it's"].iter().map(|s| s.to_string()).collect();
        assert_eq!(shell_join(&args), "settle report 'my case/run.log' 'it'\\''s'");
    }
}
