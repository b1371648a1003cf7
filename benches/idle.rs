//! Idle cost of a watcher: CPU time of `settle watch --headless` following idle logs,
//! measured side by side with `tail -F` on the same files over the same interval.
//!
//! Run: `cargo bench --bench idle` (SETTLE_IDLE_SECONDS, default 20; SETTLE_IDLE_FILES,
//! default 10). Reads utime+stime from /proc/<pid>/stat (Linux), so the figure is CPU
//! seconds per wall second, independent of other load on the machine.

use std::path::Path;
use std::process::{Child, Command, Stdio};
use std::time::{Duration, Instant};

fn cpu_ticks(pid: u32) -> Option<u64> {
    let stat = std::fs::read_to_string(format!("/proc/{pid}/stat")).ok()?;
    // Fields after the parenthesised command name; utime and stime are fields 14 and 15.
    let rest = &stat[stat.rfind(')')? + 2..];
    let f: Vec<&str> = rest.split_whitespace().collect();
    Some(f.get(11)?.parse::<u64>().ok()? + f.get(12)?.parse::<u64>().ok()?)
}

/// CPU seconds per wall second of each process over the same `secs` (the ticks of a
/// process include all its threads).
fn measure(children: &[&Child], secs: u64) -> Vec<f64> {
    let before: Vec<u64> = children.iter().map(|c| cpu_ticks(c.id()).unwrap_or(0)).collect();
    let t0 = Instant::now();
    std::thread::sleep(Duration::from_secs(secs));
    let wall = t0.elapsed().as_secs_f64();
    let ticks_per_s = 100.0; // USER_HZ on Linux
    children
        .iter()
        .zip(before)
        .map(|(c, a)| cpu_ticks(c.id()).unwrap_or(a).saturating_sub(a) as f64 / ticks_per_s / wall)
        .collect()
}

fn main() {
    let secs: u64 =
        std::env::var("SETTLE_IDLE_SECONDS").ok().and_then(|s| s.parse().ok()).unwrap_or(20);
    let files: usize =
        std::env::var("SETTLE_IDLE_FILES").ok().and_then(|s| s.parse().ok()).unwrap_or(10);
    let dir = tempfile::tempdir().expect("tempdir");
    let mut paths = Vec::new();
    for i in 0..files {
        let p = dir.path().join(format!("run{i}.csv"));
        let mut text = String::from("iteration,res_p,res_U,Cd\n");
        for it in 1..=500 {
            let r = 10f64.powf(-(it as f64) / 100.0);
            text.push_str(&format!("{it},{r:.4e},{:.4e},{:.5}\n", r * 0.5, 0.3 + 0.01 / it as f64));
        }
        std::fs::write(&p, text).expect("write");
        paths.push(p);
    }
    let bin = Path::new(env!("CARGO_BIN_EXE_settle"));
    let mut settle = Command::new(bin)
        .args(["watch", "--headless", "--each", "--exit-when", "never", "--stale", "1h"])
        .args(&paths)
        .stdout(Stdio::null())
        .spawn()
        .expect("settle");
    let mut tail = Command::new("tail")
        .arg("-F")
        .args(&paths)
        .stdout(Stdio::null())
        .stderr(Stdio::null())
        .spawn()
        .expect("tail -F (coreutils)");
    // Let both finish their first read.
    std::thread::sleep(Duration::from_secs(3));
    let m = measure(&[&settle, &tail], secs);
    let (s, t) = (m[0], m[1]);
    let _ = settle.kill();
    let _ = tail.kill();
    let _ = settle.wait();
    let _ = tail.wait();
    println!("idle watchers over {secs} s, {files} files (CPU seconds per second):");
    println!("  settle watch --headless : {:.4} ({:.2} % of a core)", s, s * 100.0);
    println!("  tail -F (same files)    : {:.4} ({:.2} % of a core)", t, t * 100.0);
    println!("  target (README \"Speed and memory\"): well under 1 % of a core for 200 runs");
}
