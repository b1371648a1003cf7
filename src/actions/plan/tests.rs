//! Unit tests of the action plan: placeholders, job ids, the case-directory rules for
//! programs and PATH, caps, absolute paths, option-like values.

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
    let keys: Vec<String> = inv.env.iter().map(|(k, _)| k.to_string_lossy().into_owned()).collect();
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
        let m = load_plan_with_env(&[cfg(&["scancel", "{job}"])], &conf, &ff(&conf), &f, env(path))
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
        load_plan_with_env(&[cfg(&["/usr/bin/scancel"])], &conf, &ff(&conf), &f, env(".")).is_ok()
    );
}

#[test]
fn a_case_directory_others_may_write_is_refused() {
    use std::os::unix::fs::PermissionsExt;
    let dir = tempfile::tempdir().expect("tempdir");
    let conf = private_config(dir.path());
    let f = facts(dir.path());
    std::fs::set_permissions(dir.path(), std::fs::Permissions::from_mode(0o775)).expect("chmod");
    let m = load_plan_with_env(&[cfg(&["true"])], &conf, &ff(&conf), &f, no_env())
        .expect_err("group-writable case directory")
        .to_string();
    assert!(m.contains("the case directory"), "{m}");
    assert!(m.contains("without the sticky bit (mode 0775)"), "{m}");
    // The sticky bit keeps others from replacing our files.
    std::fs::set_permissions(dir.path(), std::fs::Permissions::from_mode(0o1777)).expect("chmod");
    assert!(load_plan_with_env(&[cfg(&["true"])], &conf, &ff(&conf), &f, no_env()).is_ok());
    std::fs::set_permissions(dir.path(), std::fs::Permissions::from_mode(0o700)).expect("chmod");
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
    let sources = inv.env.iter().find(|(k, _)| k == "SETTLE_SOURCES").expect("sources").1.clone();
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
        load_plan_with_env(&[cfg(&["echo", "{run}"])], &conf, &ff(&conf), &f, no_env()).is_err()
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
