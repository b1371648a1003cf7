//! `settle report` on every synthetic scenario (our invented solver tarn): the report
//! carries the verdict `check` gives, every criterion row, and the SHA-256 of the log it
//! read (computed here independently with the `sha2` crate).

use std::path::Path;
use std::process::Command;

use serde_json::Value;
use settle::synth::{self, Options, Scenario};
use sha2::{Digest, Sha256};

const BIN: &str = env!("CARGO_BIN_EXE_settle");

fn run(args: &[&str]) -> std::process::Output {
    Command::new(BIN).args(args).output().expect("settle runs")
}

fn sha256_hex(path: &Path) -> String {
    let bytes = std::fs::read(path).unwrap();
    Sha256::digest(&bytes).iter().map(|b| format!("{b:02x}")).collect()
}

fn check_one(scenario: Scenario, dir: &Path) {
    let opts = Options { iterations: Some(450), ..Options::default() };
    let synth_run = synth::generate_with(scenario, 21, &opts);
    let log = dir.join(format!("{}.log", scenario.name()));
    let mut bytes = Vec::new();
    synth::write_tarn_log(&synth_run, &mut bytes).unwrap();
    std::fs::write(&log, bytes).unwrap();
    let log_s = log.to_str().unwrap();

    let check = run(&["check", "--json", log_s]);
    let checked: Value = serde_json::from_slice(&check.stdout).unwrap();
    let verdict = checked["verdict"].as_str().unwrap().to_string();

    let json_out = dir.join(format!("{}.json", scenario.name()));
    let o = run(&["report", log_s, "-o", json_out.to_str().unwrap()]);
    assert!(o.status.success(), "{}", String::from_utf8_lossy(&o.stderr));
    let report: Value = serde_json::from_str(&std::fs::read_to_string(&json_out).unwrap()).unwrap();
    assert_eq!(report["verdict"], verdict.as_str(), "{scenario:?}");
    let rows = report["criteria"].as_array().unwrap();
    assert_eq!(rows.len(), checked["criteria"].as_array().unwrap().len(), "{scenario:?}");
    let digest = sha256_hex(&log);
    assert_eq!(report["provenance"]["sources"][0]["sha256"], digest.as_str());

    let html_out = dir.join(format!("{}.html", scenario.name()));
    let o = run(&["report", log_s, "-o", html_out.to_str().unwrap()]);
    assert!(o.status.success(), "{}", String::from_utf8_lossy(&o.stderr));
    let html = std::fs::read_to_string(&html_out).unwrap();
    assert!(html.to_lowercase().contains(&verdict), "{scenario:?}: verdict {verdict} in the HTML");
    assert!(html.contains(&digest), "{scenario:?}: source hash in the HTML");
    for row in rows {
        let series = row["series"].as_str().unwrap();
        assert!(html.contains(series), "{scenario:?}: criterion row for {series}");
    }
    assert!(!html.contains("<script"), "no scripts");
    assert!(!html.contains("http://") && !html.contains("https://"), "no external references");
    // The safety caution is in every report.
    assert!(html.contains("not proof"), "{scenario:?}: safety wording");
}

#[test]
fn every_scenario_reports_its_verdict_criteria_and_hashes() {
    let dir = tempfile::tempdir().unwrap();
    std::thread::scope(|s| {
        for chunk in Scenario::all().chunks(4) {
            let dir = dir.path();
            s.spawn(move || {
                for &sc in chunk {
                    check_one(sc, dir);
                }
            });
        }
    });
}
