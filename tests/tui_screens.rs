//! Screens of `settle watch` rendered into ratatui's `TestBackend`: content, ASCII mode,
//! monochrome, odd sizes, the overview of many runs, and key handling.
//!
//! The runs are demo data of the invented solver "tarn" (invented numbers).

use std::time::{Duration, SystemTime};

use crossterm::event::{KeyCode, KeyEvent, KeyModifiers};
use ratatui::Terminal;
use ratatui::backend::TestBackend;
use ratatui::buffer::Buffer;
use ratatui::style::Color;

use settle::judge::{
    Comparison, Criteria, CriterionResult, Finding, FindingKind, Judgement, MonitorSummary,
    ResidualSummary, Verdict,
};
use settle::record::{Event, Output, Record, Role, SeriesInfo, Severity};
use settle::run::ingest::SourceActivity;
use settle::run::{RunStore, SourceStore};
use settle::tui::theme::{ColorChoice, Theme, color_enabled};
use settle::tui::{App, KeyOutcome, LiveRun, Screen, TuiOptions, Window, render};

const RESIDUALS: [&str; 4] = ["p", "Ux", "Uy", "k"];

fn t0() -> SystemTime {
    SystemTime::UNIX_EPOCH + Duration::from_secs(1_700_000_000)
}

/// A tarn run with four residuals and two monitors over `n` iterations.
fn store(name: &str, n: i64) -> RunStore {
    let mut src = SourceStore::new("cases/wing-a4/tarn.log", "tarn");
    let mut out = Vec::new();
    for (id, r) in RESIDUALS.iter().enumerate() {
        out.push(Output::Series(SeriesInfo {
            id: id as u32,
            name: (*r).into(),
            role: Role::Residual,
        }));
    }
    out.push(Output::Series(SeriesInfo { id: 4, name: "Cd".into(), role: Role::Monitor }));
    out.push(Output::Series(SeriesInfo { id: 5, name: "Cl".into(), role: Role::Monitor }));
    for it in 1..=n {
        let x = it as f64;
        let mut values: Vec<(u32, f64)> = (0..4)
            .map(|k| {
                (
                    k as u32,
                    10f64.powf(-(x / 200.0) * (1.0 + k as f64 * 0.3))
                        * (1.0 + 0.1 * (x / 7.0).sin()),
                )
            })
            .collect();
        values.push((4, 0.0312 + 0.002 * (-x / 150.0).exp()));
        values.push((5, 0.41 + 0.01 * (x / 25.0).sin()));
        out.push(Output::Record(Record {
            iteration: Some(it),
            values,
            line: it as u64,
            time: None,
        }));
    }
    out.push(Output::Event(Event {
        severity: Severity::Warning,
        rule: "bounding".into(),
        message: "bounding k\tmin -1e-9\u{1b}[31m red\u{1b}[0m".into(),
        line: 40,
        iteration: Some(40),
    }));
    src.apply(out);
    let mut s = RunStore::new(name);
    s.sources.push(src);
    s
}

fn criterion(
    series: &str,
    name: &str,
    cmp: Comparison,
    threshold: f64,
    value: f64,
    unit: &str,
) -> CriterionResult {
    let met = match cmp {
        Comparison::AtLeast => value >= threshold,
        Comparison::AtMost => value <= threshold,
    };
    CriterionResult {
        name: name.into(),
        series: series.into(),
        comparison: cmp,
        threshold,
        value,
        unit: unit.into(),
        met,
        since: None,
        default: true,
        ..Default::default()
    }
}

fn judgement(verdict: Verdict, n: i64) -> Judgement {
    Judgement {
        verdict,
        since: Some(n / 2),
        causes: vec![0],
        findings: vec![
            Finding {
                kind: FindingKind::Stall,
                series: Some("p".into()),
                first: n / 2,
                last: n,
                statistic: "slope_dec_per_kit".into(),
                value: -0.02,
                threshold: Some(-0.1),
                supports: Some(Verdict::Stalled),
                detail: "p slope -0.02 dec/kit, 1.1 dec above target".into(),
                ..Default::default()
            },
            Finding {
                kind: FindingKind::Trend,
                series: Some("Ux".into()),
                first: 1,
                last: n,
                statistic: "slope_dec_per_kit".into(),
                value: -4.0,
                detail: "Ux falling at -4 dec/kit".into(),
                ..Default::default()
            },
        ],
        criteria: vec![
            criterion("p", "drop", Comparison::AtLeast, 3.0, 2.1, "dec"),
            criterion("Ux", "drop", Comparison::AtLeast, 3.0, 4.2, "dec"),
            criterion("Cd", "drift", Comparison::AtMost, 0.1, 0.04, "%"),
            criterion("Cd", "band", Comparison::AtMost, 0.5, 0.21, "%"),
            criterion("Cl", "ci", Comparison::AtMost, 0.2, 0.35, "%"),
        ],
        residuals: vec![ResidualSummary {
            series: "p".into(),
            last: 1e-3,
            peak: 1.0,
            drop_dec: 2.1,
            slope_dec_per_kit: -0.02,
            slope_ci: (-0.05, 0.01),
            eta_iterations: None,
            ..Default::default()
        }],
        monitors: vec![MonitorSummary {
            series: "Cd".into(),
            last: 0.0312,
            mean: 0.0312,
            drift_pct: 0.04,
            band_pct: 0.21,
            ..Default::default()
        }],
        iterations: n,
    }
}

fn live(name: &str, verdict: Verdict, n: i64) -> LiveRun {
    let mut l = LiveRun::new(store(name, n), Criteria::default());
    l.judgement = judgement(verdict, n);
    l.activity = vec![SourceActivity { last_growth: Some(t0()), progress: None }];
    l
}

fn app_with(runs: Vec<LiveRun>, theme: Theme) -> App {
    let mut app = App::new(runs, TuiOptions::default(), theme);
    app.set_now(t0() + Duration::from_secs(4));
    app
}

fn draw(app: &mut App, w: u16, h: u16) -> Buffer {
    app.resize(w, h);
    let mut term = Terminal::new(TestBackend::new(w, h)).expect("test backend");
    term.draw(|f| render(app, f)).expect("draw");
    term.backend().buffer().clone()
}

fn text(buf: &Buffer) -> String {
    let mut s = String::new();
    for y in 0..buf.area.height {
        for x in 0..buf.area.width {
            s.push_str(buf[(x, y)].symbol());
        }
        s.push('\n');
    }
    s
}

fn color_theme() -> Theme {
    Theme::new(true, false, true)
}

#[test]
fn single_run_screen_shows_verdict_criteria_and_legend() {
    for (w, h) in [(80u16, 24u16), (200, 60)] {
        let mut app = app_with(vec![live("wing-a4", Verdict::Stalled, 600)], color_theme());
        let screen = text(&draw(&mut app, w, h));
        assert!(screen.contains(" STALLED "), "{w}x{h}:\n{screen}");
        assert!(screen.contains("wing-a4"));
        assert!(screen.contains("it 600"));
        assert!(screen.contains("grew 4s ago"));
        assert!(screen.contains("why: p slope -0.02 dec/kit"));
        for rule in ["drop ≥ 3 dec", "drift ≤ 0.1 %", "band ≤ 0.5 %", "ci ≤ 0.2 %"] {
            assert!(screen.contains(rule), "{w}x{h}: missing {rule}\n{screen}");
        }
        assert_eq!(screen.matches('✓').count(), 3, "{screen}");
        assert_eq!(screen.matches('✗').count(), 2, "{screen}");
        let legend = screen.lines().find(|l| l.contains("━ p")).expect("legend line");
        for name in RESIDUALS {
            assert!(legend.contains(&format!("━ {name}")), "{w}x{h}: {name} not in {legend}");
        }
        assert!(screen.contains("Cd"), "monitor chart title");
        assert!(screen.contains("criteria 3/5 met"));
        assert!(screen.contains("bounding"));
        // Tab expanded, escape sequence removed.
        assert!(w < 200 || screen.contains("bounding k      min -1e-9 red"), "{screen}");
        assert!(!screen.contains('\u{1b}'));
        assert!(screen.chars().any(|c| ('\u{2800}'..='\u{28ff}').contains(&c)), "braille chart");
    }
}

#[test]
fn ascii_mode_is_pure_ascii() {
    for color in [true, false] {
        let theme = Theme::new(color, true, true);
        let mut app = app_with(vec![live("wing-a4", Verdict::Stalled, 600)], theme);
        let mut app2 = app_with(
            vec![live("aoa-02", Verdict::Converged, 300), live("aoa-16", Verdict::Diverging, 200)],
            theme,
        );
        for (w, h) in [(80u16, 24u16), (200, 60), (40, 12)] {
            for a in [&mut app, &mut app2] {
                let screen = text(&draw(a, w, h));
                assert!(screen.is_ascii(), "{w}x{h} color={color}:\n{screen}");
                assert!(!screen.chars().any(|c| ('\u{2500}'..='\u{257f}').contains(&c)));
                assert!(!screen.chars().any(|c| ('\u{2800}'..='\u{28ff}').contains(&c)));
            }
        }
        let screen = text(&draw(&mut app, 80, 24));
        assert!(screen.contains("[ok]") && screen.contains("[--]"), "{screen}");
        assert!(screen.contains("drop >= 3 dec"));
        assert!(screen.contains(" STALLED "));
        app.handle_key(&key('?'));
        let help = text(&draw(&mut app, 80, 24));
        assert!(help.is_ascii() && help.contains("acknowledge"), "{help}");
    }
}

#[test]
fn odd_sizes_do_not_panic() {
    let theme = color_theme();
    let mut one = app_with(vec![live("wing-a4", Verdict::Stalled, 300)], theme);
    let mut many = app_with(
        (0..5).map(|i| live(&format!("aoa-{i:02}"), Verdict::ALL[i % 7], 100)).collect(),
        theme,
    );
    let mut empty =
        app_with(vec![LiveRun::new(RunStore::new("empty"), Criteria::default())], theme);
    let sizes =
        [(0u16, 0u16), (1, 1), (10, 3), (19, 4), (20, 5), (21, 6), (500, 200), (69, 30), (70, 12)];
    for a in [&mut one, &mut many, &mut empty] {
        for (w, h) in sizes {
            let screen = text(&draw(a, w, h));
            if (w, h) == (10, 3) {
                assert!(screen.starts_with("too small"), "{screen}");
            }
        }
        a.handle_key(&key('?'));
        for w in (0..130).step_by(9) {
            for h in (0..45).step_by(4) {
                draw(a, w, h);
            }
        }
    }
    many.handle_key(&KeyEvent::from(KeyCode::Enter));
    for (w, h) in sizes {
        draw(&mut many, w, h);
    }
}

#[test]
fn overview_puts_diverging_first_and_handles_200_runs() {
    let verdicts = [Verdict::Converged, Verdict::Converging, Verdict::Diverging, Verdict::Stalled];
    let runs: Vec<LiveRun> =
        (0..200).map(|i| live(&format!("sweep-{i:03}"), verdicts[i % 4], 50)).collect();
    let mut app = app_with(runs, color_theme());
    assert_eq!(app.screen(), Screen::Overview);
    let order = app.overview_order().to_vec();
    assert_eq!(order.len(), 200);
    assert_eq!(app.shown_verdict(order[0]), Some(Verdict::Diverging));
    assert_eq!(app.shown_verdict(order[199]), Some(Verdict::Converged));
    let ranks: Vec<Verdict> = order.iter().map(|&i| app.shown_verdict(i).unwrap()).collect();
    let pos = |v| ranks.iter().position(|&x| x == v).unwrap();
    assert!(pos(Verdict::Diverging) < pos(Verdict::Stalled));
    assert!(pos(Verdict::Stalled) < pos(Verdict::Converging));
    assert!(pos(Verdict::Converging) < pos(Verdict::Converged));
    let screen = text(&draw(&mut app, 80, 24));
    let rows: Vec<&str> = screen.lines().collect();
    assert!(rows[0].contains("200 runs") && rows[0].contains("50 diverging"), "{screen}");
    assert!(rows[2].contains("sweep-002") && rows[2].contains("diverging"), "{screen}");
    // The least-met criterion by ratio: ci 0.2/0.35 = 0.57 < drop 2.1/3 = 0.7.
    assert!(rows[2].contains("Cl ci 0.35/0.2 %"), "{screen}");
    assert_eq!(screen.matches("sweep-").count(), 21, "only visible rows:\n{screen}");
    assert!(text(&draw(&mut app, 200, 60)).contains("sweep-"));
    // Moving to the end scrolls.
    app.handle_key(&KeyEvent::from(KeyCode::End));
    let screen = text(&draw(&mut app, 80, 24));
    let last = app.selected_run().unwrap();
    assert!(screen.contains(&format!("sweep-{last:03}")), "{screen}");
    assert_eq!(app.shown_verdict(last), Some(Verdict::Converged));
}

#[test]
fn two_runs_with_a_converged_one_below() {
    let mut app = app_with(
        vec![live("aoa-02", Verdict::Converged, 300), live("aoa-16", Verdict::Diverging, 200)],
        color_theme(),
    );
    assert_eq!(app.overview_order(), &[1, 0]);
    let screen = text(&draw(&mut app, 80, 24));
    let a = screen.find("aoa-16").unwrap();
    let b = screen.find("aoa-02").unwrap();
    assert!(a < b, "{screen}");
}

fn key(c: char) -> KeyEvent {
    KeyEvent::from(KeyCode::Char(c))
}

#[test]
fn keys_change_state() {
    let mut app = app_with(
        vec![live("a", Verdict::Stalled, 100), live("b", Verdict::Converged, 100)],
        color_theme(),
    );
    assert_eq!(app.selected_run(), Some(0));
    assert_eq!(app.handle_key(&KeyEvent::from(KeyCode::Down)), KeyOutcome::Redraw);
    assert_eq!(app.selected_run(), Some(1));
    assert_eq!(app.handle_key(&KeyEvent::from(KeyCode::Down)), KeyOutcome::Ignored);
    app.handle_key(&KeyEvent::from(KeyCode::Up));
    app.handle_key(&key('a'));
    assert!(app.acknowledged(0));
    app.handle_key(&KeyEvent::from(KeyCode::Enter));
    assert_eq!(app.screen(), Screen::Run(0));
    // Series focus: 4 residuals + 2 monitors, then back to none.
    for want in [Some(0), Some(1), Some(2), Some(3), Some(4), Some(5), None] {
        app.handle_key(&KeyEvent::from(KeyCode::Tab));
        assert_eq!(app.focus(), want);
    }
    app.handle_key(&KeyEvent::from(KeyCode::Left));
    assert_eq!(app.focus(), Some(5));
    assert_eq!(app.detail().monitor.as_ref().map(|m| m.name.as_str()), Some("Cl"));
    assert_eq!(app.window(), Window::All);
    app.handle_key(&key('w'));
    assert_eq!(app.window(), Window::Last(2000));
    app.handle_key(&key('w'));
    assert_eq!(app.window(), Window::Last(500));
    app.handle_key(&key('w'));
    assert_eq!(app.window(), Window::All);
    app.handle_key(&key('l'));
    assert!(app.monitor_log());
    assert!(app.detail().monitor.as_ref().unwrap().log);
    app.handle_key(&key('p'));
    assert!(app.paused());
    app.handle_key(&key('p'));
    assert!(!app.paused());
    app.handle_key(&key('a'));
    assert!(!app.acknowledged(0), "a again takes the acknowledgement back");
    app.handle_key(&key('m'));
    assert!(app.mouse_capture());
    app.handle_key(&key('?'));
    assert!(app.help_shown());
    app.handle_key(&key('w'));
    assert!(!app.help_shown());
    assert_eq!(app.window(), Window::All, "a key closing help does nothing else");
    app.handle_key(&KeyEvent::from(KeyCode::Down));
    assert_eq!(app.item_scroll(), 1);
    app.handle_key(&key('b'));
    assert_eq!(app.screen(), Screen::Overview);
    app.handle_key(&KeyEvent::from(KeyCode::Enter));
    app.handle_key(&KeyEvent::from(KeyCode::Esc));
    assert_eq!(app.screen(), Screen::Overview);
    app.handle_key(&KeyEvent::from(KeyCode::Enter));
    app.handle_key(&KeyEvent::from(KeyCode::Backspace));
    assert_eq!(app.screen(), Screen::Overview);
    assert_eq!(app.handle_key(&key('q')), KeyOutcome::Quit(0));
    let ctrl_c = KeyEvent::new(KeyCode::Char('c'), KeyModifiers::CONTROL);
    assert_eq!(app.handle_key(&ctrl_c), KeyOutcome::Quit(130));
}

#[test]
fn single_run_ignores_back_keys_and_acknowledges() {
    let mut app = app_with(vec![live("a", Verdict::Stalled, 100)], color_theme());
    assert_eq!(app.screen(), Screen::Run(0));
    assert_eq!(app.handle_key(&KeyEvent::from(KeyCode::Esc)), KeyOutcome::Ignored);
    assert_eq!(app.screen(), Screen::Run(0));
    app.handle_key(&key('a'));
    let screen = text(&draw(&mut app, 100, 30));
    assert!(screen.lines().next().unwrap().contains("✔ack"), "{screen}");
}

#[test]
fn monochrome_theme_draws_no_colour() {
    // NO_COLOR non-empty: no colour at all; empty: colour kept (no-color.org).
    let mono = color_enabled(ColorChoice::Auto, Some(std::ffi::OsStr::new("1")));
    let kept = color_enabled(ColorChoice::Auto, Some(std::ffi::OsStr::new("")));
    assert!(!mono && kept);
    for (color, expect_colour) in [(mono, false), (kept, true)] {
        let mut app = app_with(
            vec![live("wing-a4", Verdict::Diverging, 300)],
            Theme::new(color, false, true),
        );
        let buf = draw(&mut app, 100, 30);
        let coloured = buf
            .content()
            .iter()
            .any(|c| !matches!(c.fg, Color::Reset) || !matches!(c.bg, Color::Reset));
        assert_eq!(coloured, expect_colour);
        let screen = text(&buf);
        assert!(screen.contains(" DIVERGING "));
        if !color {
            // Series told apart by marker characters, not colour.
            let legend = screen.lines().find(|l| l.contains("* p")).expect("legend");
            assert!(legend.contains("+ Ux") && legend.contains("o Uy"), "{legend}");
        }
    }
}

#[test]
fn focus_cycles_residuals_then_monitors_and_shows_where_it_is() {
    let mut app = app_with(vec![live("wing-a4", Verdict::Stalled, 600)], color_theme());
    let tab = KeyEvent::from(KeyCode::Tab);
    app.handle_key(&tab);
    let screen = text(&draw(&mut app, 100, 30));
    assert!(screen.contains("residuals · log10 · all · focus p "), "{screen}");
    for _ in 0..3 {
        app.handle_key(&tab);
    }
    assert!(text(&draw(&mut app, 100, 30)).contains("focus k "));
    app.handle_key(&tab);
    let screen = text(&draw(&mut app, 100, 30));
    assert!(
        screen.contains("╭ Cd [1/2] · last"),
        "the first monitor after the residuals\n{screen}"
    );
    assert!(!screen.contains("· focus "), "no residual focused now");
    app.handle_key(&tab);
    assert!(text(&draw(&mut app, 100, 30)).contains("╭ Cl [2/2] · last"));
}

#[test]
fn the_mouse_key_shows_its_state() {
    let mut app = app_with(vec![live("wing-a4", Verdict::Stalled, 600)], color_theme());
    let bar = |app: &mut App| text(&draw(app, 100, 30)).lines().last().unwrap_or("").to_string();
    assert!(bar(&mut app).contains("m mouse off"), "{}", bar(&mut app));
    app.handle_key(&key('m'));
    assert!(app.mouse_capture());
    assert!(bar(&mut app).contains("m mouse on"), "{}", bar(&mut app));
    app.handle_key(&key('?'));
    assert!(text(&draw(&mut app, 100, 30)).contains("mouse capture: now on"));
}

#[test]
fn overview_names_by_their_distinguishing_part_and_counts_what_it_shows() {
    let mut runs: Vec<LiveRun> = [4, 6, 8, 10, 12]
        .iter()
        .map(|a| live(&format!("real/case3c_step_rebound_fine_a{a:02}"), Verdict::Stalled, 100))
        .collect();
    // A run that has not printed a record yet: `waiting`, in the rows and in the title.
    let waiting = RunStore::new("real/case3c_step_rebound_fine_a14");
    runs.push(LiveRun::new(waiting, Criteria::default()));
    let mut app = app_with(runs, color_theme());
    let screen = text(&draw(&mut app, 80, 24));
    let title = screen.lines().next().unwrap_or("");
    assert!(title.contains("6 runs · 5 stalled · 1 waiting"), "{title}");
    // The shared prefix, cut in its middle to fit the title line.
    assert!(title.contains("names: real/") && title.trim_end().ends_with("fine_…"), "{title}");
    let wide_title = text(&draw(&mut app, 120, 24));
    assert!(wide_title.contains("names: real/case3c_step_rebound_fine_…"), "{wide_title}");
    assert!(!title.contains("converging"), "the waiting run is not counted as converging");
    for a in ["a04", "a06", "a08", "a10", "a12", "a14"] {
        assert!(screen.contains(&format!("…{a} ")), "{a} missing\n{screen}");
    }
    let rows: Vec<&str> = screen.lines().skip(2).collect();
    assert_eq!(rows.iter().filter(|r| r.contains(" waiting ")).count(), 1, "{screen}");
    assert_eq!(rows.iter().filter(|r| r.contains(" stalled ")).count(), 5, "{screen}");
    // Wide enough for whole names: no prefix is taken away.
    let wide = text(&draw(&mut app, 200, 24));
    assert!(wide.contains("real/case3c_step_rebound_fine_a04 ") && !wide.contains("names:"));
    // The worst criterion keeps its numbers whole at every width.
    for w in [60u16, 80, 100, 200] {
        let screen = text(&draw(&mut app, w, 24));
        assert!(screen.contains("0.35/0.2 %"), "{w} columns:\n{screen}");
    }
}

#[test]
fn quitting_leaves_one_line_with_the_verdict() {
    let app = app_with(vec![live("wing-a4", Verdict::Stalled, 600)], color_theme());
    assert_eq!(
        settle::tui::farewell(&app),
        "wing-a4: STALLED at it 600 — p slope -0.02 dec/kit, 1.1 dec above target"
    );
    let app = app_with(
        vec![
            live("a", Verdict::Converged, 100),
            live("b", Verdict::Diverging, 100),
            live("c", Verdict::Converged, 100),
        ],
        Theme::new(false, true, true),
    );
    assert_eq!(settle::tui::farewell(&app), "3 runs: 1 diverging, 2 converged");
}
