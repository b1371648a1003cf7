//! Calibration of the judge's statistics by simulation: the false-alarm level of the
//! oscillation test on red noise and the coverage of the 95 % intervals of a trend slope and
//! a window mean, on seeded Gaussian AR(1) noise (`docs/methods.md`, "Oscillation" and
//! "Intervals under autocorrelation").
//!
//!   cargo bench --bench calibration                      (2000 series per cell)
//!   SETTLE_BENCH_REPS=500 cargo bench --bench calibration (quicker)
//!
//! Every figure is a share of seeded series with its binomial standard error
//! `sqrt(p(1−p)/reps)`; the seeds of a cell depend only on the cell, so two versions of the
//! code can be compared on the same series.

use std::time::Instant;

use settle::judge::{spectrum, stationarity, trend};

#[path = "../tests/support/rng.rs"]
mod rng;
use rng::Rng;

fn seed(kind: u64, n: usize, phi: f64) -> u64 {
    kind * 1_000_003 + n as u64 * 7919 + (phi * 1000.0).round() as u64
}

/// `share ± SE` in percent.
fn pct(hits: usize, reps: usize) -> String {
    let p = hits as f64 / reps as f64;
    format!("{:5.2} ± {:4.2}", 100.0 * p, 100.0 * (p * (1.0 - p) / reps as f64).sqrt())
}

const PHIS: [f64; 4] = [0.0, 0.5, 0.9, 0.95];

fn main() {
    let reps: usize =
        std::env::var("SETTLE_BENCH_REPS").ok().and_then(|v| v.parse().ok()).unwrap_or(2000);
    println!("calibration: {reps} seeded AR(1) series per cell; figures in % ± binomial SE\n");

    println!("oscillation test on AR(1) noise (no oscillation): share of windows called");
    println!("  n     φ     p<1%           significant(1%)  p<5%           µs/call");
    for n in [129usize, 257, 501, 1001] {
        for phi in PHIS {
            let mut rng = Rng(seed(1, n, phi));
            let (mut p01, mut sig, mut p05) = (0, 0, 0);
            let t0 = Instant::now();
            for _ in 0..reps {
                let x = rng.ar1(n, phi);
                if let Some(o) = spectrum::find_oscillation(&x) {
                    p01 += usize::from(o.p_value < 0.01);
                    sig += usize::from(o.significant(0.01));
                    p05 += usize::from(o.p_value < 0.05);
                }
            }
            let us = t0.elapsed().as_secs_f64() * 1e6 / reps as f64;
            println!(
                "  {n:<5} {phi:<5} {}   {}     {}   {us:7.0}",
                pct(p01, reps),
                pct(sig, reps),
                pct(p05, reps)
            );
        }
    }

    println!("\n95 % interval of a trend slope (line + AR(1) noise): coverage");
    println!("  n     φ     coverage       mean half-width (dec/kit)  µs/call");
    for n in [200usize, 300, 500, 1000] {
        let its: Vec<i64> = (0..n as i64).collect();
        for phi in PHIS {
            let mut rng = Rng(seed(2, n, phi));
            let (mut cover, mut width) = (0, 0.0);
            let t0 = Instant::now();
            for _ in 0..reps {
                let e = rng.ar1(n, phi);
                // −2 decades per 1000 iterations from 1e-1, noise 0.05 decades per innovation.
                let y: Vec<f64> =
                    its.iter().zip(&e).map(|(&i, v)| -1.0 - 0.002 * i as f64 + 0.05 * v).collect();
                if let Some(t) = trend::fit(&its, &y) {
                    cover += usize::from(t.ci.0 <= -2.0 && -2.0 <= t.ci.1);
                    width += 0.5 * (t.ci.1 - t.ci.0);
                }
            }
            let us = t0.elapsed().as_secs_f64() * 1e6 / reps as f64;
            println!(
                "  {n:<5} {phi:<5} {}   {:10.4}                 {us:7.0}",
                pct(cover, reps),
                width / reps as f64
            );
        }
    }

    println!("\n95 % interval of a window mean (AR(1) noise about 3): coverage");
    println!("  n     φ     coverage       mean half-width  µs/call");
    for n in [200usize, 300, 500, 1000] {
        for phi in PHIS {
            let mut rng = Rng(seed(3, n, phi));
            let (mut cover, mut width) = (0, 0.0);
            let t0 = Instant::now();
            for _ in 0..reps {
                let x: Vec<f64> = rng.ar1(n, phi).iter().map(|v| 3.0 + v).collect();
                let m = x.iter().sum::<f64>() / n as f64;
                if let Some(h) = stationarity::mean_ci_half(&x) {
                    cover += usize::from((m - 3.0).abs() <= h);
                    width += h;
                }
            }
            let us = t0.elapsed().as_secs_f64() * 1e6 / reps as f64;
            println!(
                "  {n:<5} {phi:<5} {}   {:10.4}       {us:7.0}",
                pct(cover, reps),
                width / reps as f64
            );
        }
    }
}
