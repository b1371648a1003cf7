//! Re-judge cadence of a headless watcher following many growing runs, with the judge's
//! cost per call measured on the same data.
//!
//! Run: `cargo bench --bench rejudge` (SETTLE_REJUDGE_RUNS, default 200; SETTLE_REJUDGE_GROWING,
//! how many of them grow, default all; SETTLE_REJUDGE_STEPS, steps already in each log,
//! default 1000; SETTLE_REJUDGE_SECONDS, default 30; SETTLE_BIN, another settle binary to
//! measure instead, for before/after comparisons).
//!
//! Synthetic tarn logs (our invented solver) grow by one step per run per second while
//! `settle watch --headless --json --heartbeat 0.25 --refresh 1` follows them all. Four times a second
//! each run prints a line with the iteration its latest judgement saw; the number of
//! distinct judged iterations per run over the window is the number of judgements, so the
//! window divided by it is the re-judge interval. Alongside: the judge's cost per call on
//! one such run (median of in-process calls), the interval the budget rule allows for that
//! cost (judging all growing runs about 5 % of one core: `20 × runs × cost`, never below
//! the refresh interval), and the watcher's CPU share from /proc.

use std::collections::{BTreeMap, BTreeSet};
use std::io::{BufRead, BufReader, Write};
use std::path::PathBuf;
use std::process::{Command, Stdio};
use std::sync::{Arc, Mutex};
use std::time::{Duration, Instant};

use settle::synth::{self, Options, Scenario};

fn env(name: &str, default: u64) -> u64 {
    std::env::var(name).ok().and_then(|s| s.parse().ok()).unwrap_or(default)
}

fn cpu_ticks(pid: u32) -> Option<u64> {
    let stat = std::fs::read_to_string(format!("/proc/{pid}/stat")).ok()?;
    let rest = &stat[stat.rfind(')')? + 2..];
    let f: Vec<&str> = rest.split_whitespace().collect();
    Some(f.get(11)?.parse::<u64>().ok()? + f.get(12)?.parse::<u64>().ok()?)
}

fn main() {
    let runs = env("SETTLE_REJUDGE_RUNS", 200) as usize;
    let growing = (env("SETTLE_REJUDGE_GROWING", runs as u64) as usize).min(runs);
    let steps = env("SETTLE_REJUDGE_STEPS", 1000) as usize;
    let secs = env("SETTLE_REJUDGE_SECONDS", 30);
    let total = steps + secs as usize + 60;
    let opts = Options { iterations: Some(total), ..Options::default() };
    let run = synth::generate_with(Scenario::StillConverging, 3, &opts);
    let dir = tempfile::tempdir().expect("tempdir");
    let mut paths: Vec<PathBuf> = Vec::new();
    for i in 0..runs {
        // One directory per run, so that each is named by its directory.
        let d = dir.path().join(format!("run{i:03}"));
        std::fs::create_dir(&d).expect("run directory");
        let p = d.join("tarn.log");
        let mut text = synth::render_banner(&run);
        for s in 0..steps {
            text.push_str(&synth::render_step(&run, s));
        }
        std::fs::write(&p, text).expect("write log");
        paths.push(p);
    }

    // The judge's cost on one run of this length (in-process, the same code the watcher runs).
    let spec = settle::run::config::from_files(std::slice::from_ref(&paths[0]), Some("tarn"));
    let reg = Arc::new(settle::parser::Registry::builtin());
    let (store, _) = settle::run::pipeline::read_run(&spec, reg).expect("read");
    let mut costs: Vec<Duration> = (0..15)
        .map(|_| {
            let t = Instant::now();
            let j = settle::judge::judge(&store.judge_input(), &spec.criteria);
            std::hint::black_box(j);
            t.elapsed()
        })
        .collect();
    costs.sort();
    let cost = costs[costs.len() / 2];
    let allowed = Duration::from_secs(1).max(cost * 20 * growing as u32);

    let bin = std::env::var_os("SETTLE_BIN")
        .map(PathBuf::from)
        .unwrap_or_else(|| PathBuf::from(env!("CARGO_BIN_EXE_settle")));
    let mut child = Command::new(&bin)
        .args(["watch", "--headless", "--json", "--heartbeat", "0.25", "--refresh", "1"])
        .args(["--poll", "1", "--exit-when", "never", "--stale", "1h", "--parser", "tarn"])
        .args(paths.iter().enumerate().flat_map(|(i, p)| {
            // `+` between runs: files given together would be one run of many sources.
            let sep = (i > 0).then(|| std::ffi::OsStr::new(settle::run::resolve::RUN_SEPARATOR));
            sep.into_iter().chain(std::iter::once(p.as_os_str()))
        }))
        .stdin(Stdio::null())
        .stdout(Stdio::piped())
        .spawn()
        .expect("settle");
    let out = child.stdout.take().expect("stdout");
    let seen: Arc<Mutex<Vec<(Instant, String, i64)>>> = Arc::new(Mutex::new(Vec::new()));
    let sink = Arc::clone(&seen);
    let reader = std::thread::spawn(move || {
        for line in BufReader::new(out).lines().map_while(Result::ok) {
            let Ok(v) = serde_json::from_str::<serde_json::Value>(&line) else { continue };
            if let (Some(run), Some(it)) = (v["run"].as_str(), v["iteration"].as_i64()) {
                sink.lock().expect("lines").push((Instant::now(), run.to_string(), it));
            }
        }
    });
    // Warm up (first reads), then grow every run by one step a second.
    std::thread::sleep(Duration::from_secs(5));
    let window_start = Instant::now();
    let ticks0 = cpu_ticks(child.id()).unwrap_or(0);
    for k in 0..secs as usize {
        let t = Instant::now();
        for p in &paths[..growing] {
            let mut f = std::fs::OpenOptions::new().append(true).open(p).expect("append");
            f.write_all(synth::render_step(&run, steps + k).as_bytes()).expect("write");
        }
        std::thread::sleep(Duration::from_secs(1).saturating_sub(t.elapsed()));
    }
    let wall = window_start.elapsed().as_secs_f64();
    let cpu = cpu_ticks(child.id()).unwrap_or(ticks0).saturating_sub(ticks0) as f64 / 100.0;
    let _ = child.kill();
    let _ = child.wait();
    let _ = reader.join();

    // Runs are named by their directory (`run007/tarn.log` or `run007`).
    let grew: BTreeSet<String> = paths[..growing]
        .iter()
        .filter_map(|p| p.parent()?.file_name().map(|n| n.to_string_lossy().into_owned()))
        .collect();
    let mut judged: BTreeMap<String, BTreeSet<i64>> = BTreeMap::new();
    for (at, run, it) in seen.lock().expect("lines").iter() {
        if *at >= window_start && run.split('/').any(|c| grew.contains(c)) {
            judged.entry(run.clone()).or_default().insert(*it);
        }
    }
    // The first iteration seen in the window was judged before it: judgements = distinct - 1.
    // A run judged not at all in the window counts as the whole window.
    let mut intervals: Vec<f64> =
        judged.values().map(|s| wall / (s.len().saturating_sub(1)).max(1) as f64).collect();
    intervals.sort_by(f64::total_cmp);
    let pick = |q: f64| intervals.get(((intervals.len() as f64 - 1.0) * q) as usize).copied();
    println!("{runs} runs of {steps}+ steps, {growing} growing by one step a second, {wall:.0} s:");
    println!("  binary                          : {}", bin.display());
    println!("  judge cost per call (median)    : {:.2} ms", cost.as_secs_f64() * 1e3);
    println!("  interval the budget rule allows : {:.1} s", allowed.as_secs_f64());
    match (pick(0.5), pick(0.9), intervals.last()) {
        (Some(m), Some(p90), Some(max)) => println!(
            "  re-judge interval, growing runs : median {m:.1} s, 90 % {p90:.1} s, max {max:.1} s \
             ({} runs seen)",
            intervals.len()
        ),
        _ => println!("  re-judge interval per run       : no lines seen"),
    }
    println!("  watcher CPU                     : {:.1} % of a core", cpu / wall * 100.0);
}
