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
