//! Accuracy of the judge on labelled synthetic runs (`settle::synth`).
//!
//! For every scenario and `SETTLE_BENCH_SEEDS` seeds (default 50) it builds the run store
//! directly (no parsing), judges the complete run with the default criteria and compares
//! the verdict with the label. It reports per scenario the accuracy and the wrong verdicts
//! given; for scenarios with an onset, the detection delay (iterations from the onset to the
//! first growing prefix, judged as a live run, whose verdict is the expected one; at most
//! 80 prefixes per run); and for healthy scenarios the false-alarm rate, on the complete run
//! and on up to 20 live prefixes per run. `SETTLE_BENCH_SCENARIOS=stall,restart` limits the
//! scenarios.
//!
//! Run with `cargo bench --bench accuracy`. The numbers describe the judge on invented data;
//! they are a regression guard and a map of weaknesses, not a validation.

use std::collections::BTreeMap;
use std::time::{Duration, Instant};

use settle::judge::{self, Criteria, Judgement, RunInput, Verdict};
use settle::synth::{self, Scenario, SynthRun};

const DEFAULT_SEEDS: u64 = 50;
const MAX_DELAY_PREFIXES: usize = 80;
const MIN_PREFIX_STRIDE: usize = 25;
const LIVE_PREFIXES: usize = 20;
/// Live prefixes start after this many steps (too little data to judge before).
const LIVE_FROM: usize = 100;

/// Verdicts that call for a decision: on a healthy run each one is a false alarm.
fn is_alarm(v: Verdict) -> bool {
    matches!(v, Verdict::Diverging | Verdict::Oscillating | Verdict::Stalled | Verdict::Suspect)
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
    final_alarms: usize,
    live_alarm_runs: usize,
    live_prefixes: usize,
    live_alarm_prefixes: usize,
}

/// Iterations from the onset to the first prefix judged `expected`, or `None`.
fn detection_delay(
    run: &SynthRun,
    full: &RunInput<'_>,
    criteria: &Criteria,
    clock: &mut Clock,
) -> Option<i64> {
    let onset = run.onset?;
    synth::delay_prefixes(run, MAX_DELAY_PREFIXES, MIN_PREFIX_STRIDE).into_iter().find_map(|k| {
        let input = synth::prefix_input(full, run, k);
        (clock.judge(&input, criteria).verdict == run.expected())
            .then(|| run.steps[k - 1].iteration - onset)
    })
}

/// Live prefixes of a healthy run: how many were judged, and the alarm verdicts raised.
fn live_alarms(
    run: &SynthRun,
    full: &RunInput<'_>,
    criteria: &Criteria,
    clock: &mut Clock,
) -> (usize, Vec<Verdict>) {
    let prefixes = synth::live_prefixes(run, LIVE_PREFIXES, LIVE_FROM);
    let alarms = prefixes
        .iter()
        .map(|&k| {
            let input = synth::prefix_input(full, run, k);
            clock.judge(&input, criteria).verdict
        })
        .filter(|&v| is_alarm(v))
        .collect();
    (prefixes.len(), alarms)
}

fn pct(a: usize, b: usize) -> f64 {
    if b == 0 { f64::NAN } else { 100.0 * a as f64 / b as f64 }
}

fn quantile(sorted: &[i64], q: f64) -> Option<i64> {
    if sorted.is_empty() {
        return None;
    }
    let i = ((sorted.len() - 1) as f64 * q).round() as usize;
    Some(sorted[i])
}

fn show(v: Option<i64>) -> String {
    v.map_or_else(|| "-".to_string(), |d| d.to_string())
}

fn main() {
    let seeds = std::env::var("SETTLE_BENCH_SEEDS")
        .ok()
        .and_then(|v| v.trim().parse::<u64>().ok())
        .filter(|&n| n > 0)
        .unwrap_or(DEFAULT_SEEDS);
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

    let criteria = Criteria::default();
    let mut clock = Clock::default();
    let started = Instant::now();
    println!("judge accuracy on synthetic runs: {seeds} seeds per scenario, default criteria\n");
    println!(
        "{:<29} {:<11} {:>7}  {:<34} {:>7} {:>7} {:>6}",
        "scenario", "expected", "acc %", "wrong verdicts", "delay50", "delay90", "undet"
    );
    let mut live_kinds: std::collections::BTreeMap<&str, usize> = std::collections::BTreeMap::new();
    let mut rows: Vec<(Scenario, Row)> = Vec::new();
    for &s in &scenarios {
        let mut row = Row::default();
        for seed in 0..seeds {
            let run = synth::generate(s, seed);
            let store = synth::to_store(&run);
            let full = store.judge_input();
            let verdict = clock.judge(&full, &criteria).verdict;
            row.runs += 1;
            if verdict == s.expected() {
                row.correct += 1;
            } else {
                *row.wrong.entry(verdict).or_default() += 1;
            }
            if run.onset.is_some() {
                match detection_delay(&run, &full, &criteria, &mut clock) {
                    Some(d) => row.delays.push(d),
                    None => row.undetected += 1,
                }
            }
            if s.healthy() {
                row.final_alarms += usize::from(is_alarm(verdict));
                let (judged, alarms) = live_alarms(&run, &full, &criteria, &mut clock);
                row.live_prefixes += judged;
                row.live_alarm_prefixes += alarms.len();
                row.live_alarm_runs += usize::from(!alarms.is_empty());
                for v in alarms {
                    *live_kinds.entry(v.as_str()).or_insert(0usize) += 1;
                }
            }
        }
        row.delays.sort_unstable();
        let wrong: Vec<String> = row.wrong.iter().map(|(v, n)| format!("{v}×{n}")).collect();
        let has_onset = !row.delays.is_empty() || row.undetected > 0;
        println!(
            "{:<29} {:<11} {:>7.1}  {:<34} {:>7} {:>7} {:>6}",
            s.name(),
            s.expected().as_str(),
            pct(row.correct, row.runs),
            if wrong.is_empty() { "-".to_string() } else { wrong.join(" ") },
            show(quantile(&row.delays, 0.5)),
            show(quantile(&row.delays, 0.9)),
            if has_onset { row.undetected.to_string() } else { "-".to_string() },
        );
        rows.push((s, row));
    }

    let runs: usize = rows.iter().map(|(_, r)| r.runs).sum();
    let correct: usize = rows.iter().map(|(_, r)| r.correct).sum();
    let healthy: Vec<&Row> = rows.iter().filter(|(s, _)| s.healthy()).map(|(_, r)| r).collect();
    let h_runs: usize = healthy.iter().map(|r| r.runs).sum();
    let h_final: usize = healthy.iter().map(|r| r.final_alarms).sum();
    let h_live_runs: usize = healthy.iter().map(|r| r.live_alarm_runs).sum();
    let h_prefixes: usize = healthy.iter().map(|r| r.live_prefixes).sum();
    let h_alarm_prefixes: usize = healthy.iter().map(|r| r.live_alarm_prefixes).sum();
    println!();
    println!("overall accuracy: {:.1} % of {runs} runs", pct(correct, runs));
    if h_runs > 0 {
        let names: Vec<&str> =
            rows.iter().filter(|(s, _)| s.healthy()).map(|(s, _)| s.name()).collect();
        println!("healthy scenarios: {}", names.join(", "));
        println!(
            "false alarms on complete healthy runs: {:.1} % ({h_final} of {h_runs})",
            pct(h_final, h_runs)
        );
        println!(
            "healthy runs with an alarm on some live prefix: {:.1} % ({h_live_runs} of {h_runs}); \
             alarm prefixes {:.1} % of {h_prefixes}",
            pct(h_live_runs, h_runs),
            pct(h_alarm_prefixes, h_prefixes)
        );
        let kinds: Vec<String> = live_kinds.iter().map(|(k, n)| format!("{k} {n}")).collect();
        println!("alarm verdicts on live prefixes of healthy runs: {}", kinds.join(", "));
    }
    let per_call = clock.spent.as_secs_f64() * 1e6 / clock.calls.max(1) as f64;
    println!(
        "judge calls: {} ({per_call:.0} µs each on average); total time {:.1} s",
        clock.calls,
        started.elapsed().as_secs_f64()
    );
    println!(
        "delay50/delay90: median and 90th percentile of iterations from onset to the first \
         live prefix with the expected verdict (prefix stride ≥ {MIN_PREFIX_STRIDE} iterations); \
         undet: runs where no prefix got it"
    );
}
