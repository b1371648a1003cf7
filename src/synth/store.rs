//! A synthetic run applied straight to a run store, as the tarn parser would fill it.
//!
//! The judge can then be measured over thousands of runs without writing and parsing
//! logs. Series names, roles, event rule names, line numbers and line counts mirror what
//! the log written by [`super::write_tarn_log`] contains, so a parser test can compare its
//! store with this one.

use std::borrow::Cow;

use super::tarn::finished_line;
use super::{EQUATIONS, End, SynthRun};
use crate::judge::{RunInput, SeriesInput};
use crate::record::{Event, LineStats, Output, Record, Role, SeriesInfo, Severity};
use crate::run::{RunStore, SourceStore};

/// Banner lines before the first step (5 facts and the rule).
const BANNER_LINES: u64 = 6;

/// The value a parser reads back from the printed text: asterisks (magnitudes of 1e100
/// and more) become an infinity of the same sign; everything else prints exactly as the
/// generator rounded it.
fn as_parsed(v: f64) -> f64 {
    if v.is_finite() && v.abs() >= 1e100 { f64::INFINITY.copysign(v) } else { v }
}

/// Series of a tarn log in the order the parser meets them, with their roles; a run with an
/// out-of-plane force adds the `side` column of its `forces.csv` last.
fn series_layout(unsteady: bool, side: bool) -> Vec<(String, Role)> {
    let mut s = vec![(if unsteady { "dt" } else { "cfl" }.to_string(), Role::Info)];
    for eq in EQUATIONS {
        s.push((eq.to_string(), Role::Residual));
        s.push((format!("{eq}/sweeps"), Role::Indicator));
    }
    s.push(("continuity".to_string(), Role::Indicator));
    for m in ["drag", "lift", "dp"] {
        s.push((m.to_string(), Role::Monitor));
    }
    if side {
        s.push(("side".to_string(), Role::Monitor));
    }
    s
}

/// The store of the complete run: one source `tarn.log` (parser `tarn`), with its end mark,
/// solver mark or crash event when the log has them. A run with an out-of-plane force also
/// gets the `side` series its `forces.csv` carries (as if that column came with the log).
pub fn to_store(run: &SynthRun) -> RunStore {
    to_store_prefix(run, run.steps.len())
}

/// The store of the first `steps` steps, as a watcher sees the run while it is still
/// being written: no end-of-run line, no crash lines, unless `steps` covers the whole run.
pub fn to_store_prefix(run: &SynthRun, steps: usize) -> RunStore {
    let whole = steps >= run.steps.len();
    let steps = steps.min(run.steps.len());
    let mut src = SourceStore::new("tarn.log", "tarn");
    let side = run.steps.first().is_some_and(|s| s.side.is_some());
    let layout = series_layout(run.unsteady(), side);
    let mut out: Vec<Output> = layout
        .iter()
        .enumerate()
        .map(|(id, (name, role))| {
            Output::Series(SeriesInfo { id: id as u32, name: name.clone(), role: *role })
        })
        .collect();
    let cont_id = 1 + 2 * EQUATIONS.len() as u32;
    let mut line = BANNER_LINES;
    let mut used = 0u64;
    for (k, st) in run.steps[..steps].iter().enumerate() {
        if let Some(from) = st.restart_from {
            line += 1;
            used += 1;
            out.push(Output::Event(Event {
                severity: Severity::Info,
                rule: "resumed".to_string(),
                message: format!("restarting from checkpoint at step {from}"),
                line,
                iteration: run.steps[..k].last().map(|p| p.iteration),
            }));
        }
        line += 1;
        used += 1;
        let step_line = line;
        let partial = match &run.crash {
            Some(c) if k + 1 == run.steps.len() => Some(c.printed_equations),
            _ => None,
        };
        let mut values = Vec::with_capacity(layout.len());
        values.push((0, st.dt.unwrap_or(st.cfl)));
        let equations = partial.unwrap_or(EQUATIONS.len()).min(st.residuals.len());
        for e in 0..equations {
            line += 1;
            used += 1;
            values.push((1 + 2 * e as u32, as_parsed(st.residuals[e].1)));
            values.push((2 + 2 * e as u32, f64::from(st.sweeps.get(e).copied().unwrap_or(0))));
        }
        let mut events = Vec::new();
        if partial.is_none() {
            line += 2;
            used += 2;
            values.push((cont_id, as_parsed(st.continuity)));
            values.push((cont_id + 1, as_parsed(st.drag)));
            values.push((cont_id + 2, as_parsed(st.lift)));
            values.push((cont_id + 3, as_parsed(st.dp)));
            if let (true, Some(v)) = (side, st.side) {
                values.push((cont_id + 4, as_parsed(v)));
            }
            for (rule, texts) in [("warning", &st.warnings), ("notice", &st.notices)] {
                for t in texts {
                    line += 1;
                    used += 1;
                    events.push(Output::Event(Event {
                        severity: Severity::Warning,
                        rule: rule.to_string(),
                        message: format!("{rule}: {t}"),
                        line,
                        iteration: Some(st.iteration),
                    }));
                }
            }
            line += 1; // wall
        }
        out.push(Output::Record(Record {
            iteration: Some(st.iteration),
            time: st.time,
            values,
            line: step_line,
        }));
        out.extend(events);
    }
    if whole {
        let it = run.last_iteration();
        match run.end {
            End::Finished => {
                if run.solver_converged {
                    line += 1;
                    used += 1;
                    out.push(Output::Event(Event {
                        severity: Severity::Info,
                        rule: "solver_converged".to_string(),
                        message: "tarn: residual targets reached".to_string(),
                        line,
                        iteration: Some(it),
                    }));
                }
                line += 2;
                used += 1;
                out.push(Output::EndOfRun { line, message: finished_line(run) });
            }
            End::Crash => {
                if let Some(c) = &run.crash {
                    line += 1;
                    used += 1;
                    out.push(Output::Event(Event {
                        severity: Severity::Error,
                        rule: "crash".to_string(),
                        message: format!("*** {}", c.message),
                        line,
                        iteration: Some(it),
                    }));
                    line += c.trace.len() as u64;
                }
            }
            End::Running => {}
        }
    }
    src.apply(out);
    src.set_stats(LineStats { lines: line, used, skipped: 0, ignored: line - used });
    let mut store = RunStore::new(run.case.clone());
    store.sources.push(src);
    store
}

/// The judge's view of the first `steps` steps, cut from the view of the complete run
/// (`full` must be `to_store(run).judge_input()`), without building a new store: every
/// series of [`to_store`] has one value per record from the first record on, so a prefix
/// is a slice. Events of the first `steps` steps are kept; end and crash marks are not.
pub fn prefix_input<'a>(full: &'a RunInput<'_>, run: &SynthRun, steps: usize) -> RunInput<'a> {
    let whole = steps >= run.steps.len();
    let events_kept: usize = if whole {
        full.events.len()
    } else {
        let per_step = |s: &super::Step| {
            s.warnings.len() + s.notices.len() + usize::from(s.restart_from.is_some())
        };
        run.steps[..steps].iter().map(per_step).sum()
    };
    let series = full
        .series
        .iter()
        .map(|s| {
            let count = s.values.len().min(steps);
            SeriesInput {
                name: Cow::Borrowed(&*s.name),
                role: s.role,
                iterations: Cow::Borrowed(&s.iterations[..count]),
                values: Cow::Borrowed(&s.values[..count]),
                segment_starts: s.segment_starts.iter().copied().filter(|&i| i < count).collect(),
                // The full run's aggregates do not describe a prefix: the judge scans.
                history: None,
            }
        })
        .collect();
    RunInput {
        series,
        events: full.events[..events_kept.min(full.events.len())]
            .iter()
            .map(|e| Cow::Borrowed(&**e))
            .collect(),
        ended: whole && full.ended,
        ended_at: if whole { full.ended_at } else { None },
    }
}

/// `input` as a log written every `every` iterations shows it: only the values at iterations
/// that are multiples of `every` are kept, with each segment's first value (a restarted
/// solver prints its first iteration) and, when `last` is set, the final value of each
/// series (a solver prints the iteration it stops at). Events are kept: warnings and marks
/// are printed when they happen. `every` ≤ 1 returns `input` as it is.
pub fn sparse_input(input: RunInput<'_>, every: i64, last: bool) -> RunInput<'_> {
    if every <= 1 {
        return input;
    }
    let series = input
        .series
        .into_iter()
        .map(|s| {
            let n = s.values.len().min(s.iterations.len());
            let keep: Vec<usize> = (0..n)
                .filter(|&i| {
                    s.iterations[i] % every == 0
                        || (last && i + 1 == n)
                        || s.segment_starts.contains(&i)
                })
                .collect();
            let segment_starts = s
                .segment_starts
                .iter()
                .filter_map(|st| keep.iter().position(|i| i == st))
                .collect();
            SeriesInput {
                iterations: Cow::Owned(keep.iter().map(|&i| s.iterations[i]).collect()),
                values: Cow::Owned(keep.iter().map(|&i| s.values[i]).collect()),
                segment_starts,
                // The store's aggregates describe every value: the judge scans.
                history: None,
                ..s
            }
        })
        .collect();
    RunInput { series, ..input }
}

/// Step counts of the growing prefixes on which to look for the first detection of the
/// labelled behaviour: from the first step at or after the onset to the whole run, at least
/// `min_stride` steps apart and at most about `max_prefixes` of them (the last is always the
/// whole run). Empty when the run has no onset.
pub fn delay_prefixes(run: &SynthRun, max_prefixes: usize, min_stride: usize) -> Vec<usize> {
    let Some(onset) = run.onset else { return Vec::new() };
    let n = run.steps.len();
    let Some(k0) = run.steps.iter().position(|s| s.iteration >= onset) else {
        return Vec::new();
    };
    let stride = min_stride.max(1).max((n - k0).div_ceil(max_prefixes.max(1)));
    let mut out: Vec<usize> = (k0 + 1..n).step_by(stride).collect();
    out.push(n);
    out
}

/// Step counts of `count` live prefixes spread evenly from step `from` to the end (the
/// whole run excluded: a live view never has the end-of-run line).
pub fn live_prefixes(run: &SynthRun, count: usize, from: usize) -> Vec<usize> {
    let n = run.steps.len();
    if n <= from || count == 0 {
        return Vec::new();
    }
    let stride = (n - from).div_ceil(count).max(1);
    (from..n).step_by(stride).collect()
}

#[cfg(test)]
mod tests {
    use super::*;
    use crate::synth::{Options, Scenario, generate_with};

    #[test]
    fn delay_prefixes_are_bounded_and_start_at_the_onset() {
        let run =
            generate_with(Scenario::Stall, 2, &Options { iterations: Some(3000), case: None });
        let onset = run.onset.expect("stalls have an onset");
        let p = delay_prefixes(&run, 80, 25);
        assert!(p.len() <= 81, "{}", p.len());
        assert_eq!(*p.last().expect("non-empty"), run.steps.len());
        assert!(run.steps[p[0] - 1].iteration >= onset);
        assert!(p[0] == 1 || run.steps[p[0] - 2].iteration < onset);
        assert!(
            p.windows(2).all(|w| w[1] > w[0] && (w[1] - w[0] >= 25 || w[1] == run.steps.len()))
        );
        let healthy = generate_with(Scenario::Converging, 2, &Options::default());
        assert!(delay_prefixes(&healthy, 80, 25).is_empty());
    }

    #[test]
    fn a_sparse_log_keeps_every_kth_iteration_segment_starts_and_the_last() {
        // Restart seed 0: a restart from a checkpoint numbers its iterations on from there.
        let run = generate_with(Scenario::Restart, 0, &Options::default());
        let store = to_store(&run);
        let full = store.judge_input();
        let seg = run.steps.iter().rposition(|s| s.restart_from.is_some()).expect("restarted");
        let sparse = sparse_input(full.clone(), 10, true);
        fn drag<'a>(i: &'a RunInput<'_>) -> &'a SeriesInput<'a> {
            i.series.iter().find(|s| s.name == "drag").expect("drag")
        }
        let (d, s) = (drag(&full), drag(&sparse));
        let first_after = run.steps[seg].iteration;
        for (k, it) in s.iterations.iter().enumerate() {
            let at_start = s.segment_starts.contains(&k);
            assert!(it % 10 == 0 || at_start || k + 1 == s.iterations.len(), "{it}");
            // The value kept is the value at that iteration of that segment.
            let seg_of = s.segment_starts.iter().filter(|&&st| st <= k).count() - 1;
            let j = d.segment_starts[seg_of]
                + d.iterations[d.segment_starts[seg_of]..]
                    .iter()
                    .position(|i| i == it)
                    .expect("kept");
            assert_eq!(s.values[k], d.values[j]);
        }
        assert_eq!(s.segment_starts.len(), d.segment_starts.len());
        assert_eq!(s.iterations[s.segment_starts[1]], first_after);
        assert_eq!(s.iterations.last(), d.iterations.last());
        let tens = d.iterations.iter().filter(|i| *i % 10 == 0).count();
        assert!(s.iterations.len() <= tens + 3, "{} {tens}", s.iterations.len());
        // A prefix's last value is kept only when it is printed; every 1 changes nothing.
        let p = sparse_input(prefix_input(&full, &run, 105), 10, false);
        assert_eq!(drag(&p).iterations.last(), Some(&100));
        assert_eq!(sparse_input(full.clone(), 1, true).series[0].values, full.series[0].values);
        assert_eq!(sparse.events.len(), full.events.len());
    }

    #[test]
    fn live_prefixes_spread_over_the_run() {
        let run =
            generate_with(Scenario::Converging, 1, &Options { iterations: Some(1000), case: None });
        let p = live_prefixes(&run, 20, 100);
        assert_eq!(p[0], 100);
        assert!(p.len() <= 20 && p.len() >= 19);
        assert!(*p.last().expect("non-empty") < run.steps.len());
        assert!(live_prefixes(&run, 20, 5000).is_empty());
    }
}
