//! Trace the judge over the growing prefixes of one synthetic run: the verdict, and what each
//! monitor and residual shows, at every prefix. A developer's tool for reading why a scenario
//! is judged as it is (`cargo run --release --example judge_trace -- restart 7 [every]`).
//!
//! `SEED` may be a range `A-B` (one summary line per seed). Environment: `JUDGE_TRACE_AT=K`
//! judges only the prefix of `K` steps; `JUDGE_TRACE_RAW=1` prints every step's log10
//! residuals, sweeps, continuity and monitors instead; `JUDGE_TRACE_SERIES=FROM` prints
//! 40-step monitor means from step `FROM`; `JUDGE_TRACE_WHOLE=1` with a range prints only
//! each seed's verdict on the complete run (a quick sweep over many seeds); `JUDGE_TRACE_ETA=1`
//! with a range prints each residual's remaining-iterations estimate at the halfway point the
//! accuracy bench measures, against the truth; `JUDGE_TRACE_N=K` generates runs of about `K`
//! iterations (at least 200) instead of the scenario's own length; `JUDGE_TRACE_EVERY=K` judges
//! the run as a log written every `K` iterations shows it ([`synth::sparse_input`]);
//! `JUDGE_TRACE_ALL=1` prints every finding, notes included.

use settle::judge::{self, Criteria, FindingKind, Verdict};
use settle::synth::{self, Scenario};

/// The run of `scenario` for `seed`, of the length `JUDGE_TRACE_N` asks for, if any.
fn generate(scenario: Scenario, seed: u64) -> synth::SynthRun {
    let iterations = std::env::var("JUDGE_TRACE_N").ok().and_then(|v| v.parse().ok());
    synth::generate_with(scenario, seed, &synth::Options { iterations, ..Default::default() })
}

fn main() {
    let args: Vec<String> = std::env::args().skip(1).collect();
    let Some(scenario) = args.first().and_then(|s| Scenario::parse(s)) else {
        eprintln!("usage: judge_trace SCENARIO SEED [EVERY]");
        std::process::exit(2);
    };
    let seeds = args.get(1).map(String::as_str).unwrap_or("0");
    if let Some((a, b)) = seeds.split_once('-') {
        let (a, b): (u64, u64) = (a.parse().unwrap_or(0), b.parse().unwrap_or(0));
        let whole_only = std::env::var("JUDGE_TRACE_WHOLE").is_ok();
        let eta_only = std::env::var("JUDGE_TRACE_ETA").is_ok();
        for seed in a..=b {
            if eta_only {
                eta_at_halfway(scenario, seed);
            } else if whole_only {
                let run = generate(scenario, seed);
                let store = synth::to_store(&run);
                let input = thinned(store.judge_input(), true);
                let v = judge::judge(&input, &Criteria::default());
                println!("seed {seed}: whole {:?} expected {:?}", v.verdict, scenario.expected());
            } else {
                summary(scenario, seed);
            }
        }
        return;
    }
    let seed: u64 = seeds.parse().unwrap_or(0);
    let every: usize = args.get(2).and_then(|s| s.parse().ok()).unwrap_or(0);
    let run = generate(scenario, seed);
    let store = synth::to_store(&run);
    let full = store.judge_input();
    let n = run.steps.len();
    let seg = run.steps.iter().rposition(|s| s.restart_from.is_some()).unwrap_or(0);
    println!(
        "{} seed {seed}: {n} steps, segment from step {seg}, settled {:?}, residuals met {:?}, onset {:?}",
        scenario.name(),
        run.truth.settled,
        run.truth.residuals_met,
        run.onset
    );
    if let Some(from) = std::env::var("JUDGE_TRACE_SERIES").ok().and_then(|v| v.parse().ok()) {
        dump(&run, from);
        return;
    }
    if std::env::var("JUDGE_TRACE_RAW").is_ok() {
        for s in &run.steps {
            let r: Vec<String> =
                s.residuals.iter().map(|(_, x)| format!("{:7.3}", x.log10())).collect();
            println!(
                "{:5} {} sw {:?} cont {:.3e} drag {:.7e} lift {:.7e} dp {:.7e}",
                s.iteration,
                r.join(" "),
                s.sweeps,
                s.continuity,
                s.drag,
                s.lift,
                s.dp
            );
        }
        return;
    }
    let criteria = Criteria::default();
    let stride = if every > 0 { every } else { (n / 160).max(1) };
    let mut last: Option<Verdict> = None;
    let at = std::env::var("JUDGE_TRACE_AT").ok().and_then(|v| v.parse::<usize>().ok());
    let ks: Vec<usize> = match at {
        Some(k) => vec![k],
        None => (30.min(n)..=n).step_by(stride).chain(std::iter::once(n)).collect(),
    };
    for k in ks {
        let input = thinned(synth::prefix_input(&full, &run, k), k >= n);
        let j = judge::judge(&input, &criteria);
        let changed = last != Some(j.verdict);
        last = Some(j.verdict);
        if every == 0 && !changed && k != n {
            continue;
        }
        println!("step {k:5} it {:6}: {:?} since {:?}", j.iterations, j.verdict, j.since);
        for m in &j.monitors {
            let failing: Vec<&str> = j
                .criteria
                .iter()
                .filter(|c| c.series == m.series && !c.met)
                .map(|c| c.name.as_str())
                .collect();
            println!(
                "    {:10} drift {:+.4}% band {:.4}% win {} ({}..{}) tr {:?} fail {:?}",
                m.series,
                m.drift_pct,
                m.band_pct,
                m.window,
                m.window_first,
                m.window_last,
                m.transient_end,
                failing
            );
        }
        let all = std::env::var("JUDGE_TRACE_ALL").is_ok();
        let shown = |f: &&settle::judge::Finding| {
            all || f.supports.is_some()
                || matches!(f.kind, FindingKind::Oscillation | FindingKind::GrowingOscillation)
        };
        for f in j.findings.iter().filter(shown) {
            println!("    finding {:?} {:?}: {}", f.kind, f.series, f.detail);
        }
    }
}

/// One line per seed: the complete run's verdict, and the first prefix called `converged` in
/// the latest segment against the true settling step.
fn summary(scenario: Scenario, seed: u64) {
    let run = generate(scenario, seed);
    let store = synth::to_store(&run);
    let full = store.judge_input();
    let n = run.steps.len();
    let seg = run.steps.iter().rposition(|s| s.restart_from.is_some()).unwrap_or(0);
    let criteria = Criteria::default();
    let stride = (n / 160).max(1);
    let mut first = None;
    let mut first_div: Option<usize> = None;
    let mut alarms = Vec::new();
    // Prefixes judged after the first `converged` call that are not `converged` (a watcher
    // sees the call withdrawn), and of those, how many come after the allowed delay.
    let (mut lost, mut lost_late, mut after) = (0usize, 0usize, 0usize);
    // What was unmet on the withdrawn prefixes (series:criterion, or the verdict).
    let mut why: std::collections::BTreeMap<String, usize> = Default::default();
    let allowed = 100.max(n / 5);
    let mut ks: Vec<usize> = (30.min(n)..n).step_by(stride).collect();
    if run.end == synth::End::Crash && n < 400 {
        ks.extend(n.saturating_sub(80)..n);
        ks.sort_unstable();
        ks.dedup();
    }
    for k in ks {
        let input = thinned(synth::prefix_input(&full, &run, k), false);
        let j = judge::judge(&input, &criteria);
        let v = j.verdict;
        let call_from = match run.truth.settled {
            Some(t) if t < seg => 0,
            _ => seg,
        };
        if v == Verdict::Converged && first.is_none() && k > call_from {
            first = Some(k - 1);
        }
        if v == Verdict::Diverging && first_div.is_none() {
            first_div = Some(k);
        }
        if first.is_some_and(|f| k > f + 1) {
            after += 1;
            if v != Verdict::Converged {
                lost += 1;
                let unmet: Vec<String> = j
                    .criteria
                    .iter()
                    .filter(|c| !c.met)
                    .map(|c| format!("{}:{}", c.series, c.name))
                    .collect();
                let key = if unmet.is_empty() { format!("{v:?}") } else { unmet.join("+") };
                *why.entry(key).or_default() += 1;
                lost_late += usize::from(run.truth.settled.is_some_and(|t| k > t + allowed));
            }
        }
        if matches!(v, Verdict::Diverging | Verdict::Oscillating | Verdict::Stalled) {
            alarms.push((k, v));
        }
    }
    let whole = judge::judge(&thinned(full.clone(), true), &criteria).verdict;
    let delay = match (first, run.truth.settled) {
        (Some(f), Some(t)) => format!("{:+}", f as i64 - t as i64),
        _ => "-".into(),
    };
    let lead = first_div.map(|k| run.last_iteration() - run.steps[k - 1].iteration);
    println!(
        "seed {seed:3}: n {n:5} seg {seg:5} whole {whole:?} settled {:?} first conv {:?} delay {delay} lead {lead:?} withdrawn {lost}/{after} (late {lost_late}) alarms {:?} why {:?}",
        run.truth.settled, first, alarms, why
    );
}

/// Print, as the accuracy bench measures it, each residual's estimate of the iterations to its
/// 3-decade drop at the prefix halfway to the step where the residuals meet it
/// (`JUDGE_TRACE_ETA=1` with a seed range).
fn eta_at_halfway(scenario: Scenario, seed: u64) {
    let run = generate(scenario, seed);
    let store = synth::to_store(&run);
    let full = store.judge_input();
    let seg = run.steps.iter().rposition(|s| s.restart_from.is_some()).unwrap_or(0);
    let Some(met) = run.truth.residuals_met.filter(|&m| m >= 60 && !(seg > m / 2 && seg <= m))
    else {
        println!("seed {seed:3}: no halfway estimate measured");
        return;
    };
    let half = met / 2;
    let j = judge::judge(
        &thinned(synth::prefix_input(&full, &run, half + 1), false),
        &Criteria::default(),
    );
    let truth = (met - half) as f64;
    let mut worst: Option<f64> = Some(0.0);
    let mut range = (0.0f64, 0.0f64);
    let mut parts = Vec::new();
    for r in &j.residuals {
        let met = j.criteria.iter().filter(|c| c.series == r.series).all(|c| c.met);
        let e = r.eta_iterations;
        if !met {
            worst = match (worst, e) {
                (Some(w), Some(e)) => Some(w.max(e)),
                _ => None,
            };
            if let Some((lo, hi)) = r.eta_range {
                range = (range.0.max(lo), range.1.max(hi));
            }
        }
        parts.push(format!("{} {}", r.series, e.map_or("-".into(), |e| format!("{e:.0}"))));
    }
    let err = worst.map_or("-".into(), |w| format!("{:+.0} %", 100.0 * (w - truth) / truth));
    // The slowest residual's range: the largest of the residuals' fewest and most.
    let covered = if range.0 <= truth && truth <= range.1 { "in" } else { "out" };
    println!(
        "seed {seed:3}: met {met} half {half} truth {truth:.0} est {} err {err} range {:.0}–{:.0} {covered} [{}]",
        worst.map_or("-".into(), |w| format!("{w:.0}")),
        range.0,
        range.1,
        parts.join(", ")
    );
}

/// Print 40-step means of the three monitors, relative to the mean of the last 200 steps
/// (percent), from step `from` (`JUDGE_TRACE_SERIES=from`).
pub fn dump(run: &synth::SynthRun, from: usize) {
    let n = run.steps.len();
    let tail = &run.steps[n.saturating_sub(200)..];
    let fin = |f: fn(&synth::Step) -> f64| tail.iter().map(f).sum::<f64>() / tail.len() as f64;
    let fs: [fn(&synth::Step) -> f64; 3] = [|s| s.drag, |s| s.lift, |s| s.dp];
    let finals: Vec<f64> = fs.iter().map(|f| fin(*f)).collect();
    for k in (from..n).step_by(40) {
        let chunk = &run.steps[k..(k + 40).min(n)];
        let rel: Vec<String> = fs
            .iter()
            .zip(&finals)
            .map(|(f, fv)| {
                let m = chunk.iter().map(f).sum::<f64>() / chunk.len() as f64;
                format!("{:+.4}", 100.0 * (m - fv) / fv.abs())
            })
            .collect();
        println!("  steps {k:5}+40 it {:6}: {}", run.steps[k].iteration, rel.join(" "));
    }
}

/// `input` as a log written every `JUDGE_TRACE_EVERY` iterations shows it (all of it when
/// unset); `whole`: the complete run, whose last iteration the solver prints.
fn thinned(input: judge::RunInput<'_>, whole: bool) -> judge::RunInput<'_> {
    let every = std::env::var("JUDGE_TRACE_EVERY").ok().and_then(|v| v.parse().ok());
    synth::sparse_input(input, every.unwrap_or(1), whole)
}
