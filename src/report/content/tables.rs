//! The result tables of a report: criteria, residuals, monitors, findings, what was read.
//!
//! Numbers follow [`crate::view::number`]: a value with a confidence interval to the
//! precision the interval supports, three significant digits otherwise, thresholds as set.

use crate::judge::{Judgement, Reference, ResidualSummary, Verdict};
use crate::record::Severity;
use crate::report::ReportInput;
use crate::report::text::{
    NBSP, criterion_words, iteration, kind_words, num, p_value, plus_minus, range, threshold_text,
    with_unit,
};
use crate::view::{evidence, number, words};

use super::{Cell, Class, MonitorView, SeriesView, Table, amplitude_unit, count_text, n, t};

/// Criterion | series | threshold | final value | met | held since | threshold from.
pub fn criteria_table(j: &Judgement) -> Table {
    let mut tab = Table {
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
        tab.rows.push(vec![
            t(criterion_words(&c.name)),
            t(&c.series),
            n(threshold_text(c)),
            n(with_unit(c.value, &c.unit)),
            if c.met {
                Cell { text: "✓ met".into(), class: Class::Met }
            } else {
                Cell { text: "✗ not met".into(), class: Class::Unmet }
            },
            n(c.since.map_or("—".into(), |s| format!("it {}", iteration(s)))),
            t(if c.default { "default (common practice)" } else { "set by user" }),
        ]);
    }
    tab
}

/// The iterations-to-target estimate as a reader should take it: none for a met target, "not
/// in reach" when the verdict says the residuals are not heading there (as the live panels
/// say), else the estimate to three significant digits.
fn eta_text(j: &Judgement, r: &ResidualSummary) -> String {
    let (series, eta) = (r.series.as_str(), r.eta_iterations);
    let unmet = j.criteria.iter().any(|c| c.series == series && !c.met && c.unit == "dec");
    let unmet =
        unmet || j.criteria.iter().any(|c| c.series == series && !c.met && c.name == "below");
    match (eta, j.verdict) {
        (_, Verdict::Diverging | Verdict::Stalled) if unmet => "not in reach".into(),
        (Some(e), _) if e.is_finite() && unmet => match evidence::eta_range(r, " … ") {
            Some(range) => format!("≈ {} ({range})", evidence::eta_number(e)),
            None => format!("≈ {}", evidence::eta_number(e)),
        },
        _ => "—".into(),
    }
}

/// Residual | last | peak | drop | trend (95 % CI) | iterations to target.
pub fn residual_table(j: &Judgement) -> Table {
    let mut tab = Table {
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
        let (slope, lo, hi) = number::interval(r.slope_dec_per_kit, r.slope_ci.0, r.slope_ci.1);
        tab.rows.push(vec![
            t(&r.series),
            n(num(r.last)),
            n(num(r.peak)),
            n(with_unit(r.drop_dec, "dec")),
            n(format!("{slope} ({lo} … {hi})")),
            n(eta_text(j, r)),
        ]);
    }
    tab
}

/// Per monitor: final value, mean ± CI, window (and transient), drift, band, iterative error,
/// extrapolated value. Eight columns, so the table fits the page column.
pub fn monitor_table(ms: &[MonitorView<'_>]) -> Table {
    let mut tab = Table {
        class: Some("monitors"),
        head: vec![
            "monitor",
            "final value",
            "mean ± 95 % CI",
            "final window (start-up excluded)",
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
            // Shown, not judged: its final value and why there is nothing else.
            Some(s) if s.round_off => {
                let mut row = vec![t(&s.series), n(num(last))];
                row.extend([n("—"), n("—"), n(evidence::ROUND_OFF_WORDS), n("—"), n("—"), n("—")]);
                row
            }
            Some(s) => {
                let rel = if s.mean != 0.0 { 100.0 * s.ci_half / s.mean.abs() } else { f64::NAN };
                let rel = match s.reference {
                    Reference::Mean => rel,
                    _ if s.reference_value != 0.0 => 100.0 * s.ci_half / s.reference_value.abs(),
                    _ => f64::NAN,
                };
                let used = iteration(i64::try_from(s.window).unwrap_or(i64::MAX));
                let window = match s.transient_end {
                    Some(e) => format!(
                        "it{NBSP}{}, {used}{NBSP}it (start-up to it{NBSP}{})",
                        range(s.window_first, s.window_last),
                        iteration(e)
                    ),
                    None => {
                        format!("it{NBSP}{}, {used}{NBSP}it", range(s.window_first, s.window_last))
                    }
                };
                // Relative numbers say what they are relative to when it is not the mean.
                let of = evidence::reference_words(s).map(|r| format!(" {r}")).unwrap_or_default();
                let (drift, band) = (
                    format!("{}{of}", with_unit(s.drift_pct, "%")),
                    format!("{}{of}", with_unit(s.band_pct, "%")),
                );
                vec![
                    t(&s.series),
                    n(num(s.last)),
                    n(format!("{} ({})", plus_minus(s.mean, s.ci_half), with_unit(rel, "%"))),
                    n(window),
                    n(drift),
                    n(band),
                    n(s.iterative_error.map_or("—".into(), num)),
                    n(s.extrapolated.map_or("—".into(), |x| match s.iterative_error {
                        Some(e) => number::with_uncertainty(x, e).value,
                        None => num(x),
                    })),
                ]
            }
            None => {
                let mut row = vec![t(&*m.view.input.name), n(num(last))];
                row.extend((0..6).map(|_| n("—")));
                row
            }
        };
        tab.rows.push(row);
    }
    tab
}

/// Every finding with its evidence.
pub fn findings_table(j: &Judgement, views: &[SeriesView<'_>]) -> Table {
    let mut tab = Table {
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
        tab.rows.push(vec![
            n(range(f.first, f.last)),
            Cell { text: kind, class: if cause { Class::Unmet } else { Class::Text } },
            t(f.series.clone().unwrap_or_else(|| "—".into())),
            t(match f.threshold {
                Some(th) => format!("{} = {} ({})", f.statistic, num(f.value), num(th)),
                None => format!("{} = {}", f.statistic, num(f.value)),
            }),
            n(f.p_value.map_or("—".into(), p_value)),
            n(f.period.map_or("—".into(), |p| format!("{} it", num(p)))),
            n(f.amplitude.map_or("—".into(), |a| with_unit(a, unit))),
            t(f.supports.map_or("— (information)", |v| v.as_str())),
            Cell { text: f.detail.clone(), class: Class::Prose },
        ]);
    }
    tab
}

/// Informational findings are counted, so a reader sees what the judge looked at.
pub fn findings_summary(j: &Judgement) -> String {
    let total = j.findings.len();
    if total == 0 {
        return "No findings.".into();
    }
    let info = j.findings.iter().filter(|f| f.supports.is_none()).count();
    let info = match info {
        0 => "none informational".to_string(),
        k if k == total && total == 1 => "informational".to_string(),
        k if k == total => "all informational".to_string(),
        k => format!("{k} informational"),
    };
    let decided = match j.causes.len() {
        0 => "none decided the verdict".to_string(),
        k => format!("{k} decided the verdict"),
    };
    format!("{} ({info}); {decided}.", words::count(total, "finding"))
}

/// Per source: what was read.
pub fn sources_table(input: &ReportInput<'_>) -> Table {
    let mut tab = Table {
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
        tab.rows.push(vec![
            t(&s.label),
            t(&s.parser),
            n(count_text(s.records() as u64)),
            n(count_text(s.stats.lines)),
            n(count_text(s.stats.used)),
            n(count_text(s.stats.skipped)),
            n(s.segments.len().saturating_sub(1).to_string()),
            n(count(Severity::Warning).to_string()),
            n(count(Severity::Error).to_string()),
            t(match &s.ended {
                Some((it, msg)) => format!("at it {}: {msg}", iteration(*it)),
                None => "no end-of-run mark".into(),
            }),
        ]);
    }
    tab
}

/// The last warnings and errors the parsers recognised.
pub fn messages_table(input: &ReportInput<'_>, max: usize) -> Table {
    let mut tab = Table {
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
        tab.rows.push(vec![
            t(src),
            n(e.line.to_string()),
            n(e.iteration.map_or("—".into(), iteration)),
            t(e.severity.as_str()),
            t(&e.rule),
            t(msg),
        ]);
    }
    tab
}
