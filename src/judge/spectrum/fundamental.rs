//! The fundamental of a cycle whose harmonic the test found (`docs/methods.md`,
//! "Oscillation", harmonics).

use super::MIN_CYCLES;
use crate::judge::stats;

/// The fundamental of the cycle whose harmonic may be the significant ordinate `k`.
///
/// A limit cycle is rarely a pure sine: its second and third harmonics carry part of its
/// power. The test divides each ordinate by an AR(1) background fitted to the series, and
/// when a slow cycle dominates the series that background is steep (φ near 1) at the
/// cycle's own low frequency: a harmonic can then stand out more than the fundamental (a
/// monitor cycle of period 268 was reported at 89 with 6 % of the variance in its band, a
/// residual cycle of period 16.4 at 8.2 with 18 %; at the fundamental their families hold
/// 96 and 95 %). So when the raw ordinate within a bin of half or a third of `k` (with at
/// least [`MIN_CYCLES`] cycles) is larger than the one at `k` and stands out of its
/// neighbourhood ([`FUNDAMENTAL_STANDOUT`]), `k` is taken for a harmonic and that
/// ordinate's index is the cycle's; the test's p-value then stands for the cycle, of which
/// `k` is a part. `ord` is the periodogram of the detrended window, `m` its highest tested
/// index.
pub(super) fn of(ord: &[f64], k: usize, m: usize) -> usize {
    let mut best = k;
    for h in [2usize, 3] {
        let centre = (k as f64 / h as f64).round() as usize;
        if centre < MIN_CYCLES {
            continue;
        }
        for kc in centre.saturating_sub(1).max(MIN_CYCLES)..=(centre + 1).min(m) {
            if ord[kc] > ord[best] && ord[kc] > FUNDAMENTAL_STANDOUT * local_mean(ord, kc, m) {
                best = kc;
            }
        }
    }
    best
}

/// A fundamental must stand this many times above the mean ordinate of its neighbourhood
/// (ours): ordinates of noise are exponentially distributed about the local spectrum, so
/// one exceeds ten times its mean with probability e⁻¹⁰ ≈ 5·10⁻⁵, while the fundamental of a
/// cycle that dominates a window stands hundreds of times above it. Without this, red
/// noise at half or a third of a weak cycle's frequency took its place (8 of 39 windows of a
/// weak period-7 sinusoid in AR(1) noise with φ = 0.9 reported period 21).
const FUNDAMENTAL_STANDOUT: f64 = 10.0;

/// Mean ordinate about index `kc`: the median of the ordinates from half to twice `kc`, less
/// the two on either side of it, over ln 2 (the median of an exponential distribution is
/// its mean times ln 2). Infinite when fewer than four remain.
fn local_mean(ord: &[f64], kc: usize, m: usize) -> f64 {
    let (lo, hi) = ((kc / 2).max(1), (2 * kc).min(m));
    let around: Vec<f64> = (lo..=hi).filter(|b| b.abs_diff(kc) > 2).map(|b| ord[b]).collect();
    if around.len() < 4 {
        return f64::INFINITY;
    }
    stats::median(&around).map_or(f64::INFINITY, |md| md / std::f64::consts::LN_2)
}
