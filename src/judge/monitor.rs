//! Judging one monitor (a quantity of interest) over the final window of the latest segment:
//! drift, band and the confidence interval of the mean as criteria; the start-up transient
//! (MSER-5), oscillation and iterative error as evidence; and the blow-up rules. Indicators
//! get the health checks only.
//!
//! Drift and band are measured over the whole final window, exactly as the user-facing
//! criteria read ("over the last 500 iterations"): a transient that still reaches into the
//! window is a reason not to call the monitor settled. MSER-5 only decides which part of the
//! window the mean and its confidence interval describe.
//!
//! A window must span at least half the window length and hold 20 values before drift and
//! band are computed; before that they are NaN and not met (the run is too young to tell).
//! Drift is always the slope times the configured window length, so a half window is judged
//! on the same scale.

use super::criteria::{self, Limit, Resolved};
use super::iterative;
use super::limits::*;
use super::series::{View, Window};
use super::spectrum;
use super::stationarity;
use super::stats;
use super::text::{num, pct, signed_pct};
use super::types::{Comparison, FindingKind, MonitorSummary, Verdict};
use super::{Sink, finding, health};

/// What the run-level rules need to know about a monitor.
#[derive(Debug, Clone, Default)]
pub struct MonitorFacts {
    /// Names of the computed criteria that fail (`drift`, `band`, `ci`).
    pub failing: Vec<&'static str>,
    /// Signed drift over the window, percent (NaN when not computed).
    pub drift_pct: f64,
    pub crash_sign: Option<String>,
}

/// Window statistics of a monitor at one end iteration.
struct Stats {
    drift: f64,
    band: f64,
    mean: f64,
    ci_half: f64,
    transient: usize,
}

fn computed(win: &Window, w: usize) -> bool {
    win.span() as f64 >= 0.5 * w as f64 && win.len() >= 20
}

/// Drift and band of a window, and — with `full` — the MSER-5 transient, the mean after it
/// and the CI half-width of that mean.
fn window_stats(win: &Window, w: usize, full: bool) -> Option<Stats> {
    if !computed(win, w) {
        return None;
    }
    let drift = stationarity::drift_pct(&win.its_f64(), &win.vals, w as f64)?;
    let band = stationarity::band_pct(&win.vals)?;
    if !full {
        let mean = stats::mean(&win.vals)?;
        return Some(Stats { drift, band, mean, ci_half: f64::NAN, transient: 0 });
    }
    let d = stationarity::mser5(&win.vals).unwrap_or(0);
    let post = if win.len() - d >= 20 { &win.vals[d..] } else { &win.vals[..] };
    let mean = stats::mean(post)?;
    let ci_half = stationarity::mean_ci_half(post).unwrap_or(f64::NAN);
    Some(Stats { drift, band, mean, ci_half, transient: d })
}

/// One windowed criterion of a monitor.
struct Crit {
    name: &'static str,
    lim: Limit,
    metric: fn(&Stats) -> f64,
    needs_ci: bool,
}

fn ci_pct(s: &Stats) -> f64 {
    stationarity::relative_pct(s.ci_half, s.mean)
}

/// `since` of every criterion in one sweep over checkpoints `last, last − w/10, …` (at most
/// [`criteria::MAX_CHECKPOINTS`], not before the segment start): a criterion's `since` is the
/// oldest checkpoint of the unbroken run of checkpoints, from the end, at which it held for
/// the window ending there (`None` when it does not hold at the end). Each checkpoint's window
/// statistics are computed once for all criteria still holding; the sweep stops when none does.
fn date_all(v: &View<'_>, w: usize, crits: &[Crit], values: &[f64]) -> Vec<Option<i64>> {
    let last = v.last_it();
    let step = (w / 10).max(1) as i64;
    let floor = v.seg_first_it();
    let mut since: Vec<Option<i64>> =
        crits.iter().zip(values).map(|(c, x)| (*x <= c.lim.value).then_some(last)).collect();
    let mut alive: Vec<bool> = since.iter().map(Option::is_some).collect();
    for j in 1..criteria::MAX_CHECKPOINTS as i64 {
        let t = last.saturating_sub(j.saturating_mul(step));
        if t < floor || !alive.iter().any(|a| *a) {
            break;
        }
        let need_ci = crits.iter().zip(&alive).any(|(c, a)| *a && c.needs_ci);
        let st = window_stats(&v.window_map(t, w, |x| x), w, need_ci);
        for (i, c) in crits.iter().enumerate() {
            if !alive[i] {
                continue;
            }
            if st.as_ref().is_some_and(|s| (c.metric)(s) <= c.lim.value) {
                since[i] = Some(t);
            } else {
                alive[i] = false;
            }
        }
    }
    since
}

/// Judge one monitor; pushes criteria, findings and the summary into `sink`.
pub fn analyse(name: &str, v: &View<'_>, rc: &Resolved, sink: &mut Sink) -> MonitorFacts {
    health::non_finite(name, v, sink);
    health::blowup(name, v, rc.evidence(), false, sink);
    let crash_sign = health::end_jump(name, v, rc.evidence(), CRASH_JUMP);
    let w = rc.window;
    let last_it = v.last_it();
    let win = v.window(w);
    // The CI is always computed for the summary; it is a criterion only when configured.
    let st = window_stats(&win, w, true);

    let mut crits = vec![
        Crit { name: "drift", lim: rc.drift, metric: |s| s.drift.abs(), needs_ci: false },
        Crit { name: "band", lim: rc.band, metric: |s| s.band, needs_ci: false },
    ];
    if let Some(lim) = rc.ci {
        crits.push(Crit { name: "ci", lim, metric: ci_pct, needs_ci: true });
    }
    let values: Vec<f64> =
        crits.iter().map(|c| st.as_ref().map_or(f64::NAN, |s| (c.metric)(s))).collect();
    let sinces = date_all(v, w, &crits, &values);
    let mut facts = MonitorFacts { crash_sign, drift_pct: f64::NAN, ..Default::default() };
    for ((c, value), since) in crits.iter().zip(&values).zip(sinces) {
        let res = criteria::result(c.name, name, Comparison::AtMost, c.lim, *value, "%", since);
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
        transient_end: None,
        drift_pct: nan,
        band_pct: nan,
        iterative_error: None,
        extrapolated: None,
    };
    if let Some(s) = &st {
        facts.drift_pct = s.drift;
        summary.mean = s.mean;
        summary.ci_half = s.ci_half;
        summary.drift_pct = s.drift;
        summary.band_pct = s.band;
        summary.transient_end = (s.transient > 0).then(|| win.its[s.transient.min(win.len() - 1)]);
        drift_findings(name, &win, s, rc, &facts.failing, sink);
        // The oscillation test looks at the evidence window (at least 500 iterations) after
        // the start-up transient MSER-5 finds in it.
        let long = v.window(rc.evidence());
        let cut = stationarity::mser5(&long.vals).unwrap_or(0);
        let post = Window { its: long.its[cut..].to_vec(), vals: long.vals[cut..].to_vec() };
        let post = if post.len() >= 64 { post } else { long };
        let band_breaks = facts.failing.iter().any(|c| *c == "drift" || *c == "band");
        oscillation(name, &post, s.mean, rc.band.value, band_breaks, sink);
        if let Some(e) = iterative::block_estimate(&win.vals) {
            summary.iterative_error = Some(e.error);
            summary.extrapolated = Some(e.extrapolated);
            let mut f =
                finding(FindingKind::IterativeError, name, win.its[0], last_it, "iterative_error");
            f.value = e.error;
            f.detail = format!(
                "{name} approaches {} geometrically (ratio {} per iteration): estimated iterative error {} ({} of the value)",
                num(e.extrapolated),
                num(e.lambda),
                num(e.error),
                pct(stationarity::relative_pct(e.error, e.extrapolated)),
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
    failing: &[&'static str],
    sink: &mut Sink,
) {
    let (first, last) = (win.its[0], win.its[win.len() - 1]);
    for &crit in failing {
        let (stat, value, lim, detail) = match crit {
            "drift" => (
                "drift_pct",
                s.drift,
                rc.drift.value,
                format!(
                    "{name} drifts {} over the last {} iterations; limit {}",
                    signed_pct(s.drift),
                    rc.window,
                    pct(rc.drift.value)
                ),
            ),
            "band" => (
                "band_pct",
                s.band,
                rc.band.value,
                format!(
                    "{name} moves within a band of {} over the last {} iterations; limit {}",
                    pct(s.band),
                    rc.window,
                    pct(rc.band.value)
                ),
            ),
            _ => {
                let v = stationarity::relative_pct(s.ci_half, s.mean);
                let lim = rc.ci.map_or(f64::NAN, |l| l.value);
                (
                    "ci_pct",
                    v,
                    lim,
                    format!(
                        "the mean of {name} is known to ±{} (95 %); limit ±{}",
                        pct(v),
                        pct(lim)
                    ),
                )
            }
        };
        let mut f = finding(FindingKind::MonitorDrift, name, first, last, stat);
        f.value = value;
        f.threshold = Some(lim);
        f.detail = detail;
        sink.findings.push(f);
    }
}

fn oscillation(
    name: &str,
    win: &Window,
    mean: f64,
    band_limit: f64,
    breaks: bool,
    sink: &mut Sink,
) {
    let k = win.len();
    if k < OSC_MIN_POINTS {
        return;
    }
    let skip = usize::from(k % 2 == 0);
    let vals = &win.vals[skip..];
    let its = &win.its[skip..];
    let Some(o) = spectrum::find_oscillation(vals) else {
        return;
    };
    if !o.significant(OSC_ALPHA) {
        return;
    }
    let spacing = its[its.len() - 1].saturating_sub(its[0]) as f64 / (its.len() - 1) as f64;
    let period = o.period * spacing;
    let amp_pct = stationarity::relative_pct(o.amplitude, mean);
    let decisive = breaks && 2.0 * amp_pct >= OSC_MONITOR_BAND_SHARE * band_limit;
    let mut f = finding(FindingKind::Oscillation, name, its[0], its[its.len() - 1], "fisher_g");
    f.value = o.g;
    f.threshold = Some(super::residual::fisher_critical(o.m));
    f.p_value = Some(o.p_value);
    f.period = Some(period);
    f.amplitude = Some(amp_pct);
    f.supports = decisive.then_some(Verdict::Oscillating);
    let verdict_note = if decisive {
        ""
    } else if !breaks {
        ", inside its limits"
    } else {
        ", too small to explain the band"
    };
    f.detail = format!(
        "{name} oscillates with a period of {} iterations and ±{}{verdict_note} (Fisher's g = {}, p = {})",
        num(period),
        pct(amp_pct),
        num(o.g),
        num(o.p_value),
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
    use crate::judge::types::SeriesInput;
    use std::borrow::Cow;

    #[test]
    fn checkpoint_dating_is_bounded_and_stops_at_the_first_failure() {
        // A monitor that steps from 2 to 1 at it 1000 and is constant after: the band over a
        // 100-iteration window holds from the window ending at it 1099 on.
        let its: Vec<i64> = (1..=3000).collect();
        let vals: Vec<f64> = its.iter().map(|&i| if i < 1000 { 2.0 } else { 1.0 }).collect();
        let s = SeriesInput {
            name: Cow::Borrowed("m"),
            iterations: Cow::Borrowed(&its),
            values: Cow::Borrowed(&vals),
            segment_starts: vec![0],
            ..Default::default()
        };
        let v = View::new(&s).expect("non-empty");
        let band = Crit {
            name: "band",
            lim: Limit { value: 0.5, default: true },
            metric: |s| s.band,
            needs_ci: false,
        };
        let since = date_all(&v, 100, std::slice::from_ref(&band), &[0.0]);
        // Bounded look-back: 49 steps of 10 iterations from 3000.
        assert_eq!(since, vec![Some(3000 - 490)]);
        let short: Vec<f64> = vals[..1200].to_vec();
        let s2 = SeriesInput {
            values: Cow::Borrowed(&short),
            iterations: Cow::Borrowed(&its[..1200]),
            ..s.clone()
        };
        let v2 = View::new(&s2).expect("non-empty");
        assert_eq!(date_all(&v2, 100, std::slice::from_ref(&band), &[0.0]), vec![Some(1100)]);
        assert_eq!(date_all(&v2, 100, std::slice::from_ref(&band), &[1.0]), vec![None]);
    }
}
