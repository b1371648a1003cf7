//! Oscillation detection: periodogram (FFT), Fisher's g-test with its exact p-value, and the
//! period and amplitude of the dominant component.
//!
//! Fisher (1929) tests the largest periodogram ordinate against white noise. Solver histories
//! break that null in two ways, and the detector guards against both (METHODS §3 caveats):
//!
//! * **Trends.** A settling monitor or a converging log-residual is a smooth curve; its
//!   leakage puts a steep `1/k²` background into the lowest frequencies. The window is
//!   detrended by a quadratic, and candidates need at least [`MIN_CYCLES`] cycles per window.
//! * **Red noise.** Positively autocorrelated noise has large low-frequency ordinates. Each
//!   ordinate is divided by an AR(1) spectrum (METHODS §3 suggestion) fitted by Whittle
//!   likelihood to the periodogram of the window *with its strongest sinusoid removed*, so
//!   neither a genuine peak nor its spectral leakage (which towers over the noise for tens of
//!   bins) inflates its own background; Fisher's g is computed on these whitened ordinates.
//!
//! A limit cycle is sustained, so the amplitude of the fitted sinusoid is also compared
//! between the two halves of the window ([`Oscillation::steady`]); random red-noise peaks
//! and trend remnants rarely have the same amplitude in both halves. Periods from 2
//! iterations (callers pass an odd-length window so that period 2 is not the dropped Nyquist
//! ordinate) up to a quarter of the window are covered.

use rustfft::FftPlanner;
use rustfft::num_complex::Complex;

use super::stats;

/// Periodogram ordinates `I_k = |Σ_t x_t e^{−2πikt/n}|² / n` for `k = 0..=n/2` (no
/// demeaning, no window: callers detrend first).
pub fn periodogram(x: &[f64]) -> Vec<f64> {
    let n = x.len();
    if n == 0 {
        return Vec::new();
    }
    let mut buf: Vec<Complex<f64>> = x.iter().map(|v| Complex::new(*v, 0.0)).collect();
    FftPlanner::<f64>::new().plan_fft_forward(n).process(&mut buf);
    buf.iter().take(n / 2 + 1).map(|c| c.norm_sqr() / n as f64).collect()
}

/// Number of Fourier frequencies Fisher's test uses for a series of length `n`:
/// `m = ⌊(n−1)/2⌋` (zero frequency and, for even `n`, Nyquist dropped).
pub fn fisher_m(n: usize) -> usize {
    n.saturating_sub(1) / 2
}

/// Fisher's statistic `g = max I_k / Σ I_k` over the given ordinates, with the index of the
/// maximum. `None` when the ordinates are empty or sum to zero.
pub fn fisher_g(ordinates: &[f64]) -> Option<(usize, f64)> {
    let sum: f64 = ordinates.iter().sum();
    if ordinates.is_empty() || !(sum > 0.0) || !sum.is_finite() {
        return None;
    }
    let (k, max) = ordinates.iter().enumerate().max_by(|a, b| a.1.total_cmp(b.1))?;
    Some((k, max / sum))
}

/// Exact p-value of Fisher's g under Gaussian white noise with `m` ordinates:
/// `P(G > g) = Σ_{j=1}^{⌊1/g⌋} (−1)^{j−1} C(m,j) (1 − jg)^{m−1}` (Fisher 1929).
///
/// Terms are formed in log space (`ln C(m,j)` by recurrence, `ln(1−jg)` by `ln_1p`) and
/// summed with Neumaier compensation. The alternating sum cancels badly only when the
/// first term `S1 = m(1−g)^{m−1}` is large, i.e. when `p` is within about 1e-5 of 1; when the
/// rounding-error bound of the sum exceeds 1e-9 the Poisson-clumping value `1 − e^{−S1}` is
/// returned instead, which agrees with the exact value to that accuracy in that regime.
pub fn fisher_p_value(g: f64, m: usize) -> f64 {
    if m < 2 || g.is_nan() || g <= 1.0 / m as f64 {
        // g ≥ 1/m always holds (the maximum is at least the mean), so this is p = 1.
        return 1.0;
    }
    if g >= 1.0 {
        return 0.0;
    }
    let mf = m as f64;
    let jmax = ((1.0 / g).floor() as usize).min(m);
    let (mut sum, mut comp, mut biggest) = (0.0f64, 0.0f64, 0.0f64);
    let mut ln_c = 0.0; // ln C(m, 0)
    for j in 1..=jmax {
        let jf = j as f64;
        ln_c += ((mf - jf + 1.0) / jf).ln();
        let base = 1.0 - jf * g;
        if base <= 0.0 {
            break;
        }
        let mag = (ln_c + (mf - 1.0) * (-jf * g).ln_1p()).exp();
        biggest = biggest.max(mag);
        let term = if j % 2 == 1 { mag } else { -mag };
        // Neumaier compensated addition.
        let t = sum + term;
        comp += if sum.abs() >= term.abs() { (sum - t) + term } else { (term - t) + sum };
        sum = t;
    }
    let p = sum + comp;
    let err_bound = biggest * jmax as f64 * 1e-14;
    if err_bound > 1e-9 {
        let s1 = (mf.ln() + (mf - 1.0) * (-g).ln_1p()).exp();
        return (1.0 - (-s1).exp()).clamp(0.0, 1.0);
    }
    p.clamp(0.0, 1.0)
}

/// Fewest cycles per window a candidate period must show (so that each half of the window
/// holds two cycles for the steadiness check, and trend leakage at the lowest frequencies is
/// never a candidate; our choice).
pub const MIN_CYCLES: usize = 5;

/// A dominant periodic component found in a window.
#[derive(Debug, Clone, Copy, PartialEq)]
pub struct Oscillation {
    /// Fourier index of the peak (cycles per window).
    pub k: usize,
    /// Fisher's g of the whitened ordinates.
    pub g: f64,
    /// Exact p-value of `g` with `m` ordinates.
    pub p_value: f64,
    /// Number of ordinates tested (`k = MIN_CYCLES..=⌊(n−1)/2⌋`).
    pub m: usize,
    /// Refined period in samples.
    pub period: f64,
    /// Semi-amplitude of the least-squares sinusoid at the refined frequency (units of `x`).
    pub amplitude: f64,
    /// Smaller over larger semi-amplitude of the same sinusoid fitted to each half window.
    pub half_ratio: f64,
    /// AR(1) coefficient of the fitted background spectrum.
    pub phi: f64,
}

impl Oscillation {
    /// Smallest [`Oscillation::half_ratio`] of a sustained oscillation (ours: an amplitude
    /// changing threefold within the window is not a steady limit cycle).
    pub const MIN_HALF_RATIO: f64 = 1.0 / 3.0;

    /// Same amplitude (within a factor 3) in both halves of the window.
    pub fn steady(&self) -> bool {
        self.half_ratio >= Self::MIN_HALF_RATIO
    }

    /// Significant at level `alpha` and steady.
    pub fn significant(&self, alpha: f64) -> bool {
        self.p_value < alpha && self.steady()
    }
}

/// Linear detrend: residuals of the least-squares line against the sample index.
pub fn detrend(x: &[f64]) -> Vec<f64> {
    let t: Vec<f64> = (0..x.len()).map(|i| i as f64).collect();
    match stats::ols(&t, x) {
        Some(fit) => stats::ols_residuals(&fit, &t, x),
        None => {
            let m = stats::mean(x).unwrap_or(0.0);
            x.iter().map(|v| v - m).collect()
        }
    }
}

/// AR(1) spectral shape `1 / (1 − 2φ cos ω + φ²)` up to a constant.
fn ar1_shape(phi: f64, omega: f64) -> f64 {
    1.0 / (1.0 - 2.0 * phi * omega.cos() + phi * phi)
}

/// Whittle estimate of the AR(1) coefficient from periodogram ordinates `(ω_k, I_k)`,
/// skipping the indices in `exclude`: minimises `K ln σ̂²(φ) − Σ ln h_k(φ)` with
/// `h_k = 1 − 2φ cos ω_k + φ²` and `σ̂² = mean(I_k h_k)`. Grid search then golden section on
/// `φ ∈ [−0.95, 0.995]`.
fn whittle_ar1(omega: &[f64], ord: &[f64], exclude: &[usize]) -> f64 {
    let kept: Vec<(f64, f64)> = omega
        .iter()
        .zip(ord)
        .enumerate()
        .filter(|(i, _)| !exclude.contains(i))
        .map(|(_, (w, v))| (w.cos(), *v))
        .collect();
    let objective = |phi: f64| -> f64 {
        let (mut s, mut lh) = (0.0, 0.0);
        // Σ ln h by logarithms of products of 8: h lies in [(1−|φ|)², (1+|φ|)²] ⊂ [2.5e-5, 4],
        // so a product of 8 stays far inside the f64 range; 8× fewer logarithms.
        for chunk in kept.chunks(8) {
            let mut prod = 1.0;
            for &(c, v) in chunk {
                let h = 1.0 - 2.0 * phi * c + phi * phi;
                s += v * h;
                prod *= h;
            }
            lh += prod.ln();
        }
        if kept.is_empty() || !(s > 0.0) {
            return f64::INFINITY;
        }
        let kf = kept.len() as f64;
        kf * (s / kf).ln() - lh
    };
    let (lo, hi) = (-0.95, 0.995);
    let steps = 24;
    let step = (hi - lo) / steps as f64;
    let mut best = (0.0, objective(0.0));
    for i in 0..=steps {
        let phi = lo + step * i as f64;
        let v = objective(phi);
        if v < best.1 {
            best = (phi, v);
        }
    }
    if !best.1.is_finite() {
        return 0.0;
    }
    golden_min(objective, (best.0 - step).max(lo), (best.0 + step).min(hi), 24)
}

/// Golden-section minimisation of `f` on `[a, b]`.
fn golden_min(f: impl Fn(f64) -> f64, mut a: f64, mut b: f64, iters: usize) -> f64 {
    let r = (5f64.sqrt() - 1.0) / 2.0;
    let mut c = b - r * (b - a);
    let mut d = a + r * (b - a);
    let (mut fc, mut fd) = (f(c), f(d));
    for _ in 0..iters {
        if fc < fd {
            b = d;
            d = c;
            fd = fc;
            c = b - r * (b - a);
            fc = f(c);
        } else {
            a = c;
            c = d;
            fc = fd;
            d = a + r * (b - a);
            fd = f(d);
        }
    }
    0.5 * (a + b)
}

/// Visit the regression basis `[1, τ, τ², cos 2πft, sin 2πft]` (`τ = (t − t̄)/n`) of every
/// sample with the sample. cos/sin come from a rotation instead of two trigonometric calls
/// per sample, re-anchored every 256 samples so rounding cannot accumulate.
fn each_basis(x: &[f64], f: f64, mut visit: impl FnMut([f64; 5], f64)) {
    let n = x.len();
    let tc = (n as f64 - 1.0) / 2.0;
    let w = 2.0 * std::f64::consts::PI * f;
    let (cw, sw) = (w.cos(), w.sin());
    let (mut c, mut s) = (1.0f64, 0.0f64);
    for (i, xi) in x.iter().enumerate() {
        if i % 256 == 0 {
            (s, c) = (w * i as f64).sin_cos();
        }
        let tau = (i as f64 - tc) / n as f64;
        visit([1.0, tau, tau * tau, c, s], *xi);
        (c, s) = (c * cw - s * sw, s * cw + c * sw);
    }
}

/// Coefficients of the least-squares fit of a quadratic plus `c·cos(2πft) + d·sin(2πft)` (the
/// sine column is dropped at the Nyquist frequency, where it vanishes).
fn sine_coefficients(x: &[f64], f: f64) -> Option<Vec<f64>> {
    let cols = if (f - 0.5).abs() < 1e-12 { 4 } else { 5 };
    let mut a = [[0.0f64; 5]; 5];
    let mut rhs = [0.0f64; 5];
    each_basis(x, f, |b, xi| {
        for r in 0..cols {
            rhs[r] += b[r] * xi;
            for c in 0..cols {
                a[r][c] += b[r] * b[c];
            }
        }
    });
    let a: Vec<Vec<f64>> = a[..cols].iter().map(|r| r[..cols].to_vec()).collect();
    stats::solve_small(a, rhs[..cols].to_vec())
}

fn semi_amplitude(coef: &[f64]) -> f64 {
    if coef.len() == 4 { coef[3].abs() } else { coef[3].hypot(coef[4]) }
}

/// Residuals of `x` about its least-squares quadratic-plus-sinusoid at frequency `f`.
fn sine_remainder(x: &[f64], coef: &[f64], f: f64) -> Vec<f64> {
    let mut out = Vec::with_capacity(x.len());
    each_basis(x, f, |b, xi| {
        let fit: f64 = coef.iter().zip(b).map(|(c, v)| c * v).sum();
        out.push(xi - fit);
    });
    out
}

/// Least-squares fit of a quadratic plus `c·cos(2πft) + d·sin(2πft)` to `x`: the residual sum
/// of squares and the semi-amplitude `sqrt(c² + d²)` (`|c|` at the Nyquist frequency).
pub fn sine_fit(x: &[f64], f: f64) -> Option<(f64, f64)> {
    let coef = sine_coefficients(x, f)?;
    let mut sse = 0.0;
    each_basis(x, f, |b, xi| {
        let fit: f64 = coef.iter().zip(b).map(|(c, v)| c * v).sum();
        sse += (xi - fit) * (xi - fit);
    });
    Some((sse, semi_amplitude(&coef)))
}

/// Residual sum of squares of the quadratic-plus-sinusoid fit at `f`, in one pass from the
/// normal equations (`SSE = Σx² − βᵀXᵀx`); `x` should be centred so that `Σx²` is small.
fn sse_at(x: &[f64], f: f64) -> f64 {
    let cols = if (f - 0.5).abs() < 1e-12 { 4 } else { 5 };
    let mut up = [[0.0f64; 5]; 5];
    let mut rhs = [0.0f64; 5];
    let mut sxx = 0.0;
    each_basis(x, f, |b, xi| {
        sxx += xi * xi;
        for r in 0..cols {
            rhs[r] += b[r] * xi;
            for c in r..cols {
                up[r][c] += b[r] * b[c];
            }
        }
    });
    // Only the upper triangle was accumulated; mirror it.
    let a: Vec<Vec<f64>> = (0..cols)
        .map(|r| (0..cols).map(|c| if c >= r { up[r][c] } else { up[c][r] }).collect())
        .collect();
    match stats::solve_small(a, rhs[..cols].to_vec()) {
        Some(beta) => (sxx - beta.iter().zip(&rhs).map(|(b, r)| b * r).sum::<f64>()).max(0.0),
        None => f64::INFINITY,
    }
}

/// Refine the frequency of a peak found at Fourier index `k` of a length-`n` series: the
/// frequency in `[(k−1)/n, (k+1)/n] ∩ (0, 0.5]` with the smallest residual of the
/// quadratic-plus-sinusoid least-squares fit, by a 6-step grid then golden section. Exact
/// for a sinusoid plus a quadratic.
fn refine_frequency(x: &[f64], k: usize) -> f64 {
    let n = x.len() as f64;
    let m = stats::mean(x).unwrap_or(0.0);
    let xc: Vec<f64> = x.iter().map(|v| v - m).collect();
    let lo = ((k as f64 - 1.0) / n).max((MIN_CYCLES as f64 - 0.5) / n);
    let hi = ((k as f64 + 1.0) / n).min(0.5);
    let sse = |f: f64| sse_at(&xc, f);
    let grid = 6;
    let step = (hi - lo) / grid as f64;
    let mut best = (k as f64 / n, sse(k as f64 / n));
    for i in 0..=grid {
        let f = lo + step * i as f64;
        let v = sse(f);
        if v < best.1 {
            best = (f, v);
        }
    }
    let f = golden_min(sse, (best.0 - step).max(lo), (best.0 + step).min(hi), 32);
    // Golden section never evaluates the interval ends; keep an end point if it is better
    // (the Nyquist frequency for a period-2 oscillation).
    let cand = [(f, sse(f)), best, (hi, sse(hi))];
    let f = cand.into_iter().min_by(|a, b| a.1.total_cmp(&b.1)).map_or(f, |c| c.0);
    // Within a quarter bin of Nyquist the sine column all but vanishes and the fit becomes
    // ill-conditioned; the window cannot tell those frequencies apart, so call it period 2.
    if (0.5 - f) * n < 0.25 { 0.5 } else { f }
}

/// Quadratic detrend: residuals of the least-squares quadratic in the sample index.
pub fn detrend_quadratic(x: &[f64]) -> Vec<f64> {
    stats::quadratic_residuals(x)
}

/// Search a window for a dominant periodic component.
///
/// Quadratic detrend, periodogram, AR(1) background by Whittle from the window with its
/// strongest sinusoid removed, Fisher's g on the whitened ordinates `k = MIN_CYCLES..=m`,
/// then period and amplitude from a least-squares sinusoid at the refined frequency and the
/// half-window amplitude ratio. A candidate that a quick look (background fitted to the raw
/// ordinates) already finds clearly insignificant (p ≥ 0.1) comes back unrefined, with the
/// Fourier period and amplitude and `half_ratio` 0. Returns the strongest candidate whatever its p-value (callers
/// use [`Oscillation::significant`]). `None` for fewer than 16 values or a constant window.
pub fn find_oscillation(x: &[f64]) -> Option<Oscillation> {
    let n = x.len();
    if n < 16 || x.iter().any(|v| !v.is_finite()) {
        return None;
    }
    let d = detrend_quadratic(x);
    let ord_all = periodogram(&d);
    let m = fisher_m(n);
    let ks: Vec<usize> = (MIN_CYCLES..=m).collect();
    if ks.len() < 4 {
        return None;
    }
    let omega: Vec<f64> =
        ks.iter().map(|&k| 2.0 * std::f64::consts::PI * k as f64 / n as f64).collect();
    let ord: Vec<f64> = ks.iter().map(|&k| ord_all[k]).collect();
    if !(ord.iter().sum::<f64>() > 0.0) {
        return None;
    }
    let raw = ord.iter().enumerate().max_by(|a, b| a.1.total_cmp(b.1)).map(|(i, _)| i)?;
    // Quick look first: background from the raw ordinates without the peak's neighbourhood.
    // A candidate that is clearly insignificant even then (p ≥ 0.1) is returned unrefined:
    // the refinement below costs most of the time and cannot change that outcome.
    let excl: Vec<usize> = (raw.saturating_sub(3)..=raw + 3).collect();
    let phi0 = whittle_ar1(&omega, &ord, &excl);
    let w0: Vec<f64> = ord.iter().zip(&omega).map(|(v, w)| v / ar1_shape(phi0, *w)).collect();
    let (idx0, g0) = fisher_g(&w0)?;
    let p0 = fisher_p_value(g0, w0.len());
    if p0 >= 0.1 {
        let k = ks[idx0];
        let amplitude = 2.0 * (ord[idx0] / n as f64).sqrt();
        return Some(Oscillation {
            k,
            g: g0,
            p_value: p0,
            m: w0.len(),
            period: n as f64 / k as f64,
            amplitude,
            half_ratio: 0.0,
            phi: phi0,
        });
    }
    let f_raw = refine_frequency(x, ks[raw]);
    let coef = sine_coefficients(x, f_raw)?;
    let rest = periodogram(&sine_remainder(x, &coef, f_raw));
    let ord_rest: Vec<f64> = ks.iter().map(|&k| rest[k]).collect();
    let excl: Vec<usize> = (raw.saturating_sub(1)..=raw + 1).collect();
    let phi = whittle_ar1(&omega, &ord_rest, &excl);
    let w: Vec<f64> = ord.iter().zip(&omega).map(|(v, w)| v / ar1_shape(phi, *w)).collect();
    let (idx, g) = fisher_g(&w)?;
    let p = fisher_p_value(g, w.len());
    let k = ks[idx];
    let f = if idx == raw { f_raw } else { refine_frequency(x, k) };
    let amplitude = semi_amplitude(&sine_coefficients(x, f)?);
    let half = n / 2;
    let a1 = sine_coefficients(&x[..half], f).map_or(0.0, |c| semi_amplitude(&c));
    let a2 = sine_coefficients(&x[half..], f).map_or(0.0, |c| semi_amplitude(&c));
    let half_ratio = if a1.max(a2) > 0.0 { a1.min(a2) / a1.max(a2) } else { 0.0 };
    Some(Oscillation { k, g, p_value: p, m: w.len(), period: 1.0 / f, amplitude, half_ratio, phi })
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn p_value_edges() {
        assert_eq!(fisher_p_value(1.0, 10), 0.0);
        assert_eq!(fisher_p_value(0.1, 10), 1.0);
        assert_eq!(fisher_p_value(0.5, 1), 1.0);
        // m = 5, g > 1/2: only the first term, m(1−g)^{m−1}.
        let g = 0.6;
        assert!((fisher_p_value(g, 5) - 5.0 * 0.4f64.powi(4)).abs() < 1e-15);
        // Near g = 1/m the value is 1 within rounding, never outside [0, 1].
        for m in [50usize, 500, 5000] {
            let p = fisher_p_value(1.2 / m as f64, m);
            assert!((0.0..=1.0).contains(&p) && p > 0.999, "m = {m}: {p}");
        }
    }

    #[test]
    fn constant_and_short_windows_have_no_oscillation() {
        assert!(find_oscillation(&[1.0; 100]).is_none());
        assert!(find_oscillation(&[1.0, 2.0, 1.0]).is_none());
        // A pure quadratic detrends to zero.
        let q: Vec<f64> = (0..101).map(|i| 3.0 + 0.5 * i as f64 - 0.01 * (i * i) as f64).collect();
        assert!(find_oscillation(&q).is_none_or(|o| !o.significant(0.01)));
    }

    #[test]
    fn period_two_three_and_long() {
        for period in [2.0f64, 3.0, 4.0, 37.5] {
            let x: Vec<f64> = (0..301)
                .map(|t| {
                    let t = t as f64;
                    10.0 + 0.001 * t + 0.5 * (2.0 * std::f64::consts::PI * t / period + 0.3).cos()
                })
                .collect();
            let o = find_oscillation(&x).expect("long enough");
            assert!((o.period - period).abs() / period < 1e-6, "{period}: {o:?}");
            // At period 2 only the cosine part is observable: 0.5·cos(0.3).
            let amp = if period == 2.0 { 0.5 * 0.3f64.cos() } else { 0.5 };
            assert!((o.amplitude - amp).abs() < 1e-6, "{period}: {o:?}");
            assert!(o.p_value < 1e-6 && o.steady(), "{period}: {o:?}");
        }
    }
}
