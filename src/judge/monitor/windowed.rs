//! The windowed criteria of a monitor — drift, band and the confidence interval of the mean:
//! their readings for the window ending at an iteration ([`window_stats`]), and the sweep over
//! dating checkpoints that says since when each has held, whether for the hold span, and
//! whether a criterion that held is kept met on its best estimate ([`date_all`]).

use crate::judge::criteria::{self, Limit, Resolved};
use crate::judge::scale::{self, Magnitude};
use crate::judge::series::View;
use crate::judge::stationarity;
use crate::judge::stats;
use crate::judge::types::Reference;
use crate::judge::window;

/// Window statistics of a monitor at one end iteration.
pub(super) struct Stats {
    /// Signed drift, absolute units (the larger of the window change and the remaining
    /// change).
    pub(super) drift: f64,
    /// The remaining change was the larger reading.
    pub(super) remaining: bool,
    /// The drift read for keeping a call ([`date_all`]): the larger of the window change and
    /// the best estimate of the change still to come ([`window::Projection::central`]), at
    /// most `drift`.
    pub(super) kept: f64,
    pub(super) band: f64,
    pub(super) mean: f64,
    pub(super) ci_half: f64,
    pub(super) reference: (Reference, f64),
    pub(super) length: usize,
}

impl Stats {
    /// A quantity relative to the reference, percent.
    pub(super) fn rel(&self, a: f64) -> f64 {
        stationarity::relative_pct(a, self.reference.1)
    }
}

/// Statistics of the fitted window `f` (`None` with fewer than [`window::MIN_VALUES`] values,
/// or an adaptive window whose segment is too young, [`window::Fitted::young`]). The CI only
/// with `with_ci` (it costs an FFT).
pub(super) fn window_stats(
    f: &window::Fitted,
    magnitude: f64,
    rc: &Resolved,
    with_ci: bool,
) -> Option<Stats> {
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
pub(super) fn tolerance(rc: &Resolved, magnitude: f64) -> impl Fn(f64) -> f64 {
    let (abs, rel, scale) = (rc.drift_abs.map(|l| l.value), rc.drift.value, rc.scale);
    move |limit: f64| match abs {
        Some(a) => a,
        None => rel / 100.0 * scale::reference(limit, magnitude, scale).1,
    }
}

/// One windowed criterion of a monitor: its limit, whether it is absolute, and its metric.
pub(super) struct Crit {
    pub(super) name: &'static str,
    pub(super) lim: Limit,
    pub(super) absolute: bool,
    pub(super) metric: fn(&Stats) -> f64,
    /// The reading that keeps a criterion met once it has held ([`date_all`]).
    pub(super) kept: fn(&Stats) -> f64,
    pub(super) needs_ci: bool,
}

impl Crit {
    pub(super) fn value(&self, s: &Stats) -> f64 {
        self.in_units(s, (self.metric)(s))
    }

    pub(super) fn kept_value(&self, s: &Stats) -> f64 {
        self.in_units(s, (self.kept)(s))
    }

    fn in_units(&self, s: &Stats, v: f64) -> f64 {
        if self.absolute { v } else { s.rel(v) }
    }
}

pub(super) fn crits(rc: &Resolved) -> Vec<Crit> {
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
pub fn magnitude_from(v: &View<'_>, rc: &Resolved) -> i64 {
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
pub(super) struct Dated {
    pub(super) since: Vec<Option<i64>>,
    /// The criterion has held from `hold` iterations before the last (every checkpoint in
    /// between included), or is kept met ([`Dated::kept`]).
    pub(super) held: Vec<bool>,
    /// The criterion is met by its kept reading: it held over a hold span earlier and its
    /// kept reading has stayed within the limit since.
    pub(super) kept: Vec<bool>,
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
pub(super) fn date_all(
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
