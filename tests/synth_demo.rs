//! The live demo writer: files grow while it runs, it stops at once, it writes exactly the
//! generator's bytes, and it cleans up after itself.

use std::fs;
use std::path::Path;
use std::thread::sleep;
use std::time::{Duration, Instant};

use settle::demo;
use settle::synth::{self, Options, Scenario};

fn size(p: &Path) -> u64 {
    fs::metadata(p).map_or(0, |m| m.len())
}

/// Wait until `cond` holds, for at most `limit`.
fn wait_for(limit: Duration, mut cond: impl FnMut() -> bool) -> bool {
    let start = Instant::now();
    while start.elapsed() < limit {
        if cond() {
            return true;
        }
        sleep(Duration::from_millis(10));
    }
    cond()
}

#[test]
fn files_grow_while_running_and_stop_promptly() {
    let (run, writer) = demo::start(Scenario::Converging, 3, 400.0).expect("start demo");
    assert!(run.dir.starts_with(std::env::temp_dir()));
    assert!(run.config.exists());
    assert!(fs::read_to_string(&run.config).expect("config").contains("path = \"tarn.log\""));
    // The banner is flushed at once, like a solver's start-up lines.
    assert!(wait_for(Duration::from_secs(2), || {
        fs::read_to_string(&run.log).is_ok_and(|t| t.contains("relaxation : "))
    }));
    let a = size(&run.log);
    assert!(wait_for(Duration::from_secs(3), || size(&run.log) > a), "log did not grow");
    let b = size(&run.log);
    assert!(wait_for(Duration::from_secs(3), || size(&run.log) > b), "log stopped growing");
    assert!(wait_for(Duration::from_secs(3), || size(&run.forces) > 40), "forces.csv empty");
    assert!(writer.steps_done() > 0 && writer.steps_done() < writer.total_steps());
    assert!(!writer.is_finished());

    let t = Instant::now();
    writer.stop().expect("no write errors");
    assert!(t.elapsed() < Duration::from_millis(500), "stop took {:?}", t.elapsed());
    let frozen = size(&run.log);
    sleep(Duration::from_millis(150));
    assert_eq!(size(&run.log), frozen, "writer still writing after stop");

    let dir = run.dir.clone();
    drop(run);
    assert!(!dir.exists(), "demo directory not removed");
}

#[test]
fn complete_demo_writes_exactly_the_generated_files() {
    let opts = Options { iterations: Some(300), case: None };
    let made = synth::generate_with(Scenario::CrashNoNan, 5, &opts);
    let (mut log, mut csv) = (Vec::new(), Vec::new());
    synth::write_tarn_log(&made, &mut log).expect("write to memory");
    synth::write_forces_csv(&made, &mut csv).expect("write to memory");
    let (run, writer) = demo::start_run(made, 20_000.0).expect("start demo");
    assert_eq!(run.steps, 300);
    let total = writer.total_steps();
    writer.wait().expect("no write errors");
    assert_eq!(fs::read(&run.log).expect("log"), log);
    assert_eq!(fs::read(&run.forces).expect("forces"), csv);
    assert_eq!(total, run.steps);
}

#[test]
fn partial_writes_end_mid_line_at_times() {
    // At a slow rate the timed flush sometimes stops inside a line; the file then ends
    // without a newline while the run goes on. Over a few snapshots at least one of the
    // two files shows it, and every snapshot is a prefix of the final text.
    let opts = Options { iterations: Some(2000), case: None };
    let made = synth::generate_with(Scenario::Stall, 8, &opts);
    let mut full = Vec::new();
    synth::write_tarn_log(&made, &mut full).expect("write to memory");
    let (run, writer) = demo::start_run(made, 60.0).expect("start demo");
    let mut mid_line = false;
    let start = Instant::now();
    while start.elapsed() < Duration::from_secs(4) && !mid_line {
        let snap = fs::read(&run.log).expect("log");
        assert!(full.starts_with(&snap), "snapshot is not a prefix of the log");
        mid_line = snap.last().is_some_and(|&b| b != b'\n');
        sleep(Duration::from_millis(20));
    }
    writer.stop().expect("no write errors");
    assert!(mid_line, "never saw a chunk ending mid-line");
}

#[test]
fn dropping_the_writer_stops_it() {
    let (run, writer) = demo::start(Scenario::Stall, 1, 200.0).expect("start demo");
    assert!(wait_for(Duration::from_secs(2), || size(&run.log) > 0));
    let t = Instant::now();
    drop(writer);
    assert!(t.elapsed() < Duration::from_millis(500));
    let s = size(&run.log);
    sleep(Duration::from_millis(100));
    assert_eq!(size(&run.log), s);
}
