//! The window a monitor's criteria are computed over, fitted to the run.
//!
//! A fixed 500-iteration window judges the start-up of a 600-iteration run instead of its
//! settled state, and on a healthy 1000-iteration run it holds the `converged` call back for
//! hundreds of iterations after the monitors settled. Unless the user sets `window` (then it
//! is used exactly as given), the window is chosen in three steps at every end iteration `t`:
//!
//! 1. **Upper bound** `U`: the configured length (default 500), and for a short segment at
//!    most half of it so far ([`SHORT_RUN_SHARE`]) — the second half of a short run is where
//!    its settled state can be.
//! 2. **Transient**: MSER-5 (White 1997; Franklin & White 2008) on the values of that upper
//!    window finds where the start-up transient inside it ends; the window keeps what follows.
//!    MSER never cuts more than half, so the window is at least `U/2`. A monitor still
//!    drifting through the whole window is not let off by the shorter window: its drift
//!    criterion also counts the change its trend projects over the upper window
//!    ([`Projection`]).
//!    When the upper window shows a monitor still approaching its value (see [`Projection`]),
//!    the transient is known better than MSER can tell: it lasts until the monitor comes
//!    within the drift tolerance of the value it is heading for, and the window keeps what
//!    follows.
//! 3. **Lower bound** `L`: at least [`MIN_WINDOW`] iterations (enough values for the drift
//!    regression and the 20 batch means of the confidence interval), at least
//!    [`MIN_VALUES`] values however far apart a sparse log prints them (the upper bound
//!    grows to hold them too, as far as the solution is old), and at least two periods of a
//!    periodic component found in the monitor, so the band sees whole cycles.
//!
//! 4. **Enough data**: the upper window is as long as the solution is old (a restart from a
//!    checkpoint numbers its iterations on, so the run's first iteration dates it), but only
//!    the latest segment's values are used; a segment younger than [`required`] leaves the
//!    criteria unjudged rather than judged on the restart's kick.
//!
//! The window depends only on the values up to `t`, so a criterion dated at an earlier
//! checkpoint is judged on the same window whether the run is read at once or as it grows.

use super::criteria::Resolved;
use super::series::{View, Window};
use super::stationarity;
use super::stats;

/// Fewest iterations of an adaptive window (ours: 20 batch means of at least 2 values, and a
/// regression over 50 points has a slope standard error small enough for 0.1 %).
pub const MIN_WINDOW: usize = 50;

/// Fewest values a window's drift and band are computed from (ours: a regression slope over
/// ten values, and their range; the optional confidence interval of the mean asks for 20 of
/// its own, [`stationarity::mean_ci_half`]). A log written every few iterations needs a
/// window that many samples long, not [`MIN_WINDOW`] iterations: 50 iterations of a log
/// printed every 10 hold five values.
pub const MIN_VALUES: usize = 10;

/// A short segment's adaptive window spans at most this share of it (ours: the second half
/// of a short run).
pub const SHORT_RUN_SHARE: f64 = 0.5;

/// The window of a monitor at `t` and where the transient MSER-5 removed ends (`None` when
/// nothing was removed).
#[derive(Debug, Clone, Default, PartialEq)]
pub struct Fitted {
    pub window: Window,
    /// The window less a known cycle (`None` without one): what the drift is read from.
    pub clean: Option<Window>,
    pub transient_end: Option<i64>,
    /// The nominal length in iterations the window stands for: its span plus one sample
    /// spacing (the configured length for an explicit window).
    pub length: usize,
    /// Where the monitor is heading, from the upper window.
    pub projection: Option<Projection>,
    /// The segment holds less than [`required`] of the upper window: too young to judge
    /// (only after a restart, whose segment is younger than the solution).
    pub young: bool,
}

/// Iterations of data an adaptive window needs before its criteria mean anything: half the
/// upper window (what MSER may leave of it), at least [`MIN_WINDOW`]. A run's first segment
/// always has it (the upper window is at most half of the run); a segment restarted from a
/// checkpoint late in a run does not until it is that old: until then the window sees the
/// kick of the restart and not where the monitor is going.
pub fn required(u: usize) -> usize {
    (u / 2).max(MIN_WINDOW).min(u)
}

/// The upper bound `U` at end iteration `t` (the configured length when explicit).
pub fn upper(v: &View<'_>, t: i64, rc: &Resolved) -> usize {
    // How far the solution has come: a solver restarted from a checkpoint numbers its
    // iterations on from there, so the run's first iteration (not the segment's) dates the
    // start-up; a restart from scratch starts again at a low number.
    let first = v.its[0].min(v.seg_first_it());
    let age = t.saturating_sub(first).saturating_add(1);
    let u = upper_for(rc.window, rc.window_explicit, age);
    if rc.window_explicit {
        return u;
    }
    // A log written every few iterations: the upper window holds MIN_VALUES of the segment's
    // samples (as far as the solution is old), however many iterations that spans.
    u.max(v.span_of(MIN_VALUES, t).min(usize::try_from(age).unwrap_or(0)))
}

/// The upper bound for a configured `window` on a solution `age` iterations old.
pub fn upper_for(window: usize, explicit: bool, age: i64) -> usize {
    if explicit {
        return window;
    }
    let short = (SHORT_RUN_SHARE * age.max(1) as f64) as usize;
    window.min(short.max(MIN_WINDOW))
}

/// Iterations every criterion must have held before a run that goes on is called
/// `converged`: a tenth of the upper window (50 iterations by default, fewer on a short run).
/// A statistic that has just crossed its limit may be noise at the limit (a residual
/// printed just under its target, a drift just under its limit); one that has stayed within
/// it over several dating checkpoints describes a state. Requiring a criterion to hold over
/// consecutive iterations before declaring convergence is common practice (no source).
pub fn hold(window: usize, explicit: bool, age: i64) -> i64 {
    (upper_for(window, explicit, age) / 10).max(1) as i64
}

/// Where a monitor is heading, from the trend of the last two thirds of its upper window.
///
/// A monitor approaching its value geometrically (error `e·λ^i`, the picture behind the
/// eigenvalue estimate of Ferziger & Perić) has a slope that shrinks by the same factor over
/// equal spans: with least-squares slopes `s₁`, `s₂`, `s₃` over the three thirds (one sign,
/// shrinking from third to third, the last step beyond two standard errors),
/// `s₃/s₂ = e^{−Δ/τ}` (`Δ` the distance of the thirds' centres) gives the decay time `τ`, and
/// the change still to come is about `s₃·τ`. The horizon `τ` is trusted up to
/// [`HORIZON_WINDOWS`] upper windows only when both slopes stand clearly out of the noise
/// (four standard errors, widened for autocorrelation): otherwise — noise, or a slope that
/// does not shrink — it is the upper window itself. Without a decay, the rate carried over
/// it is the smaller of the last third's slope and the last two thirds' when both point the
/// same way and the last third's stands beyond two standard errors, and nothing otherwise:
/// a trend the monitor still follows shows in both readings, while a swing of red noise or
/// of a slow ripple at the end of the window steepens only the last third (carried over a
/// whole window, it read as a drift of 0.1 % on runs whose band was 0.05 %). A clear decay
/// is projected with a margin for the uncertainty of the two slopes (their relative
/// standard errors added), so that an estimate at the limit does not pass for one below it.
#[derive(Debug, Clone, Copy, PartialEq)]
pub struct Projection {
    /// Signed change still to come (units of the monitor).
    pub remaining: f64,
    /// The value the monitor is heading for.
    pub limit: f64,
    /// The slope shrinks significantly from the middle to the last third (a decay was seen).
    pub decaying: bool,
    /// Signed change still to come, best estimate: while the slopes of the three thirds
    /// shrink, the decay they give counted from the window's end, without a margin
    /// (otherwise `remaining`). It keeps a call made ([`super::monitor`]), it does not make
    /// one.
    pub central: f64,
}

/// A clear decay is projected over at most this many upper windows (ours: a slow approach
/// that the window sees only the start of is not let off).
pub const HORIZON_WINDOWS: f64 = 4.0;

/// Project `outer` (values by iteration); `None` with fewer than 30 values.
pub fn project(outer: &Window) -> Option<Projection> {
    let n = outer.len();
    if n < 30 {
        return None;
    }
    let third = n / 3;
    let (a, b) = (n - 2 * third, n - third);
    let x = outer.its_f64();
    let early = slope(&x[..a], &outer.vals[..a]);
    let (s2, e2, c2, _) = slope(&x[a..b], &outer.vals[a..b])?;
    let (s3, e3, c3, end) = slope(&x[b..], &outer.vals[b..])?;
    let s1 = early.map_or(f64::NAN, |t| t.0);
    let gap = c3 - c2;
    let span = outer.span() as f64 + outer.spacing();
    // A decay must be more than noise: one sign over the three thirds, each slope smaller
    // than the one before, the last step beyond two standard errors of the difference (a
    // steady creep keeps its slope; slow red noise wanders, it does not decay steadily).
    let decaying = s2 * s3 > 0.0
        && s1 * s2 > 0.0
        && s1.abs() > s2.abs()
        && s2.abs() - s3.abs() > 2.0 * e2.hypot(e3)
        && gap > 0.0;
    let clear = s2.abs() > 4.0 * e2 && s3.abs() > 4.0 * e3;
    let cap = if clear { HORIZON_WINDOWS * span } else { span };
    let horizon = if decaying { (gap / (s2 / s3).ln()).min(cap) } else { span };
    let margin = if clear && decaying { 1.0 + e3 / s3.abs() + e2 / s2.abs() } else { 1.0 };
    // Without a decay, the rate carried is the smaller of the two readings, and none when
    // they point different ways or the last third's is within its noise (see above).
    let rate = if decaying {
        s3
    } else {
        let s23 = stats::ols(&x[a..], &outer.vals[a..]).map_or(s3, |f| f.slope);
        let follows = s23 * s3 > 0.0 && s3.abs() > 2.0 * e3;
        if follows { s3.abs().min(s23.abs()).copysign(s3) } else { 0.0 }
    };
    let remaining = rate * horizon * margin;
    // The best estimate: the decay time from the first and last thirds' slopes (twice as far
    // apart as neighbours, so the same noise in the slopes moves it about half as much), the
    // slope at the window's end rather than at the last third's centre.
    let shrinking = s1 * s2 > 0.0 && s2 * s3 > 0.0 && s1.abs() > s2.abs() && s2.abs() > s3.abs();
    let central = match early {
        Some((_, _, c1, _)) if shrinking && c3 > c1 => {
            let tau = ((c3 - c1) / (s1 / s3).ln()).min(cap);
            let h = x[n - 1] - c3;
            s3 * tau * (-h / tau).exp()
        }
        _ => remaining,
    };
    Some(Projection { remaining, limit: end + remaining, decaying, central })
}

/// Least-squares slope of `y` against `x` with its standard error widened for the
/// autocorrelation of monitor noise (AR(1) approximation of the integrated autocorrelation
/// time from the lag-1 autocorrelation of the residuals, `τ = (1+ρ)/(1−ρ)`, at most n/4: an
/// O(n) correction, cheap enough for every checkpoint), the centre of `x` and the fitted
/// value at the last `x`.
fn slope(x: &[f64], y: &[f64]) -> Option<(f64, f64, f64, f64)> {
    let fit = stats::ols(x, y)?;
    let resid = stats::ols_residuals(&fit, x, y);
    let rho = stats::lag1_autocorrelation(&resid).unwrap_or(0.0).clamp(0.0, 0.99);
    let n = x.len() as f64;
    let tau = ((1.0 + rho) / (1.0 - rho)).clamp(1.0, (n / 4.0).max(1.0));
    let last = x.last().copied()?;
    Some((fit.slope, fit.se_slope * tau.sqrt(), fit.x_mean, fit.at(last)))
}

/// A periodic component a monitor shows: its period in iterations, and whether it decides
/// the verdict (then the window holds two of its periods).
#[derive(Debug, Clone, Copy, PartialEq)]
pub struct Cycle {
    pub period: f64,
    pub decisive: bool,
}

/// `w` less the sinusoid of `period` fitted beside its trend ([`stats::without_cycle`]), when
/// the window holds at least two periods (a shorter one cannot tell the cycle from the
/// trend); `None` otherwise.
fn without_cycle(w: &Window, period: f64) -> Option<Window> {
    if (w.span() as f64) < 2.0 * period {
        return None;
    }
    let x: Vec<f64> = w.its.iter().map(|&i| i as f64).collect();
    let vals = stats::without_cycle(&x, &w.vals, period)?;
    Some(Window { its: w.its.clone(), vals })
}

/// The window of the monitor `v` ending at iteration `t`; `cycle` is a significant periodic
/// component the monitor shows, if any; `tolerance` maps the value a geometrically converging
/// monitor approaches to the absolute drift tolerance there.
///
/// A known cycle is taken out before the transient, the approach and the projection are read
/// ([`Fitted::clean`]): otherwise the phase of a cycle reads as a decay or a drift (a
/// ±0.1 % ripple moves the regression line over a few periods by about as much as its
/// amplitude). The band and the mean stay on the values as they are.
pub fn fit(
    v: &View<'_>,
    t: i64,
    rc: &Resolved,
    cycle: Option<Cycle>,
    tolerance: &dyn Fn(f64) -> f64,
) -> Fitted {
    let u = upper(v, t, rc);
    let outer = v.window_map(t, u, |x| x);
    if outer.is_empty() {
        return Fitted { window: outer, length: u, young: true, ..Default::default() };
    }
    let clean = cycle.and_then(|c| without_cycle(&outer, c.period));
    let seen = clean.as_ref().unwrap_or(&outer);
    let projection = project(seen);
    let young = outer.span() as f64 + outer.spacing() < required(u) as f64;
    let approach = projection.filter(|p| p.decaying).map(|p| {
        let tol = tolerance(p.limit);
        seen.vals.iter().rposition(|x| !((x - p.limit).abs() <= tol)).map_or(0, |i| i + 1)
    });
    let d = match approach {
        Some(a) => a,
        None => stationarity::mser5(&seen.vals).unwrap_or(0),
    }
    .min(outer.len() - 1);
    let transient_end = (d > 0).then(|| outer.its[d]);
    if rc.window_explicit {
        return Fitted { window: outer, clean, transient_end, length: u, projection, young };
    }
    let cycles = cycle.filter(|c| c.decisive).map_or(0, |c| (2.0 * c.period).ceil() as usize);
    // A sparse log's samples: the window keeps MIN_VALUES of them, however far apart.
    let lower = MIN_WINDOW.max(cycles).max(v.span_of(MIN_VALUES, t)).min(u) as i64;
    let cut = outer.its[d].min(t.saturating_sub(lower - 1));
    let window = outer.from_iteration(cut);
    let clean = clean.map(|c| c.from_iteration(cut));
    let spacing = window.spacing().max(1.0);
    let length = ((window.span() as f64 + spacing).round() as usize).max(1);
    Fitted { window, clean, transient_end, length, projection, young }
}

#[cfg(test)]
mod tests {
    use super::*;
    use crate::judge::criteria;
    use crate::judge::types::{Criteria, SeriesInput};
    use crate::record::Role;
    use std::borrow::Cow;

    fn input(vals: Vec<f64>) -> SeriesInput<'static> {
        let its: Vec<i64> = (1..=vals.len() as i64).collect();
        SeriesInput {
            name: Cow::Borrowed("m"),
            iterations: Cow::Owned(its),
            values: Cow::Owned(vals),
            segment_starts: vec![0],
            ..Default::default()
        }
    }

    #[test]
    fn short_runs_get_their_settled_half_and_the_transient_is_cut() {
        // 600 iterations: a start-up step from 2 to 1 at it 380, then flat (with a tiny
        // alternation so MSER has something to compare).
        let vals: Vec<f64> = (1..=600)
            .map(|i| if i < 380 { 2.0 } else { 1.0 + if i % 2 == 0 { 1e-6 } else { 0.0 } })
            .collect();
        let s = input(vals);
        let v = View::new(&s).expect("non-empty");
        let rc = criteria::resolve(&Criteria::default(), "m", Role::Monitor);
        assert_eq!(upper(&v, 600, &rc), 300);
        let f = fit(&v, 600, &rc, None, &|_| 1e-3);
        // MSER-5 on it 301..600 cuts the values before 380 (batch of five boundary).
        assert_eq!(f.transient_end, Some(381));
        assert_eq!(f.window.its.first(), Some(&381));
        assert_eq!(f.length, 220);
        // A long run is bounded by the configured 500.
        let long = input(vec![1.0; 3000]);
        let v = View::new(&long).expect("non-empty");
        assert_eq!(upper(&v, 3000, &rc), 500);
        // An explicit window is used as given, transient or not.
        let c = Criteria { window: Some(400), ..Default::default() };
        let rc = criteria::resolve(&c, "m", Role::Monitor);
        let s = input((1..=600).map(|i| if i < 380 { 2.0 } else { 1.0 }).collect());
        let v = View::new(&s).expect("non-empty");
        let f = fit(&v, 600, &rc, None, &|_| 1e-3);
        assert_eq!((f.window.its[0], f.length), (201, 400));
    }

    #[test]
    fn a_segment_restarted_late_is_young_until_it_has_half_the_upper_window() {
        // 2000 iterations, then a restart from the checkpoint at 1500: 1501, 1502, …
        let mut its: Vec<i64> = (1..=2000).collect();
        its.extend(1501..=1800);
        let vals: Vec<f64> = its.iter().map(|&i| 1.0 + 1e-6 * (i % 7) as f64).collect();
        let rc = criteria::resolve(&Criteria::default(), "m", Role::Monitor);
        let at = |k: usize| {
            let s = SeriesInput {
                name: Cow::Borrowed("m"),
                iterations: Cow::Owned(its[..2000 + k].to_vec()),
                values: Cow::Owned(vals[..2000 + k].to_vec()),
                segment_starts: vec![0, 2000],
                ..Default::default()
            };
            let v = View::new(&s).expect("non-empty");
            let t = v.last_it();
            (upper(&v, t, &rc), fit(&v, t, &rc, None, &|_| 1e-3))
        };
        // The solution is 1560 iterations old: the upper window is the configured 500, but
        // the segment holds 60 of them (< 250): too young.
        let (u, f) = at(60);
        assert_eq!(u, 500);
        assert!(f.young, "{f:?}");
        // 260 iterations after the restart: judged, on the segment's values only.
        let (_, f) = at(260);
        assert!(!f.young && f.window.its[0] > 1500, "{f:?}");
        assert_eq!(required(500), 250);
        assert_eq!(required(60), 50);
    }

    #[test]
    fn a_log_printed_every_ten_iterations_gets_windows_of_ten_values() {
        // A monitor printed at it 10, 20, …, 150: 2 before it 120, then 1 (a start-up MSER-5
        // would cut), with a tiny alternation.
        let its: Vec<i64> = (1..=15).map(|k| 10 * k).collect();
        let vals: Vec<f64> = its
            .iter()
            .map(|&i| if i < 120 { 2.0 } else { 1.0 + if i % 20 == 0 { 1e-6 } else { 0.0 } })
            .collect();
        let s = crate::judge::series::tests::input(its, vals, vec![0]);
        let v = View::new(&s).expect("non-empty");
        let rc = criteria::resolve(&Criteria::default(), "m", Role::Monitor);
        // Half the run (70 iterations) holds 7 values: the upper window is 10 values.
        assert_eq!(upper(&v, 150, &rc), 100);
        let f = fit(&v, 150, &rc, None, &|_| 1e-3);
        // The lower bound keeps 10 values where MSER would have kept the last 4.
        assert_eq!((f.window.len(), f.window.its[0]), (MIN_VALUES, 60));
        // Printed every iteration, the same run keeps its half-run upper window.
        let dense = input((1..=150).map(|i| if i < 120 { 2.0 } else { 1.0 }).collect());
        let v = View::new(&dense).expect("non-empty");
        assert_eq!(upper(&v, 150, &rc), 75);
    }

    #[test]
    fn the_window_holds_two_periods_of_a_cycle() {
        let vals: Vec<f64> = (1..=1000)
            .map(|i| 1.0 + 0.01 * (2.0 * std::f64::consts::PI * i as f64 / 120.0).sin())
            .collect();
        let s = input(vals);
        let v = View::new(&s).expect("non-empty");
        let rc = criteria::resolve(&Criteria::default(), "m", Role::Monitor);
        let cycle = Cycle { period: 120.0, decisive: true };
        let f = fit(&v, 1000, &rc, Some(cycle), &|_| 1e-3);
        assert!(f.window.span() >= 239, "{}", f.window.span());
    }

    /// `n` values `1 + f(i)` at iterations 1..=n.
    fn window_of(n: usize, f: impl Fn(f64) -> f64) -> Window {
        Window { its: (1..=n as i64).collect(), vals: (1..=n).map(|i| 1.0 + f(i as f64)).collect() }
    }

    #[test]
    fn a_trend_is_carried_forward_only_when_both_readings_show_it() {
        use crate::synth::rng::Rng;
        let mut rng = Rng::new(3);
        let noise: Vec<f64> = (0..500).map(|_| 1e-6 * rng.normal()).collect();
        let at = |i: f64| noise[i as usize - 1];
        // A steady creep of 2e-6 per iteration: both readings show it, 500 × 2e-6 to come.
        let p = project(&window_of(500, |i| 2e-6 * i + at(i))).expect("projection");
        assert!(!p.decaying);
        assert!((p.remaining - 1e-3).abs() < 0.1e-3, "{}", p.remaining);
        // Flat, then the last 60 values swing up (noise at the end of the window): the last
        // two thirds' slope is a fifth of the last third's, and that is what is carried.
        let swing = |i: f64| if i > 440.0 { 2e-5 * (i - 440.0) } else { 0.0 } + at(i);
        let w = window_of(500, swing);
        let p = project(&w).expect("projection");
        let x = w.its_f64();
        let s3 = stats::ols(&x[334..], &w.vals[334..]).expect("fit").slope;
        let s23 = stats::ols(&x[168..], &w.vals[168..]).expect("fit").slope;
        assert!(s23 < 0.3 * s3, "{s23} {s3}");
        assert!((p.remaining - 500.0 * s23).abs() < 1e-9, "{} {}", p.remaining, 500.0 * s23);
        // The last third rises, the last two thirds fall: no trend the monitor follows.
        let turn = |i: f64| -4e-6 * (i - 167.0).max(0.0) + 6e-6 * (i - 400.0).max(0.0) + at(i);
        assert_eq!(project(&window_of(500, turn)).expect("projection").remaining, 0.0);
        // A last-third slope within two standard errors projects nothing.
        assert_eq!(project(&window_of(500, at)).expect("projection").remaining, 0.0);
        // No decay: the best estimate is the projection itself.
        let p = project(&window_of(500, |i| 2e-6 * i + at(i))).expect("projection");
        assert_eq!(p.central, p.remaining);
    }

    #[test]
    fn the_best_estimate_of_an_approach_is_counted_from_the_window_end() {
        // 1 + 0.01·e^{−i/300} over 600 iterations: the change still to come after it 600 is
        // −0.01·e^{−2} = −1.353e-3 (exact). Thirds of 200 iterations; the projection that
        // guards a call, s₃·τ, starts at the last third's centre (it 500.5): 39 % more. The least-squares slope of an exponential over 200
        // iterations is its slope at the centre × (1 + (200/300)²/40 + …) = 1.011 (Taylor
        // series, hand calculation), in every third alike.
        let p = project(&window_of(600, |i| 0.01 * (-i / 300.0).exp())).expect("projection");
        assert!(p.decaying);
        let exact = -0.01 * (-2.0f64).exp();
        assert!((p.central / exact - 1.011).abs() < 0.002, "{} {exact}", p.central);
        // The guard starts 99.5 iterations earlier and adds a margin for the slopes' errors.
        assert!(p.remaining / p.central > (99.5f64 / 300.0).exp(), "{} {}", p.remaining, p.central);
    }
}
