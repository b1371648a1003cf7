//! A residual whose own noise hides the fall that the rest of the run shows is not stalled.
//!
//! The stall test asks a residual to show a fall over its stall window; a noisy residual
//! falling at a steady 0.4 dec/kit may fail to show it on its own (its interval reaches up
//! past −0.1 dec/kit) while every other equation of the same coupled solve falls
//! significantly at that rate. The residuals of one solve fall together, so when most of the
//! other residuals fall significantly over the same iterations, and steadily (the interval of
//! their rate over the latest half of the window holds their rate over the whole: the
//! approach to a plateau of the whole solution falls at the start of the window only, and
//! does not count), and the stalled residual's
//! interval holds their median rate, the data cannot tell its history from the common fall:
//! the stall finding stays as a note and does not decide. A stall of the whole solution (every
//! residual flat) and a residual whose interval excludes the common rate (it has really
//! stopped while the others go on) keep their stall. A finished run is left alone: there is
//! no later for the fall to show in.

use super::residual::StallFacts;
use super::series::View;
use super::text::dec;
use super::trend::{self, MIN_FALL_DEC_PER_KIT};
use super::{Sink, stats};

/// Demote the stall findings in `stalls` (`(index into residuals, facts)`) whose residual's
/// interval holds the rate at which most of the other residuals fall significantly over the
/// same iterations. `residuals` are the views of every judged residual.
pub fn demote_hidden(
    stalls: &[(usize, StallFacts)],
    residuals: &[&View<'_>],
    last: i64,
    sink: &mut Sink,
) {
    let to_log = |x: f64| if x > 0.0 { x.log10() } else { f64::NAN };
    for (k, sf) in stalls {
        let others: Vec<&View<'_>> =
            residuals.iter().enumerate().filter(|(j, _)| j != k).map(|(_, v)| *v).collect();
        if others.is_empty() {
            continue;
        }
        let span = last.saturating_sub(sf.from).saturating_add(1).max(1) as usize;
        // Falling over the whole window, and at a rate its latest half does not contradict:
        // the approach to a plateau of the whole solution falls at the window's start only.
        let half_from = last.saturating_sub((span / 2) as i64);
        let rates: Vec<f64> = others
            .iter()
            .filter_map(|v| {
                let w = v.window_map(last, span, to_log).from_iteration(sf.from);
                let whole = trend::fit(&w.its, &w.vals)?;
                let h = w.from_iteration(half_from);
                let recent = trend::fit(&h.its, &h.vals)?;
                let steady = recent.ci.0 <= whole.slope_dec_per_kit
                    && whole.slope_dec_per_kit <= recent.ci.1;
                (whole.falling(MIN_FALL_DEC_PER_KIT) && steady).then_some(whole.slope_dec_per_kit)
            })
            .collect();
        if 2 * rates.len() <= others.len() {
            continue;
        }
        let Some(common) = stats::median(&rates) else { continue };
        if !(sf.ci.0 <= common && common <= sf.ci.1) {
            continue;
        }
        let Some(f) = sink.findings.get_mut(sf.finding) else { continue };
        f.supports = None;
        f.detail = format!(
            "{}; but {} of the {} other residuals fall significantly and steadily over the same iterations, at {} dec/kit (median), inside this interval: its noise hides the common fall, not shown to be a stall",
            f.detail,
            rates.len(),
            others.len(),
            dec(common),
        );
    }
}
