//! End-to-end tests of the `settle` binary: parse, parsers, check, config errors.
//!
//! Expected counts come from the synthetic generator that wrote the files (our own invented
//! scenario), never from hard-coded parser output.

use std::path::{Path, PathBuf};
use std::process::{Command, Output};

use serde_json::Value;
use settle::synth::{self, Options, Scenario};

fn settle(args: &[&str]) -> Output {
    Command::new(env!("CARGO_BIN_EXE_settle"))
        .args(args)
        .env("XDG_CONFIG_HOME", "/nonexistent-settle-test")
        .output()
        .expect("the settle binary runs")
}

fn stdout(o: &Output) -> String {
    String::from_utf8_lossy(&o.stdout).into_owned()
}

fn stderr(o: &Output) -> String {
    String::from_utf8_lossy(&o.stderr).into_owned()
}

fn samples() -> PathBuf {
    Path::new(env!("CARGO_MANIFEST_DIR")).join("samples")
}

/// Write a generated run as tarn.log + forces.csv into a fresh directory.
fn write_case(
    scenario: Scenario,
    seed: u64,
    iterations: usize,
) -> (tempfile::TempDir, synth::SynthRun) {
    let opts = Options { iterations: Some(iterations), ..Options::default() };
    let run = synth::generate_with(scenario, seed, &opts);
    let dir = tempfile::tempdir().unwrap();
    let mut log = Vec::new();
    synth::write_tarn_log(&run, &mut log).unwrap();
    std::fs::write(dir.path().join("tarn.log"), log).unwrap();
    let mut csv = Vec::new();
    synth::write_forces_csv(&run, &mut csv).unwrap();
    std::fs::write(dir.path().join("forces.csv"), csv).unwrap();
    (dir, run)
}

/// The record count the generator wrote for a sample, from the generated samples/README.md
/// (a unit test of the synth module checks the committed samples byte for byte).
fn sample_records(section: &str) -> u64 {
    let readme = std::fs::read_to_string(samples().join("README.md")).unwrap();
    let part = readme.split(&format!("## `{section}")).nth(1).unwrap();
    let line =
        part.lines().find(|l| l.contains("steps (records): ") || l.contains("rows: ")).unwrap();
    let digits: String =
        line.split(": ").nth(1).unwrap().chars().take_while(char::is_ascii_digit).collect();
    digits.parse().unwrap()
}

fn series<'a>(src: &'a Value, name: &str) -> &'a Value {
    src["series"]
        .as_array()
        .unwrap()
        .iter()
        .find(|s| s["name"] == name)
        .unwrap_or_else(|| panic!("series {name} missing in {src}"))
}

#[test]
fn parse_json_matches_what_the_generator_wrote() {
    let (dir, run) = write_case(Scenario::Converging, 11, 400);
    let log = dir.path().join("tarn.log");
    let o = settle(&["parse", "--json", log.to_str().unwrap()]);
    assert!(o.status.success(), "{}", stderr(&o));
    let v: Value = serde_json::from_str(&stdout(&o)).unwrap();
    let src = &v["sources"][0];
    assert_eq!(src["parser"], "tarn");
    assert_eq!(src["records"], run.complete_steps() as u64);
    assert_eq!(src["last_iteration"], run.last_iteration());
    let last = run.steps.last().unwrap();
    for eq in synth::EQUATIONS {
        let s = series(src, eq);
        assert_eq!(s["role"], "residual");
        assert_eq!(s["values"], run.steps.len() as u64);
        let want = last.residuals.iter().find(|(n, _)| *n == eq).unwrap().1;
        let got = s["last"].as_f64().unwrap();
        // The log prints 5 significant digits.
        assert!((got - want).abs() <= want.abs() * 1e-4, "{eq}: {got} vs {want}");
        assert_eq!(series(src, &format!("{eq}/sweeps"))["role"], "indicator");
    }
    let drag = series(src, "drag");
    assert_eq!(drag["role"], "monitor");
    assert!((drag["last"].as_f64().unwrap() - last.drag).abs() <= last.drag.abs() * 1e-4);
    let notices: usize = run.steps.iter().map(|s| s.notices.len()).sum();
    let events = src["events"].as_array().unwrap();
    assert_eq!(events.iter().filter(|e| e["rule"] == "notice").count(), notices);
    assert!(src["ended"].is_object(), "a finished run has its end mark");
    assert_eq!(src["lines"]["skipped"], 0);
}

#[test]
fn parse_csv_history_with_zero_configuration() {
    let (dir, run) = write_case(Scenario::Converging, 12, 300);
    let csv = dir.path().join("forces.csv");
    let o = settle(&["parse", "--json", csv.to_str().unwrap()]);
    assert!(o.status.success(), "{}", stderr(&o));
    let v: Value = serde_json::from_str(&stdout(&o)).unwrap();
    let src = &v["sources"][0];
    assert_eq!(src["parser"], "csv");
    let rows = run.steps.iter().filter(|s| s.drag.is_finite()).count();
    assert_eq!(src["records"], rows as u64);
    for m in ["drag", "lift", "dp"] {
        assert_eq!(series(src, m)["role"], "monitor");
    }
}

#[test]
fn check_a_history_printed_every_twentieth_iteration() {
    // samples/plain/history.dat (documented `converged`) as a solver printing every 20th
    // iteration would have written it: its header, the first row and every row whose
    // iteration is a multiple of 20 (90 rows of 1788). Windows counted in iterations only
    // held five of its values and the monitors were never judged (`converging`).
    let text = std::fs::read_to_string(samples().join("plain/history.dat")).unwrap();
    let kept: Vec<&str> = text
        .lines()
        .enumerate()
        .filter(|(i, l)| {
            *i < 2
                || l.split_whitespace()
                    .next()
                    .and_then(|w| w.parse::<i64>().ok())
                    .is_some_and(|it| it % 20 == 0)
        })
        .map(|(_, l)| l)
        .collect();
    assert_eq!(kept.len(), 2 + 1780 / 20);
    let dir = tempfile::tempdir().unwrap();
    let path = dir.path().join("history.dat");
    std::fs::write(&path, kept.join("\n") + "\n").unwrap();
    let o = settle(&["check", "--json", path.to_str().unwrap()]);
    let v: Value = serde_json::from_str(&stdout(&o)).unwrap();
    assert_eq!(v["verdict"], "converged", "{}", stdout(&o));
    assert_eq!(v["iterations"], 1780);
    // Every monitor criterion was judged, on a window of at least ten printed values.
    let monitors: Vec<&Value> =
        v["criteria"].as_array().unwrap().iter().filter(|c| c["name"] == "drift").collect();
    assert_eq!(monitors.len(), 2, "{}", stdout(&o));
    assert!(monitors.iter().all(|c| c["met"] == true && c["window"].as_u64() >= Some(200)));
}

#[test]
fn parse_the_committed_samples() {
    // Counts as written by the generator (samples/README.md, checked byte for byte against
    // the generator by a unit test of the synth module).
    let s = samples();
    let o = settle(&["parse", "--json", s.join("duct-bend-07/tarn.log").to_str().unwrap()]);
    let v: Value = serde_json::from_str(&stdout(&o)).unwrap();
    let n = sample_records("duct-bend-07/");
    assert_eq!(v["sources"][0]["records"], n);
    let o = settle(&["parse", "--json", s.join("plain/history.dat").to_str().unwrap()]);
    let v: Value = serde_json::from_str(&stdout(&o)).unwrap();
    let src = &v["sources"][0];
    assert_eq!(src["parser"], "table");
    assert_eq!(src["records"], sample_records("plain/history.dat"));
    assert_eq!(series(src, "res_p")["role"], "residual");
    assert_eq!(series(src, "Cd")["role"], "monitor");
    let o = settle(&["parse", s.join("mixer-22/tarn.log").to_str().unwrap()]);
    let text = stdout(&o);
    assert!(text.contains("crash"), "{text}");
    assert!(!text.contains("end of run"), "a crashed run has no end mark: {text}");
}

#[test]
fn parse_text_lists_series_and_events() {
    let s = samples();
    let o = settle(&["parse", s.join("duct-bend-07/tarn.log").to_str().unwrap()]);
    assert!(o.status.success());
    let text = stdout(&o);
    assert!(text.contains("(parser tarn)"), "{text}");
    let n = sample_records("duct-bend-07/");
    assert!(text.contains(&format!("records {n} (iterations 1 … {n})")), "{text}");
    assert!(text.contains("omega/sweeps"), "{text}");
    assert!(text.contains(&format!("end of run at iteration {n}")), "{text}");
}

#[test]
fn parse_errors_name_the_problem() {
    let o = settle(&["parse", "/nonexistent/run.log"]);
    assert_eq!(o.status.code(), Some(1));
    assert!(stderr(&o).contains("/nonexistent/run.log"), "{}", stderr(&o));
    let s = samples();
    let o = settle(&["parse", "--parser", "nosuch", s.join("plain/history.csv").to_str().unwrap()]);
    assert_eq!(o.status.code(), Some(1));
    assert!(stderr(&o).contains("unknown parser `nosuch`"), "{}", stderr(&o));
    let dir = tempfile::tempdir().unwrap();
    let junk = dir.path().join("junk.txt");
    std::fs::write(&junk, "hello there\nnothing numeric here\n").unwrap();
    let o = settle(&["parse", junk.to_str().unwrap()]);
    assert_eq!(o.status.code(), Some(1));
    assert!(stderr(&o).contains("no parser definition recognises"), "{}", stderr(&o));
    let o = settle(&["parse"]);
    assert_eq!(o.status.code(), Some(2), "usage errors exit with 2");
}

#[test]
fn parsers_list_show_and_test() {
    let o = settle(&["parsers", "list"]);
    let text = stdout(&o);
    for name in ["tarn", "csv", "table"] {
        assert!(text.lines().any(|l| l.starts_with(name)), "{name} in {text}");
    }
    let o = settle(&["parsers", "show", "tarn"]);
    assert!(stdout(&o).contains("[step"), "{}", stdout(&o));
    let o = settle(&["parsers", "test", samples().join("duct-bend-07/tarn.log").to_str().unwrap()]);
    assert!(stdout(&o).contains("parser `tarn` claims this file"), "{}", stdout(&o));
}

#[test]
fn user_parser_folder_adds_definitions_and_bad_ones_are_rejected() {
    let dir = tempfile::tempdir().unwrap();
    let def = settle(&["parsers", "show", "csv"]);
    let text = stdout(&def).replace("name = \"csv\"", "name = \"mycsv\"");
    std::fs::write(dir.path().join("mycsv.toml"), text).unwrap();
    let o = settle(&["--parsers", dir.path().to_str().unwrap(), "parsers", "list"]);
    assert!(stdout(&o).lines().any(|l| l.starts_with("mycsv")), "{}", stdout(&o));
    std::fs::write(dir.path().join("bad.toml"), "name = \"bad\"\nengine = \"lines\"\nbogus = 1\n")
        .unwrap();
    let o = settle(&["--parsers", dir.path().to_str().unwrap(), "parsers", "list"]);
    assert_eq!(o.status.code(), Some(1));
    let err = stderr(&o);
    assert!(err.contains("bad.toml") && err.contains("bogus"), "{err}");
}

#[test]
fn check_json_has_the_documented_keys_and_exit_code() {
    let s = samples();
    let o = settle(&["check", "--json", s.join("duct-bend-07").to_str().unwrap()]);
    let v: Value =
        serde_json::from_str(&stdout(&o)).unwrap_or_else(|e| panic!("{e}: {}", stdout(&o)));
    for key in ["verdict", "criteria", "findings", "series", "iterations", "since", "causes"] {
        assert!(v.get(key).is_some(), "{key} missing");
    }
    let verdict = v["verdict"].as_str().unwrap();
    let code = settle::judge::Verdict::parse(verdict).unwrap().exit_code();
    assert_eq!(o.status.code(), Some(code));
    assert_eq!(v["iterations"], sample_records("duct-bend-07/"));
}

#[test]
fn check_rejects_a_bad_config_naming_file_and_key() {
    let dir = tempfile::tempdir().unwrap();
    std::fs::write(
        dir.path().join("settle.toml"),
        "name = 'x'\n[[source]]\npath = 'a.log'\nwindow = 3\n",
    )
    .unwrap();
    let o = settle(&["check", dir.path().to_str().unwrap()]);
    assert_eq!(o.status.code(), Some(1));
    let err = stderr(&o);
    assert!(err.contains("settle.toml") && err.contains("window"), "{err}");
    let o =
        settle(&["check", "--drift", "-1", samples().join("plain/history.csv").to_str().unwrap()]);
    assert_ne!(o.status.code(), Some(0));
}

/// Every sample with its label, as the generator wrote them in samples/README.md (a section
/// per sample, `## \`path\``, with its `* expected verdict: \`…\`` line).
fn sample_labels() -> Vec<(String, String)> {
    let readme = std::fs::read_to_string(samples().join("README.md")).unwrap();
    let mut out = Vec::new();
    let mut path: Option<String> = None;
    for line in readme.lines() {
        if let Some(p) = line.strip_prefix("## `").and_then(|l| l.strip_suffix('`')) {
            path = Some(p.trim_end_matches('/').to_string());
        } else if let Some(v) = line.strip_prefix("* expected verdict: `") {
            let v = v.trim_end_matches('`').to_string();
            out.push((path.take().expect("a section before its verdict"), v));
        }
    }
    out
}

#[test]
fn check_gives_the_labelled_verdicts_of_the_samples() {
    // Labels as written by the generator (samples/README.md "expected verdict"), for every
    // sample: each case directory and each plain table.
    let s = samples();
    let labels = sample_labels();
    let mut on_disk: Vec<String> = std::fs::read_dir(&s)
        .unwrap()
        .map(|e| e.unwrap().path())
        .filter(|p| p.is_dir() && p.file_name().is_some_and(|n| n != "plain"))
        .map(|p| p.file_name().unwrap().to_string_lossy().into_owned())
        .collect();
    on_disk.extend(
        std::fs::read_dir(s.join("plain"))
            .unwrap()
            .map(|e| format!("plain/{}", e.unwrap().file_name().to_string_lossy())),
    );
    on_disk.sort();
    let mut labelled: Vec<String> = labels.iter().map(|(p, _)| p.clone()).collect();
    labelled.sort();
    assert_eq!(labelled, on_disk, "every sample has a label and every label a sample");
    for (path, verdict) in &labels {
        let (path, verdict) = (path.as_str(), verdict.as_str());
        let o = settle(&["check", "--json", s.join(path).to_str().unwrap()]);
        let v: Value = serde_json::from_str(&stdout(&o)).unwrap();
        assert_eq!(v["verdict"], verdict, "{path}: {}", stdout(&o));
        let code = settle::judge::Verdict::parse(verdict).unwrap().exit_code();
        assert_eq!(o.status.code(), Some(code), "{path}");
    }
    let o = settle(&["check", s.join("mixer-22").to_str().unwrap()]);
    let text = stdout(&o);
    assert!(text.starts_with("mixer-22: DIVERGING"), "verdict on the first line: {text}");
    assert!(text.contains("criteria") && text.contains("[not met]"), "{text}");
}

fn settle_env(args: &[&str], config_home: &Path) -> Output {
    Command::new(env!("CARGO_BIN_EXE_settle"))
        .args(args)
        .env("XDG_CONFIG_HOME", config_home)
        .output()
        .expect("the settle binary runs")
}

fn json_lines(text: &str) -> Vec<Value> {
    text.lines().filter(|l| l.starts_with('{')).map(|l| serde_json::from_str(l).unwrap()).collect()
}

/// The (series, criterion) pairs of a judgement, sorted.
fn criteria_of(v: &Value) -> Vec<(String, String)> {
    let mut c: Vec<(String, String)> = v["criteria"]
        .as_array()
        .unwrap()
        .iter()
        .map(|c| (c["series"].as_str().unwrap().into(), c["name"].as_str().unwrap().into()))
        .collect();
    c.sort();
    c
}

#[test]
fn check_and_watch_take_the_same_files_as_the_same_run() {
    // A log and its monitor file given together: one run for both commands, the monitor
    // printed in both files judged once.
    let s = samples();
    let log = s.join("duct-bend-07/tarn.log");
    let csv = s.join("duct-bend-07/forces.csv");
    let (log, csv) = (log.to_str().unwrap(), csv.to_str().unwrap());
    let check = settle(&["check", "--json", log, csv]);
    let checked: Value = serde_json::from_str(&stdout(&check)).unwrap();
    let watch =
        settle(&["watch", "--headless", "--json", "--poll", "0.1", "--refresh", "0.1", log, csv]);
    let lines = json_lines(&stdout(&watch));
    let ends: Vec<&Value> = lines.iter().filter(|l| l["event"] == "end").collect();
    assert_eq!(ends.len(), 1, "one run: {}", stdout(&watch));
    assert_eq!(ends[0]["run"], "duct-bend-07");
    assert_eq!(ends[0]["verdict"], checked["verdict"]);
    assert_eq!(criteria_of(ends[0]), criteria_of(&checked));
    // drag, lift and dp are in both files: each judged once, under its plain name.
    let series: Vec<(String, String)> = criteria_of(&checked);
    for m in ["drag", "lift", "dp"] {
        assert_eq!(series.iter().filter(|(s, _)| s == m).count(), 2, "{m}: drift and band");
        assert!(!series.iter().any(|(s, _)| s.ends_with(&format!("/{m}"))), "{series:?}");
    }
    // A monitor file with series of its own: the finished log's end mark must not end the
    // watch before that file is read (it used to: 12 criteria instead of 18).
    let dir = tempfile::tempdir().unwrap();
    let probes = dir.path().join("probes.csv");
    let mut text = String::from("step,probe_a\n");
    for i in 1..=1492 {
        text.push_str(&format!("{i},{:.6}\n", 101325.0 + 100.0 / i as f64));
    }
    std::fs::write(&probes, text).unwrap();
    let p = probes.to_str().unwrap();
    let check = settle(&["check", "--json", log, csv, p]);
    let checked: Value = serde_json::from_str(&stdout(&check)).unwrap();
    assert_eq!(criteria_of(&checked).len(), 14, "{}", stdout(&check));
    for _ in 0..3 {
        let watch = settle(&[
            "watch",
            "--headless",
            "--json",
            "--poll",
            "0.1",
            "--refresh",
            "0.1",
            log,
            csv,
            p,
        ]);
        let lines = json_lines(&stdout(&watch));
        let end = lines.iter().find(|l| l["event"] == "end").expect("an end line");
        assert_eq!(criteria_of(end), criteria_of(&checked));
    }
    // `+` between them makes them two runs (`--stale 1s`: the monitor file alone has no end
    // mark, and a fresh checkout's files are new).
    let watch = settle(&[
        "watch",
        "--headless",
        "--json",
        "--poll",
        "0.1",
        "--refresh",
        "0.1",
        "--stale",
        "1s",
        log,
        "+",
        csv,
    ]);
    let ends = json_lines(&stdout(&watch)).into_iter().filter(|l| l["event"] == "end").count();
    assert_eq!(ends, 2, "{}", stdout(&watch));
    let o = settle(&["check", log, "+", csv]);
    assert_eq!(o.status.code(), Some(1));
    assert!(stderr(&o).contains("judges one run"), "{}", stderr(&o));
}

#[test]
fn a_folder_without_settle_toml_is_looked_into_and_what_is_left_out_is_said() {
    let dir = tempfile::tempdir().unwrap();
    let case = dir.path().join("case-a");
    std::fs::create_dir(&case).unwrap();
    let s = samples();
    std::fs::copy(s.join("duct-bend-07/tarn.log"), case.join("tarn.log")).unwrap();
    std::fs::copy(s.join("duct-bend-07/forces.csv"), case.join("forces.csv")).unwrap();
    std::fs::write(case.join("notes.txt"), "mesh from Tuesday\n").unwrap();
    std::fs::create_dir(dir.path().join("mesh")).unwrap();
    std::fs::write(dir.path().join("mesh/grid.x"), "no numbers here\n").unwrap();
    let root = dir.path().to_str().unwrap();
    let o = settle(&["watch", "--headless", "--json", "--poll", "0.1", "--refresh", "0.1", root]);
    let ends: Vec<Value> =
        json_lines(&stdout(&o)).into_iter().filter(|l| l["event"] == "end").collect();
    assert_eq!(ends.len(), 1, "{}", stdout(&o));
    assert_eq!(ends[0]["run"], "case-a");
    assert_eq!(ends[0]["verdict"], "converged");
    let err = stderr(&o);
    assert!(err.contains("notes.txt") && err.contains("no parser definition recognises"), "{err}");
    assert!(err.contains("mesh: left out"), "{err}");
    // check takes the same folder as one run.
    let o = settle(&["check", "--json", case.to_str().unwrap()]);
    let v: Value = serde_json::from_str(&stdout(&o)).unwrap();
    assert_eq!(v["verdict"], "converged");
    assert_eq!(criteria_of(&v), criteria_of(&ends[0]));
    // The samples folder: its `plain` folder holds two tables and no log: two runs (they
    // have no end mark: `--stale 1s`, as a fresh checkout's files are new).
    let o = settle(&[
        "watch",
        "--headless",
        "--json",
        "--poll",
        "0.1",
        "--refresh",
        "0.1",
        "--stale",
        "1s",
        s.to_str().unwrap(),
    ]);
    let mut runs: Vec<String> = json_lines(&stdout(&o))
        .into_iter()
        .filter(|l| l["event"] == "end")
        .map(|l| l["run"].as_str().unwrap().to_string())
        .collect();
    runs.sort();
    assert_eq!(runs, vec!["duct-bend-07", "mixer-22", "plain/history.csv", "plain/history.dat"]);
    let o = settle(&["check", s.join("plain").to_str().unwrap()]);
    assert!(stderr(&o).contains("holds 2 runs"), "{}", stderr(&o));
}

#[test]
fn typos_and_replacements_of_definitions_are_explained() {
    let s = samples();
    let csv = s.join("plain/history.csv");
    let o = settle(&["parse", "--parser", "tran", csv.to_str().unwrap()]);
    assert!(stderr(&o).contains("did you mean `tarn`"), "{}", stderr(&o));
    let dir = tempfile::tempdir().unwrap();
    let user = dir.path().join("settle/parsers");
    std::fs::create_dir_all(&user).unwrap();
    let text = stdout(&settle(&["parsers", "show", "csv"]));
    std::fs::write(user.join("csv.toml"), text.replace("generic comma", "my comma")).unwrap();
    let o = settle_env(&["parsers", "list"], dir.path());
    let out = stdout(&o);
    let at = out.lines().position(|l| l.starts_with("csv")).expect("csv listed");
    let line = out.lines().nth(at).unwrap();
    assert!(line.contains("my comma") && line.contains("csv.toml"), "{out}");
    let next = out.lines().nth(at + 1).unwrap();
    assert!(next.contains("replaces `csv` from built in"), "{out}");
    // A run config naming a parser with a typo gets the suggestion too.
    let case = dir.path().join("case");
    std::fs::create_dir(&case).unwrap();
    std::fs::write(case.join("settle.toml"), "[[source]]\npath = 'h.csv'\nparser = 'cvs'\n")
        .unwrap();
    std::fs::copy(&csv, case.join("h.csv")).unwrap();
    let o = settle(&["check", case.to_str().unwrap()]);
    assert!(stderr(&o).contains("unknown parser `cvs`: did you mean `csv`?"), "{}", stderr(&o));
}

#[test]
fn with_a_named_parser_only_that_definition_is_compiled() {
    // A user definition whose rules do not compile does not stop reading with another
    // definition, and is reported as soon as it is used.
    let dir = tempfile::tempdir().unwrap();
    let user = dir.path().join("settle/parsers");
    std::fs::create_dir_all(&user).unwrap();
    std::fs::write(
        user.join("broken.toml"),
        "engine = \"lines\"\n[[rules]]\nkind = \"step\"\npattern = '(('\n",
    )
    .unwrap();
    let csv = samples().join("plain/history.csv");
    let o = settle_env(&["parse", "--parser", "csv", csv.to_str().unwrap()], dir.path());
    assert!(o.status.success(), "{}", stderr(&o));
    let o = settle_env(&["parse", csv.to_str().unwrap()], dir.path());
    assert!(o.status.success(), "detection needs only detect patterns: {}", stderr(&o));
    let o = settle_env(&["parse", "--parser", "broken", csv.to_str().unwrap()], dir.path());
    assert_eq!(o.status.code(), Some(1));
    let err = stderr(&o);
    assert!(err.contains("broken.toml:4:11: rules[0].pattern: invalid regex"), "{err}");
    let o = settle_env(&["parsers", "list"], dir.path());
    assert!(stdout(&o).contains("✗ cannot be used"), "{}", stdout(&o));
}

#[test]
fn an_unrecognised_file_is_explained_with_its_own_lines() {
    let dir = tempfile::tempdir().unwrap();
    let junk = dir.path().join("run.out");
    std::fs::write(&junk, "solver says hello\n1 2\n").unwrap();
    let o = settle(&["check", junk.to_str().unwrap()]);
    let err = stderr(&o);
    assert!(
        err.contains("best candidates: `table` scored 0 (line 2 `1 2`, needs 2 lines)"),
        "{err}"
    );
    assert!(err.contains("settle parsers draft"), "{err}");
    assert!(!err.contains("(?:"), "no regex dump: {err}");
}

#[test]
fn value_types_and_missing_output_folders_are_said_in_words_once() {
    let dir = tempfile::tempdir().unwrap();
    std::fs::write(
        dir.path().join("settle.toml"),
        "[[source]]\npath = 'a.log'\n[criteria]\ndrift = 'small'\n",
    )
    .unwrap();
    let o = settle(&["check", dir.path().to_str().unwrap()]);
    let err = stderr(&o);
    assert!(
        err.contains(
            "settle.toml:4:9: criteria.drift: expected a number, found the text \"small\""
        ),
        "{err}"
    );
    let o = settle(&[
        "report",
        samples().join("duct-bend-07").to_str().unwrap(),
        "-o",
        "/nonexistent-dir/r.md",
    ]);
    let err = stderr(&o);
    assert_eq!(err.matches("/nonexistent-dir").count(), 3, "{err}");
    assert_eq!(err.lines().count(), 1, "{err}");
}

#[test]
fn completions_and_manual_pages_come_from_the_command_line_definition() {
    let o = settle(&["completions", "bash"]);
    let text = stdout(&o);
    assert!(o.status.success());
    for word in ["settle", "parsers", "draft", "--residual-drop"] {
        assert!(text.contains(word), "{word}");
    }
    let o = settle(&["man"]);
    assert!(stdout(&o).starts_with(".ie") || stdout(&o).contains(".TH settle"), "{}", stdout(&o));
    let dir = tempfile::tempdir().unwrap();
    let o = settle(&["man", "--dir", dir.path().to_str().unwrap()]);
    assert!(o.status.success(), "{}", stderr(&o));
    for page in ["settle.1", "settle-check.1", "settle-parsers.1", "settle-watch.1"] {
        let text = std::fs::read_to_string(dir.path().join(page)).unwrap();
        assert!(text.contains(".TH"), "{page}");
    }
}

#[test]
fn draft_write_then_check_then_read_an_invented_log() {
    // A new user's first minutes: draft a definition for an unknown log, save it, check
    // it, and let detection pick it. The log is `rill`, one of our invented formats.
    let dir = tempfile::tempdir().unwrap();
    let log = dir.path().join("run.log");
    let mut text = String::from("# rill 0.9 steady run, case nozzle-3\n");
    for i in 1..=60 {
        let r = 10f64.powf(-(i as f64) / 15.0);
        text.push_str(&format!(
            "it {i:>6}  r(p)={r:.4e} r(u)={:.4e}  cd={:.5}\n",
            r / 2.0,
            0.41 + 0.1 / i as f64
        ));
    }
    std::fs::write(&log, &text).unwrap();
    let path = log.to_str().unwrap();
    let o = settle_env(&["parse", path], dir.path());
    assert!(stderr(&o).contains("no parser definition recognises"), "{}", stderr(&o));
    let o = settle_env(&["parsers", "draft", "--write", "rill", path], dir.path());
    assert!(o.status.success(), "{}", stderr(&o));
    assert!(stdout(&o).contains("what this definition reads"), "{}", stdout(&o));
    let saved = dir.path().join("settle/parsers/rill.toml");
    assert!(saved.is_file());
    let o = settle_env(&["parsers", "draft", "--write", "rill", path], dir.path());
    assert!(stderr(&o).contains("--force"), "no silent overwrite: {}", stderr(&o));
    let o = settle_env(&["parsers", "check", "rill", path], dir.path());
    assert!(stdout(&o).contains("no problems found"), "{}", stdout(&o));
    let o = settle_env(&["parse", "--json", path], dir.path());
    let v: Value = serde_json::from_str(&stdout(&o)).unwrap();
    let src = &v["sources"][0];
    assert_eq!(src["parser"], "rill");
    assert_eq!(src["records"], 60);
    assert_eq!(series(src, "p")["role"], "residual");
    assert_eq!(series(src, "cd")["role"], "monitor");
    let o = settle_env(&["parsers", "check", saved.to_str().unwrap()], dir.path());
    assert!(stdout(&o).contains("valid lines definition `rill`"), "{}", stdout(&o));
}

#[test]
fn nothing_to_judge_is_an_error_not_a_verdict() {
    let dir = tempfile::tempdir().unwrap();
    // An empty file: no data, and no parser could recognise it.
    let empty = dir.path().join("empty.log");
    std::fs::write(&empty, "").unwrap();
    for cmd in ["check", "report"] {
        let out = dir.path().join("r.json");
        let mut args = vec![cmd, empty.to_str().unwrap()];
        if cmd == "report" {
            args.extend(["-o", out.to_str().unwrap()]);
        }
        let o = settle(&args);
        assert_eq!(o.status.code(), Some(1), "{cmd}: {}", stdout(&o));
        let err = stderr(&o);
        assert!(err.contains("no verdict") && err.contains("empty"), "{cmd}: {err}");
        assert!(stdout(&o).is_empty(), "{cmd}: no verdict printed");
        assert!(!out.exists(), "{cmd}: no report written");
    }
    // A table parser that finds no record in a header-only file says so.
    let header = dir.path().join("h.csv");
    std::fs::write(&header, "iteration,res_p\n").unwrap();
    let o = settle(&["check", "--parser", "csv", header.to_str().unwrap()]);
    assert_eq!(o.status.code(), Some(1), "{}", stdout(&o));
    let err = stderr(&o);
    assert!(err.contains("no verdict") && err.contains("no record"), "{err}");
}
