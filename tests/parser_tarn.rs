//! The shipped `tarn` definition on hand-written logs that follow TARN_FORMAT.md (our own
//! invented demo solver; all numbers are invented demo values).

use settle::parser::{Parser, Registry};
use settle::record::{Event, LineStats, Output, Record, Role, SeriesInfo, Severity, Skip};

/// Everything a parser produced for a text, with series announcements checked.
struct Parsed {
    series: Vec<SeriesInfo>,
    records: Vec<Record>,
    events: Vec<Event>,
    ends: Vec<(u64, String)>,
    skipped: Vec<Skip>,
    stats: LineStats,
}

fn run(mut parser: Parser, text: &str) -> Parsed {
    let mut out = Vec::new();
    for line in text.lines() {
        parser.feed(line.as_bytes(), &mut out);
    }
    parser.finish(&mut out);
    let mut p = Parsed {
        series: Vec::new(),
        records: Vec::new(),
        events: Vec::new(),
        ends: Vec::new(),
        skipped: Vec::new(),
        stats: parser.stats(),
    };
    for o in out {
        match o {
            Output::Series(s) => {
                assert_eq!(s.id as usize, p.series.len(), "ids are dense and in order");
                p.series.push(s);
            }
            Output::Record(r) => {
                for (id, _) in &r.values {
                    assert!((*id as usize) < p.series.len(), "series {id} used before announced");
                }
                p.records.push(r);
            }
            Output::Event(e) => p.events.push(e),
            Output::EndOfRun { line, message } => p.ends.push((line, message)),
            Output::Skipped(s) => p.skipped.push(s),
        }
    }
    p
}

impl Parsed {
    fn values(&self, rec: usize) -> Vec<(&str, f64)> {
        self.records[rec]
            .values
            .iter()
            .map(|(id, v)| (self.series[*id as usize].name.as_str(), *v))
            .collect()
    }

    fn role(&self, name: &str) -> Role {
        self.series.iter().find(|s| s.name == name).map(|s| s.role).expect("series exists")
    }

    fn value(&self, rec: usize, name: &str) -> f64 {
        let found: Vec<f64> =
            self.values(rec).into_iter().filter(|(n, _)| *n == name).map(|(_, v)| v).collect();
        assert_eq!(found.len(), 1, "exactly one {name} in record {rec}");
        found[0]
    }
}

fn tarn() -> Parser {
    Registry::builtin().get("tarn").expect("tarn is shipped").parser()
}

const BANNER: &str = "\
tarn 3.2.0 - incompressible RANS solver (k-omega SST)
case       : duct-bend-07
mesh       : 412566 cells, 3 zones
started    : 2026-11-30 08:14:02
relaxation : U 0.7  p 0.3  k 0.8  omega 0.8
--------------------------------------------------------------
";

const STEADY: &str = "\
[step      1]  cfl 5.00e+00
  Ux       res 1.0000e+00   lin   3 sweeps
  Uy       res 1.0000e+00   lin   3 sweeps
  p        res 1.0000e+00   lin  18 sweeps
  continuity  imbalance 4.2110e-02
  forces   drag 4.1230e-01  lift 2.1100e-02  dp 1.5320e+02
  notice: k bounded below at 14 cells
  wall 0.43 s
[step      2]  cfl 5.00e+00
  Ux       res 5.1200e-01   lin   3 sweeps
  Uy       res 4.9000e-01   lin   2 sweeps
  p        res 3.3000e-01   lin  21 sweeps
  continuity  imbalance 2.0000e-02
  forces   drag 4.0000e-01  lift 2.2000e-02  dp 1.5000e+02
  wall 0.41 s
tarn: residual targets reached
==============================================================
tarn: finished after 2 steps (wall 0.84 s)
";

#[test]
fn steady_log_gives_exact_records() {
    let p = run(tarn(), &format!("{BANNER}{STEADY}"));
    let names: Vec<(&str, Role)> = p.series.iter().map(|s| (s.name.as_str(), s.role)).collect();
    assert_eq!(
        names,
        vec![
            ("cfl", Role::Info),
            ("Ux", Role::Residual),
            ("Ux/sweeps", Role::Indicator),
            ("Uy", Role::Residual),
            ("Uy/sweeps", Role::Indicator),
            ("p", Role::Residual),
            ("p/sweeps", Role::Indicator),
            ("continuity", Role::Indicator),
            ("drag", Role::Monitor),
            ("lift", Role::Monitor),
            ("dp", Role::Monitor),
            ("wall", Role::Info),
        ]
    );
    assert_eq!(p.records.len(), 2);
    assert_eq!(p.records[0].iteration, Some(1));
    assert_eq!(p.records[0].time, None);
    assert_eq!(p.records[0].line, 7);
    assert_eq!(
        p.values(0),
        vec![
            ("cfl", 5.0),
            ("Ux", 1.0),
            ("Ux/sweeps", 3.0),
            ("Uy", 1.0),
            ("Uy/sweeps", 3.0),
            ("p", 1.0),
            ("p/sweeps", 18.0),
            ("continuity", 4.211e-2),
            ("drag", 0.4123),
            ("lift", 2.11e-2),
            ("dp", 153.2),
            ("wall", 0.43),
        ]
    );
    assert_eq!(p.records[1].iteration, Some(2));
    assert_eq!(p.records[1].line, 15);
    assert_eq!(p.value(1, "Ux"), 0.512);
    assert_eq!(p.value(1, "p/sweeps"), 21.0);
    assert_eq!(p.value(1, "dp"), 150.0);

    assert_eq!(p.events.len(), 2);
    assert_eq!(p.events[0].rule, "notice");
    assert_eq!(p.events[0].severity, Severity::Warning);
    assert_eq!(p.events[0].message, "k bounded below at 14 cells");
    assert_eq!(p.events[0].line, 13);
    assert_eq!(p.events[0].iteration, Some(1));
    assert_eq!(p.events[1].rule, "solver_converged");
    assert_eq!(p.events[1].severity, Severity::Info);
    assert_eq!(p.events[1].iteration, Some(2));
    assert_eq!(p.ends, vec![(24, "tarn: finished after 2 steps (wall 0.84 s)".to_string())]);

    // 24 lines: banner (6 incl. dashes) and the `=====` line ignored, the rest used.
    assert_eq!(p.stats, LineStats { lines: 24, used: 17, skipped: 0, ignored: 7 });
    assert!(p.skipped.is_empty());
}

#[test]
fn unsteady_step_line_gives_time_and_dt() {
    let log = format!(
        "{BANNER}\
[step     12]  time 1.2000e-02  dt 1.0000e-03  cfl 8.10e-01
  Ux       res 3.2000e-03   lin   2 sweeps
[step     13]  time 1.3000e-02  dt 1.0000e-03  cfl 8.20e-01
  Ux       res 3.1000e-03   lin   2 sweeps
"
    );
    let p = run(tarn(), &log);
    assert_eq!(p.records.len(), 2);
    assert_eq!(p.records[0].iteration, Some(12));
    assert_eq!(p.records[0].time, Some(1.2e-2));
    assert_eq!(p.records[1].time, Some(1.3e-2));
    assert_eq!(p.value(0, "dt"), 1e-3);
    assert_eq!(p.value(0, "cfl"), 0.81);
    assert_eq!(p.value(1, "Ux"), 3.1e-3);
    assert_eq!(p.role("dt"), Role::Info);
    // The last record is only complete at the end of data.
    assert!(p.ends.is_empty());
}

#[test]
fn crash_gives_crash_event_partial_record_and_no_end() {
    let log = format!(
        "{BANNER}\
[step     41]  cfl 5.00e+00
  Ux       res 2.0000e-02   lin   3 sweeps
  p        res 4.0000e-02   lin  40 sweeps
  continuity  imbalance 1.0000e-03
  forces   drag 4.1000e-01  lift 2.0000e-02  dp 1.5000e+02
[step     42]  cfl 5.00e+00
  Ux       res **********   lin   3 sweeps
  p        res -nan   lin 200 sweeps
  warning: linear solver for p reached sweep limit (200)
  continuity  imbalance 8.1000e+05
  forces   drag inf  lift nan  dp 1.0000e+30
*** tarn fatal: floating point exception (signal 8)
    at tarn::solve_pressure (pressure.f90:212)
    at tarn::outer_iteration (solve.f90:88)
    at tarn::main (main.f90:20)
"
    );
    let p = run(tarn(), &log);
    assert!(p.ends.is_empty(), "a crash has no end-of-run mark");
    assert_eq!(p.records.len(), 2);
    let last = 1;
    assert_eq!(p.records[last].iteration, Some(42));
    // Overflow and nan are kept as non-finite values, never dropped.
    assert_eq!(p.value(last, "Ux"), f64::INFINITY);
    assert!(p.value(last, "p").is_nan());
    assert_eq!(p.value(last, "p/sweeps"), 200.0);
    assert_eq!(p.value(last, "continuity"), 8.1e5);
    assert_eq!(p.value(last, "drag"), f64::INFINITY);
    assert!(p.value(last, "lift").is_nan());

    let kinds: Vec<(&str, Severity, &str, Option<i64>)> = p
        .events
        .iter()
        .map(|e| (e.rule.as_str(), e.severity, e.message.as_str(), e.iteration))
        .collect();
    assert_eq!(
        kinds,
        vec![
            (
                "warning",
                Severity::Warning,
                "linear solver for p reached sweep limit (200)",
                Some(42)
            ),
            ("crash", Severity::Error, "floating point exception (signal 8)", Some(42)),
            ("stack_trace", Severity::Error, "tarn::solve_pressure (pressure.f90:212)", Some(42)),
        ]
    );
    assert_eq!(p.events[1].line, 18);
    assert_eq!(p.events[2].line, 19);
    // Only the first trace line fires; the deeper ones are recognised (used) but silent.
    assert_eq!(p.stats, LineStats { lines: 21, used: 15, skipped: 0, ignored: 6 });
}

#[test]
fn crash_during_setup_is_reported_before_the_marker() {
    let log = "tarn 3.2.0 - incompressible RANS solver (k-omega SST)\n\
               case       : duct-bend-07\n\
               *** tarn fatal: cannot read mesh file duct.msh\n";
    let p = run(tarn(), log);
    assert!(p.records.is_empty());
    assert_eq!(p.events.len(), 1);
    assert_eq!(p.events[0].rule, "crash");
    assert_eq!(p.events[0].message, "cannot read mesh file duct.msh");
    assert_eq!(p.events[0].iteration, None);
}

#[test]
fn restart_note_and_repeated_step_numbers() {
    let log = format!(
        "{BANNER}\
[step    600]  cfl 5.00e+00
  p        res 1.0000e-04   lin   5 sweeps
restarting from checkpoint at step 550
[step    551]  cfl 5.00e+00
  p        res 2.0000e-04   lin   5 sweeps
"
    );
    let p = run(tarn(), &log);
    let its: Vec<Option<i64>> = p.records.iter().map(|r| r.iteration).collect();
    assert_eq!(its, vec![Some(600), Some(551)]);
    assert_eq!(p.events.len(), 1);
    assert_eq!(p.events[0].rule, "resumed");
    assert_eq!(p.events[0].severity, Severity::Info);
    assert_eq!(p.events[0].message, "restarting from checkpoint at step 550");
}

#[test]
fn unreadable_numbers_are_skipped_with_reasons() {
    let log = format!(
        "{BANNER}\
[step      1]  cfl 5.00e+00
  p        res 1.2.3   lin   5 sweeps
  Ux       res 1.0000e-01   lin   x sweeps
  continuity  imbalance 4.2110e-02
"
    );
    let p = run(tarn(), &log);
    assert_eq!(p.stats.skipped, 2);
    assert_eq!(p.skipped.len(), 2);
    assert_eq!(p.skipped[0].line, 8);
    assert!(p.skipped[0].reason.contains("equation"), "{}", p.skipped[0].reason);
    assert!(p.skipped[0].reason.contains("`1.2.3`"), "{}", p.skipped[0].reason);
    assert!(p.skipped[1].reason.contains("capture `sweeps`"), "{}", p.skipped[1].reason);
    // What did parse on a partly bad line is kept.
    assert_eq!(p.value(0, "Ux"), 0.1);
    assert_eq!(p.value(0, "continuity"), 4.211e-2);
    assert!(p.values(0).iter().all(|(n, _)| *n != "p"));
}

#[test]
fn crlf_lines_and_appended_second_run() {
    let first = format!("{BANNER}{STEADY}").replace('\n', "\r\n");
    let second = format!("{BANNER}[step      3]  cfl 5.00e+00\n  p        res 1.0000e-01\n");
    let p = run(tarn(), &format!("{first}{second}"));
    assert_eq!(p.records.len(), 3);
    assert_eq!(p.records[2].iteration, Some(3));
    assert_eq!(p.value(2, "p"), 0.1);
    assert_eq!(p.ends.len(), 1);
    assert_eq!(p.ends[0].1, "tarn: finished after 2 steps (wall 0.84 s)");
}

#[test]
fn detection_prefers_tarn_for_tarn_logs() {
    let reg = Registry::builtin();
    let d = reg.detect(format!("{BANNER}{STEADY}").as_bytes());
    assert_eq!(d.chosen.as_deref(), Some("tarn"), "{}", d.summary);
    assert_eq!(d.candidates[0].name, "tarn");
    assert_eq!(d.candidates[0].score, 17);
    assert!(d.candidates[0].reasons.iter().any(|r| r.contains("line 1")));
    // Without the banner, step and equation lines still identify it, and it still parses.
    let d = reg.detect(STEADY.as_bytes());
    assert_eq!(d.chosen.as_deref(), Some("tarn"), "{}", d.summary);
    let p = run(tarn(), STEADY);
    assert_eq!(p.records.len(), 2);
    assert_eq!(p.value(1, "p"), 0.33);
}
