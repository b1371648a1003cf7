//! What makes a periodic component matter: it dominates the window, it keeps its amplitude,
//! and — separately — whether its amplitude grows cycle after cycle.
//!
//! Fisher's g ([`super::spectrum`]) says a peak stands out of the background. That alone
//! called a monitor ringing down while it settled, the broadband noise of a stalled run with
//! a weak peak and a ±0.2 % ripple inside the band `oscillating`. Here the significant peak is
//! described further:
//!
//! * **Dominance**: the share of the detrended window's variance in the peak's band (±10 %
//!   of its frequency, at least two bins for the leakage of a window that does not hold a
//!   whole number of cycles) and those of its second and third harmonics (a limit
//!   cycle is rarely a pure sine). `oscillating` needs more than half ([`DOMINANT_SHARE`]):
//!   the periodic part is bigger than everything else together.
//! * **Envelope**: the amplitude of the component in consecutive blocks of two periods (one
//!   period when the window holds fewer than eight such blocks; the projection of the block,
//!   less its own least-squares line, on the peak frequency, so that neither a local trend
//!   nor noise at other frequencies counts), and a least-squares line
//!   through the logarithms of these amplitudes. An envelope that halves within half the
//!   judge's own horizon (the configured window), or significantly within the horizon, is a
//!   **ring-down** (settling, not oscillating): `oscillating` must be shown to last. Fewer
//!   than four blocks cannot tell: such a component does not decide either.
//! * **Growth** ([`growing`]): a significantly rising envelope that grew at least
//!   [`GROWTH_MIN_RATIO`]-fold over the window and is not slowing down (the last third
//!   rises, by at least [`GROWTH_KEEP`] of what the middle third rose if that rose:
//!   [`Envelope::slowing`]) is a growing limit cycle — the classic prelude of a crash.

use super::series::Window;
use super::spectrum;
use super::stats;

/// Share of the detrended variance a dominant component carries (ours: more than all the
/// rest together).
pub const DOMINANT_SHARE: f64 = 0.5;

/// A growing cycle has grown at least this factor over the window (ours: a growth that
/// noise in the amplitude of a steady cycle does not reach over a dozen blocks).
pub const GROWTH_MIN_RATIO: f64 = 4.0;

/// Exponential growth keeps its rate: the rise of the log-amplitude over the last third is
/// at least this share of the rise over the middle third (a saturating onset slows; ours,
/// the same reading as the exponential growth of monitors in `limits`).
pub const GROWTH_KEEP: f64 = 0.75;

/// Significance level of the envelope slope (two-sided 95 % interval; common practice).
const ENVELOPE_LEVEL: f64 = 0.975;

/// The amplitude trend of a periodic component over a window.
#[derive(Debug, Clone, Copy, PartialEq)]
pub struct Envelope {
    /// Slope of ln(amplitude) per sample and its 95 % interval.
    pub slope: f64,
    pub ci: (f64, f64),
    /// The slope per iteration (per sample over the sample spacing).
    pub slope_per_iteration: f64,
    /// The lower end of the slope's 95 % interval, per iteration: the fastest decay the
    /// blocks allow.
    pub steepest_per_iteration: f64,
    /// Fitted amplitude at the last block over that at the first.
    pub ratio: f64,
    /// Rise of the mean log-amplitude (natural log) over the middle and the last third.
    pub rise_mid: f64,
    pub rise_last: f64,
    /// Standard error of `slope` and the line's degrees of freedom (blocks − 2).
    pub se: f64,
    pub dof: f64,
    pub blocks: usize,
}

impl Envelope {
    /// The growth is slowing: the last third does not rise, or rises less than
    /// [`GROWTH_KEEP`] of what the middle third rose. A middle third that did not rise asks
    /// nothing more of the last: an exponential rising out of the noise floor has a flat
    /// (or, by noise, falling) middle third and a rising last one, while a limit cycle
    /// settling onto its amplitude rises in the middle third and no longer in the last.
    pub fn slowing(&self) -> bool {
        !(self.rise_last > 0.0) || self.rise_last < GROWTH_KEEP * self.rise_mid
    }

    /// The amplitude grows at one-sided level `level`: the lower end of the slope's
    /// `level` interval is above zero, it grew at least [`GROWTH_MIN_RATIO`]-fold and the
    /// growth is not slowing.
    pub fn grows(&self, level: f64) -> bool {
        let t = stats::t_quantile(level, self.dof.max(1.0)).unwrap_or(f64::INFINITY);
        self.slope - t * self.se > 0.0 && self.ratio >= GROWTH_MIN_RATIO && !self.slowing()
    }
}

/// A significant periodic component of a window, described.
#[derive(Debug, Clone, Copy, PartialEq)]
pub struct Periodic {
    pub osc: spectrum::Oscillation,
    /// Period in iterations.
    pub period: f64,
    /// Share of the detrended variance in the peak band and its harmonics.
    pub share: f64,
    /// Envelope over the window the component was found in.
    pub envelope: Option<Envelope>,
    /// Envelope over a longer look-back ending at the same iteration, when measured.
    pub envelope_long: Option<Envelope>,
    pub first: i64,
    pub last: i64,
}

impl Periodic {
    pub fn dominant(&self) -> bool {
        self.share > DOMINANT_SHARE
    }

    /// The period came out at the longest the window resolves (its refinement stops at
    /// `MIN_CYCLES − ½` cycles in the window): the cycle may be longer than this window
    /// shows, and a longer look-back can tell. Within 1 % of that bound counts.
    pub fn at_longest_period(&self) -> bool {
        let spacing = self.period / self.osc.period;
        if !(spacing > 0.0) {
            return false;
        }
        let n = ((self.last - self.first) as f64 / spacing).round() + 1.0;
        self.osc.period * (spectrum::MIN_CYCLES as f64 - 0.5) >= 0.99 * n
    }

    /// The amplitude shrinks: as measured, it halves within `horizon` iterations (the window
    /// the criteria look at), over the window or over the longer look-back. The burden of
    /// proof lies with "it lasts": a cycle whose measured decay would halve it before the
    /// criteria window has passed is settling, significant or not; on few cycles the decay
    /// is rarely significant, and calling such a ring-down `oscillating` sends the user after
    /// a cycle that is dying out.
    pub fn ring_down(&self, horizon: f64) -> bool {
        let decays = |e: &Envelope| {
            let half_life = std::f64::consts::LN_2 / -e.slope_per_iteration;
            half_life > 0.0 && half_life <= horizon
        };
        self.envelope.as_ref().is_some_and(decays)
            || self.envelope_long.as_ref().is_some_and(decays)
    }

    /// The amplitude is shown to last: every measured envelope (over the window, and over
    /// the longer look-back when measured) excludes, at the 95 % level, a decay that would
    /// halve it within `horizon`. A point estimate is not enough: over four to eight blocks a
    /// ring-down's measured decay scatters widely, and half of the time reads slower than it
    /// is; two envelopes that disagree have not shown anything.
    pub fn lasts(&self, horizon: f64) -> bool {
        let halving = -std::f64::consts::LN_2 / horizon;
        let holds = |e: &Envelope| e.steepest_per_iteration > halving;
        self.envelope.as_ref().is_some_and(holds) && self.envelope_long.as_ref().is_none_or(holds)
    }

    /// Dominant, measured over at least four blocks spanning at least half the `horizon`,
    /// and shown to last ([`Periodic::lasts`]): a limit cycle, not a ring-down.
    pub fn sustained_and_dominant(&self, horizon: f64) -> bool {
        let long_enough = (self.last.saturating_sub(self.first)) as f64 >= 0.5 * horizon;
        self.dominant() && self.envelope.is_some() && long_enough && self.lasts(horizon)
    }
}

/// An envelope measured per sample, its slopes converted to per iteration.
fn per_iteration(e: Envelope, spacing: f64) -> Envelope {
    let s = spacing.max(f64::MIN_POSITIVE);
    Envelope { slope_per_iteration: e.slope / s, steepest_per_iteration: e.ci.0 / s, ..e }
}

/// The window with an odd number of values (so that a period-2 oscillation is not the
/// dropped Nyquist ordinate), as parallel slices.
fn odd(win: &Window) -> (&[i64], &[f64]) {
    let skip = usize::from(win.len() % 2 == 0);
    (&win.its[skip..], &win.vals[skip..])
}

/// Replace the envelope of `p` by the one measured over `longer` (a longer stretch of the
/// same series ending at the same iteration), at the same frequency: whether a component
/// keeps its amplitude shows best over the longest stretch available.
pub fn with_envelope_over(p: Periodic, longer: &Window) -> Periodic {
    match envelope_at(longer, p.period) {
        Some(e) => Periodic { envelope_long: Some(e), ..p },
        None => p,
    }
}

/// The envelope of the component of period `period` (iterations) in `win`, after removing
/// its quadratic trend, as [`find`] measures it; `None` with 32 values or fewer.
pub fn envelope_at(win: &Window, period: f64) -> Option<Envelope> {
    if win.len() <= 32 {
        return None;
    }
    let (its, vals) = odd(win);
    let spacing = its[its.len() - 1].saturating_sub(its[0]) as f64 / (its.len() - 1) as f64;
    let d = stats::quadratic_residuals(vals);
    envelope(&d, spacing / period, 0, d.len()).map(|e| per_iteration(e, spacing))
}

/// The strongest periodic component of `win`, described; `None` when the spectrum finds no
/// candidate (fewer than 32 values, a constant window).
pub fn find(win: &Window) -> Option<Periodic> {
    if win.len() < 32 {
        return None;
    }
    let (its, vals) = odd(win);
    let osc = spectrum::find_oscillation(vals)?;
    let spacing = its[its.len() - 1].saturating_sub(its[0]) as f64 / (its.len() - 1) as f64;
    // Dominance and envelope matter only for a candidate that could be significant at the
    // loosest level any caller uses (5 %); the others are described by the spectrum alone.
    let (share, envelope) = if osc.p_value < 0.05 {
        let detrended = stats::quadratic_residuals(vals);
        let share = band_share(&detrended, osc.k);
        let envelope = envelope(&detrended, 1.0 / osc.period, 0, detrended.len())
            .map(|e| per_iteration(e, spacing));
        (share, envelope)
    } else {
        (0.0, None)
    };
    Some(Periodic {
        osc,
        period: osc.period * spacing,
        share,
        envelope,
        envelope_long: None,
        first: its[0],
        last: its[its.len() - 1],
    })
}

/// Share of the variance of `x` (already detrended) in the bins around Fourier index `k`
/// and its second and third harmonics (aliased back into `1..=n/2`).
pub fn band_share(x: &[f64], k: usize) -> f64 {
    let n = x.len();
    let ord = spectrum::periodogram(x);
    let m = spectrum::fisher_m(n);
    if m < 2 || k == 0 {
        return 0.0;
    }
    let total: f64 = ord[1..=m].iter().sum();
    if !(total > 0.0) {
        return 0.0;
    }
    let width = ((0.1 * k as f64).round() as usize).max(2);
    let mut take = vec![false; m + 1];
    for h in 1..=3usize {
        let mut kh = (h * k) % n;
        if kh > n / 2 {
            kh = n - kh;
        }
        if kh == 0 {
            continue;
        }
        let (lo, hi) = (kh.saturating_sub(width).max(1), (kh + width).min(m));
        if lo <= hi {
            take[lo..=hi].iter_mut().for_each(|t| *t = true);
        }
    }
    let inside: f64 = (1..=m).filter(|&b| take[b]).map(|b| ord[b]).sum();
    inside / total
}

/// Amplitude of the component at frequency `f` (cycles per sample) in blocks of two periods
/// of `x[from..to]`, and the log-linear trend of these amplitudes. `None` with fewer than 4
/// blocks.
pub fn envelope(x: &[f64], f: f64, from: usize, to: usize) -> Option<Envelope> {
    if !(f > 0.0 && f <= 0.5) {
        return None;
    }
    let len = to.saturating_sub(from);
    let mut block = ((2.0 / f).ceil() as usize).max(4);
    if len / block < 8 {
        block = ((1.0 / f).ceil() as usize).max(4);
    }
    let count = len / block;
    if count < 4 {
        return None;
    }
    // Align the blocks to the end: the newest values matter most.
    let start = to - count * block;
    let w = 2.0 * std::f64::consts::PI * f;
    let mut centres = Vec::with_capacity(count);
    let mut logs = Vec::with_capacity(count);
    for b in 0..count {
        let a = start + b * block;
        let seg = &x[a..a + block];
        // The block's own line and the sinusoid are fitted together (least squares on
        // 1, t, cos, sin): a settling monitor has a steep local trend, and removing a line
        // first takes a phase-dependent part of a one-period sinusoid with it (a decay read
        // anywhere from a fifth to 1.7 times its true rate, by the phase the blocks began at).
        let amp = block_amplitude(seg, w, a);
        if amp > 0.0 && amp.is_finite() {
            centres.push((a + block / 2) as f64);
            logs.push(amp.ln());
        }
    }
    if logs.len() < 4 {
        return None;
    }
    let fit = stats::ols(&centres, &logs)?;
    let dof = (logs.len() - 2) as f64;
    let t = stats::t_quantile(ENVELOPE_LEVEL, dof.max(1.0))?;
    let span = centres[centres.len() - 1] - centres[0];
    let third = logs.len() / 3;
    let mean_of = |r: std::ops::Range<usize>| stats::mean(&logs[r]).unwrap_or(f64::NAN);
    let (m1, m2, m3) =
        (mean_of(0..third), mean_of(third..2 * third), mean_of(2 * third..logs.len()));
    Some(Envelope {
        slope: fit.slope,
        ci: (fit.slope - t * fit.se_slope, fit.slope + t * fit.se_slope),
        slope_per_iteration: fit.slope,
        steepest_per_iteration: fit.slope - t * fit.se_slope,
        ratio: (fit.slope * span).exp(),
        rise_mid: m2 - m1,
        rise_last: m3 - m2,
        se: fit.se_slope,
        dof,
        blocks: logs.len(),
    })
}

/// Semi-amplitude of the sinusoid of angular frequency `w` (radians per sample) in the
/// least-squares fit of a line plus that sinusoid to `seg`, whose first sample is sample
/// `t0` ([`stats::line_and_sine`]); NaN when the fit is singular (at the Nyquist frequency
/// only the cosine is observable and `|c|` is returned).
fn block_amplitude(seg: &[f64], w: f64, t0: usize) -> f64 {
    let nyquist = (w - std::f64::consts::PI).abs() < 1e-9;
    let x: Vec<f64> = (t0..t0 + seg.len()).map(|t| t as f64).collect();
    match stats::line_and_sine(&x, seg, 2.0 * std::f64::consts::PI / w, nyquist) {
        Some(b) if nyquist => b[2].abs(),
        Some(b) => b[2].hypot(b[3]),
        None => f64::NAN,
    }
}

/// A growing periodic component of `win`.
#[derive(Debug, Clone, Copy, PartialEq)]
pub struct Growth {
    pub periodic: Periodic,
    pub envelope: Envelope,
    /// Amplitude growth per cycle (factor).
    pub per_cycle: f64,
    /// Semi-amplitude of the component over the last two periods (units of the window).
    pub amplitude_now: f64,
}

/// An oscillation whose amplitude grows cycle after cycle: significant at `alpha`, dominant
/// in the window (a cycle that grows stands out of the noise; a noisy stretch whose spectrum
/// happens to peak does not), envelope rising significantly by at least
/// [`GROWTH_MIN_RATIO`] over the window and not slowing.
pub fn growing(win: &Window, alpha: f64) -> Option<Growth> {
    // Cheap gate first: a component that grew GROWTH_MIN_RATIO-fold shows in the size of
    // the iteration-to-iteration changes of the last third against the first.
    let n = win.len();
    if n < 32 {
        return None;
    }
    let rms_diff = |r: std::ops::Range<usize>| {
        let d = &win.vals[r];
        (d.windows(2).map(|w| (w[1] - w[0]) * (w[1] - w[0])).sum::<f64>() / d.len() as f64).sqrt()
    };
    if !(rms_diff(2 * n / 3..n) >= 2.0 * rms_diff(0..n / 3)) {
        return None;
    }
    let p = find(win)?;
    if !(p.osc.p_value < alpha && p.dominant()) {
        return None;
    }
    let e = p.envelope?;
    if !e.grows(ENVELOPE_LEVEL) {
        return None;
    }
    let samples_per_cycle = p.osc.period;
    let per_cycle = (e.slope * samples_per_cycle).exp();
    // Amplitude now: the fitted envelope at the newest block, scaled back from the log fit.
    let (_, vals) = odd(win);
    let d = stats::quadratic_residuals(vals);
    let tail = ((2.0 * samples_per_cycle).ceil() as usize).clamp(4, d.len());
    let recent = &d[d.len() - tail..];
    let (lo, hi) =
        recent.iter().fold((f64::INFINITY, f64::NEG_INFINITY), |(l, h), v| (l.min(*v), h.max(*v)));
    Some(Growth { periodic: p, envelope: e, per_cycle, amplitude_now: 0.5 * (hi - lo) })
}

#[cfg(test)]
pub(super) mod tests {
    use super::*;
    use std::f64::consts::PI;

    fn window(vals: Vec<f64>) -> Window {
        Window { its: (1..=vals.len() as i64).collect(), vals }
    }

    /// Deterministic pseudo-noise in [-1, 1] (a fixed linear congruential sequence).
    pub(in crate::judge) fn noise(n: usize, seed: u64) -> Vec<f64> {
        let mut s = seed;
        (0..n)
            .map(|_| {
                s = s.wrapping_mul(6364136223846793005).wrapping_add(1442695040888963407);
                ((s >> 11) as f64 / (1u64 << 53) as f64) * 2.0 - 1.0
            })
            .collect()
    }

    #[test]
    fn the_envelope_reads_a_decay_whatever_the_phase_the_blocks_begin_at() {
        // Synthetic ring-down: period 49.2 over 260 values, e-fold time 415 iterations
        // (slope −1/415 per iteration), blocks of one period. Removing each block's line
        // before projecting read this decay as anywhere from −0.0005 to −0.0041 by phase.
        for k in 0..12 {
            let phase = 0.5 * k as f64;
            let x: Vec<f64> = (0..260)
                .map(|t| {
                    let t = t as f64;
                    1.0 + 0.3 * t / 260.0
                        + 0.005 * (-t / 415.0).exp() * (2.0 * PI * t / 49.2 + phase).sin()
                })
                .collect();
            let e = envelope(&x, 1.0 / 49.2, 0, 260).expect("five blocks");
            let truth = -1.0 / 415.0;
            assert!((e.slope - truth).abs() < 0.05 * truth.abs(), "phase {phase}: {e:?}");
        }
    }

    #[test]
    fn a_clean_cycle_dominates_and_keeps_its_amplitude() {
        let e = noise(501, 1);
        let x: Vec<f64> = (0..501)
            .map(|t| 1.0 + 0.01 * (2.0 * PI * t as f64 / 40.0).sin() + 1e-4 * e[t])
            .collect();
        let p = find(&window(x)).expect("candidate");
        assert!((p.period - 40.0).abs() < 0.5, "{p:?}");
        assert!(p.share > 0.9 && p.sustained_and_dominant(500.0), "{p:?}");
    }

    #[test]
    fn a_ring_down_is_not_sustained() {
        // Amplitude e^{−t/150}: a fifth of it left after 250 iterations.
        let e = noise(501, 2);
        let x: Vec<f64> = (0..501)
            .map(|t| {
                let t = t as f64;
                1.0 + 0.02 * (-t / 150.0).exp() * (2.0 * PI * t / 40.0).sin() + 1e-5 * e[t as usize]
            })
            .collect();
        let p = find(&window(x)).expect("candidate");
        assert!(p.ring_down(500.0) && !p.sustained_and_dominant(500.0), "{p:?}");
        // Halving every 104 iterations is no ring-down on a horizon of 50.
        assert!(!p.ring_down(50.0));
        let env = p.envelope.expect("envelope");
        // ln-amplitude slope −1/150 per iteration.
        assert!((env.slope + 1.0 / 150.0).abs() < 0.001, "{env:?}");
    }

    #[test]
    fn a_slow_ring_down_over_few_blocks_is_not_shown_to_last() {
        // Period 62 over 500 iterations (7 one-period blocks), amplitude e^{−t/450}: half-life
        // 312, inside the 500-iteration horizon. Noise at 3 % of the starting amplitude makes
        // the measured decay uncertain; over the seeds, whatever its point estimate says, the
        // interval never excludes the ring-down, so the cycle is never called lasting.
        for seed in 0..20 {
            let e = noise(501, 100 + seed);
            let x: Vec<f64> = (0..501)
                .map(|t| {
                    let t = t as f64;
                    1.0 + 0.01 * (-t / 450.0).exp() * (2.0 * PI * t / 62.0).sin()
                        + 3e-4 * e[t as usize]
                })
                .collect();
            let p = find(&window(x)).expect("candidate");
            assert!(!p.lasts(500.0) && !p.sustained_and_dominant(500.0), "seed {seed}: {p:?}");
        }
        // The same cycle at a steady amplitude lasts on every seed.
        for seed in 0..20 {
            let e = noise(501, 200 + seed);
            let x: Vec<f64> = (0..501)
                .map(|t| 1.0 + 0.01 * (2.0 * PI * t as f64 / 62.0).sin() + 3e-4 * e[t])
                .collect();
            let p = find(&window(x)).expect("candidate");
            assert!(p.lasts(500.0), "seed {seed}: {p:?}");
        }
    }

    #[test]
    fn weak_peak_in_broadband_noise_does_not_dominate() {
        let e = noise(1001, 3);
        let x: Vec<f64> =
            (0..1001).map(|t| e[t] + 0.25 * (2.0 * PI * t as f64 / 12.0).sin()).collect();
        let p = find(&window(x)).expect("candidate");
        assert!(p.share < DOMINANT_SHARE, "{p:?}");
    }

    #[test]
    fn a_growing_cycle_is_found_and_a_saturating_one_is_not() {
        let e = noise(121, 4);
        let grow: Vec<f64> = (0..121)
            .map(|t| {
                let t = t as f64;
                -2.0 + 0.01 * (t / 15.0).exp() * (2.0 * PI * t / 3.0).sin() + 0.005 * e[t as usize]
            })
            .collect();
        let g = growing(&window(grow), 0.01).expect("growing");
        // e^{3/15} per cycle of 3 iterations.
        assert!((g.per_cycle - (0.2f64).exp()).abs() < 0.05, "{g:?}");
        let sat: Vec<f64> = (0..401)
            .map(|t| {
                let t = t as f64;
                let env = 1.0 - (-t / 60.0).exp();
                -2.0 + 0.3 * env * (2.0 * PI * t / 3.0).sin() + 0.005 * noise(401, 5)[t as usize]
            })
            .collect();
        assert!(growing(&window(sat), 0.01).is_none());
    }

    /// Normal-ish noise (the sum of three uniforms, variance 1).
    fn bell(n: usize, seed: u64) -> Vec<f64> {
        let (a, b, c) = (noise(n, seed), noise(n, seed + 7919), noise(n, seed + 104_729));
        (0..n).map(|i| a[i] + b[i] + c[i]).collect()
    }

    #[test]
    fn a_cycle_growing_out_of_the_noise_floor_is_not_slowing_one_settling_in_is() {
        // Synthetic: a period-3 cycle 0.02·e^{(t−10)/8} in noise of 0.05 over 40 values (the
        // first third at the noise floor), and a cycle settling in as 0.5·(1 − e^{−t/40})
        // (a limit cycle's onset: it rises like a ramp, slower and slower in the logarithm),
        // 200 noise draws each. Asking the middle third to have risen (the rule before)
        // kept the exponential in 179 of 200 draws, the rule now in 196; the settling one
        // reads as growing in 5 of 200, as before.
        let (mut kept, mut kept_before, mut settling_grows) = (0, 0, 0);
        for s in 0..200u64 {
            let e = bell(40, 50 + s);
            let at = |amp: &dyn Fn(f64) -> f64| {
                let vals = (0..40)
                    .map(|t| {
                        let t = t as f64;
                        amp(t) * (2.0 * PI * t / 3.0 + 0.3 * s as f64).sin() + 0.05 * e[t as usize]
                    })
                    .collect();
                envelope_at(&window(vals), 3.0).expect("13 blocks")
            };
            let g = at(&|t| 0.02 * ((t - 10.0) / 8.0).exp());
            kept += usize::from(!g.slowing());
            kept_before += usize::from(g.rise_mid > 0.0 && g.rise_last >= GROWTH_KEEP * g.rise_mid);
            settling_grows += usize::from(at(&|t| 0.5 * (1.0 - (-t / 40.0).exp())).grows(0.975));
        }
        assert!(kept >= 190, "kept {kept} of 200");
        assert!(kept_before < 185, "the case is a real one: {kept_before}");
        assert!(settling_grows <= 10, "settling read as growth {settling_grows} of 200");
    }

    #[test]
    fn the_envelope_of_noise_rises_no_more_often_than_its_level() {
        // An envelope at a fixed period (as `judge::growth` measures other series) on noise:
        // `grows(0.975)` is a one-sided 2.5 % test of the slope plus the size and not-slowing
        // conditions, so it may fire on at most 2.5 % of stationary series. 4000 draws per
        // length (binomial SD 0.25 points at 2.5 %); measured 1, 15 and 7 of 4000
        // (0.03–0.38 %) on white noise.
        for n in [41usize, 61, 121] {
            let mut fired = 0;
            for s in 0..4000u64 {
                let w = window(bell(n, 1000 + s));
                fired += usize::from(envelope_at(&w, 3.0).is_some_and(|e| e.grows(0.975)));
            }
            assert!(fired <= 100, "n {n}: {fired} of 4000");
        }
    }
}
