//! Actions end to end with real processes: dry run, execution, injection, hold and latch,
//! timeout with the process group, permission refusal, environment hygiene
//! (RELIABILITY checklist items 28 and 29).

use std::ffi::OsString;
use std::fs;
use std::os::unix::fs::PermissionsExt;
use std::path::{Path, PathBuf};
use std::time::{Duration, Instant};

use settle::actions::{
    ActionConfig, ActionError, ActionRunner, FileFacts, Observation, OnSpec, RunFacts, TimeoutSpec,
    load_plan_with_env, read_config,
};
use settle::judge::{FindingKind, Verdict};

struct Case {
    dir: tempfile::TempDir,
    config: PathBuf,
}

impl Case {
    fn new() -> Case {
        let dir = tempfile::tempdir().expect("tempdir");
        let config = dir.path().join("settle.toml");
        fs::write(&config, "# actions under test\n").expect("write config");
        fs::set_permissions(&config, fs::Permissions::from_mode(0o644)).expect("chmod");
        Case { dir, config }
    }

    fn path(&self) -> &Path {
        self.dir.path()
    }

    fn facts(&self, name: &str) -> RunFacts {
        RunFacts {
            name: name.into(),
            dir: self.path().to_path_buf(),
            sources: vec![self.path().join("log.tarn"), self.path().join("forces.dat")],
            job: Some("123456".into()),
        }
    }

    /// A minimal environment: the test's PATH and a HOME inside the case directory, so
    /// that even a broken implementation could not touch the real home.
    fn env(&self) -> Vec<(OsString, OsString)> {
        let path = std::env::var_os("PATH").unwrap_or_else(|| "/usr/bin:/bin".into());
        vec![("PATH".into(), path), ("HOME".into(), self.path().as_os_str().to_owned())]
    }

    /// Owner and mode of the config, from the descriptor its text is read through.
    fn file(&self) -> FileFacts {
        read_config(&self.config).expect("read config").1
    }

    fn runner(&self, name: &str, actions: &[ActionConfig]) -> ActionRunner {
        let plan =
            load_plan_with_env(actions, &self.config, &self.file(), &self.facts(name), self.env())
                .expect("valid plan");
        ActionRunner::new(plan)
    }
}

fn action(on: &str, command: &[&str], hold: u64) -> ActionConfig {
    ActionConfig {
        on: OnSpec::One(on.into()),
        command: command.iter().map(|s| s.to_string()).collect(),
        hold: Some(hold),
        timeout: Some(TimeoutSpec::Seconds(5.0)),
    }
}

/// Feed `hold` records of `verdict` starting after record `from`; returns the findings.
fn feed(
    r: &mut ActionRunner,
    verdict: Verdict,
    from: u64,
    n: u64,
    act: bool,
) -> Vec<settle::judge::Finding> {
    let mut out = Vec::new();
    for k in 1..=n {
        let rec = from + k;
        out.extend(r.observe(&Observation::new(verdict, 100 + rec as i64, rec), act));
    }
    out
}

#[test]
fn dry_run_runs_nothing_but_writes_the_audit_entry() {
    let case = Case::new();
    let mut r = case.runner("duct-bend-07", &[action("diverging", &["touch", "marker"], 3)]);
    let f = feed(&mut r, Verdict::Diverging, 0, 3, false);
    assert_eq!(f.len(), 1);
    assert_eq!(f[0].kind, FindingKind::Action);
    assert_eq!(f[0].statistic, "dry_run");
    assert_eq!(f[0].first, 103);
    assert!(
        f[0].detail.starts_with("would run touch marker (action #1, dry run: pass --act"),
        "{}",
        f[0].detail
    );
    assert!(f[0].detail.contains("SETTLE_VERDICT"), "{}", f[0].detail);
    assert!(f[0].detail.contains(&format!("cwd {}", case.path().display())));
    assert_eq!(r.running(), 0);
    assert!(r.wait_finished(Duration::from_millis(300)).is_empty());
    assert!(!case.path().join("marker").exists(), "a dry run must not run the command");
}

#[test]
fn execution_writes_marker_with_the_verdict() {
    let case = Case::new();
    let cmd = ["sh", "-c", "echo \"$SETTLE_VERDICT $SETTLE_ITERATION $SETTLE_JOB\" > marker"];
    let mut r = case.runner("duct-bend-07", &[action("diverging", &cmd, 3)]);
    assert!(feed(&mut r, Verdict::Diverging, 0, 3, true).is_empty(), "reported when done");
    let f = r.wait_finished(Duration::from_secs(3));
    assert_eq!(f.len(), 1);
    assert_eq!(f[0].statistic, "exit_code");
    assert_eq!(f[0].value, 0.0);
    assert!(f[0].detail.starts_with("ran sh -c 'echo "), "{}", f[0].detail);
    assert!(f[0].detail.contains(": exit 0 after "), "{}", f[0].detail);
    let marker = fs::read_to_string(case.path().join("marker")).expect("marker written");
    assert_eq!(marker, "diverging 103 123456\n");
    let h: Vec<_> = r.history().collect();
    assert_eq!(h.len(), 1);
    assert_eq!(h[0].verdict, Verdict::Diverging);
    assert_eq!(h[0].iteration, 103);
}

#[test]
fn placeholders_fill_whole_arguments_and_output_is_audited() {
    let case = Case::new();
    let cmd = ["printf", "[%s]", "{job}", "{run}", "{verdict}", "{iteration}"];
    let mut r = case.runner("duct-bend-07", &[action("stalled", &cmd, 1)]);
    feed(&mut r, Verdict::Stalled, 0, 1, true);
    let f = r.wait_finished(Duration::from_secs(3));
    assert_eq!(f.len(), 1);
    let h: Vec<_> = r.history().collect();
    assert_eq!(h[0].stdout, "[123456][duct-bend-07][stalled][101]");
    assert_eq!(h[0].argv, vec!["printf", "[%s]", "123456", "duct-bend-07", "stalled", "101"]);
    assert!(
        f[0].detail.ends_with("; output: [123456][duct-bend-07][stalled][101]"),
        "{}",
        f[0].detail
    );
}

/// RELIABILITY item 28: hostile text in the run name (the only free text an action can
/// carry) stays one literal argument or one environment value; no shell ever parses it.
#[test]
fn injection_text_never_becomes_a_command() {
    let case = Case::new();
    let hostile = "; rm -rf ~ $(touch pwned)";
    let keep = case.path().join("keep");
    fs::write(&keep, "still here").expect("write");
    let actions = [
        action("diverging", &["echo", "{run}", "{verdict}"], 3),
        // Even an author-chosen shell sees the facts only as variable values.
        action(
            "diverging",
            &["sh", "-c", "echo $SETTLE_RUN > env-plain; echo \"$SETTLE_RUN\" > env-quoted"],
            3,
        ),
    ];
    let mut r = case.runner(hostile, &actions);
    // Fires once however long the verdict holds.
    assert!(feed(&mut r, Verdict::Diverging, 0, 10, true).is_empty());
    let f = r.wait_finished(Duration::from_secs(3));
    assert_eq!(f.len(), 2, "{f:?}");
    assert!(f.iter().all(|x| x.statistic == "exit_code" && x.value == 0.0), "{f:?}");
    assert!(feed(&mut r, Verdict::Diverging, 10, 10, true).is_empty());
    assert!(r.wait_finished(Duration::from_millis(200)).is_empty(), "fires once");

    let echo = r.history().find(|h| h.action == 1).expect("echo ran");
    assert_eq!(echo.argv, vec!["echo", hostile, "diverging"]);
    assert_eq!(echo.stdout, format!("{hostile} diverging\n"));
    assert_eq!(
        fs::read_to_string(case.path().join("env-quoted")).expect("written"),
        format!("{hostile}\n")
    );
    // Unquoted expansion splits words but never runs `$(...)`.
    assert_eq!(
        fs::read_to_string(case.path().join("env-plain")).expect("written"),
        "; rm -rf ~ $(touch pwned)\n"
    );
    assert!(!case.path().join("pwned").exists());
    assert!(!Path::new("pwned").exists());
    assert_eq!(fs::read_to_string(&keep).expect("home untouched"), "still here");
    // The audit line shows the argument quoted, as one word.
    let line = &f.iter().find(|x| x.detail.starts_with("ran echo")).expect("audit").detail;
    assert!(line.starts_with("ran echo '; rm -rf ~ $(touch pwned)' diverging: exit 0"), "{line}");
}

#[test]
fn hold_fires_once_and_rearms_after_leaving() {
    let case = Case::new();
    let mut r = case.runner("r", &[action("diverging", &["true"], 4)]);
    assert!(feed(&mut r, Verdict::Diverging, 0, 3, false).is_empty(), "3 of 4 records");
    let f = feed(&mut r, Verdict::Diverging, 3, 1, false);
    assert_eq!(f.len(), 1, "fires on the 4th record");
    assert!(feed(&mut r, Verdict::Diverging, 4, 20, false).is_empty(), "latched");
    // Re-judging without new records does not count either.
    for _ in 0..5 {
        assert!(r.observe(&Observation::new(Verdict::Diverging, 124, 24), false).is_empty());
    }
    assert!(feed(&mut r, Verdict::Converging, 24, 1, false).is_empty(), "left: re-armed");
    assert!(feed(&mut r, Verdict::Diverging, 25, 3, false).is_empty());
    assert_eq!(feed(&mut r, Verdict::Diverging, 28, 1, false).len(), 1, "fires again");
}

#[test]
fn a_list_of_verdicts_is_one_condition_and_final_data_waives_the_hold() {
    let case = Case::new();
    let mut a = action("x", &["true"], 3);
    a.on = OnSpec::Many(vec!["diverging".into(), "stale".into()]);
    let mut r = case.runner("r", &[a]);
    assert!(feed(&mut r, Verdict::Diverging, 0, 1, false).is_empty());
    // The log stops growing after a crash: `stale` needs no further records.
    let f = r.observe(&Observation::new(Verdict::Stale, 101, 1), false);
    assert_eq!(f.len(), 1);
    // Diverging and stale are one condition: no second fire.
    assert!(feed(&mut r, Verdict::Diverging, 1, 5, false).is_empty());

    let mut r = case.runner("r", &[action("converged", &["true"], 3)]);
    assert!(feed(&mut r, Verdict::Converged, 0, 1, false).is_empty());
    let end = Observation { data_final: true, ..Observation::new(Verdict::Converged, 101, 1) };
    assert_eq!(r.observe(&end, false).len(), 1, "end-of-run mark waives the hold");
}

#[test]
fn previous_verdict_is_passed() {
    let case = Case::new();
    let cmd = ["sh", "-c", "printf '%s>%s' \"$SETTLE_PREVIOUS_VERDICT\" \"$SETTLE_VERDICT\""];
    let mut r = case.runner("r", &[action("stalled", &cmd, 2)]);
    feed(&mut r, Verdict::Converging, 0, 5, true);
    feed(&mut r, Verdict::Stalled, 5, 2, true);
    assert_eq!(r.wait_finished(Duration::from_secs(3)).len(), 1);
    assert_eq!(r.history().next().expect("ran").stdout, "converging>stalled");
}

fn alive(pid: u32) -> bool {
    match fs::read_to_string(format!("/proc/{pid}/stat")) {
        Err(_) => false,
        Ok(s) => {
            !matches!(s.rsplit_once(')').map(|(_, r)| r.trim_start().as_bytes()[0]), Some(b'Z'))
        }
    }
}

#[test]
fn timeout_kills_the_process_group() {
    let case = Case::new();
    let mut a =
        action("diverging", &["sh", "-c", "sleep 30 & echo $! > grandchild.pid; sleep 30"], 1);
    a.timeout = Some(TimeoutSpec::Text("300ms".into()));
    let mut r = case.runner("r", &[a]);
    let start = Instant::now();
    feed(&mut r, Verdict::Diverging, 0, 1, true);
    assert_eq!(r.running(), 1);
    let f = r.wait_finished(Duration::from_secs(3));
    let took = start.elapsed();
    assert_eq!(f.len(), 1);
    assert_eq!(f[0].statistic, "timeout_s");
    assert!((f[0].value - 0.3).abs() < 1e-9);
    assert!(
        f[0].detail.ends_with("timed out after 0.3 s; its process group was killed"),
        "{}",
        f[0].detail
    );
    assert!(took < Duration::from_secs(2), "took {took:?}");
    let pid: u32 = fs::read_to_string(case.path().join("grandchild.pid"))
        .expect("pid written")
        .trim()
        .parse()
        .expect("a pid");
    // The background sleep was in the group: it must be gone (reaped by init soon after).
    let until = Instant::now() + Duration::from_secs(1);
    while alive(pid) && Instant::now() < until {
        std::thread::sleep(Duration::from_millis(20));
    }
    assert!(!alive(pid), "grandchild {pid} survived the group kill");
}

#[test]
fn watching_never_waits_for_a_slow_command() {
    let case = Case::new();
    let mut a = action("diverging", &["sleep", "30"], 1);
    a.timeout = Some(TimeoutSpec::Seconds(0.5));
    let mut r = case.runner("r", &[a]);
    let start = Instant::now();
    feed(&mut r, Verdict::Diverging, 0, 1, true);
    assert!(r.poll_finished().is_empty());
    assert!(start.elapsed() < Duration::from_millis(200), "observe must not block");
    // A second fire while the first is still running is skipped, with an audit entry.
    feed(&mut r, Verdict::Converging, 1, 1, true);
    let f = feed(&mut r, Verdict::Diverging, 2, 1, true);
    assert_eq!(f.len(), 1);
    assert_eq!(f[0].statistic, "skipped");
    assert!(f[0].detail.ends_with("its previous run is still going"), "{}", f[0].detail);
    assert_eq!(r.wait_finished(Duration::from_secs(3)).len(), 1);
}

/// RELIABILITY item 29: a group-writable config gets no actions, with a message naming
/// the file, its mode and owner.
#[test]
fn group_writable_config_is_refused() {
    let case = Case::new();
    fs::set_permissions(&case.config, fs::Permissions::from_mode(0o664)).expect("chmod");
    let err = load_plan_with_env(
        &[action("diverging", &["true"], 3)],
        &case.config,
        &case.file(),
        &case.facts("r"),
        case.env(),
    )
    .expect_err("refused");
    assert!(matches!(err, ActionError::Writable { mode: 0o664, .. }), "{err:?}");
    let msg = err.to_string();
    assert!(msg.starts_with(&format!("refusing actions from {}", case.config.display())));
    assert!(msg.contains("mode 0664"), "{msg}");
    assert!(msg.contains("owner uid"), "{msg}");
    let f = err.finding();
    assert_eq!(f.kind, FindingKind::Action);
    assert!(f.detail.starts_with("refused: "), "{}", f.detail);

    fs::set_permissions(&case.config, fs::Permissions::from_mode(0o646)).expect("chmod");
    assert!(
        load_plan_with_env(
            &[action("x", &["true"], 3)],
            &case.config,
            &case.file(),
            &case.facts("r"),
            case.env()
        )
        .is_err()
    );
    // A refusal is about actions only; no actions means no check.
    assert!(
        load_plan_with_env(&[], &case.config, &case.file(), &case.facts("r"), case.env()).is_ok()
    );
}

#[test]
fn foreign_owner_is_refused_when_we_can_arrange_one() {
    let case = Case::new();
    // Only root can give a file away; elsewhere the pure rule is covered by unit tests.
    if std::os::unix::fs::chown(&case.config, Some(65534), None).is_ok() {
        let err = load_plan_with_env(
            &[action("diverging", &["true"], 3)],
            &case.config,
            &case.file(),
            &case.facts("r"),
            case.env(),
        )
        .expect_err("refused");
        assert!(matches!(err, ActionError::NotOwned { owner: 65534, .. }), "{err:?}");
        assert!(err.to_string().contains("owned by uid 65534, not by you"));
    } else {
        let err = settle::actions::trust::check_metadata(&case.config, 0o644, 65534, 1000)
            .expect_err("refused");
        assert!(err.to_string().contains("owned by uid 65534, not by you"));
    }
}

#[test]
fn environment_is_cleared_to_the_allow_list() {
    let case = Case::new();
    let mut env = case.env();
    for (k, v) in [
        ("SECRET_TOKEN", "hunter2"),
        ("LD_PRELOAD", "/tmp/evil.so"),
        ("SLURM_JOB_ID", "4242"),
        ("PBS_O_WORKDIR", "/scratch"),
        ("LC_ALL", "C"),
        ("SETTLE_VERDICT", "forged"),
        ("IFS", "x"),
    ] {
        env.push((k.into(), v.into()));
    }
    let mut facts = case.facts("r");
    facts.job = None;
    let plan = load_plan_with_env(
        &[action("diverging", &["env"], 1)],
        &case.config,
        &case.file(),
        &facts,
        env,
    )
    .expect("plan");
    let mut r = ActionRunner::new(plan);
    feed(&mut r, Verdict::Diverging, 0, 1, true);
    assert_eq!(r.wait_finished(Duration::from_secs(3)).len(), 1);
    let out = r.history().next().expect("ran").stdout.clone();
    let mut keys: Vec<&str> =
        out.lines().filter_map(|l| l.split_once('=')).map(|(k, _)| k).collect();
    keys.sort();
    assert_eq!(
        keys,
        vec![
            "HOME",
            "LC_ALL",
            "PATH",
            "PBS_O_WORKDIR",
            "SETTLE_CONFIG",
            "SETTLE_ITERATION",
            "SETTLE_JOB",
            "SETTLE_PREVIOUS_VERDICT",
            "SETTLE_RUN",
            "SETTLE_SOURCES",
            "SETTLE_VERDICT",
            "SLURM_JOB_ID",
        ]
    );
    assert!(out.contains("SETTLE_VERDICT=diverging\n"), "{out}");
    assert!(out.contains("SETTLE_JOB=4242\n"), "job id from SLURM_JOB_ID: {out}");
    let sources = format!(
        "SETTLE_SOURCES={}:{}\n",
        case.path().join("log.tarn").display(),
        case.path().join("forces.dat").display()
    );
    assert!(out.contains(&sources), "{out}");
    assert!(out.contains(&format!("SETTLE_CONFIG={}\n", case.config.display())), "{out}");
    assert!(!out.contains("hunter2"));
}

#[test]
fn environment_values_are_capped() {
    let case = Case::new();
    let long = "n".repeat(10_000);
    let cmd = ["sh", "-c", "printf %s \"$SETTLE_RUN\" | wc -c"];
    // `{run}` is not used, so a long name is allowed; it is only capped in the environment.
    let mut r = case.runner(&long, &[action("diverging", &cmd, 1)]);
    feed(&mut r, Verdict::Diverging, 0, 1, true);
    assert_eq!(r.wait_finished(Duration::from_secs(3)).len(), 1);
    assert_eq!(r.history().next().expect("ran").stdout.trim(), "4096");
}

#[test]
fn working_directory_stdin_and_failures() {
    let case = Case::new();
    let actions = [
        action("stalled", &["sh", "-c", "pwd; cat"], 1),
        action("stalled", &["sh", "-c", "echo nope >&2; exit 7"], 1),
        action("stalled", &["settle-no-such-program"], 1),
    ];
    let mut r = case.runner("r", &actions);
    feed(&mut r, Verdict::Stalled, 0, 1, true);
    let f = r.wait_finished(Duration::from_secs(3));
    assert_eq!(f.len(), 3);
    let by = |start: &str| f.iter().find(|x| x.detail.starts_with(start)).expect(start);
    let missing = by("could not start settle-no-such-program: ");
    assert_eq!(missing.statistic, "spawn_failed");
    let pwd = by("ran sh -c 'pwd; cat': exit 0 after ");
    assert_eq!(pwd.value, 0.0);
    let failed = by("ran sh -c 'echo nope >&2; exit 7': exit 7 after ");
    assert!(failed.detail.ends_with("; output: nope"), "{}", failed.detail);
    assert_eq!(failed.value, 7.0);
    let pwd = r.history().find(|h| h.action == 1).expect("ran").stdout.clone();
    let real = fs::canonicalize(case.path()).expect("canonical");
    assert_eq!(Path::new(pwd.trim()), real.as_path(), "cwd is the run directory; stdin empty");
}

#[test]
fn processes_left_behind_are_killed_at_the_timeout() {
    let case = Case::new();
    let mut a = action("diverging", &["sh", "-c", "sleep 30 & echo $! > left.pid"], 1);
    a.timeout = Some(TimeoutSpec::Seconds(0.3));
    let mut r = case.runner("r", &[a]);
    feed(&mut r, Verdict::Diverging, 0, 1, true);
    let f = r.wait_finished(Duration::from_secs(3));
    assert_eq!(f.len(), 1);
    assert_eq!(f[0].statistic, "exit_code");
    assert!(
        f[0].detail.ends_with("; processes it left holding its output were killed at the timeout"),
        "{}",
        f[0].detail
    );
    assert!(r.history().next().expect("ran").lingering_killed);
    let pid: u32 = fs::read_to_string(case.path().join("left.pid"))
        .expect("pid written")
        .trim()
        .parse()
        .expect("a pid");
    let until = Instant::now() + Duration::from_secs(1);
    while alive(pid) && Instant::now() < until {
        std::thread::sleep(Duration::from_millis(20));
    }
    assert!(!alive(pid), "left-behind {pid} survived");
}

// ---------------------------------------------------------------------------------------
// Replays: actions must act on judged data only (issue: `hold` counted records that only
// passed through ingest while the judge was throttled, and a first bulk read fired on its
// early segment).

mod replay {
    use std::io::Write;
    use std::path::Path;
    use std::sync::Arc;
    use std::sync::mpsc::{self, Sender};
    use std::thread;
    use std::time::Duration;

    use settle::follow::FollowConfig;
    use settle::parser::Registry;
    use settle::run::config;
    use settle::tui::Msg;
    use settle::watch::{self, ActionHooks, ExitWhen, HeadlessOptions};

    /// One step of our invented solver tarn: three residuals (all `nan` when `nan`).
    fn step(i: usize, res: f64, nan: bool) -> String {
        let v = if nan { "nan".to_string() } else { format!("{res:.4e}") };
        format!(
            "[step {i:6}]  cfl 2.00e+00\n  Ux       res {v}   lin   5 sweeps\n  Uy       res {v}   \
             lin   4 sweeps\n  p        res {v}   lin  21 sweeps\n  continuity  imbalance \
             6.8850e-02\n  forces   drag 4.4930e-01  lift 7.0826e-02  dp 6.3645e+02\n  wall 2.14 \
             s\n"
        )
    }

    const BANNER: &str = "tarn 3.1.4 - incompressible RANS solver (k-omega SST)\ncase       : \
                          replay\n--------------------------------------------------------------\n";

    /// Two NaN steps, as a solver blowing up at its first iterations prints them.
    fn nan_start() -> String {
        format!("{BANNER}{}{}", step(1, 1.0, true), step(2, 1.0, true))
    }

    /// The restart from a checkpoint, then `n` healthy steps (residuals falling a decade
    /// every 20 steps).
    fn healthy_after_restart(n: usize) -> Vec<String> {
        let mut v = vec!["restarting from checkpoint at step 0\n".to_string()];
        v.extend((1..=n).map(|i| step(i, 10f64.powf(-(i as f64) / 20.0), false)));
        v
    }

    /// A case directory with `settle.toml`: the log and one action on `diverging` with
    /// hold = 3 (dry run: its audit line says what would run).
    fn case(dir: &Path) {
        std::fs::write(
            dir.join("settle.toml"),
            "[[source]]\npath = \"tarn.log\"\nparser = \"tarn\"\n\n[[action]]\non = \
             \"diverging\"\ncommand = [\"scancel\", \"{verdict}\", \"{iteration}\"]\nhold = 3\n",
        )
        .expect("config");
        use std::os::unix::fs::PermissionsExt;
        std::fs::set_permissions(dir.join("settle.toml"), std::fs::Permissions::from_mode(0o644))
            .expect("chmod");
    }

    fn append(path: &Path, text: &str) {
        let mut f =
            std::fs::OpenOptions::new().create(true).append(true).open(path).expect("open log");
        f.write_all(text.as_bytes()).expect("append");
    }

    /// Run the headless watcher on `dir` in a thread; `feed` writes the log and calls its
    /// argument to have a real follower and parser read what is new and send it, one batch
    /// per progress mark of a large read with the given pause after each (as the ingest
    /// thread does), then the rest. Returns everything the watcher printed.
    fn replay(
        dir: &Path,
        follow: FollowConfig,
        feed: impl FnOnce(&mut dyn FnMut(Duration)),
    ) -> String {
        let spec = config::load(&dir.join("settle.toml")).expect("config");
        let specs = vec![spec];
        let registry = Arc::new(Registry::builtin());
        let (runs, mut sources) = watch::prepare(&specs, &registry, &follow).expect("prepare");
        let mut hooks = ActionHooks::new(&specs, false);
        let (tx, rx) = mpsc::channel::<Msg>();
        let opts = HeadlessOptions {
            json: false,
            heartbeat: Duration::from_secs(60),
            refresh: Duration::from_secs(1),
            stale_limit: Duration::from_secs(300),
            exit_when: ExitWhen::Never,
        };
        let watcher = thread::spawn(move || {
            let mut out = Vec::new();
            let code = watch::run_headless(runs, rx, &opts, &mut hooks, &mut out);
            (code.expect("headless loop"), String::from_utf8_lossy(&out).into_owned())
        });
        let send = |tx: &Sender<Msg>, items| {
            tx.send(Msg::Ingest(settle::run::ingest::IngestBatch { run: 0, source: 0, items }))
                .expect("watcher listening");
        };
        let reader = &mut sources[0].reader;
        let mut read = |pause: Duration| {
            let rest = reader
                .read_chunked(false, &mut |chunk| {
                    send(&tx, chunk);
                    thread::sleep(pause);
                })
                .expect("read");
            send(&tx, rest);
        };
        feed(&mut read);
        drop(tx);
        watcher.join().expect("watcher thread").1
    }

    /// Two NaN records are judged `diverging`; then a restart and 50 healthy records arrive
    /// within one refresh interval (the judge is throttled). The next judgement says
    /// `converging` (as `settle check` does on the same file): nothing may fire.
    #[test]
    fn nan_start_then_restart_and_healthy_records_fire_nothing() {
        let dir = tempfile::tempdir().expect("tempdir");
        case(dir.path());
        let log = dir.path().join("tarn.log");
        let out = replay(dir.path(), FollowConfig::default(), |read| {
            append(&log, &nan_start());
            read(Duration::ZERO);
            // The first judgement (diverging) happens at once.
            thread::sleep(Duration::from_millis(300));
            for piece in healthy_after_restart(50).chunks(5) {
                append(&log, &piece.concat());
                read(Duration::ZERO);
                thread::sleep(Duration::from_millis(30));
            }
            // Let the throttled judge see the new data.
            thread::sleep(Duration::from_millis(1500));
        });
        assert!(out.lines().next().is_some_and(|l| l.contains(" diverging")), "{out}");
        assert!(!out.contains("action |"), "an action fired on a stale verdict:\n{out}");
        let last = out.lines().last().expect("final line");
        assert!(last.contains(" converging") && last.ends_with("(final)"), "{out}");
    }

    /// The first read of a large existing log whose early segment has NaNs: the log is
    /// already complete (2000 NaN steps, restart, 1500 healthy steps) when watching starts,
    /// and is read in chunks (progress marks every 32 KiB here, 64 MiB by default, paced
    /// so that the NaN segment alone spans more than one refresh interval). Judgements of
    /// the early chunks say `diverging`, more than once; nothing may fire before the whole
    /// file is read, and the whole file has converged.
    #[test]
    fn first_bulk_read_with_an_early_nan_segment_fires_nothing() {
        let dir = tempfile::tempdir().expect("tempdir");
        case(dir.path());
        let log = dir.path().join("tarn.log");
        append(&log, BANNER);
        append(&log, &(1..=2000).map(|i| step(i, 1.0, true)).collect::<String>());
        append(&log, &healthy_after_restart(1500).concat());
        let follow =
            FollowConfig { progress_every: 32 * 1024, read_chunk: 16 * 1024, ..Default::default() };
        let out = replay(dir.path(), follow, |read| {
            // About 27 chunks over 3.3 s: the judge sees several partial prefixes.
            read(Duration::from_millis(120));
            thread::sleep(Duration::from_millis(1500));
        });
        assert!(!out.contains("action |"), "an action fired during the first read:\n{out}");
        let last = out.lines().last().expect("final line");
        assert!(last.contains(" converged since") && last.ends_with("(final)"), "{out}");
    }

    fn records(n: i64, from: i64) -> Vec<settle::run::ingest::IngestItem> {
        use settle::record::{Output, Record, Role, SeriesInfo};
        use settle::run::ingest::IngestItem;
        let mut items = Vec::new();
        if from == 1 {
            items.push(IngestItem::Output(Output::Series(SeriesInfo {
                id: 0,
                name: "p".into(),
                role: Role::Residual,
            })));
        }
        for it in from..from + n {
            items.push(IngestItem::Output(Output::Record(Record {
                iteration: Some(it),
                values: vec![(0, 1.0)],
                ..Default::default()
            })));
        }
        items.push(IngestItem::Grew(std::time::SystemTime::now()));
        items
    }

    /// The panels call the hooks when a run turns stale without a new judgement. A verdict
    /// judged before the latest records arrived must not fire then, even though `stale`
    /// waives the hold; once a judgement has seen every record it may.
    #[test]
    fn a_judgement_older_than_the_data_never_fires() {
        use settle::judge::{Judgement, Verdict};
        use settle::run::ingest::apply;
        let dir = tempfile::tempdir().expect("tempdir");
        case(dir.path());
        let specs = vec![config::load(&dir.path().join("settle.toml")).expect("config")];
        let registry = Arc::new(Registry::builtin());
        let (mut runs, _) =
            watch::prepare(&specs, &registry, &FollowConfig::default()).expect("prepare");
        let mut hooks = ActionHooks::new(&specs, false);
        let run = &mut runs[0];
        let ingest = |run: &mut settle::tui::LiveRun, items| {
            apply(&mut run.store.sources[0], &mut run.activity[0], items)
        };
        ingest(run, records(2, 1));
        run.set_judgement(Judgement { verdict: Verdict::Diverging, ..Default::default() });
        assert!(hooks.observe(0, run).is_empty(), "first sight: 1 of 3");
        // 50 records arrive; no judgement yet; then the run turns stale.
        ingest(run, records(50, 3));
        run.stale = true;
        assert!(!run.judgement_current());
        assert!(hooks.observe(0, run).is_empty(), "fired on a judgement of 2 of 52 records");
        // Judged now (still diverging: stale does not override it) and stale: final data.
        run.set_judgement(Judgement { verdict: Verdict::Diverging, ..Default::default() });
        let f = hooks.observe(0, run);
        assert_eq!(f.len(), 1, "{f:?}");
        assert!(f[0].detail.starts_with("would run scancel diverging"), "{}", f[0].detail);
    }
}

/// The trust check races a file swap (issue: a swap between reading the config by name and
/// checking it by name made settle run the other file's command in 3 of 60 starts). A
/// thread swaps `settle.toml` between our private file (command `echo good`) and one that
/// others may write (mode 0666, command `echo evil`: it stands for another user's file and
/// must always be refused), by atomic renames of hard links, while settle starts 2000 times
/// as `watch` does (`config::load`, then the actions' trust check). Both files must have
/// been seen, and the other command never planned.
#[test]
fn a_config_swapped_while_loading_never_plans_the_other_command() {
    use settle::run::config;
    use std::sync::Arc;
    use std::sync::atomic::{AtomicBool, Ordering};
    let case = Case::new();
    let d = case.path().to_path_buf();
    let body = |word: &str| {
        format!(
            "[[source]]\npath = \"tarn.log\"\n\n[[action]]\non = \"diverging\"\ncommand = \
             [\"echo\", \"{word}\"]\n"
        )
    };
    fs::write(d.join("good"), body("good")).expect("write");
    fs::set_permissions(d.join("good"), fs::Permissions::from_mode(0o644)).expect("chmod");
    fs::write(d.join("evil"), body("evil")).expect("write");
    fs::set_permissions(d.join("evil"), fs::Permissions::from_mode(0o666)).expect("chmod");
    fs::remove_file(&case.config).expect("rm");
    fs::hard_link(d.join("good"), &case.config).expect("link");
    let stop = Arc::new(AtomicBool::new(false));
    let (flag, dir) = (stop.clone(), d.clone());
    let swapper = std::thread::spawn(move || {
        let mut swaps = 0u64;
        while !flag.load(Ordering::SeqCst) {
            for f in ["evil", "good"] {
                let _ = fs::remove_file(dir.join("tmp"));
                fs::hard_link(dir.join(f), dir.join("tmp")).expect("link");
                fs::rename(dir.join("tmp"), dir.join("settle.toml")).expect("rename");
            }
            swaps += 1;
        }
        swaps
    });
    let (mut wrong, mut good, mut refused) = (0, 0, 0);
    for _ in 0..2000 {
        let spec = config::load(&case.config).expect("always a whole file under the name");
        let hooks = settle::watch::ActionHooks::new(&[spec], false);
        let plan = hooks.plan_summary(0);
        if plan.iter().any(|l| l.contains("evil")) {
            wrong += 1;
        } else if plan.iter().any(|l| l.contains("echo good")) {
            good += 1;
        } else {
            refused += 1;
        }
    }
    stop.store(true, Ordering::SeqCst);
    let swaps = swapper.join().expect("swapper");
    eprintln!("{swaps} swaps; {good} planned ours, {refused} refused, {wrong} planned the other");
    assert_eq!(wrong, 0, "the other file's command was planned {wrong} times");
    assert!(good > 0 && refused > 0, "the harness saw both files: {good} ours, {refused} refused");
}
