//! The live side of `settle watch`: stale decisions, throttled re-judging, hooks, pause,
//! deadlines, and the main loop driven through a `TestBackend` surface (exit codes for quit,
//! Ctrl-C, signals, worker panics, a lost terminal; one frame per resize storm).
//!
//! Runs are demo data of the invented solver "tarn" (invented numbers).

use std::io;
use std::sync::mpsc;
use std::time::{Duration, SystemTime};

use crossterm::event::{Event, KeyCode, KeyEvent, KeyModifiers};
use ratatui::Terminal;
use ratatui::backend::TestBackend;

use settle::judge::{Criteria, Finding, FindingKind, Judgement, Verdict};
use settle::record::{Output, Record, Role, SeriesInfo};
use settle::run::ingest::{IngestBatch, IngestItem};
use settle::run::{RunStore, SourceStore};
use settle::tui::live::{Surface, run_loop};
use settle::tui::theme::Theme;
use settle::tui::{App, LiveHooks, LiveRun, Msg, TuiOptions, render};

fn t0() -> SystemTime {
    SystemTime::UNIX_EPOCH + Duration::from_secs(1_700_000_000)
}

fn empty_run(name: &str) -> LiveRun {
    let mut store = RunStore::new(name);
    store.sources.push(SourceStore::new("tarn.log", "tarn"));
    LiveRun::new(store, Criteria::default())
}

/// A batch with `n` records starting at `first`, growing at `at`.
fn batch(run: usize, first: i64, n: i64, at: SystemTime) -> IngestBatch {
    let mut items = Vec::new();
    if first == 1 {
        items.push(IngestItem::Output(Output::Series(SeriesInfo {
            id: 0,
            name: "p".into(),
            role: Role::Residual,
        })));
    }
    for it in first..first + n {
        items.push(IngestItem::Output(Output::Record(Record {
            iteration: Some(it),
            values: vec![(0, 10f64.powf(-(it as f64) / 100.0))],
            ..Default::default()
        })));
    }
    items.push(IngestItem::Grew(at));
    IngestBatch { run, source: 0, items }
}

fn fixed_judge(verdict: Verdict) -> settle::tui::app::JudgeFn {
    Box::new(move |_s: &RunStore, _c: &Criteria| Judgement { verdict, ..Default::default() })
}

fn opts() -> TuiOptions {
    TuiOptions { stale_limit: Duration::from_secs(300), ..Default::default() }
}

/// Counts calls and returns one audit finding per call.
#[derive(Default)]
struct CountingHooks {
    calls: Vec<(usize, Verdict)>,
}

impl LiveHooks for CountingHooks {
    fn on_judged(&mut self, run: usize, run_data: &LiveRun) -> Vec<Finding> {
        self.calls.push((run, run_data.verdict()));
        vec![Finding {
            kind: FindingKind::Action,
            detail: format!("action for {}", run_data.verdict()),
            ..Default::default()
        }]
    }
}

#[test]
fn a_run_turns_stale_after_the_limit_without_an_end_mark() {
    let mut app = App::new(vec![empty_run("wing")], opts(), Theme::new(true, false, true))
        .with_judge(fixed_judge(Verdict::Converging));
    let mut hooks = CountingHooks::default();
    app.apply_batch(batch(0, 1, 10, t0()));
    app.tick(t0(), &mut hooks);
    assert_eq!(app.shown_verdict(0), Some(Verdict::Converging));
    assert_eq!(hooks.calls, vec![(0, Verdict::Converging)]);
    // The deadline is the stale transition, just after growth + limit.
    let due = app.next_deadline().expect("stale deadline");
    assert!(due > t0() + Duration::from_secs(300) && due < t0() + Duration::from_secs(301));
    app.tick(t0() + Duration::from_secs(299), &mut hooks);
    assert_eq!(app.shown_verdict(0), Some(Verdict::Converging));
    app.tick(t0() + Duration::from_secs(301), &mut hooks);
    assert_eq!(app.shown_verdict(0), Some(Verdict::Stale));
    assert!(app.run(0).unwrap().stale);
    assert_eq!(hooks.calls.last(), Some(&(0, Verdict::Stale)), "hooks see the stale change");
    assert_eq!(app.run(0).unwrap().extra_findings.len(), 2);
    assert!(app.run_view(0).unwrap().items.iter().any(|i| i.text == "action for stale"));
    assert!(app.run_view(0).unwrap().why.join("; ").contains("has not grown for over 5m"));
    // Growth again: not stale any more.
    app.apply_batch(batch(0, 11, 1, t0() + Duration::from_secs(400)));
    app.tick(t0() + Duration::from_secs(402), &mut hooks);
    assert_eq!(app.shown_verdict(0), Some(Verdict::Converging));
}

#[test]
fn an_end_mark_or_divergence_keeps_a_run_from_stale() {
    let mut ended = empty_run("done");
    let mut items =
        vec![IngestItem::Output(Output::EndOfRun { line: 9, message: "tarn: finished".into() })];
    items.push(IngestItem::Grew(t0()));
    let mut app =
        App::new(vec![ended.clone(), empty_run("blowup")], opts(), Theme::new(true, false, true));
    app = app.with_judge(Box::new(|s: &RunStore, _c: &Criteria| Judgement {
        verdict: if s.name == "blowup" { Verdict::Diverging } else { Verdict::Converged },
        ..Default::default()
    }));
    let mut hooks = CountingHooks::default();
    app.apply_batch(batch(0, 1, 5, t0()));
    app.apply_batch(IngestBatch { run: 0, source: 0, items });
    app.apply_batch(batch(1, 1, 5, t0()));
    app.tick(t0() + Duration::from_secs(3_600), &mut hooks);
    assert_eq!(app.shown_verdict(0), Some(Verdict::Converged));
    assert!(!app.run(0).unwrap().stale);
    // Stale is decided, but diverging wins.
    assert!(app.run(1).unwrap().stale);
    assert_eq!(app.shown_verdict(1), Some(Verdict::Diverging));
    assert_eq!(app.overview_order(), &[1, 0]);
    ended.stale = true;
    ended.judgement.verdict = Verdict::Stalled;
    assert_eq!(ended.verdict(), Verdict::Stale);
}

#[test]
fn judging_is_throttled_to_the_refresh_interval() {
    let counter = std::rc::Rc::new(std::cell::Cell::new(0));
    let c = counter.clone();
    let mut app = App::new(vec![empty_run("r")], opts(), Theme::new(true, false, true)).with_judge(
        Box::new(move |_s: &RunStore, _c: &Criteria| {
            c.set(c.get() + 1);
            Judgement::default()
        }),
    );
    let mut hooks = CountingHooks::default();
    assert_eq!(app.next_deadline(), None, "nothing to do: block until a message");
    app.apply_batch(batch(0, 1, 3, t0()));
    app.tick(t0(), &mut hooks);
    assert_eq!(counter.get(), 1);
    for k in 1..=5 {
        app.apply_batch(batch(0, 3 + k, 1, t0() + Duration::from_millis(100 * k as u64)));
        app.tick(t0() + Duration::from_millis(100 * k as u64), &mut hooks);
    }
    assert_eq!(counter.get(), 1, "no re-judge within the refresh interval");
    assert_eq!(app.next_deadline(), Some(t0() + Duration::from_secs(1)));
    app.tick(t0() + Duration::from_secs(1), &mut hooks);
    assert_eq!(counter.get(), 2);
    app.tick(t0() + Duration::from_secs(3), &mut hooks);
    assert_eq!(counter.get(), 2, "no new data, no judge");
    assert_eq!(app.run(0).unwrap().store.last_iteration(), Some(8));
}

#[test]
fn pause_freezes_the_view_but_keeps_ingesting() {
    let mut app = App::new(vec![empty_run("r")], opts(), Theme::new(true, false, true))
        .with_judge(fixed_judge(Verdict::Converging));
    let mut hooks = CountingHooks::default();
    app.resize(100, 30);
    app.apply_batch(batch(0, 1, 100, t0()));
    app.tick(t0(), &mut hooks);
    assert_eq!(app.run_view(0).unwrap().iteration, Some(100));
    app.handle_key(&KeyEvent::from(KeyCode::Char('p')));
    app.apply_batch(batch(0, 101, 50, t0() + Duration::from_secs(2)));
    app.tick(t0() + Duration::from_secs(2), &mut hooks);
    assert_eq!(app.run(0).unwrap().store.last_iteration(), Some(150), "data kept");
    assert_eq!(app.run_view(0).unwrap().iteration, Some(100), "view frozen");
    assert_eq!(hooks.calls.len(), 2, "judge and hooks keep running");
    // Changing the window while paused still shows only the frozen records.
    app.handle_key(&KeyEvent::from(KeyCode::Char('w')));
    let x_max = app.detail().residual.as_ref().unwrap().x[1];
    assert_eq!(x_max, 100.0);
    let mut term = Terminal::new(TestBackend::new(100, 30)).unwrap();
    term.draw(|f| render(&app, f)).unwrap();
    let top: String =
        (0..100).map(|x| term.backend().buffer()[(x, 0)].symbol().to_string()).collect();
    assert!(top.contains("PAUSED +50 rec"), "{top}");
    app.handle_key(&KeyEvent::from(KeyCode::Char('p')));
    assert_eq!(app.run_view(0).unwrap().iteration, Some(150));
    assert_eq!(app.detail().residual.as_ref().unwrap().x[1], 150.0);
}

#[test]
fn the_iteration_rate_comes_from_growth_times() {
    let mut app = App::new(vec![empty_run("r")], opts(), Theme::new(true, false, true))
        .with_judge(fixed_judge(Verdict::Converging));
    let mut hooks = CountingHooks::default();
    // A bulk read of 5 000 records first: not a rate.
    app.apply_batch(batch(0, 1, 5_000, t0()));
    app.tick(t0(), &mut hooks);
    assert_eq!(app.run_view(0).unwrap().rate_per_min, None);
    // Then 1 iteration every 2 s for 20 s: 30 it/min.
    for k in 1..=10 {
        app.apply_batch(batch(0, 5_000 + k, 1, t0() + Duration::from_secs(2 * k as u64)));
    }
    app.tick(t0() + Duration::from_secs(21), &mut hooks);
    let r = app.run_view(0).unwrap().rate_per_min.expect("rate");
    assert!((r - 30.0).abs() < 1e-9, "{r}");
}

/// A surface over ratatui's TestBackend that counts frames.
struct TestSurface {
    term: Terminal<TestBackend>,
    draws: usize,
    mouse: Vec<bool>,
}

impl TestSurface {
    fn new(w: u16, h: u16) -> Self {
        TestSurface {
            term: Terminal::new(TestBackend::new(w, h)).unwrap(),
            draws: 0,
            mouse: vec![],
        }
    }
}

impl Surface for TestSurface {
    fn draw(&mut self, app: &App) -> io::Result<()> {
        self.draws += 1;
        self.term.draw(|f| render(app, f)).map(|_| ()).map_err(|e| match e {})
    }
    fn size(&self) -> io::Result<(u16, u16)> {
        let a = self.term.backend().buffer().area;
        Ok((a.width, a.height))
    }
    fn set_mouse_capture(&mut self, on: bool) -> io::Result<()> {
        self.mouse.push(on);
        Ok(())
    }
    fn repaint(&mut self) -> io::Result<()> {
        self.term.clear().map_err(|e| match e {})
    }
    fn suspend(&mut self) -> io::Result<()> {
        Ok(())
    }
}

fn run_with(msgs: Vec<Msg>) -> (i32, Option<String>, TestSurface, App, CountingHooks) {
    let (tx, rx) = mpsc::channel();
    for m in msgs {
        tx.send(m).unwrap();
    }
    let mut app = App::new(vec![empty_run("wing")], opts(), Theme::new(true, false, true))
        .with_judge(fixed_judge(Verdict::Converging));
    let mut surface = TestSurface::new(80, 24);
    let mut hooks = CountingHooks::default();
    let end = run_loop(&mut surface, &mut app, &rx, &mut hooks).expect("loop");
    (end.code, end.message, surface, app, hooks)
}

fn key(c: char) -> Msg {
    Msg::Input(Event::Key(KeyEvent::from(KeyCode::Char(c))))
}

#[test]
fn the_loop_applies_data_and_quits_with_q() {
    let now = SystemTime::now();
    let (code, msg, surface, app, hooks) =
        run_with(vec![Msg::Ingest(batch(0, 1, 20, now)), key('m'), key('q')]);
    assert_eq!((code, msg), (0, None));
    assert_eq!(app.run(0).unwrap().store.last_iteration(), Some(20));
    assert!(surface.draws >= 1);
    assert_eq!(surface.mouse, vec![true], "mouse toggle reaches the terminal");
    assert!(hooks.calls.is_empty() || hooks.calls == vec![(0, Verdict::Converging)]);
}

#[test]
fn the_loop_exit_codes() {
    let ctrl_c = Msg::Input(Event::Key(KeyEvent::new(KeyCode::Char('c'), KeyModifiers::CONTROL)));
    assert_eq!(run_with(vec![ctrl_c]).0, 130);
    assert_eq!(run_with(vec![Msg::Signal(15)]).0, 143, "SIGTERM: 128 + 15");
    assert_eq!(run_with(vec![Msg::Signal(1)]).0, 129, "SIGHUP");
    assert_eq!(run_with(vec![Msg::InputClosed]).0, 129);
    let (code, msg, ..) = run_with(vec![Msg::WorkerPanic("ingest: boom".into())]);
    assert_eq!(code, 101);
    assert_eq!(msg.as_deref(), Some("ingest: boom"));
}

#[test]
fn a_resize_storm_costs_one_frame() {
    let mut msgs: Vec<Msg> =
        (0..200u16).map(|k| Msg::Input(Event::Resize(60 + k % 40, 20 + k % 10))).collect();
    msgs.push(key('q'));
    let (code, _, surface, ..) = run_with(msgs);
    assert_eq!(code, 0);
    // The first frame before any message, then at most one for the whole storm.
    assert!(surface.draws <= 2, "{} frames", surface.draws);
}

#[test]
fn a_lost_terminal_ends_the_loop_quietly() {
    struct Gone;
    impl Surface for Gone {
        fn draw(&mut self, _app: &App) -> io::Result<()> {
            Err(io::Error::from_raw_os_error(libc::EIO))
        }
        fn size(&self) -> io::Result<(u16, u16)> {
            Ok((80, 24))
        }
        fn set_mouse_capture(&mut self, _on: bool) -> io::Result<()> {
            Ok(())
        }
        fn repaint(&mut self) -> io::Result<()> {
            Ok(())
        }
        fn suspend(&mut self) -> io::Result<()> {
            Ok(())
        }
    }
    let (_tx, rx) = mpsc::channel::<Msg>();
    let mut app = App::new(vec![empty_run("r")], opts(), Theme::new(true, false, true));
    let end = run_loop(&mut Gone, &mut app, &rx, &mut CountingHooks::default()).expect("quiet");
    assert_eq!(end.code, 129);
}

/// Bytes the crossterm backend writes per update while one record arrives each second
/// (checklist item 27: "a few KiB/s at most; no full repaint per line").
#[test]
fn one_record_a_second_sends_little() {
    use ratatui::backend::CrosstermBackend;
    use ratatui::layout::Rect;
    use ratatui::{TerminalOptions, Viewport};

    let mut app = App::new(vec![empty_run("wing")], opts(), Theme::new(true, false, true))
        .with_judge(fixed_judge(Verdict::Converging));
    let mut hooks = CountingHooks::default();
    let (w, h) = (200u16, 50u16);
    app.resize(w, h);
    /// Counts the bytes written to the terminal.
    struct Counter(std::rc::Rc<std::cell::Cell<usize>>);
    impl io::Write for Counter {
        fn write(&mut self, b: &[u8]) -> io::Result<usize> {
            self.0.set(self.0.get() + b.len());
            Ok(b.len())
        }
        fn flush(&mut self) -> io::Result<()> {
            Ok(())
        }
    }
    let bytes = std::rc::Rc::new(std::cell::Cell::new(0usize));
    let backend = CrosstermBackend::new(Counter(bytes.clone()));
    let mut term = Terminal::with_options(
        backend,
        TerminalOptions { viewport: Viewport::Fixed(Rect::new(0, 0, w, h)) },
    )
    .expect("terminal");
    app.apply_batch(batch(0, 1, 2_000, t0()));
    app.tick(t0(), &mut hooks);
    term.draw(|f| render(&app, f)).expect("draw");
    app.drawn();
    let first = bytes.get();
    for k in 1..=60u64 {
        let now = t0() + Duration::from_secs(k);
        app.apply_batch(batch(0, 2_000 + k as i64, 1, now));
        app.tick(now, &mut hooks);
        if app.needs_draw() {
            term.draw(|f| render(&app, f)).expect("draw");
            app.drawn();
        }
    }
    let per_update = (bytes.get() - first) / 60;
    eprintln!("first frame {first} B, then {per_update} B per update");
    assert!(per_update < 3_000, "{per_update} B per update (first frame {first} B)");
}
