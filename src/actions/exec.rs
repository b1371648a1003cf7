//! Running one command with strict hygiene, blocking until it ends or its timeout kills it.
//!
//! The command starts with a cleared environment (the caller passes the complete one), an
//! explicit working directory, stdin from `/dev/null`, stdout and stderr captured (the first
//! 4 KiB of each kept, the rest drained and counted so the child never blocks on a full
//! pipe), and in a process group of its own.
//!
//! Killing the group needs `kill(2)` on a negative pid, which safe std does not offer and
//! `unsafe` is forbidden crate-wide. So the group is signalled by running the system's
//! `kill -s SIG -- -PGID` program; if that cannot run, `Child::kill` (SIGKILL to the leader
//! only) is the fallback. On timeout: TERM to the group, up to [`TERM_GRACE`] for the leader
//! to exit, then KILL to the group (whatever ignored TERM), then the leader is reaped. The
//! leader is reaped only after the last group signal: an unreaped leader keeps its pid, so
//! the group id cannot have been reused by an unrelated process when we signal it.
//!
//! This is a blocking function meant for a background thread (see `runner`).

use std::ffi::OsString;
use std::io::Read;
use std::os::unix::process::{CommandExt, ExitStatusExt};
use std::path::PathBuf;
use std::process::{Child, Command, Stdio};
use std::thread::{self, JoinHandle};
use std::time::{Duration, Instant};

use super::OUTPUT_CAP;

/// How long the group leader gets to exit after TERM before the group gets KILL.
pub const TERM_GRACE: Duration = Duration::from_secs(1);
/// Interval of the exit poll (a background thread; short so fast commands report fast).
const POLL: Duration = Duration::from_millis(10);

/// What to run.
#[derive(Debug, Clone, PartialEq)]
pub struct ExecSpec {
    /// Bare name (looked up in the `PATH` of `env`) or absolute path.
    pub program: PathBuf,
    pub args: Vec<String>,
    /// The complete environment of the child.
    pub env: Vec<(OsString, OsString)>,
    pub cwd: PathBuf,
    pub timeout: Duration,
}

/// How a command ended.
#[derive(Debug, Clone, PartialEq)]
pub enum Outcome {
    /// It exited by itself: exit code, or the signal that ended it.
    Exited { code: Option<i32>, signal: Option<i32> },
    /// It ran past its timeout; its process group was killed.
    TimedOut,
    /// It could not be started.
    SpawnFailed(String),
}

/// The first [`OUTPUT_CAP`] bytes of a stream and its total length.
#[derive(Debug, Clone, PartialEq, Default)]
pub struct Captured {
    pub head: Vec<u8>,
    pub total: u64,
}

/// Result of [`run`].
#[derive(Debug, Clone, PartialEq)]
pub struct ExecResult {
    pub outcome: Outcome,
    /// From start to the end of the leader (or the kill).
    pub elapsed: Duration,
    pub stdout: Captured,
    pub stderr: Captured,
    /// The command exited but processes it left behind still held its output at the
    /// timeout; the group was killed.
    pub lingering_killed: bool,
}

/// Run `spec` to its end or its timeout. Never panics; every failure is an [`Outcome`].
pub fn run(spec: &ExecSpec) -> ExecResult {
    let start = Instant::now();
    let deadline = start + spec.timeout;
    let mut cmd = Command::new(&spec.program);
    cmd.args(&spec.args)
        .env_clear()
        .envs(spec.env.iter().map(|(k, v)| (k, v)))
        .current_dir(&spec.cwd)
        .stdin(Stdio::null())
        .stdout(Stdio::piped())
        .stderr(Stdio::piped())
        .process_group(0);
    let mut child = match cmd.spawn() {
        Ok(c) => c,
        Err(e) => {
            return ExecResult {
                outcome: Outcome::SpawnFailed(e.to_string()),
                elapsed: start.elapsed(),
                stdout: Captured::default(),
                stderr: Captured::default(),
                lingering_killed: false,
            };
        }
    };
    let pgid = child.id();
    let path_env = spec.env.iter().find(|(k, _)| k == "PATH").map(|(_, v)| v.clone());
    let out = child.stdout.take().and_then(spawn_reader);
    let err = child.stderr.take().and_then(spawn_reader);

    let mut lingering_killed = false;
    let (outcome, elapsed) = loop {
        match child.try_wait() {
            Ok(Some(status)) => {
                let elapsed = start.elapsed();
                let done =
                    |h: &Option<JoinHandle<Captured>>| h.as_ref().is_none_or(|h| h.is_finished());
                while !(done(&out) && done(&err)) && Instant::now() < deadline {
                    thread::sleep(POLL);
                }
                if !(done(&out) && done(&err)) {
                    // Left-behind processes still hold the pipes: they are in the group
                    // (so its id is still in use) unless they moved to another one.
                    signal_group(pgid, "TERM", path_env.as_ref());
                    thread::sleep(POLL * 10);
                    signal_group(pgid, "KILL", path_env.as_ref());
                    lingering_killed = true;
                }
                break (Outcome::Exited { code: status.code(), signal: status.signal() }, elapsed);
            }
            Ok(None) if Instant::now() >= deadline => {
                stop_group(&mut child, pgid, path_env.as_ref());
                break (Outcome::TimedOut, start.elapsed());
            }
            Ok(None) => thread::sleep(POLL.min(deadline.saturating_duration_since(Instant::now()))),
            Err(e) => {
                stop_group(&mut child, pgid, path_env.as_ref());
                break (
                    Outcome::SpawnFailed(format!("waiting for it failed: {e}")),
                    start.elapsed(),
                );
            }
        }
    };
    let collect = |h: Option<JoinHandle<Captured>>| match h {
        // A reader still blocked (output held by a process outside the group) is left to
        // finish on its own; we report what we have not got as empty.
        Some(h) if h.is_finished() => h.join().unwrap_or_default(),
        _ => Captured::default(),
    };
    // Give readers a moment to see EOF after a kill.
    let settle_by = Instant::now() + Duration::from_millis(200);
    while [&out, &err].iter().any(|h| h.as_ref().is_some_and(|h| !h.is_finished()))
        && Instant::now() < settle_by
    {
        thread::sleep(POLL);
    }
    ExecResult { outcome, elapsed, stdout: collect(out), stderr: collect(err), lingering_killed }
}

/// TERM the group, give the leader [`TERM_GRACE`], KILL the group, reap the leader.
fn stop_group(child: &mut Child, pgid: u32, path_env: Option<&OsString>) {
    if signal_group(pgid, "TERM", path_env) {
        let until = Instant::now() + TERM_GRACE;
        while Instant::now() < until && leader_exited(pgid) != Some(true) {
            thread::sleep(POLL);
        }
        signal_group(pgid, "KILL", path_env);
    }
    // Fallback when `kill` could not run; harmless when the leader is already dead.
    let _ = child.kill();
    let _ = child.wait();
}

/// Send `sig` to process group `pgid` through the `kill` program. True when it ran.
fn signal_group(pgid: u32, sig: &str, path_env: Option<&OsString>) -> bool {
    let path = path_env.cloned().unwrap_or_else(|| OsString::from("/usr/bin:/bin"));
    Command::new("kill")
        .args(["-s", sig, "--", &format!("-{pgid}")])
        .env_clear()
        .env("PATH", path)
        .stdin(Stdio::null())
        .stdout(Stdio::null())
        .stderr(Stdio::null())
        .status()
        .is_ok()
}

/// Whether the (unreaped) leader has exited, from its state in `/proc/PID/stat`; `None`
/// where there is no `/proc`.
fn leader_exited(pid: u32) -> Option<bool> {
    let stat = std::fs::read_to_string(format!("/proc/{pid}/stat")).ok()?;
    // The state follows the command name, which is in parentheses and may contain any byte.
    let state = stat.rsplit_once(')')?.1.split_whitespace().next()?;
    Some(matches!(state, "Z" | "X" | "x"))
}

/// Read a pipe to its end on a thread, keeping the first [`OUTPUT_CAP`] bytes.
fn spawn_reader<R: Read + Send + 'static>(mut r: R) -> Option<JoinHandle<Captured>> {
    thread::Builder::new()
        .name("settle-action-output".into())
        .spawn(move || {
            let mut cap = Captured::default();
            let mut buf = [0u8; 8192];
            loop {
                match r.read(&mut buf) {
                    Ok(0) => break,
                    Ok(n) => {
                        let room = OUTPUT_CAP.saturating_sub(cap.head.len());
                        cap.head.extend_from_slice(&buf[..n.min(room)]);
                        cap.total += n as u64;
                    }
                    Err(e) if e.kind() == std::io::ErrorKind::Interrupted => {}
                    Err(_) => break,
                }
            }
            cap
        })
        .ok()
}

#[cfg(test)]
mod tests {
    use super::*;

    fn spec(argv: &[&str], timeout: Duration) -> ExecSpec {
        let path = std::env::var_os("PATH").unwrap_or_else(|| "/usr/bin:/bin".into());
        ExecSpec {
            program: argv[0].into(),
            args: argv[1..].iter().map(|s| s.to_string()).collect(),
            env: vec![("PATH".into(), path)],
            cwd: std::env::temp_dir(),
            timeout,
        }
    }

    #[test]
    fn exit_code_and_output() {
        let r = run(&spec(&["sh", "-c", "echo out; echo err >&2; exit 3"], Duration::from_secs(5)));
        assert_eq!(r.outcome, Outcome::Exited { code: Some(3), signal: None });
        assert_eq!(r.stdout.head, b"out\n");
        assert_eq!(r.stderr.head, b"err\n");
        assert!(!r.lingering_killed);
    }

    #[test]
    fn output_is_capped_but_drained() {
        let r = run(&spec(&["sh", "-c", "head -c 100000 /dev/zero"], Duration::from_secs(5)));
        assert_eq!(r.outcome, Outcome::Exited { code: Some(0), signal: None });
        assert_eq!(r.stdout.head.len(), OUTPUT_CAP);
        assert_eq!(r.stdout.total, 100_000);
    }

    #[test]
    fn missing_program_is_reported() {
        let r = run(&spec(&["settle-no-such-program-xyz"], Duration::from_secs(1)));
        assert!(matches!(r.outcome, Outcome::SpawnFailed(ref m) if m.contains("No such file")));
    }

    #[test]
    fn stdin_is_null() {
        let r = run(&spec(&["sh", "-c", "cat; echo done"], Duration::from_secs(2)));
        assert_eq!(r.stdout.head, b"done\n");
    }

    #[test]
    fn proc_state_of_a_live_process() {
        assert_eq!(leader_exited(std::process::id()), Some(false));
    }
}
