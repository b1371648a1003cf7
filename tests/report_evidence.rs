//! The judge's evidence in the text outputs, read from what the commands print: `check`
//! (terminal text), `report` (HTML and Markdown) and `watch --headless` lines. The window a
//! monitor was judged over, the reference of a monitor whose mean is near zero, the
//! round-off-only monitor named as not judged, one wording for why a run has nothing to judge
//! (and never a verdict for it), and judge sentences without their backticks.
//!
//! Data: the synthetic tarn scenario `near-zero-monitors` (our invented solver; its lift
//! settles at zero, its side force carries only round-off; see `tests/synth_scenarios.rs`)
//! and the sample `mixer-22`, whose crash finding names an event rule as inline code.

use std::path::Path;
use std::process::Command;

use serde_json::Value;
#[path = "support/near_zero.rs"]
mod near_zero;

const BIN: &str = env!("CARGO_BIN_EXE_settle");

fn settle(args: &[&str]) -> std::process::Output {
    Command::new(BIN).args(args).env("NO_COLOR", "1").output().expect("settle runs")
}

fn text(b: &[u8]) -> String {
    String::from_utf8_lossy(b).into_owned()
}

/// The monitors of `check --json`: (series, window, reference, reference_value, round_off).
fn monitors(log: &str, csv: &str) -> Vec<Value> {
    let o = settle(&["check", "--json", log, csv]);
    let v: Value = serde_json::from_slice(&o.stdout).expect("check --json");
    v["monitors"].as_array().expect("monitors").clone()
}

#[test]
fn check_text_shows_window_reference_and_round_off_without_backticks() {
    let dir = tempfile::tempdir().expect("tempdir");
    let (log, csv) = near_zero::write_case(dir.path());
    let (log, csv) = (log.to_str().expect("utf-8"), csv.to_str().expect("utf-8"));
    let ms = monitors(log, csv);
    let lift = ms.iter().find(|m| m["series"] == "lift").expect("lift");
    assert_eq!(lift["reference"], "near_zero", "{lift}");
    let side = ms.iter().find(|m| m["series"] == "side").expect("side");
    assert_eq!(side["round_off"], true, "{side}");
    let reference = format!(
        "relative to {} (mean near zero)",
        settle::view::number::value(lift["reference_value"].as_f64().expect("number"))
    );
    let window = format!("window {} it", lift["window"]);

    let o = settle(&["check", log, csv]);
    let out = text(&o.stdout);
    let row = out
        .lines()
        .find(|l| l.contains(" lift ") && l.contains(" drift "))
        .expect("the lift drift row");
    assert!(row.ends_with(&format!("[{window}, {reference}]")), "{row}");
    // A monitor judged against its mean names its window only.
    let drag = out.lines().find(|l| l.contains(" drag ") && l.contains(" band ")).expect("drag");
    assert!(drag.contains("[window ") && !drag.contains("relative to"), "{drag}");
    assert!(out.contains("\nside not judged (round-off only)\n"), "{out}");
    assert!(!out.contains('`'), "{out}");
}

#[test]
fn the_report_tables_and_captions_carry_the_same_words() {
    let dir = tempfile::tempdir().expect("tempdir");
    let (log, csv) = near_zero::write_case(dir.path());
    let (log, csv) = (log.to_str().expect("utf-8"), csv.to_str().expect("utf-8"));
    let ms = monitors(log, csv);
    let lift = ms.iter().find(|m| m["series"] == "lift").expect("lift");
    let reference = format!(
        "relative to {} (mean near zero)",
        settle::view::number::value(lift["reference_value"].as_f64().expect("number"))
    );
    let html_path = dir.path().join("r.html");
    let o = settle(&["report", log, csv, "-o", html_path.to_str().expect("utf-8")]);
    assert!(o.status.success(), "{}", text(&o.stderr));
    let html = std::fs::read_to_string(&html_path).expect("html");
    let monitors_table = &html[html.find("class=\"monitors\"").expect("monitors table")..];
    let monitors_table = &monitors_table[..monitors_table.find("</table>").expect("end")];
    assert!(monitors_table.contains(&reference), "{monitors_table}");
    assert!(monitors_table.contains("not judged (round-off only)"), "{monitors_table}");
    let window = format!("window {} it", lift["window"]);
    assert!(html.contains(&window), "the lift caption names {window}");
    assert!(html.contains(&format!("tolerance band ± 0.25 % {reference}")), "band caption");

    let md_path = dir.path().join("r.md");
    let o = settle(&["report", log, csv, "-o", md_path.to_str().expect("utf-8")]);
    assert!(o.status.success(), "{}", text(&o.stderr));
    let md = std::fs::read_to_string(&md_path).expect("md");
    assert!(md.contains("not judged (round-off only)"), "{md}");
    assert!(md.contains("mean near zero"), "{md}");
}

#[test]
fn the_crash_why_reads_without_backticks_in_check_and_headless() {
    let o = settle(&["check", "samples/mixer-22"]);
    let out = text(&o.stdout);
    assert!(out.contains("(stack_trace: tarn::sst_limiter"), "{out}");
    assert!(!out.contains('`'), "{out}");
    let o = settle(&[
        "watch",
        "--headless",
        "--exit-when",
        "ended",
        "--stale",
        "1s",
        "samples/mixer-22",
    ]);
    let out = text(&o.stdout);
    assert!(out.contains(" diverging "), "{out}");
    assert!(!out.contains('`'), "{out}");
}

/// A settle.toml that makes every series `info`: records, nothing the criteria judge.
fn info_only_case(dir: &Path) {
    near_zero::write_case(dir);
    std::fs::write(
        dir.join("settle.toml"),
        "name = \"probe\"\n[[source]]\npath = \"tarn.log\"\n[[source]]\npath = \"forces.csv\"\n\
         [criteria.series.\"*\"]\nrole = \"info\"\n",
    )
    .expect("config written");
}

#[test]
fn nothing_to_judge_has_one_wording_and_never_a_verdict() {
    let dir = tempfile::tempdir().expect("tempdir");
    info_only_case(dir.path());
    let d = dir.path().to_str().expect("utf-8");
    let why = settle::judge::NothingToJudge::NothingJudged { series: 19 };
    let reason = settle::view::evidence::no_verdict_reason(&why);
    assert!(!reason.contains('`'), "{reason}");

    // check and report: an error with the reason, exit code 1, nothing written.
    let o = settle(&["check", d]);
    let err = text(&o.stderr);
    assert_eq!(o.status.code(), Some(1), "{err}");
    assert!(err.contains(&format!("probe: no verdict: {reason}")), "{err}");
    assert!(!err.contains('`'), "{err}");
    assert!(text(&o.stdout).is_empty());
    let out = dir.path().join("r.html");
    let o = settle(&["report", d, "-o", out.to_str().expect("utf-8")]);
    assert_eq!(o.status.code(), Some(1));
    assert!(text(&o.stderr).contains(&reason), "{}", text(&o.stderr));
    assert!(!out.exists(), "no report for a run without a verdict");

    // Headless: a state line with the same reason, no verdict word, exit code 16.
    let o = settle(&["watch", "--headless", "--exit-when", "ended", d]);
    let out = text(&o.stdout);
    assert_eq!(o.status.code(), Some(16), "{out}\n{}", text(&o.stderr));
    let last = out.lines().last().expect("a line");
    assert!(last.contains(" probe nothing-to-judge | no verdict | "), "{out}");
    assert!(last.ends_with(&format!(" | why: {reason} (final)")), "{out}");
    for v in settle::judge::Verdict::ALL {
        assert!(!out.contains(&format!("probe {v}")), "a verdict line: {out}");
    }
    let o = settle(&["watch", "--headless", "--json", "--exit-when", "ended", d]);
    let last: Value =
        serde_json::from_str(text(&o.stdout).lines().last().expect("a line")).expect("JSON");
    assert_eq!(last["state"], "nothing-to-judge");
    assert_eq!(last["detail"], reason.as_str(), "the same wording in JSON");
    assert!(last.get("verdict").is_none(), "{last}");
}
