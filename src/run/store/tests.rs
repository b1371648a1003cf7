//! Tests of the store: placement, segments, restarts, naming and duplicate series.

use super::*;
use crate::record::{Record, Role};

fn info(id: u32, name: &str) -> Output {
    Output::Series(SeriesInfo { id, name: name.into(), role: Role::Residual })
}

fn rec(it: i64, values: &[(u32, f64)]) -> Output {
    Output::Record(Record { iteration: Some(it), values: values.to_vec(), ..Default::default() })
}

#[test]
fn dense_series_stay_dense_and_borrow_iterations() {
    let mut s = SourceStore::new("log", "demo");
    s.apply([info(0, "p"), rec(1, &[(0, 1.0)]), rec(2, &[(0, 0.5)]), rec(3, &[(0, 0.25)])]);
    let p = s.series_by_name("p").unwrap();
    assert_eq!(p.values(), &[1.0, 0.5, 0.25]);
    assert!(matches!(s.series_iterations(p), Cow::Borrowed(&[1, 2, 3])));
    assert_eq!(s.segments.len(), 1);
}

#[test]
fn gaps_and_repeats_switch_to_sparse() {
    let mut s = SourceStore::new("log", "demo");
    s.apply([info(0, "p"), info(1, "cd")]);
    s.apply([rec(1, &[(0, 1.0)]), rec(2, &[(0, 0.5), (1, 3.0)]), rec(3, &[(0, 0.2)])]);
    s.apply([rec(4, &[(0, 0.1), (1, 2.0), (1, 2.5)])]);
    let cd = s.series_by_name("cd").unwrap();
    assert_eq!(cd.values(), &[3.0, 2.0, 2.5]);
    assert_eq!(&*s.series_iterations(cd), &[2, 4, 4]);
}

#[test]
fn iteration_going_back_opens_a_segment() {
    let mut s = SourceStore::new("log", "demo");
    s.apply([info(0, "p"), rec(1, &[(0, 1.0)]), rec(2, &[(0, 0.5)]), rec(2, &[(0, 0.4)])]);
    s.apply([rec(3, &[(0, 0.3)])]);
    assert_eq!(s.segments.len(), 2);
    assert_eq!(s.segments[1].first_record, 2);
    assert_eq!(s.segments[1].reason, SegmentReason::IterationBack { from: 2, to: 2 });
    let p = s.series_by_name("p").unwrap();
    assert_eq!(s.series_segment_starts(p), vec![0, 2]);
}

#[test]
fn restart_maps_new_ids_to_existing_names() {
    let mut s = SourceStore::new("run.log.*", "demo");
    s.apply([info(0, "p"), rec(1, &[(0, 1.0)])]);
    s.set_stats(LineStats { lines: 5, used: 1, skipped: 0, ignored: 4 });
    s.restart(SegmentReason::NewFile { path: "run.log.2".into() });
    s.apply([info(7, "p"), rec(2, &[(7, 0.5)])]);
    s.set_stats(LineStats { lines: 2, used: 1, skipped: 0, ignored: 1 });
    assert_eq!(s.series().len(), 1);
    assert_eq!(s.series()[0].values(), &[1.0, 0.5]);
    assert_eq!(s.segments.len(), 2);
    assert_eq!(s.stats.lines, 7);
}

#[test]
fn dense_series_cost_about_eight_bytes_per_value() {
    // README "Speed and memory": at most about 10 bytes per value. 12 series × 50 000 records, dense.
    let mut s = SourceStore::new("log", "t");
    s.apply((0..12).map(|i| info(i, &format!("s{i}"))));
    for it in 1..=50_000 {
        let values: Vec<(u32, f64)> = (0..12).map(|i| (i, it as f64)).collect();
        s.apply([rec(it, &values)]);
    }
    let values = 12 * 50_000;
    let used = values * 8 + s.records() * 8;
    assert!(used as f64 / values as f64 <= 9.0);
    // Capacity may run ahead of length by the growth factor of `Vec` (at most 2×).
    let held = s.heap_bytes() as f64 / values as f64;
    assert!(held <= 18.0, "{held} bytes per value held");
    assert!(s.series().iter().all(|x| matches!(x.placement, Placement::Dense { .. })));
}

#[test]
fn records_without_iteration_are_numbered() {
    let mut s = SourceStore::new("log", "t");
    s.apply([info(0, "p")]);
    for v in [1.0, 2.0, 3.0] {
        s.apply([Output::Record(Record { values: vec![(0, v)], ..Default::default() })]);
    }
    assert_eq!(s.iterations(), &[1, 2, 3]);
}

#[test]
fn judge_input_names_duplicates_by_source() {
    let mut run = RunStore::new("r");
    let three = |v: f64| [rec(1, &[(0, v)]), rec(2, &[(0, v)]), rec(3, &[(0, v)])];
    let mut a = SourceStore::new("a.log", "x");
    a.apply([info(0, "p")]);
    a.apply(three(1.0));
    let mut b = SourceStore::new("b.log", "x");
    b.apply([info(0, "p")]);
    b.apply(three(2.0));
    let mut c = SourceStore::new("c.csv", "x");
    c.apply([info(0, "p")]);
    c.apply(three(1.00001));
    run.sources = vec![a, b, c];
    let input = run.judge_input();
    let names: Vec<&str> = input.series.iter().map(|s| &*s.name).collect();
    // c.csv repeats a.log's p to printed precision: judged once. a.log and b.log hold
    // different quantities called p: both are named by their file.
    assert_eq!(names, vec!["a/p", "b/p"]);
    let all = run.series_names();
    assert_eq!(all[2][0], SeriesName { name: "c/p".into(), duplicate_of: Some((0, 0)) });
}

#[test]
fn tags_are_the_part_of_the_file_names_that_differs() {
    assert_eq!(source_tags(&["b1_probe_p.csv", "b1_probe_k.csv"]), vec!["probe_p", "probe_k"]);
    assert_eq!(
        source_tags(&["case/b1.log", "case/b1_probe_p.csv", "case/b1_probe_k.csv"]),
        vec!["b1", "probe_p", "probe_k"]
    );
    assert_eq!(source_tags(&["tarn.log", "forces.csv"]), vec!["tarn", "forces"]);
    assert_eq!(source_tags(&["p_probe.csv", "k_probe.csv"]), vec!["p_probe", "k_probe"]);
    assert_eq!(
        source_tags(&["plain/history.dat", "plain/history.csv"]),
        vec!["history.dat", "history.csv"]
    );
    assert_eq!(source_tags(&["a/run.log", "b/run.log"]), vec!["a/run.log", "b/run.log"]);
    assert_eq!(source_tags(&["run.log.*"]), vec!["run.log"]);
}

fn source(label: &str, names: &[&str], rows: &[(i64, Vec<f64>)]) -> SourceStore {
    let mut s = SourceStore::new(label, "t");
    s.apply(names.iter().enumerate().map(|(i, n)| {
        Output::Series(SeriesInfo { id: i as u32, name: n.to_string(), role: Role::Monitor })
    }));
    for (it, vals) in rows {
        let v: Vec<(u32, f64)> = vals.iter().enumerate().map(|(i, &x)| (i as u32, x)).collect();
        s.apply([rec(*it, &v)]);
    }
    s
}

#[test]
fn names_are_cut_in_the_middle() {
    assert_eq!(fit_name("Forces/Pressure/z", 12), "Force…sure/z");
    assert_eq!(fit_name("probe_p/1", 9), "probe_p/1");
    assert_eq!(fit_name("probe_p/12", 8), "pro…p/12");
    assert_eq!(fit_name("omega/sweeps", 6), "om…eps");
    assert_eq!(fit_name("abc", 1), "…");
    assert_eq!(fit_name("Forces/Pressure/z", 12).chars().count(), 12);
}

#[test]
fn probe_files_with_the_same_column_names_are_named_by_file() {
    let rows_p: Vec<(i64, Vec<f64>)> = (1..=5).map(|i| (i, vec![100.0 + i as f64, 7.0])).collect();
    let rows_k: Vec<(i64, Vec<f64>)> = (1..=5).map(|i| (i, vec![0.1 * i as f64, 0.3])).collect();
    let mut run = RunStore::new("b1");
    run.sources = vec![
        source("b1_probe_p.csv", &["1", "2"], &rows_p),
        source("b1_probe_k.csv", &["1", "2"], &rows_k),
    ];
    let input = run.judge_input();
    let names: Vec<&str> = input.series.iter().map(|s| &*s.name).collect();
    assert_eq!(names, vec!["probe_p/1", "probe_p/2", "probe_k/1", "probe_k/2"]);
}

/// The series the judge sees, by name, after the two sources hold `na` and `nb` rows.
fn judged(a: &[(i64, Vec<f64>)], na: usize, b: &[(i64, Vec<f64>)], nb: usize) -> Vec<String> {
    let mut run = RunStore::new("r");
    run.sources = vec![
        source("tarn.log", &["drag", "lift"], &a[..na]),
        source("forces.csv", &["drag", "lift"], &b[..nb]),
    ];
    run.judge_input().series.iter().map(|s| s.name.to_string()).collect()
}

#[test]
fn the_same_monitor_in_two_files_is_judged_once_at_every_length() {
    // The log and the monitor file print drag and lift (the file with fewer digits);
    // they grow in turns, either one ahead by up to 30 rows. The set of judged series
    // must be the same at every moment and equal to reading both files at once.
    let log: Vec<(i64, Vec<f64>)> =
        (1..=200).map(|i| (i, vec![0.4 + 0.1 / i as f64, 0.02 * (i as f64 * 0.3).sin()])).collect();
    let csv: Vec<(i64, Vec<f64>)> = log
        .iter()
        .map(|(i, v)| (*i, v.iter().map(|x| (x * 1e5).round() / 1e5).collect()))
        .collect();
    let at_once = judged(&log, 200, &csv, 200);
    assert_eq!(at_once, vec!["drag", "lift"]);
    for n in 1..=200 {
        for lag in [0usize, 1, 7, 30] {
            assert_eq!(judged(&log, n, &csv, n.saturating_sub(lag)), at_once, "{n} {lag}");
            assert_eq!(judged(&log, n.saturating_sub(lag), &csv, n), at_once, "{n} {lag}");
        }
    }
}

#[test]
fn a_monitor_spelled_with_other_case_in_its_file_is_judged_once() {
    let log: Vec<(i64, Vec<f64>)> = (1..=50).map(|i| (i, vec![0.4 + 0.1 / i as f64])).collect();
    let mut run = RunStore::new("r");
    run.sources = vec![source("loam.log", &["Lift"], &log), source("monitor.out", &["lift"], &log)];
    let names: Vec<String> = run.judge_input().series.iter().map(|s| s.name.to_string()).collect();
    assert_eq!(names, vec!["Lift"]);
}

#[test]
fn different_quantities_with_one_name_stay_apart_once_seen() {
    // drag in the log is a force, in the file a coefficient: they disagree from the
    // first common iteration on, and the decision never returns to "same".
    let log: Vec<(i64, Vec<f64>)> = (1..=100).map(|i| (i, vec![41.0, 2.0])).collect();
    let csv: Vec<(i64, Vec<f64>)> = (1..=100).map(|i| (i, vec![0.41, 2.0])).collect();
    // Before three common iterations disagree there is no evidence against "same".
    assert_eq!(judged(&log, 2, &csv, 2), vec!["drag", "lift"]);
    let want = vec!["tarn/drag", "lift", "forces/drag"];
    for n in 3..=100 {
        assert_eq!(judged(&log, n, &csv, n), want, "{n}");
        assert_eq!(judged(&log, n, &csv, 3.max(n / 2)), want, "{n}");
    }
}

fn restart_notice(line: u64) -> Output {
    Output::Event(notice_event(line))
}

fn notice_event(line: u64) -> Event {
    Event {
        severity: crate::record::Severity::Info,
        rule: "Resumed".into(),
        message: "restarting from checkpoint at step 2".into(),
        line,
        iteration: None,
    }
}

/// A record of `p` opened on `line`.
fn at(it: i64, line: u64, p: f64) -> Output {
    Output::Record(Record { iteration: Some(it), values: vec![(0, p)], line, ..Default::default() })
}

#[test]
fn a_restart_notice_opens_a_segment_even_when_the_numbers_go_on() {
    // A solver resumed from the checkpoint it wrote last: 1, 2, notice, 3, 4.
    let mut s = SourceStore::new("log", "demo");
    s.apply([info(0, "p"), at(1, 1, 1.0), at(2, 3, 0.5), restart_notice(4)]);
    s.apply([at(3, 5, 0.9), at(4, 6, 0.8)]);
    assert_eq!(s.segments.len(), 2);
    assert_eq!(s.segments[1].first_record, 2);
    assert_eq!(s.segments[1].reason, SegmentReason::Notice { line: 4 });
    let p = s.series_by_name("p").unwrap();
    assert_eq!(s.series_segment_starts(p), vec![0, 2]);
    assert_eq!(s.events.len(), 1);
    // The notice arrives while the record of it 2 is still open (a record closes at the next
    // step line), so the parser emits it first: it 2 stays in the old segment.
    let mut s = SourceStore::new("log", "demo");
    s.apply([info(0, "p"), at(1, 1, 1.0), restart_notice(4), at(2, 3, 0.5), at(3, 5, 0.9)]);
    assert_eq!(s.segments.iter().map(|g| g.first_record).collect::<Vec<_>>(), vec![0, 2]);
    // Resumed from an older checkpoint: one segment, named by the step back.
    let mut s = SourceStore::new("log", "demo");
    s.apply([info(0, "p"), at(1, 1, 1.0), at(2, 3, 0.5), restart_notice(4)]);
    s.apply([at(2, 5, 0.9), at(3, 6, 0.8)]);
    assert_eq!(s.segments.len(), 2);
    assert_eq!(s.segments[1].reason, SegmentReason::IterationBack { from: 2, to: 2 });
    // A notice before the first record (a run started from an earlier run's checkpoint)
    // is the start, and an event of another name (`restart`: a restart file written) opens
    // nothing.
    let mut s = SourceStore::new("log", "demo");
    s.apply([info(0, "p"), restart_notice(1), at(10, 2, 1.0), at(11, 3, 0.5)]);
    let other = Output::Event(Event { rule: "restart".into(), line: 5, ..notice_event(5) });
    s.apply([other, at(12, 6, 0.4)]);
    assert_eq!(s.segments.len(), 1);
}
