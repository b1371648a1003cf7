//! Fixed decision thresholds of the judge, in one place with their reasons.
//!
//! These are not user criteria (those live in [`super::types::Criteria`]) but the levels at
//! which a statistic becomes a finding. Where no published value exists the number is our
//! choice, made by reasoning about real solver histories , not tuned to test
//! series; each says so.

/// Fewest iterations the stall, divergence, oscillation and blow-up tests look at, whatever
/// the criteria window: pseudo-plateaus last a hundred iterations and more, and limit cycles
/// of tens of iterations need several cycles. The criteria themselves (drift, band,
/// CI) always use the configured window (our choice).
pub const MIN_EVIDENCE_WINDOW: usize = 500;

/// A live run's stall needs the residual flat over at least this many iterations after the
/// start-up (and over the evidence window if it is longer): pseudo-plateaus while a
/// recirculation forms last "a hundred or more" iterations, in separated flows up to about
/// 600, and the bends into and out of them add to that; a stall must outlast them
/// (ours). The fall into a plateau can be slower than the residual's noise (a few tenths of
/// a decade over a few hundred iterations); the plateau then seems to begin at the start-up
/// and lasts as long as the slow fall and the plateau together. At 800 the accuracy bench
/// called such pseudo-plateaus of 900–1000 iterations `stalled` on 6 of 80 held-out runs
/// (19 prefixes), at 1000 on none; a real stall is called about 70–320 iterations later
/// (median per seed set, `benches/README.md`): a false `stalled` can cancel a healthy job
/// through an action, a late one costs iterations. A finished run (end-of-run mark) needs
/// only the evidence window: no later fall can come.
pub const STALL_MIN_ITERATIONS: usize = 1000;

/// Fewest values a stall window, and the recent part of it that shows a plateau falling
/// again, are read from (ours: a trend and its interval over fewer autocorrelated values
/// mean little). A log printed every few iterations gets windows that many values long.
pub const STALL_MIN_VALUES: usize = 30;

/// Significance level of the oscillation test per series. 1 % rather than 5 % because a run
/// has several series and a false "oscillating" costs the user a look (our choice).
pub const OSC_ALPHA: f64 = 0.01;

/// Smallest residual oscillation (semi-amplitude, decades) that can decide a verdict: ±12 %.
/// Smaller periodic ripples are reported only (our choice).
pub const OSC_MIN_RESIDUAL_DEC: f64 = 0.05;

/// A monitor oscillation decides the verdict only when its peak-to-peak amplitude is at least
/// this fraction of the band limit: the oscillation alone breaks the band (ours: "large
/// against the band limit"; a ±0.2 % ripple inside a 0.5 % band never decides).
pub const OSC_MONITOR_BAND_SHARE: f64 = 1.0;

/// Monitors whose segment is longer than two evidence windows are also searched for a
/// periodic component over this many evidence windows (4000 iterations by default), so that a
/// period of a few hundred iterations shows the five cycles the test needs (ours).
pub const LONG_LOOKBACK_WINDOWS: usize = 8;

/// A growing oscillation is looked for only with at least this many cycles in the window
/// (ours: growth measured over fewer cycles is as often a stretch of red noise).
pub const GROWTH_MIN_CYCLES: f64 = 8.0;

/// Significance level of the spectral peak of a growing oscillation candidate. Looser than
/// [`OSC_ALPHA`]: a growing component spreads its power and is dominant long before its
/// peak is significant at 1 %, and the candidate decides only when a second series
/// corroborates it (ours).
pub const GROWTH_ALPHA: f64 = 0.05;

/// Growing oscillations of two series with periods within this relative difference are the
/// same instability (ours).
pub const GROWTH_SAME_PERIOD: f64 = 0.1;

/// Windows (iterations) over which a growing oscillation is looked for, shortest first (ours:
/// the shortest holds [`GROWTH_MIN_CYCLES`] cycles of a period up to 5 — the period-2 to -3
/// cycles that precede a crash — and reaches back as little as it can before their onset,
/// which would dilute the growth; longer ones for longer periods).
pub const GROWTH_WINDOWS: [usize; 4] = [40, 60, 120, 240];

/// A monitor's mean is "near zero" when it is below this share of the monitor's own largest
/// magnitude in the latest segment (block medians of 5, so one spike does not count); the
/// automatic reference of drift, band and CI is then this share of that magnitude instead of
/// the mean: continuous where the two meet, and never smaller than the mean (ours: "an order
/// of magnitude below what the quantity was during the run").
pub const NEAR_ZERO_SHARE: f64 = 0.1;

/// A residual oscillation decides only with at least this many cycles in its window: at the
/// five the spectrum test needs, slow red noise on a plateau passes for a cycle of a fifth
/// of the window too often (ours).
pub const OSC_MIN_CYCLES_TO_DECIDE: f64 = 6.0;

/// Fewest values for an oscillation test.
pub const OSC_MIN_POINTS: usize = 32;

/// A significantly rising residual is divergence only when the fitted rise over the window is
/// at least this many decades (statistical significance alone flags harmless slow creeps on a
/// solver floor; our choice).
pub const DIVERGE_MIN_RISE_DEC: f64 = 1.0;

/// A residual rising significantly by at least this many decades over the last fifth of the
/// window (at least 50 iterations) is blowing up (ours: a hundredfold in a few tens of
/// iterations is not noise on any solver floor).
pub const DIVERGE_FAST_RISE_DEC: f64 = 2.0;

/// Divergence when a residual stands this many decades above its running minimum after the
/// start-up, over the last 20 evidence windows (the common rule of thumb "residual > 10²–10³ × its
/// running minimum", common practice; we take the upper end).
pub const DIVERGE_ABOVE_MIN_DEC: f64 = 3.0;

/// Monitor or indicator "grows by orders of magnitude": this many decades above its reference
/// level ("orders of magnitude": two is our reading).
pub const BLOWUP_DEC: f64 = 2.0;

/// Sustained exponential growth of a monitor or indicator: at least this rise over the window
/// in decades, significantly positive and not slowing down (ours).
pub const EXP_GROWTH_DEC: f64 = 1.0;

/// Iterations per block median of a monitor's departure from its level
/// ([`super::health::departure_growth`]): ten values of a log printed every iteration, so
/// that noise and zero crossings do not count (ours).
pub const DEPARTURE_BLOCK: usize = 10;

/// A monitor's exponentially growing departure from its level decides once it is at least
/// this share of the monitor's reference: a tenth, twenty times the default band limit, a
/// change no healthy monitor makes after its start-up and far beyond any noise (ours).
pub const DEPARTURE_MATERIAL: f64 = 0.1;

/// The same during the start-up, where a quantity may move from its initial guess by a
/// modest factor: two decades (ours).
pub const STARTUP_EXP_GROWTH_DEC: f64 = 2.0;

/// Any time, even during the start-up: this many decades beyond the largest of the segment's
/// first values is a blow-up ("many orders of magnitude"; a developing flow moves residuals
/// by a decade or two and monitors by a modest factor; ours).
pub const STARTUP_BLOWUP_DEC: f64 = 3.0;

/// "Not slowing down": the rise over the last third of the window is at least this fraction
/// of the rise over the middle third (exponential growth keeps its rate; a ramp-up towards a
/// level slows; ours).
pub const EXP_GROWTH_KEEP: f64 = 0.75;

/// An indicator pinned at its maximum for this many consecutive values...
pub const PINNED_MIN_VALUES: usize = 10;
/// ...while that maximum is at least this many times its usual level (a sweep count hitting
/// its limit; ours).
pub const PINNED_RATIO: f64 = 5.0;

/// A residual repeating exactly the same value this many times at the end is frozen (ours; a
/// solver printing 3 significant digits repeats a slowly converging value a few times only).
pub const FROZEN_MIN_REPEATS: usize = 20;

/// A single-step drop of at least this many decades is a reset or normalisation artefact when
/// the drop criterion depends on it (ours).
pub const STEP_DROP_DEC: f64 = 3.0;

/// A single residual value at least this many decades above both the value before it and the
/// value after it is a glitch (a failed solve), left out of the peak the drop is measured
/// from ([`super::peak`]): an order of magnitude up in one step and back down in the next,
/// where a residual history moves by a few tenths of a decade from step to step (common
/// practice, no source).
pub const GLITCH_DEC: f64 = 1.0;

/// A first value at least this many decades below the later peak is a "low start" (ours).
pub const LOW_START_DEC: f64 = 2.0;

/// A residual this many decades below its peak sits at round-off level: never a stall (ours;
/// double precision carries about 16 digits and solvers lose a few).
pub const ROUNDOFF_DROP_DEC: f64 = 12.0;

/// Around a crash: a monitor or indicator whose last values jumped by at least this factor
/// (or fell below its inverse cubed) against the window before them counts as a sign of
/// blow-up (ours).
pub const CRASH_JUMP: f64 = 2.0;

/// The same for a residual, whose noise on a solver floor easily doubles it: one decade.
pub const CRASH_JUMP_RESIDUAL: f64 = 10.0;

/// Warnings of one rule in at least this share of the window's iterations are frequent.
pub const FREQUENT_WARNING_SHARE: f64 = 0.5;
/// ...and in at least this many iterations.
pub const FREQUENT_WARNING_MIN: usize = 10;
