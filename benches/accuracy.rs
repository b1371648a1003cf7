//! Accuracy of the judge on labelled synthetic runs (`settle::synth`).
//!
//! For every scenario and `SETTLE_BENCH_SEEDS` seeds (default 50, starting at
//! `SETTLE_BENCH_SEED_BASE`, default 1000 — the judge was developed on seeds 0–29, so the
//! default figures come from seeds it was not tuned on) it builds the run store directly (no
//! parsing), judges the complete run with the default criteria and compares the verdict with
//! the label. Then, on growing prefixes judged as a live watcher sees them (no end-of-run or
//! crash line), it measures per scenario:
//!
//! * **detection delay** (runs with a labelled onset): iterations from the onset to the first
//!   prefix given the expected verdict; for runs that crash, also the **lead** — iterations
//!   from that prefix to the crash (target: at least 30 on every early blow-up);
//! * **converged delay** (runs labelled `converged`): iterations from the true settling step
//!   (`Truth::settled`, from the noise-free model) to the first prefix judged `converged`
//!   (in the latest segment: a restart can undo a convergence called before it; from the
//!   start when the run truly settled before the restart and stayed so through it);
//!   the target is at most max(100, 20 % of the run) and never negative ("early" counts the
//!   runs called converged before the truth);
//! * **ETA error** (runs whose residuals meet their 3-decade drop, in the run or in its
//!   continuation, without a restart between the halfway point and that step): at the
//!   prefix halfway to that step, the judge's estimate of the remaining
//!   iterations (the slowest residual's) against the true remainder, |error| in percent;
//! * **false alarms** (healthy runs): the share of prefixes judged `diverging`, `stalled` or
//!   `oscillating` (target 0), and, separately, `suspect`;
//! * **calls taken back** (healthy runs): the share of the prefixes after the first
//!   `converged` call that are judged otherwise again (a watcher sees the call withdrawn).
//!
//! Prefixes are taken every `max(1, steps/160)` steps from step 30 (and every step near an
//! early crash). `SETTLE_BENCH_SCENARIOS=stall,restart` limits the scenarios;
//! `SETTLE_BENCH_ITERATIONS=600` cuts every run to about that many iterations (the
//! generator's option; a scenario's label is written for its own length, so read a miss on
//! a cut run against the run before calling it one); `SETTLE_BENCH_EVERY=10` judges every
//! run as a log written every 10 iterations shows it (`synth::sparse_input`; the truth stays
//! the generator's, iteration by iteration).
//!
//! Run with `cargo bench --bench accuracy`. The numbers describe the judge on invented data;
//! they are a regression guard and a map of weaknesses, not a validation.

use std::collections::BTreeMap;
use std::time::{Duration, Instant};

use settle::judge::{self, Criteria, Judgement, RunInput, Verdict};
use settle::synth::{self, End, Scenario, SynthRun};

const DEFAULT_SEEDS: u64 = 50;
const DEFAULT_SEED_BASE: u64 = 1000;
/// Prefixes start at this step (a watcher judges from the first tens of iterations on).
const PREFIX_FROM: usize = 30;
/// About this many prefixes per run.
const PREFIXES_PER_RUN: usize = 160;

/// Verdicts that on a healthy run are false alarms with the target zero.
fn is_alarm(v: Verdict) -> bool {
    matches!(v, Verdict::Diverging | Verdict::Oscillating | Verdict::Stalled)
}

/// Judge calls and their time.
#[derive(Default)]
struct Clock {
    calls: u64,
    spent: Duration,
}

impl Clock {
    fn judge(&mut self, input: &RunInput<'_>, criteria: &Criteria) -> Judgement {
        let t = Instant::now();
        let j = judge::judge(input, criteria);
        self.spent += t.elapsed();
        self.calls += 1;
        j
    }
}

#[derive(Default)]
struct Row {
    runs: usize,
    correct: usize,
    wrong: BTreeMap<Verdict, usize>,
    delays: Vec<i64>,
    undetected: usize,
    leads: Vec<i64>,
    conv_delays: Vec<i64>,
    conv_early: usize,
    conv_late: usize,
    conv_never: usize,
    eta_errors: Vec<f64>,
    eta_missing: usize,
    prefixes: usize,
    alarm_prefixes: usize,
    suspect_prefixes: usize,
    alarm_kinds: BTreeMap<Verdict, usize>,
    after_call: usize,
    taken_back: usize,
}

/// The prefix step counts judged for a run: every `stride` steps from [`PREFIX_FROM`], every
/// step in the last 80 of a crashing run shorter than 400 steps, and the whole run.
fn prefixes(run: &SynthRun) -> Vec<usize> {
    let n = run.steps.len();
    let stride = (n / PREFIXES_PER_RUN).max(1);
    let mut out: Vec<usize> = (PREFIX_FROM.min(n)..n).step_by(stride).collect();
    if run.end == End::Crash && n < 400 {
        out.extend(n.saturating_sub(80)..n);
    }
    out.push(n);
    out.sort_unstable();
    out.dedup();
    out.retain(|&k| k >= 1);
    out
}

fn pct(a: usize, b: usize) -> f64 {
    if b == 0 { f64::NAN } else { 100.0 * a as f64 / b as f64 }
}

fn quantile_i(sorted: &[i64], q: f64) -> Option<i64> {
    if sorted.is_empty() {
        return None;
    }
    Some(sorted[((sorted.len() - 1) as f64 * q).round() as usize])
}

fn quantile_f(sorted: &[f64], q: f64) -> Option<f64> {
    if sorted.is_empty() {
        return None;
    }
    Some(sorted[((sorted.len() - 1) as f64 * q).round() as usize])
}

fn show(v: Option<i64>) -> String {
    v.map_or_else(|| "-".to_string(), |d| d.to_string())
}

/// The slowest residual's estimated remaining iterations (`Some(0)` when every residual has
/// met its criteria; `None` when some residual is unmet and has no estimate).
fn run_eta(j: &Judgement) -> Option<f64> {
    let mut worst = 0.0f64;
    for r in &j.residuals {
        let met = j.criteria.iter().filter(|c| c.series == r.series).all(|c| c.met);
        if met {
            continue;
        }
        worst = worst.max(r.eta_iterations?);
    }
    Some(worst)
}

fn measure(
    s: Scenario,
    seed: u64,
    criteria: &Criteria,
    opts: &synth::Options,
    every: i64,
    clock: &mut Clock,
    row: &mut Row,
) {
    let run = synth::generate_with(s, seed, opts);
    let store = synth::to_store(&run);
    let full = store.judge_input();
    let n = run.steps.len();
    let verdict = clock.judge(&synth::sparse_input(full.clone(), every, true), criteria).verdict;
    row.runs += 1;
    if verdict == s.expected() {
        row.correct += 1;
    } else {
        *row.wrong.entry(verdict).or_default() += 1;
    }

    let onset_step = run.onset.and_then(|o| run.steps.iter().position(|st| st.iteration >= o));
    // A restart can undo a convergence called before it: the converged call is looked for
    // in the latest segment — unless the run truly settled before the restart and stayed so
    // through it (`Truth::settled` counts every step, the abandoned ones too): then a call
    // made before the restart was right, and it is the one measured.
    let seg_start = run.steps.iter().rposition(|st| st.restart_from.is_some()).unwrap_or(0);
    let call_from = match run.truth.settled {
        Some(t) if t < seg_start => 0,
        _ => seg_start,
    };
    let mut detected: Option<usize> = None;
    let mut first_converged: Option<usize> = None;
    for k in prefixes(&run) {
        let whole = k == n;
        let input = synth::sparse_input(synth::prefix_input(&full, &run, k), every, false);
        let v = if whole { verdict } else { clock.judge(&input, criteria).verdict };
        if let Some(o) = onset_step
            && k > o
            && detected.is_none()
            && v == s.expected()
        {
            detected = Some(k);
        }
        if v == Verdict::Converged && first_converged.is_none() && k > call_from {
            first_converged = Some(k);
        }
        if s.healthy() && !whole && first_converged.is_some_and(|f| k > f) {
            row.after_call += 1;
            row.taken_back += usize::from(v != Verdict::Converged);
        }
        if s.healthy() && !whole {
            row.prefixes += 1;
            if is_alarm(v) {
                row.alarm_prefixes += 1;
                *row.alarm_kinds.entry(v).or_default() += 1;
            } else if v == Verdict::Suspect {
                row.suspect_prefixes += 1;
            }
        }
    }
    if let Some(o) = onset_step {
        match detected {
            Some(k) => {
                row.delays.push(run.steps[k - 1].iteration - run.steps[o].iteration);
                if run.end == End::Crash {
                    row.leads.push(run.last_iteration() - run.steps[k - 1].iteration);
                }
            }
            None => row.undetected += 1,
        }
    }
    if let Some(t) = run.truth.settled {
        // Steps, not iteration numbers: a restart repeats iteration numbers.
        let allowed = 100.max(n / 5) as i64;
        match first_converged {
            Some(k) => {
                let d = (k - 1) as i64 - t as i64;
                row.conv_delays.push(d);
                row.conv_early += usize::from(d < 0);
                row.conv_late += usize::from(d > allowed);
            }
            None => row.conv_never += 1,
        }
    }
    // Halfway to the step the residuals meet their drop; not when a restart falls between
    // the halfway point and that step (an event no estimate made before it can foresee).
    if let Some(met) = run.truth.residuals_met
        && met >= 2 * PREFIX_FROM
        && !(seg_start > met / 2 && seg_start <= met)
    {
        let half = met / 2;
        let input = synth::sparse_input(synth::prefix_input(&full, &run, half + 1), every, false);
        let j = clock.judge(&input, criteria);
        let truth = (met - half) as f64;
        match run_eta(&j) {
            Some(e) => row.eta_errors.push(100.0 * (e - truth).abs() / truth),
            None => row.eta_missing += 1,
        }
    }
}

fn main() {
    let env_u64 = |k: &str| std::env::var(k).ok().and_then(|v| v.trim().parse::<u64>().ok());
    let seeds = env_u64("SETTLE_BENCH_SEEDS").filter(|&n| n > 0).unwrap_or(DEFAULT_SEEDS);
    let base = env_u64("SETTLE_BENCH_SEED_BASE").unwrap_or(DEFAULT_SEED_BASE);
    let wanted: Option<Vec<String>> = std::env::var("SETTLE_BENCH_SCENARIOS")
        .ok()
        .map(|v| v.split(',').map(|s| s.trim().to_string()).filter(|s| !s.is_empty()).collect());
    if let Some(w) = &wanted
        && let Some(bad) = w.iter().find(|name| Scenario::parse(name).is_none())
    {
        let names: Vec<&str> = Scenario::all().iter().map(|s| s.name()).collect();
        eprintln!("unknown scenario {bad:?}; known: {}", names.join(", "));
        std::process::exit(2);
    }
    let scenarios: Vec<Scenario> = Scenario::all()
        .iter()
        .copied()
        .filter(|s| wanted.as_ref().is_none_or(|w| w.iter().any(|n| n == s.name())))
        .collect();

    let iterations = env_u64("SETTLE_BENCH_ITERATIONS").map(|n| n as usize);
    let opts = synth::Options { iterations, case: None };
    let every = env_u64("SETTLE_BENCH_EVERY").map_or(1, |k| k as i64);
    let criteria = Criteria::default();
    let mut clock = Clock::default();
    let started = Instant::now();
    println!(
        "judge accuracy on synthetic runs: seeds {base}–{} per scenario, default criteria{}{}\n",
        base + seeds - 1,
        iterations.map_or_else(String::new, |n| format!(", runs cut to about {n} iterations")),
        if every > 1 { format!(", logs written every {every} iterations") } else { String::new() }
    );
    println!(
        "{:<28} {:<11} {:>6}  {:<22} {:>6} {:>6} {:>4} {:>5} {:>5} {:>6} {:>6} {:>5} {:>5} {:>6} {:>6} {:>6} {:>6} {:>6}",
        "scenario",
        "expected",
        "acc %",
        "wrong",
        "det50",
        "det90",
        "und",
        "lead",
        "conv",
        "cnv90",
        "cnvmx",
        "early",
        "late",
        "eta50",
        "eta90",
        "alarm%",
        "susp%",
        "back%"
    );
    let mut rows: Vec<(Scenario, Row)> = Vec::new();
    for &s in &scenarios {
        let mut row = Row::default();
        for seed in base..base + seeds {
            measure(s, seed, &criteria, &opts, every, &mut clock, &mut row);
        }
        row.delays.sort_unstable();
        row.leads.sort_unstable();
        row.conv_delays.sort_unstable();
        row.eta_errors.sort_by(f64::total_cmp);
        let wrong: Vec<String> = row.wrong.iter().map(|(v, n)| format!("{v}×{n}")).collect();
        let has_onset = !row.delays.is_empty() || row.undetected > 0;
        let has_truth = !row.conv_delays.is_empty() || row.conv_never > 0;
        let eta = |q: f64| {
            quantile_f(&row.eta_errors, q).map_or_else(|| "-".into(), |e| format!("{e:.0}"))
        };
        println!(
            "{:<28} {:<11} {:>6.1}  {:<22} {:>6} {:>6} {:>4} {:>5} {:>5} {:>6} {:>6} {:>5} {:>5} {:>6} {:>6} {:>6} {:>6} {:>6}",
            s.name(),
            s.expected().as_str(),
            pct(row.correct, row.runs),
            if wrong.is_empty() { "-".to_string() } else { wrong.join(" ") },
            show(quantile_i(&row.delays, 0.5)),
            show(quantile_i(&row.delays, 0.9)),
            if has_onset { row.undetected.to_string() } else { "-".to_string() },
            show(row.leads.first().copied()),
            show(quantile_i(&row.conv_delays, 0.5)),
            show(quantile_i(&row.conv_delays, 0.9)),
            show(row.conv_delays.last().copied()),
            if has_truth { row.conv_early.to_string() } else { "-".into() },
            if has_truth { (row.conv_late + row.conv_never).to_string() } else { "-".into() },
            eta(0.5),
            eta(0.9),
            if s.healthy() {
                format!("{:.1}", pct(row.alarm_prefixes, row.prefixes))
            } else {
                "-".into()
            },
            if s.healthy() {
                format!("{:.1}", pct(row.suspect_prefixes, row.prefixes))
            } else {
                "-".into()
            },
            if row.after_call > 0 {
                format!("{:.1}", pct(row.taken_back, row.after_call))
            } else {
                "-".into()
            },
        );
        if row.eta_missing > 0 {
            println!("{:<28} (no estimate at the halfway point in {} runs)", "", row.eta_missing);
        }
        if !row.alarm_kinds.is_empty() {
            let kinds: Vec<String> =
                row.alarm_kinds.iter().map(|(v, n)| format!("{v}×{n}")).collect();
            println!("{:<28} (alarm prefixes: {})", "", kinds.join(" "));
        }
        rows.push((s, row));
    }

    let runs: usize = rows.iter().map(|(_, r)| r.runs).sum();
    let correct: usize = rows.iter().map(|(_, r)| r.correct).sum();
    let healthy: Vec<&Row> = rows.iter().filter(|(s, _)| s.healthy()).map(|(_, r)| r).collect();
    let h_prefixes: usize = healthy.iter().map(|r| r.prefixes).sum();
    let h_alarms: usize = healthy.iter().map(|r| r.alarm_prefixes).sum();
    let h_suspect: usize = healthy.iter().map(|r| r.suspect_prefixes).sum();
    let h_after: usize = healthy.iter().map(|r| r.after_call).sum();
    let h_back: usize = healthy.iter().map(|r| r.taken_back).sum();
    println!();
    println!("overall accuracy on complete runs: {:.1} % of {runs} runs", pct(correct, runs));
    println!(
        "healthy prefixes: {h_prefixes}; diverging/stalled/oscillating on {h_alarms} ({:.2} %), \
         suspect on {h_suspect} ({:.2} %)",
        pct(h_alarms, h_prefixes),
        pct(h_suspect, h_prefixes)
    );
    println!(
        "converged calls taken back: {h_back} of {h_after} healthy prefixes after the first \
         call ({:.2} %)",
        pct(h_back, h_after)
    );
    let per_call = clock.spent.as_secs_f64() * 1e6 / clock.calls.max(1) as f64;
    println!(
        "judge calls: {} ({per_call:.0} µs each on average); total time {:.1} s",
        clock.calls,
        started.elapsed().as_secs_f64()
    );
    println!(
        "columns: det50/det90 median and 90th percentile of iterations from onset to the first \
         prefix with the expected verdict (und: never); lead: smallest number of iterations \
         between that prefix and the crash; conv/cnv90/cnvmx: median, 90th percentile and \
         largest delay of the first `converged` after the true settling step; early: runs \
         called converged before it; late: runs called later than max(100, 20 % of the run) \
         or never; eta50/eta90: |error| % of the remaining-iterations estimate at the halfway \
         point; alarm%/susp%: share of healthy prefixes judged diverging/stalled/oscillating, \
         and suspect; back%: share of the prefixes after the first `converged` call judged \
         otherwise again"
    );
}
