//! The judge's evidence on the run page, read off the rendered screen at 80×24 and 120×40:
//! the window a monitor was judged over and the reference of a monitor whose mean is near
//! zero (in the monitor chart's title), a round-off-only monitor named as not judged, the
//! ETA with its range, and runs without a verdict (no records, an unreadable file, records
//! with nothing to judge) shown loudly with their reason and never with a verdict. Judge
//! sentences are shown without their backticks.
//!
//! Data: the synthetic tarn scenario `near-zero-monitors` (our invented solver; its lift
//! settles at zero and its side force carries only round-off, see `tests/synth_scenarios.rs`)
//! and hand-built stores; invented numbers.

use std::path::PathBuf;
use std::sync::Arc;
use std::time::{Duration, SystemTime};

use crossterm::event::{KeyCode, KeyEvent};

use settle::judge::{Criteria, FindingKind, Reference, SeriesCriteria, Verdict};
use settle::record::Role;
use settle::run::ingest::SourceActivity;
use settle::run::{RunStore, SourceStore};
use settle::tui::theme::Theme;
use settle::tui::{App, LiveRun, TuiOptions, farewell};

#[path = "support/near_zero.rs"]
mod near_zero;
#[path = "support/screen.rs"]
mod support;
use support::{screen, squeeze};

const SIZES: [(u16, u16); 2] = [(80, 24), (120, 40)];

fn t0() -> SystemTime {
    SystemTime::UNIX_EPOCH + Duration::from_secs(1_700_000_000)
}

/// The near-zero scenario written as tarn writes it (log + force CSV), read and judged as
/// `watch` reads it, with `criteria` in effect.
fn near_zero_run(dir: &std::path::Path, criteria: Criteria) -> LiveRun {
    let (log, csv) = near_zero::write_case(dir);
    let registry = Arc::new(settle::parser::Registry::builtin());
    let paths: Vec<PathBuf> = vec![log, csv];
    let (mut spec, _) = settle::run::resolve::one_run(&paths, &[], &registry).expect("one run");
    spec.criteria = spec.criteria.merged(&criteria);
    let (store, _) = settle::run::pipeline::read_run(&spec, registry).expect("run reads");
    let sources = store.sources.len();
    let mut live = LiveRun::new(store, spec.criteria.clone());
    let j = settle::judge::judge(&live.store.judge_input(), &live.criteria);
    live.set_judgement(j);
    live.activity = vec![SourceActivity { last_growth: Some(t0()), progress: None }; sources];
    live
}

/// Tab through the series until the monitor chart shows `name`.
fn focus_monitor(app: &mut App, name: &str) {
    for _ in 0..20 {
        if app.detail().monitor.as_ref().is_some_and(|m| m.name.ends_with(name)) {
            return;
        }
        app.handle_key(&KeyEvent::from(KeyCode::Tab));
    }
    panic!("no monitor chart for {name}");
}

#[test]
fn the_monitor_title_names_the_window_and_the_near_zero_reference() {
    let dir = tempfile::tempdir().expect("tempdir");
    let live = near_zero_run(dir.path(), Criteria::default());
    let j = live.judgement.clone();
    let lift = j.monitors.iter().find(|m| m.series.ends_with("lift")).expect("lift judged");
    assert_eq!(lift.reference, Reference::NearZero, "{lift:?}");
    let side = j.monitors.iter().find(|m| m.series.ends_with("side")).expect("side summarised");
    assert!(side.round_off, "{side:?}");
    let reference = format!(
        "relative to {} (mean near zero)",
        settle::view::number::value(lift.reference_value)
    );
    let window = format!("window {} it", lift.window);

    let mut app = App::new(vec![live], TuiOptions::default(), Theme::new(false, false, true));
    app.set_now(t0() + Duration::from_secs(4));
    focus_monitor(&mut app, "lift");
    let lines = screen(&mut app, 200, 50);
    let all = lines.join("\n");
    assert!(all.contains(&window), "{window}\n{all}");
    assert!(all.contains(&reference), "{reference}\n{all}");
    for (w, h) in SIZES {
        let lines = screen(&mut app, w, h);
        let all = lines.join("\n");
        // The title drops what does not fit, the reference first; at 120 columns both are
        // there.
        if w >= 120 {
            assert!(all.contains(&window), "{w}x{h}: {window}\n{all}");
            assert!(all.contains(&reference), "{w}x{h}: {reference}\n{all}");
        }
        // Never a reference cut inside its number: whole, or left out.
        let title = lines.iter().find(|l| l.contains("lift [")).expect("lift title");
        assert!(!title.contains("relative to") || title.contains(&reference), "{title}");
        // The round-off monitor is named under the criteria (or, with no room, in the
        // findings), never with a verdict of its own.
        let named = all.contains("side not judged (round-off only)")
            || app
                .run_view(0)
                .expect("view")
                .items
                .iter()
                .any(|i| i.text.contains("side") && i.tag == FindingKind::RoundOff.as_str());
        assert!(named, "{w}x{h}\n{all}");
        assert!(!all.contains('`'), "{w}x{h}: a backtick on screen\n{all}");
    }
    // The side force's own chart says it is not judged and shows no drift.
    focus_monitor(&mut app, "side");
    let lines = screen(&mut app, 120, 40);
    let all = lines.join("\n");
    assert!(all.contains("not judged (round-off only)"), "{all}");
    let title = lines.iter().find(|l| l.contains("side") && l.contains("last")).expect("title");
    assert!(!title.contains("drift"), "{title}");
}

#[test]
fn the_header_gives_the_eta_with_its_range() {
    let dir = tempfile::tempdir().expect("tempdir");
    let mut live = near_zero_run(dir.path(), Criteria::default());
    // A converging judgement of this run with the judge's estimate and range on its slowest
    // residual (the rendering, not the estimate, is under test here).
    live.judgement.verdict = Verdict::Converging;
    live.judgement.causes.clear();
    for c in &mut live.judgement.criteria {
        if c.unit == "dec" {
            c.met = false;
        }
    }
    let r = &mut live.judgement.residuals[0];
    r.eta_iterations = Some(912.0);
    r.eta_range = Some((604.0, 1_437.0));
    r.slope_dec_per_kit = -1.0;
    let mut app = App::new(vec![live], TuiOptions::default(), Theme::new(false, false, true));
    app.set_now(t0() + Duration::from_secs(4));
    for (w, h) in SIZES {
        let lines = screen(&mut app, w, h);
        assert!(lines[0].contains("ETA 912 it (600–1400)"), "{w}x{h}: {}", lines[0]);
    }
    let mut app = App::new(
        vec![app_run(&app)],
        TuiOptions::default(),
        Theme::new(false, true, true), // --ascii
    );
    let lines = screen(&mut app, 120, 40);
    assert!(lines[0].contains("ETA 912 it (600-1400)"), "{}", lines[0]);
}

/// The live run behind an app's first slot, as built (for a second app in another mode).
fn app_run(app: &App) -> LiveRun {
    app.runs().next().expect("a run").clone()
}

/// The header and the why of the screen, squeezed: what the reader sees first.
fn head_and_why(lines: &[String]) -> String {
    let rows: Vec<&str> = lines
        .iter()
        .take_while(|l| !l.starts_with('╭') && !l.starts_with('+'))
        .map(String::as_str)
        .collect();
    squeeze(&rows.join(" "))
}

#[test]
fn a_run_without_records_shows_its_state_and_reason_never_a_verdict() {
    let mut store = RunStore::new("wing-a4");
    let mut src = SourceStore::new("case/tarn.log", "-");
    src.note("waiting for case/tarn.log to appear");
    src.note("cannot read case/tarn.log: Permission denied (os error 13); retrying");
    store.sources.push(src);
    let live = LiveRun::new(store, Criteria::default());
    for (mode, theme) in
        [("colour", Theme::new(true, false, true)), ("ascii", Theme::new(false, true, true))]
    {
        let mut app = App::new(vec![live.clone()], TuiOptions::default(), theme);
        for (w, h) in SIZES {
            let lines = screen(&mut app, w, h);
            let all = lines.join("\n");
            let head = head_and_why(&lines);
            assert!(lines[0].contains(" UNREADABLE "), "{mode} {w}x{h}: {}", lines[0]);
            assert!(
                head.contains(
                    "why: cannot read case/tarn.log: Permission denied (os error 13); retrying"
                ),
                "{mode} {w}x{h}: {head}"
            );
            for v in Verdict::ALL {
                let word = v.as_str().to_uppercase();
                assert!(!all.contains(&word), "{mode} {w}x{h}: {word} shown\n{all}");
            }
        }
        assert_eq!(
            farewell(&app),
            "wing-a4: UNREADABLE \u{2014} cannot read case/tarn.log: Permission denied (os error 13); retrying"
                .replace('\u{2014}', if mode == "ascii" { "-" } else { "\u{2014}" })
        );
    }
    // Waiting: no file yet.
    let mut store = RunStore::new("wing-a5");
    let mut src = SourceStore::new("case/tarn.log", "-");
    src.note("waiting for case/tarn.log to appear");
    store.sources.push(src);
    let mut app = App::new(
        vec![LiveRun::new(store, Criteria::default())],
        TuiOptions::default(),
        Theme::new(false, false, true),
    );
    let lines = screen(&mut app, 80, 24);
    assert!(lines[0].contains(" WAITING "), "{}", lines[0]);
    assert!(head_and_why(&lines).contains("why: waiting for case/tarn.log to appear"));
}

#[test]
fn records_with_nothing_to_judge_show_the_judges_reason_without_backticks() {
    let dir = tempfile::tempdir().expect("tempdir");
    // Every series made `info`: records, but nothing the criteria judge.
    let mut criteria = Criteria::default();
    criteria
        .series
        .insert("*".into(), SeriesCriteria { role: Some(Role::Info), ..Default::default() });
    let live = near_zero_run(dir.path(), criteria);
    let why = live.nothing_to_judge().cloned().expect("nothing to judge");
    let reason = settle::view::evidence::no_verdict_reason(&why);
    assert!(reason.starts_with("nothing to judge: the ") && !reason.contains('`'), "{reason}");
    let mut app = App::new(vec![live], TuiOptions::default(), Theme::new(true, false, true));
    app.set_now(t0() + Duration::from_secs(4));
    for (w, h) in SIZES {
        let lines = screen(&mut app, w, h);
        let all = lines.join("\n");
        assert!(lines[0].contains(" NOTHING-TO-JUDGE "), "{w}x{h}: {}", lines[0]);
        assert!(head_and_why(&lines).contains(&squeeze(&reason)), "{w}x{h}\n{all}");
        assert!(!all.contains('`'), "{w}x{h}\n{all}");
        assert!(!all.contains("CONVERGING"), "{w}x{h}: the empty judgement's verdict\n{all}");
    }
}

#[test]
fn the_overview_counts_runs_without_a_verdict_by_their_state() {
    let dir = tempfile::tempdir().expect("tempdir");
    let judged = near_zero_run(dir.path(), Criteria::default());
    let verdict = judged.judgement.verdict;
    let mut store = RunStore::new("wing-a4");
    let mut src = SourceStore::new("case/tarn.log", "-");
    src.note("cannot read case/tarn.log: Permission denied (os error 13); retrying");
    store.sources.push(src);
    let unreadable = LiveRun::new(store, Criteria::default());
    let mut app =
        App::new(vec![judged, unreadable], TuiOptions::default(), Theme::new(false, false, true));
    app.set_now(t0() + Duration::from_secs(4));
    let lines = screen(&mut app, 100, 30);
    assert!(lines[0].contains(&format!("1 {verdict}")), "{}", lines[0]);
    assert!(lines[0].contains("1 unreadable"), "{}", lines[0]);
    let row = lines.iter().find(|l| l.contains("wing-a4")).expect("row");
    assert!(row.contains(" unreadable "), "{row}");
    // The run that needs the user is listed first.
    let first = lines.iter().position(|l| l.contains("wing-a4")).expect("row");
    let other = lines.iter().position(|l| l.contains("tarn") && !l.contains("wing")).unwrap_or(99);
    assert!(first < other, "{}", lines.join("\n"));
}

/// `watch --help` and `demo --help` name the `y` key and the line printed on exit.
#[test]
fn help_names_the_why_key_and_the_final_line() {
    for cmd in ["watch", "demo"] {
        let o = std::process::Command::new(env!("CARGO_BIN_EXE_settle"))
            .args([cmd, "--help"])
            .output()
            .expect("settle runs");
        let help = squeeze(&String::from_utf8_lossy(&o.stdout));
        assert!(o.status.success(), "{help}");
        assert!(help.contains("y shows the whole why in a box when it does not fit"), "{help}");
        assert!(help.contains("After q or Ctrl-C"), "{help}");
        assert!(help.contains("first reason"), "{help}");
    }
}
