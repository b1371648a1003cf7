//! Iterations a falling residual still needs to reach its target, from its recent rate, with a
//! range.
//!
//! A fit over the whole evidence window reaches back into the early, slower (or faster) part
//! of the history and extrapolates a rate the residual no longer has. The estimate here uses
//! the recent half of the latest segment ([`RECENT_SHARE`], between [`MIN_RECENT`] and the
//! evidence window), the same autocorrelation-aware trend as the stall test
//! ([`super::trend::fit`]), and says how uncertain it is: the range comes from the 95 %
//! interval of the rate. No estimate is made when that interval includes zero (the residual
//! is not known to be falling), nor while the segment is younger than [`MIN_RECENT`]
//! iterations — and the judge drops every estimate while anything argues for divergence.

use super::series::View;
use super::trend::{self, Trend};

/// Share of the latest segment (so far) whose rate is extrapolated (ours: recent enough to
/// leave most of the start-up out, long enough to average the noise of the residuals).
pub const RECENT_SHARE: f64 = 0.5;

/// Fewest iterations the rate is measured over; a younger segment has no estimate (ours).
pub const MIN_RECENT: usize = 40;

/// An estimate of the iterations to a target.
#[derive(Debug, Clone, Copy, PartialEq)]
pub struct Eta {
    pub iterations: f64,
    /// Fewest and most iterations, from the 95 % interval of the rate.
    pub range: (f64, f64),
    /// Iterations the rate was measured over.
    pub window: usize,
    pub trend: Trend,
}

/// The recent window length at the last iteration of `v` (at most `evidence`).
pub fn recent_length(v: &View<'_>, evidence: usize) -> usize {
    let seg = v.last_it().saturating_sub(v.seg_first_it()).saturating_add(1).max(1) as f64;
    ((RECENT_SHARE * seg) as usize).clamp(MIN_RECENT, evidence.max(MIN_RECENT))
}

/// Estimate the iterations until log10 of the residual `v` reaches `target_log10`.
///
/// The printed values, not their trend, must stay below the target, so the trend has to
/// reach [`NOISE_SDS`] standard deviations of the noise about it below the target. And when
/// the rate of the second half of the recent window differs from the first by more than two
/// standard errors of the difference, the second half's rate is extrapolated (and the same
/// question is asked of that half, while its halves hold `MIN_RECENT / 2` values).
pub fn estimate(v: &View<'_>, target_log10: f64, evidence: usize) -> Option<Eta> {
    let len = recent_length(v, evidence);
    let win = v.window_map(v.last_it(), len, |x| if x > 0.0 { x.log10() } else { f64::NAN });
    // A segment younger than MIN_RECENT iterations has no rate yet: a few iterations after a
    // restart the residuals fall back from its kick many times faster than they converge.
    if win.span() + 1 < MIN_RECENT as i64 {
        return None;
    }
    // When the rate changed significantly within the recent window (convergence slowing
    // down, or picking up after a plateau), the rate of its second half is the recent one —
    // and, the same question asked of that half, of its own second half, as long as the
    // halves hold MIN_RECENT / 2 values each: a plateau that ended in the last fifth of the
    // window leaves part of itself in the second half, and a fall back from a start-up rise
    // slows down all the way.
    let (mut its, mut vals) = (&win.its[..], &win.vals[..]);
    let mut t = trend::fit(its, vals)?;
    // The recent window itself is always asked (a sparse log's holds few values).
    loop {
        let mid = its.len() / 2;
        let (Some(a), Some(b)) =
            (trend::fit(&its[..mid], &vals[..mid]), trend::fit(&its[mid..], &vals[mid..]))
        else {
            break;
        };
        let changed = (b.slope_dec_per_kit - a.slope_dec_per_kit).abs()
            > 2.0 * a.se_dec_per_kit.hypot(b.se_dec_per_kit);
        if !(b.ci.1 < 0.0 && changed) {
            break;
        }
        (its, vals, t) = (&its[mid..], &vals[mid..], b);
        if its.len() < MIN_RECENT {
            break;
        }
    }
    let window = usize::try_from(its[its.len() - 1] - its[0] + 1).unwrap_or(0);
    let gap = t.fitted_last - (target_log10 - NOISE_SDS * t.resid_sd);
    if !(t.ci.1 < 0.0 && gap > 0.0 && t.fitted_last > target_log10) {
        return None;
    }
    let at = |rate: f64| gap / -rate * 1000.0;
    let iterations = at(t.slope_dec_per_kit);
    let range = (at(t.ci.0), at(t.ci.1));
    (iterations.is_finite() && range.0.is_finite() && range.1.is_finite()).then_some(Eta {
        iterations,
        range,
        window,
        trend: t,
    })
}

/// Standard deviations of the noise about the trend the trend must fall below the target
/// (ours: about two, so that the printed values stay below it).
pub const NOISE_SDS: f64 = 2.0;

#[cfg(test)]
mod tests {
    use super::*;
    use crate::judge::series::tests::input;

    /// ±0.001 decades, alternating: a little noise for the trend's error.
    fn wobble(i: i64) -> f64 {
        if i % 2 == 0 { 1e-3 } else { -1e-3 }
    }

    /// A residual at `level(i)` decades at each iteration of `its`, with the [`wobble`].
    fn wobbled(its: &[i64], level: impl Fn(f64) -> f64) -> Vec<f64> {
        its.iter().map(|&i| 10f64.powf(level(i as f64) + wobble(i))).collect()
    }

    #[test]
    fn the_recent_rate_decides_not_the_early_one() {
        // Slow for 600 iterations (−0.5 dec/kit), then −3 dec/kit for 400: from −1.5 at
        // it 1000 to a target of −4.5 it takes 1000 iterations at the recent rate.
        let its: Vec<i64> = (1..=1000).collect();
        let vals =
            wobbled(&its, |i| if i <= 600.0 { -0.0005 * i } else { -0.3 - 0.003 * (i - 600.0) });
        let s = input(its, vals, vec![0]);
        let v = View::new(&s).expect("non-empty");
        let e = estimate(&v, -4.5, 500).expect("falling");
        // The recent half (its 501–1000) holds the change of rate at it 600: its second half.
        assert_eq!(e.window, 250);
        // The ±0.001-decade alternation puts the target 0.002 decades further: +0.7 it.
        assert!((e.iterations - 1000.0).abs() < 5.0, "{e:?}");
        assert!(e.range.0 <= e.iterations && e.iterations <= e.range.1);
        // Already below the target: nothing to estimate.
        assert!(estimate(&v, -1.0, 500).is_none());
    }

    #[test]
    fn a_plateau_that_ended_late_in_the_window_leaves_the_rate_after_it() {
        // −3 dec/kit to it 400, a plateau to it 900, then −3 dec/kit again (the exit from a
        // pseudo-plateau in the last fifth of the recent window, its 501–1000). From −1.5
        // at it 1000 to −4.5 it takes 1000 iterations at −3 dec/kit. One halving read the
        // rate over its 751–1000, two thirds of it still plateau: about 1.1 dec/kit and
        // 2700 iterations. Halving while the rate keeps changing reaches the fall after it.
        let its: Vec<i64> = (1..=1000).collect();
        let vals = wobbled(&its, |x| -0.003 * x.min(400.0) - 0.003 * (x - 900.0).max(0.0));
        let s = input(its, vals, vec![0]);
        let v = View::new(&s).expect("non-empty");
        let e = estimate(&v, -4.5, 500).expect("falling");
        assert!((e.iterations - 1000.0).abs() < 100.0, "{e:?}");
        assert!(e.window <= 100, "{e:?}");
    }

    #[test]
    fn a_segment_younger_than_the_fewest_iterations_has_no_rate() {
        // Restart seed 13006 of the synthetic runs, in small: a steady −2 dec/kit, then a
        // restart from an earlier checkpoint whose kick (0.8 decades) the residual falls
        // back from within a few iterations. Nine iterations after the restart the
        // estimate read that fall (76 iterations to a target 907 away); the segment has no
        // rate until it spans MIN_RECENT iterations, and by then the kick is gone.
        let mut its: Vec<i64> = (1..=900).collect();
        let mut vals: Vec<f64> = its.iter().map(|&i| 10f64.powf(-0.002 * i as f64)).collect();
        let restart = its.len();
        let after: Vec<i64> = (754..=850).collect();
        vals.extend(wobbled(&after, |x| -0.002 * x + 0.8 * (-(x - 754.0) / 5.0).exp()));
        its.extend(after);
        let at = |k: usize| {
            let s =
                input(its[..restart + k].to_vec(), vals[..restart + k].to_vec(), vec![0, restart]);
            let v = View::new(&s).expect("non-empty");
            estimate(&v, -4.0, 500)
        };
        assert!(at(9).is_none(), "{:?}", at(9));
        assert!(at(MIN_RECENT - 1).is_none());
        // Once the kick has died out (e-folding 5 iterations): from −1.67 at it 833 to −4 at
        // −2 dec/kit, plus two noise deviations, about 1170 iterations.
        let e = at(80).expect("a rate");
        assert!((e.iterations - 1170.0).abs() < 120.0, "{e:?}");
    }
}
