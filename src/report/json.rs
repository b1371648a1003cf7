//! The JSON report: the same facts as the HTML report, as data.
//!
//! The keys are built here explicitly (not derived from the judge's types), so the format
//! changes only when this file does. Numbers that are NaN or infinite become `null`.
//!
//! Objects are written with their keys in alphabetical order (serde_json's default map), so
//! the same report always serialises to the same bytes. Top-level keys, grouped by meaning:
//!
//! | key | value |
//! | --- | --- |
//! | `format` | always `"settle-report"` |
//! | `format_version` | `1`; bumped when a key changes meaning or disappears |
//! | `run` | run name |
//! | `verdict` | lowercase verdict word (`converged`, `stalled`, ...) |
//! | `verdict_meaning` | one sentence explaining the verdict |
//! | `since` | iteration or `null`; see `Judgement::since` |
//! | `iterations` | last iteration seen |
//! | `why` | the findings that caused the verdict (objects as in `findings`) |
//! | `criteria` | `[{criterion, series, comparison ("at_least"/"at_most"), threshold, value, unit, met, since, default}]` |
//! | `residuals` | `[{series, last, peak, drop_dec, slope_dec_per_kit, slope_ci: [lo, hi], eta_iterations}]` |
//! | `monitors` | `[{series, last, mean, ci_half, window: [first, last], transient_end, drift_pct, band_pct, iterative_error, extrapolated}]` |
//! | `findings` | `[{index, kind, series, first, last, statistic, value, threshold, p_value, period, amplitude, supports, detail, cause}]` |
//! | `series` | `[{name, role, source, values, first_iteration, last_iteration, last_value, restarts: [iteration]}]` |
//! | `sources` | `[{label, parser, records, lines, used, skipped, restarts, warnings, errors, ended}]` |
//! | `grid_convergence` | `null`, `{"error": message, "monitor"}` or the analysis (below) |
//! | `provenance` | `{settle_version, command_line: [arg], analysed_at, parsers: [{name, origin, sha256}], sources: [{path, size, mtime, sha256}], criteria: [{key, value, default}]}` |
//! | `safety` | the safety statement shown in every report |
//!
//! `grid_convergence` analysis: `{monitor, grids: [{name, cells | spacing, h, value,
//! iterative_error}] (fine to coarse), eps21, eps32, sign, oscillatory, order,
//! order_iterations, fine: pair, coarse: pair, asymptotic_ratio, safety_factor, fine_uncertainty,
//! warnings: [{kind, message}]}` with pair = `{ratio, extrapolated, e_a, e_ext, gci_fine,
//! gci_coarse}` (relative errors and GCIs as fractions, not percent). Times are UTC strings
//! `YYYY-MM-DDTHH:MM:SSZ`.

use serde_json::{Map, Value, json};

use crate::judge::{Comparison, Finding};
use crate::record::Severity;
use crate::report::ReportInput;
use crate::report::content;
use crate::report::gci::{self, GciResult, GridSize, PairResult};
use crate::report::provenance::format_utc;
use crate::report::text::{self, SAFETY};

/// Version of the JSON layout documented above.
pub const FORMAT_VERSION: u32 = 1;

/// A number, or `null` when it is not finite.
fn f(v: f64) -> Value {
    if v.is_finite() { json!(v) } else { Value::Null }
}

fn of(v: Option<f64>) -> Value {
    v.map_or(Value::Null, f)
}

fn finding(i: usize, x: &Finding, cause: bool) -> Value {
    json!({
        "index": i,
        "kind": x.kind.as_str(),
        "series": x.series,
        "first": x.first,
        "last": x.last,
        "statistic": x.statistic,
        "value": f(x.value),
        "threshold": of(x.threshold),
        "p_value": of(x.p_value),
        "period": of(x.period),
        "amplitude": of(x.amplitude),
        "supports": x.supports.map(|v| v.as_str()),
        "detail": x.detail,
        "cause": cause,
    })
}

fn pair(p: &PairResult) -> Value {
    json!({
        "ratio": f(p.ratio),
        "extrapolated": f(p.extrapolated),
        "e_a": f(p.e_a),
        "e_ext": f(p.e_ext),
        "gci_fine": f(p.gci_fine),
        "gci_coarse": f(p.gci_coarse),
    })
}

fn gci_json(r: &GciResult) -> Value {
    let grids: Vec<Value> = r
        .grids
        .iter()
        .map(|g| {
            let mut o = Map::new();
            o.insert("name".into(), json!(g.name));
            match g.size {
                GridSize::Cells(c) => o.insert("cells".into(), json!(c)),
                GridSize::Spacing(h) => o.insert("spacing".into(), f(h)),
            };
            o.insert("h".into(), f(g.h));
            o.insert("value".into(), f(g.value));
            o.insert("iterative_error".into(), of(g.iterative_error));
            Value::Object(o)
        })
        .collect();
    let warnings: Vec<Value> = r
        .warnings
        .iter()
        .map(|w| {
            let kind = serde_json::to_value(w)
                .ok()
                .and_then(|v| v.get("kind").cloned())
                .unwrap_or(Value::Null);
            json!({ "kind": kind, "message": w.to_string() })
        })
        .collect();
    json!({
        "monitor": r.monitor,
        "grids": grids,
        "eps21": f(r.eps21),
        "eps32": f(r.eps32),
        "sign": r.sign,
        "oscillatory": r.oscillatory(),
        "order": f(r.order),
        "order_iterations": r.order_iterations,
        "fine": pair(&r.fine),
        "coarse": pair(&r.coarse),
        "asymptotic_ratio": f(r.asymptotic_ratio),
        "safety_factor": r.safety_factor,
        "fine_uncertainty": f(r.fine_uncertainty()),
        "warnings": warnings,
    })
}

/// Build the JSON report (see the module documentation for the keys).
pub fn render_json(input: &ReportInput<'_>) -> Value {
    let j = input.judgement;
    let views = content::series_views(input);
    let findings: Vec<Value> =
        j.findings.iter().enumerate().map(|(i, x)| finding(i, x, j.causes.contains(&i))).collect();
    let why: Vec<Value> =
        j.causes.iter().filter_map(|&i| j.findings.get(i).map(|x| finding(i, x, true))).collect();
    let criteria: Vec<Value> = j
        .criteria
        .iter()
        .map(|c| {
            json!({
                "criterion": c.name,
                "series": c.series,
                "comparison": match c.comparison {
                    Comparison::AtLeast => "at_least",
                    Comparison::AtMost => "at_most",
                },
                "threshold": f(c.threshold),
                "value": f(c.value),
                "unit": c.unit,
                "met": c.met,
                "since": c.since,
                "default": c.default,
            })
        })
        .collect();
    let residuals: Vec<Value> = j
        .residuals
        .iter()
        .map(|r| {
            json!({
                "series": r.series,
                "last": f(r.last),
                "peak": f(r.peak),
                "drop_dec": f(r.drop_dec),
                "slope_dec_per_kit": f(r.slope_dec_per_kit),
                "slope_ci": [f(r.slope_ci.0), f(r.slope_ci.1)],
                "eta_iterations": of(r.eta_iterations),
            })
        })
        .collect();
    let monitors: Vec<Value> = j
        .monitors
        .iter()
        .map(|m| {
            json!({
                "series": m.series,
                "last": f(m.last),
                "mean": f(m.mean),
                "ci_half": f(m.ci_half),
                "window": [m.window_first, m.window_last],
                "transient_end": m.transient_end,
                "drift_pct": f(m.drift_pct),
                "band_pct": f(m.band_pct),
                "iterative_error": of(m.iterative_error),
                "extrapolated": of(m.extrapolated),
            })
        })
        .collect();
    let series: Vec<Value> = views
        .iter()
        .map(|v| {
            let s = &v.input;
            let restarts: Vec<i64> = s
                .segment_starts
                .iter()
                .filter(|&&i| i > 0 && i < s.iterations.len())
                .map(|&i| s.iterations[i])
                .collect();
            json!({
                "name": s.name,
                "role": s.role.as_str(),
                "source": v.source,
                "values": s.values.len(),
                "first_iteration": s.iterations.first(),
                "last_iteration": s.iterations.last(),
                "last_value": of(s.values.last().copied()),
                "restarts": restarts,
            })
        })
        .collect();
    let sources: Vec<Value> = input
        .run
        .sources
        .iter()
        .map(|s| {
            let count = |sev: Severity| s.events.iter().filter(|e| e.severity == sev).count();
            json!({
                "label": s.label,
                "parser": s.parser,
                "records": s.records(),
                "lines": s.stats.lines,
                "used": s.stats.used,
                "skipped": s.stats.skipped,
                "restarts": s.segments.len().saturating_sub(1),
                "warnings": count(Severity::Warning),
                "errors": count(Severity::Error),
                "ended": s.ended.as_ref().map(|(it, msg)| json!({"iteration": it, "message": msg})),
            })
        })
        .collect();
    let grid = match input.mesh {
        None => Value::Null,
        Some(study) => match gci::analyse(study) {
            Ok(r) => gci_json(&r),
            Err(e) => json!({ "monitor": study.monitor, "error": e.to_string() }),
        },
    };
    let p = input.provenance;
    let provenance = json!({
        "settle_version": p.settle_version,
        "command_line": p.command_line,
        "analysed_at": format_utc(p.analysed_at),
        "parsers": p.parsers.iter().map(|x| json!({
            "name": x.name, "origin": x.origin, "sha256": x.sha256,
        })).collect::<Vec<_>>(),
        "sources": p.sources.iter().map(|x| json!({
            "path": x.path.display().to_string(),
            "size": x.size,
            "mtime": x.mtime.map(format_utc),
            "sha256": x.sha256,
        })).collect::<Vec<_>>(),
        "criteria": content::criteria_settings(input).iter().map(|(k, v, d)| json!({
            "key": k, "value": v, "default": d,
        })).collect::<Vec<_>>(),
    });

    let mut o = Map::new();
    o.insert("format".into(), json!("settle-report"));
    o.insert("format_version".into(), json!(FORMAT_VERSION));
    o.insert("run".into(), json!(input.run.name));
    o.insert("verdict".into(), json!(j.verdict.as_str()));
    o.insert("verdict_meaning".into(), json!(text::verdict_meaning(j.verdict)));
    o.insert("since".into(), json!(j.since));
    o.insert("iterations".into(), json!(j.iterations));
    o.insert("why".into(), Value::Array(why));
    o.insert("criteria".into(), Value::Array(criteria));
    o.insert("residuals".into(), Value::Array(residuals));
    o.insert("monitors".into(), Value::Array(monitors));
    o.insert("findings".into(), Value::Array(findings));
    o.insert("series".into(), Value::Array(series));
    o.insert("sources".into(), Value::Array(sources));
    o.insert("grid_convergence".into(), grid);
    o.insert("provenance".into(), provenance);
    o.insert("safety".into(), json!(SAFETY));
    Value::Object(o)
}

/// The top-level keys of [`render_json`], grouped by meaning; tests pin them.
pub const TOP_LEVEL_KEYS: [&str; 17] = [
    "format",
    "format_version",
    "run",
    "verdict",
    "verdict_meaning",
    "since",
    "iterations",
    "why",
    "criteria",
    "residuals",
    "monitors",
    "findings",
    "series",
    "sources",
    "grid_convergence",
    "provenance",
    "safety",
];
