//! Basic statistics the judge builds on: mean and SD, autocorrelation, least-squares lines and
//! Student-t quantiles.
//!
//! Everything is computed in the centred two-pass form. The textbook one-pass forms
//! (`Σx² − n·x̄²`, `Σxy − n·x̄·ȳ`) lose every significant digit on data with a large offset,
//! which is exactly what the NIST Statistical Reference Datasets (NumAcc, Norris) are built to
//! expose, and what monitor histories (drag 0.031 21 ± 1e-6) look like. Distribution functions
//! come from `statrs`, not from local approximations. [`ar1`] holds the small-sample AR(1)
//! noise model behind the intervals (`docs/methods.md`, "Regression", "Univariate accuracy",
//! "Student t", "Intervals under autocorrelation").

use statrs::distribution::{ContinuousCDF, Normal, StudentsT};

pub mod ar1;

/// Arithmetic mean, refined by a second pass so that a large common offset does not cost
/// digits. `None` for an empty slice.
pub fn mean(x: &[f64]) -> Option<f64> {
    if x.is_empty() {
        return None;
    }
    let n = x.len() as f64;
    let m0 = x.iter().sum::<f64>() / n;
    // Second pass: the mean of the deviations corrects the rounding error of the first.
    let corr = x.iter().map(|v| v - m0).sum::<f64>() / n;
    Some(m0 + corr)
}

/// Mean and sample standard deviation (divisor n − 1), corrected two-pass algorithm
/// (Chan, Golub & LeVeque 1983): `Σ(x−m)² − (Σ(x−m))²/n`. `None` for fewer than 2 values.
pub fn mean_sd(x: &[f64]) -> Option<(f64, f64)> {
    if x.len() < 2 {
        return None;
    }
    let n = x.len() as f64;
    let m0 = x.iter().sum::<f64>() / n;
    let (mut s1, mut s2) = (0.0, 0.0);
    for v in x {
        let d = v - m0;
        s1 += d;
        s2 += d * d;
    }
    let var = ((s2 - s1 * s1 / n) / (n - 1.0)).max(0.0);
    Some((m0 + s1 / n, var.sqrt()))
}

/// Lag-1 autocorrelation `r1 = Σ_{i<n}(y_i−ȳ)(y_{i+1}−ȳ) / Σ(y_i−ȳ)²` (the NIST StRD
/// definition). `None` for fewer than 2 values or a constant series.
pub fn lag1_autocorrelation(y: &[f64]) -> Option<f64> {
    if y.len() < 2 {
        return None;
    }
    let m = mean(y)?;
    let den: f64 = y.iter().map(|v| (v - m) * (v - m)).sum();
    if den <= 0.0 {
        return None;
    }
    let num: f64 = y.windows(2).map(|w| (w[0] - m) * (w[1] - m)).sum();
    Some(num / den)
}

/// An ordinary least-squares line `y = intercept + slope·x` with its uncertainties.
#[derive(Debug, Clone, Copy, PartialEq)]
pub struct Ols {
    pub n: usize,
    pub slope: f64,
    pub intercept: f64,
    /// Standard error of the slope (independent-errors formula).
    pub se_slope: f64,
    pub se_intercept: f64,
    /// Residual standard deviation `sqrt(SSE/(n−2))`.
    pub resid_sd: f64,
    /// Coefficient of determination `1 − SSE/SST` (1 when SST = 0 and the fit is exact).
    pub r2: f64,
    pub x_mean: f64,
    pub y_mean: f64,
    /// `Σ(x − x̄)²`.
    pub sxx: f64,
}

impl Ols {
    /// The fitted value at `x`.
    pub fn at(&self, x: f64) -> f64 {
        // Evaluated about the centre for accuracy far from x = 0.
        self.y_mean + self.slope * (x - self.x_mean)
    }
}

/// Least-squares line through `(x_i, y_i)`, centred two-pass form (`docs/methods.md`,
/// "Regression").
///
/// `None` with fewer than 3 points, mismatched lengths, non-finite input or all `x` equal.
pub fn ols(x: &[f64], y: &[f64]) -> Option<Ols> {
    let n = x.len();
    if n < 3 || y.len() != n || x.iter().chain(y).any(|v| !v.is_finite()) {
        return None;
    }
    let xm = mean(x)?;
    let ym = mean(y)?;
    let (mut sxx, mut sxy, mut sst) = (0.0, 0.0, 0.0);
    for (xi, yi) in x.iter().zip(y) {
        let dx = xi - xm;
        let dy = yi - ym;
        sxx += dx * dx;
        sxy += dx * dy;
        sst += dy * dy;
    }
    if sxx <= 0.0 {
        return None;
    }
    let slope = sxy / sxx;
    let intercept = ym - slope * xm;
    // SSE from the residuals themselves, not SST − b1·Sxy (which cancels for good fits).
    let sse: f64 = x
        .iter()
        .zip(y)
        .map(|(xi, yi)| {
            let e = (yi - ym) - slope * (xi - xm);
            e * e
        })
        .sum();
    let nf = n as f64;
    let s = (sse / (nf - 2.0)).sqrt();
    let r2 = if sst > 0.0 { 1.0 - sse / sst } else { 1.0 };
    Some(Ols {
        n,
        slope,
        intercept,
        se_slope: s / sxx.sqrt(),
        se_intercept: s * (1.0 / nf + xm * xm / sxx).sqrt(),
        resid_sd: s,
        r2,
        x_mean: xm,
        y_mean: ym,
        sxx,
    })
}

/// Residuals `y_i − fit(x_i)` of a line fitted by [`ols`].
pub fn ols_residuals(fit: &Ols, x: &[f64], y: &[f64]) -> Vec<f64> {
    x.iter().zip(y).map(|(xi, yi)| yi - fit.at(*xi)).collect()
}

/// A least-squares line through the origin `y = slope·x`.
#[derive(Debug, Clone, Copy, PartialEq)]
pub struct OlsNoIntercept {
    pub slope: f64,
    pub se_slope: f64,
    /// `sqrt(SSE/(n−1))`.
    pub resid_sd: f64,
    /// Uncentred `1 − SSE/Σy²`, the definition NIST StRD certifies for no-intercept models.
    pub r2: f64,
}

/// Least-squares line through the origin. `None` with fewer than 2 points or `Σx² = 0`.
pub fn ols_no_intercept(x: &[f64], y: &[f64]) -> Option<OlsNoIntercept> {
    let n = x.len();
    if n < 2 || y.len() != n || x.iter().chain(y).any(|v| !v.is_finite()) {
        return None;
    }
    let sxx: f64 = x.iter().map(|v| v * v).sum();
    if sxx <= 0.0 {
        return None;
    }
    let sxy: f64 = x.iter().zip(y).map(|(a, b)| a * b).sum();
    let slope = sxy / sxx;
    let sse: f64 = x.iter().zip(y).map(|(a, b)| (b - slope * a).powi(2)).sum();
    let syy: f64 = y.iter().map(|v| v * v).sum();
    let s = (sse / (n as f64 - 1.0)).sqrt();
    Some(OlsNoIntercept {
        slope,
        se_slope: s / sxx.sqrt(),
        resid_sd: s,
        r2: if syy > 0.0 { 1.0 - sse / syy } else { 1.0 },
    })
}

/// Quantile `t_{p, dof}` of Student's t distribution (statrs). `dof` may be fractional
/// (effective sample sizes); `None` for `dof ≤ 0` or `p` outside (0, 1).
pub fn t_quantile(p: f64, dof: f64) -> Option<f64> {
    if !(p > 0.0 && p < 1.0 && dof > 0.0) {
        return None;
    }
    if dof > 1e6 {
        // statrs' inverse incomplete beta slows down for huge shape parameters; beyond a
        // million degrees of freedom t and normal quantiles agree to better than 1e-6.
        return Some(Normal::standard().inverse_cdf(p));
    }
    let t = StudentsT::new(0.0, 1.0, dof).ok()?;
    Some(t.inverse_cdf(p))
}

/// Two-sided p-value `P(|T| ≥ |t|)` for Student's t with `dof` degrees of freedom (statrs).
pub fn t_two_sided_p(t: f64, dof: f64) -> Option<f64> {
    if t.is_nan() || !(dof > 0.0) {
        return None;
    }
    let d = StudentsT::new(0.0, 1.0, dof).ok()?;
    Some((2.0 * d.sf(t.abs())).min(1.0))
}

/// Residuals of a least-squares quadratic in the sample index (`a + b·t + c·t²`, centred
/// and scaled `t`). Used to measure noise around a slowly curving trend. Falls back to
/// deviations from the mean for fewer than 4 values.
pub fn quadratic_residuals(y: &[f64]) -> Vec<f64> {
    let n = y.len();
    let fallback = || {
        let m = mean(y).unwrap_or(0.0);
        y.iter().map(|v| v - m).collect()
    };
    if n < 4 {
        return fallback();
    }
    let tc = (n as f64 - 1.0) / 2.0;
    let basis = |i: usize| {
        let t = (i as f64 - tc) / n as f64;
        [1.0, t, t * t]
    };
    // Fit the deviations from the mean so that a large offset costs no digits.
    let m = mean(y).unwrap_or(0.0);
    let y: Vec<f64> = y.iter().map(|v| v - m).collect();
    let mut a = vec![vec![0.0; 3]; 3];
    let mut b = vec![0.0; 3];
    for (i, yi) in y.iter().enumerate() {
        let p = basis(i);
        for r in 0..3 {
            b[r] += p[r] * yi;
            for c in 0..3 {
                a[r][c] += p[r] * p[c];
            }
        }
    }
    match solve_small(a, b) {
        Some(c) => y
            .iter()
            .enumerate()
            .map(|(i, yi)| {
                let p = basis(i);
                yi - (c[0] * p[0] + c[1] * p[1] + c[2] * p[2])
            })
            .collect(),
        None => fallback(),
    }
}

/// Median of the finite values (sorts a copy). `None` when there are none.
pub fn median(x: &[f64]) -> Option<f64> {
    let mut v: Vec<f64> = x.iter().copied().filter(|v| v.is_finite()).collect();
    if v.is_empty() {
        return None;
    }
    v.sort_by(f64::total_cmp);
    let k = v.len();
    Some(if k % 2 == 1 { v[k / 2] } else { 0.5 * (v[k / 2 - 1] + v[k / 2]) })
}

/// `y` less the sinusoid of `period` (in the units of `x`) that a least-squares fit of
/// `a + b·x + c·sin(ωx) + d·cos(ωx)` finds in it ([`line_and_sine`]): the trend and the
/// noise stay, the cycle goes. `None` when the system is singular (too few values, or a
/// period the window cannot separate from the trend).
pub fn without_cycle(x: &[f64], y: &[f64], period: f64) -> Option<Vec<f64>> {
    if x.len() != y.len() || x.len() < 8 || !(period > 0.0) {
        return None;
    }
    let coef = line_and_sine(x, y, period, false)?;
    let w = 2.0 * std::f64::consts::PI / period;
    Some(
        x.iter()
            .zip(y)
            .map(|(&xi, &yi)| {
                let (sn, cs) = (w * (xi - x[0])).sin_cos();
                yi - coef[2] * sn - coef[3] * cs
            })
            .collect(),
    )
}

/// Least-squares coefficients of `a + b·(x − x₀)/s + c·sin(ω(x − x₀)) + d·cos(ω(x − x₀))`
/// (`ω = 2π/period`, `x₀` the first abscissa, `s` the span): `[a, b, c, d]`, or `[a, b, d]`
/// without the sine column when `cosine_only` (at the Nyquist frequency it vanishes).
/// `None` for mismatched or empty input, or a singular system.
pub fn line_and_sine(x: &[f64], y: &[f64], period: f64, cosine_only: bool) -> Option<Vec<f64>> {
    if x.len() != y.len() || x.is_empty() {
        return None;
    }
    let w = 2.0 * std::f64::consts::PI / period;
    let x0 = x[0];
    let span = (x[x.len() - 1] - x0).abs().max(1.0);
    let cols: &[usize] = if cosine_only { &[0, 1, 3] } else { &[0, 1, 2, 3] };
    let k = cols.len();
    let mut a = vec![vec![0.0; k]; k];
    let mut b = vec![0.0; k];
    for (&xi, &yi) in x.iter().zip(y) {
        let (sn, cs) = (w * (xi - x0)).sin_cos();
        let full = [1.0, (xi - x0) / span, sn, cs];
        for (r, &cr) in cols.iter().enumerate() {
            b[r] += full[cr] * yi;
            for (c, &cc) in cols.iter().enumerate() {
                a[r][c] += full[cr] * full[cc];
            }
        }
    }
    solve_small(a, b)
}

/// Solve the small dense system `a·x = b` (n ≤ ~6) by Gaussian elimination with partial
/// pivoting. `None` when the matrix is singular to working precision.
pub fn solve_small(mut a: Vec<Vec<f64>>, mut b: Vec<f64>) -> Option<Vec<f64>> {
    let n = b.len();
    if a.len() != n || a.iter().any(|r| r.len() != n) {
        return None;
    }
    let scale = a.iter().flatten().fold(0.0f64, |m, v| m.max(v.abs()));
    if !(scale > 0.0) || !scale.is_finite() {
        return None;
    }
    for col in 0..n {
        let piv = (col..n).max_by(|&i, &j| a[i][col].abs().total_cmp(&a[j][col].abs()))?;
        if a[piv][col].abs() <= scale * 1e-13 {
            return None;
        }
        a.swap(col, piv);
        b.swap(col, piv);
        for row in col + 1..n {
            let f = a[row][col] / a[col][col];
            if f != 0.0 {
                let pivot_row = a[col].clone();
                for (dst, src) in a[row][col..].iter_mut().zip(&pivot_row[col..]) {
                    *dst -= f * src;
                }
                b[row] -= f * b[col];
            }
        }
    }
    let mut x = vec![0.0; n];
    for row in (0..n).rev() {
        let s: f64 = (row + 1..n).map(|k| a[row][k] * x[k]).sum();
        x[row] = (b[row] - s) / a[row][row];
    }
    x.iter().all(|v| v.is_finite()).then_some(x)
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn a_known_cycle_comes_out_and_the_trend_stays() {
        // y = 2 + 0.001·x + 0.3·sin(2πx/60 + 0.7) over 4.5 periods (not a whole number).
        let x: Vec<f64> = (0..270).map(|i| 1000.0 + i as f64).collect();
        let line = |xi: f64| 2.0 + 0.001 * xi;
        let y: Vec<f64> = x
            .iter()
            .map(|&xi| line(xi) + 0.3 * (2.0 * std::f64::consts::PI * xi / 60.0 + 0.7).sin())
            .collect();
        let clean = without_cycle(&x, &y, 60.0).expect("separable");
        for (c, &xi) in clean.iter().zip(&x) {
            assert!((c - line(xi)).abs() < 1e-9, "{c} against {}", line(xi));
        }
        // The slope of what is left is the trend's; that of the raw values is not.
        let raw = ols(&x, &y).expect("fit").slope;
        let left = ols(&x, &clean).expect("fit").slope;
        assert!((left - 0.001).abs() < 1e-12 && (raw - 0.001).abs() > 1e-5, "{raw} {left}");
        assert!(without_cycle(&x[..5], &y[..5], 60.0).is_none());
    }

    #[test]
    fn degenerate_inputs() {
        assert_eq!(mean(&[]), None);
        assert_eq!(mean_sd(&[1.0]), None);
        assert_eq!(lag1_autocorrelation(&[2.0, 2.0, 2.0]), None);
        assert!(ols(&[1.0, 1.0, 1.0], &[1.0, 2.0, 3.0]).is_none());
        assert!(ols(&[1.0, 2.0], &[1.0, 2.0]).is_none());
        assert!(ols(&[1.0, 2.0, f64::NAN], &[1.0, 2.0, 3.0]).is_none());
        assert_eq!(t_quantile(0.975, 0.0), None);
        assert_eq!(median(&[f64::NAN]), None);
    }

    #[test]
    fn exact_line_and_median() {
        // y = 2 + 3x exactly: zero residual SD, R² = 1.
        let x: Vec<f64> = (0..10).map(f64::from).collect();
        let y: Vec<f64> = x.iter().map(|v| 2.0 + 3.0 * v).collect();
        let f = ols(&x, &y).expect("ten distinct x");
        assert!((f.slope - 3.0).abs() < 1e-14 && (f.intercept - 2.0).abs() < 1e-13);
        assert!(f.resid_sd < 1e-13 && (f.r2 - 1.0).abs() < 1e-15);
        assert_eq!(median(&[3.0, 1.0, 2.0]), Some(2.0));
        assert_eq!(median(&[4.0, 1.0, 2.0, 3.0]), Some(2.5));
    }

    #[test]
    fn small_solver() {
        let x = solve_small(vec![vec![2.0, 1.0], vec![1.0, 3.0]], vec![3.0, 5.0]).expect("regular");
        assert!((x[0] - 0.8).abs() < 1e-14 && (x[1] - 1.4).abs() < 1e-14);
        assert!(solve_small(vec![vec![1.0, 2.0], vec![2.0, 4.0]], vec![1.0, 2.0]).is_none());
    }
}
