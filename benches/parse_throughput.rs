//! Parser throughput on synthetic logs, side by side with `grep -c` and a plain byte scan.
//!
//! DESIGN §10 asks that the `lines` engine parse steps, residuals and monitors no slower
//! than `grep -c` of the step pattern on the same file, and the `table` engine come within a
//! few times of `cat`. This program writes a synthetic tarn log and a synthetic whitespace
//! table (invented demo values) to a temporary folder, then times, best of three:
//!
//! * the shipped `tarn` definition over the log (line splitting included),
//! * `grep -c '^\[step'` over the same file (when `grep` is installed),
//! * the shipped `table` definition over the table, a newline count in memory, and `cat` of
//!   the table file to `/dev/null`.
//!
//! Run with `cargo bench --bench parse_throughput` (registered with `harness = false`).
//! Sizes can be changed with `SETTLE_BENCH_MB` (default 64 MB per file). For instruction
//! counts under `valgrind --tool=callgrind --toggle-collect='*parse_all*'`,
//! `SETTLE_BENCH_ONLY=lines` (or `table`) runs one engine only and `SETTLE_BENCH_RUNS=1`
//! times a single pass; the byte counts printed turn the totals into instructions per byte.

use std::fs;
use std::io::Write;
use std::path::Path;
use std::process::Command;
use std::time::{Duration, Instant};

use settle::parser::{Definition, Registry};
use settle::record::Output;

/// Deterministic pseudo-random numbers for plausible-looking values.
struct Lcg(u64);

impl Lcg {
    fn next(&mut self) -> f64 {
        self.0 =
            self.0.wrapping_mul(6_364_136_223_846_793_005).wrapping_add(1_442_695_040_888_963_407);
        ((self.0 >> 11) as f64) / ((1u64 << 53) as f64)
    }
}

fn tarn_log(target: usize) -> Vec<u8> {
    let mut s = Vec::with_capacity(target + 4096);
    s.extend_from_slice(
        b"tarn 3.2.0 - incompressible RANS solver (k-omega SST)\ncase       : bench-duct\n\
mesh       : 412566 cells, 3 zones\nstarted    : 2026-11-30 08:14:02\n\
relaxation : U 0.7  p 0.3  k 0.8  omega 0.8\n\
--------------------------------------------------------------\n",
    );
    let mut rng = Lcg(7);
    let mut step = 0u64;
    while s.len() < target {
        step += 1;
        let decay = (-(step as f64) / 4000.0).exp();
        writeln!(s, "[step {step:>6}]  cfl 5.00e+00").ok();
        for (eq, sweeps) in [("Ux", 3), ("Uy", 3), ("Uz", 3), ("p", 18), ("k", 2), ("omega", 2)] {
            let r = decay * (0.5 + rng.next());
            writeln!(s, "  {eq:<8} res {r:.4e}   lin {sweeps:>3} sweeps").ok();
        }
        writeln!(s, "  continuity  imbalance {:.4e}", 4e-2 * decay * rng.next()).ok();
        writeln!(
            s,
            "  forces   drag {:.4e}  lift {:.4e}  dp {:.4e}",
            0.41 + 0.01 * rng.next(),
            0.021 + 0.001 * rng.next(),
            153.0 + rng.next()
        )
        .ok();
        if step % 50 == 0 {
            writeln!(s, "  notice: k bounded below at {} cells", 1 + (rng.next() * 20.0) as u32)
                .ok();
        }
        writeln!(s, "  wall {:.2} s", 0.4 + 0.05 * rng.next()).ok();
    }
    s.extend_from_slice(b"tarn: finished after 1 steps (wall 1.0 s)\n");
    s
}

fn table_file(target: usize) -> Vec<u8> {
    let mut s = Vec::with_capacity(target + 4096);
    s.extend_from_slice(
        b"# synthetic history\n  it        res_p       res_U       res_k        Cd          Cl\n",
    );
    let mut rng = Lcg(11);
    let mut it = 0u64;
    while s.len() < target {
        it += 1;
        let d = (-(it as f64) / 4000.0).exp();
        writeln!(
            s,
            "{it:>6}  {:.5e} {:.5e} {:.5e} {:.5e} {:.5e}",
            d * rng.next(),
            d * rng.next(),
            d * rng.next(),
            0.03 + 1e-4 * rng.next(),
            0.41 + 1e-3 * rng.next()
        )
        .ok();
    }
    s
}

/// Feed every line of `data` to a fresh parser; returns (records, values) so the work
/// cannot be optimised away.
fn parse_all(def: &Definition, data: &[u8]) -> (usize, usize) {
    let mut parser = def.parser();
    let mut out: Vec<Output> = Vec::with_capacity(1024);
    let (mut records, mut values) = (0, 0);
    let mut start = 0;
    for nl in memchr::memchr_iter(b'\n', data) {
        parser.feed(&data[start..nl], &mut out);
        start = nl + 1;
        if out.len() >= 1024 {
            count(&mut out, &mut records, &mut values);
        }
    }
    parser.finish(&mut out);
    count(&mut out, &mut records, &mut values);
    (records, values)
}

fn count(out: &mut Vec<Output>, records: &mut usize, values: &mut usize) {
    for o in out.drain(..) {
        if let Output::Record(r) = o {
            *records += 1;
            *values += r.values.len();
        }
    }
}

fn best_of<T>(n: usize, mut f: impl FnMut() -> T) -> (Duration, T) {
    let n = n.max(1);
    let mut best = Duration::MAX;
    let mut last = None;
    for _ in 0..n {
        let t = Instant::now();
        let v = f();
        best = best.min(t.elapsed());
        last = Some(v);
    }
    (best, last.expect("n >= 1"))
}

fn mb_per_s(bytes: usize, d: Duration) -> f64 {
    bytes as f64 / 1e6 / d.as_secs_f64()
}

fn grep_count(path: &Path) -> Option<(Duration, String)> {
    let run = || {
        Command::new("grep")
            .arg("-c")
            .arg(r"^\[step")
            .arg(path)
            .output()
            .ok()
            .filter(|o| o.status.success())
    };
    run()?; // warm the page cache and check that grep exists
    let (d, out) = best_of(3, run);
    Some((d, String::from_utf8_lossy(&out?.stdout).trim().to_string()))
}

fn cat_time(path: &Path) -> Option<Duration> {
    let run = || {
        Command::new("cat")
            .arg(path)
            .stdout(std::process::Stdio::null())
            .status()
            .ok()
            .filter(|s| s.success())
    };
    run()?;
    let (d, ok) = best_of(3, run);
    ok.map(|_| d)
}

fn main() {
    let mb: usize =
        std::env::var("SETTLE_BENCH_MB").ok().and_then(|v| v.parse().ok()).unwrap_or(64);
    let target = mb << 20;
    let runs: usize =
        std::env::var("SETTLE_BENCH_RUNS").ok().and_then(|v| v.parse().ok()).unwrap_or(3);
    let only = std::env::var("SETTLE_BENCH_ONLY").unwrap_or_default();
    let dir = std::env::temp_dir().join(format!("settle-bench-{}", std::process::id()));
    fs::create_dir_all(&dir).expect("temp dir is writable");
    let reg = Registry::builtin();
    if only.is_empty() || only == "lines" {
        bench_lines(reg.get("tarn").expect("shipped tarn definition"), target, runs, &dir);
    }
    if only.is_empty() || only == "table" {
        bench_table(reg.get("table").expect("shipped table definition"), target, runs, &dir);
    }
    fs::remove_dir_all(&dir).ok();
}

fn bench_lines(tarn: &Definition, target: usize, runs: usize, dir: &Path) {
    let log = tarn_log(target);
    let log_path = dir.join("bench.log");
    fs::write(&log_path, &log).expect("write synthetic log");
    // Read it back the way a follower's first bulk read would (from page cache).
    let log = fs::read(&log_path).expect("read synthetic log");
    let (d, (records, values)) = best_of(runs, || parse_all(tarn, &log));
    let lines_rate = mb_per_s(log.len(), d);
    println!(
        "lines engine (tarn): {} bytes in {:.3} s = {lines_rate:.0} MB/s ({records} records, {values} values)",
        log.len(),
        d.as_secs_f64()
    );
    match grep_count(&log_path) {
        Some((gd, n)) => {
            let grep_rate = mb_per_s(log.len(), gd);
            println!(
                "grep -c '^\\[step' : {:.3} s = {grep_rate:.0} MB/s (count {n}); lines engine / grep = {:.2}",
                gd.as_secs_f64(),
                lines_rate / grep_rate
            );
        }
        None => println!("grep -c: not available"),
    }
}

fn bench_table(table: &Definition, target: usize, runs: usize, dir: &Path) {
    let tab = table_file(target);
    let tab_path = dir.join("bench.dat");
    fs::write(&tab_path, &tab).expect("write synthetic table");
    let tab = fs::read(&tab_path).expect("read synthetic table");
    let (d, (records, values)) = best_of(runs, || parse_all(table, &tab));
    let table_rate = mb_per_s(tab.len(), d);
    let (cd, n) = best_of(runs, || memchr::memchr_iter(b'\n', &tab).count());
    let scan_rate = mb_per_s(tab.len(), cd);
    println!(
        "table engine: {} bytes in {:.3} s = {table_rate:.0} MB/s ({records} records, {values} values)",
        tab.len(),
        d.as_secs_f64()
    );
    println!(
        "newline count in memory: {scan_rate:.0} MB/s ({n} lines); table engine / count = {:.3}",
        table_rate / scan_rate
    );
    if let Some(d) = cat_time(&tab_path) {
        let cat_rate = mb_per_s(tab.len(), d);
        println!(
            "cat > /dev/null: {cat_rate:.0} MB/s; table engine / cat = {:.3}",
            table_rate / cat_rate
        );
    }
}
