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

/// The case directories (config directory and run directory), as written and resolved.
struct CaseDirs {
    /// Distinct absolute directories, for the permission check.
    dirs: Vec<PathBuf>,
    /// Their lexical and canonical forms, for "inside" tests.
    forms: Vec<PathBuf>,
}

impl CaseDirs {
    fn new(dirs: &[&Path]) -> CaseDirs {
        let mut out = CaseDirs { dirs: Vec::new(), forms: Vec::new() };
        for d in dirs {
            let lexical = lexical(d);
            let canonical = std::fs::canonicalize(d).unwrap_or_else(|_| lexical.clone());
            if !out.forms.contains(&canonical) {
                out.dirs.push(lexical.clone());
            }
            for f in [lexical, canonical] {
                if !out.forms.contains(&f) {
                    out.forms.push(f);
                }
            }
        }
        out
    }

    /// Whether `p` (absolute) lies inside one of the case directories.
    fn contains(&self, p: &Path) -> bool {
        let lex = lexical(p);
        let canonical = std::fs::canonicalize(p).unwrap_or_else(|_| lex.clone());
        [lex, canonical].iter().any(|f| self.forms.iter().any(|d| f.starts_with(d)))
    }

    /// Refuse a program that would be taken from inside the case directory: a relative
    /// path resolving there, or (for a bare name) an empty or relative `PATH` entry, which
    /// the command resolves against its working directory, the run's directory.
    fn check_program(
        &self,
        p: &PlannedAction,
        path_var: Option<&OsStr>,
        run_dir: &Path,
    ) -> Result<(), String> {
        let word = &p.program_word;
        if word.contains('/') {
            if Path::new(word).is_relative() && self.contains(&p.program) {
                return Err(format!(
                    "`command`: the program {word:?} is a relative path inside the case \
                     directory ({}); a file there can be replaced by whatever writes into the \
                     case. Give an absolute path outside the case directory",
                    lexical(&p.program).display()
                ));
            }
            return Ok(());
        }
        let Some(path_var) = path_var else {
            return Ok(());
        };
        for entry in std::env::split_paths(path_var) {
            if entry.is_absolute() {
                continue;
            }
            let resolved = run_dir.join(&entry);
            if self.contains(&resolved) {
                let shown = if entry.as_os_str().is_empty() {
                    "an empty entry".to_string()
                } else {
                    format!("the relative entry {:?}", entry.display().to_string())
                };
                return Err(format!(
                    "`command`: {word:?} is looked up in PATH, which has {shown}; commands run \
                     in the case directory, so that entry is {} and a file named {word:?} \
                     there would run. Remove such entries from PATH or give the program's \
                     absolute path",
                    lexical(&resolved).display()
                ));
            }
        }
        Ok(())
    }
}

/// `p` with `.` and `..` components resolved without touching the file system.
fn lexical(p: &Path) -> PathBuf {
    use std::path::Component;
    let mut out = PathBuf::new();
    for c in p.components() {
        match c {
            Component::CurDir => {}
            Component::ParentDir => {
                out.pop();
            }
            other => out.push(other.as_os_str()),
        }
    }
    out
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
mod tests {
    use super::*;
    use crate::actions::config::{OnSpec, TimeoutSpec};

    fn cfg(command: &[&str]) -> ActionConfig {
        ActionConfig {
            on: OnSpec::One("diverging".into()),
            command: command.iter().map(|s| s.to_string()).collect(),
            hold: None,
            timeout: None,
        }
    }

    fn private_config(dir: &Path) -> PathBuf {
        use std::os::unix::fs::PermissionsExt;
        let p = dir.join("settle.toml");
        std::fs::write(&p, "# test\n").expect("write config");
        std::fs::set_permissions(&p, std::fs::Permissions::from_mode(0o644)).expect("chmod");
        p
    }

    fn facts(dir: &Path) -> RunFacts {
        RunFacts {
            name: "duct-bend-07".into(),
            dir: dir.to_path_buf(),
            sources: vec![dir.join("log.tarn")],
            job: Some("123456".into()),
        }
    }

    fn no_env() -> Vec<(OsString, OsString)> {
        Vec::new()
    }

    /// Owner and mode of the config, read from its descriptor as `config::load` does.
    fn ff(conf: &Path) -> FileFacts {
        crate::actions::read_config(conf).expect("read config").1
    }

    #[test]
    fn arguments_classify() {
        assert_eq!(parse_arg("{job}"), Ok(Arg::Job));
        assert_eq!(parse_arg("{iteration}"), Ok(Arg::Iteration));
        assert_eq!(parse_arg("--signal=TERM"), Ok(Arg::Literal("--signal=TERM".into())));
        assert_eq!(parse_arg("{print $1}"), Ok(Arg::Literal("{print $1}".into())));
        assert_eq!(parse_arg("{}"), Ok(Arg::Literal("{}".into())));
        assert!(parse_arg("{jobid}").is_err_and(|m| m.contains("unknown placeholder {jobid}")));
        assert!(parse_arg("--job={job}").is_err_and(|m| m.contains("whole arguments")));
        assert!(parse_arg("a\0b").is_err_and(|m| m.contains("NUL")));
    }

    #[test]
    fn job_ids() {
        for ok in ["1", "123456", "4711.pbs01", "4711.pbs01.example-site"] {
            assert!(valid_job_id(ok), "{ok}");
        }
        for bad in ["", "-1", "12 34", "12;rm", "abc", "12.", "12..x", ".x", "1$(x)", "12_3"] {
            assert!(!valid_job_id(bad), "{bad}");
        }
        assert!(!valid_job_id(&"9".repeat(65)));
        let env = |k: &str| match k {
            "PBS_JOBID" => Some("77.srv".to_string()),
            "SLURM_JOB_ID" => Some(String::new()),
            _ => None,
        };
        assert_eq!(job_from_env(env), Some("77.srv".into()));
        assert_eq!(job_from_env(|_| None), None);
    }

    #[test]
    fn plan_substitutes_whole_arguments_only() {
        let dir = tempfile::tempdir().expect("tempdir");
        let conf = private_config(dir.path());
        let plan = load_plan_with_env(
            &[cfg(&["scancel", "{job}", "--comment", "{run}", "{verdict}", "{iteration}"])],
            &conf,
            &ff(&conf),
            &facts(dir.path()),
            no_env(),
        )
        .expect("valid plan");
        let inv =
            plan.invocation(0, Verdict::Diverging, Some(Verdict::Converging), 1450).expect("runs");
        assert_eq!(
            inv.argv,
            vec!["scancel", "123456", "--comment", "duct-bend-07", "diverging", "1450"]
        );
        assert_eq!(inv.program, PathBuf::from("scancel"));
        assert_eq!(inv.cwd, dir.path());
        assert_eq!(inv.timeout, Duration::from_secs(30));
        let keys: Vec<String> =
            inv.env.iter().map(|(k, _)| k.to_string_lossy().into_owned()).collect();
        assert_eq!(
            keys,
            vec![
                "SETTLE_CONFIG",
                "SETTLE_ITERATION",
                "SETTLE_JOB",
                "SETTLE_PREVIOUS_VERDICT",
                "SETTLE_RUN",
                "SETTLE_SOURCES",
                "SETTLE_VERDICT"
            ]
        );
        assert_eq!(
            plan.summary(),
            vec![
                "#1 on diverging (hold 3 records, timeout 30 s): scancel {job} --comment {run} \
                 {verdict} {iteration}"
            ]
        );
    }

    #[test]
    fn relative_programs_inside_the_case_directory_are_refused() {
        let dir = tempfile::tempdir().expect("tempdir");
        let conf = private_config(dir.path());
        let f = facts(dir.path());
        for word in ["./stop.sh", "bin/stop.sh", "bin/../stop.sh"] {
            let m = load_plan_with_env(&[cfg(&[word])], &conf, &ff(&conf), &f, no_env())
                .expect_err(word)
                .to_string();
            assert!(m.contains("relative path inside the case directory"), "{m}");
            assert!(m.contains("[[action]] #1"), "{m}");
        }
        // Relative to the config's directory, but outside the case: allowed, made absolute.
        let conf_dir = dir.path().join("conf");
        std::fs::create_dir(&conf_dir).expect("mkdir");
        let conf2 = private_config(&conf_dir);
        let case = dir.path().join("case");
        std::fs::create_dir(&case).expect("mkdir");
        let plan = load_plan_with_env(
            &[cfg(&["../bin/stop.sh"])],
            &conf2,
            &ff(&conf2),
            &facts(&case),
            no_env(),
        )
        .expect("outside the case directory");
        let inv = plan.invocation(0, Verdict::Diverging, None, 1).expect("runs");
        assert_eq!(inv.program, conf_dir.join("../bin/stop.sh"));
        assert_eq!(inv.argv, vec!["../bin/stop.sh"]);
        assert_eq!(inv.cwd, case);
    }

    #[test]
    fn path_entries_resolving_in_the_case_directory_are_refused() {
        let dir = tempfile::tempdir().expect("tempdir");
        let conf = private_config(dir.path());
        let f = facts(dir.path());
        let env = |path: &str| vec![(OsString::from("PATH"), OsString::from(path))];
        for path in ["/usr/bin::/bin", "/usr/bin:.", "bin:/usr/bin", ":/usr/bin", "/usr/bin:"] {
            let m =
                load_plan_with_env(&[cfg(&["scancel", "{job}"])], &conf, &ff(&conf), &f, env(path))
                    .expect_err(path)
                    .to_string();
            assert!(m.contains("looked up in PATH"), "{path}: {m}");
        }
        // Absolute entries, or a relative one leading out of the case: fine.
        for path in ["/usr/bin:/bin", "../tools:/usr/bin"] {
            assert!(
                load_plan_with_env(&[cfg(&["scancel"])], &conf, &ff(&conf), &f, env(path)).is_ok(),
                "{path}"
            );
        }
        // An absolute program is not looked up in PATH at all.
        assert!(
            load_plan_with_env(&[cfg(&["/usr/bin/scancel"])], &conf, &ff(&conf), &f, env("."))
                .is_ok()
        );
    }

    #[test]
    fn a_case_directory_others_may_write_is_refused() {
        use std::os::unix::fs::PermissionsExt;
        let dir = tempfile::tempdir().expect("tempdir");
        let conf = private_config(dir.path());
        let f = facts(dir.path());
        std::fs::set_permissions(dir.path(), std::fs::Permissions::from_mode(0o775))
            .expect("chmod");
        let m = load_plan_with_env(&[cfg(&["true"])], &conf, &ff(&conf), &f, no_env())
            .expect_err("group-writable case directory")
            .to_string();
        assert!(m.contains("the case directory"), "{m}");
        assert!(m.contains("without the sticky bit (mode 0775)"), "{m}");
        // The sticky bit keeps others from replacing our files.
        std::fs::set_permissions(dir.path(), std::fs::Permissions::from_mode(0o1777))
            .expect("chmod");
        assert!(load_plan_with_env(&[cfg(&["true"])], &conf, &ff(&conf), &f, no_env()).is_ok());
        std::fs::set_permissions(dir.path(), std::fs::Permissions::from_mode(0o700))
            .expect("chmod");
    }

    #[test]
    fn a_negative_iteration_is_never_an_argument() {
        let dir = tempfile::tempdir().expect("tempdir");
        let conf = private_config(dir.path());
        let plan = load_plan_with_env(
            &[cfg(&["scancel", "{iteration}"]), cfg(&["scancel", "{job}"])],
            &conf,
            &ff(&conf),
            &facts(dir.path()),
            no_env(),
        )
        .expect("plan");
        let why = plan.invocation(0, Verdict::Diverging, None, -701).expect_err("option-like");
        assert!(why.contains("{iteration} would be -701"), "{why}");
        assert!(why.contains("read as an option"), "{why}");
        assert_eq!(
            plan.invocation(0, Verdict::Diverging, None, 701).expect("runs").argv,
            vec!["scancel", "701"]
        );
        // An action that does not use {iteration} is not affected.
        assert!(plan.invocation(1, Verdict::Diverging, None, -701).is_ok());
        let env = plan.invocation(1, Verdict::Diverging, None, -701).expect("runs").env;
        assert!(env.contains(&("SETTLE_ITERATION".into(), "-701".into())));
    }

    #[test]
    fn sources_and_directory_are_absolute() {
        let dir = tempfile::tempdir().expect("tempdir");
        let conf = private_config(dir.path());
        let cwd = std::env::current_dir().expect("cwd");
        let rel_dir = pathdiff(dir.path(), &cwd);
        let mut f = facts(&rel_dir);
        f.sources = vec![rel_dir.join("log.tarn"), rel_dir.join("forces.dat")];
        let plan =
            load_plan_with_env(&[cfg(&["true"])], &conf, &ff(&conf), &f, no_env()).expect("plan");
        let inv = plan.invocation(0, Verdict::Diverging, None, 1).expect("runs");
        assert!(inv.cwd.is_absolute(), "{}", inv.cwd.display());
        let sources =
            inv.env.iter().find(|(k, _)| k == "SETTLE_SOURCES").expect("sources").1.clone();
        let sources = sources.to_string_lossy().into_owned();
        for s in sources.split(':') {
            assert!(Path::new(s).is_absolute(), "{sources}");
            assert!(Path::new(s).starts_with(&cwd), "{sources}");
        }
    }

    /// `to` relative to `from` (both absolute), with `..` as needed.
    fn pathdiff(to: &Path, from: &Path) -> PathBuf {
        let (t, f): (Vec<_>, Vec<_>) = (to.components().collect(), from.components().collect());
        let common = t.iter().zip(&f).take_while(|(a, b)| a == b).count();
        let mut out = PathBuf::new();
        for _ in common..f.len() {
            out.push("..");
        }
        for c in &t[common..] {
            out.push(c.as_os_str());
        }
        out
    }

    #[test]
    fn validation_errors_name_file_action_and_key() {
        let dir = tempfile::tempdir().expect("tempdir");
        let conf = private_config(dir.path());
        let f = facts(dir.path());
        let err = |a: ActionConfig| {
            load_plan_with_env(&[cfg(&["true"]), a], &conf, &ff(&conf), &f, no_env())
                .expect_err("invalid")
                .to_string()
        };
        let mut a = cfg(&["true"]);
        a.on = OnSpec::One("exploding".into());
        let m = err(a);
        assert!(m.starts_with(&format!("{}: [[action]] #2: `on`", conf.display())), "{m}");
        assert!(m.contains("unknown verdict \"exploding\""), "{m}");
        let mut a = cfg(&["true"]);
        a.hold = Some(0);
        assert!(err(a).contains("`hold` must be at least 1"));
        let mut a = cfg(&["true"]);
        a.timeout = Some(TimeoutSpec::Text("forever".into()));
        assert!(err(a).contains("`timeout`"));
        assert!(err(cfg(&[])).contains("`command` is empty"));
        assert!(err(cfg(&["{run}"])).contains("must be written out"));
        assert!(err(cfg(&["echo", "run={run}"])).contains("whole arguments"));
    }

    #[test]
    fn job_and_run_name_checks() {
        let dir = tempfile::tempdir().expect("tempdir");
        let conf = private_config(dir.path());
        let mut f = facts(dir.path());
        f.job = None;
        let m = load_plan_with_env(&[cfg(&["scancel", "{job}"])], &conf, &ff(&conf), &f, no_env())
            .expect_err("no job id")
            .to_string();
        assert!(m.contains("no job id is known"), "{m}");
        let env = vec![(OsString::from("SLURM_JOB_ID"), OsString::from("998877"))];
        let plan = load_plan_with_env(&[cfg(&["scancel", "{job}"])], &conf, &ff(&conf), &f, env)
            .expect("job from environment");
        assert_eq!(
            plan.invocation(0, Verdict::Stale, None, 0).expect("runs").argv,
            vec!["scancel", "998877"]
        );
        f.job = Some("12; rm -rf ~".into());
        let m = load_plan_with_env(&[cfg(&["scancel", "{job}"])], &conf, &ff(&conf), &f, no_env())
            .expect_err("bad job id")
            .to_string();
        assert!(m.contains("is not a job id"), "{m}");
        // An invalid job id that no action uses does not matter.
        assert!(load_plan_with_env(&[cfg(&["true"])], &conf, &ff(&conf), &f, no_env()).is_ok());
        f.name = "--all".into();
        let m = load_plan_with_env(&[cfg(&["echo", "{run}"])], &conf, &ff(&conf), &f, no_env())
            .expect_err("option-like run name")
            .to_string();
        assert!(m.contains("would read as an option"), "{m}");
        f.name = "a\x1b[2Jb".into();
        assert!(
            load_plan_with_env(&[cfg(&["echo", "{run}"])], &conf, &ff(&conf), &f, no_env())
                .is_err()
        );
    }

    #[test]
    fn empty_list_skips_the_file_check() {
        let none = FileFacts { mode: 0o100666, owner: u32::MAX, regular: false };
        let plan = load_plan_with_env(
            &[],
            Path::new("/nonexistent/settle.toml"),
            &none,
            &RunFacts::default(),
            no_env(),
        )
        .expect("no actions, no check");
        assert!(plan.is_empty());
    }

    #[test]
    fn caps() {
        assert_eq!(cap_str("abc", 5), "abc");
        assert_eq!(cap_str("aé", 2), "a");
        let paths: Vec<PathBuf> = vec!["/a/b".into(), "/c".into(), "/dd".into()];
        assert_eq!(join_paths_capped(&paths, 100), OsString::from("/a/b:/c:/dd"));
        assert_eq!(join_paths_capped(&paths, 8), OsString::from("/a/b:/c"));
        assert_eq!(join_paths_capped(&paths, 3), OsString::from(""));
    }
}
