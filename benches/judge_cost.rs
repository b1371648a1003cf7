//! The judge's cost per call against run length: one synthetic run of our invented solver
//! *tarn* at 10 k, 100 k, 1 M and 10 M records, judged as `watch` and `check` judge it
//! (`RunStore::judge_input` then `judge`).
//!
//! Run: `cargo bench --bench judge_cost` (SETTLE_JUDGE_SIZES, comma-separated record counts,
//! default `10000,100000,1000000,10000000`; SETTLE_JUDGE_REPS, calls per size, default 15;
//! SETTLE_JUDGE_SCAN=0 times the scanning judge once only, for profiling the other).
//! The 10 M run holds about 1.4 GB of values.
//!
//! The run is the same at every length: six residuals fall four and a half decades in the
//! first 4 000 iterations and then sit at a noisy floor (AR(1) noise), three force monitors
//! settle within the first few thousand iterations, sweep counts vary between 1 and 3, a
//! continuity error stays tiny, and every length is judged `converged`. From 100 k records
//! on, the last 50 000 records hold the same values at every length (the tail's noise is
//! drawn from its own seed), so the windowed tests, whose cost depends on what the windows
//! hold (a Monte Carlo p-value is drawn only for a borderline periodogram peak), do the same
//! work at 100 k and at 10 M, and only whole-run work can grow with the run.
//!
//! Printed: the median of the calls for the judge fed the store's running aggregates
//! ("summary", what `watch` and `check` do) and, in the same run, for the same input without
//! them ("scan": the judge then scans the run); the two judgements must be equal.

use std::time::{Duration, Instant};

use settle::judge::{self, Criteria, Judgement, RunInput};
use settle::record::{RecordRef, Role, SeriesInfo, Sink};
use settle::run::{RunStore, SourceStore};
use settle::synth::rng::Rng;

const EQUATIONS: [&str; 6] = ["Ux", "Uy", "Uz", "p", "k", "omega"];

/// Records at the end of every run that hold the same values whatever the run's length.
const TAIL: usize = 50_000;

/// A synthetic tarn run of `records` records, straight into a store (no parsing).
fn build(records: usize) -> RunStore {
    let mut src = SourceStore::new("tarn.log", "tarn");
    let mut names: Vec<(String, Role)> = vec![("cfl".into(), Role::Info)];
    for eq in EQUATIONS {
        names.push((eq.to_string(), Role::Residual));
        names.push((format!("{eq}/sweeps"), Role::Indicator));
    }
    names.push(("continuity".into(), Role::Indicator));
    for m in ["drag", "lift", "dp"] {
        names.push((m.to_string(), Role::Monitor));
    }
    for (id, (name, role)) in names.iter().enumerate() {
        Sink::series(&mut src, SeriesInfo { id: id as u32, name: name.clone(), role: *role });
    }
    src.reserve_records(records);
    let mut rng = Rng::new(2024);
    let mut noise = vec![0.0f64; EQUATIONS.len() + 4];
    let mut values: Vec<(u32, f64)> = Vec::with_capacity(names.len());
    for i in 0..records {
        let it = i as i64 + 1;
        if i + TAIL == records {
            // The last TAIL records draw the same noise at every length (see the header).
            rng = Rng::new(7);
            noise.iter_mut().for_each(|n| *n = 0.0);
        }
        values.clear();
        values.push((0, 5.0));
        for (e, n) in noise.iter_mut().enumerate() {
            *n = 0.9 * *n + 0.44 * rng.normal();
            let _ = e;
        }
        let fall = 4.5 * (it.min(4000) as f64) / 4000.0;
        for (e, _) in EQUATIONS.iter().enumerate() {
            let level = -fall - 0.3 * e as f64 + 0.05 * noise[e];
            values.push((1 + 2 * e as u32, 10f64.powf(level)));
            values.push((2 + 2 * e as u32, rng.int_range(1, 3) as f64));
        }
        let cont = 1 + 2 * EQUATIONS.len() as u32;
        values.push((cont, 1e-9 * (1.0 + 0.1 * noise[6])));
        let settle = 1.0 - (-(it as f64) / 500.0).exp();
        for (k, target) in [0.41, 0.12, 310.0].into_iter().enumerate() {
            let v = target * (0.8 + 0.2 * settle) * (1.0 + 2e-5 * noise[7 + k]);
            values.push((cont + 1 + k as u32, v));
        }
        src.record(RecordRef { iteration: Some(it), time: None, values: &values, line: 0 });
    }
    let mut run = RunStore::new("bench");
    run.sources.push(src);
    run
}

/// Median time of `reps` calls of `f`, and the last result.
fn median<T>(reps: usize, mut f: impl FnMut() -> T) -> (Duration, T) {
    let mut times = Vec::with_capacity(reps);
    let mut out = None;
    for _ in 0..reps {
        let t = Instant::now();
        let r = std::hint::black_box(f());
        times.push(t.elapsed());
        out = Some(r);
    }
    times.sort();
    (times[times.len() / 2], out.expect("at least one call"))
}

fn ms(d: Duration) -> f64 {
    d.as_secs_f64() * 1e3
}

fn main() {
    let sizes: Vec<usize> = std::env::var("SETTLE_JUDGE_SIZES")
        .ok()
        .map(|s| s.split(',').filter_map(|x| x.trim().parse().ok()).collect())
        .unwrap_or_else(|| vec![10_000, 100_000, 1_000_000, 10_000_000]);
    let reps: usize =
        std::env::var("SETTLE_JUDGE_REPS").ok().and_then(|s| s.parse().ok()).unwrap_or(15).max(1);
    // SETTLE_JUDGE_SCAN=0 times the scanning judge once only (for profiling the other).
    let scan = std::env::var("SETTLE_JUDGE_SCAN").map_or(true, |s| s != "0");
    let criteria = Criteria::default();
    println!("judge cost per call, median of {reps} (input = RunStore::judge_input):");
    println!(
        "{:>10} | {:>9} | {:>10} | {:>10} | {:>9} | verdict",
        "records", "input ms", "summary ms", "scan ms", "B/value"
    );
    let mut rows: Vec<(usize, f64, f64)> = Vec::new();
    for &n in &sizes {
        let run = build(n);
        let values: usize = run.sources[0].series().iter().map(|s| s.len()).sum();
        let bytes = run.sources[0].heap_bytes() as f64 / values as f64;
        let (t_in, _) = median(reps, || run.judge_input().series.len());
        let input: RunInput<'_> = run.judge_input();
        let (t_judge, j): (Duration, Judgement) = median(reps, || judge::judge(&input, &criteria));
        // The same input without the store's aggregates: the judge scans the history.
        let mut bare = input.clone();
        for s in &mut bare.series {
            s.history = None;
        }
        let scan_reps = if scan { reps } else { 1 };
        let (t_scan, j_scan): (Duration, Judgement) =
            median(scan_reps, || judge::judge(&bare, &criteria));
        // Debug text: NaN fields compare equal there.
        assert_eq!(format!("{j:?}"), format!("{j_scan:?}"), "aggregates changed the judgement");
        let total = ms(t_in) + ms(t_judge);
        println!(
            "{n:>10} | {:>9.3} | {:>10.3} | {:>10.3} | {bytes:>9.2} | {} since {:?}",
            ms(t_in),
            ms(t_judge),
            ms(t_scan),
            j.verdict,
            j.since
        );
        rows.push((n, total, ms(t_in) + ms(t_scan)));
    }
    if let Some(&(_, base, base_scan)) = rows.iter().find(|(n, _, _)| *n == 100_000) {
        println!("input + judge, against the call at 100 000 records (summary | scan):");
        for (n, t, t_scan) in &rows {
            println!("  {n:>10} records: {:.2}× | {:.2}×", t / base, t_scan / base_scan);
        }
    }
}
