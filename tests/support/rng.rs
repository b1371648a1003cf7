//! A seeded source for Monte Carlo checks, shared by the judge tests and the calibration
//! bench (included with `#[path]`): SplitMix64 uniforms (Steele, Lea & Flood 2014) and
//! Box–Muller normals. The streams depend only on the seed, so figures printed by the bench
//! and asserted by the tests are reproducible across versions of the code under test.

// Each including binary uses a different subset.
#![allow(dead_code)]

pub struct Rng(pub u64);

impl Rng {
    pub fn uniform(&mut self) -> f64 {
        self.0 = self.0.wrapping_add(0x9E37_79B9_7F4A_7C15);
        let mut z = self.0;
        z = (z ^ (z >> 30)).wrapping_mul(0xBF58_476D_1CE4_E5B9);
        z = (z ^ (z >> 27)).wrapping_mul(0x94D0_49BB_1331_11EB);
        z ^= z >> 31;
        ((z >> 11) as f64 + 0.5) / (1u64 << 53) as f64
    }

    pub fn normal(&mut self) -> f64 {
        let (u, v) = (self.uniform(), self.uniform());
        (-2.0 * u.ln()).sqrt() * (2.0 * std::f64::consts::PI * v).cos()
    }

    /// Stationary Gaussian AR(1) with unit innovations.
    pub fn ar1(&mut self, n: usize, phi: f64) -> Vec<f64> {
        let mut x = self.normal() / (1.0 - phi * phi).sqrt();
        (0..n)
            .map(|_| {
                x = phi * x + self.normal();
                x
            })
            .collect()
    }

    /// Stationary Gaussian AR(1) with marginal standard deviation `sd`.
    pub fn ar1_sd(&mut self, n: usize, phi: f64, sd: f64) -> Vec<f64> {
        let innov = sd * (1.0 - phi * phi).sqrt();
        let mut x = sd * self.normal();
        (0..n)
            .map(|_| {
                x = phi * x + innov * self.normal();
                x
            })
            .collect()
    }
}
