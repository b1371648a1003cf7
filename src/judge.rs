//! The judge: pure functions from series to findings, criteria results and a verdict.
//!
//! It never reads files and never draws; `check`, `watch` and `report` call the same
//! [`judge`] function. The methods are published ones (DESIGN §7, METHODS.md), each in its
//! own module:
//!
//! * [`stats`]: two-pass mean/SD, lag-1 autocorrelation, centred OLS, Student-t (statrs);
//! * [`trend`]: log10(residual) regression with an autocorrelation-corrected interval;
//! * [`spectrum`]: periodogram (rustfft), Fisher's g with its exact p-value, period, amplitude;
//! * [`stationarity`]: MSER/MSER-5, batch means, integrated autocorrelation time, drift, band;
//! * [`iterative`]: Aitken Δ² and the eigenvalue (ratio of successive differences) estimate;
//! * [`criteria`]: the criteria in effect per series and `since` bookkeeping;
//! * [`verdict`]: the precedence that turns findings into a verdict;
//! * [`limits`]: the fixed thresholds at which a statistic becomes a finding, with reasons.
//!
//! Per-role analyses (`residual`, `monitor`, `health`, `events`) combine them.
//!
//! # Decisions
//!
//! * **Segments.** Everything windowed looks at the latest segment (after the last restart);
//!   the residual drop is measured from the peak of the whole run, so a restart does not
//!   reset what was achieved; `since` dates stay inside the latest segment.
//! * **Windows.** Monitor criteria (drift, band, CI) use the configured window `W` (default
//!   500 iterations). The stall, divergence, oscillation and blow-up tests use an evidence
//!   window of `max(W, 500)` ([`limits::MIN_EVIDENCE_WINDOW`]). The first 200 iterations of a
//!   segment are its start-up ([`series::STARTUP_ITERATIONS`]): growth there is not
//!   divergence and a plateau there is not a stall.
//! * **Residuals.** Criteria: drop from the peak ≥ 3 decades (default) and, when set, level
//!   ≤ `below`. Stall: criteria unmet, the post-start-up trend covers 90 % of the evidence
//!   window, and its 95 % upper bound is not below −0.1 dec/kit. Divergence: a significant
//!   rise of ≥ 1 decade over the evidence window, a significant rise of ≥ 2 decades over its
//!   last fifth, or 3 decades above the running minimum. Oscillation: Fisher's g at 1 %,
//!   steady over both half windows, semi-amplitude ≥ 0.05 decades; it decides when the
//!   residual is not falling and its criteria fail (also when met only at a trough).
//! * **Monitors.** Drift = slope × `W` / |mean|, band = (max − min) / |mean|, over the whole
//!   final window; MSER-5 only picks the part the mean and its CI describe. An oscillation
//!   decides when drift or band fail and its peak-to-peak amplitude is at least half the band
//!   limit; a small oscillation inside the limits never blocks convergence.
//! * **Blow-up** (monitors and indicators): 2 decades above the reference level, sustained
//!   exponential growth of ≥ 1 decade, or (indicators) pinned at a maximum ≥ 5× the usual
//!   level. Non-finite values after the start-up, or as the last value, are divergence.
//! * **False convergence.** Residual criteria met while a monitor fails; the solver's own
//!   end or `converged` mark while a monitor fails; a residual repeating one value 20 times
//!   at the end; a one-step drop of ≥ 3 decades that the drop criterion depends on; a drop
//!   from a start-up spike (first value ≥ 2 decades below the peak, last still above it).
//! * **Crash.** An error or crash event at the end of a log without an end-of-run mark makes
//!   the run diverging when there were signs (a diverging finding, or a monitor or indicator
//!   jumping ×2 — a residual ×10 — or collapsing in its last values); otherwise it is
//!   reported without deciding.
//!
//! Every windowed test looks at a bounded window (at most [`series::MAX_WINDOW_POINTS`]
//! values); the whole-run work is a few cheap O(n) passes (peak, non-finite values, the
//! backward scan that dates the residual criteria), so a judgement costs about the same at
//! iteration 1 000 and at iteration 1 000 000.

// NaN must fail every threshold test here; `!(x > t)` says that directly, the
// `partial_cmp` spelling clippy suggests hides it.
#![allow(clippy::neg_cmp_op_on_partial_ord)]

pub mod criteria;
mod events;
mod health;
pub mod iterative;
pub mod limits;
mod monitor;
mod residual;
pub mod series;
pub mod spectrum;
pub mod stationarity;
pub mod stats;
mod text;
pub mod trend;
pub mod types;
pub mod verdict;

pub use types::*;

use crate::record::Role;

/// What the per-series analyses push: the parts of the [`Judgement`] they own.
#[derive(Debug, Default)]
struct Sink {
    findings: Vec<Finding>,
    criteria: Vec<CriterionResult>,
    residuals: Vec<ResidualSummary>,
    monitors: Vec<MonitorSummary>,
}

/// A finding about `series` (empty name: none) with the evidence range and statistic set.
fn finding(kind: FindingKind, series: &str, first: i64, last: i64, statistic: &str) -> Finding {
    Finding {
        kind,
        series: (!series.is_empty()).then(|| series.to_string()),
        first,
        last,
        statistic: statistic.into(),
        ..Default::default()
    }
}

/// Judge a run against the criteria in effect.
///
/// Residuals are judged for drop, level, trend, stall, divergence and oscillation; monitors
/// for drift, band, confidence interval, oscillation and blow-up; indicators for blow-up and
/// non-finite values only; `info` series and ignored ones not at all. Then the run-level
/// rules: false convergence (residual criteria met while a monitor fails), the solver
/// stopping on its own mark while a monitor drifts, a crash signature after signs of
/// blow-up, frequent warnings, restarts. The verdict follows [`verdict::decide`].
pub fn judge(input: &RunInput<'_>, criteria: &Criteria) -> Judgement {
    let window = criteria::window(criteria);
    let mut sink = Sink::default();
    let last_it = input.series.iter().filter_map(|s| s.iterations.last().copied()).max();

    let mut residuals_met: Vec<bool> = Vec::new();
    let mut failing_monitors: Vec<(String, Vec<&'static str>, f64)> = Vec::new();
    let mut crash_signs: Vec<String> = Vec::new();
    let mut restarts: Option<(usize, i64)> = None;
    let mut window_iterations = 0usize;

    for s in &input.series {
        let rc = criteria::resolve(criteria, &s.name, s.role);
        if rc.ignore || rc.role == Role::Info {
            continue;
        }
        let Some(view) = series::View::new(s) else {
            continue;
        };
        window_iterations = window_iterations.max(view.window(window).len());
        if view.segments > 1 && restarts.is_none_or(|(k, _)| view.segments > k) {
            restarts = Some((view.segments, view.seg_first_it()));
        }
        let name: &str = &s.name;
        match rc.role {
            Role::Residual => {
                let facts = residual::analyse(name, &view, &rc, &mut sink);
                residuals_met.push(facts.met);
                crash_signs.extend(facts.crash_sign);
            }
            Role::Monitor => {
                let facts = monitor::analyse(name, &view, &rc, &mut sink);
                if !facts.failing.is_empty() {
                    failing_monitors.push((name.to_string(), facts.failing, facts.drift_pct));
                }
                crash_signs.extend(facts.crash_sign);
            }
            Role::Indicator => {
                crash_signs.extend(monitor::analyse_indicator(
                    name,
                    &view,
                    rc.evidence(),
                    &mut sink,
                ));
            }
            Role::Info => {}
        }
    }

    let last = last_it.unwrap_or(0);
    run_level(input, last_it, window, window_iterations, &mut sink);
    let all_residuals_met = !residuals_met.is_empty() && residuals_met.iter().all(|m| *m);
    false_convergence(input, all_residuals_met, &failing_monitors, last, window, &mut sink);
    crash(input, last_it, &crash_signs, &mut sink);
    if let Some((segments, from)) = restarts {
        let mut f = finding(FindingKind::Restart, "", from, last, "segments");
        f.value = segments as f64;
        f.detail = format!(
            "the run restarted {} time(s); trends and monitors use the latest segment (from it {from}), the drop uses the peak of the whole run",
            segments - 1
        );
        sink.findings.push(f);
    }

    let (verdict, since, causes) = verdict::decide(&sink.findings, &sink.criteria);
    Judgement {
        verdict,
        since,
        causes,
        findings: sink.findings,
        criteria: sink.criteria,
        residuals: sink.residuals,
        monitors: sink.monitors,
        iterations: last,
    }
}

fn run_level(
    input: &RunInput<'_>,
    last_it: Option<i64>,
    window: usize,
    window_iterations: usize,
    sink: &mut Sink,
) {
    if let Some(last) = last_it {
        events::frequent_warnings(input, last, window, window_iterations, sink);
    }
}

/// Residual criteria met while a monitor fails stationarity → suspect; the solver's own end
/// or convergence mark while a monitor fails → suspect.
fn false_convergence(
    input: &RunInput<'_>,
    residuals_met: bool,
    failing: &[(String, Vec<&'static str>, f64)],
    last: i64,
    window: usize,
    sink: &mut Sink,
) {
    let first = last.saturating_sub(window as i64);
    let describe = |crit: &[&str], drift: f64| -> String {
        if crit.contains(&"drift") && drift.is_finite() {
            format!("drifts {} over the last {window} iterations", text::signed_pct(drift))
        } else {
            format!("fails its {} limit", crit.join(" and "))
        }
    };
    for (name, crit, drift) in failing {
        if residuals_met {
            let mut f = finding(
                FindingKind::FalseConvergence,
                name,
                first,
                last,
                "monitor_criteria_failed",
            );
            f.value = crit.len() as f64;
            f.supports = Some(Verdict::Suspect);
            f.detail = format!(
                "every residual criterion is met but {name} {}: the solution is still changing",
                describe(crit, *drift)
            );
            sink.findings.push(f);
        }
    }
    // The solver's own convergence mark is a claim of convergence, and so is a bare
    // end-of-run mark while the residuals are still falling or met (the solver stopped on a
    // target of its own). A run whose residual stalled claims nothing by ending: it hit its
    // iteration limit, and is judged stalled, not falsely converged.
    let stalled = sink.findings.iter().any(|f| f.supports == Some(Verdict::Stalled));
    let mark = match events::converged_mark(input) {
        Some(e) => Some((format!("its own `{}` mark", e.rule), e.iteration.unwrap_or(last))),
        None if input.ended && !stalled => {
            Some(("its end-of-run mark".to_string(), input.ended_at.unwrap_or(last)))
        }
        None => None,
    };
    if let (Some((what, at)), false) = (mark, failing.is_empty()) {
        let names: Vec<&str> = failing.iter().map(|(n, _, _)| n.as_str()).collect();
        let mut f =
            finding(FindingKind::SolverStoppedEarly, "", at.min(last), last, "monitors_failing");
        f.series = (names.len() == 1).then(|| names[0].to_string());
        f.value = names.len() as f64;
        f.supports = Some(Verdict::Suspect);
        let (n0, c0, d0) = &failing[0];
        f.detail = format!(
            "the solver reached {what} at it {at} while {n0} {}{}",
            describe(c0, *d0),
            if names.len() > 1 {
                format!(" (and {} more)", names.len() - 1)
            } else {
                String::new()
            }
        );
        sink.findings.push(f);
    }
}

/// The log ends in an error or crash signature with no end-of-run mark. Diverging when there
/// were signs of blow-up (any diverging finding, or a series jumping in its last values);
/// otherwise reported without deciding (a node failure or a licence error is not divergence).
fn crash(input: &RunInput<'_>, last_it: Option<i64>, signs: &[String], sink: &mut Sink) {
    let Some(e) = events::crash(input, last_it) else {
        return;
    };
    let it = e.iteration.or(last_it).unwrap_or(0);
    let diverging = sink.findings.iter().any(|f| f.supports == Some(Verdict::Diverging));
    let decisive = diverging || !signs.is_empty();
    let mut f = finding(FindingKind::Crash, "", it, last_it.unwrap_or(it), "error_at_end");
    f.value = 1.0;
    f.supports = decisive.then_some(Verdict::Diverging);
    let message: String = e.message.chars().take(120).collect();
    let why = if let Some(s) = signs.first() {
        format!("; {s}")
    } else if diverging {
        " after signs of divergence".to_string()
    } else {
        "; no sign of divergence before it".to_string()
    };
    f.detail = format!(
        "the log ends in an error at it {it} (`{}`: {message}) with no end-of-run mark{why}",
        e.rule
    );
    sink.findings.push(f);
}
