//! State of the live panels and everything that changes it.
//!
//! [`App`] owns the runs, the per-run snapshots the renderer reads, and the view state
//! (page, selection, focus, window, pause, help). Keys and mouse events become changes here
//! ([`App::handle_event`], [`App::handle_key`]); data arrives through [`App::apply_batch`];
//! [`App::tick`] re-judges runs that received data (throttled to the refresh interval),
//! decides `stale`, calls the hooks and rebuilds snapshots. Time is always passed in, never
//! read here, so every behaviour is testable without a clock or a terminal.

mod keys;
mod rate;

use std::time::{Duration, SystemTime};

use crate::judge::{Criteria, Finding, Judgement, Verdict};
use crate::run::RunStore;
use crate::run::ingest::{self, IngestBatch, IngestItem, SourceActivity};

use super::format;
use super::geometry;
use super::theme::Theme;
pub use super::view::Window;
use super::view::{self, ChartSpec, DetailData, RunView, ViewInputs};
use super::{LiveHooks, LiveRun, TuiOptions};
use rate::RateMeter;
pub use rate::judge_gap;

/// How many extra findings (action audit entries) a run keeps.
const MAX_EXTRA_FINDINGS: usize = 200;

/// The judge as the app calls it; replaceable for tests.
pub type JudgeFn = Box<dyn FnMut(&RunStore, &Criteria) -> Judgement>;

/// Which page is shown.
#[derive(Debug, Clone, Copy, PartialEq, Eq)]
pub enum Screen {
    /// The table of all runs (only with more than one run).
    Overview,
    /// One run, by index into the runs given to [`App::new`].
    Run(usize),
}

/// What the live loop should do after an input event.
#[derive(Debug, Clone, Copy, PartialEq, Eq)]
pub enum KeyOutcome {
    /// Nothing visible changed.
    Ignored,
    /// State changed; redraw.
    Redraw,
    /// Clear the terminal and redraw everything (Ctrl-L).
    Repaint,
    /// Suspend to the shell (Ctrl-Z).
    Suspend,
    /// Quit with this exit code.
    Quit(i32),
}

/// One run with its app-side state.
pub(crate) struct Slot {
    pub live: LiveRun,
    pub view: RunView,
    /// The verdict the user acknowledged with `a`.
    pub ack: Option<Verdict>,
    /// New data since the last judgement.
    dirty: bool,
    /// When this run was last judged and how long that took (see [`judge_gap`]).
    last_judged: Option<SystemTime>,
    judge_cost: std::time::Duration,
    rate: RateMeter,
    /// Records per source when the view was paused.
    frozen: Option<Vec<usize>>,
    /// Records received while paused.
    pub pending: usize,
}

impl Slot {
    /// Acknowledged, and the verdict has not changed since.
    pub fn acknowledged(&self) -> bool {
        self.ack == Some(self.view.verdict)
    }
}

/// The state of the live panels.
pub struct App {
    pub(crate) slots: Vec<Slot>,
    /// Run indices in overview order (attention first).
    pub(crate) order: Vec<usize>,
    pub(crate) screen: Screen,
    /// Selected position in `order`.
    pub(crate) selected: usize,
    /// First visible position in `order`.
    pub(crate) offset: usize,
    /// Focused series of the open run (index into its `RunView::series`).
    pub(crate) focus: Option<usize>,
    pub(crate) window: Window,
    pub(crate) monitor_log: bool,
    /// First shown entry of the findings list.
    pub(crate) item_scroll: usize,
    pub(crate) detail: DetailData,
    pub(crate) help: bool,
    /// The whole why is shown over the run page (`y`).
    pub(crate) why_open: bool,
    pub(crate) paused: bool,
    pub(crate) mouse: bool,
    pub(crate) size: (u16, u16),
    pub(crate) now: SystemTime,
    pub(crate) theme: Theme,
    pub(crate) opts: TuiOptions,
    needs_draw: bool,
    last_refresh: Option<SystemTime>,
    /// When an age label on screen next changes.
    age_due: Option<SystemTime>,
    judge: JudgeFn,
}

fn default_judge() -> JudgeFn {
    Box::new(|store: &RunStore, criteria: &Criteria| {
        crate::judge::judge(&store.judge_input(), criteria)
    })
}

/// Attention order of the overview: the runs that need a decision first.
pub fn attention_rank(v: Verdict) -> u8 {
    match v {
        Verdict::Diverging => 0,
        Verdict::Stale => 1,
        Verdict::Oscillating => 2,
        Verdict::Stalled => 3,
        Verdict::Suspect => 4,
        Verdict::Converging => 5,
        Verdict::Converged => 6,
    }
}

/// First visible row of a list of `rows` visible rows so that `selected` is shown, moving as
/// little as possible from `offset`.
pub fn scroll_start(selected: usize, offset: usize, rows: usize) -> usize {
    let rows = rows.max(1);
    if selected < offset {
        selected
    } else if selected >= offset + rows {
        selected + 1 - rows
    } else {
        offset
    }
}

impl App {
    /// An app over `runs`. One run opens straight into its page; several start on the
    /// overview. Runs that already hold data are judged at the first [`App::tick`].
    pub fn new(runs: Vec<LiveRun>, opts: TuiOptions, theme: Theme) -> Self {
        let now = SystemTime::now();
        let many = runs.len() > 1;
        let mut app = App {
            slots: Vec::new(),
            order: Vec::new(),
            screen: if many { Screen::Overview } else { Screen::Run(0) },
            selected: 0,
            offset: 0,
            focus: None,
            window: Window::All,
            monitor_log: false,
            item_scroll: 0,
            detail: DetailData::default(),
            help: false,
            why_open: false,
            paused: false,
            mouse: opts.mouse,
            size: (80, 24),
            now,
            theme,
            opts,
            needs_draw: true,
            last_refresh: None,
            age_due: None,
            judge: default_judge(),
        };
        for mut live in runs {
            live.activity.resize(live.store.sources.len(), SourceActivity::default());
            let dirty = live.store.sources.iter().any(|s| s.records() > 0);
            let view = app.build_view(&live, &RateMeter::default());
            app.slots.push(Slot {
                live,
                view,
                ack: None,
                dirty,
                last_judged: None,
                judge_cost: std::time::Duration::ZERO,
                rate: RateMeter::default(),
                frozen: None,
                pending: 0,
            });
        }
        app.resort();
        app.rebuild_detail();
        app
    }

    /// Use `judge` instead of [`crate::judge::judge`] (tests, replays).
    pub fn with_judge(mut self, judge: JudgeFn) -> Self {
        self.judge = judge;
        self
    }

    /// Set the terminal size (before the first draw, and on resize).
    pub fn resize(&mut self, width: u16, height: u16) {
        if self.size != (width, height) {
            self.size = (width, height);
            self.rebuild_detail();
        }
        self.needs_draw = true;
    }

    /// Set the clock used for ages and stale decisions (also done by [`App::tick`]).
    pub fn set_now(&mut self, now: SystemTime) {
        self.now = now;
    }

    // ----- accessors (for the loop and for tests) ---------------------------------------

    pub fn screen(&self) -> Screen {
        self.screen
    }

    pub fn runs(&self) -> impl Iterator<Item = &LiveRun> {
        self.slots.iter().map(|s| &s.live)
    }

    pub fn run(&self, i: usize) -> Option<&LiveRun> {
        self.slots.get(i).map(|s| &s.live)
    }

    /// The snapshot shown for run `i`.
    pub fn run_view(&self, i: usize) -> Option<&RunView> {
        self.slots.get(i).map(|s| &s.view)
    }

    /// The verdict shown for run `i` (stale applied; frozen while paused).
    pub fn shown_verdict(&self, i: usize) -> Option<Verdict> {
        self.slots.get(i).map(|s| s.view.verdict)
    }

    pub fn acknowledged(&self, i: usize) -> bool {
        self.slots.get(i).is_some_and(Slot::acknowledged)
    }

    /// Run indices in overview order.
    pub fn overview_order(&self) -> &[usize] {
        &self.order
    }

    /// The run selected in the overview.
    pub fn selected_run(&self) -> Option<usize> {
        self.order.get(self.selected).copied()
    }

    pub fn focus(&self) -> Option<usize> {
        self.focus
    }

    pub fn window(&self) -> Window {
        self.window
    }

    pub fn monitor_log(&self) -> bool {
        self.monitor_log
    }

    pub fn paused(&self) -> bool {
        self.paused
    }

    pub fn help_shown(&self) -> bool {
        self.help
    }

    /// The whole why is shown over the run page.
    pub fn why_shown(&self) -> bool {
        self.why_open
    }

    /// Mouse capture wanted (the loop applies it to the terminal).
    pub fn mouse_capture(&self) -> bool {
        self.mouse
    }

    pub fn item_scroll(&self) -> usize {
        self.item_scroll
    }

    pub fn detail(&self) -> &DetailData {
        &self.detail
    }

    /// Something visible changed since the last [`App::drawn`].
    pub fn needs_draw(&self) -> bool {
        self.needs_draw
    }

    // ----- data ------------------------------------------------------------------------

    /// Apply one ingest batch (kept even while paused; only the view is frozen).
    pub fn apply_batch(&mut self, batch: IngestBatch) {
        let Some(slot) = self.slots.get_mut(batch.run) else {
            return;
        };
        let live = &mut slot.live;
        if batch.source >= live.store.sources.len() {
            return;
        }
        if live.activity.len() < live.store.sources.len() {
            live.activity.resize(live.store.sources.len(), SourceActivity::default());
        }
        let grew = batch.items.iter().rev().find_map(|i| match i {
            IngestItem::Grew(t) => Some(*t),
            _ => None,
        });
        let touches = batch.items.iter().any(|i| !matches!(i, IngestItem::Stats(_)));
        let before = live.store.sources[batch.source].records();
        ingest::apply(
            &mut live.store.sources[batch.source],
            &mut live.activity[batch.source],
            batch.items,
        );
        let after = live.store.sources[batch.source].records();
        if live.activity[batch.source].progress.is_some() {
            slot.rate = RateMeter::default();
        } else if let (Some(t), Some(it)) = (grew, live.store.last_iteration()) {
            slot.rate.push(t, it);
        }
        if self.paused {
            slot.pending += after.saturating_sub(before);
            self.needs_draw |= after > before;
        }
        slot.dirty |= touches;
    }

    /// The next time [`App::tick`] has work: a due refresh of runs with new data, a run
    /// turning stale, or an age label changing. `None`: nothing until the next message.
    pub fn next_deadline(&self) -> Option<SystemTime> {
        let mut next: Option<SystemTime> = None;
        let mut consider = |t: SystemTime| next = Some(next.map_or(t, |n: SystemTime| n.min(t)));
        if self.slots.iter().any(|s| s.dirty) {
            consider(self.last_refresh.map_or(self.now, |r| r + self.opts.refresh));
        }
        for s in &self.slots {
            if let Some(t) = stale_transition(&s.live, self.opts.stale_limit) {
                consider(t);
            }
        }
        if let Some(t) = self.age_due {
            consider(t);
        }
        next
    }

    /// Do what is due at `now`: judge runs with new data (at most once per refresh
    /// interval), decide stale, call `hooks`, rebuild snapshots. Returns true when something
    /// visible changed.
    pub fn tick(&mut self, now: SystemTime, hooks: &mut dyn LiveHooks) -> bool {
        self.now = now;
        let mut changed_any = false;
        let refresh_due = self
            .last_refresh
            .is_none_or(|r| now.duration_since(r).map_or(true, |d| d >= self.opts.refresh));
        let judging = refresh_due && self.slots.iter().any(|s| s.dirty);
        if judging {
            self.last_refresh = Some(now);
        }
        let active = self.slots.iter().filter(|s| s.live.store.last_iteration().is_some()).count();
        for i in 0..self.slots.len() {
            let slot = &mut self.slots[i];
            let changed;
            let gap = judge_gap(self.opts.refresh, slot.judge_cost, active);
            let budget_ok =
                slot.last_judged.is_none_or(|t| now.duration_since(t).map_or(true, |d| d >= gap));
            if judging && slot.dirty && budget_ok {
                slot.dirty = false;
                let started = std::time::Instant::now();
                let judgement = (self.judge)(&slot.live.store, &slot.live.criteria);
                slot.live.set_judgement(judgement);
                slot.judge_cost = started.elapsed();
                slot.last_judged = Some(now);
                slot.live.stale = is_stale(&slot.live, now, self.opts.stale_limit);
                changed = true;
            } else {
                let stale = is_stale(&slot.live, now, self.opts.stale_limit);
                changed = stale != slot.live.stale;
                slot.live.stale = stale;
            }
            if changed {
                let found = hooks.on_judged(i, &slot.live);
                push_extra(&mut slot.live, found);
                if !self.paused {
                    self.rebuild_view(i);
                }
                changed_any = true;
            }
        }
        if changed_any && !self.paused {
            self.resort();
            self.rebuild_detail();
        }
        if self.age_due.is_some_and(|t| now >= t) {
            self.age_due = None;
            changed_any = true;
        }
        self.needs_draw |= changed_any;
        changed_any
    }

    /// Record that a frame was drawn at the app's `now`; computes when an age label on the
    /// drawn page next changes.
    pub fn drawn(&mut self) {
        self.needs_draw = false;
        let now = self.now;
        let visible: Vec<usize> = match self.screen {
            Screen::Run(i) => vec![i],
            Screen::Overview => {
                let rows = geometry::overview_rows(self.size.1);
                let start = scroll_start(self.selected, self.offset, rows);
                self.order.iter().skip(start).take(rows).copied().collect()
            }
        };
        self.age_due = visible
            .iter()
            .filter_map(|&i| self.slots.get(i).filter(|s| !s.view.ended)?.view.last_growth)
            .filter_map(|g| now.duration_since(g).ok())
            .map(|age| now + format::age_next_change(age))
            .min();
    }

    fn build_view(&self, live: &LiveRun, rate: &RateMeter) -> RunView {
        view::build_run_view(
            live,
            &ViewInputs {
                glyphs: &self.theme.glyphs,
                rate_per_min: rate.per_min(self.now),
                stale_limit: self.opts.stale_limit,
            },
        )
    }

    fn rebuild_view(&mut self, i: usize) {
        let v = self.build_view(&self.slots[i].live, &self.slots[i].rate);
        self.slots[i].view = v;
    }

    /// Re-sort the overview, keeping the selected run selected.
    fn resort(&mut self) {
        let keep = self.selected_run();
        let mut order: Vec<usize> = (0..self.slots.len()).collect();
        order.sort_by(|&a, &b| {
            let (sa, sb) = (&self.slots[a], &self.slots[b]);
            (sa.view.attention(), sa.acknowledged(), &sa.view.name).cmp(&(
                sb.view.attention(),
                sb.acknowledged(),
                &sb.view.name,
            ))
        });
        self.order = order;
        if let Some(k) = keep.and_then(|r| self.order.iter().position(|&x| x == r)) {
            self.selected = k;
        }
        self.selected = self.selected.min(self.order.len().saturating_sub(1));
    }

    /// Recompute the charts of the open run for its current data, size and view settings.
    fn rebuild_detail(&mut self) {
        let Screen::Run(i) = self.screen else {
            self.detail = DetailData::default();
            return;
        };
        let Some(slot) = self.slots.get(i) else {
            self.detail = DetailData::default();
            return;
        };
        let res = match self.theme.series_marker(0) {
            ratatui::symbols::Marker::Braille => 2,
            _ => 1,
        };
        let spec = ChartSpec {
            window: self.window,
            focus: self.focus,
            monitor_log: self.monitor_log,
            buckets: geometry::chart_columns(self.size) * res,
        };
        self.detail = view::build_detail(&slot.live, &slot.view, &spec, slot.frozen.as_deref());
    }
}

fn push_extra(live: &mut LiveRun, found: Vec<Finding>) {
    live.extra_findings.extend(found);
    let excess = live.extra_findings.len().saturating_sub(MAX_EXTRA_FINDINGS);
    live.extra_findings.drain(..excess);
}

/// A run is stale when it has grown at some point, no source has printed its end-of-run
/// mark, and the newest growth is older than `limit`. Any one source's end mark counts
/// (monitor files have none of their own).
pub fn is_stale(live: &LiveRun, now: SystemTime, limit: Duration) -> bool {
    if live.store.sources.iter().any(|s| s.ended.is_some()) {
        return false;
    }
    let Some(last) = live.activity.iter().filter_map(|a| a.last_growth).max() else {
        return false;
    };
    now.duration_since(last).is_ok_and(|d| d > limit)
}

/// When a run that is not stale now would turn stale without further growth.
fn stale_transition(live: &LiveRun, limit: Duration) -> Option<SystemTime> {
    if live.stale || live.store.sources.iter().any(|s| s.ended.is_some()) {
        return None;
    }
    let last = live.activity.iter().filter_map(|a| a.last_growth).max()?;
    Some(last + limit + Duration::from_millis(1))
}
