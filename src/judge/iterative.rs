//! Iterative-error estimates for geometrically converging histories: Aitken's Δ²
//! extrapolation and the ratio-of-successive-differences (dominant eigenvalue) estimate of
//! Ferziger & Perić (Computational Methods for Fluid Dynamics, §5.7); `docs/methods.md`,
//! "Iterative error".
//!
//! When one real eigenvalue λ of the iteration dominates, the error shrinks by λ per
//! iteration and the change per iteration `δ` relates to the error by `ε = δ/(1−λ)`: with λ
//! close to 1 a tiny change per iteration hides a large error. Monitor histories are noisy,
//! so the judge applies the same algebra to block means of the window ([`block_estimate`])
//! and only reports an estimate when the block differences stand clear of the noise.

use super::{stationarity, stats};

/// One Aitken Δ² step: `p̂ = p0 − (p1 − p0)² / (p2 − 2p1 + p0)`. `None` when the second
/// difference vanishes relative to the values (no geometric behaviour to extrapolate).
pub fn aitken_step(p0: f64, p1: f64, p2: f64) -> Option<f64> {
    let d1 = p1 - p0;
    let d2 = p2 - 2.0 * p1 + p0;
    let scale = p0.abs().max(p1.abs()).max(p2.abs()).max(f64::MIN_POSITIVE);
    if !d2.is_finite() || d2.abs() <= 1e-15 * scale {
        return None;
    }
    let v = p0 - d1 * d1 / d2;
    v.is_finite().then_some(v)
}

/// Aitken's accelerated sequence `p̂_n` for `n = 0..len−2` (`None` where a step is undefined).
pub fn aitken_sequence(p: &[f64]) -> Vec<Option<f64>> {
    p.windows(3).map(|w| aitken_step(w[0], w[1], w[2])).collect()
}

/// A dominant-eigenvalue estimate of the iterative error.
#[derive(Debug, Clone, Copy, PartialEq)]
pub struct EigenEstimate {
    /// Estimated dominant eigenvalue (error ratio per step).
    pub lambda: f64,
    /// Estimated converged value.
    pub extrapolated: f64,
    /// Estimated error of the last value, `extrapolated − last`.
    pub error: f64,
}

/// Ferziger & Perić's estimate from the last values of a history `φ^0..φ^N`.
///
/// `δ^n = φ^{n+1} − φ^n`; `λ ≈ δ^{N−1}/δ^{N−2}`, or with `k > 1` averaged over `k` steps as
/// `(|δ^{N−1}|/|δ^{N−1−k}|)^{1/k}` with the sign of the last ratio; then
/// `φ ≈ φ^{N−1} + δ^{N−1}/(1−λ)`. `None` unless `|λ| < 1` and the differences are non-zero.
pub fn eigen_estimate(phi: &[f64], k: usize) -> Option<EigenEstimate> {
    let k = k.max(1);
    let n = phi.len();
    if n < k + 2 {
        return None;
    }
    let delta = |i: usize| phi[i + 1] - phi[i];
    let last = delta(n - 2);
    let prev = delta(n - 3);
    let far = delta(n - 2 - k);
    if prev == 0.0 || far == 0.0 || !last.is_finite() {
        return None;
    }
    let sign = (last / prev).signum();
    let lambda =
        if k == 1 { last / prev } else { sign * (last.abs() / far.abs()).powf(1.0 / k as f64) };
    if !(lambda.abs() < 1.0 - 1e-12) {
        return None;
    }
    let extrapolated = phi[n - 2] + last / (1.0 - lambda);
    Some(EigenEstimate { lambda, extrapolated, error: extrapolated - phi[n - 1] })
}

/// A geometric-convergence estimate from block means of a noisy window.
#[derive(Debug, Clone, Copy, PartialEq)]
pub struct BlockEstimate {
    /// Error ratio per sample, `Λ^{1/B}` where `Λ` is the ratio per block of `B` samples.
    pub lambda: f64,
    /// Estimated converged value.
    pub extrapolated: f64,
    /// Estimated distance of the newest value from the converged value (absolute).
    pub error: f64,
    /// Block length in samples.
    pub block: usize,
}

/// The eigenvalue estimate applied to the means of three equal blocks of `x`.
///
/// For `φ_i = L + C r^i` the block means are `L + C S r^{jB}` with `S = (1−r^B)/(B(1−r))`, so
/// the ratio of block differences is `Λ = r^B`, the Aitken value of the block means is `L`
/// exactly, and the newest value sits `(b₂ − L)·r^{B−1}/S` from `L`. Guards (ours): both
/// block differences of one sign, `0 < Λ ≤ 0.95`, and the last block difference larger than
/// 3·√2 standard errors of a block mean (noise around a quadratic trend, IAT-corrected).
/// `None` when any guard fails — the history does not show geometric convergence above its
/// noise.
pub fn block_estimate(x: &[f64]) -> Option<BlockEstimate> {
    let b = x.len() / 3;
    if b < 5 {
        return None;
    }
    let x = &x[x.len() - 3 * b..];
    let means: Vec<f64> = x.chunks_exact(b).map(|c| stats::mean(c).unwrap_or(f64::NAN)).collect();
    let (d0, d1) = (means[1] - means[0], means[2] - means[1]);
    if !(d0 * d1 > 0.0) {
        return None;
    }
    let big_lambda = d1 / d0;
    if !(big_lambda > 0.0 && big_lambda <= 0.95) {
        return None;
    }
    let noise = stats::quadratic_residuals(x);
    let (_, sd) = stats::mean_sd(&noise)?;
    let tau = stationarity::iat(&noise).unwrap_or(1.0).min(b as f64);
    let se_block = sd * (tau / b as f64).sqrt();
    if d1.abs() < 3.0 * std::f64::consts::SQRT_2 * se_block {
        return None;
    }
    let limit = aitken_step(means[0], means[1], means[2])?;
    let bf = b as f64;
    let r = big_lambda.powf(1.0 / bf);
    let s = if (1.0 - r).abs() < 1e-15 { 1.0 } else { (1.0 - big_lambda) / (bf * (1.0 - r)) };
    let error = ((means[2] - limit) * r.powf(bf - 1.0) / s).abs();
    Some(BlockEstimate { lambda: r, extrapolated: limit, error, block: b })
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn block_estimate_is_exact_on_a_clean_geometric_history() {
        // φ_i = 2 + 0.3·0.99^i, 300 samples; newest value 2 + 0.3·0.99^299.
        let x: Vec<f64> = (0..300).map(|i| 2.0 + 0.3 * 0.99f64.powi(i)).collect();
        let e = block_estimate(&x).expect("geometric");
        assert!((e.extrapolated - 2.0).abs() < 1e-10, "{e:?}");
        assert!((e.lambda - 0.99).abs() < 1e-10);
        assert!((e.error - 0.3 * 0.99f64.powi(299)).abs() < 1e-10);
    }

    #[test]
    fn guards_reject_noise_lines_and_constants() {
        assert!(block_estimate(&[1.0; 60]).is_none());
        let line: Vec<f64> = (0..60).map(f64::from).collect();
        assert!(block_estimate(&line).is_none(), "Λ = 1 is not geometric convergence");
        assert!(aitken_step(1.0, 1.0, 1.0).is_none());
        assert!(eigen_estimate(&[1.0, 2.0, 3.0, 4.0], 1).is_none());
    }
}
