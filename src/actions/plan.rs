//! Validated actions: raw `[[action]]` tables checked once and turned into ready commands.
//!
//! The plan fixes, at load time, everything a command can ever contain: the program, its
//! literal arguments, which arguments are placeholders, and the validated facts that fill
//! them (job id, run name). At fire time only the verdict word and the iteration number
//! (an `i64`, formatted) are added. Text parsed from a log has no way in: the runner's
//! inputs are a [`Verdict`], an iteration number and a record count.

use std::ffi::{OsStr, OsString};
use std::os::unix::ffi::{OsStrExt, OsStringExt};
use std::path::{Path, PathBuf};
use std::time::Duration;

mod confine;

use confine::CaseDirs;

use super::config::ActionConfig;
use super::trust::{FileFacts, check_case_dir, check_facts};
use super::{ActionError, ENV_CAP};
use crate::judge::Verdict;

/// Facts about the run that actions may use, supplied by the caller from the run config.
#[derive(Debug, Clone, PartialEq, Default)]
pub struct RunFacts {
    /// Run name (`{run}`, `SETTLE_RUN`).
    pub name: String,
    /// The run's directory: the command's working directory (made absolute).
    pub dir: PathBuf,
    /// Paths of the run's followed files (`SETTLE_SOURCES`, made absolute: the command runs
    /// in the run's directory, not in settle's).
    pub sources: Vec<PathBuf>,
    /// Scheduler job id from the run config's `job` key. When `None`, the settle process's
    /// own `SLURM_JOB_ID`, `PBS_JOBID` or `LSB_JOBID` is used (first one set).
    pub job: Option<String>,
}

/// Environment variables of the settle process passed on to commands (everything else is
/// cleared).
pub const INHERITED_VARS: [&str; 7] = ["PATH", "HOME", "USER", "LOGNAME", "LANG", "LC_ALL", "TZ"];
/// Prefixes of scheduler variables passed on to commands.
pub const INHERITED_PREFIXES: [&str; 3] = ["SLURM_", "PBS_", "LSB_"];
/// Scheduler variables holding the job id of the settle process, in order of preference.
pub const JOB_ID_VARS: [&str; 3] = ["SLURM_JOB_ID", "PBS_JOBID", "LSB_JOBID"];

/// One argument of a planned command.
#[derive(Debug, Clone, PartialEq)]
pub(crate) enum Arg {
    Literal(String),
    Job,
    Run,
    Verdict,
    Iteration,
}

const PLACEHOLDERS: [(&str, Arg); 4] = [
    ("{job}", Arg::Job),
    ("{run}", Arg::Run),
    ("{verdict}", Arg::Verdict),
    ("{iteration}", Arg::Iteration),
];

/// One validated action.
#[derive(Debug, Clone, PartialEq)]
pub(crate) struct PlannedAction {
    /// 1-based position among the `[[action]]` tables (for messages).
    pub number: usize,
    pub on: Vec<Verdict>,
    /// The program as written (for display).
    pub program_word: String,
    /// The program to run: a bare name (looked up in `PATH`) or an absolute path.
    pub program: PathBuf,
    pub args: Vec<Arg>,
    pub hold: u64,
    pub timeout: Duration,
}

/// The actions of one run, validated and ready to fire.
#[derive(Debug, Clone, PartialEq, Default)]
pub struct ActionPlan {
    pub(crate) actions: Vec<PlannedAction>,
    pub(crate) run: String,
    pub(crate) dir: PathBuf,
    pub(crate) sources: Vec<PathBuf>,
    pub(crate) job: Option<String>,
    pub(crate) config: PathBuf,
    pub(crate) inherited: Vec<(OsString, OsString)>,
}

/// A command ready to start: what runs, where, with which environment.
#[derive(Debug, Clone, PartialEq)]
pub(crate) struct Invocation {
    pub program: PathBuf,
    /// Full argument vector for display: program as written, then the arguments.
    pub argv: Vec<String>,
    pub args: Vec<String>,
    pub env: Vec<(OsString, OsString)>,
    pub cwd: PathBuf,
    pub timeout: Duration,
}

/// Validate `actions` from `config_path` for `run`, using the settle process's environment
/// for the inherited variables and the job-id fallback.
///
/// `facts` describe the file the actions were read from, taken from the descriptor its
/// text was read through ([`super::read_config`]); the file is never looked at by name
/// again. An empty list gives an empty plan without any check. Otherwise the file must pass
/// the ownership and permission check, the case directories (the config's and the run's)
/// must be safe from other users, and no program may resolve inside the case directory
/// through a relative path or a relative or empty `PATH` entry. Any error disables all
/// actions of the run (turn it into an audit entry with [`ActionError::finding`]) and
/// watching goes on.
pub fn load_plan(
    actions: &[ActionConfig],
    config_path: &Path,
    facts: &FileFacts,
    run: &RunFacts,
) -> Result<ActionPlan, ActionError> {
    load_plan_with_env(actions, config_path, facts, run, std::env::vars_os())
}

/// [`load_plan`] with an explicit environment instead of the process's own.
pub fn load_plan_with_env(
    actions: &[ActionConfig],
    config_path: &Path,
    facts: &FileFacts,
    run: &RunFacts,
    env: impl IntoIterator<Item = (OsString, OsString)>,
) -> Result<ActionPlan, ActionError> {
    if actions.is_empty() {
        return Ok(ActionPlan::default());
    }
    check_facts(config_path, facts)?;
    let config = std::path::absolute(config_path).unwrap_or_else(|_| config_path.to_path_buf());
    let config_dir = config.parent().map(Path::to_path_buf).unwrap_or_default();
    let run_dir = std::path::absolute(&run.dir).unwrap_or_else(|_| run.dir.clone());
    let case = CaseDirs::new(&[&config_dir, &run_dir]);
    for dir in &case.dirs {
        check_case_dir(dir)?;
    }
    let env: Vec<(OsString, OsString)> = env.into_iter().collect();
    let inherited: Vec<(OsString, OsString)> =
        env.iter().filter(|(k, _)| is_inherited(k)).cloned().collect();
    let path_var = inherited.iter().find(|(k, _)| k == "PATH").map(|(_, v)| v.clone());

    let mut planned = Vec::with_capacity(actions.len());
    for (i, a) in actions.iter().enumerate() {
        let number = i + 1;
        let invalid = |message: String| ActionError::Invalid {
            path: config_path.to_path_buf(),
            number,
            message,
        };
        let p = plan_one(a, number, &config_dir).map_err(invalid)?;
        case.check_program(&p, path_var.as_deref(), &run_dir).map_err(invalid)?;
        planned.push(p);
    }

    let uses = |arg: &Arg| planned.iter().any(|p| p.args.contains(arg));
    let job = match &run.job {
        Some(j) => Some(j.clone()),
        None => job_from_env(|k| {
            env.iter().find(|(n, _)| n == k).map(|(_, v)| v.to_string_lossy().into_owned())
        }),
    };
    if uses(&Arg::Job) {
        match &job {
            None => {
                return Err(ActionError::Config {
                    path: config_path.to_path_buf(),
                    message: format!(
                        "an action uses {{job}} but no job id is known: set `job = \"…\"` in \
                         the run config, or run settle inside the job ({})",
                        JOB_ID_VARS.join(", ")
                    ),
                });
            }
            Some(j) if !valid_job_id(j) => {
                return Err(ActionError::Config {
                    path: config_path.to_path_buf(),
                    message: format!(
                        "job id {j:?} is not a job id (expected digits, optionally followed \
                         by .server, such as 123456 or 4711.pbs01)"
                    ),
                });
            }
            Some(_) => {}
        }
    }
    if uses(&Arg::Run) {
        if let Err(why) = check_run_name(&run.name) {
            return Err(ActionError::Config {
                path: config_path.to_path_buf(),
                message: format!("run name {:?} cannot be passed as {{run}}: {why}", run.name),
            });
        }
    }

    Ok(ActionPlan {
        actions: planned,
        run: run.name.clone(),
        dir: run_dir,
        sources: run
            .sources
            .iter()
            .map(|p| std::path::absolute(p).unwrap_or_else(|_| p.clone()))
            .collect(),
        job: job.filter(|j| valid_job_id(j)),
        config,
        inherited,
    })
}

fn plan_one(a: &ActionConfig, number: usize, config_dir: &Path) -> Result<PlannedAction, String> {
    let words = a.on.words();
    if words.is_empty() {
        return Err("`on` names no verdict".into());
    }
    let mut on = Vec::new();
    for w in words {
        let v = Verdict::parse(w).ok_or_else(|| {
            let known: Vec<&str> = Verdict::ALL.iter().map(|v| v.as_str()).collect();
            format!("`on`: unknown verdict {w:?} (expected one of {})", known.join(", "))
        })?;
        if !on.contains(&v) {
            on.push(v);
        }
    }
    let hold = a.hold.unwrap_or(ActionConfig::DEFAULT_HOLD);
    if hold == 0 {
        return Err("`hold` must be at least 1".into());
    }
    let timeout = match &a.timeout {
        None => ActionConfig::DEFAULT_TIMEOUT,
        Some(t) => t.to_duration().map_err(|m| format!("`timeout`: {m}"))?,
    };
    let (program_word, rest) =
        a.command.split_first().ok_or("`command` is empty (expected [\"program\", ...])")?;
    if program_word.is_empty() {
        return Err("`command`: the program name is empty".into());
    }
    if parse_arg(program_word)? != Arg::Literal(program_word.clone()) {
        return Err(format!(
            "`command`: the program must be written out, not a placeholder ({program_word})"
        ));
    }
    let program = Path::new(program_word);
    let program = if program_word.contains('/') && program.is_relative() {
        config_dir.join(program)
    } else {
        program.to_path_buf()
    };
    let args = rest.iter().map(|s| parse_arg(s)).collect::<Result<Vec<_>, _>>()?;
    Ok(PlannedAction {
        number,
        on,
        program_word: program_word.clone(),
        program,
        args,
        hold,
        timeout,
    })
}

/// Classify one argument: a whole placeholder, or a literal that contains none.
fn parse_arg(s: &str) -> Result<Arg, String> {
    if s.contains('\0') {
        return Err(format!("`command`: argument {s:?} contains a NUL byte"));
    }
    if let Some((_, arg)) = PLACEHOLDERS.iter().find(|(p, _)| *p == s) {
        return Ok(arg.clone());
    }
    let inner = s.strip_prefix('{').and_then(|r| r.strip_suffix('}'));
    if let Some(name) = inner {
        if !name.is_empty() && name.bytes().all(|b| b.is_ascii_lowercase() || b == b'_') {
            return Err(format!(
                "`command`: unknown placeholder {s} (known: {{job}}, {{run}}, {{verdict}}, \
                 {{iteration}})"
            ));
        }
    }
    if let Some((p, _)) = PLACEHOLDERS.iter().find(|(p, _)| s.contains(p)) {
        return Err(format!(
            "`command`: argument {s:?} uses {p} inside other text; placeholders fill only \
             whole arguments (write {p} as its own argument, or read the SETTLE_* \
             environment variables)"
        ));
    }
    Ok(Arg::Literal(s.to_string()))
}

/// A scheduler job id: digits, optionally followed by dot-separated server labels
/// (`123456`, `4711.pbs01`, `4711.pbs01.example`), at most 64 bytes. It cannot start with
/// `-` (an option) and holds no space or shell character.
pub fn valid_job_id(s: &str) -> bool {
    if s.is_empty() || s.len() > 64 {
        return false;
    }
    let mut parts = s.split('.');
    let digits = parts.next().unwrap_or("");
    !digits.is_empty()
        && digits.bytes().all(|b| b.is_ascii_digit())
        && parts.all(|p| !p.is_empty() && p.bytes().all(|b| b.is_ascii_alphanumeric() || b == b'-'))
}

/// The job id from the first of [`JOB_ID_VARS`] that is set and non-empty.
pub fn job_from_env(lookup: impl Fn(&str) -> Option<String>) -> Option<String> {
    JOB_ID_VARS.iter().find_map(|k| lookup(k).filter(|v| !v.is_empty()))
}

/// Why a run name cannot be an argument, if it cannot.
fn check_run_name(name: &str) -> Result<(), &'static str> {
    if name.is_empty() {
        Err("it is empty")
    } else if name.chars().any(char::is_control) {
        Err("it contains control characters")
    } else if name.starts_with('-') {
        Err("it starts with '-' and would read as an option")
    } else if name.len() > ENV_CAP {
        Err("it is longer than 4 KiB")
    } else {
        Ok(())
    }
}

fn is_inherited(key: &OsStr) -> bool {
    let Some(k) = key.to_str() else { return false };
    INHERITED_VARS.contains(&k) || INHERITED_PREFIXES.iter().any(|p| k.starts_with(p))
}

/// `s` cut to at most `cap` bytes on a character boundary.
pub(crate) fn cap_str(s: &str, cap: usize) -> &str {
    if s.len() <= cap {
        return s;
    }
    let mut end = cap;
    while !s.is_char_boundary(end) {
        end -= 1;
    }
    &s[..end]
}

/// Whole paths joined by `:`, as many as fit in `cap` bytes.
fn join_paths_capped(paths: &[PathBuf], cap: usize) -> OsString {
    let mut out: Vec<u8> = Vec::new();
    for p in paths {
        let b = p.as_os_str().as_bytes();
        let extra = b.len() + usize::from(!out.is_empty());
        if out.len() + extra > cap {
            break;
        }
        if !out.is_empty() {
            out.push(b':');
        }
        out.extend_from_slice(b);
    }
    OsString::from_vec(out)
}

impl ActionPlan {
    /// Number of actions.
    pub fn len(&self) -> usize {
        self.actions.len()
    }

    pub fn is_empty(&self) -> bool {
        self.actions.is_empty()
    }

    /// One line per action, for a start-up notice: `#1 on diverging (hold 3 records,
    /// timeout 30 s): scancel {job}`.
    pub fn summary(&self) -> Vec<String> {
        self.actions
            .iter()
            .map(|a| {
                let on: Vec<&str> = a.on.iter().map(|v| v.as_str()).collect();
                let mut argv = vec![a.program_word.clone()];
                argv.extend(a.args.iter().map(|x| match x {
                    Arg::Literal(s) => s.clone(),
                    Arg::Job => "{job}".into(),
                    Arg::Run => "{run}".into(),
                    Arg::Verdict => "{verdict}".into(),
                    Arg::Iteration => "{iteration}".into(),
                }));
                format!(
                    "#{} on {} (hold {} records, timeout {}): {}",
                    a.number,
                    on.join("|"),
                    a.hold,
                    super::fmt_secs(a.timeout),
                    super::display_argv(&argv)
                )
            })
            .collect()
    }

    /// The command of action `index` for this verdict, ready to start; or why it cannot be
    /// run: a negative iteration (`[step -701]`) would make `{iteration}` an argument that
    /// starts with `-` and reads as an option, the same guard as for run names.
    pub(crate) fn invocation(
        &self,
        index: usize,
        verdict: Verdict,
        previous: Option<Verdict>,
        iteration: i64,
    ) -> Result<Invocation, String> {
        let a = &self.actions[index];
        if iteration < 0 && a.args.contains(&Arg::Iteration) {
            return Err(format!(
                "{{iteration}} would be {iteration}, which starts with '-' and would read as \
                 an option"
            ));
        }
        let args: Vec<String> = a
            .args
            .iter()
            .map(|x| match x {
                Arg::Literal(s) => s.clone(),
                // Load-time validation guarantees a valid job id when {job} is used.
                Arg::Job => self.job.clone().unwrap_or_default(),
                Arg::Run => self.run.clone(),
                Arg::Verdict => verdict.as_str().to_string(),
                Arg::Iteration => iteration.to_string(),
            })
            .collect();
        let mut argv = Vec::with_capacity(args.len() + 1);
        argv.push(a.program_word.clone());
        argv.extend(args.iter().cloned());
        Ok(Invocation {
            program: a.program.clone(),
            argv,
            args,
            env: self.child_env(verdict, previous, iteration),
            cwd: self.dir.clone(),
            timeout: a.timeout,
        })
    }

    /// The complete environment of a command: the inherited allow-list plus the facts.
    fn child_env(
        &self,
        verdict: Verdict,
        previous: Option<Verdict>,
        iteration: i64,
    ) -> Vec<(OsString, OsString)> {
        let mut env = self.inherited.clone();
        let mut set = |k: &str, v: OsString| env.push((OsString::from(k), v));
        set("SETTLE_RUN", cap_str(&self.run, ENV_CAP).into());
        set("SETTLE_VERDICT", verdict.as_str().into());
        set("SETTLE_PREVIOUS_VERDICT", previous.map(|v| v.as_str()).unwrap_or("").into());
        set("SETTLE_ITERATION", iteration.to_string().into());
        set("SETTLE_SOURCES", join_paths_capped(&self.sources, ENV_CAP));
        if self.config.as_os_str().len() <= ENV_CAP {
            set("SETTLE_CONFIG", self.config.clone().into_os_string());
        }
        if let Some(j) = &self.job {
            set("SETTLE_JOB", j.into());
        }
        env.sort();
        env
    }
}

#[cfg(test)]
mod tests;
