//! The real terminal path under a pseudo-terminal: after SIGTERM, a worker panic or a panic
//! on the UI thread, the alternate screen is left, the tty is back in canonical mode with
//! echo, and the exit code says what happened (checklist items 20 and 22).
//!
//! Each test runs twice: as the parent it starts this same test binary under `script(1)`
//! (util-linux/bsdutils, which gives the child a pty and copies its output), with
//! `SETTLE_TUI_CHILD` naming the test; as that child it runs the live panels for real.

use std::io::Read;
use std::process::{Command, Stdio};
use std::sync::{Arc, Mutex, mpsc};
use std::time::{Duration, Instant};

use settle::judge::{Criteria, Finding};
use settle::record::{Output, Record, Role, SeriesInfo};
use settle::run::ingest::{IngestBatch, IngestItem};
use settle::run::{RunStore, SourceStore};
use settle::tui::{self, LiveHooks, LiveRun, Msg, TuiOptions};

const CHILD: &str = "SETTLE_TUI_CHILD";
const PID_FILE: &str = "SETTLE_TUI_PID_FILE";

struct PanickingHooks;

impl LiveHooks for PanickingHooks {
    fn on_judged(&mut self, _run: usize, _run_data: &LiveRun) -> Vec<Finding> {
        panic!("hook boom on the UI thread");
    }
}

/// The child side: run the panels on the pty and exit with their exit code.
fn child(mode: &str) -> ! {
    let mut store = RunStore::new("tarn-case");
    store.sources.push(SourceStore::new("tarn.log", "tarn"));
    let runs = vec![LiveRun::new(store, Criteria::default())];
    let (tx, rx) = mpsc::channel();
    if let Ok(p) = std::env::var(PID_FILE) {
        std::fs::write(p, std::process::id().to_string()).expect("pid file");
    }
    let code = match mode {
        "worker" => {
            std::thread::Builder::new()
                .name("ingest".into())
                .spawn(|| {
                    std::thread::sleep(Duration::from_millis(300));
                    panic!("worker boom");
                })
                .expect("spawn");
            tui::run(runs, rx, tx, TuiOptions::default(), &mut tui::NoHooks)
        }
        "ui" => {
            let items = vec![
                IngestItem::Output(Output::Series(SeriesInfo {
                    id: 0,
                    name: "p".into(),
                    role: Role::Residual,
                })),
                IngestItem::Output(Output::Record(Record {
                    iteration: Some(1),
                    values: vec![(0, 1.0)],
                    ..Default::default()
                })),
            ];
            let btx = tx.clone();
            std::thread::spawn(move || {
                std::thread::sleep(Duration::from_millis(300));
                let _ = btx.send(Msg::Ingest(IngestBatch { run: 0, source: 0, items }));
            });
            tui::run(runs, rx, tx, TuiOptions::default(), &mut PanickingHooks)
        }
        _ => tui::run(runs, rx, tx, TuiOptions::default(), &mut tui::NoHooks),
    };
    std::process::exit(code.expect("terminal set up"))
}

struct Outcome {
    code: Option<i32>,
    output: String,
}

/// The parent side: run `test` as a child under `script`, optionally SIGTERM it once it is
/// up, and collect its exit code and everything it wrote to the pty, followed by `stty -a`.
fn parent(test: &str, mode: &str, sigterm: bool) -> Outcome {
    let dir = tempfile::tempdir().expect("tempdir");
    let pid_file = dir.path().join("pid");
    let exe = std::env::current_exe().expect("test binary");
    let inner = format!(
        "stty rows 24 cols 80; '{}' --exact {test} --nocapture --test-threads=1; code=$?; \
         stty -a; exit $code",
        exe.display()
    );
    let mut cmd = Command::new("script");
    cmd.args(["-qefc", &inner, "/dev/null"])
        .env(CHILD, mode)
        .env(PID_FILE, &pid_file)
        .env("TERM", "xterm")
        .env("LANG", "C.UTF-8")
        .env("SHELL", "/bin/sh")
        .stdin(Stdio::piped())
        .stdout(Stdio::piped())
        .stderr(Stdio::piped());
    let mut proc = cmd.spawn().expect("script(1) from util-linux is needed for this test");
    let _keep_stdin_open = proc.stdin.take();
    let mut out = proc.stdout.take().expect("stdout");
    let seen = Arc::new(Mutex::new(Vec::new()));
    let sink = Arc::clone(&seen);
    let reader = std::thread::spawn(move || {
        let mut chunk = [0u8; 4096];
        while let Ok(n) = out.read(&mut chunk) {
            if n == 0 {
                break;
            }
            sink.lock().expect("output buffer").extend_from_slice(&chunk[..n]);
        }
    });
    let start = Instant::now();
    let pid = loop {
        if let Ok(p) = std::fs::read_to_string(&pid_file)
            && !p.is_empty()
        {
            break p;
        }
        assert!(start.elapsed() < Duration::from_secs(20), "child did not start");
        std::thread::sleep(Duration::from_millis(20));
    };
    if sigterm {
        // Wait for the first frame: by then the signal thread is listening.
        while !String::from_utf8_lossy(&seen.lock().expect("output buffer")).contains(" WAITING ") {
            assert!(start.elapsed() < Duration::from_secs(20), "no first frame");
            std::thread::sleep(Duration::from_millis(20));
        }
        let st = Command::new("kill").args(["-TERM", &pid]).status().expect("kill");
        assert!(st.success());
    }
    let status = loop {
        if let Some(s) = proc.try_wait().expect("wait") {
            break s;
        }
        if start.elapsed() > Duration::from_secs(20) {
            let _ = Command::new("kill").args(["-KILL", &pid]).status();
            let _ = proc.kill();
            panic!("child did not exit");
        }
        std::thread::sleep(Duration::from_millis(20));
    };
    reader.join().expect("reader");
    let output = String::from_utf8_lossy(&seen.lock().expect("output buffer")).into_owned();
    Outcome { code: status.code(), output }
}

fn assert_restored(o: &Outcome) {
    let enter = o.output.find("\u{1b}[?1049h").expect("entered the alternate screen");
    let leave = o.output.rfind("\u{1b}[?1049l").expect("left the alternate screen");
    assert!(leave > enter);
    let stty = &o.output[o.output.rfind("speed").expect("stty -a output")..];
    let words: Vec<&str> = stty.split_whitespace().map(|w| w.trim_end_matches(';')).collect();
    for flag in ["icanon", "echo", "isig"] {
        assert!(words.contains(&flag), "{flag} not restored: {stty}");
    }
}

#[test]
fn sigterm_restores_the_terminal_and_exits_143() {
    if let Ok(mode) = std::env::var(CHILD) {
        child(&mode);
    }
    let o = parent("sigterm_restores_the_terminal_and_exits_143", "sigterm", true);
    assert_eq!(o.code, Some(143), "{}", o.output);
    assert_restored(&o);
    assert!(o.output.contains("tarn-case"), "a real frame was drawn");
}

#[test]
fn a_worker_panic_restores_the_terminal_and_exits_101() {
    if let Ok(mode) = std::env::var(CHILD) {
        child(&mode);
    }
    let o = parent("a_worker_panic_restores_the_terminal_and_exits_101", "worker", false);
    assert_eq!(o.code, Some(101), "{}", o.output);
    assert_restored(&o);
    let leave = o.output.rfind("\u{1b}[?1049l").unwrap();
    let msg = o.output.find("settle: internal error: thread 'ingest' panicked").expect("report");
    assert!(msg > leave, "the report is printed after the screen is restored");
    assert!(o.output.contains("worker boom"));
}

#[test]
fn a_ui_panic_restores_the_terminal_before_the_message() {
    if let Ok(mode) = std::env::var(CHILD) {
        child(&mode);
    }
    let o = parent("a_ui_panic_restores_the_terminal_before_the_message", "ui", false);
    assert_eq!(o.code, Some(101), "{}", o.output);
    assert_restored(&o);
    let leave = o.output.find("\u{1b}[?1049l").expect("left");
    let msg = o.output.find("hook boom on the UI thread").expect("panic message");
    assert!(msg > leave, "{}", o.output);
}
