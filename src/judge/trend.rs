//! Residual trend: a least-squares line through log10(residual) against iteration over a
//! window, its slope in decades per 1000 iterations and a Student-t confidence interval that
//! allows for autocorrelated noise.
//!
//! OLS standard errors assume independent errors; residual histories are strongly
//! autocorrelated. The noise is measured about a *quadratic* fit: the quadratic absorbs a
//! slowly changing rate of convergence, which would otherwise be counted as "noise"
//! correlated over the whole window and make any curved but clearly falling history look
//! insignificant. Two estimates of the slope's standard error are formed and the larger
//! interval is kept (`docs/methods.md`, "Intervals under autocorrelation"):
//!
//! * **AR(1), bias-corrected** ([`stats::ar1`]): the noise coefficient φ chosen so that the
//!   expected lag-1 autocorrelation of the quadratic residuals equals the observed one, the
//!   noise variance unbiased under that model, the slope's variance `σ̂² cᵀR(φ̂)c` for the
//!   window actually used, and Satterthwaite (1946) degrees of freedom that count the
//!   uncertainty of both σ̂² and φ̂. Geyer's τ alone covered 86 % at φ = 0.9 on 200–300
//!   values because τ̂ is biased low there (Zwiers & von Storch 1995 describe the same
//!   failure of the "equivalent sample size").
//! * **Geyer's integrated autocorrelation time** of the quadratic residuals, the standard
//!   error times `sqrt(τ)` and `n/τ − 2` degrees of freedom: model-free, it guards against
//!   noise that an AR(1) describes badly (correlation at longer lags than lag 1 suggests).

use super::stats::ar1::NoiseModel;
use super::{stationarity, stats};

/// Default slope below which a residual counts as falling, decades per 1000 iterations
/// (`docs/methods.md`, "Rules of thumb"; common practice, no source).
pub const MIN_FALL_DEC_PER_KIT: f64 = 0.1;

/// A fitted trend of log10(residual).
#[derive(Debug, Clone, Copy, PartialEq)]
pub struct Trend {
    pub n: usize,
    pub first: i64,
    pub last: i64,
    /// Slope in decades per 1000 iterations (negative = falling).
    pub slope_dec_per_kit: f64,
    /// Autocorrelation-corrected standard error of the slope, same unit.
    pub se_dec_per_kit: f64,
    /// 95 % confidence interval of the slope, same unit.
    pub ci: (f64, f64),
    /// Variance inflation applied to the independent-errors standard error,
    /// `(se / se_OLS)²` (≥ 1 unless the noise is anti-correlated; an integrated
    /// autocorrelation time when the noise is AR(1)).
    pub tau: f64,
    /// Degrees of freedom of the t quantile.
    pub dof: f64,
    /// Fitted log10(residual) at the last iteration of the window.
    pub fitted_last: f64,
    /// SD of log10(residual) about the line, decades.
    pub resid_sd: f64,
}

impl Trend {
    /// Significantly falling faster than `min_fall` decades per 1000 iterations.
    pub fn falling(&self, min_fall: f64) -> bool {
        self.ci.1 < -min_fall
    }

    /// Significantly rising (the whole interval above zero).
    pub fn rising(&self) -> bool {
        self.ci.0 > 0.0
    }

    /// Iterations until the fitted line reaches `target_log10`, when it is falling and above
    /// the target.
    pub fn eta(&self, target_log10: f64) -> Option<f64> {
        if !(self.slope_dec_per_kit < 0.0) || !(self.fitted_last > target_log10) {
            return None;
        }
        let v = (self.fitted_last - target_log10) / (-self.slope_dec_per_kit) * 1000.0;
        v.is_finite().then_some(v)
    }
}

/// Fit a trend to `(iteration, log10 residual)` pairs. `None` for fewer than 8 points or
/// when all iterations are equal.
pub fn fit(its: &[i64], log_r: &[f64]) -> Option<Trend> {
    let n = its.len();
    if n < 8 || log_r.len() != n {
        return None;
    }
    let last_it = *its.last()?;
    // Iterations relative to the last one: exact in f64 and well centred.
    let x: Vec<f64> = its.iter().map(|i| i.saturating_sub(last_it) as f64).collect();
    let ols = stats::ols(&x, log_r)?;
    let nf = n as f64;
    // Model-free: Geyer's τ of the quadratic residuals.
    let noise = stats::quadratic_residuals(log_r);
    let tau_g = stationarity::iat(&noise).unwrap_or(1.0).clamp(1.0, nf / 4.0);
    let mut best = (ols.se_slope * tau_g.sqrt(), (nf / tau_g - 2.0).max(1.0));
    let mut best_half = stats::t_quantile(0.975, best.1)? * best.0;
    // AR(1) about a quadratic, bias-corrected, with Satterthwaite degrees of freedom.
    if let Some((se, dof)) = ar1_slope_se(&x, log_r, ols.x_mean, ols.sxx) {
        let half = stats::t_quantile(0.975, dof)? * se;
        if half > best_half {
            best = (se, dof);
            best_half = half;
        }
    }
    let (se_slope, dof) = best;
    let tau = if ols.se_slope > 0.0 { (se_slope / ols.se_slope).powi(2) } else { 1.0 };
    let slope = ols.slope * 1000.0;
    let half = best_half * 1000.0;
    Some(Trend {
        n,
        first: its[0],
        last: last_it,
        slope_dec_per_kit: slope,
        se_dec_per_kit: se_slope * 1000.0,
        ci: (slope - half, slope + half),
        tau,
        dof,
        fitted_last: ols.at(0.0),
        resid_sd: ols.resid_sd,
    })
}

/// Standard error (per iteration) and degrees of freedom of the least-squares slope under
/// AR(1) noise about a quadratic in the sample index. `None` when the window is too short
/// or the noise is zero.
fn ar1_slope_se(x: &[f64], y: &[f64], x_mean: f64, sxx: f64) -> Option<(f64, f64)> {
    let model = NoiseModel::new(y.len(), 2)?;
    let fit = model.fit(&model.residuals(y)?)?;
    let c: Vec<f64> = x.iter().map(|xi| (xi - x_mean) / sxx).collect();
    let v = model.contrast_variance(&fit, &c)?;
    Some((v.variance.sqrt(), v.dof))
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn exact_line_has_tight_interval_and_eta() {
        let its: Vec<i64> = (0..200).collect();
        // −2 decades per 1000 iterations from 1e-1, with a tiny alternating ripple so the SE is
        // not exactly zero.
        let y: Vec<f64> = its
            .iter()
            .map(|&i| -1.0 - 0.002 * i as f64 + if i % 2 == 0 { 1e-9 } else { -1e-9 })
            .collect();
        let t = fit(&its, &y).expect("200 points");
        assert!((t.slope_dec_per_kit + 2.0).abs() < 1e-6);
        assert!(t.falling(MIN_FALL_DEC_PER_KIT) && !t.rising());
        // From −1.398 at it 199 to −5: 3.602 decades at 2 dec/kit = 1801 iterations.
        let eta = t.eta(-5.0).expect("falling, above target");
        assert!((eta - 1801.0).abs() < 1e-3, "{eta}");
        assert!(t.eta(0.0).is_none());
    }

    #[test]
    fn too_few_points() {
        assert!(fit(&[1, 2, 3], &[0.0, 1.0, 2.0]).is_none());
    }
}
