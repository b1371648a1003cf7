//! Health checks every judged series gets, whatever its role: non-finite values, blow-up by
//! orders of magnitude, sustained exponential growth, an indicator pinned at its maximum, and
//! the jump of the last values that makes a crash signature a divergence.
//!
//! Blow-ups do not always show in residuals: they saturate near 1 or collapse to
//! tiny values, while monitors, continuity errors and sweep counts explode. These rules are
//! what lets monitors and indicators make a run `diverging`.
//!
//! The start-up allowance excuses only what start-ups do: a quantity moving from its first
//! values by a modest factor. From the first tens of iterations on, a value
//! [`STARTUP_BLOWUP_DEC`] decades beyond anything in the segment's first values, an
//! indicator pinned at its maximum, a sustained exponential growth of
//! [`STARTUP_EXP_GROWTH_DEC`] decades, and an oscillation growing cycle after cycle
//! ([`growing_cycle`]) are divergence.

use super::criteria::Resolved;
use super::history::History;
use super::limits::*;
use super::oscillation;
use super::scale::{self, Magnitude};
use super::series::{self, View};
use super::stats;
use super::text::{dec, num, pct};
use super::trend;
use super::types::{FindingKind, Verdict};
use super::{Sink, finding};

/// Non-finite values (NaN, ±infinity, overflow fields). In the latest segment after the
/// start-up, or as the last value, they make the run diverging; only in the start-up with
/// finite values since (a ratio monitor undefined on the first iteration) or only in an
/// earlier segment, they are reported without deciding.
///
/// The counts and positions come from the store's running aggregates when given
/// ([`super::history`]); otherwise from a scan of the run.
pub fn non_finite(name: &str, v: &View<'_>, sink: &mut Sink) {
    let n = v.len();
    // (first of the run, first and last of the latest segment, count there, count in all).
    let facts = match v.history.map(|h| h.tally()).filter(|t| t.seg == v.seg) {
        Some(t) => (t.nf_first, t.seg_nf_first, t.seg_nf_last, t.seg_nf_count, t.nf_count),
        None if v.first_non_finite(0).is_none() => return,
        None => {
            let first_any = v.first_non_finite(0);
            let mut in_seg = (None, None, 0usize);
            for i in (v.seg..n).filter(|&i| !v.vals[i].is_finite()) {
                in_seg = (in_seg.0.or(Some(i)), Some(i), in_seg.2 + 1);
            }
            let all = if first_any.is_some() && in_seg.2 == 0 {
                v.vals.iter().filter(|x| !x.is_finite()).count()
            } else {
                in_seg.2
            };
            (first_any, in_seg.0, in_seg.1, in_seg.2, all)
        }
    };
    let (Some(first_any), seg_first, seg_last, seg_count, all_count) = facts else {
        return;
    };
    let last_it = v.last_it();
    let startup_end = series::startup_end(v.seg_first_it());
    let (idx, supports, detail_tail) = match (seg_first, seg_last) {
        (Some(f), Some(l)) => {
            let decisive = l == n - 1 || v.its[l] >= startup_end;
            let tail = if decisive { "" } else { " (only during the start-up, finite since)" };
            (f, decisive.then_some(Verdict::Diverging), tail)
        }
        _ => (first_any, None, " (in an earlier segment, before the restart)"),
    };
    let x = v.vals[idx];
    let what = if x.is_nan() { "NaN" } else { "infinite (overflow)" };
    let count = if seg_count == 0 { all_count } else { seg_count };
    let mut f = finding(FindingKind::NonFinite, name, v.its[idx], last_it, "non_finite_values");
    f.value = count as f64;
    f.threshold = Some(0.0);
    f.supports = supports;
    f.detail =
        format!("{name} became {what} at it {}, {count} such values{detail_tail}", v.its[idx]);
    sink.findings.push(f);
}

/// Median of `|x|` over the finite values of `vals`.
fn median_abs(vals: &[f64]) -> Option<f64> {
    stats::median(&vals.iter().map(|x| x.abs()).collect::<Vec<_>>())
}

/// The jump of the last values against the window before them: `Some(description)` when the
/// median |value| of the last 3 finite values is at least `factor` times, or below
/// `factor⁻³` times, the median over the rest of the window ([`CRASH_JUMP`],
/// [`CRASH_JUMP_RESIDUAL`]).
pub fn end_jump(name: &str, v: &View<'_>, window: usize, factor: f64) -> Option<String> {
    let win = v.window(window);
    let k = win.len();
    if k < 13 {
        return None;
    }
    let reference = median_abs(&win.vals[..k - 10])?;
    let now = median_abs(&win.vals[k - 3..])?;
    if !(reference > 0.0) {
        return None;
    }
    let ratio = now / reference;
    if ratio >= factor {
        Some(format!("{name} grew ×{} in its last values", num(ratio)))
    } else if ratio <= factor.powi(-3) {
        Some(format!("{name} collapsed to ×{} of its level in its last values", num(ratio)))
    } else {
        None
    }
}

/// Blow-up rules for monitors and indicators on the latest segment after its start-up:
/// a jump of [`BLOWUP_DEC`] decades above the reference level, sustained exponential growth,
/// and (indicators) a value pinned at its maximum. Returns true when a finding was pushed.
pub fn blowup(name: &str, v: &View<'_>, window: usize, indicator: bool, sink: &mut Sink) -> bool {
    let n = v.len();
    let last_it = v.last_it();
    let seg_first = v.seg_first_it();
    let startup_end = series::startup_end(seg_first);
    // Reference range: after the start-up, ending before the most recent part (half a window,
    // or half of what there is), at most four windows long.
    let recent = ((window / 2) as i64).min(last_it.saturating_sub(startup_end) / 2).max(1);
    let ref_last = last_it.saturating_sub(recent);
    let ref_first = startup_end.max(ref_last.saturating_sub(4 * window as i64));
    let a = v.seg + v.its[v.seg..].partition_point(|&i| i < ref_first);
    let b = v.seg + v.its[v.seg..].partition_point(|&i| i <= ref_last);
    let reference = if b > a + 10 { median_abs(&v.vals[a..b]) } else { None };
    let now = median_abs(&v.vals[n.saturating_sub(5).max(v.seg)..]);

    // 0. Orders of magnitude beyond anything in the segment's first values, and still
    // shooting up (a decade above the 20 values before the last 5: a low start that has
    // levelled off is not this). Any time: the start-up excuses a modest factor, never this.
    let recently = {
        let end = n.saturating_sub(5).max(v.seg);
        median_abs(&v.vals[end.saturating_sub(20).max(v.seg)..end])
    };
    if let (Some(early), Some(c), Some(before)) = (series::early_max_abs(v), now, recently)
        && early > 0.0
        && (c / early).log10() >= STARTUP_BLOWUP_DEC
        && c >= 10.0 * before
    {
        let growth = (c / early).log10();
        let from = v.seg + series::EARLY_VALUES.min(n - v.seg);
        let first =
            (from..n).find(|&i| v.vals[i].abs() > 10.0 * early).map_or(last_it, |i| v.its[i]);
        let mut f = finding(FindingKind::BlowUp, name, first, last_it, "growth_dec");
        f.value = growth;
        f.threshold = Some(STARTUP_BLOWUP_DEC);
        f.supports = Some(Verdict::Diverging);
        f.detail = format!(
            "{name} grew {} decades beyond its first values (at most {} then, {} now): it is blowing up",
            dec(growth),
            num(early),
            num(c),
        );
        sink.findings.push(f);
        return true;
    }

    // 1. Orders of magnitude above the reference level.
    if let (Some(r), Some(c)) = (reference, now) {
        if r > 0.0 && (c / r).log10() >= BLOWUP_DEC {
            let growth = (c / r).log10();
            // Date it: first value after the reference range beyond 10× the reference.
            let first = (b..n).find(|&i| v.vals[i].abs() > 10.0 * r).map_or(last_it, |i| v.its[i]);
            let mut f = finding(FindingKind::BlowUp, name, first, last_it, "growth_dec");
            f.value = growth;
            f.threshold = Some(BLOWUP_DEC);
            f.supports = Some(Verdict::Diverging);
            f.detail = format!(
                "{name} grew {} decades, from about {} to {}: it is blowing up",
                dec(growth),
                num(r),
                num(c),
            );
            sink.findings.push(f);
            return true;
        }
    }

    // 2. Sustained exponential growth over the window: after the start-up by at least
    // EXP_GROWTH_DEC; during it (from the EARLY_VALUES-th value on) by STARTUP_EXP_GROWTH_DEC.
    let win = v.window_map(last_it, window, |x| if x != 0.0 { x.abs().log10() } else { f64::NAN });
    let young = last_it < startup_end.saturating_add(30);
    let from = if young { v.its[(v.seg + series::EARLY_VALUES).min(n - 1)] } else { startup_end };
    let need = if young { STARTUP_EXP_GROWTH_DEC } else { EXP_GROWTH_DEC };
    let post = win.from_iteration(from);
    if post.len() >= 30 {
        if let Some(t) = trend::fit(&post.its, &post.vals) {
            let rise = t.slope_dec_per_kit * post.span() as f64 / 1000.0;
            let third = post.len() / 3;
            let m = |r: std::ops::Range<usize>| stats::median(&post.vals[r]).unwrap_or(f64::NAN);
            let (m1, m2, m3) = (m(0..third), m(third..2 * third), m(2 * third..post.len()));
            let keeps = m2 > m1 && m3 > m2 && (m3 - m2) >= EXP_GROWTH_KEEP * (m2 - m1);
            if t.rising() && rise >= need && keeps {
                let mut f =
                    finding(FindingKind::BlowUp, name, t.first, t.last, "growth_dec_per_kit");
                f.value = t.slope_dec_per_kit;
                f.threshold = Some(0.0);
                f.p_value = stats::t_two_sided_p(t.slope_dec_per_kit / t.se_dec_per_kit, t.dof);
                f.supports = Some(Verdict::Diverging);
                f.detail = format!(
                    "{name} grows exponentially: {} decades over the last {} iterations and not slowing down",
                    dec(rise),
                    post.span(),
                );
                sink.findings.push(f);
                return true;
            }
        }
    }

    // 3. Indicators: pinned at the maximum (a sweep count at its limit). The usual level is
    // the reference range after the start-up, or, in a young segment, the median of the
    // values before the pinned stretch (at least PINNED_MIN_VALUES of them).
    if indicator {
        // Counted by the store as values arrive (a sweep count that never changes would
        // otherwise be counted back over the whole segment at every call).
        let pinned_now = History::trailing_equal(v, v.seg);
        let before = n - pinned_now;
        let usual = reference.or_else(|| {
            let lo = before.saturating_sub(4 * window).max(v.seg);
            (before >= lo + PINNED_MIN_VALUES).then(|| median_abs(&v.vals[lo..before])).flatten()
        });
        if let (Some(r), Some(&x)) = (usual, v.vals.last()) {
            let pinned = pinned_now;
            // The segment's maximum last: only a pinned value far above the usual level
            // needs the pass over the segment.
            let seg_max = || {
                v.vals[v.seg..].iter().copied().filter(|y| y.is_finite()).fold(f64::MIN, f64::max)
            };
            if x.is_finite()
                && pinned >= PINNED_MIN_VALUES
                && r > 0.0
                && x.abs() >= PINNED_RATIO * r
                && x == seg_max()
            {
                let first = v.its[n - pinned];
                let mut f = finding(FindingKind::BlowUp, name, first, last_it, "pinned_at_max");
                f.value = pinned as f64;
                f.threshold = Some(PINNED_MIN_VALUES as f64);
                f.supports = Some(Verdict::Diverging);
                f.detail = format!(
                    "{name} has been stuck at its maximum {} for {pinned} values (usually about {}): a limit is being hit, the solution is not converging",
                    num(x),
                    num(r),
                );
                sink.findings.push(f);
                return true;
            }
        }
    }
    false
}

/// An oscillation whose amplitude grows cycle after cycle ([`oscillation::growing`]) in a
/// residual (log10 values) or a monitor (`magnitude` given): the classic prelude of a crash.
/// Looked for over the last 40, 60, 120 and 240 iterations of the segment after its first
/// values, so that it is found as soon as the growth is significant, start-up or not, with
/// at least [`GROWTH_MIN_CYCLES`] cycles in the window. The component must be material:
/// ±[`OSC_MIN_RESIDUAL_DEC`] for residuals, a peak-to-peak amplitude of half the band limit
/// for monitors (a growing cycle has not finished growing). The finding is pushed without a
/// verdict: the judge makes it decide only when another series grows with the same period
/// (an instability shows in the whole solution; a noisy stretch of one residual does not),
/// unless its amplitude has grown by [`BLOWUP_DEC`] decades over the window: a hundredfold
/// growth of one component is a blow-up of it, which no noise in a steady cycle's amplitude
/// reaches (the fourfold [`oscillation::GROWTH_MIN_RATIO`] is the bar for noise).
pub fn growing_cycle(
    name: &str,
    v: &View<'_>,
    rc: &Resolved,
    magnitude: Option<&Magnitude>,
    sink: &mut Sink,
) -> bool {
    let last_it = v.last_it();
    let n = v.len();
    let from = v.its[(v.seg + series::EARLY_VALUES).min(n - 1)];
    // The first window that shows growth gives the finding, unless a longer one shows the
    // cycle grown by orders of magnitude (it then decides alone).
    let mut first = None;
    for w in GROWTH_WINDOWS {
        let win = window_in(v, last_it, w, magnitude.is_none()).from_iteration(from);
        if win.len() < 32 {
            continue;
        }
        let Some(g) = oscillation::growing(&win, GROWTH_ALPHA) else { continue };
        if (win.span() as f64) < GROWTH_MIN_CYCLES * g.periodic.period {
            continue;
        }
        // A residual's cycle must grow in the residual's own units, not only in the
        // logarithm: noise of a constant size on a residual falling onto its floor grows in
        // the logarithm as the level falls (×100 for two decades of fall, near period 2,
        // white noise's highest frequency). The cycle before a crash grows while the level
        // does not fall. Growth in units = growth in the logarithm × the level's change.
        if magnitude.is_none() && !grown_in_units(&win, g.envelope.ratio) {
            continue;
        }
        let (material, amp_text) = match magnitude {
            None => (
                g.amplitude_now >= OSC_MIN_RESIDUAL_DEC,
                format!("±{} decades", dec(g.amplitude_now)),
            ),
            Some(m) => {
                let mean = stats::mean(&win.vals).unwrap_or(f64::NAN);
                let (kind, r) = scale::reference(mean, m.at(last_it), rc.scale);
                let amp = super::stationarity::relative_pct(g.amplitude_now, r);
                let material = match rc.band_abs {
                    Some(l) => 2.0 * g.amplitude_now >= 0.5 * l.value,
                    None => 2.0 * amp >= 0.5 * rc.band.value,
                };
                (material, format!("±{} {}", pct(amp), scale::describe(kind, r)))
            }
        };
        if !material {
            continue;
        }
        let p = &g.periodic;
        let mut f =
            finding(FindingKind::GrowingOscillation, name, p.first, p.last, "growth_per_cycle");
        f.value = g.per_cycle;
        f.threshold = Some(1.0);
        f.p_value = Some(p.osc.p_value);
        f.period = Some(p.period);
        // Grown by orders of magnitude (the BLOWUP_DEC reading of a blow-up), the cycle is
        // no noisy stretch: it decides alone.
        let alone = g.envelope.ratio >= 10f64.powf(BLOWUP_DEC);
        f.supports = alone.then_some(Verdict::Diverging);
        f.detail = format!(
            "{name} oscillates with a period of {} iterations and its amplitude grows ×{} per cycle (×{} over the last {} iterations, now {amp_text})",
            num(p.period),
            num(g.per_cycle),
            num(g.envelope.ratio),
            last_it.saturating_sub(p.first),
        );
        if alone {
            sink.findings.push(f);
            return true;
        }
        first.get_or_insert(f);
    }
    first.map(|f| sink.findings.push(f)).is_some()
}

/// The window `(t − w, t]` of `v`, in decades when `decades` (a residual: non-positive
/// values dropped), else as it is.
fn window_in(v: &View<'_>, t: i64, w: usize, decades: bool) -> series::Window {
    match decades {
        true => v.window_map(t, w, |x| if x > 0.0 { x.log10() } else { f64::NAN }),
        false => v.window_map(t, w, |x| x),
    }
}

/// A residual's cycle (`win` in decades) whose log-amplitude grew `ratio`-fold grew at least
/// [`oscillation::GROWTH_MIN_RATIO`]-fold in the residual's own units: growth in units is
/// growth in the logarithm times the level's change over the window.
fn grown_in_units(win: &series::Window, ratio: f64) -> bool {
    let level_change = super::trend::fit(&win.its, &win.vals)
        .map_or(0.0, |t| t.slope_dec_per_kit * win.span() as f64 / 1000.0);
    ratio * 10f64.powf(level_change.min(0.0)) >= oscillation::GROWTH_MIN_RATIO
}

/// Whether `v` grows at the period of another series' growing cycle over the iterations
/// `first..=last` that cycle was found in: its envelope at that period rises at one-sided
/// level `level` ([`oscillation::Envelope::grows`]; a residual in decades and grown in its
/// own units too). The period is given, not searched for, so no spectral test is needed: one
/// instability of the coupled solve shows in every equation at once, each with its own
/// share of noise.
pub fn grows_at(v: &View<'_>, residual: bool, period: f64, span: (i64, i64), level: f64) -> bool {
    let (first, last) = span;
    let w = usize::try_from(last - first + 1).unwrap_or(0);
    let win = window_in(v, last, w, residual).from_iteration(first.max(v.seg_first_it()));
    match oscillation::envelope_at(&win, period) {
        Some(e) => e.grows(level) && (!residual || grown_in_units(&win, e.ratio)),
        None => false,
    }
}

/// Whether the log-departure's rate over the last sixth of its rise is at least
/// [`EXP_GROWTH_KEEP`] of its rate over the sixth before (each fitted over at least three
/// blocks). An exponential keeps one log-rate over any part of its rise; a monitor that
/// left a plateau at a kink rises fastest just after the kink and ever more slowly as it
/// approaches its new level, which the thirds alone miss when the first third is the slow
/// drift before the kink.
fn keeps_recent_rate(its: &[i64], logs: &[f64]) -> bool {
    let q = (logs.len() / 6).max(3);
    if logs.len() < 2 * q {
        return true;
    }
    let slope = |r: std::ops::Range<usize>| {
        let x: Vec<f64> = its[r.clone()].iter().map(|&i| i as f64).collect();
        stats::ols(&x, &logs[r]).map(|f| f.slope)
    };
    let n = logs.len();
    match (slope(n - 2 * q..n - q), slope(n - q..n)) {
        (Some(prev), Some(last)) => prev <= 0.0 || last >= EXP_GROWTH_KEEP * prev,
        _ => true,
    }
}

/// The statistic of a [`departure_growth`] finding (the judge recognises it by this).
pub const DEPARTURE_STATISTIC: &str = "departure_growth_dec";

/// An instability growing out of a steady state: a monitor's departure `|x − b|` from the
/// level `b` it held at the start of the look-back grows exponentially, keeps its rate, and
/// is already material. A small disturbance of a steady solution that the iteration
/// amplifies grows like `e^{σt}` (the linear-stability picture), so its logarithm rises at
/// a steady or growing rate; every healthy change of a monitor after its start-up is an
/// approach to a level (`f + a·e^{−t/τ}`, or a drift), whose departure from an earlier level
/// rises ever more slowly, and noise does not rise at all. [`blowup`] looks at `log|x|`,
/// which stays flat until the disturbance reaches the monitor's own size: a monitor of level
/// 1 growing to 10 moves `log|x|` by one decade only at the very end, while its departure has
/// grown by four. The look-back is one, two and four evidence windows after the start-up
/// ([`series::startup_end_within`]: a fifth of a segment shorter than 1000 iterations; a
/// slow instability needs more than one window to rise a decade above the noise); a run
/// that has not yet had one window after its start-up is looked at over what it has, from
/// ten blocks on (a 300-iteration run is no less able to blow up). The departure is clamped
/// below at the noise about `b` (median |x − b| over the first fifth) and its medians over
/// blocks of [`DEPARTURE_BLOCK`] iterations (their values, at least three: a log printed
/// every few iterations has fewer values per block, not longer blocks) are looked at since
/// they last stood within half a decade of that noise. It decides when their rise there is
/// significant, at least [`EXP_GROWTH_DEC`] decade and not slowing down
/// ([`EXP_GROWTH_KEEP`], thirds: an approach to a new level, `a·(1 − e^{−t/τ})`, and any
/// polynomial drift rise ever more slowly in the logarithm, an exponential does not; and
/// [`keeps_recent_rate`] at the end of the rise, where a two-step departure shows it), and
/// the last departure is at least [`DEPARTURE_MATERIAL`] of the monitor's reference
/// ([`scale::reference`]). The judge keeps it from deciding while most residuals fall
/// (`departure_while_falling` in the judge). Returns true when a finding was pushed.
pub fn departure_growth(
    name: &str,
    v: &View<'_>,
    rc: &Resolved,
    mag: &Magnitude,
    sink: &mut Sink,
) -> bool {
    let last_it = v.last_it();
    let startup_end = series::startup_end_within(v.seg_first_it(), last_it);
    let w = rc.evidence();
    for k in [1usize, 2, 4] {
        let win = v.window_map(last_it, k * w, |x| x).from_iteration(startup_end);
        // A look-back the run cannot fill is asked once, over what the run has.
        let filled = win.span() as f64 >= 0.9 * (k * w) as f64;
        // Blocks of DEPARTURE_BLOCK iterations' values (at least three for a median): a log
        // written every few iterations has fewer values per block, not longer blocks.
        let block =
            ((DEPARTURE_BLOCK as f64 / win.spacing()).round() as usize).clamp(3, DEPARTURE_BLOCK);
        if win.len() < 10 * block || (k > 1 && !filled) {
            break;
        }
        let fifth = win.len() / 5;
        let Some(base) = stats::median(&win.vals[..fifth]) else { continue };
        let dev: Vec<f64> = win.vals[..fifth].iter().map(|x| (x - base).abs()).collect();
        let noise = stats::median(&dev).unwrap_or(0.0);
        let floor = if noise > 0.0 { noise } else { f64::MIN_POSITIVE };
        // Block medians of log10 departure, clamped at the noise.
        let mut its = Vec::new();
        let mut logs = Vec::new();
        for (c_its, c_vals) in win.its.chunks(block).zip(win.vals.chunks(block)) {
            if c_vals.len() < block {
                continue;
            }
            let d: Vec<f64> =
                c_vals.iter().map(|x| ((x - base).abs().max(floor)).log10()).collect();
            if let Some(m) = stats::median(&d) {
                its.push(c_its[c_its.len() - 1]);
                logs.push(m);
            }
        }
        // The rise since the departure last stood near the noise (within half a decade):
        // growth is judged only where it is measured, not where the clamp hides it.
        let near_noise = floor.log10() + 0.5;
        let start = logs.iter().rposition(|&l| l <= near_noise).map_or(0, |i| i + 1);
        if logs.len() - start < 9 {
            continue;
        }
        let (its, logs) = (&its[start..], &logs[start..]);
        let Some(t) = trend::fit(its, logs) else { continue };
        let span = its[its.len() - 1].saturating_sub(its[0]);
        let rise = t.slope_dec_per_kit * span as f64 / 1000.0;
        let third = logs.len() / 3;
        let m = |r: std::ops::Range<usize>| stats::median(&logs[r]).unwrap_or(f64::NAN);
        let (m1, m2, m3) = (m(0..third), m(third..2 * third), m(2 * third..logs.len()));
        let keeps = m2 > m1
            && m3 > m2
            && (m3 - m2) >= EXP_GROWTH_KEEP * (m2 - m1)
            && keeps_recent_rate(its, logs);
        let now = 10f64.powf(logs[logs.len() - 1]);
        // The reference the drift and band limits use, at the start of the look-back.
        let (kind, r) = scale::reference(base, mag.at(its[0]), rc.scale);
        let material = r > 0.0 && now >= DEPARTURE_MATERIAL * r;
        if t.rising() && rise >= EXP_GROWTH_DEC && keeps && material {
            let mut f = finding(FindingKind::BlowUp, name, t.first, t.last, DEPARTURE_STATISTIC);
            f.value = rise;
            f.threshold = Some(EXP_GROWTH_DEC);
            f.p_value = stats::t_two_sided_p(t.slope_dec_per_kit / t.se_dec_per_kit, t.dof);
            f.supports = Some(Verdict::Diverging);
            f.detail = format!(
                "{name} departs from its level {} exponentially: the departure grew {} decades above its noise over the last {} iterations, not slowing down, and is now {} {}",
                num(base),
                dec(rise),
                span,
                pct(super::stationarity::relative_pct(now, r)),
                scale::describe(kind, r),
            );
            sink.findings.push(f);
            return true;
        }
    }
    false
}
