//! The judge: pure functions from series to findings, criteria results and a verdict.
//!
//! It never reads files and never draws; `check`, `watch` and `report` call the same
//! [`judge`] function. The methods are published ones (cited in each module and in the README), each in its
//! own module:
//!
//! * [`stats`]: two-pass mean/SD, lag-1 autocorrelation, centred OLS, Student-t (statrs);
//! * [`trend`]: log10(residual) regression with an autocorrelation-corrected interval;
//! * [`spectrum`]: periodogram (rustfft), Fisher's g with its exact p-value, period, amplitude;
//! * [`stationarity`]: MSER/MSER-5, batch means, integrated autocorrelation time, drift, band;
//! * [`iterative`]: Aitken Δ² and the eigenvalue (ratio of successive differences) estimate;
//! * [`criteria`]: the criteria in effect per series and `since` bookkeeping;
//! * [`window`]: the monitor window fitted to the run, and where a monitor is heading;
//! * [`scale`]: the reference of a monitor's relative criteria, round-off-only monitors;
//! * [`oscillation`]: dominance, lasting amplitude and growth of a periodic component;
//! * [`eta`]: iterations to target from the recent rate, with a range;
//! * [`verdict`]: the precedence that turns findings into a verdict;
//! * [`limits`]: the fixed thresholds at which a statistic becomes a finding, with reasons.
//!
//! Per-role analyses (`residual`, `monitor`, `health`, `events`) combine them.
//! [`try_judge`] says why a run has nothing to judge (no verdict then); [`judge`] keeps the
//! simple signature for live callers.
//!
//! # Decisions
//!
//! * **Segments.** Everything windowed looks at the latest segment (after the last restart);
//!   the residual drop is measured from the peak of the whole run, so a restart does not
//!   reset what was achieved; `since` dates stay inside the latest segment.
//! * **Windows.** Monitor criteria use a window fitted to the run ([`window`]): at most the
//!   configured `W` (default 500) and half of a short segment, the part after the start-up
//!   transient (MSER-5, or where a monitor still on its way comes within tolerance), at
//!   least 50 iterations and two periods of a cycle; an explicit `window` is used as given.
//!   A segment restarted from a checkpoint keeps the run's age but is not judged until it
//!   holds half the upper window ([`window::required`]).
//!   The stall, divergence, oscillation and blow-up tests use an evidence window of
//!   `max(W, 500)` ([`limits::MIN_EVIDENCE_WINDOW`]). The first 200 iterations of a segment
//!   are its start-up ([`series::STARTUP_ITERATIONS`]): a rise of a decade or two there is
//!   not divergence, and the stall test starts after it.
//! * **Residuals.** Criteria: drop from the peak ≥ 3 decades (default) and, when set, level
//!   ≤ `below`. Stall: criteria unmet, the post-start-up trend over 1000 iterations (a
//!   finished run: over the evidence window, or over 1000 when that one falls) has a 95 %
//!   upper bound not below −0.1 dec/kit, and (live) its last quarter has not fallen
//!   significantly below the plateau, nor do most other residuals fall steadily at a rate
//!   inside its interval (`common_fall`).
//!   Divergence: a significant rise of ≥ 1 decade over the evidence window, of ≥ 2
//!   decades over its last fifth, 3 decades above the running minimum, or — any time — 3
//!   decades beyond the first values while still shooting up. Oscillation: Fisher's g at 1 %,
//!   dominant, lasting, ≥ 0.05 decades, six cycles in view; it decides when the residual is
//!   not falling and its criteria fail (also when met only at a trough).
//! * **Monitors.** Drift = the larger of the trend's change over the window and the change
//!   it still projects, both read with a significant cycle taken out; band = max − min;
//!   both relative to the reference ([`scale`]) or absolute. An oscillation decides when drift or band fail, it dominates and lasts, and
//!   its peak-to-peak amplitude alone reaches the band limit.
//! * **Blow-up** (monitors and indicators): 2 decades above the reference level, sustained
//!   exponential growth of ≥ 1 decade (2 in the start-up), 3 decades beyond the first values
//!   while still shooting up, or (indicators) pinned at a maximum ≥ 5× the usual level.
//!   Non-finite values after the start-up, or as the last value, are divergence. A growing
//!   oscillation decides when two series grow with the same period. A monitor whose
//!   departure from its earlier level grows exponentially by a decade, not slowing down, to
//!   a tenth of its reference is diverging while fewer than half the residuals fall
//!   ([`health::departure_growth`]).
//! * **Converged** needs every criterion met and, while the run goes on, held for a tenth
//!   of the upper window ([`window::hold`]); until then a `holding` finding is the one cause
//!   of `converging`.
//! * **Converging** names one cause: the residual that limits the estimate to target.
//! * **Estimates to target** are dropped while anything argues for divergence.
//! * **False convergence.** Residual criteria met while a monitor fails; the solver's own
//!   end or `converged` mark while a monitor fails; a residual repeating one value 20 times
//!   at the end; a one-step drop of ≥ 3 decades that the drop criterion depends on; a drop
//!   from a start-up spike (first value ≥ 2 decades below the peak, last still above it).
//! * **Crash.** An error or crash event at the end of a log without an end-of-run mark makes
//!   the run diverging when there were signs (a diverging finding, or a monitor or indicator
//!   jumping ×2 — a residual ×10 — or collapsing in its last values); otherwise it is
//!   reported without deciding.
//! * **Evidence ranges** stay inside the data, and `since` is never after the last iteration.
//!
//! Every windowed test looks at a bounded window (at most [`series::MAX_WINDOW_POINTS`]
//! values, at most eight evidence windows for the long-period search). What needs the whole
//! run (the residual's peak and largest one-step drop, non-finite values, the running largest
//! magnitude of a monitor, the last value above a level that dates the residual criteria)
//! comes from the store's running aggregates ([`history`]), so a judgement costs what its
//! windows cost: `cargo bench --bench judge_cost` measured one call on a synthetic run at
//! 10 M records at 0.87× the call at 100 k (before the aggregates: 54×). Without them
//! (`SeriesInput::history` `None`: prefixes, tests) the judge scans the run, with the same
//! result.

// NaN must fail every threshold test here; `!(x > t)` says that directly, the
// `partial_cmp` spelling clippy suggests hides it.
#![allow(clippy::neg_cmp_op_on_partial_ord)]

mod common_fall;
pub mod criteria;
pub mod eta;
mod events;
mod growth;
mod health;
pub mod history;
pub mod iterative;
pub mod limits;
mod monitor;
pub mod oscillation;
pub mod peak;
mod residual;
pub mod scale;
pub mod series;
pub mod spectrum;
pub mod stationarity;
pub mod stats;
mod text;
pub mod trend;
pub mod types;
pub mod verdict;
pub mod window;

pub use types::*;

use crate::record::Role;

/// What the per-series analyses push: the parts of the [`Judgement`] they own.
#[derive(Debug, Default)]
struct Sink {
    findings: Vec<Finding>,
    criteria: Vec<CriterionResult>,
    residuals: Vec<ResidualSummary>,
    monitors: Vec<MonitorSummary>,
    /// Estimates of iterations to target, appended to the detail of the finding at the index
    /// only when nothing argues for divergence.
    eta_notes: Vec<(usize, String)>,
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
///
/// A run with nothing to judge gets a `converging` judgement without criteria here; callers
/// that must not report a verdict for it (`check`, `report`) use [`try_judge`].
pub fn judge(input: &RunInput<'_>, criteria: &Criteria) -> Judgement {
    try_judge(input, criteria).unwrap_or_default()
}

/// Why `input` has nothing to judge, if it has not: no value at all, or only `info` and
/// ignored series. Cheap (no statistics).
pub fn nothing_to_judge(input: &RunInput<'_>, criteria: &Criteria) -> Option<NothingToJudge> {
    let with_values: Vec<&SeriesInput<'_>> =
        input.series.iter().filter(|s| !s.values.is_empty() && !s.iterations.is_empty()).collect();
    if with_values.is_empty() {
        return Some(NothingToJudge::NoData);
    }
    let judged = with_values.iter().any(|s| {
        let rc = criteria::resolve(criteria, &s.name, s.role);
        !rc.ignore && rc.role != Role::Info
    });
    (!judged).then_some(NothingToJudge::NothingJudged { series: with_values.len() })
}

/// Judge a run, or say why there is nothing to judge (no verdict then).
pub fn try_judge(input: &RunInput<'_>, criteria: &Criteria) -> Result<Judgement, NothingToJudge> {
    if let Some(why) = nothing_to_judge(input, criteria) {
        return Err(why);
    }
    let window = criteria::window(criteria);
    let mut sink = Sink::default();
    let last_it = input.series.iter().filter_map(|s| s.iterations.last().copied()).max();
    let first_it = input.series.iter().filter_map(|s| s.iterations.first().copied()).min();

    let mut residuals_met: Vec<(bool, Option<i64>)> = Vec::new();
    let mut failing_monitors: Vec<Failing> = Vec::new();
    let mut crash_signs: Vec<String> = Vec::new();
    let mut restarts: Option<(usize, i64)> = None;
    let mut window_iterations = 0usize;
    // Monitors whose criteria have not all held for the hold span.
    let mut unheld: Vec<String> = Vec::new();
    // Iterations every criterion must have held before a live run is `converged` (`hold`),
    // and before a monitor's criterion is kept met on its best estimate (`keep`, a finished
    // run's too: `monitor::Hold`).
    let keep = match (first_it, last_it) {
        (Some(f), Some(l)) => {
            window::hold(window, criteria.window.is_some(), l.saturating_sub(f).saturating_add(1))
        }
        _ => 0,
    };
    let hold = if input.ended { 0 } else { keep };
    let monitor_hold = monitor::Hold { call: hold, keep };

    // The series to judge, with their criteria and views; monitors with their magnitude, so
    // that a round-off-only monitor can be told from its companions.
    let mut work = Vec::new();
    for s in &input.series {
        let rc = criteria::resolve(criteria, &s.name, s.role);
        if rc.ignore || rc.role == Role::Info {
            continue;
        }
        let Some(view) = series::View::new(s) else {
            continue;
        };
        let mag = (rc.role == Role::Monitor)
            .then(|| scale::Magnitude::from_iteration(&view, monitor::magnitude_from(&view, &rc)));
        work.push((s, rc, view, mag));
    }
    let magnitudes: Vec<f64> =
        work.iter().map(|(_, _, _, m)| m.as_ref().map_or(f64::NAN, |m| m.max())).collect();

    // Residual views in judging order, and stalls by their index there (`common_fall`).
    let mut residual_views = Vec::new();
    let mut stalls = Vec::new();
    for (k, (s, rc, view, mag)) in work.iter().enumerate() {
        window_iterations = window_iterations.max(view.window(window).len());
        if view.segments > 1 && restarts.is_none_or(|(k, _)| view.segments > k) {
            restarts = Some((view.segments, view.seg_first_it()));
        }
        let name: &str = &s.name;
        match rc.role {
            Role::Residual => {
                let facts = residual::analyse(name, view, rc, input.ended, &mut sink);
                let since = sink
                    .criteria
                    .iter()
                    .filter(|c| c.series == name)
                    .map(|c| c.since)
                    .collect::<Option<Vec<_>>>()
                    .and_then(|v| v.into_iter().max());
                residuals_met.push((facts.met, since));
                crash_signs.extend(facts.crash_sign);
                stalls.extend(facts.stall.map(|f| (residual_views.len(), f)));
                residual_views.push(view);
            }
            Role::Monitor => {
                let Some(mag) = mag else { continue };
                let companions = magnitudes
                    .iter()
                    .enumerate()
                    .filter(|(j, m)| *j != k && m.is_finite())
                    .map(|(_, m)| *m)
                    .fold(0.0f64, f64::max);
                let round_off = scale::round_off(mag.max(), companions).then_some(companions);
                let facts =
                    monitor::analyse(name, view, rc, mag, round_off, monitor_hold, &mut sink);
                if !facts.held && round_off.is_none() {
                    unheld.push(name.to_string());
                }
                if !facts.failing.is_empty() {
                    failing_monitors.push(Failing {
                        name: name.to_string(),
                        window: facts.window,
                        count: facts.failing.len(),
                        why: facts.why,
                    });
                }
                crash_signs.extend(facts.crash_sign);
            }
            Role::Indicator => {
                crash_signs.extend(monitor::analyse_indicator(
                    name,
                    view,
                    rc.evidence(),
                    &mut sink,
                ));
            }
            Role::Info => {}
        }
    }

    let peers: Vec<growth::Peer<'_>> = work
        .iter()
        .filter(|(_, rc, _, mag)| match rc.role {
            Role::Residual => true,
            Role::Monitor => mag.is_some(),
            _ => false,
        })
        .map(|(s, rc, view, _)| growth::Peer {
            name: &s.name,
            view: *view,
            residual: rc.role == Role::Residual,
        })
        .collect();
    growth::corroborate(&mut sink, &peers);
    let last = last_it.unwrap_or(0);
    if !input.ended {
        common_fall::demote_hidden(&stalls, &residual_views, last, &mut sink);
    }
    run_level(input, last_it, window, window_iterations, &mut sink);
    let all_met = !residuals_met.is_empty() && residuals_met.iter().all(|(m, _)| *m);
    let met_since = if all_met {
        residuals_met
            .iter()
            .map(|(_, s)| *s)
            .collect::<Option<Vec<_>>>()
            .and_then(|v| v.into_iter().max())
    } else {
        None
    };
    false_convergence(input, all_met, met_since, &failing_monitors, last, &mut sink);
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
    if !input.ended {
        hold_back(hold, last, &unheld, &mut sink);
    }
    finish(&mut sink, first_it.unwrap_or(last), last);

    let (verdict, since, mut causes) = verdict::decide(&sink.findings, &sink.criteria);
    if verdict == Verdict::Converging {
        // Criteria met but not yet held: that is the one thing between the run and
        // `converged`.
        let holding = sink.findings.iter().position(|f| f.kind == FindingKind::Holding);
        causes = match holding {
            Some(i) => vec![i],
            None => limiting_residual(&mut sink, causes),
        };
    }
    Ok(Judgement {
        verdict,
        since: since.map(|s| s.min(last)),
        causes,
        findings: sink.findings,
        criteria: sink.criteria,
        residuals: sink.residuals,
        monitors: sink.monitors,
        iterations: last,
    })
}

/// When every criterion holds but not all of them yet for `hold` iterations
/// ([`window::hold`]), a finding that keeps the verdict at `converging` and names the
/// criterion met last. Only while the run goes on: the hold guards the decision to stop a
/// run on a statistic that has just crossed its limit; a finished run (end-of-run mark) is
/// judged on its final state, and a solver that stops on its own residual target stops at
/// the first iteration below it.
fn hold_back(hold: i64, last: i64, unheld: &[String], sink: &mut Sink) {
    if sink.criteria.is_empty() || !sink.criteria.iter().all(|c| c.met) {
        return;
    }
    // Residual criteria are dated by their values; a monitor's by its windows (`unheld`:
    // not every checkpoint from `hold` before the last held).
    let waiting = |c: &&CriterionResult| match c.window {
        None => c.since.is_none_or(|s| s > last.saturating_sub(hold)),
        Some(_) => unheld.contains(&c.series),
    };
    let Some(c) = sink.criteria.iter().filter(waiting).max_by_key(|c| c.since) else {
        return;
    };
    let since = c.since.unwrap_or(last);
    let what = format!("{} {}", c.series, c.name);
    let mut f = finding(FindingKind::Holding, &c.series, since, last, "held_iterations");
    f.value = last.saturating_sub(since) as f64;
    f.threshold = Some(hold as f64);
    f.supports = Some(Verdict::Converging);
    f.detail = format!(
        "every criterion is met, {what} only since it {since}: converged once they have held for {hold} iterations"
    );
    sink.findings.push(f);
}

/// The cause of a `converging` verdict said concisely: of the falling residuals, the one
/// that limits the estimate (the longest estimate of iterations to target; without
/// estimates, the slowest fall), with a count of the others. The run converges only when
/// its slowest residual gets there, so that is the one line worth reading; every trend
/// stays among the findings (`check --json`, report).
fn limiting_residual(sink: &mut Sink, causes: Vec<usize>) -> Vec<usize> {
    if causes.len() < 2 {
        return causes;
    }
    let eta = |i: usize| {
        let series = sink.findings[i].series.as_deref();
        sink.residuals
            .iter()
            .find(|r| Some(r.series.as_str()) == series)
            .and_then(|r| r.eta_iterations)
    };
    let key = |i: usize| (eta(i).unwrap_or(f64::NEG_INFINITY), sink.findings[i].value);
    let Some(&slowest) = causes.iter().max_by(|&&a, &&b| {
        let (ea, sa) = key(a);
        let (eb, sb) = key(b);
        ea.total_cmp(&eb).then(sa.total_cmp(&sb)).then(b.cmp(&a))
    }) else {
        return causes;
    };
    let others = causes.len() - 1;
    let f = &mut sink.findings[slowest];
    f.detail.push_str(&format!(
        "; the slowest: {others} other residual{} falling faster",
        if others == 1 { "" } else { "s" }
    ));
    vec![slowest]
}

/// A monitor departing exponentially from its level ([`health::departure_growth`]) decides
/// only while the residuals do not fall: when at least half of them still fall
/// significantly towards their targets (a `converging` trend, criteria unmet), the
/// iteration is contracting and the monitor is moving to the state it converges to (the
/// exit from a pseudo-plateau), which an instability does not allow; one residual sliding in
/// red noise does not count against it. The finding then stays, as a note.
fn departure_while_falling(sink: &mut Sink) {
    let residuals = sink.residuals.len();
    let falling = sink
        .findings
        .iter()
        .filter(|f| f.kind == FindingKind::Trend && f.supports == Some(Verdict::Converging))
        .count();
    if residuals == 0 || 2 * falling < residuals {
        return;
    }
    for f in &mut sink.findings {
        if f.kind == FindingKind::BlowUp && f.statistic == health::DEPARTURE_STATISTIC {
            f.supports = None;
            f.detail.push_str(&format!(
                "; {falling} of {residuals} residuals fall meanwhile: the solution moving to a new state (noted, not deciding)"
            ));
        }
    }
}

/// A monitor failing its criteria, for the run-level rules.
struct Failing {
    name: String,
    window: usize,
    /// The failing criterion in words ("drag drifts +0.3 % of the mean over …").
    why: String,
    /// How many of its criteria fail.
    count: usize,
}

/// Last touches that need every finding: no estimate of iterations to target while anything
/// argues for divergence (otherwise the estimates go into the trend details); a stall and a
/// deciding oscillation of the same residual name each other; evidence ranges stay inside
/// the data.
fn finish(sink: &mut Sink, first: i64, last: i64) {
    departure_while_falling(sink);
    let diverging = sink.findings.iter().any(|f| f.supports == Some(Verdict::Diverging));
    if diverging {
        for r in &mut sink.residuals {
            r.eta_iterations = None;
            r.eta_range = None;
            r.eta_window = None;
        }
    } else {
        for (i, note) in std::mem::take(&mut sink.eta_notes) {
            if let Some(f) = sink.findings.get_mut(i) {
                f.detail.push_str(&note);
            }
        }
    }
    let stalls: Vec<(String, i64)> = sink
        .findings
        .iter()
        .filter(|f| f.kind == FindingKind::Stall && f.supports == Some(Verdict::Stalled))
        .filter_map(|f| f.series.clone().map(|s| (s, f.last.saturating_sub(f.first))))
        .collect();
    for f in &mut sink.findings {
        let Some(series) = f.series.clone() else { continue };
        if f.kind == FindingKind::Oscillation && f.supports == Some(Verdict::Oscillating) {
            if let Some((_, n)) = stalls.iter().find(|(s, _)| *s == series) {
                f.detail.push_str(&format!(
                    "; it has also not fallen for {n} iterations (a stall at the level of the cycle)"
                ));
            }
        }
    }
    for f in &mut sink.findings {
        f.last = f.last.clamp(first, last);
        f.first = f.first.clamp(first, f.last);
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

/// Residual criteria met while a monitor fails stationarity → suspect, dated from when the
/// residual criteria were all met; the solver's own end or convergence mark while a monitor
/// fails → suspect.
fn false_convergence(
    input: &RunInput<'_>,
    residuals_met: bool,
    met_since: Option<i64>,
    failing: &[Failing],
    last: i64,
    sink: &mut Sink,
) {
    for m in failing {
        if residuals_met {
            let first = met_since.unwrap_or(last).max(last.saturating_sub(m.window as i64 - 1));
            let mut f = finding(
                FindingKind::FalseConvergence,
                &m.name,
                first,
                last,
                "monitor_criteria_failed",
            );
            f.value = m.count as f64;
            f.supports = Some(Verdict::Suspect);
            f.detail = format!(
                "every residual criterion is met but {}: the solution is still changing",
                m.why
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
        let names: Vec<&str> = failing.iter().map(|m| m.name.as_str()).collect();
        let mut f =
            finding(FindingKind::SolverStoppedEarly, "", at.min(last), last, "monitors_failing");
        f.series = (names.len() == 1).then(|| names[0].to_string());
        f.value = names.len() as f64;
        f.supports = Some(Verdict::Suspect);
        f.detail = format!(
            "the solver reached {what} at it {} while {}{}",
            at.min(last),
            failing[0].why,
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
    let it = e.iteration.or(last_it).unwrap_or(0).min(last_it.unwrap_or(i64::MAX));
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
