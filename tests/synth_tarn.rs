//! The tarn writers against the line shapes of TARN_FORMAT.md (our own spec), and the
//! direct store against the written log.

use regex::Regex;
use settle::record::{Role, Severity};
use settle::synth::{
    self, Crash, End, Header, Options, Scenario, Step, SynthRun, write_forces_csv, write_tarn_log,
};

fn step(it: i64, res: [f64; 6], sweeps: [u32; 6]) -> Step {
    Step {
        iteration: it,
        time: None,
        dt: None,
        residuals: synth::EQUATIONS.iter().copied().zip(res).collect(),
        sweeps: sweeps.to_vec(),
        continuity: 4.211e-2,
        drag: 0.4123,
        lift: 0.0211,
        dp: 153.2,
        side: None,
        cfl: 5.0,
        notices: vec![],
        warnings: vec![],
        wall: 0.43,
        restart_from: None,
    }
}

fn header() -> Header {
    Header {
        version: "3.2.0",
        cells: 412566,
        zones: 3,
        started: "2026-11-30 08:14:02".into(),
        relaxation: [0.7, 0.3, 0.8, 0.8],
        model: "k-omega SST",
    }
}

fn small_run() -> SynthRun {
    let mut s1 = step(1, [1.0; 6], [3, 3, 3, 18, 2, 2]);
    s1.notices.push("k bounded below at 14 cells".into());
    let mut s2 = step(2, [0.5, 0.25, 2.5e-3, f64::NAN, -f64::NAN, 3.2e104], [3, 3, 4, 200, 2, 2]);
    s2.warnings.push("linear solver for p reached sweep limit (200)".into());
    s2.drag = 1e150;
    s2.lift = -0.0211;
    s2.continuity = f64::INFINITY;
    s2.wall = 1.5;
    SynthRun {
        scenario: Scenario::Converging,
        seed: 0,
        case: "duct-bend-07".into(),
        header: header(),
        steps: vec![s1, s2],
        onset: None,
        end: End::Finished,
        solver_converged: true,
        crash: None,
        truth: Default::default(),
    }
}

fn text(run: &SynthRun) -> String {
    let mut buf = Vec::new();
    write_tarn_log(run, &mut buf).expect("write to memory");
    String::from_utf8(buf).expect("the log is ASCII")
}

#[test]
fn small_log_matches_the_spec_line_for_line() {
    // Expected lines written from TARN_FORMAT.md's example (our own spec, no outside source).
    let expected = "\
tarn 3.2.0 - incompressible RANS solver (k-omega SST)
case       : duct-bend-07
mesh       : 412566 cells, 3 zones
started    : 2026-11-30 08:14:02
relaxation : U 0.7  p 0.3  k 0.8  omega 0.8
--------------------------------------------------------------
[step      1]  cfl 5.00e+00
  Ux       res 1.0000e+00   lin   3 sweeps
  Uy       res 1.0000e+00   lin   3 sweeps
  Uz       res 1.0000e+00   lin   3 sweeps
  p        res 1.0000e+00   lin  18 sweeps
  k        res 1.0000e+00   lin   2 sweeps
  omega    res 1.0000e+00   lin   2 sweeps
  continuity  imbalance 4.2110e-02
  forces   drag 4.1230e-01  lift 2.1100e-02  dp 1.5320e+02
  notice: k bounded below at 14 cells
  wall 0.43 s
[step      2]  cfl 5.00e+00
  Ux       res 5.0000e-01   lin   3 sweeps
  Uy       res 2.5000e-01   lin   3 sweeps
  Uz       res 2.5000e-03   lin   4 sweeps
  p        res nan   lin 200 sweeps
  k        res -nan   lin   2 sweeps
  omega    res **********   lin   2 sweeps
  continuity  imbalance inf
  forces   drag **********  lift -2.1100e-02  dp 1.5320e+02
  warning: linear solver for p reached sweep limit (200)
  wall 1.50 s
tarn: residual targets reached
==============================================================
tarn: finished after 2 steps (wall 1.9 s)
";
    assert_eq!(text(&small_run()), expected);
}

#[test]
fn unsteady_restart_and_crash_lines() {
    let mut run = small_run();
    for (i, s) in run.steps.iter_mut().enumerate() {
        s.time = Some(1.2e-2 * (i + 1) as f64);
        s.dt = Some(1e-3);
    }
    run.steps[1].restart_from = Some(600);
    run.steps[1].iteration = 601;
    run.end = End::Crash;
    run.solver_converged = false;
    run.crash = Some(Crash {
        printed_equations: 3,
        message: "tarn fatal: floating point exception (signal 8)".into(),
        trace: vec!["at tarn::solve_pressure (pressure.f90:212)".into()],
    });
    let t = text(&run);
    let lines: Vec<&str> = t.lines().collect();
    assert_eq!(lines[6], "[step      1]  time 1.2000e-02  dt 1.0000e-03");
    assert_eq!(lines[17], "restarting from checkpoint at step 600");
    assert_eq!(lines[18], "[step    601]  time 2.4000e-02  dt 1.0000e-03");
    assert_eq!(lines[21], "  Uz       res 2.5000e-03   lin   4 sweeps");
    assert_eq!(lines[22], "*** tarn fatal: floating point exception (signal 8)");
    assert_eq!(lines[23], "    at tarn::solve_pressure (pressure.f90:212)");
    assert_eq!(lines.len(), 24);
    // The cut-short record prints no forces, so forces.csv has one row only.
    let mut csv = Vec::new();
    write_forces_csv(&run, &mut csv).expect("write to memory");
    assert_eq!(
        String::from_utf8(csv).expect("ascii"),
        "# tarn force monitor, case duct-bend-07\nstep,drag,lift,dp\n1,4.1230e-01,2.1100e-02,1.5320e+02\n"
    );
}

/// Every line of a generated log has one of the shapes of the spec.
#[test]
fn generated_logs_use_only_spec_line_shapes() {
    let num = r"(-?\d\.\d{4}e[+-]\d\d|-?nan|-?inf|\*{10})";
    let shapes = [
        // A laminar run names its model and has no k and omega relaxation.
        r"^tarn \d+\.\d+\.\d+ - incompressible RANS solver \((k-omega SST|laminar)\)$".to_string(),
        r"^case       : [a-z0-9-]+$".into(),
        r"^mesh       : \d+ cells, \d+ zones$".into(),
        r"^started    : \d{4}-\d\d-\d\d \d\d:\d\d:\d\d$".into(),
        r"^relaxation : U [0-9.]+  p [0-9.]+(  k [0-9.]+  omega [0-9.]+)?$".into(),
        r"^-{62}$".into(),
        r"^={62}$".into(),
        r"^\[step +\d+\]  cfl \d\.\d\de[+-]\d\d$".into(),
        format!(r"^\[step +\d+\]  time {num}  dt {num}$"),
        format!(r"^  (Ux|Uy|Uz|p|k|omega) +res {num}   lin +\d+ sweeps$"),
        format!(r"^  continuity  imbalance {num}$"),
        format!(r"^  forces   drag {num}  lift {num}  dp {num}$"),
        r"^  notice: (k|omega) bounded below at \d+ cells$".into(),
        r"^  warning: linear solver for (Ux|Uy|Uz|p|k|omega) reached sweep limit \(200\)$".into(),
        r"^  wall \d+\.\d\d s$".into(),
        r"^restarting from checkpoint at step \d+$".into(),
        r"^tarn: residual targets reached$".into(),
        r"^tarn: finished after \d+ steps \(wall \d+\.\d s\)$".into(),
        r"^\*\*\* tarn fatal: [a-z ]+ \(signal \d+\)$".into(),
        r"^    at tarn::[a-z_]+ \([a-z_]+\.f90:\d+\)$".into(),
    ];
    let set = regex::RegexSet::new(&shapes).expect("valid patterns");
    let opts = Options { iterations: Some(400), case: None };
    for s in Scenario::all() {
        for seed in 0..3 {
            let run = synth::generate_with(*s, seed, &opts);
            for (n, line) in text(&run).lines().enumerate() {
                assert!(set.is_match(line), "{s} seed {seed} line {}: {line:?}", n + 1);
            }
        }
    }
}

#[test]
fn csv_has_header_and_one_row_per_printed_forces_line() {
    let row = Regex::new(r"^\d+(,(-?\d\.\d{4}e[+-]\d\d|-?nan|-?inf|\*{10})){3}$").expect("re");
    for s in [Scenario::Converging, Scenario::CrashNoNan, Scenario::Restart] {
        let run = synth::generate(s, 2);
        let mut buf = Vec::new();
        write_forces_csv(&run, &mut buf).expect("write to memory");
        let t = String::from_utf8(buf).expect("ascii");
        let lines: Vec<&str> = t.lines().collect();
        assert_eq!(lines[0], format!("# tarn force monitor, case {}", run.case));
        assert_eq!(lines[1], "step,drag,lift,dp");
        assert_eq!(lines.len() - 2, run.complete_steps(), "{s}");
        let log = text(&run);
        assert_eq!(lines.len() - 2, log.lines().filter(|l| l.starts_with("  forces ")).count());
        assert!(lines[2..].iter().all(|l| row.is_match(l)), "{s}");
        assert!(lines[2].starts_with("1,"));
    }
}

/// The store built directly holds what the log says: one record per step line (at its line
/// number), the printed values, every notice and warning as an event, and the end marks.
#[test]
fn direct_store_agrees_with_the_written_log() {
    for s in Scenario::all() {
        let run = synth::generate_with(*s, 4, &Options { iterations: Some(900), case: None });
        let log = text(&run);
        let lines: Vec<&str> = log.lines().collect();
        let store = synth::to_store(&run);
        let src = &store.sources[0];
        assert_eq!(src.stats.lines, lines.len() as u64, "{s}");
        assert_eq!(src.records(), run.steps.len());
        let step_lines: Vec<i64> = lines
            .iter()
            .filter_map(|l| l.strip_prefix("[step ").and_then(|r| r.split(']').next()))
            .map(|n| n.trim().parse().expect("step number"))
            .collect();
        assert_eq!(src.iterations(), &step_lines[..], "{s}");
        let notices = lines.iter().filter(|l| l.starts_with("  notice: ")).count();
        let warnings = lines.iter().filter(|l| l.starts_with("  warning: ")).count();
        let count = |rule: &str| src.events.iter().filter(|e| e.rule == rule).count();
        assert_eq!(count("notice"), notices, "{s}");
        assert_eq!(count("warning"), warnings, "{s}");
        assert_eq!(count("crash"), usize::from(log.contains("*** tarn fatal")), "{s}");
        assert_eq!(count("solver_converged"), usize::from(log.contains("targets reached")));
        let restarts = lines.iter().filter(|l| l.starts_with("restarting from checkpoint")).count();
        assert_eq!(count("resumed"), restarts, "{s}");
        // Every restart opens a segment, whether or not the step numbers go back.
        assert_eq!(src.segments.len(), 1 + restarts, "{s}");
        assert_eq!(src.ended.is_some(), log.contains("tarn: finished after"), "{s}");
        for ev in &src.events {
            let l = lines[ev.line as usize - 1].trim();
            assert_eq!(l, ev.message, "{s}: event line number");
            let sev = if ev.rule == "crash" { Severity::Error } else { ev.severity };
            assert_eq!(ev.severity, sev);
        }
        let p = src.series_by_name("p").expect("p residual");
        assert_eq!(p.role, Role::Residual);
        let printed: Vec<&str> = lines
            .iter()
            .filter_map(|l| l.strip_prefix("  p        res "))
            .map(|r| r.split_whitespace().next().expect("value"))
            .collect();
        assert_eq!(p.len(), printed.len(), "{s}");
        for (v, t) in p.values().iter().zip(&printed) {
            match *t {
                "nan" | "-nan" => assert!(v.is_nan()),
                "inf" | "**********" => assert_eq!(*v, f64::INFINITY),
                _ => assert_eq!(*v, t.parse::<f64>().expect("number"), "{s}"),
            }
        }
    }
}

#[test]
fn store_series_names_and_roles_follow_the_parser() {
    let run = synth::generate(Scenario::Stall, 1);
    let store = synth::to_store(&run);
    let src = &store.sources[0];
    let names: Vec<(&str, Role)> = src.series().iter().map(|s| (s.name.as_str(), s.role)).collect();
    assert_eq!(names[0], ("cfl", Role::Info));
    assert_eq!(names[1], ("Ux", Role::Residual));
    assert_eq!(names[2], ("Ux/sweeps", Role::Indicator));
    assert_eq!(names[11], ("omega", Role::Residual));
    assert_eq!(names[13], ("continuity", Role::Indicator));
    assert_eq!(
        &names[14..],
        &[("drag", Role::Monitor), ("lift", Role::Monitor), ("dp", Role::Monitor)]
    );
    assert!(src.series().iter().all(|s| s.len() == run.steps.len()));
    assert_eq!(store.name, run.case);
    assert_eq!(src.label, "tarn.log");
    let input = store.judge_input();
    assert!(input.ended);
    assert_eq!(input.series.len(), 17);
}

#[test]
fn prefixes_match_a_store_of_the_prefix() {
    for s in [Scenario::DivergeNan, Scenario::Restart, Scenario::CrashNoNan] {
        let run = synth::generate(s, 6);
        let store = synth::to_store(&run);
        let full = store.judge_input();
        for k in [1, 100, run.steps.len() / 2, run.steps.len() - 1, run.steps.len()] {
            let cut = synth::prefix_input(&full, &run, k);
            let small = synth::to_store_prefix(&run, k);
            let direct = small.judge_input();
            assert_eq!(cut.series.len(), direct.series.len());
            for (a, b) in cut.series.iter().zip(&direct.series) {
                assert_eq!(a.name, b.name);
                assert_eq!(a.iterations, b.iterations, "{s} {k} {}", a.name);
                assert_eq!(a.values.len(), b.values.len());
                assert_eq!(a.segment_starts, b.segment_starts, "{s} {k}");
            }
            assert_eq!(cut.events.len(), direct.events.len(), "{s} {k}");
            assert_eq!(cut.ended, direct.ended);
            assert_eq!(cut.ended_at, direct.ended_at);
        }
    }
}

/// A solver resumed from the checkpoint it wrote last numbers on from there: read through
/// the shipped `tarn` definition, its restart notice opens the segment the direct store has,
/// at the same record.
#[test]
fn a_restart_from_the_last_checkpoint_is_a_segment_when_parsed() {
    let run = (0..60)
        .map(|seed| synth::generate(Scenario::Restart, seed))
        .find(|r| {
            r.steps.iter().zip(r.steps.iter().skip(1)).all(|(a, b)| b.iteration > a.iteration)
        })
        .expect("a restart from the last checkpoint among 60 seeds");
    let log = text(&run);
    let registry = settle::parser::Registry::builtin();
    let mut p = registry.get("tarn").expect("shipped definition").parser();
    let mut out = Vec::new();
    for l in log.lines() {
        p.feed(l.as_bytes(), &mut out);
    }
    p.finish(&mut out);
    let mut parsed = settle::run::SourceStore::new("tarn.log", "tarn");
    parsed.apply(out);
    let direct = synth::to_store(&run);
    let restart = run.steps.iter().position(|s| s.restart_from.is_some()).expect("restart");
    assert_eq!(parsed.segments.len(), 2);
    assert_eq!(parsed.segments[1].first_record, restart);
    assert_eq!(parsed.segments, direct.sources[0].segments);
}
