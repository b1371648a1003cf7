//! `settle parsers draft`: for the shipped demo format and several invented formats, the
//! drafted definition reads the same records, series (names, roles, every value), events
//! and end mark as a definition written by hand; and `parsers check` finds nothing to
//! complain about in a draft read on its own sample.
//!
//! The formats are our own inventions (writers in `fixtures/drafts/formats.rs`); the
//! hand-written definitions are in `fixtures/drafts/*.toml`.

#[path = "fixtures/drafts/formats.rs"]
mod formats;

use std::path::{Path, PathBuf};

use settle::parser::check::{examine, lines_of};
use settle::parser::draft::{draft_files, draft_text};
use settle::parser::{Definition, Origin, Registry};
use settle::record::{Output, Role, Severity};
use settle::run::SourceStore;

fn fixture(name: &str) -> PathBuf {
    Path::new(env!("CARGO_MANIFEST_DIR")).join("tests/fixtures/drafts").join(name)
}

fn samples() -> PathBuf {
    Path::new(env!("CARGO_MANIFEST_DIR")).join("samples")
}

/// Everything a definition reads from a text.
fn read(def: &Definition, text: &str) -> SourceStore {
    let mut p = def.parser();
    let mut store = SourceStore::new("sample", def.name());
    let mut out: Vec<Output> = Vec::new();
    for line in lines_of(text.as_bytes()) {
        p.feed(line, &mut out);
        store.apply(out.drain(..));
    }
    p.finish(&mut out);
    store.apply(out.drain(..));
    store.set_stats(p.stats());
    store
}

fn drafted(name: &str, text: &str) -> Definition {
    let d = draft_text(name, &format!("{name}.log"), text.as_bytes())
        .unwrap_or_else(|e| panic!("{name}: {e}"));
    Definition::from_text(&d.toml, Origin::File(PathBuf::from("<draft>")), name, name)
        .unwrap_or_else(|e| panic!("{name}: {e}\n{}", d.toml))
}

fn events_by_severity(s: &SourceStore) -> [usize; 3] {
    let mut n = [0; 3];
    for e in &s.events {
        n[match e.severity {
            Severity::Info => 0,
            Severity::Warning => 1,
            Severity::Error => 2,
        }] += 1;
    }
    n
}

/// The draft and the hand-written definition read the same things from `text`.
fn same_as_hand_written(name: &str, hand: &str, text: &str) -> SourceStore {
    let d = drafted(name, text);
    let h = Definition::from_file(&fixture(hand)).unwrap_or_else(|e| panic!("{e}"));
    let a = read(&d, text);
    let b = read(&h, text);
    assert!(b.records() > 0, "{name}: the hand-written definition reads records");
    assert_eq!(a.records(), b.records(), "{name}: records");
    assert_eq!(a.iterations(), b.iterations(), "{name}: iterations");
    match (a.times(), b.times()) {
        (Some(x), Some(y)) => assert_eq!(x, y, "{name}: times"),
        (None, None) => {}
        other => panic!("{name}: times differ: {other:?}"),
    }
    let mut names_a: Vec<(&str, &str)> =
        a.series().iter().map(|s| (s.name.as_str(), s.role.as_str())).collect();
    let mut names_b: Vec<(&str, &str)> =
        b.series().iter().map(|s| (s.name.as_str(), s.role.as_str())).collect();
    names_a.sort();
    names_b.sort();
    assert_eq!(names_a, names_b, "{name}: series and roles\n{}", d.source_text());
    for s in b.series() {
        let t = a.series_by_name(&s.name).expect("same names");
        assert_eq!(t.len(), s.len(), "{name}/{}: count", s.name);
        for (x, y) in t.values().iter().zip(s.values()) {
            assert!(x == y || (x.is_nan() && y.is_nan()), "{name}/{}: {x} vs {y}", s.name);
        }
        assert_eq!(&*a.series_iterations(t), &*b.series_iterations(s), "{name}/{}", s.name);
    }
    assert_eq!(events_by_severity(&a), events_by_severity(&b), "{name}: events");
    assert_eq!(a.ended.is_some(), b.ended.is_some(), "{name}: end mark");
    assert_eq!(a.stats.skipped, 0, "{name}: nothing skipped");
    // Checked on its own sample, the draft leaves nothing to look at.
    let exam = examine(&d, text.as_bytes());
    assert!(exam.clean(), "{name}: {exam:#?}\n{}", d.source_text());
    a
}

#[test]
fn block_log_with_an_echoed_monitor_block_and_two_total_lines() {
    let n = 120;
    let text = formats::brook(n);
    let s = same_as_hand_written("brook", "brook.toml", &text);
    assert_eq!(s.records(), n);
    // `Total :` under `Forces` and under `Moments` are two quantities, read apart.
    let forces = s.series_by_name("Forces/Total/x").expect("forces total");
    let moments = s.series_by_name("Moments/Total/x").expect("moments total");
    assert_eq!(forces.len(), n);
    let ratio = moments.values()[0] / forces.values()[0];
    assert!((ratio - 0.02).abs() < 0.005, "moments are 2 % of forces here: {ratio}");
    // The first values as printed in the first record.
    assert_eq!(s.series_by_name("U").map(|x| x.values()[0]), Some(1.0019));
    assert_eq!(s.series_by_name("P/sweeps").map(|x| x.values()[0]), Some(32.0));
    assert_eq!(s.series_by_name("Cd").map(|x| x.role), Some(Role::Monitor));
    assert_eq!(s.series_by_name("mass").map(|x| x.role), Some(Role::Indicator));
    // A warning every 17 iterations.
    assert_eq!(s.events.len(), n / 17);
}

#[test]
fn a_small_table_per_iteration() {
    let n = 120;
    let s = same_as_hand_written("weir", "weir.toml", &formats::weir(n));
    for eq in formats::WEIR_EQUATIONS {
        assert_eq!(s.series_by_name(eq).map(|x| x.len()), Some(n), "{eq}");
        assert_eq!(
            s.series_by_name(&format!("{eq}/Sweeps")).map(|x| x.role),
            Some(Role::Indicator)
        );
    }
    // Fortran E with a zero before the point: `0.2077E-01`.
    assert_eq!(s.series_by_name("Pressure").map(|x| x.values()[0]), Some(0.02077));
}

#[test]
fn one_line_per_iteration_with_every_residual() {
    let n = 120;
    let s = same_as_hand_written("rill", "rill.toml", &formats::rill(n));
    for r in ["p", "u", "v", "k"] {
        assert_eq!(s.series_by_name(r).map(|x| x.role), Some(Role::Residual), "{r}");
    }
    // Fortran D exponent: `0.9650D+00`.
    assert_eq!(s.series_by_name("p").map(|x| x.values()[0]), Some(0.965));
}

#[test]
fn inner_iterations_per_time_step() {
    let n = 120;
    let s = same_as_hand_written("ford", "ford.toml", &formats::ford(n));
    // Every inner iteration is kept: 3 + i % 3 per step.
    let inner: usize = (1..=n).map(|i| 3 + i % 3).sum();
    assert_eq!(s.series_by_name("p").map(|x| x.len()), Some(inner));
    assert_eq!(s.series_by_name("converged").map(|x| x.values()[0]), Some(4.0));
    let t = s.times().expect("a time per step");
    assert!((t[n - 1] - 0.12).abs() < 1e-12, "{}", t[n - 1]);
}

#[test]
fn fortran_numbers_without_an_exponent_letter() {
    let n = 120;
    let s = same_as_hand_written("marsh", "marsh.toml", &formats::marsh(n));
    let dq = s.series_by_name("DQMIN").expect("DQMIN");
    assert!(dq.values().iter().all(|&v| v > 1e-104 && v < 1e-102), "{:?}", &dq.values()[..3]);
}

#[test]
fn the_shipped_demo_format() {
    // Drafted from the demo sample, read by the shipped hand-written `tarn` definition.
    let text = std::fs::read_to_string(samples().join("duct-bend-07/tarn.log")).unwrap();
    let tarn = Registry::builtin().get("tarn").cloned().expect("shipped");
    let d = drafted("tarn-draft", &text);
    let (a, b) = (read(&d, &text), read(&tarn, &text));
    assert_eq!(a.records(), b.records());
    let mut na: Vec<(&str, &str)> =
        a.series().iter().map(|s| (s.name.as_str(), s.role.as_str())).collect();
    let mut nb: Vec<(&str, &str)> =
        b.series().iter().map(|s| (s.name.as_str(), s.role.as_str())).collect();
    na.sort();
    nb.sort();
    assert_eq!(na, nb);
    for s in b.series() {
        assert_eq!(a.series_by_name(&s.name).map(|x| x.values()), Some(s.values()), "{}", s.name);
    }
    assert_eq!(events_by_severity(&a), events_by_severity(&b));
    assert!(a.ended.is_some());
    // The crashed demo run: the crash and the first stack-trace line are errors.
    let text = std::fs::read_to_string(samples().join("mixer-22/tarn.log")).unwrap();
    let d = drafted("mixer-draft", &text);
    let (a, b) = (read(&d, &text), read(&tarn, &text));
    assert_eq!(a.records(), b.records());
    assert_eq!(events_by_severity(&a), events_by_severity(&b));
    assert!(a.events.iter().any(|e| e.rule == "crash" && e.severity == Severity::Error));
    assert!(a.ended.is_none());
}

#[test]
fn a_tab_separated_monitor_with_grouped_vector_columns() {
    let n = 120;
    let s = same_as_hand_written("forces", "forces_tab.toml", &formats::forces_tab(n));
    let names: Vec<&str> = s.series().iter().map(|x| x.name.as_str()).collect();
    assert_eq!(
        names,
        vec!["total_x", "total_y", "total_z", "pressure_x", "pressure_y", "pressure_z"]
    );
    assert_eq!(s.times().map(|t| t.len()), Some(n));
}

#[test]
fn files_of_one_format_share_one_draft() {
    let p = formats::probes(50, 101325.0, 7);
    let k = formats::probes(50, 0.02, 8);
    let drafts = draft_files(
        &[
            (PathBuf::from("b1_probe_p.csv"), p.clone().into_bytes()),
            (PathBuf::from("b1_probe_k.csv"), k.into_bytes()),
        ],
        Some("probes"),
    )
    .unwrap();
    assert_eq!(drafts.len(), 1, "one format");
    assert_eq!(drafts[0].files.len(), 2);
    assert_eq!(drafts[0].name, "probes");
    same_as_hand_written("probes", "probes.toml", &p);
}

#[test]
fn a_draft_is_picked_by_detection_for_its_own_file() {
    let text = formats::brook(40);
    let d = drafted("brook", &text);
    let mut reg = Registry::builtin();
    reg.insert(d);
    assert_eq!(reg.detect(text.as_bytes()).chosen.as_deref(), Some("brook"));
}

#[test]
fn text_that_is_no_run_log_is_refused_with_a_reason() {
    let err = draft_text("x", "notes.txt", b"Dear diary,\ntoday the mesh was fine.\n").unwrap_err();
    assert!(err.contains("no line repeats with a rising number"), "{err}");
    let err = draft_text("x", "empty.log", b"\n\n").unwrap_err();
    assert!(err.contains("empty"), "{err}");
}

/// A run that resumed from its last checkpoint (the step numbers go on) and writes restart
/// files: the draft names the resume notice `resumed`, the name that opens a segment, and
/// leaves the restart-file line its own name, so that writing a checkpoint is no restart.
#[test]
fn a_resume_notice_is_drafted_as_resumed_and_opens_a_segment() {
    let rill = formats::rill(120);
    let mut text = String::new();
    for line in rill.lines() {
        text.push_str(line);
        text.push('\n');
        if line.starts_with("it     40 ") || line.starts_with("it     80 ") {
            text.push_str("restart file written to nozzle-3.rst\n");
        }
        if line.starts_with("it     80 ") {
            text.push_str("resumed from nozzle-3.rst at iteration 80\n");
        }
    }
    let d = drafted("rill", &text);
    let src = d.source_text();
    assert!(src.contains("name = \"resumed\""), "{src}");
    assert!(src.contains("name = \"restart\""), "{src}");
    let s = read(&d, &text);
    assert_eq!(s.records(), 120);
    let rules: Vec<&str> = s.events.iter().map(|e| e.rule.as_str()).collect();
    assert_eq!(rules, ["restart", "restart", "resumed"]);
    // One segment from the notice on: records 1–80, then 81–120.
    assert_eq!(s.segments.len(), 2, "{:?}", s.segments);
    assert_eq!(s.segments[1].first_record, 80);
}
