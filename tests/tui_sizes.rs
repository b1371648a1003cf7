//! The run page at the supported sizes (80×24, 100×30, 200×50) in colour, monochrome
//! (`NO_COLOR`) and `--ascii`, on the samples of this repository read and judged as `watch`
//! reads them (synthetic tarn runs; invented numbers): the why is on screen whole, the header
//! keeps its ETA, no criterion threshold is cut and hidden criteria are counted.
//!
//! Set `SETTLE_SCREEN_DUMP=DIR` to also write every screen checked to `DIR` as text.

use std::path::Path;
use std::sync::Arc;
use std::time::{Duration, SystemTime};

use crossterm::event::{KeyCode, KeyEvent};

use settle::judge::{Comparison, Judgement};
use settle::run::ingest::SourceActivity;
use settle::tui::sanitize::sanitized;
use settle::tui::theme::{Glyphs, Theme};
use settle::tui::{App, LiveRun, TuiOptions};
use settle::view::number;
use settle::view::words::without_backticks;

#[path = "support/screen.rs"]
mod support;
use support::{screen, squeeze};

const SIZES: [(u16, u16); 3] = [(80, 24), (100, 30), (200, 50)];

fn t0() -> SystemTime {
    SystemTime::UNIX_EPOCH + Duration::from_secs(1_700_000_000)
}

/// A sample case read to its end and judged, as the live panels hold it.
fn sample(dir: &str) -> LiveRun {
    let cfg = Path::new("samples").join(dir).join("settle.toml");
    let spec = settle::run::config::load(&cfg).expect("sample config");
    let registry = Arc::new(settle::parser::Registry::builtin());
    let (store, _) = settle::run::pipeline::read_run(&spec, registry).expect("sample reads");
    let judgement = settle::judge::judge(&store.judge_input(), &spec.criteria);
    let sources = store.sources.len();
    let mut l = LiveRun::new(store, spec.criteria.clone());
    l.judgement = judgement;
    l.activity = vec![SourceActivity { last_growth: Some(t0()), progress: None }; sources];
    l
}

/// The three display modes: colour, `NO_COLOR` (monochrome) and `--ascii`.
fn modes() -> [(&'static str, Theme); 3] {
    [
        ("colour", Theme::new(true, false, true)),
        ("no-color", Theme::new(false, false, true)),
        ("ascii", Theme::new(false, true, true)),
    ]
}

fn dump(name: &str, lines: &[String]) {
    if let Some(dir) = std::env::var_os("SETTLE_SCREEN_DUMP") {
        let _ = std::fs::write(Path::new(&dir).join(format!("{name}.txt")), lines.join("\n"));
    }
}

/// The text of the why rows: from the second screen row to the first panel border.
fn why_text(lines: &[String]) -> String {
    let rows: Vec<&str> = lines[1..]
        .iter()
        .take_while(|l| !l.starts_with('╭') && !l.starts_with('+') && !l.starts_with(" reading"))
        .map(String::as_str)
        .collect();
    squeeze(&rows.join(" "))
}

/// Rows of the criteria panel: from the pass/fail mark to the panel's right border.
fn criteria_rows(lines: &[String], g: &Glyphs) -> Vec<String> {
    let border = if g.ascii { '|' } else { '│' };
    lines
        .iter()
        .filter_map(|l| {
            let at = [g.ok, g.fail].iter().filter_map(|m| l.find(&format!(" {m} "))).min()?;
            let rest = &l[at..];
            let end = rest.find(border).unwrap_or(rest.len());
            Some(rest[..end].trim_end().to_string())
        })
        .collect()
}

/// The rule of a criterion as the checklist must show it: name, comparison, the threshold
/// exactly as set, unit.
fn rule(c: &settle::judge::CriterionResult, g: &Glyphs) -> String {
    let cmp = match c.comparison {
        Comparison::AtLeast => g.ge,
        Comparison::AtMost => g.le,
    };
    let unit = if c.unit.is_empty() { String::new() } else { format!(" {}", c.unit) };
    format!("{} {cmp} {}{unit}", c.name, number::exact(c.threshold))
}

/// The header's word on the target, which must survive every width.
fn eta_word(j: &Judgement) -> &'static str {
    match j.verdict {
        settle::judge::Verdict::Converged => "target met",
        _ => "target not in reach",
    }
}

/// `min_parts`: the least number of causes the sample's verdict has, so that the why is as long
/// as the case is meant to make it (the judge decides the exact number).
fn check_page(case: &str, min_parts: usize) {
    for (mode, theme) in modes() {
        for (w, h) in SIZES {
            let run = sample(case);
            let judgement = run.judgement.clone();
            let mut app = App::new(vec![run], TuiOptions::default(), theme);
            app.set_now(t0() + Duration::from_secs(4));
            let lines = screen(&mut app, w, h);
            let name = format!("{case}-{w}x{h}-{mode}");
            dump(&name, &lines);
            let all = lines.join("\n");
            let g = &theme.glyphs;
            if g.ascii {
                assert!(all.is_ascii(), "{name}: not ASCII\n{all}");
            }

            // The why, whole: every cause of the verdict, sanitised as the panels do.
            let why = why_text(&lines);
            let parts = &app.run_view(0).expect("view").why;
            assert!(parts.len() >= min_parts, "{name}: {parts:?}");
            for &i in &judgement.causes {
                let f = &judgement.findings[i];
                let detail = sanitized(&without_backticks(&f.detail), g.ascii);
                assert!(why.contains(&squeeze(&detail)), "{name}: why lacks {detail:?}\n{all}");
            }
            for p in parts {
                assert!(why.contains(&squeeze(p)), "{name}: why lacks {p:?}\n{all}");
            }
            assert!(!all.contains("press y"), "{name}: the why did not fit\n{all}");

            // The header keeps the verdict and the word on the target.
            let verdict = judgement.verdict.as_str().to_uppercase();
            assert!(lines[0].contains(&format!(" {verdict} ")), "{name}: {}", lines[0]);
            assert!(lines[0].contains(eta_word(&judgement)), "{name}: {}", lines[0]);

            // Criteria: each shown row holds one whole threshold; the others are counted.
            let rows = criteria_rows(&lines, g);
            let rules: Vec<String> = judgement.criteria.iter().map(|c| rule(c, g)).collect();
            for row in &rows {
                assert!(
                    rules
                        .iter()
                        .any(|r| row.contains(&format!("{r} ")) || row.ends_with(r.as_str())),
                    "{name}: threshold cut in {row:?}\n{all}"
                );
            }
            let total = judgement.criteria.len();
            assert!(!rows.is_empty(), "{name}: no criteria shown\n{all}");
            if rows.len() < total {
                let more = format!("+{} more", total - rows.len());
                assert!(all.contains(&more), "{name}: hidden criteria not counted ({more})\n{all}");
            }
            // Failing criteria come first.
            let fail_mark = format!(" {} ", g.fail);
            let first_met = rows.iter().position(|r| !r.starts_with(&fail_mark));
            if let Some(k) = first_met {
                assert!(rows[k..].iter().all(|r| !r.starts_with(&fail_mark)), "{name}: {rows:?}");
            }
        }
    }
}

#[test]
fn a_diverging_run_with_many_causes_keeps_its_why_whole() {
    // mixer-22: residuals shoot up, continuity and drag blow up, the log ends in a crash.
    check_page("mixer-22", 4);
}

#[test]
fn a_converged_run_reads_at_every_size() {
    check_page("duct-bend-07", 1);
}

#[test]
fn where_the_why_cannot_fit_it_says_so_and_y_shows_it_whole() {
    let run = sample("mixer-22");
    let mut app = App::new(vec![run], TuiOptions::default(), Theme::new(true, false, true));
    let lines = screen(&mut app, 70, 16);
    let all = lines.join("\n");
    assert!(all.contains("press y for the whole why"), "{all}");
    assert!(all.contains("y whole why"), "the key bar offers it:\n{all}");
    app.handle_key(&KeyEvent::from(KeyCode::Char('y')));
    assert!(app.why_shown());
    let lines = screen(&mut app, 70, 60);
    // The text inside the overlay's borders (its columns, taken from its top edge).
    let cells: Vec<Vec<char>> = lines.iter().map(|l| l.chars().collect()).collect();
    let top =
        cells.iter().position(|l| l.iter().collect::<String>().contains("╭ why")).expect("overlay");
    let left = cells[top].iter().position(|&c| c == '╭').expect("corner");
    let right = left + cells[top][left..].iter().position(|&c| c == '╮').expect("corner");
    let inside: Vec<String> =
        cells[top + 1..].iter().map(|l| l[left + 1..right].iter().collect()).collect();
    let text = squeeze(&inside.join(" "));
    for p in &app.run_view(0).expect("view").why {
        assert!(text.contains(&squeeze(p)), "overlay lacks {p:?}\n{}", lines.join("\n"));
    }
    app.handle_key(&KeyEvent::from(KeyCode::Char('x')));
    assert!(!app.why_shown(), "any key closes it");
}

#[test]
fn the_monitor_panel_shows_history_and_window_with_their_marks() {
    let run = sample("duct-bend-07");
    // The window the judge used for drag (it fits the run: the part after the transient).
    let judged = run.judgement.monitors.iter().find(|m| m.series == "drag").expect("drag");
    let window = (judged.window_first, judged.window_last);
    let mut app = App::new(vec![run], TuiOptions::default(), Theme::new(true, false, true));
    let lines = screen(&mut app, 100, 30);
    let all = lines.join("\n");
    let d = app.detail();
    let m = d.monitor.as_ref().expect("a monitor chart");
    assert_eq!(m.name, "drag");
    // The whole history is drawn, scaled to the settled part: the start-up is clipped.
    assert_eq!(m.x[0], 1.0);
    assert!(m.clipped_until.is_some() && m.y[1] < 0.27, "{:?}", m.y);
    let z = m.zoom.as_ref().expect("window strip");
    assert_eq!(z.iterations, window);
    let grouped = |n: i64| settle::view::number::grouped(n, ' ');
    let label = format!("window {}–{}", grouped(window.0), grouped(window.1));
    assert!(all.contains(&label), "{label}: {all}");
    assert!(all.contains("─ mean") && all.contains("┄ band ±0.25 %"), "{all}");
    // No negative axis for a positive series.
    assert!(m.y[0] > 0.0 && z.y[0] > 0.0);
}
