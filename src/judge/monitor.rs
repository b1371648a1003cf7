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

use super::criteria::{self, Resolved};
use super::iterative;
use super::limits::*;
use super::oscillation::{self, Periodic};
use super::scale::{self, Magnitude};
use super::series::{View, Window};
use super::stationarity;
use super::text::{num, pct, signed_pct};
use super::types::{Comparison, FindingKind, MonitorSummary, Verdict};
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

mod windowed;

use windowed::{Crit, Dated, Stats, crits, date_all, tolerance, window_stats};
pub use windowed::{Hold, magnitude_from};

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
