//! The real terminal path under a pseudo-terminal: after SIGTERM, a worker panic or a panic
//! on the UI thread, the alternate screen is left, the tty is back in canonical mode with
//! echo, and the exit code says what happened (checklist items 20 and 22); when the pty's
//! master side goes away (a closed terminal window, `tmux kill-server`, a dropped SSH
//! connection) the panels end at once with exit code 129 instead of spinning on the dead
//! descriptor, with or without a SIGHUP (checklist item 21); and SIGTERM ends the process
//! within a second even when the main loop is stuck.
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
/// Where the child writes its exit code (its parent shell may be gone when it exits).
const CODE_FILE: &str = "SETTLE_TUI_CODE_FILE";
/// Created by the child once its hook is stuck.
const MARK_FILE: &str = "SETTLE_TUI_MARK_FILE";

struct PanickingHooks;

impl LiveHooks for PanickingHooks {
    fn on_judged(&mut self, _run: usize, _run_data: &LiveRun) -> Vec<Finding> {
        panic!("hook boom on the UI thread");
    }
}

/// A hook that never returns (a main loop stuck in work), after leaving a mark.
struct StuckHooks;

impl LiveHooks for StuckHooks {
    fn on_judged(&mut self, _run: usize, _run_data: &LiveRun) -> Vec<Finding> {
        if let Ok(p) = std::env::var(MARK_FILE) {
            std::fs::write(p, "stuck").expect("mark file");
        }
        loop {
            std::thread::sleep(Duration::from_secs(60));
        }
    }
}

fn one_record_later(tx: &mpsc::Sender<Msg>) {
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
            one_record_later(&tx);
            tui::run(runs, rx, tx, TuiOptions::default(), &mut PanickingHooks)
        }
        "stuck" => {
            one_record_later(&tx);
            tui::run(runs, rx, tx, TuiOptions::default(), &mut StuckHooks)
        }
        _ => tui::run(runs, rx, tx, TuiOptions::default(), &mut tui::NoHooks),
    };
    let code = code.expect("terminal set up");
    if let Ok(p) = std::env::var(CODE_FILE) {
        std::fs::write(p, code.to_string()).expect("code file");
    }
    std::process::exit(code)
}

struct Outcome {
    code: Option<i32>,
    output: String,
    /// After the pty master was closed or SIGTERM sent: how long until the child was gone,
    /// and the CPU time (utime + stime, clock ticks) it used meanwhile.
    after: Option<(Duration, u64)>,
}

/// What the parent does to the running child.
#[derive(Clone, Copy, PartialEq)]
enum Poke {
    Nothing,
    /// SIGTERM once the first frame is drawn.
    Sigterm,
    /// SIGTERM once the child's hook is stuck (the mark file exists).
    SigtermWhenStuck,
    /// Kill `script(1)` once the first frame is drawn: the pty master closes under the
    /// child, as when a terminal window closes or an SSH connection drops.
    CloseMaster,
}

/// Still running: present in /proc and not a zombie (the child may be re-parented to a
/// process that does not reap it).
fn alive(pid: &str) -> bool {
    match std::fs::read_to_string(format!("/proc/{pid}/stat")) {
        Err(_) => false,
        Ok(s) => !matches!(
            s.rsplit_once(')').map(|(_, r)| r.trim_start().as_bytes().first().copied()),
            Some(Some(b'Z'))
        ),
    }
}

/// utime + stime of `pid` in clock ticks (fields 14 and 15 of /proc/PID/stat).
fn cpu_ticks(pid: &str) -> Option<u64> {
    let s = std::fs::read_to_string(format!("/proc/{pid}/stat")).ok()?;
    let rest = s.rsplit_once(')')?.1;
    let f: Vec<&str> = rest.split_whitespace().collect();
    Some(f.get(11)?.parse::<u64>().ok()? + f.get(12)?.parse::<u64>().ok()?)
}

/// The parent side: run `test` as a child under `script` (inside `setsid` with `new_session`,
/// so that no SIGHUP reaches it when the pty goes away), poke it as asked, and collect its
/// exit code and everything it wrote to the pty, followed by `stty -a`.
fn parent(test: &str, mode: &str, poke: Poke, new_session: bool) -> Outcome {
    let dir = tempfile::tempdir().expect("tempdir");
    let pid_file = dir.path().join("pid");
    let code_file = dir.path().join("code");
    let mark_file = dir.path().join("mark");
    let exe = std::env::current_exe().expect("test binary");
    let inner = format!(
        "stty rows 24 cols 80; {}'{}' --exact {test} --nocapture --test-threads=1; code=$?; \
         stty -a; exit $code",
        if new_session { "setsid -w " } else { "" },
        exe.display()
    );
    let mut cmd = Command::new("script");
    cmd.args(["-qefc", &inner, "/dev/null"])
        .env(CHILD, mode)
        .env(PID_FILE, &pid_file)
        .env(CODE_FILE, &code_file)
        .env(MARK_FILE, &mark_file)
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
    if poke != Poke::Nothing {
        // Wait for the first frame: by then the signal and input threads are listening.
        while !String::from_utf8_lossy(&seen.lock().expect("output buffer")).contains(" WAITING ") {
            assert!(start.elapsed() < Duration::from_secs(20), "no first frame");
            std::thread::sleep(Duration::from_millis(20));
        }
    }
    if poke == Poke::SigtermWhenStuck {
        while !mark_file.exists() {
            assert!(start.elapsed() < Duration::from_secs(20), "the hook never ran");
            std::thread::sleep(Duration::from_millis(20));
        }
    }
    let mut after = None;
    if matches!(poke, Poke::Sigterm | Poke::SigtermWhenStuck | Poke::CloseMaster) {
        let ticks0 = cpu_ticks(&pid).expect("child stat");
        let poked = Instant::now();
        if poke == Poke::CloseMaster {
            proc.kill().expect("kill script(1)");
        } else {
            let st = Command::new("kill").args(["-TERM", &pid]).status().expect("kill");
            assert!(st.success());
        }
        // Give it 5 s (the requirement is far less); then kill it so no test leaves a
        // spinning process behind, and report what was measured.
        let mut ticks = ticks0;
        while alive(&pid) && poked.elapsed() < Duration::from_secs(5) {
            ticks = cpu_ticks(&pid).unwrap_or(ticks);
            std::thread::sleep(Duration::from_millis(10));
        }
        let gone = poked.elapsed();
        if alive(&pid) {
            ticks = cpu_ticks(&pid).unwrap_or(ticks);
            let _ = Command::new("kill").args(["-KILL", &pid]).status();
        }
        after = Some((gone, ticks.saturating_sub(ticks0)));
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
    let code = match poke {
        // `script` was killed: the child's own record of its exit code is all there is.
        Poke::CloseMaster => {
            std::fs::read_to_string(&code_file).ok().and_then(|c| c.trim().parse().ok())
        }
        _ => status.code(),
    };
    Outcome { code, output, after }
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
    let o = parent("sigterm_restores_the_terminal_and_exits_143", "sigterm", Poke::Sigterm, false);
    assert_eq!(o.code, Some(143), "{}", o.output);
    assert_restored(&o);
    assert!(o.output.contains("tarn-case"), "a real frame was drawn");
}

#[test]
fn a_worker_panic_restores_the_terminal_and_exits_101() {
    if let Ok(mode) = std::env::var(CHILD) {
        child(&mode);
    }
    let o = parent(
        "a_worker_panic_restores_the_terminal_and_exits_101",
        "worker",
        Poke::Nothing,
        false,
    );
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
    let o =
        parent("a_ui_panic_restores_the_terminal_before_the_message", "ui", Poke::Nothing, false);
    assert_eq!(o.code, Some(101), "{}", o.output);
    assert_restored(&o);
    let leave = o.output.find("\u{1b}[?1049l").expect("left");
    let msg = o.output.find("hook boom on the UI thread").expect("panic message");
    assert!(msg > leave, "{}", o.output);
}

/// The pty master closes (checklist item 21): the child gets SIGHUP and its tty reads fail.
/// It must be gone within a second with exit code 129, using almost no CPU meanwhile.
#[test]
fn a_closed_terminal_ends_the_panels_with_129() {
    if let Ok(mode) = std::env::var(CHILD) {
        child(&mode);
    }
    let o =
        parent("a_closed_terminal_ends_the_panels_with_129", "hangup", Poke::CloseMaster, false);
    let (gone, ticks) = o.after.expect("measured");
    eprintln!("gone {gone:?} after the hangup, {ticks} CPU ticks meanwhile");
    // 100 ticks a second on Linux: 0.3 s of CPU at most, even on a slow shared machine.
    assert!(
        gone < Duration::from_secs(1) && ticks <= 30,
        "still running {gone:?} after the hangup, {ticks} CPU ticks used meanwhile"
    );
    assert_eq!(o.code, Some(129), "{}", o.output);
}

/// The same without a SIGHUP (the watcher in a session of its own, or SIGHUP lost): the dead
/// descriptor itself (hangup, EOF or EIO on the tty) must end the panels, never a busy loop.
#[test]
fn a_closed_terminal_without_sighup_ends_the_panels_with_129() {
    if let Ok(mode) = std::env::var(CHILD) {
        child(&mode);
    }
    let o = parent(
        "a_closed_terminal_without_sighup_ends_the_panels_with_129",
        "hangup",
        Poke::CloseMaster,
        true,
    );
    let (gone, ticks) = o.after.expect("measured");
    eprintln!("gone {gone:?} after the hangup, {ticks} CPU ticks meanwhile");
    assert!(
        gone < Duration::from_secs(1) && ticks <= 30,
        "still running {gone:?} after the hangup, {ticks} CPU ticks used meanwhile"
    );
    assert_eq!(o.code, Some(129), "{}", o.output);
}

/// SIGTERM ends the process within a second even when the main loop is stuck in work and
/// never reads the signal's message; the terminal is still given back.
#[test]
fn sigterm_ends_a_stuck_watcher_within_a_second() {
    if let Ok(mode) = std::env::var(CHILD) {
        child(&mode);
    }
    let o = parent(
        "sigterm_ends_a_stuck_watcher_within_a_second",
        "stuck",
        Poke::SigtermWhenStuck,
        false,
    );
    let (gone, _) = o.after.expect("measured");
    eprintln!("gone {gone:?} after SIGTERM");
    assert!(gone < Duration::from_millis(1200), "SIGTERM took {gone:?}");
    assert_eq!(o.code, Some(143), "{}", o.output);
    assert_restored(&o);
}
