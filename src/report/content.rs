//! The content of a report, computed once and shared by the HTML and Markdown writers: plain
//! text tables (not yet escaped) and the plots.
//!
//! Keeping the rows here means both formats show the same numbers with the same words; the
//! writers only decide markup and escaping. The result tables are in [`tables`], the mesh
//! study in [`mesh`]; this module holds the cell model, the series and monitors of a run, the
//! plots, the why and the provenance tables.

mod mesh;
mod tables;

pub use mesh::{GCI_NOTE, gci_grids_table, gci_results_table, gci_summary};
pub use tables::{
    criteria_table, findings_summary, findings_table, messages_table, monitor_table,
    residual_table, sources_table,
};

use crate::judge::{Judgement, MonitorSummary, Reference, RunInput};
use crate::record::Role;
use crate::report::ReportInput;
use crate::report::provenance::{criteria_in_effect, format_utc};
use crate::report::svg::{self, Line, MonitorMarks, Target};
use crate::report::text::{
    bytes, evidence, exact, iteration, kind_words, plus_minus, range, threshold_text,
};
use crate::view::evidence;

/// How a cell is shown: plain, a right-aligned number, a criterion state, a hash, or a
/// sentence of the judge that may hold `` `code` `` spans (shown as code, without backticks).
#[derive(Debug, Clone, Copy, PartialEq, Eq)]
pub enum Class {
    Text,
    Num,
    Met,
    Unmet,
    Mono,
    Prose,
}

impl Class {
    pub fn css(self) -> Option<&'static str> {
        match self {
            Class::Text => None,
            Class::Num => Some("num"),
            Class::Met => Some("met"),
            Class::Unmet => Some("unmet"),
            Class::Mono => Some("hash"),
            Class::Prose => None,
        }
    }
}

#[derive(Debug, Clone)]
pub struct Cell {
    pub text: String,
    pub class: Class,
}

pub(crate) fn t(s: impl Into<String>) -> Cell {
    Cell { text: s.into(), class: Class::Text }
}

pub(crate) fn n(s: impl Into<String>) -> Cell {
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
    /// The `band` criterion of this monitor (full width, percent of the reference), when one
    /// applies.
    pub band_pct: Option<f64>,
    /// The band criterion is absolute (`band_abs`, in the monitor's unit).
    pub band_abs: bool,
}

/// Monitors in the judge's order, then any other monitor series.
pub fn monitors<'a>(judgement: &'a Judgement, views: &'a [SeriesView<'a>]) -> Vec<MonitorView<'a>> {
    let band =
        |name: &str| judgement.criteria.iter().find(|c| c.series == name && c.name == "band");
    let view = |v, summary, name: &str| MonitorView {
        view: v,
        summary,
        band_pct: band(name).map(|c| c.threshold),
        band_abs: band(name).is_some_and(|c| c.unit.is_empty()),
    };
    let mut out: Vec<MonitorView<'a>> = Vec::new();
    for m in &judgement.monitors {
        if let Some(v) = views.iter().find(|v| v.input.name == m.series) {
            out.push(view(v, Some(m), &m.series));
        }
    }
    for v in views.iter().filter(|v| v.input.role == Role::Monitor) {
        if !out.iter().any(|m| m.view.input.name == v.input.name) {
            out.push(view(v, None, &v.input.name));
        }
    }
    out
}

pub fn monitor_svg(m: &MonitorView<'_>, index: usize, standalone: bool) -> String {
    let marks = match m.summary {
        // Not judged: no window, mean or band to draw, only the history.
        Some(s) if s.round_off => {
            MonitorMarks { no_window: Some(evidence::ROUND_OFF_WORDS), ..Default::default() }
        }
        Some(s) => MonitorMarks {
            window: Some((s.window_first, s.window_last)),
            mean: Some(s.mean),
            ci_half: Some(s.ci_half),
            band_pct: m.band_pct,
            reference: (s.reference != Reference::Mean && s.reference_value.is_finite())
                .then_some(s.reference_value),
            band_abs: m.band_abs,
            no_window: None,
            transient_end: s.transient_end,
            extrapolated: s.extrapolated,
        },
        None => MonitorMarks::default(),
    };
    svg::monitor_plot(&line(m.view, index), &marks, standalone)
}

/// A short caption for a monitor plot.
pub fn monitor_caption(m: &MonitorView<'_>) -> String {
    let name = &m.view.input.name;
    match m.summary {
        Some(s) if s.round_off => format!(
            "{name}: {}: it carries only round-off next to the other monitors. The whole \
             history.",
            evidence::ROUND_OFF_WORDS,
        ),
        Some(s) => {
            let mut c = format!(
                "{name}: left, the whole history; right, the final window (iterations {}, {}) \
                 zoomed. Mean {} (95 % CI)",
                range(s.window_first, s.window_last),
                evidence::window_words(s.window),
                plus_minus(s.mean, s.ci_half),
            );
            let of = evidence::reference_words(s).unwrap_or_else(|| "of the mean".into());
            match m.band_pct {
                Some(b) if m.band_abs => {
                    c.push_str(&format!("; tolerance band ± {} (absolute)", exact(b / 2.0)));
                }
                Some(b) => {
                    c.push_str(&format!("; tolerance band ± {} % {of}", exact(b / 2.0)));
                }
                None => {}
            }
            if let Some(e) = s.transient_end {
                c.push_str(&format!(
                    "; start-up transient up to iteration {} excluded",
                    iteration(e)
                ));
            }
            c.push('.');
            c
        }
        None => format!("{name}: the whole history; the judge reported no final window."),
    }
}

/// The unit of a finding's amplitude: decades for residuals, percent for monitors.
pub(crate) fn amplitude_unit(views: &[SeriesView<'_>], series: Option<&str>) -> &'static str {
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
pub(crate) fn count_text(c: u64) -> String {
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
