//! `settle watch` end to end: headless lines on finished and growing logs, opt-in actions
//! (dry run and `--act`), and the live panels under a pseudo-terminal seeing a run switch
//! from converging to diverging. The logs are synthetic (our invented solver tarn).

use std::io::{Read, Write};
use std::path::Path;
use std::process::{Command, Stdio};
use std::sync::{Arc, Mutex};
use std::time::{Duration, Instant};

use serde_json::Value;
use settle::synth::{self, Options, Scenario, SynthRun};

const BIN: &str = env!("CARGO_BIN_EXE_settle");

fn samples() -> std::path::PathBuf {
    Path::new(env!("CARGO_MANIFEST_DIR")).join("samples")
}

/// A still-converging run whose residuals and drag start to grow exponentially after
/// `switch` steps: healthy first, then a blow-up (synthetic scenario).
fn switching_run(switch: usize, total: usize) -> SynthRun {
    let opts = Options { iterations: Some(total), ..Options::default() };
    let mut run = synth::generate_with(Scenario::StillConverging, 5, &opts);
    run.steps.truncate(total);
    for (k, step) in run.steps.iter_mut().enumerate().skip(switch) {
        let grow = 10f64.powf(0.03 * (k - switch) as f64);
        for (_, r) in step.residuals.iter_mut() {
            *r *= grow;
        }
        step.drag *= grow;
        step.continuity *= grow;
    }
    run.end = synth::End::Running;
    run.crash = None;
    run.solver_converged = false;
    run
}

/// Append the steps `from..to` of `run` to `path`, a few steps at a time.
fn append_steps(path: &Path, run: &SynthRun, from: usize, to: usize, pause: Duration) {
    let mut f = std::fs::OpenOptions::new().create(true).append(true).open(path).unwrap();
    if from == 0 {
        f.write_all(synth::render_banner(run).as_bytes()).unwrap();
    }
    for i in from..to {
        f.write_all(synth::render_step(run, i).as_bytes()).unwrap();
        if i % 20 == 19 {
            f.flush().unwrap();
            std::thread::sleep(pause);
        }
    }
    f.flush().unwrap();
}

fn json_lines(text: &str) -> Vec<Value> {
    text.lines().filter(|l| l.starts_with('{')).map(|l| serde_json::from_str(l).unwrap()).collect()
}

#[test]
fn headless_on_finished_runs_exits_with_the_worst_verdict() {
    let s = samples();
    let o = Command::new(BIN)
        .args(["watch", "--headless", "--json", "--poll", "0.1", "--refresh", "0.1"])
        .arg(s.join("mixer-22"))
        .arg(s.join("duct-bend-07"))
        .stdin(Stdio::null())
        .output()
        .unwrap();
    let text = String::from_utf8_lossy(&o.stdout);
    let lines = json_lines(&text);
    let end: Vec<&Value> = lines.iter().filter(|l| l["event"] == "end").collect();
    assert_eq!(end.len(), 2, "{text}");
    let mixer = end.iter().find(|l| l["run"] == "mixer-22").unwrap();
    assert_eq!(mixer["verdict"], "diverging", "{text}");
    // The worst verdict of the two runs decides the exit code (diverging = 14).
    assert_eq!(o.status.code(), Some(14), "{text}");
    assert!(lines.iter().all(|l| l["time"].as_str().is_some_and(|t| t.ends_with('Z'))));
}

#[test]
fn headless_text_follows_a_growing_log_until_it_diverges() {
    let dir = tempfile::tempdir().unwrap();
    let log = dir.path().join("tarn.log");
    let run = switching_run(300, 520);
    append_steps(&log, &run, 0, 300, Duration::from_millis(1));
    let mut child = Command::new(BIN)
        .args([
            "watch",
            "--headless",
            "--poll",
            "0.1",
            "--refresh",
            "0.2",
            "--exit-when",
            "diverging",
        ])
        .arg(&log)
        .stdin(Stdio::null())
        .stdout(Stdio::piped())
        .spawn()
        .unwrap();
    std::thread::sleep(Duration::from_millis(1500));
    append_steps(&log, &run, 300, 520, Duration::from_millis(20));
    let deadline = Instant::now() + Duration::from_secs(20);
    let status = loop {
        if let Some(st) = child.try_wait().unwrap() {
            break st;
        }
        assert!(Instant::now() < deadline, "the watcher did not stop on divergence");
        std::thread::sleep(Duration::from_millis(50));
    };
    let mut text = String::new();
    child.stdout.take().unwrap().read_to_string(&mut text).unwrap();
    let first = text.lines().next().unwrap_or_default();
    assert!(!first.contains("diverging"), "healthy at first: {text}");
    assert!(text.lines().any(|l| l.contains(" diverging")), "{text}");
    assert_eq!(status.code(), Some(14), "{text}");
}

/// A case directory with mixer-22's crashed, diverging log and an action on `diverging`.
fn case_with_action(dir: &Path) {
    let s = samples().join("mixer-22");
    std::fs::copy(s.join("tarn.log"), dir.join("tarn.log")).unwrap();
    std::fs::write(
        dir.join("settle.toml"),
        "name = \"mixer-act\"\n[[source]]\npath = \"tarn.log\"\n\n[[action]]\non = \"diverging\"\n\
         command = [\"sh\", \"-c\", \"echo $SETTLE_VERDICT $SETTLE_RUN > marker\"]\n",
    )
    .unwrap();
}

#[test]
fn actions_only_run_with_act() {
    let dir = tempfile::tempdir().unwrap();
    case_with_action(dir.path());
    let o = Command::new(BIN)
        .args(["watch", "--headless", "--poll", "0.1", "--refresh", "0.1"])
        .arg(dir.path())
        .output()
        .unwrap();
    let text = String::from_utf8_lossy(&o.stdout);
    assert!(text.contains("would run"), "dry run announced: {text}");
    assert!(!dir.path().join("marker").exists(), "nothing runs without --act");

    let o = Command::new(BIN)
        .args(["watch", "--headless", "--act", "--poll", "0.1", "--refresh", "0.1"])
        .arg(dir.path())
        .output()
        .unwrap();
    let text = String::from_utf8_lossy(&o.stdout);
    let marker = std::fs::read_to_string(dir.path().join("marker")).unwrap_or_default();
    assert_eq!(marker.trim(), "diverging mixer-act", "{text}");
    assert!(text.contains("ran sh"), "{text}");
    assert_eq!(o.status.code(), Some(14));
}

#[test]
fn actions_from_a_group_writable_config_are_refused() {
    use std::os::unix::fs::PermissionsExt;
    let dir = tempfile::tempdir().unwrap();
    case_with_action(dir.path());
    let cfg = dir.path().join("settle.toml");
    std::fs::set_permissions(&cfg, std::fs::Permissions::from_mode(0o664)).unwrap();
    let o = Command::new(BIN)
        .args(["watch", "--headless", "--act", "--poll", "0.1", "--refresh", "0.1"])
        .arg(dir.path())
        .output()
        .unwrap();
    let text = String::from_utf8_lossy(&o.stdout);
    assert!(text.contains("refused"), "{text}");
    assert!(!dir.path().join("marker").exists());
    // Watching went on: the run was still judged to the end.
    assert!(text.contains("diverging"), "{text}");
}

#[test]
fn panels_under_a_pty_show_the_verdict_change() {
    let dir = tempfile::tempdir().unwrap();
    let log = dir.path().join("tarn.log");
    let run = switching_run(300, 560);
    append_steps(&log, &run, 0, 300, Duration::from_millis(1));
    let inner = format!(
        "stty rows 30 cols 100; '{BIN}' watch --poll 0.1 --refresh 0.2 '{}'",
        log.display()
    );
    let mut proc = Command::new("script")
        .args(["-qefc", &inner, "/dev/null"])
        .env("TERM", "xterm")
        .env("LANG", "C.UTF-8")
        .env("SHELL", "/bin/sh")
        .stdin(Stdio::piped())
        .stdout(Stdio::piped())
        .stderr(Stdio::null())
        .spawn()
        .expect("script(1) from util-linux is needed for this test");
    let mut stdin = proc.stdin.take().unwrap();
    let mut out = proc.stdout.take().unwrap();
    let seen = Arc::new(Mutex::new(Vec::new()));
    let sink = Arc::clone(&seen);
    let reader = std::thread::spawn(move || {
        let mut chunk = [0u8; 4096];
        while let Ok(n) = out.read(&mut chunk) {
            if n == 0 {
                break;
            }
            sink.lock().unwrap().extend_from_slice(&chunk[..n]);
        }
    });
    let wait_for = |word: &str, secs: u64| {
        let deadline = Instant::now() + Duration::from_secs(secs);
        loop {
            if String::from_utf8_lossy(&seen.lock().unwrap()).contains(word) {
                return true;
            }
            if Instant::now() > deadline {
                return false;
            }
            std::thread::sleep(Duration::from_millis(50));
        }
    };
    let healthy = wait_for("CONVERGING", 15);
    append_steps(&log, &run, 300, 560, Duration::from_millis(20));
    let diverged = wait_for("DIVERGING", 20);
    stdin.write_all(b"q").unwrap();
    stdin.flush().unwrap();
    let deadline = Instant::now() + Duration::from_secs(10);
    let status = loop {
        if let Some(st) = proc.try_wait().unwrap() {
            break Some(st);
        }
        if Instant::now() > deadline {
            let _ = proc.kill();
            break None;
        }
        std::thread::sleep(Duration::from_millis(50));
    };
    drop(stdin);
    let _ = reader.join();
    let screen = String::from_utf8_lossy(&seen.lock().unwrap()).into_owned();
    assert!(healthy, "the converging part was shown: {}", screen.len());
    assert!(diverged, "the switch to diverging was shown");
    let status = status.expect("q quits the panels");
    assert_eq!(status.code(), Some(0));
    // The alternate screen was left on exit.
    assert!(screen.contains("\x1b[?1049l"), "alternate screen left");
}

// ---------------------------------------------------------------------------------------
// Headless watching never fails silently: every source state is a line with its reason,
// heartbeats go on, `--exit-when` ends on them with exit code 16, and a signal never
// prints a verdict for a run that has no records.

/// Start `settle watch --headless ARGS`, let it run until it exits or `limit` passes (then
/// SIGTERM it), and return its exit code, output and how long it ran.
fn headless_run(args: &[&str], limit: Duration) -> (Option<i32>, String, Duration) {
    let mut child = Command::new(BIN)
        .args(["watch", "--headless", "--poll", "0.1", "--refresh", "0.2"])
        .args(args)
        .stdin(Stdio::null())
        .stdout(Stdio::piped())
        .spawn()
        .unwrap();
    let start = Instant::now();
    let status = loop {
        if let Some(st) = child.try_wait().unwrap() {
            break Some(st);
        }
        if start.elapsed() > limit {
            break None;
        }
        std::thread::sleep(Duration::from_millis(20));
    };
    let status = status.unwrap_or_else(|| {
        let pid = child.id().to_string();
        let _ = Command::new("kill").args(["-TERM", &pid]).status();
        let until = Instant::now() + Duration::from_secs(3);
        loop {
            if let Some(st) = child.try_wait().unwrap() {
                break st;
            }
            if Instant::now() > until {
                let _ = child.kill();
                break child.wait().unwrap();
            }
            std::thread::sleep(Duration::from_millis(20));
        }
    });
    let mut text = String::new();
    child.stdout.take().unwrap().read_to_string(&mut text).unwrap();
    (status.code(), text, start.elapsed())
}

#[test]
fn a_missing_file_is_a_waiting_line_then_stale_and_ends_with_16() {
    let dir = tempfile::tempdir().unwrap();
    let log = dir.path().join("nonexist.log");
    let (code, text, took) = headless_run(
        &["--stale", "2s", "--heartbeat", "0.5", log.to_str().unwrap()],
        Duration::from_secs(8),
    );
    let lines: Vec<&str> = text.lines().collect();
    let first = lines.first().copied().unwrap_or_default();
    assert!(
        first.contains(" waiting | no records | why: waiting for ")
            && first.contains("nonexist.log to appear"),
        "{text}"
    );
    // Heartbeats while waiting (every 0.5 s for 2 s).
    assert!(lines.iter().filter(|l| l.contains(" waiting | ")).count() >= 3, "{text}");
    assert!(
        lines.iter().any(|l| l.contains(" stale | no records | why: no record for ")),
        "{text}"
    );
    let last = lines.last().copied().unwrap_or_default();
    assert!(last.contains(" stale | ") && last.ends_with("(final)"), "{text}");
    assert!(!text.contains("converging"), "no verdict for a run without records: {text}");
    assert_eq!(code, Some(16), "{text}");
    assert!(took < Duration::from_secs(5), "took {took:?}");
}

#[test]
fn an_unrecognised_file_is_a_no_parser_line_and_ends_with_16() {
    let dir = tempfile::tempdir().unwrap();
    // Small: no parser yet, reading goes on (JSON lines this time).
    let small = dir.path().join("notes.txt");
    std::fs::write(&small, "hello\nworld\n").unwrap();
    let (code, text, _) =
        headless_run(&["--json", "--stale", "1h", small.to_str().unwrap()], Duration::from_secs(2));
    let lines = json_lines(&text);
    assert_eq!(lines[0]["state"], "no-parser", "{text}");
    assert!(lines[0]["detail"].as_str().unwrap().contains("no parser definition recognises"));
    assert!(lines.iter().all(|l| l.get("verdict").is_none()), "{text}");
    assert_eq!(lines.last().unwrap()["event"], "end", "{text}");
    assert_eq!(code, Some(143), "ended by SIGTERM: {text}");
    // Over 64 KiB of text nobody recognises: the source is given up, the watch ends.
    let big = dir.path().join("prose.txt");
    let para = "The quick brown fox jumps over the lazy dog again and again.\n";
    std::fs::write(&big, para.repeat(70 * 1024 / para.len())).unwrap();
    let (code, text, took) = headless_run(&[big.to_str().unwrap()], Duration::from_secs(8));
    assert!(text.contains(" no-parser | no records | why: stopped reading: "), "{text}");
    assert!(text.lines().last().unwrap_or_default().ends_with("(final)"), "{text}");
    assert_eq!(code, Some(16), "{text}");
    assert!(took < Duration::from_secs(5), "took {took:?}");
}

/// A FIFO where the log should be cannot be followed (permissions would do too, but not
/// for root): an `unreadable` line with the reason, and reading is retried.
#[test]
fn an_unreadable_file_is_an_unreadable_line() {
    let dir = tempfile::tempdir().unwrap();
    let log = dir.path().join("tarn.log");
    let made = Command::new("mkfifo").arg(&log).status().expect("mkfifo (coreutils)");
    assert!(made.success());
    let (_, text, _) =
        headless_run(&["--stale", "1h", log.to_str().unwrap()], Duration::from_millis(1500));
    let first = text.lines().next().unwrap_or_default();
    assert!(first.contains(" unreadable | no records | why: cannot read "), "{text}");
    assert!(first.contains("tarn.log: not a regular file; retrying"), "{text}");
    assert!(!text.contains("converging"), "{text}");
}

#[test]
fn sigterm_prints_the_state_not_a_made_up_verdict_within_a_second() {
    let dir = tempfile::tempdir().unwrap();
    let log = dir.path().join("nonexist.log");
    let mut child = Command::new(BIN)
        .args(["watch", "--headless", "--poll", "0.1", "--stale", "1h"])
        .arg(&log)
        .stdin(Stdio::null())
        .stdout(Stdio::piped())
        .spawn()
        .unwrap();
    let mut out = child.stdout.take().unwrap();
    let (tx, rx) = std::sync::mpsc::channel();
    let reader = std::thread::spawn(move || {
        let mut text = String::new();
        let mut byte = [0u8; 1];
        while let Ok(1) = out.read(&mut byte) {
            text.push(byte[0] as char);
            if byte[0] == b'\n' {
                let _ = tx.send(());
            }
        }
        text
    });
    let pid = child.id().to_string();
    if rx.recv_timeout(Duration::from_secs(3)).is_err() {
        let _ = child.kill();
        let _ = child.wait();
        panic!("no line within 3 s: {}", reader.join().unwrap());
    }
    let sent = Instant::now();
    Command::new("kill").args(["-TERM", &pid]).status().unwrap();
    let status = loop {
        if let Some(st) = child.try_wait().unwrap() {
            break st;
        }
        if sent.elapsed() > Duration::from_secs(5) {
            let _ = child.kill();
            panic!("SIGTERM ignored");
        }
        std::thread::sleep(Duration::from_millis(10));
    };
    let took = sent.elapsed();
    let text = reader.join().unwrap();
    assert_eq!(status.code(), Some(143), "{text}");
    assert!(took < Duration::from_secs(1), "SIGTERM to exit: {took:?}");
    let last = text.lines().last().unwrap_or_default();
    assert!(last.contains(" waiting | no records | why: waiting for "), "{text}");
    assert!(last.ends_with("(final)"), "{text}");
    assert!(!text.contains("converging"), "{text}");
}

/// An error names its cause once (issue: `not UTF-8 text (byte 47): not UTF-8 text (byte
/// 47)`, `os error 2 … os error 2`), whichever error type carried it.
#[test]
fn errors_name_their_cause_once() {
    let dir = tempfile::tempdir().unwrap();
    std::fs::write(dir.path().join("settle.toml"), b"name = \"x\xff\"\n").unwrap();
    let o = Command::new(BIN).arg("watch").arg(dir.path()).output().unwrap();
    let err = String::from_utf8_lossy(&o.stderr);
    assert_eq!(o.status.code(), Some(1));
    assert_eq!(
        err.trim_end(),
        format!(
            "settle: cannot read run config {}: not UTF-8 text (byte 9)",
            dir.path().join("settle.toml").display()
        )
    );
    let missing = dir.path().join("no-such-dir");
    let o = Command::new(BIN).arg("--parsers").arg(&missing).args(["watch", "x.log"]).output();
    let err = String::from_utf8_lossy(&o.unwrap().stderr).into_owned();
    assert_eq!(err.matches("os error 2").count(), 1, "{err}");
    assert!(err.starts_with("settle: loading parser definitions: "), "{err}");
}

/// Checklist item 23: `settle watch --headless … | head -1` ends quietly when the reader
/// goes away: exit code 0, nothing on stderr (no EPIPE panic).
#[test]
fn a_closed_pipe_ends_headless_quietly() {
    let s = samples();
    let mut child = Command::new(BIN)
        .args(["watch", "--headless", "--poll", "0.1", "--heartbeat", "0.1", "--exit-when"])
        .args(["never"])
        .arg(s.join("duct-bend-07"))
        .stdin(Stdio::null())
        .stdout(Stdio::piped())
        .stderr(Stdio::piped())
        .spawn()
        .unwrap();
    let mut out = child.stdout.take().unwrap();
    let mut first = [0u8; 64];
    let n = out.read(&mut first).unwrap();
    assert!(n > 0);
    drop(out);
    let start = Instant::now();
    let status = loop {
        if let Some(st) = child.try_wait().unwrap() {
            break st;
        }
        if start.elapsed() > Duration::from_secs(5) {
            let _ = child.kill();
            panic!("still running with its reader gone");
        }
        std::thread::sleep(Duration::from_millis(20));
    };
    let mut err = String::new();
    child.stderr.take().unwrap().read_to_string(&mut err).unwrap();
    assert_eq!(status.code(), Some(0), "{err}");
    assert!(err.is_empty(), "{err}");
}
