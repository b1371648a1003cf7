//! Judging one residual: drop from the peak, absolute level, trend and ETA, stall,
//! divergence, oscillation, and the signs of false convergence a single history can show
//! (frozen value, one-step drop, low start).
//!
//! Segments: the drop is measured from the peak of the whole run (a restart does not reset
//! what the residual has achieved), everything windowed (trend, stall, divergence,
//! oscillation) uses the latest segment only, and `since` dates stay within it.

use super::criteria::{self, Resolved};
use super::eta;
use super::limits::*;
use super::oscillation;
use super::peak::Peak;
use super::series::{self, View};
use super::stats;
use super::text::{dec, its, num, pct};
use super::trend::{self, MIN_FALL_DEC_PER_KIT, Trend};
use super::types::{Comparison, FindingKind, ResidualSummary, Verdict};
use super::{Sink, finding, health};

/// What the run-level rules need to know about a residual.
#[derive(Debug, Clone, Default)]
pub struct ResidualFacts {
    /// Every criterion of this residual holds at the end.
    pub met: bool,
    /// Something near the end looks like a blow-up (used with a crash signature).
    pub crash_sign: Option<String>,
    /// The stall finding pushed for this residual, for [`super::common_fall`].
    pub stall: Option<StallFacts>,
}

/// Where a stall finding sits and what its trend showed.
#[derive(Debug, Clone, Copy)]
pub struct StallFacts {
    /// Index of the finding in the sink.
    pub finding: usize,
    /// First iteration of the window the stall trend was fitted over.
    pub from: i64,
    /// 95 % interval of that trend's slope, dec/kit.
    pub ci: (f64, f64),
}

/// Peak (with the largest step fall after it and the glitches left out, [`Peak`]) and the
/// first and last positive finite values of the whole run.
struct Levels {
    peak: Peak,
    first_idx: usize,
    last_pos: f64,
}

/// From the store's running aggregates when given ([`super::history`]), else one pass.
fn levels(v: &View<'_>) -> Option<Levels> {
    if let Some(t) = v.history.filter(|h| h.has_levels()).map(|h| h.tally()) {
        return Some(Levels { peak: t.peak, first_idx: t.first_pos?, last_pos: t.last_pos });
    }
    let mut first_idx = None;
    let mut last_pos = None;
    for (i, &x) in v.vals.iter().enumerate() {
        if x.is_finite() && x > 0.0 {
            first_idx.get_or_insert(i);
            last_pos = Some(x);
        }
    }
    Some(Levels { peak: Peak::of(v.vals), first_idx: first_idx?, last_pos: last_pos? })
}

/// Judge one residual series; pushes criteria, findings and the summary into `sink`.
/// `input_ended`: the log has its end-of-run mark (a finished run that ends flat stalled).
pub fn analyse(
    name: &str,
    v: &View<'_>,
    rc: &Resolved,
    input_ended: bool,
    sink: &mut Sink,
) -> ResidualFacts {
    let n = v.len();
    let last_it = v.last_it();
    let last_raw = v.vals[n - 1];
    health::non_finite(name, v, sink);
    let crash_sign = health::end_jump(name, v, rc.evidence(), CRASH_JUMP_RESIDUAL);

    let Some(lv) = levels(v) else {
        // No positive value at all (all zero, negative or non-finite): nothing to measure.
        sink.criteria.push(criteria::result(
            "drop",
            name,
            Comparison::AtLeast,
            rc.drop,
            f64::NAN,
            "dec",
            None,
        ));
        if let Some(b) = rc.below {
            let value = if last_raw.is_finite() { last_raw } else { f64::NAN };
            let since = scan_since(v, |x| x <= b.value);
            sink.criteria.push(criteria::result(
                "below",
                name,
                Comparison::AtMost,
                b,
                value,
                "",
                since,
            ));
        }
        frozen(name, v, sink);
        sink.residuals.push(ResidualSummary {
            series: name.into(),
            last: last_raw,
            peak: f64::NAN,
            drop_dec: f64::NAN,
            slope_dec_per_kit: f64::NAN,
            slope_ci: (f64::NAN, f64::NAN),
            eta_iterations: None,
            eta_range: None,
            eta_window: None,
        });
        return ResidualFacts { met: false, crash_sign, stall: None };
    };

    // Drop from the peak of the whole run, dated within the latest segment.
    let drop_level = lv.peak.value / 10f64.powf(rc.drop.value);
    let drop = if last_raw.is_finite() { (lv.peak.value / lv.last_pos).log10() } else { f64::NAN };
    let drop_since = since_at_most(v, drop_level);
    let drop_res =
        criteria::result("drop", name, Comparison::AtLeast, rc.drop, drop, "dec", drop_since);
    let mut met = drop_res.met;
    sink.criteria.push(drop_res);
    let mut target = drop_level;
    if let Some(b) = rc.below {
        let value = if last_raw.is_finite() { last_raw } else { f64::NAN };
        let res = criteria::result(
            "below",
            name,
            Comparison::AtMost,
            b,
            value,
            "",
            since_at_most(v, b.value),
        );
        met &= res.met;
        sink.criteria.push(res);
        target = target.min(b.value);
    }

    // Trend over the window of the latest segment, without its start-up once there is enough
    // after it: a pseudo-plateau or a start-up rise must not pass for a stall.
    let w = rc.evidence();
    let to_log = |x: f64| if x > 0.0 { x.log10() } else { f64::NAN };
    let win = v.window_map(last_it, w, to_log);
    let post = win.from_iteration(series::startup_end(v.seg_first_it()));
    let settled = if post.len() >= 30 { &post } else { &win };
    let tr = trend::fit(&settled.its, &settled.vals);
    let falling = tr.is_some_and(|t| t.falling(MIN_FALL_DEC_PER_KIT));
    let eta = if met { None } else { eta::estimate(v, target.log10(), w) };
    let half = post.span() as f64 >= 0.5 * w as f64 && post.len() >= OSC_MIN_POINTS;

    let diverging = divergence(name, v, &win, w, sink);
    let growing = !diverging && health::growing_cycle(name, v, rc, None, sink);

    let mut stalled = None;
    if let Some(t) = tr {
        let may_stall = !met && !diverging && !growing && drop < ROUNDOFF_DROP_DEC;
        if !met && falling {
            trend_finding(name, &t, target, eta, sink);
            // A finished run is judged whole: a fall over its last evidence window that the
            // longer stall window does not show is the wander of a plateau, not convergence
            // the run was stopped in (it has no later to go on in).
            if input_ended && may_stall {
                stalled = stall(name, v, rc, drop, Ended::Long, sink);
            }
        } else if may_stall {
            let ended = if input_ended { Ended::Evidence } else { Ended::No };
            stalled = stall(name, v, rc, drop, ended, sink);
        }
    }
    if half && !growing {
        // Decisive when the criteria are not met, or met only at this point of the cycle: the
        // crest of the oscillation around the fitted level is above the target.
        let crest_above = |amp: f64| tr.is_none_or(|t| t.fitted_last + amp > target.log10());
        let may_decide = |amp: f64| !falling && (!met || crest_above(amp));
        // Too few cycles of a long period in the evidence window: look back over twice it
        // (still after the start-up), where a real limit cycle shows more of them.
        let cycles_in = |p: &oscillation::Periodic| (p.last - p.first) as f64 / p.period;
        let near = oscillation::find(&post);
        let far =
            near.as_ref().filter(|p| cycles_in(p) < OSC_MIN_CYCLES_TO_DECIDE).and_then(|_| {
                let long = v
                    .window_map(last_it, 2 * w, to_log)
                    .from_iteration(series::startup_end(v.seg_first_it()));
                (long.span() > post.span() + w as i64 / 5).then_some(long)
            });
        let win = far.as_ref().unwrap_or(&post);
        oscillation_finding(name, win, rc.window as f64, may_decide, sink);
    }
    frozen(name, v, sink);
    step_drop(name, v, &lv, drop, rc.drop.value, drop_since.is_some(), sink);
    glitch_note(name, v, &lv, sink);
    low_start(name, v, &lv, met, sink);

    sink.residuals.push(ResidualSummary {
        series: name.into(),
        last: last_raw,
        peak: lv.peak.value,
        drop_dec: drop,
        slope_dec_per_kit: tr.map_or(f64::NAN, |t| t.slope_dec_per_kit),
        slope_ci: tr.map_or((f64::NAN, f64::NAN), |t| t.ci),
        eta_iterations: eta.map(|e| e.iterations),
        eta_range: eta.map(|e| e.range),
        eta_window: eta.map(|e| e.window),
    });
    ResidualFacts { met, crash_sign, stall: stalled }
}

/// First iteration of the latest segment from which `ok(value)` has held for every value to
/// the end (non-finite values never hold; values ≤ 0 are below any positive level).
fn scan_since(v: &View<'_>, ok: impl Fn(f64) -> bool) -> Option<i64> {
    let mut since = None;
    for i in (v.seg..v.len()).rev() {
        let x = v.vals[i];
        if !x.is_finite() || !ok(x) {
            break;
        }
        since = Some(v.its[i]);
    }
    since
}

/// [`scan_since`] for `x <= level`: with the store's block maxima ([`super::history`]) a
/// descent of O(64 · levels) steps instead of a scan back over every value that holds.
fn since_at_most(v: &View<'_>, level: f64) -> Option<i64> {
    match v.history.and_then(|h| h.last_above(v.vals, v.seg, level)) {
        Some(None) => Some(v.its[v.seg]),
        Some(Some(j)) => v.its.get(j + 1).copied(),
        None => scan_since(v, |x| x <= level),
    }
}

fn trend_finding(name: &str, t: &Trend, target: f64, eta: Option<eta::Eta>, sink: &mut Sink) {
    let mut f = finding(FindingKind::Trend, name, t.first, t.last, "slope_dec_per_kit");
    f.value = t.slope_dec_per_kit;
    f.threshold = Some(-MIN_FALL_DEC_PER_KIT);
    f.supports = Some(Verdict::Converging);
    f.detail = format!(
        "{name} falls {} dec per 1000 it (95 % CI {}…{})",
        dec(-t.slope_dec_per_kit),
        dec(t.ci.0),
        dec(t.ci.1),
    );
    if let Some(e) = eta {
        // Appended by the judge only when nothing argues for divergence.
        let note = format!(
            "; about {} iterations to reach {} (range {}–{}, from the rate over the last {} iterations)",
            its(e.iterations),
            num(target),
            its(e.range.0),
            its(e.range.1),
            e.window,
        );
        sink.eta_notes.push((sink.findings.len(), note));
    }
    sink.findings.push(f);
}

/// Which window a stall is judged on.
#[derive(Debug, Clone, Copy, PartialEq, Eq)]
enum Ended {
    /// The run goes on: the stall window.
    No,
    /// A finished run whose evidence window shows no fall: that window.
    Evidence,
    /// A finished run whose evidence window falls: the stall window, when the segment is
    /// long enough for it.
    Long,
}

/// The stall test: the criteria are unmet, and over the stall window after the start-up the
/// residual's 95 % upper slope bound is not below −0.1 dec/kit. While the run goes on the
/// window is at least [`STALL_MIN_ITERATIONS`] (pseudo-plateaus of a developing flow last
/// hundreds of iterations). A finished run (end-of-run mark) is stalled when either its
/// evidence window (or half the segment of a short run) or its stall window shows no fall:
/// the first misses the wander of a plateau that falls over the last few hundred
/// iterations, the second a plateau shorter than itself, whose approach it still holds.
/// Slow wander (red noise with a correlation time of hundreds of iterations) can read as a
/// significant fall over the stall window too: a finished run whose last fall ends no lower
/// than the residual already was earlier in that window is stalled ([`wandered_back`]).
/// Every window, and the recent part that shows a live plateau falling again, holds at
/// least [`STALL_MIN_VALUES`] values: a log printed every 20 iterations gets windows of 600.
fn stall(
    name: &str,
    v: &View<'_>,
    rc: &Resolved,
    drop: f64,
    how: Ended,
    sink: &mut Sink,
) -> Option<StallFacts> {
    let ended = how != Ended::No;
    let last_it = v.last_it();
    let seg_len = last_it.saturating_sub(v.seg_first_it()).saturating_add(1).max(1) as usize;
    let mut w = rc.evidence().max(STALL_MIN_ITERATIONS);
    let mut startup = series::startup_end(v.seg_first_it());
    let long_fits = seg_len >= w + series::STARTUP_ITERATIONS as usize;
    if how == Ended::Long && !long_fits {
        return None;
    }
    if how == Ended::Evidence {
        // The run is over: no later fall can make this plateau a pseudo-plateau, so the
        // evidence window will do, or half the segment of a short run.
        w = rc.evidence();
        if seg_len < w + series::STARTUP_ITERATIONS as usize {
            w = w.min(seg_len / 2);
            startup = v.seg_first_it().saturating_add((seg_len / 5) as i64);
        }
    }
    // A log printed every few iterations: the window holds STALL_MIN_VALUES of its values,
    // and so does the recent part the live test below reads.
    let min_span = v.span_of(STALL_MIN_VALUES, last_it);
    let w = w.max(min_span);
    let win = v
        .window_map(last_it, w, |x| if x > 0.0 { x.log10() } else { f64::NAN })
        .from_iteration(startup);
    if !(win.span() as f64 >= 0.9 * w as f64 && win.len() >= STALL_MIN_VALUES) {
        return None;
    }
    let t = trend::fit(&win.its, &win.vals)?;
    // A finished run whose plateau wandered back down at its end: the fall over the last
    // evidence window ends no lower than the residual already was earlier in the stall window
    // (the test a live plateau must pass to be over, below). Its slope over a plateau
    // of slow red-noise wander reads significant, but the run made no progress.
    let falls = t.falling(MIN_FALL_DEC_PER_KIT);
    let back_down =
        if falls && how == Ended::Long { wandered_back(v, &win, rc.evidence()) } else { None };
    if falls && back_down.is_none() {
        return None;
    }
    // While the run goes on, a plateau that has begun to fall again is over: the last
    // quarter of the window falls significantly and has already gone below every value the
    // three quarters before it showed (a pseudo-plateau of a developing flow ends so; the
    // wander of a stall dips, but not out of its own range). A finished run has no later to
    // fall in: its plateau is judged whole.
    let split = last_it.saturating_sub((w / 4).max(min_span) as i64);
    let recent = win.from_iteration(split);
    let before_min = lowest(&win, win.len() - recent.len()).map_or(f64::INFINITY, |l| l.1);
    if !ended
        && recent.len() >= STALL_MIN_VALUES
        && trend::fit(&recent.its, &recent.vals)
            .is_some_and(|r| r.falling(MIN_FALL_DEC_PER_KIT) && r.fitted_last < before_min)
    {
        return None;
    }
    // Date the plateau: walk back from the window start until the residual was clearly above
    // the plateau level (bounded look-back of 20 windows).
    let band = (4.0 * t.resid_sd).max(0.3);
    let ceiling = 10f64.powf(t.fitted_last + band);
    let start = v.end_at(t.first.saturating_sub(1));
    let floor_it = t.first.saturating_sub(20 * rc.evidence() as i64);
    let mut first = t.first;
    for i in (v.seg..start).rev() {
        if v.its[i] < floor_it || v.vals[i] > ceiling || !v.vals[i].is_finite() {
            break;
        }
        first = v.its[i];
    }
    let short = (rc.drop.value - drop).max(0.0);
    let mut f = finding(FindingKind::Stall, name, first, t.last, "slope_dec_per_kit");
    f.value = t.slope_dec_per_kit;
    f.threshold = Some(-MIN_FALL_DEC_PER_KIT);
    f.supports = Some(Verdict::Stalled);
    let shortfall = if short > 0.0 {
        format!("{} dec short of its {}-decade drop", dec(short), dec(rc.drop.value))
    } else {
        "above its target level".to_string()
    };
    f.detail = match back_down {
        Some((low_at, low)) => format!(
            "{name} ended no lower than it already was at it {low_at} ({}): its fall over the last {} iterations (slope {} dec/kit over {}) only took it back down its plateau, where it has been for {} iterations; {shortfall}",
            num(10f64.powf(low)),
            rc.evidence(),
            dec(t.slope_dec_per_kit),
            its(t.last.saturating_sub(t.first) as f64),
            its(t.last.saturating_sub(first) as f64),
        ),
        None => format!(
            "{name} has not fallen for {} iterations: slope {} dec/kit (95 % CI {}…{}), {shortfall}",
            its(t.last.saturating_sub(first) as f64),
            dec(t.slope_dec_per_kit),
            dec(t.ci.0),
            dec(t.ci.1),
        ),
    };
    sink.findings.push(f);
    Some(StallFacts { finding: sink.findings.len() - 1, from: t.first, ci: t.ci })
}

/// A finished run's fall over its last `evidence` iterations that ends (on the fitted line)
/// no lower than the lowest value the stall window `win` showed before them: the iteration
/// and log10 value of that earlier low. The same comparison ends a live run's plateau (the
/// wander of a stall dips, but not out of its own range); a run still converging ends below
/// everything it showed before.
fn wandered_back(v: &View<'_>, win: &series::Window, evidence: usize) -> Option<(i64, f64)> {
    let split = v.last_it().saturating_sub(evidence as i64 - 1);
    let recent = win.from_iteration(split);
    let k = win.len() - recent.len();
    if recent.len() < 30 || k < 30 {
        return None;
    }
    let r = trend::fit(&recent.its, &recent.vals)?;
    let (at, low) = lowest(win, k)?;
    (r.fitted_last >= low).then_some((at, low))
}

/// The lowest finite value among the first `k` of `win`, with its iteration: the range a
/// plateau showed before its latest stretch (both stall rules compare against it).
fn lowest(win: &series::Window, k: usize) -> Option<(i64, f64)> {
    win.its[..k]
        .iter()
        .zip(&win.vals[..k])
        .filter(|(_, y)| y.is_finite())
        .min_by(|a, b| a.1.total_cmp(b.1))
        .map(|(&at, &y)| (at, y))
}

/// The divergence rules on the latest segment after its start-up. Returns true when a
/// divergence finding was pushed.
fn divergence(
    name: &str,
    v: &View<'_>,
    win: &series::Window,
    window: usize,
    sink: &mut Sink,
) -> bool {
    let last_it = v.last_it();
    let startup_end = series::startup_end(v.seg_first_it());
    let mut found = false;

    // 0. Any time, start-up included: many decades beyond the segment's first values and
    // still shooting up (the start-up excuses a rise of a decade or two, never this).
    let n = v.len();
    let now = stats::median(
        &v.vals[n.saturating_sub(5).max(v.seg)..]
            .iter()
            .copied()
            .filter(|x| *x > 0.0)
            .collect::<Vec<_>>(),
    );
    let end = n.saturating_sub(5).max(v.seg);
    let before = stats::median(
        &v.vals[end.saturating_sub(20).max(v.seg)..end]
            .iter()
            .copied()
            .filter(|x| *x > 0.0)
            .collect::<Vec<_>>(),
    );
    if let (Some(early), Some(c), Some(b)) = (series::early_max_abs(v), now, before)
        && early > 0.0
        && (c / early).log10() >= STARTUP_BLOWUP_DEC
        && c >= 10.0 * b
    {
        let above = (c / early).log10();
        let mut f =
            finding(FindingKind::Divergence, name, v.its[end], last_it, "decades_above_start");
        f.value = above;
        f.threshold = Some(STARTUP_BLOWUP_DEC);
        f.supports = Some(Verdict::Diverging);
        f.detail = format!(
            "{name} is {} decades above its first values (at most {} then, {} now) and still shooting up",
            dec(above),
            num(early),
            num(c),
        );
        sink.findings.push(f);
        return true;
    }

    // 1. Significantly rising after the start-up, by a material amount.
    let post = win.from_iteration(startup_end);
    if let Some(t) = trend::fit(&post.its, &post.vals) {
        let rise = t.slope_dec_per_kit * post.span() as f64 / 1000.0;
        if t.rising() && rise >= DIVERGE_MIN_RISE_DEC {
            let mut f =
                finding(FindingKind::Divergence, name, t.first, t.last, "slope_dec_per_kit");
            f.value = t.slope_dec_per_kit;
            f.threshold = Some(0.0);
            f.p_value = stats::t_two_sided_p(t.slope_dec_per_kit / t.se_dec_per_kit, t.dof);
            f.supports = Some(Verdict::Diverging);
            f.detail = format!(
                "{name} rises {} dec per 1000 it (95 % CI {}…{}), {} decades over the last {} iterations",
                dec(t.slope_dec_per_kit),
                dec(t.ci.0),
                dec(t.ci.1),
                dec(rise),
                its(post.span() as f64),
            );
            sink.findings.push(f);
            found = true;
        }
    }

    // 2. A fast rise over the last fifth of the window: blow-ups take tens of iterations and
    // barely move a fit over the whole window.
    let short = win
        .from_iteration(startup_end.max(last_it.saturating_sub((window as i64 / 5).max(50) - 1)));
    if let (false, Some(t)) = (found, trend::fit(&short.its, &short.vals)) {
        let rise = t.slope_dec_per_kit * short.span() as f64 / 1000.0;
        if t.rising() && rise >= DIVERGE_FAST_RISE_DEC {
            let mut f =
                finding(FindingKind::Divergence, name, t.first, t.last, "slope_dec_per_kit");
            f.value = t.slope_dec_per_kit;
            f.threshold = Some(0.0);
            f.p_value = stats::t_two_sided_p(t.slope_dec_per_kit / t.se_dec_per_kit, t.dof);
            f.supports = Some(Verdict::Diverging);
            f.detail = format!(
                "{name} shot up {} decades in the last {} iterations ({} dec per 1000 it, 95 % CI {}…{})",
                dec(rise),
                its(short.span() as f64),
                dec(t.slope_dec_per_kit),
                dec(t.ci.0),
                dec(t.ci.1),
            );
            sink.findings.push(f);
            found = true;
        }
    }

    // 3. Many decades above the running minimum (of block medians, so one odd value does not
    // count) since the start-up, looking back at most 20 windows so the cost stays bounded —
    // and still 2 decades above the window's median level, so that the crest of a wide limit
    // cycle does not count as growth.
    if found {
        return true;
    }
    let look_back = startup_end.max(last_it.saturating_sub(20 * window as i64));
    let from = v.seg + v.its[v.seg..].partition_point(|&i| i < look_back);
    let current = stats::median(
        &v.vals[n.saturating_sub(5).max(v.seg)..]
            .iter()
            .copied()
            .filter(|x| *x > 0.0)
            .collect::<Vec<_>>(),
    );
    let meds = series::block_medians(&v.vals[from..n.saturating_sub(5).max(from)], from, |x| x);
    if let (Some(cur), Some(&(idx, lo))) = (current, meds.iter().min_by(|a, b| a.1.total_cmp(&b.1)))
    {
        let above = (cur / lo).log10();
        let over_median = stats::median(&win.vals).map_or(f64::INFINITY, |m| cur.log10() - m);
        if above >= DIVERGE_ABOVE_MIN_DEC && over_median >= 2.0 {
            let mut f =
                finding(FindingKind::Divergence, name, v.its[idx], last_it, "decades_above_min");
            f.value = above;
            f.threshold = Some(DIVERGE_ABOVE_MIN_DEC);
            f.supports = Some(Verdict::Diverging);
            f.detail = format!(
                "{name} is {} decades above its minimum {} (it {}): it is growing, not converging",
                dec(above),
                num(lo),
                v.its[idx],
            );
            sink.findings.push(f);
            found = true;
        }
    }
    found
}

/// The residual oscillation finding. `may_decide(amplitude)` says whether the criteria leave
/// room for it to decide; it decides when, in addition, the component is significant at
/// [`OSC_ALPHA`], dominates the window, keeps its amplitude and is at least
/// ±[`OSC_MIN_RESIDUAL_DEC`]. A weaker periodic component is a note (a stalled run's ripple).
fn oscillation_finding(
    name: &str,
    win: &series::Window,
    horizon: f64,
    may_decide: impl Fn(f64) -> bool,
    sink: &mut Sink,
) {
    let Some(p) = oscillation::find(win) else {
        return;
    };
    let o = &p.osc;
    if !(o.p_value < OSC_ALPHA && o.steady()) {
        return;
    }
    let material = o.amplitude >= OSC_MIN_RESIDUAL_DEC;
    let cycles = (p.last.saturating_sub(p.first)) as f64 / p.period;
    let decisive = material
        && cycles >= OSC_MIN_CYCLES_TO_DECIDE
        && p.sustained_and_dominant(horizon)
        && may_decide(o.amplitude);
    let note = if decisive {
        ""
    } else if p.ring_down(horizon) {
        ", ringing down: settling"
    } else if !p.dominant() {
        ", a weak ripple in broadband noise"
    } else if !material {
        ", too small to matter"
    } else if cycles < OSC_MIN_CYCLES_TO_DECIDE {
        ", too few cycles in the window to tell it from slow noise"
    } else if !p.lasts(horizon) {
        ", its amplitude not yet shown to last"
    } else {
        ""
    };
    let mut f = finding(FindingKind::Oscillation, name, p.first, p.last, "fisher_g");
    f.value = o.g;
    f.threshold = Some(fisher_critical(o.m));
    f.p_value = Some(o.p_value);
    f.period = Some(p.period);
    f.amplitude = Some(o.amplitude);
    f.supports = decisive.then_some(Verdict::Oscillating);
    f.detail = format!(
        "{name} oscillates with a period of {} iterations and ±{} decades{note} (Fisher's g = {}, p = {}; {} of the variance)",
        num(p.period),
        dec(o.amplitude),
        num(o.g),
        num(o.p_value),
        pct(100.0 * p.share),
    );
    sink.findings.push(f);
}

/// Approximate critical g at [`OSC_ALPHA`]: `1 − (α/m)^{1/(m−1)}` (first term of the exact
/// series; exact when above ½).
pub fn fisher_critical(m: usize) -> f64 {
    if m < 2 {
        return 1.0;
    }
    1.0 - (OSC_ALPHA / m as f64).powf(1.0 / (m as f64 - 1.0))
}

fn frozen(name: &str, v: &View<'_>, sink: &mut Sink) {
    let n = v.len();
    let x = v.vals[n - 1];
    if !x.is_finite() {
        return;
    }
    // Counted by the store as values arrive when given (a frozen residual would otherwise
    // be counted back over its whole frozen stretch at every call).
    let repeats = super::history::History::trailing_equal(v, 0);
    let k = n - repeats;
    if repeats < FROZEN_MIN_REPEATS {
        return;
    }
    let mut f = finding(FindingKind::FrozenResidual, name, v.its[k], v.last_it(), "repeats");
    f.value = repeats as f64;
    f.threshold = Some(FROZEN_MIN_REPEATS as f64);
    f.supports = Some(Verdict::Suspect);
    f.detail = format!(
        "{name} has printed exactly {} for the last {repeats} values: the equation looks frozen, not converged",
        num(x)
    );
    sink.findings.push(f);
}

fn step_drop(
    name: &str,
    v: &View<'_>,
    lv: &Levels,
    drop: f64,
    need: f64,
    drop_met_now: bool,
    sink: &mut Sink,
) {
    let n = v.len();
    // Falling to exactly zero at the end is the extreme case.
    if v.vals[n - 1] == 0.0 {
        let mut f = finding(FindingKind::StepDrop, name, v.last_it(), v.last_it(), "last_value");
        f.value = 0.0;
        f.supports = Some(Verdict::Suspect);
        f.detail = format!(
            "{name} is exactly 0 at the end: a reset or a broken normalisation, not convergence"
        );
        sink.findings.push(f);
        return;
    }
    // Largest single-step fall ratio after the peak, between consecutive positive values,
    // glitches skipped ([`super::peak`]).
    let best = (lv.peak.step_ratio.log10(), lv.peak.step_idx);
    if !(best.0 >= STEP_DROP_DEC) {
        return;
    }
    let decides = drop_met_now && drop - best.0 < need;
    let i = best.1;
    let mut f = finding(FindingKind::StepDrop, name, v.its[i - 1], v.its[i], "step_dec");
    f.value = best.0;
    f.threshold = Some(STEP_DROP_DEC);
    f.supports = decides.then_some(Verdict::Suspect);
    f.detail = if decides {
        format!(
            "{name} fell {} decades in one step at it {}; without that step the drop is {} of {} decades",
            dec(best.0),
            v.its[i],
            dec((drop - best.0).max(0.0)),
            dec(need),
        )
    } else {
        format!("{name} fell {} decades in one step at it {}", dec(best.0), v.its[i])
    };
    sink.findings.push(f);
}

/// Say that glitches were left out of the peak, naming the largest.
fn glitch_note(name: &str, v: &View<'_>, lv: &Levels, sink: &mut Sink) {
    let (count, Some((i, height))) = (lv.peak.glitches, lv.peak.largest) else { return };
    let it = v.its[i];
    let mut f = finding(FindingKind::Glitch, name, it, it, "glitch_dec");
    f.value = height;
    f.threshold = Some(GLITCH_DEC);
    let others = match count {
        1 => String::new(),
        2 => " (and 1 smaller one)".to_string(),
        k => format!(" (and {} smaller ones)", k - 1),
    };
    f.detail = format!(
        "{name} printed {} at it {it}, {} decades above the values on both sides, then went on \
         as before: a one-iteration glitch{others}, left out of the peak the drop is measured from",
        num(v.vals[i]),
        dec(height),
    );
    sink.findings.push(f);
}

fn low_start(name: &str, v: &View<'_>, lv: &Levels, met: bool, sink: &mut Sink) {
    let first = v.vals[lv.first_idx];
    let below = (lv.peak.value / first).log10();
    if below < LOW_START_DEC {
        return;
    }
    let decides = met && lv.last_pos >= first;
    let mut f = finding(
        FindingKind::LowStart,
        name,
        v.its[lv.first_idx],
        v.its[lv.peak.idx],
        "decades_below_peak",
    );
    f.value = below;
    f.threshold = Some(LOW_START_DEC);
    f.supports = decides.then_some(Verdict::Suspect);
    f.detail = if decides {
        format!(
            "{name} started at {}, {} decades below its later peak {}, and is still above its start: the drop is measured from a start-up spike",
            num(first),
            dec(below),
            num(lv.peak.value),
        )
    } else {
        format!(
            "{name} started at {}, {} decades below its later peak {}; the drop is measured from the peak",
            num(first),
            dec(below),
            num(lv.peak.value),
        )
    };
    sink.findings.push(f);
}
