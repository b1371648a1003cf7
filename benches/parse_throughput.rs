//! Ingest throughput of the `settle` binary on large synthetic logs, side by side in one run
//! with `cat`, `grep -c` of the step pattern and a plain Python line-by-line regex reader.
//!
//! README "Speed and memory" and DEVELOPERS.md "Benchmarks" set the targets as ratios measured together: the `lines`
//! engine no slower than `grep -c` on one core and faster on two, the `table` engine within
//! 3× `cat`, at most 10 bytes of peak memory per stored value, and at least 12× the Python
//! peer. This program writes, at run time, into a temporary folder (nothing is committed):
//!
//! * a long multi-line log of our invented solver *tarn* in its verbose form, about 24 lines
//!   per step (residual table, Courant numbers, continuity, forces and moments with totals,
//!   coefficients, y+, mass flow, timing), read with the user-style definition
//!   `benches/tarn_verbose.toml`;
//! * a wide whitespace table (an iteration column and ten value columns) read with the
//!   shipped `table` definition.
//!
//! Each tool runs as a child process, best wall time of `SETTLE_BENCH_RUNS` (default 3),
//! with CPU time and peak RSS of that run from GNU `/usr/bin/time` when it is installed.
//! `settle parse` runs pinned to one core (`taskset -c 0`) and unpinned with two reading
//! threads (`SETTLE_THREADS=2`; by default it uses only the cores the load average leaves
//! free, and the load is printed beside the results since other work shares the cores); with
//! `SETTLE_BENCH_BEFORE=/path/to/older/settle` an older binary runs beside it in the same
//! run, which is how before → after figures are made.
//!
//! ```sh
//! cargo bench --bench parse_throughput                  # 200 MB per file
//! SETTLE_BENCH_MB=500 cargo bench --bench parse_throughput
//! SETTLE_BENCH_ONLY=lines cargo bench --bench parse_throughput   # or `table`
//! SETTLE_BENCH_KEEP=/tmp/b cargo bench --bench parse_throughput  # keep the files (perf)
//! ```

use std::fs;
use std::io::Write;
use std::path::{Path, PathBuf};
use std::process::{Command, Stdio};
use std::time::Instant;

/// Deterministic pseudo-random numbers for plausible-looking values.
struct Lcg(u64);

impl Lcg {
    fn next(&mut self) -> f64 {
        self.0 =
            self.0.wrapping_mul(6_364_136_223_846_793_005).wrapping_add(1_442_695_040_888_963_407);
        ((self.0 >> 11) as f64) / ((1u64 << 53) as f64)
    }
}

/// The verbose tarn log: about 24 lines per step (invented demo values).
fn write_tarn_verbose(path: &Path, target: usize) -> std::io::Result<()> {
    let mut s = Vec::with_capacity(target + 4096);
    s.extend_from_slice(
        b"tarn 3.2.0 - incompressible RANS solver (k-omega SST)\ncase       : bench-duct\n\
mesh       : 412566 cells, 3 zones\nstarted    : 2026-11-30 08:14:02\n\
output     : verbose\n\
--------------------------------------------------------------\n",
    );
    let mut rng = Lcg(7);
    let mut step = 0u64;
    let dt = 1e-3;
    let mut total = 0.0;
    while s.len() < target {
        step += 1;
        let decay = (-(step as f64) / 40_000.0).exp();
        let mut r = || rng.next();
        writeln!(s, "[step {step:>6}]  time {:.4e}  dt {dt:.4e}", step as f64 * dt)?;
        writeln!(s, "  courant    mean {:.4e}  max {:.4e}", 0.2 + 0.01 * r(), 0.8 + 0.05 * r())?;
        writeln!(s, "  equation       initial        final  sweeps")?;
        for (eq, sweeps) in
            [("Ux", 3), ("Uy", 3), ("Uz", 3), ("p", 18), ("k", 2), ("omega", 2), ("T", 4)]
        {
            let init = decay * (0.5 + r());
            writeln!(s, "  {eq:<8} {init:>12.4e} {:>12.4e} {sweeps:>7}", init * 1e-3 * r())?;
        }
        writeln!(
            s,
            "  continuity  local {:.4e}  global {:.4e}  cumulative {:.4e}",
            1e-9 * decay * r(),
            -1e-12 * r(),
            1e-10 * r()
        )?;
        for (head, scale) in [("forces (N)", 10.0), ("moments (N m)", 2.0)] {
            writeln!(s, "  {head}")?;
            let p = [scale * (1.0 + 0.01 * r()), 0.02 * scale * r(), 1e-4 * r()];
            let v = [0.03 * scale * r(), 1e-3 * r(), 1e-5 * r()];
            for (name, x) in [("pressure", p), ("viscous", v)] {
                writeln!(s, "    {name:<9} ( {:.4e} {:.4e} {:.4e} )", x[0], x[1], x[2])?;
            }
            let t = [p[0] + v[0], p[1] + v[1], p[2] + v[2]];
            writeln!(s, "    Total     ( {:.4e} {:.4e} {:.4e} )", t[0], t[1], t[2])?;
        }
        writeln!(
            s,
            "  coefficients  Cd {:.4e}  Cl {:.4e}  Cm {:.4e}",
            0.41 + 0.01 * r(),
            0.021 + 0.001 * r(),
            -1.2e-3 * r()
        )?;
        writeln!(
            s,
            "  y+         min {:.4e}  max {:.4e}  mean {:.4e}",
            0.1 * r(),
            45.0 * r(),
            3.2
        )?;
        let flow = 1.2 + 0.001 * r();
        writeln!(s, "  mass flow  in {flow:.4e}  out {:.4e}", -flow + 1e-6 * r())?;
        if step % 50 == 0 {
            writeln!(s, "  notice: k bounded below at {} cells", 1 + (r() * 20.0) as u32)?;
        }
        let wall = 0.4 + 0.05 * r();
        total += wall;
        writeln!(s, "  timing     step {wall:.4e} s  total {total:.4e} s")?;
        writeln!(s)?;
    }
    writeln!(s, "tarn: finished after {step} steps (wall {total:.1} s)")?;
    fs::write(path, s)
}

/// A wide whitespace table: an iteration column and ten value columns.
fn write_table(path: &Path, target: usize) -> std::io::Result<()> {
    let mut s = Vec::with_capacity(target + 4096);
    s.extend_from_slice(
        b"# synthetic history of an invented tarn case\n\
#       it         res_p        res_Ux        res_Uy        res_Uz         res_k     res_omega            Cd            Cl            Cm            dp\n",
    );
    let mut rng = Lcg(11);
    let mut it = 0u64;
    while s.len() < target {
        it += 1;
        let d = (-(it as f64) / 40_000.0).exp();
        write!(s, "{it:>10}")?;
        for _ in 0..6 {
            write!(s, " {:>13.6e}", d * rng.next())?;
        }
        for (base, spread) in [(0.41, 1e-3), (0.021, 1e-4), (-1.2e-3, 1e-5), (153.0, 0.5)] {
            write!(s, " {:>13.6e}", base + spread * rng.next())?;
        }
        writeln!(s)?;
    }
    fs::write(path, s)
}

/// One timed run of a child process.
#[derive(Debug, Clone)]
struct Run {
    wall: f64,
    /// User + system CPU seconds (from `/usr/bin/time`).
    cpu: Option<f64>,
    /// Peak resident set in bytes (from `/usr/bin/time`).
    rss: Option<u64>,
    stdout: String,
}

/// Run `argv` (optionally pinned to CPU 0) `runs` times; the run with the best wall time.
fn measure(argv: &[String], pin: bool, runs: usize, scratch: &Path) -> Option<Run> {
    measure_to(argv, pin, runs, scratch, true)
}

/// [`measure`]; without `capture` the child's output goes to `/dev/null`.
fn measure_to(
    argv: &[String],
    pin: bool,
    runs: usize,
    scratch: &Path,
    capture: bool,
) -> Option<Run> {
    let gnu_time = Path::new("/usr/bin/time").exists();
    let stats = scratch.join("time.out");
    let mut best: Option<Run> = None;
    for _ in 0..runs.max(1) {
        let mut full: Vec<String> = Vec::new();
        if gnu_time {
            full.extend(["/usr/bin/time", "-f", "%U %S %M", "-o"].map(String::from));
            full.push(stats.display().to_string());
        }
        if pin {
            full.extend(["taskset", "-c", "0"].map(String::from));
        }
        full.extend(argv.iter().cloned());
        let t = Instant::now();
        let out = Command::new(&full[0])
            .args(&full[1..])
            .stdin(Stdio::null())
            .stdout(if capture { Stdio::piped() } else { Stdio::null() })
            .stderr(Stdio::inherit())
            .output()
            .ok()?;
        let wall = t.elapsed().as_secs_f64();
        if !out.status.success() {
            eprintln!("{} failed: {}", argv.join(" "), out.status);
            return None;
        }
        let (cpu, rss) = if gnu_time {
            let text = fs::read_to_string(&stats).unwrap_or_default();
            let f: Vec<f64> = text
                .lines()
                .last()
                .unwrap_or("")
                .split_whitespace()
                .filter_map(|x| x.parse().ok())
                .collect();
            match f[..] {
                [u, s, m] => (Some(u + s), Some((m * 1024.0) as u64)),
                _ => (None, None),
            }
        } else {
            (None, None)
        };
        let run = Run { wall, cpu, rss, stdout: String::from_utf8_lossy(&out.stdout).into_owned() };
        if best.as_ref().is_none_or(|b| run.wall < b.wall) {
            best = Some(run);
        }
    }
    best
}

/// Total values stored, from the series table `settle parse` prints (`name role values …`).
/// The text form is used because building the JSON form of thousands of events would add
/// its own memory to the peak being measured.
fn values_of(parse_text: &str) -> u64 {
    let mut in_table = false;
    let mut total = 0;
    for line in parse_text.lines() {
        let cells: Vec<&str> = line.split_whitespace().collect();
        if cells.first() == Some(&"series") && cells.get(2) == Some(&"values") {
            in_table = true;
            continue;
        }
        match (in_table, cells.get(2).and_then(|v| v.parse::<u64>().ok())) {
            (true, Some(v)) if cells.len() >= 3 => total += v,
            _ => in_table = false,
        }
    }
    total
}

struct Row {
    name: String,
    run: Run,
    /// Values the tool keeps, for bytes per value.
    values: Option<u64>,
}

fn print_table(title: &str, bytes: u64, rows: &[Row]) {
    let find = |prefix: &str| rows.iter().find(|r| r.name.starts_with(prefix)).map(|r| r.run.wall);
    let (cat, grep, py) = (find("cat"), find("grep"), find("python"));
    // settle reads on the cores the load leaves free: the load says what "2 cores" meant.
    let load = fs::read_to_string("/proc/loadavg").unwrap_or_default();
    let load = load.split_whitespace().take(3).collect::<Vec<_>>().join(" ");
    println!("\n{title}: {:.1} MB (load average {load})", bytes as f64 / 1e6);
    println!(
        "  {:<26} {:>7} {:>8} {:>7} {:>8} {:>8} {:>9} {:>7} {:>9}",
        "tool", "wall s", "MB/s", "CPU s", "RSS MB", "B/value", "×grep -c", "×cat", "py/this"
    );
    for r in rows {
        let ratio =
            |base: Option<f64>| base.map_or("-".into(), |b| format!("{:.2}", r.run.wall / b));
        println!(
            "  {:<26} {:>7.3} {:>8.0} {:>7} {:>8} {:>8} {:>9} {:>7} {:>9}",
            r.name,
            r.run.wall,
            bytes as f64 / 1e6 / r.run.wall,
            r.run.cpu.map_or("-".into(), |c| format!("{c:.2}")),
            r.run.rss.map_or("-".into(), |m| format!("{:.1}", m as f64 / 1e6)),
            match (r.run.rss, r.values) {
                (Some(m), Some(v)) if v > 0 => format!("{:.1}", m as f64 / v as f64),
                _ => "-".into(),
            },
            ratio(grep),
            ratio(cat),
            py.map_or("-".into(), |p| format!("{:.1}", p / r.run.wall)),
        );
    }
}

/// The settle binaries to run: this build, and an older one when given.
fn binaries() -> Vec<(String, String)> {
    let mut b = vec![("settle".to_string(), env!("CARGO_BIN_EXE_settle").to_string())];
    if let Ok(before) = std::env::var("SETTLE_BENCH_BEFORE")
        && !before.is_empty()
    {
        b.push(("settle before".to_string(), before));
    }
    b
}

fn settle_rows(
    file: &Path,
    parser_args: &[String],
    runs: usize,
    scratch: &Path,
    rows: &mut Vec<Row>,
) {
    for (name, bin) in binaries() {
        // Pinned to one core; then on every core with two reading threads whatever the
        // load (`SETTLE_THREADS=2`; by default settle leaves busy cores alone).
        for pin in [true, false] {
            let mut argv =
                vec!["env".into(), "SETTLE_THREADS=2".into(), bin.clone(), "parse".into()];
            argv.extend(parser_args.iter().cloned());
            argv.push(file.display().to_string());
            if let Some(run) = measure(&argv, pin, runs, scratch) {
                let values = Some(values_of(&run.stdout));
                let cores = if pin { "1 core" } else { "2 cores" };
                rows.push(Row { name: format!("{name} parse ({cores})"), run, values });
            }
        }
    }
}

fn peer_row(kind: &str, file: &Path, runs: usize, scratch: &Path, rows: &mut Vec<Row>) {
    let peer = Path::new(env!("CARGO_MANIFEST_DIR")).join("benches/peer.py");
    let argv =
        vec!["python3".into(), peer.display().to_string(), kind.into(), file.display().to_string()];
    // One run: the peer takes tens of seconds, and its figure is only the scale.
    let _ = runs;
    if let Some(run) = measure(&argv, true, 1, scratch) {
        let values = run.stdout.split_whitespace().nth(2).and_then(|v| v.parse().ok());
        rows.push(Row { name: "python peer (1 core)".into(), run, values });
    }
}

fn base_rows(file: &Path, grep: Option<&str>, runs: usize, scratch: &Path, rows: &mut Vec<Row>) {
    let path = file.display().to_string();
    if let Some(run) = measure_to(&["cat".into(), path.clone()], true, runs, scratch, false) {
        rows.push(Row { name: "cat > /dev/null".into(), run, values: None });
    }
    if let Some(pattern) = grep
        && let Some(run) =
            measure(&["grep".into(), "-c".into(), pattern.into(), path], true, runs, scratch)
    {
        rows.push(Row { name: format!("grep -c '{pattern}'"), run, values: None });
    }
}

fn main() {
    let mb: usize =
        std::env::var("SETTLE_BENCH_MB").ok().and_then(|v| v.parse().ok()).unwrap_or(200);
    let runs: usize =
        std::env::var("SETTLE_BENCH_RUNS").ok().and_then(|v| v.parse().ok()).unwrap_or(3);
    let only = std::env::var("SETTLE_BENCH_ONLY").unwrap_or_default();
    let keep = std::env::var("SETTLE_BENCH_KEEP").ok().filter(|k| !k.is_empty());
    let dir = match &keep {
        Some(k) => PathBuf::from(k),
        None => std::env::temp_dir().join(format!("settle-bench-{}", std::process::id())),
    };
    fs::create_dir_all(&dir).expect("temp dir is writable");
    let target = mb << 20;
    let manifest = Path::new(env!("CARGO_MANIFEST_DIR"));

    if only.is_empty() || only == "lines" {
        let log = dir.join("tarn-verbose.log");
        if !log.exists() || keep.is_none() {
            write_tarn_verbose(&log, target).expect("write the synthetic log");
        }
        let bytes = fs::metadata(&log).map(|m| m.len()).unwrap_or(0);
        let def = manifest.join("benches/tarn_verbose.toml").display().to_string();
        let args = vec!["--parsers".into(), def, "--parser".into(), "tarn_verbose".into()];
        let mut rows = Vec::new();
        base_rows(&log, Some(r"^\[step"), runs, &dir, &mut rows);
        peer_row("lines", &log, runs, &dir, &mut rows);
        settle_rows(&log, &args, runs, &dir, &mut rows);
        print_table("lines engine, tarn verbose log", bytes, &rows);
    }
    if only.is_empty() || only == "table" {
        let tab = dir.join("history.dat");
        if !tab.exists() || keep.is_none() {
            write_table(&tab, target).expect("write the synthetic table");
        }
        let bytes = fs::metadata(&tab).map(|m| m.len()).unwrap_or(0);
        let args = vec!["--parser".into(), "table".into()];
        let mut rows = Vec::new();
        base_rows(&tab, None, runs, &dir, &mut rows);
        peer_row("table", &tab, runs, &dir, &mut rows);
        settle_rows(&tab, &args, runs, &dir, &mut rows);
        print_table("table engine, wide whitespace table", bytes, &rows);
    }
    println!(
        "\nRatios are wall times in this run (×grep -c, ×cat: lower is faster; py/this: how many \
         times faster than the Python peer). B/value: peak RSS over values stored."
    );
    if keep.is_none() {
        fs::remove_dir_all(&dir).ok();
    }
}
