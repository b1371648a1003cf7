//! Opt-in commands on verdict transitions: cancel a hopeless job, submit the next one.
//!
//! Owns the `[[action]]` config, its validation, the trust check of the file it came from,
//! the hold/latch rules, and running commands safely in the background. It must never run
//! anything unless the user asked twice: the command is in their own config, *and* the
//! session was started with `--act` (otherwise every fire is a dry run that only reports
//! what would have run).
//!
//! Safety rules (RELIABILITY §6):
//! * **No shell.** A command is an argument vector run with `std::process::Command`.
//!   Placeholders fill only whole arguments, from a fixed set: `{job}` (a validated job id),
//!   `{run}` (the run name, validated), `{verdict}` (a verdict word) and `{iteration}` (an
//!   integer). Text from a log never reaches the argument vector; facts reach the command
//!   through `SETTLE_*` environment variables, each capped at 4 KiB.
//! * **Trusted file only.** A config that is group- or world-writable, or owned by another
//!   user, gets no actions; neither does one in a case directory that others may write
//!   (without the sticky bit). The file's owner and mode come from the descriptor its text
//!   was read from, so a swap under its name cannot slip in another file ([`trust`]). A
//!   relative program path, or a `PATH` entry that is empty or relative, that would resolve
//!   inside the case directory is refused ([`plan`]). Watching goes on.
//! * **Hygiene.** Cleared environment plus an allow-list, the run's directory as working
//!   directory, stdin from `/dev/null`, output captured (first 4 KiB), own process group,
//!   timeout then the group is killed ([`exec`]).
//! * **Once per transition** with a hold of consecutive records ([`latch`]).
//! * **Audit.** Every dry run, execution, skip and refusal is a [`Finding`] of kind
//!   [`FindingKind::Action`] for the findings list and the headless output.
//!
//! Environment of a command: `PATH HOME USER LOGNAME LANG LC_ALL TZ` and every `SLURM_*`,
//! `PBS_*`, `LSB_*` variable of the settle process (when set), plus `SETTLE_RUN`,
//! `SETTLE_VERDICT`, `SETTLE_PREVIOUS_VERDICT` (empty when there was none),
//! `SETTLE_ITERATION`, `SETTLE_SOURCES` (paths joined by `:`; only whole paths that fit in
//! 4 KiB), `SETTLE_CONFIG` (absolute path of the config file) and, when a job id is known,
//! `SETTLE_JOB`.

pub mod config;
pub mod exec;
pub mod latch;
pub mod plan;
pub mod runner;
pub mod trust;

use std::path::PathBuf;
use std::time::Duration;

pub use config::{ActionConfig, OnSpec, TimeoutSpec};
pub use exec::Outcome;
pub use plan::{ActionPlan, RunFacts, load_plan, load_plan_with_env, valid_job_id};
pub use runner::{ActionRecord, ActionRunner, Observation};
pub use trust::{FileFacts, check_facts, read_config};

use crate::judge::{Finding, FindingKind};

/// Cap of each `SETTLE_*` environment value, bytes.
pub const ENV_CAP: usize = 4096;
/// Bytes of stdout and of stderr kept from each command.
pub const OUTPUT_CAP: usize = 4096;

/// Why actions are disabled for a run. Messages are written for the user and name the file.
#[derive(Debug, Clone, PartialEq, thiserror::Error)]
pub enum ActionError {
    #[error(
        "refusing actions from {}: it is writable by group or others (mode {mode:04o}, owner \
         uid {owner}); actions need a config only you can write (chmod go-w {})",
        path.display(),
        path.display()
    )]
    Writable { path: PathBuf, mode: u32, owner: u32 },
    #[error(
        "refusing actions from {}: it is owned by uid {owner}, not by you (uid {uid}; mode \
         {mode:04o})",
        path.display()
    )]
    NotOwned { path: PathBuf, mode: u32, owner: u32, uid: u32 },
    #[error("refusing actions from {}: cannot check the file: {message}", path.display())]
    Io { path: PathBuf, message: String },
    #[error("refusing actions: cannot determine the current user id: {0}")]
    Uid(String),
    #[error("refusing actions: the case directory {} is unsafe: {reason}", path.display())]
    UnsafeDir { path: PathBuf, reason: String },
    #[error("{}: {message}", path.display())]
    Config { path: PathBuf, message: String },
    #[error("{}: [[action]] #{number}: {message}", path.display())]
    Invalid { path: PathBuf, number: usize, message: String },
}

impl ActionError {
    /// The audit entry of a refusal: `refused: <message>; actions are off for this run,
    /// watching goes on`.
    pub fn finding(&self) -> Finding {
        let msg = self.to_string();
        let msg = msg
            .strip_prefix("refusing actions from ")
            .or_else(|| msg.strip_prefix("refusing actions: "))
            .unwrap_or(&msg);
        Finding {
            kind: FindingKind::Action,
            statistic: "refused".into(),
            detail: format!(
                "refused: {}; actions are off for this run, watching goes on",
                sanitize_line(msg)
            ),
            ..Finding::default()
        }
    }
}

/// An argument vector as a reader (and a POSIX shell) would read it: plain words as they
/// are, anything else in single quotes; control characters shown as `^X`.
pub fn display_argv(argv: &[String]) -> String {
    let plain = |s: &str| {
        !s.is_empty() && s.bytes().all(|b| b.is_ascii_alphanumeric() || b"_-./:=@%+{}".contains(&b))
    };
    argv.iter()
        .map(|a| {
            let a = sanitize_line(a);
            if plain(&a) { a } else { format!("'{}'", a.replace('\'', r"'\''")) }
        })
        .collect::<Vec<_>>()
        .join(" ")
}

/// `0.1 s`, `12 s`, `2.5 min`: for audit lines.
pub fn fmt_secs(d: Duration) -> String {
    let s = d.as_secs_f64();
    if s < 10.0 {
        format!("{s:.1} s")
    } else if s < 120.0 {
        format!("{s:.0} s")
    } else {
        format!("{:.1} min", s / 60.0)
    }
}

/// One line of text safe for a terminal or a log: C0/C1 controls and DEL as `^X` (or
/// `\u{..}` for C1), tabs and newlines as a space.
pub fn sanitize_line(s: &str) -> String {
    let mut out = String::with_capacity(s.len());
    for c in s.chars() {
        match c {
            '\t' | '\n' | '\r' => out.push(' '),
            '\x7f' => out.push_str("^?"),
            c if (c as u32) < 0x20 => {
                out.push('^');
                out.push(char::from(b'@' + c as u8));
            }
            c if c.is_control() => out.push_str(&format!("\\u{{{:x}}}", c as u32)),
            c => out.push(c),
        }
    }
    out
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn argv_display_quotes_what_a_shell_would_split() {
        let v = |a: &[&str]| a.iter().map(|s| s.to_string()).collect::<Vec<_>>();
        assert_eq!(display_argv(&v(&["scancel", "123456"])), "scancel 123456");
        assert_eq!(
            display_argv(&v(&["echo", "; rm -rf ~ $(touch pwned)"])),
            "echo '; rm -rf ~ $(touch pwned)'"
        );
        assert_eq!(display_argv(&v(&["echo", "it's"])), r"echo 'it'\''s'");
        assert_eq!(display_argv(&v(&["echo", ""])), "echo ''");
        assert_eq!(display_argv(&v(&["a\x1b[31m"])), "'a^[[31m'");
    }

    #[test]
    fn sanitize_controls() {
        assert_eq!(sanitize_line("a\tb\nc\x07d\x7f\u{85}"), "a b c^Gd^?\\u{85}");
        assert_eq!(sanitize_line("plain ü"), "plain ü");
    }

    #[test]
    fn seconds() {
        assert_eq!(fmt_secs(Duration::from_millis(94)), "0.1 s");
        assert_eq!(fmt_secs(Duration::from_secs(30)), "30 s");
        assert_eq!(fmt_secs(Duration::from_secs(150)), "2.5 min");
    }

    #[test]
    fn refusal_finding() {
        let e = ActionError::Writable { path: "/c/settle.toml".into(), mode: 0o664, owner: 5 };
        let f = e.finding();
        assert_eq!(f.kind, FindingKind::Action);
        assert_eq!(f.statistic, "refused");
        assert!(f.detail.starts_with("refused: /c/settle.toml: it is writable"), "{}", f.detail);
        assert!(f.detail.ends_with("actions are off for this run, watching goes on"));
        assert!(f.detail.contains("mode 0664"));
    }
}
