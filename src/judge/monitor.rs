//! Judging one monitor (a quantity of interest) on the latest segment: drift, band and the
//! confidence interval of the mean as criteria over a window fitted to the run
//! ([`super::window`]), relative to a reference that stays meaningful near zero
//! ([`super::scale`]); periodic components as evidence ([`super::oscillation`]); iterative
//! error; and the blow-up rules. Indicators get the health checks only.
//!
//! **Drift** is the larger of two readings of "the monitor is still changing": the change of
//! its regression line over the window, and the change still to come that its recent trend
//! projects ([`window::Projection`]: the decay of the slope, as in the eigenvalue estimate of
//! Ferziger & Perić, or the current slope over the upper window when it does not decay). The
//! second keeps a monitor that creeps towards its value from passing on a short window: the
//! criterion asks that the monitor be within the limit of where it is going, not only that
//! it moved little lately. An explicit `window` is honoured as given: drift is then the
//! change over it, as the criterion reads.
//! **Band** is `max − min` over the window. Both are percent of the reference, or absolute
//! when the series has an absolute limit.
//!
//! A window must hold [`window::MIN_VALUES`] values and, unless the user set `window`, the
//! segment must hold [`window::required`] iterations of data before the criteria are
//! computed; before that they are NaN and not met (the run, or the segment after a restart,
//! is too young to tell: a few tens of iterations after a restart show the kick the restart
//! gave, not where the monitor goes).

use super::criteria::{self, Limit, Resolved};
use super::iterative;
use super::limits::*;
use super::oscillation::{self, Periodic};
use super::scale::{self, Magnitude};
use super::series::{View, Window};
use super::stationarity;
use super::stats;
use super::text::{num, pct, signed_pct};
use super::types::{Comparison, FindingKind, MonitorSummary, Reference, Verdict};
use super::window;
use super::{Sink, finding, health};

/// What the run-level rules need to know about a monitor.
#[derive(Debug, Clone, Default)]
pub struct MonitorFacts {
    /// Names of the computed criteria that fail (`drift`, `band`, `ci`).
    pub failing: Vec<&'static str>,
    /// Signed drift over the window, percent of the reference (NaN when not computed).
    pub drift_pct: f64,
    /// Iterations of the window the criteria used.
    pub window: usize,
    /// What fails, in words (the detail of the first failing criterion's finding).
    pub why: String,
    pub crash_sign: Option<String>,
    /// Every criterion has held for the hold span ([`super::window::hold`]).
    pub held: bool,
}

/// Window statistics of a monitor at one end iteration.
struct Stats {
    /// Signed drift, absolute units (the larger of the window change and the remaining
    /// change).
    drift: f64,
    /// The remaining change was the larger reading.
    remaining: bool,
    /// The drift read for keeping a call ([`date_all`]): the larger of the window change and
    /// the best estimate of the change still to come ([`window::Projection::central`]), at
    /// most `drift`.
    kept: f64,
    band: f64,
    mean: f64,
    ci_half: f64,
    reference: (Reference, f64),
    length: usize,
}

impl Stats {
    /// A quantity relative to the reference, percent.
    fn rel(&self, a: f64) -> f64 {
        stationarity::relative_pct(a, self.reference.1)
    }
}

/// Statistics of the fitted window `f` (`None` with fewer than [`window::MIN_VALUES`] values,
/// or an adaptive window whose segment is too young, [`window::Fitted::young`]). The CI only
/// with `with_ci` (it costs an FFT).
fn window_stats(f: &window::Fitted, magnitude: f64, rc: &Resolved, with_ci: bool) -> Option<Stats> {
    let win = &f.window;
    if win.len() < window::MIN_VALUES || (!rc.window_explicit && f.young) {
        return None;
    }
    let x = win.its_f64();
    let (lo, hi) = win
        .vals
        .iter()
        .fold((f64::INFINITY, f64::NEG_INFINITY), |(l, h), v| (l.min(*v), h.max(*v)));
    let mean = stats::mean(&win.vals)?;
    // The drift is read with a known cycle taken out (its phase is not a drift).
    let seen = f.clean.as_ref().map_or(&win.vals, |c| &c.vals);
    let change = if lo == hi { 0.0 } else { stats::ols(&x, seen)?.slope * f.length as f64 };
    let projection =
        f.projection.filter(|p| p.remaining.abs() > change.abs() && !rc.window_explicit);
    let remaining = projection.map(|p| p.remaining);
    let kept = projection.map_or(change, |p| {
        if p.central.abs() > change.abs() {
            p.central.abs().min(p.remaining.abs()).copysign(p.central)
        } else {
            change
        }
    });
    let ci_half =
        if with_ci { stationarity::mean_ci_half(&win.vals).unwrap_or(f64::NAN) } else { f64::NAN };
    Some(Stats {
        drift: remaining.unwrap_or(change),
        remaining: remaining.is_some(),
        kept,
        band: hi - lo,
        mean,
        ci_half,
        reference: scale::reference(mean, magnitude, rc.scale),
        length: f.length,
    })
}

/// The absolute drift tolerance around a value a monitor converges to: the absolute drift
/// limit, or the relative one of the reference that value would have.
fn tolerance(rc: &Resolved, magnitude: f64) -> impl Fn(f64) -> f64 {
    let (abs, rel, scale) = (rc.drift_abs.map(|l| l.value), rc.drift.value, rc.scale);
    move |limit: f64| match abs {
        Some(a) => a,
        None => rel / 100.0 * scale::reference(limit, magnitude, scale).1,
    }
}

/// One windowed criterion of a monitor: its limit, whether it is absolute, and its metric.
struct Crit {
    name: &'static str,
    lim: Limit,
    absolute: bool,
    metric: fn(&Stats) -> f64,
    /// The reading that keeps a criterion met once it has held ([`date_all`]).
    kept: fn(&Stats) -> f64,
    needs_ci: bool,
}

impl Crit {
    fn value(&self, s: &Stats) -> f64 {
        self.in_units(s, (self.metric)(s))
    }

    fn kept_value(&self, s: &Stats) -> f64 {
        self.in_units(s, (self.kept)(s))
    }

    fn in_units(&self, s: &Stats, v: f64) -> f64 {
        if self.absolute { v } else { s.rel(v) }
    }
}

fn crits(rc: &Resolved) -> Vec<Crit> {
    let pick = |abs: Option<Limit>, rel: Limit| abs.map_or((rel, false), |a| (a, true));
    let (drift, drift_abs) = pick(rc.drift_abs, rc.drift);
    let (band, band_abs) = pick(rc.band_abs, rc.band);
    let mut out = vec![
        Crit {
            name: "drift",
            lim: drift,
            absolute: drift_abs,
            metric: |s| s.drift.abs(),
            kept: |s| s.kept.abs(),
            needs_ci: false,
        },
        Crit {
            name: "band",
            lim: band,
            absolute: band_abs,
            metric: |s| s.band,
            kept: |s| s.band,
            needs_ci: false,
        },
    ];
    let ci = rc.ci_abs.map(|a| (a, true)).or(rc.ci.map(|l| (l, false)));
    if let Some((lim, absolute)) = ci {
        out.push(Crit {
            name: "ci",
            lim,
            absolute,
            metric: |s| s.ci_half,
            kept: |s| s.ci_half,
            needs_ci: true,
        });
    }
    out
}

/// Checkpoints for dating: the last iteration, then every tenth of the configured window on
/// a grid of multiples of that step (so that dates do not move as the run grows), at most
/// [`criteria::MAX_CHECKPOINTS`], not before the segment start.
fn checkpoints(v: &View<'_>, w: usize) -> impl Iterator<Item = i64> {
    let last = v.last_it();
    let step = (w / 10).max(1) as i64;
    let floor = v.seg_first_it();
    let grid = last.div_euclid(step).saturating_mul(step);
    let first_grid = if grid == last { grid.saturating_sub(step) } else { grid };
    std::iter::once(last)
        .chain(
            (0..criteria::MAX_CHECKPOINTS as i64 - 1)
                .map(move |j| first_grid.saturating_sub(j.saturating_mul(step))),
        )
        .take_while(move |&t| t >= floor)
}

/// The earliest iteration at which this module asks a monitor's [`Magnitude`] (the oldest
/// dating checkpoint), so that it need only be built from there
/// ([`Magnitude::from_iteration`]).
pub(super) fn magnitude_from(v: &View<'_>, rc: &Resolved) -> i64 {
    checkpoints(v, rc.window).fold(v.last_it(), i64::min)
}

/// Iterations a monitor's criteria must have held: before a run that goes on is called
/// `converged` (`call`, [`window::hold`]; none for a finished run), and before a criterion is
/// kept met ([`date_all`]; the same span for a finished run as for a live one, so that the
/// last line of a finished run is judged as a watcher saw it).
#[derive(Debug, Clone, Copy, PartialEq)]
pub struct Hold {
    pub call: i64,
    pub keep: i64,
}

/// What [`date_all`] finds for each criterion.
struct Dated {
    since: Vec<Option<i64>>,
    /// The criterion has held from `hold` iterations before the last (every checkpoint in
    /// between included), or is kept met ([`Dated::kept`]).
    held: Vec<bool>,
    /// The criterion is met by its kept reading: it held over a hold span earlier and its
    /// kept reading has stayed within the limit since.
    kept: Vec<bool>,
}

/// `since` of every criterion, whether it has held for the hold span, and whether it is kept.
///
/// A criterion holds at a checkpoint when its reading for the window ending there is within
/// the limit. `since` is the oldest checkpoint of the unbroken run of such checkpoints from
/// the end (`None` when it does not hold at the end).
///
/// **Kept.** Once a criterion has held over a hold span, it stays met while its *kept*
/// reading holds at every checkpoint since. For drift that is the best estimate of the
/// change still to come ([`window::Projection::central`]) instead of the cautious
/// projection, which extrapolates a decay from the ratio of two noisy slopes with a margin
/// for their errors: near the limit it crosses it back and forth with the noise (synthetic
/// converging seed 10: lift within 0.08 % of its final value, projected 0.12–0.18 % away for
/// 200 iterations after the call). The cautious reading guards the first call against a
/// monitor that creeps towards its value; a monitor that moves again (a creep, a departure)
/// raises the best estimate as much and takes the call back. `since` is then the start of
/// the latest run of checkpoints that held over a hold span (the same as without the kept
/// reading whenever the reading holds at the end and has held for the hold span). Band
/// and the confidence interval are read the same way for both. The sweep stops when no
/// criterion's kept reading holds any more.
fn date_all(
    v: &View<'_>,
    rc: &Resolved,
    mag: &Magnitude,
    cycle: Option<window::Cycle>,
    crits: &[Crit],
    values: &[(f64, f64)],
    hold: Hold,
) -> Dated {
    let Hold { call: hold, keep } = hold;
    let last = v.last_it();
    // Per criterion, from the end back: (checkpoint, the reading holds) while the kept
    // reading holds.
    let mut trail: Vec<Vec<(i64, bool)>> = crits
        .iter()
        .zip(values)
        .map(|(c, (x, k))| if *k <= c.lim.value { vec![(last, *x <= c.lim.value)] } else { vec![] })
        .collect();
    let mut alive: Vec<bool> = trail.iter().map(|t| !t.is_empty()).collect();
    // The grid, and the iteration `hold` before the last: whether every criterion has held
    // for the hold span before `converged` ([`window::hold`]) is read exactly, not to the
    // grid's step (50 iterations by default, a third of a short run's window). `since`
    // stays on the grid, so that it does not move with every new iteration.
    let mut points: Vec<i64> = checkpoints(v, rc.window).skip(1).collect();
    let held_at = last.saturating_sub(hold);
    let on_grid = points.contains(&held_at);
    if hold > 0 && held_at >= v.seg_first_it() && !on_grid {
        let at = points.partition_point(|&p| p > held_at);
        points.insert(at, held_at);
    }
    for t in points {
        if !alive.iter().any(|a| *a) {
            break;
        }
        let need_ci = crits.iter().zip(&alive).any(|(c, a)| *a && c.needs_ci);
        let f = window::fit(v, t, rc, cycle, &tolerance(rc, mag.at(t)));
        let st = window_stats(&f, mag.at(t), rc, need_ci);
        for (i, c) in crits.iter().enumerate() {
            match &st {
                Some(s) if alive[i] && c.kept_value(s) <= c.lim.value => {
                    trail[i].push((t, c.value(s) <= c.lim.value));
                }
                _ => alive[i] = false,
            }
        }
    }
    let dates = |t: i64| t == last || t != held_at || on_grid;
    let mut out = Dated { since: vec![], held: vec![], kept: vec![] };
    for tr in &trail {
        // The run of checkpoints from the end at which the reading holds.
        let lead = &tr[..tr.iter().take_while(|(_, h)| *h).count()];
        let mut since = lead.iter().rev().map(|(t, _)| *t).find(|t| dates(*t));
        let mut held = hold <= 0 || lead.iter().any(|(t, _)| *t <= held_at);
        // The latest run within the trail that held over a hold span. Not the oldest: that
        // one hangs on a longer chain of old checkpoints, whose windows change with the
        // cycle read at the end and leave the bounded look-back, and `since` jumped with it
        // (a clean run's from 1400 to 1650 after 2400 iterations).
        let anchor = tr
            .chunk_by(|a, b| a.1 == b.1)
            .find(|run| run[0].1 && run[0].0 - run[run.len() - 1].0 >= keep)
            .and_then(|run| run.iter().rev().map(|(t, _)| *t).find(|t| dates(*t)));
        let kept = anchor.is_some() && lead.is_empty();
        if anchor.is_some() {
            (since, held) = (anchor, true);
        }
        out.since.push(since);
        out.held.push(held);
        out.kept.push(kept);
    }
    out
}

/// The periodic component of a monitor: in the evidence window after its transient, or —
/// when the segment is long, nothing dominant was found and the monitor has left its
/// transient within the evidence window — over a longer look-back, so that periods too long
/// for five cycles in the evidence window are found.
fn periodic(v: &View<'_>, rc: &Resolved) -> Option<Periodic> {
    // The look-back from `cut` (its MSER-5 truncation) on, unless too little is left.
    let post = |long: &Window, cut: usize| {
        let post = Window { its: long.its[cut..].to_vec(), vals: long.vals[cut..].to_vec() };
        if post.len() >= 64 { post } else { long.clone() }
    };
    let horizon = rc.window as f64;
    let good = |p: &Option<Periodic>| {
        p.as_ref().is_some_and(|p| p.osc.p_value < OSC_ALPHA && p.sustained_and_dominant(horizon))
    };
    // The envelope (does it keep its amplitude?) over the whole look-back, transient
    // included: a ring-down shows best over the longest stretch.
    let e = rc.evidence();
    let near_win = v.window(e);
    let near_cut = stationarity::mser5_truncation(&near_win.vals);
    let near_post = post(&near_win, near_cut.as_ref().map_or(0, |t| t.d));
    let near = oscillation::find(&near_post).map(|p| oscillation::with_envelope_over(p, &near_win));
    // A component whose period is pinned at the longest the window resolves may be a longer
    // cycle seen at the wrong period (and so at too small an amplitude): it is kept, and a
    // longer look-back that finds the component unpinned replaces it.
    let pinned = |p: &Option<Periodic>| p.as_ref().is_some_and(|p| p.at_longest_period());
    let mut kept = None;
    if good(&near) {
        if !pinned(&near) {
            return near;
        }
        kept = near;
    }
    // Look back over 2, 4, … up to LONG_LOOKBACK_WINDOWS evidence windows, the shortest
    // first: the longest look-back of a long run reaches back into its start-up, whose
    // approach then dominates the variance and hides a cycle that began later.
    // Only once the monitor has left its transient within the evidence window: while
    // MSER-5 there still finds its minimum at the end of its search (White 1997: too short
    // to call stationary), the monitor is on its way to a level, and a look-back reaching
    // further into its past adds more of that way — a plateau, a kink, an earlier approach —
    // whose shape, less the quadratic trend, reads as slow "cycles" (seen on a
    // pseudo-plateau run: period 191, ±0.56 %, `oscillating` while drag still moved 19 %).
    let span = v.last_it().saturating_sub(v.seg_first_it()) as usize;
    let settling = near_cut.is_some_and(|t| t.at_limit());
    let mut mult = 2;
    while !settling && mult <= LONG_LOOKBACK_WINDOWS && span > mult * e / 2 + e {
        let far_win = v.window(mult * e);
        let far =
            oscillation::find(&post(&far_win, stationarity::mser5(&far_win.vals).unwrap_or(0)))
                .map(|p| oscillation::with_envelope_over(p, &far_win));
        if good(&far) {
            if !pinned(&far) {
                return far;
            }
            kept = kept.or(far);
        }
        mult *= 2;
    }
    kept.or(near)
}

/// Judge one monitor; pushes criteria, findings and the summary into `sink`. `round_off`:
/// the monitor carries only round-off next to its companions (reported, not judged).
pub fn analyse(
    name: &str,
    v: &View<'_>,
    rc: &Resolved,
    mag: &Magnitude,
    round_off: Option<f64>,
    hold: Hold,
    sink: &mut Sink,
) -> MonitorFacts {
    health::non_finite(name, v, sink);
    let last_it = v.last_it();
    if let Some(companions) = round_off {
        let mut f = finding(FindingKind::RoundOff, name, v.seg_first_it(), last_it, "magnitude");
        f.value = mag.max();
        f.threshold = Some(scale::ROUNDOFF_SHARE * companions);
        f.detail = format!(
            "{name} never exceeds {} while the other monitors reach {}: round-off only (an out-of-plane component?), reported, not judged",
            num(mag.max()),
            num(companions),
        );
        sink.findings.push(f);
        sink.monitors.push(MonitorSummary {
            series: name.into(),
            last: v.vals[v.len() - 1],
            mean: f64::NAN,
            ci_half: f64::NAN,
            window_first: last_it,
            window_last: last_it,
            drift_pct: f64::NAN,
            band_pct: f64::NAN,
            round_off: true,
            ..Default::default()
        });
        return MonitorFacts { drift_pct: f64::NAN, ..Default::default() };
    }
    if !health::blowup(name, v, rc.evidence(), false, sink) {
        health::departure_growth(name, v, rc, mag, sink);
    }
    let crash_sign = health::end_jump(name, v, rc.evidence(), CRASH_JUMP);

    let per = periodic(v, rc);
    let cycle = per.as_ref().filter(|p| p.osc.p_value < OSC_ALPHA).map(|p| window::Cycle {
        period: p.period,
        decisive: p.sustained_and_dominant(rc.window as f64),
    });
    health::growing_cycle(name, v, rc, Some(mag), sink);

    let fitted = window::fit(v, last_it, rc, cycle, &tolerance(rc, mag.at(last_it)));
    let win = &fitted.window;
    let st = window_stats(&fitted, mag.at(last_it), rc, true);
    let crits = crits(rc);
    let readings: Vec<(f64, f64)> = crits
        .iter()
        .map(|c| st.as_ref().map_or((f64::NAN, f64::NAN), |s| (c.value(s), c.kept_value(s))))
        .collect();
    let Dated { since: sinces, held, kept } = date_all(v, rc, mag, cycle, &crits, &readings, hold);
    // A kept criterion shows its kept reading (the one it meets).
    let values: Vec<f64> =
        readings.iter().zip(&kept).map(|((x, k), kept)| if *kept { *k } else { *x }).collect();
    let drift_kept = crits.iter().zip(&kept).any(|(c, k)| *k && c.name == "drift");
    let mut facts = MonitorFacts {
        crash_sign,
        drift_pct: f64::NAN,
        window: fitted.length,
        held: held.iter().all(|h| *h),
        ..Default::default()
    };
    for ((c, value), since) in crits.iter().zip(&values).zip(sinces) {
        let unit = if c.absolute { "" } else { "%" };
        let mut res =
            criteria::result(c.name, name, Comparison::AtMost, c.lim, *value, unit, since);
        res.window = Some(fitted.length);
        if !res.met && !value.is_nan() {
            facts.failing.push(c.name);
        }
        sink.criteria.push(res);
    }

    let nan = f64::NAN;
    let mut summary = MonitorSummary {
        series: name.into(),
        last: v.vals[v.len() - 1],
        mean: nan,
        ci_half: nan,
        window_first: win.its.first().copied().unwrap_or(last_it),
        window_last: last_it,
        transient_end: fitted.transient_end,
        drift_pct: nan,
        band_pct: nan,
        iterative_error: None,
        extrapolated: None,
        window: fitted.length,
        ..Default::default()
    };
    if let Some(s) = &st {
        let drift = if drift_kept { s.kept } else { s.drift };
        facts.drift_pct = s.rel(drift);
        summary.mean = s.mean;
        summary.ci_half = s.ci_half;
        summary.drift_pct = s.rel(drift);
        summary.band_pct = s.rel(s.band);
        summary.reference = s.reference.0;
        summary.reference_value = s.reference.1;
        let before = sink.findings.len();
        drift_findings(name, win, s, rc, &crits, &facts.failing, sink);
        if let Some(f) = sink.findings.get(before) {
            facts.why = f.detail.clone();
        }
        let breaks = facts.failing.iter().any(|c| *c == "drift" || *c == "band");
        if let Some(p) = &per {
            oscillation_finding(name, p, s, rc, breaks, sink);
        }
        if let Some(e) = iterative::block_estimate(&win.vals) {
            summary.iterative_error = Some(e.error);
            summary.extrapolated = Some(e.extrapolated);
            let mut f =
                finding(FindingKind::IterativeError, name, win.its[0], last_it, "iterative_error");
            f.value = e.error;
            f.detail = format!(
                "{name} approaches {} geometrically (ratio {} per iteration): estimated iterative error {} ({} {})",
                num(e.extrapolated),
                num(e.lambda),
                num(e.error),
                pct(s.rel(e.error)),
                scale::describe(s.reference.0, s.reference.1),
            );
            sink.findings.push(f);
        }
    }
    sink.monitors.push(summary);
    facts
}

fn drift_findings(
    name: &str,
    win: &Window,
    s: &Stats,
    rc: &Resolved,
    crits: &[Crit],
    failing: &[&'static str],
    sink: &mut Sink,
) {
    let (first, last) = (win.its[0], win.its[win.len() - 1]);
    let of = scale::describe(s.reference.0, s.reference.1);
    let over = format!("the last {} iterations (it {first}–{last})", s.length);
    for &crit in failing {
        let Some(c) = crits.iter().find(|c| c.name == crit) else { continue };
        let value = c.value(s);
        let show = |x: f64| if c.absolute { num(x) } else { format!("{} {of}", pct(x)) };
        let limit = if c.absolute { num(c.lim.value) } else { pct(c.lim.value) };
        let (stat, detail) = match crit {
            "drift" if s.remaining => (
                "drift_pct",
                format!(
                    "{name} is still on its way: its trend projects about {} more change after {over}; limit {limit}",
                    show(value)
                ),
            ),
            "drift" => (
                "drift_pct",
                format!(
                    "{name} drifts {} over {over}; limit {limit}",
                    if c.absolute {
                        num(s.drift)
                    } else {
                        format!("{} {of}", signed_pct(s.rel(s.drift)))
                    }
                ),
            ),
            "band" => (
                "band_pct",
                format!("{name} moves within a band of {} over {over}; limit {limit}", show(value)),
            ),
            _ => (
                "ci_pct",
                format!("the mean of {name} is known to ±{} (95 %); limit ±{limit}", show(value)),
            ),
        };
        let mut f = finding(FindingKind::MonitorDrift, name, first, last, stat);
        f.value = value;
        f.threshold = Some(c.lim.value);
        f.detail = detail;
        sink.findings.push(f);
    }
    let _ = rc;
}

/// The oscillation finding of a monitor. Decisive when the component is significant,
/// dominant, sustained (not a ring-down), material (its peak-to-peak amplitude alone reaches
/// the band limit) and the drift or band criterion fails.
fn oscillation_finding(
    name: &str,
    p: &Periodic,
    s: &Stats,
    rc: &Resolved,
    breaks: bool,
    sink: &mut Sink,
) {
    if !(p.osc.p_value < OSC_ALPHA) {
        return;
    }
    let amp_pct = s.rel(p.osc.amplitude);
    let material = match rc.band_abs {
        Some(l) => 2.0 * p.osc.amplitude >= l.value,
        None => 2.0 * amp_pct >= OSC_MONITOR_BAND_SHARE * rc.band.value,
    };
    let horizon = rc.window as f64;
    let decisive = breaks && material && p.sustained_and_dominant(horizon);
    let note = if decisive {
        String::new()
    } else if p.ring_down(horizon) {
        let ratio = p.envelope.map_or(f64::NAN, |e| e.ratio);
        format!(
            ", ringing down (amplitude ×{} over the window): settling, not a limit cycle",
            num(ratio)
        )
    } else if !p.dominant() {
        format!(", a weak component ({} of the variance)", pct(100.0 * p.share))
    } else if !material {
        ", too small against the band limit".to_string()
    } else if p.envelope.is_none() {
        ", too few cycles yet to tell whether it lasts".to_string()
    } else if !p.lasts(horizon) {
        ", its amplitude not yet shown to last".to_string()
    } else {
        ", inside its limits".to_string()
    };
    let mut f = finding(FindingKind::Oscillation, name, p.first, p.last, "fisher_g");
    f.value = p.osc.g;
    f.threshold = Some(super::residual::fisher_critical(p.osc.m));
    f.p_value = Some(p.osc.p_value);
    f.period = Some(p.period);
    f.amplitude = Some(amp_pct);
    f.supports = decisive.then_some(Verdict::Oscillating);
    f.detail = format!(
        "{name} oscillates with a period of {} iterations and ±{} {}{note} (Fisher's g = {}, p = {}; {} of the variance)",
        num(p.period),
        pct(amp_pct),
        scale::describe(s.reference.0, s.reference.1),
        num(p.osc.g),
        num(p.osc.p_value),
        pct(100.0 * p.share),
    );
    sink.findings.push(f);
}

/// Indicators: health checks only (non-finite values, blow-up, pinned at a limit).
pub fn analyse_indicator(
    name: &str,
    v: &View<'_>,
    window: usize,
    sink: &mut Sink,
) -> Option<String> {
    health::non_finite(name, v, sink);
    health::blowup(name, v, window, true, sink);
    health::end_jump(name, v, window, CRASH_JUMP)
}

#[cfg(test)]
mod tests {
    use super::*;
    use crate::judge::types::{Criteria, SeriesInput};
    use crate::record::Role;
    use std::borrow::Cow;

    const NO_HOLD: Hold = Hold { call: 0, keep: 0 };

    #[test]
    fn checkpoint_dating_is_bounded_on_a_fixed_grid() {
        // A monitor that steps from 2 to 1 at it 1000 and is constant after: the band holds
        // for windows that start after the step.
        let its: Vec<i64> = (1..=3000).collect();
        let vals: Vec<f64> = its.iter().map(|&i| if i < 1000 { 2.0 } else { 1.0 }).collect();
        let c = Criteria { window: Some(100), ..Default::default() };
        let rc = criteria::resolve(&c, "m", Role::Monitor);
        let s = SeriesInput {
            name: Cow::Borrowed("m"),
            iterations: Cow::Borrowed(&its),
            values: Cow::Borrowed(&vals),
            segment_starts: vec![0],
            ..Default::default()
        };
        let v = View::new(&s).expect("non-empty");
        let mag = Magnitude::new(&v);
        let band = Crit {
            name: "band",
            lim: Limit { value: 0.5, default: true },
            absolute: false,
            metric: |s| s.band,
            kept: |s| s.band,
            needs_ci: false,
        };
        let since =
            date_all(&v, &rc, &mag, None, std::slice::from_ref(&band), &[(0.0, 0.0)], NO_HOLD)
                .since;
        // Bounded look-back: the last iteration and 49 grid points of 10 iterations.
        assert_eq!(since, vec![Some(3000 - 490)]);
        let short = SeriesInput {
            values: Cow::Borrowed(&vals[..1207]),
            iterations: Cow::Borrowed(&its[..1207]),
            ..s.clone()
        };
        let v2 = View::new(&short).expect("non-empty");
        let mag2 = Magnitude::new(&v2);
        // Grid points 1200, 1190, …, 1100 hold (window (t−100, t] after the step); 1090 not.
        let d =
            date_all(&v2, &rc, &mag2, None, std::slice::from_ref(&band), &[(0.0, 0.0)], NO_HOLD)
                .since;
        assert_eq!(d, vec![Some(1100)]);
        // One more value does not move the date.
        let short3 = SeriesInput {
            values: Cow::Borrowed(&vals[..1208]),
            iterations: Cow::Borrowed(&its[..1208]),
            ..s.clone()
        };
        let v3 = View::new(&short3).expect("non-empty");
        let d3 = date_all(
            &v3,
            &rc,
            &Magnitude::new(&v3),
            None,
            std::slice::from_ref(&band),
            &[(0.0, 0.0)],
            NO_HOLD,
        )
        .since;
        assert_eq!(d3, vec![Some(1100)]);
        assert_eq!(
            date_all(&v2, &rc, &mag2, None, std::slice::from_ref(&band), &[(1.0, 1.0)], NO_HOLD)
                .since,
            vec![None]
        );
    }
}
