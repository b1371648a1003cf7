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
