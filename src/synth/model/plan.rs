//! Scenario plans: the story of each labelled behaviour as a noise-free trajectory plus
//! overlays, drawn from the seed.
//!
//! Every random range below is invented, chosen to look like real steady RANS runs of a
//! few hundred thousand to a few million cells; none is tuned to a detector.

use std::f64::consts::TAU;

use super::Common;
use crate::synth::End;
use crate::synth::Scenario;
use crate::synth::rng::Rng;

/// A periodic component (residual limit cycle or physical unsteadiness).
#[derive(Debug, Clone)]
pub(super) struct Cycle {
    /// Index (iteration − 1) where it starts to grow, and its growth time constant.
    pub onset: f64,
    pub grow: f64,
    pub period: f64,
    /// Relative frequency jitter (AR(1) standard deviation).
    pub jitter: f64,
    /// Harmonic amplitudes and phases; amplitudes sum to 1.
    pub harmonics: [(f64, f64); 3],
    /// Slow amplitude modulation.
    pub mod_depth: f64,
    pub mod_period: f64,
    /// Residual amplitude in decades, per-equation factor and phase lag.
    pub res_amp: f64,
    pub eq_amp: [f64; 6],
    pub eq_lag: [f64; 6],
    /// Monitor amplitude relative to the mean, and phase lag.
    pub mon_amp: [f64; 3],
    pub mon_lag: [f64; 3],
    /// Share of the residual noise the cycle replaces once grown: in a limit cycle the
    /// iteration-to-iteration variation is mostly the cycle itself.
    pub noise_damp: f64,
    /// The amplitude grows exponentially, by `e` every `grow` iterations, instead of
    /// saturating (the prelude of a blow-up); the amplitudes above are then those at the onset.
    pub exp_growth: bool,
}

impl Cycle {
    /// The waveform at phase `theta`, within [-1, 1].
    pub fn wave(&self, theta: f64) -> f64 {
        self.harmonics
            .iter()
            .enumerate()
            .map(|(k, (a, ph))| a * ((k + 1) as f64 * theta + ph).sin())
            .sum()
    }

    fn draw(r: &mut Rng, onset: f64, period: f64) -> Cycle {
        let h2 = r.range(0.0, 0.5);
        let h3 = r.range(0.0, 0.3);
        let total = 1.0 + h2 + h3;
        let mut eq_amp = [0.0; 6];
        let mut eq_lag = [0.0; 6];
        for e in 0..6 {
            eq_amp[e] = r.range(0.6, 1.3);
            eq_lag[e] = r.range(0.0, 1.2);
        }
        Cycle {
            onset,
            grow: r.range(20.0, 150.0),
            period,
            jitter: r.range(0.005, 0.03),
            harmonics: [
                (1.0 / total, 0.0),
                (h2 / total, r.range(0.0, TAU)),
                (h3 / total, r.range(0.0, TAU)),
            ],
            mod_depth: 0.0,
            mod_period: 1.0,
            res_amp: r.range(0.2, 0.8),
            noise_damp: 0.5,
            exp_growth: false,
            eq_amp,
            eq_lag,
            mon_amp: [r.log_range(5e-4, 1e-2), r.log_range(2e-3, 3e-2), r.log_range(3e-4, 5e-3)],
            mon_lag: [r.range(0.0, TAU), r.range(0.0, TAU), r.range(0.0, TAU)],
        }
    }
}

/// Slow red-noise wander on a plateau (no trend to speak of).
#[derive(Debug, Clone)]
pub(super) struct Wander {
    pub onset: f64,
    pub res_phi: f64,
    pub res_sd: f64,
    /// Decades per iteration.
    pub trend: f64,
    pub mon_phi: f64,
    pub mon_sd: f64,
}

impl Wander {
    /// Weight of the wander at index `x`: it fades in over the approach to the plateau, so
    /// the noise does not change character abruptly at the onset.
    pub fn ramp(&self, x: f64) -> f64 {
        ((x - 0.3 * self.onset) / (0.7 * self.onset).max(1.0)).clamp(0.0, 1.0)
    }
}

/// One equation stops being solved.
#[derive(Debug, Clone)]
pub(super) struct Freeze {
    pub eq: usize,
    /// First frozen iteration.
    pub onset: i64,
}

/// A monitor still creeping: relative offset `delta · exp(−i/tau)`.
#[derive(Debug, Clone)]
pub(super) struct Drift {
    pub delta: [f64; 3],
    pub tau: [f64; 3],
}

/// A monitor rings down: `amp · e^{−i/tau} · sin(2πi/period + phase)`, relative.
#[derive(Debug, Clone)]
pub(super) struct RingDown {
    pub monitor: usize,
    pub amp: f64,
    pub tau: f64,
    pub period: f64,
    pub phase: f64,
}

/// The job dies and is restarted from a checkpoint.
#[derive(Debug, Clone)]
pub(super) struct Restart {
    pub kill_at: i64,
    pub checkpoint: i64,
    /// Residual jump (decades) and its decay; relative monitor jump.
    pub jump: f64,
    pub tau: f64,
    pub mon_jump: f64,
}

/// How the run ends badly, if it does.
#[derive(Debug, Clone)]
pub(super) enum Tail {
    None,
    /// Growth from `onset` (index); values turn NaN from `first_nan`, equation `nan_first`
    /// first.
    Nan {
        onset: usize,
        first_nan: usize,
        nan_first: usize,
        mon_eps: [f64; 3],
    },
    /// Growth from `onset` until the printed fields overflow.
    Overflow {
        onset: usize,
        mon_eps: [f64; 3],
    },
    /// Continuity and monitors explode over `len` steps from `onset`; residuals saturate;
    /// `tiny` lists (equation, from index, log10 value) of residuals that collapse.
    Crash {
        onset: usize,
        len: usize,
        power: f64,
        cont_dec: f64,
        mon_dec: [f64; 3],
        mon_sign: [f64; 3],
        tiny: Vec<(usize, usize, f64)>,
    },
    /// Monitors grow as `gain · eps0 · exp((i − onset)/tau)`.
    Silent {
        onset: f64,
        tau: f64,
        eps0: f64,
        gain: [f64; 3],
    },
}

/// The scenario's story.
#[derive(Debug, Clone)]
pub(super) struct Plan {
    /// Highest iteration simulated.
    pub n_max: usize,
    /// Noise-free log10 of the leading residual, index = iteration − 1.
    pub base: Vec<f64>,
    /// The part of `base` that drives the monitor error (no start-up scaling effects).
    pub slow: Vec<f64>,
    /// Solver target, log10: the run stops once every residual is below it.
    pub target: Option<f64>,
    pub mark_on_target: bool,
    /// Linear-solver floor level (log10) when it matters.
    pub floor: Option<f64>,
    pub cycle: Option<Cycle>,
    pub wander: Option<Wander>,
    pub freeze: Option<Freeze>,
    pub drift: Option<Drift>,
    pub restart: Option<Restart>,
    pub tail: Tail,
    pub dt: Option<f64>,
    pub end: End,
    pub crash_in_pressure: bool,
    pub onset: Option<i64>,
    /// Normalised residuals saturate: a smooth cap on the log10 level.
    pub res_cap: Option<f64>,
    pub ringdown: Option<RingDown>,
    /// A monitor whose mean is zero (a symmetric body's lift): its `fin` is only its scale,
    /// and its noise is relative to its start-up magnitude.
    pub zero_mean: Option<usize>,
    /// Standard deviation of a round-off-only out-of-plane force (a 2-D case), absolute.
    pub side: Option<f64>,
    /// A laminar run: no k and omega equations.
    pub laminar: bool,
    /// Every linear solver reports exactly zero sweeps on the floor.
    pub zero_sweeps: bool,
    /// Steps simulated beyond `n_max` only to find when the residuals would meet their
    /// criteria (a live run stopped before): never part of the run.
    pub continuation: usize,
    /// One-step glitches printed over the simulated residuals (failed linear solves).
    pub glitches: Vec<Glitch>,
}

/// One iteration whose linear solves failed: the residuals of `equations` (all when empty)
/// print `level` (log10, the normalised start is 0) and their solvers report the sweep
/// limit; the next iteration is back on the trend.
#[derive(Debug, Clone, PartialEq)]
pub struct Glitch {
    pub step: usize,
    pub equations: Vec<usize>,
    pub level: f64,
}

impl Plan {
    /// A plan whose slow trajectory is `slow`, shifted so that it starts at 0: residuals are
    /// normalised by their first value, so the first step prints exactly 1.
    fn new(c: &Common, n_max: usize, slow: impl Fn(f64) -> f64) -> Plan {
        let s0 = slow(0.0);
        let slow: Vec<f64> = (0..n_max).map(|i| slow(i as f64) - s0).collect();
        let base = slow.iter().enumerate().map(|(i, s)| c.fast(i as f64) + s).collect();
        Plan {
            n_max,
            base,
            slow,
            target: None,
            mark_on_target: false,
            floor: None,
            cycle: None,
            wander: None,
            freeze: None,
            drift: None,
            restart: None,
            tail: Tail::None,
            dt: None,
            end: End::Finished,
            crash_in_pressure: false,
            onset: None,
            res_cap: None,
            ringdown: None,
            zero_mean: None,
            side: None,
            laminar: false,
            zero_sweeps: false,
            continuation: 0,
            glitches: Vec::new(),
        }
    }

    /// Extend `base` and `slow` by `extra` steps with the same trajectory, for the
    /// continuation of a run that stops early.
    fn extend(&mut self, c: &Common, extra: usize, slow: impl Fn(f64) -> f64) {
        let s0 = slow(0.0);
        let n = self.base.len();
        for i in n..n + extra {
            let s = slow(i as f64) - s0;
            self.slow.push(s);
            self.base.push(c.fast(i as f64) + s);
        }
        self.continuation = extra;
    }
}

/// Saturating approach to `-depth` with time constant `tau`.
fn saturating(depth: f64, tau: f64) -> impl Fn(f64) -> f64 {
    move |x| -depth * (1.0 - (-x / tau).exp())
}

/// Smooth ramp `max(0, x)` with width `w`.
fn softplus(x: f64, w: f64) -> f64 {
    x.max(0.0) + w * (1.0 + (-x.abs() / w).exp()).ln()
}

fn sign(r: &mut Rng) -> f64 {
    if r.chance(0.5) { 1.0 } else { -1.0 }
}

/// Geometric decay to a solver target `d` decades down, decelerating by `kappa`, reached
/// after about `n` iterations; the run may go on to `1.3 n + 200` before giving up.
fn converging_to_target(c: &Common, r: &mut Rng, d: f64, n: usize) -> Plan {
    let kappa = r.range(0.0, 0.3);
    let nf = n as f64;
    let rate = ((d - c.a) / (nf * (1.0 - kappa))).max(2e-4);
    let mut plan = Plan::new(c, n + n * 3 / 10 + 200, move |x| -rate * x * (1.0 - kappa * x / nf));
    plan.target = Some(-d);
    plan.mark_on_target = true;
    plan
}

/// Build the plan of `scenario`. May adjust start-up parameters of `c` (start-up rise).
pub(super) fn build(scenario: Scenario, c: &mut Common, r: &mut Rng) -> Plan {
    let n = c.n;
    let nf = n as f64;
    // Transients that are physical in iterations, squeezed for short runs.
    let sc = (nf / 2500.0).min(1.0);
    match scenario {
        Scenario::Converging => {
            let d = r.range(4.5, 6.0);
            converging_to_target(c, r, d, n)
        }
        Scenario::StillConverging => {
            let rate = (r.range(0.6, 1.4) / 1000.0).min((2.5 - c.a) / nf);
            let mut plan = Plan::new(c, n, move |x| -rate * x);
            plan.end = End::Running;
            // Where the residuals would meet the 3-decade drop if the run went on.
            let more = (((3.5 - c.a) / rate) as usize).saturating_sub(n) + 400;
            plan.extend(c, more, move |x| -rate * x);
            plan
        }
        Scenario::StartupRise => {
            c.a = r.range(0.1, 0.4);
            c.bump_h = r.range(0.8, 2.0);
            c.bump_tau = r.range(30.0, 110.0) * (nf / 1500.0).min(1.0);
            c.bump_q = 2.0;
            for m in &mut c.mons {
                m.osc_amp = r.range(0.05, 0.2);
            }
            let d = r.range(4.2, 5.5);
            converging_to_target(c, r, d, n)
        }
        Scenario::PseudoPlateauThenConverge => {
            let p0 = r.range(100.0, 400.0) * sc;
            let len = r.range(150.0, 600.0) * sc;
            let hump = r.range(0.0, 0.4);
            let d = r.range(4.5, 5.5);
            let n_eff = n.max((p0 + len) as usize + 800);
            let rate = (d - c.a) / (n_eff as f64 - len);
            let w = 10.0;
            let mut plan = Plan::new(c, n_eff + n_eff * 3 / 10 + 200, move |x| {
                let eff = x - (softplus(x - p0, w) - softplus(x - p0 - len, w));
                let mid = p0 + len / 2.0;
                -rate * eff + hump * (-((x - mid) / (len / 4.0)).powi(2)).exp()
            });
            plan.target = Some(-d);
            plan.mark_on_target = true;
            plan
        }
        Scenario::FloorConverged => {
            let floor = r.range(-5.8, -4.4);
            let frac = r.range(0.4, 0.7);
            let rate = (-floor - c.a) / (frac * nf);
            let mut plan = Plan::new(c, n, move |x| -rate * x);
            plan.floor = Some(floor);
            plan
        }
        Scenario::Stall => {
            let onset = r.range(0.25, 0.5) * nf;
            let depth = (r.range(1.2, 2.5) - c.a).max(0.3);
            let mut plan = Plan::new(c, n, saturating(depth, onset / 3.0));
            plan.wander = Some(Wander {
                onset,
                res_phi: r.range(0.985, 0.997),
                res_sd: r.range(0.04, 0.15),
                trend: r.range(-0.03, 0.03) / 1000.0,
                mon_phi: r.range(0.98, 0.995),
                mon_sd: r.log_range(5e-4, 3e-3),
            });
            plan.onset = Some(onset as i64 + 1);
            plan
        }
        Scenario::ResidualLimitCycle => {
            let onset = r.range(0.2, 0.5) * nf;
            let depth = (r.range(1.0, 2.4) - c.a).max(0.3);
            let period = r.log_range(3.0, 60.0);
            let mut plan = Plan::new(c, n, saturating(depth, onset / 3.0));
            plan.cycle = Some(Cycle::draw(r, onset, period));
            plan.onset = Some(onset as i64 + 1);
            plan
        }
        Scenario::MonitorOscillation => {
            let unsteady = r.chance(0.25);
            let (onset, depth, tau, period) = if unsteady {
                let depth = (r.range(1.8, 3.0) - c.a).max(0.3);
                (r.range(0.1, 0.3) * nf, depth, r.range(30.0, 100.0), r.range(20.0, 80.0))
            } else {
                let onset = r.range(0.15, 0.4) * nf;
                let depth = (r.range(1.2, 2.5) - c.a).max(0.3);
                (onset, depth, onset / 3.0, r.log_range(12.0, 150.0))
            };
            let mut plan = Plan::new(c, n, saturating(depth, tau));
            let mut cy = Cycle::draw(r, onset, period);
            cy.grow = r.range(50.0, 300.0) * sc;
            cy.jitter = r.range(0.002, 0.015);
            cy.res_amp = r.range(0.03, 0.2);
            cy.noise_damp = 0.0;
            cy.mon_amp = [r.log_range(3e-3, 3e-2), r.log_range(2e-2, 0.2), r.log_range(2e-3, 2e-2)];
            cy.mod_depth = r.range(0.0, 0.3);
            cy.mod_period = period * r.range(5.0, 20.0);
            plan.cycle = Some(cy);
            plan.wander = Some(Wander {
                onset,
                res_phi: r.range(0.95, 0.99),
                res_sd: r.range(0.02, 0.06),
                trend: 0.0,
                mon_phi: 0.9,
                mon_sd: 0.0,
            });
            if unsteady {
                plan.dt = Some(r.pick(&[1e-4, 2e-4, 5e-4, 1e-3]));
            }
            plan.onset = Some(onset as i64 + 1);
            plan
        }
        Scenario::DivergeNan => {
            let t_nan = (r.range(60.0, 400.0) * sc) as usize;
            let nan_steps = r.int_range(1, 10) as usize;
            let crash = r.chance(0.5);
            let onset = n - t_nan - nan_steps - usize::from(crash);
            let g = r.range(1.0, 5.0);
            let mut plan = diverging(c, r, n, onset, t_nan, g);
            plan.tail = Tail::Nan {
                onset,
                first_nan: onset + t_nan,
                nan_first: r.pick(&[4usize, 5]),
                mon_eps: [
                    sign(r) * r.log_range(1e-4, 1e-3),
                    sign(r) * r.log_range(1e-4, 1e-3),
                    sign(r) * r.log_range(1e-4, 1e-3),
                ],
            };
            plan.end = if crash { End::Crash } else { End::Running };
            plan.crash_in_pressure = true;
            plan.onset = Some(onset as i64 + 1);
            plan
        }
        Scenario::DivergeOverflow => {
            let t_over = (r.range(80.0, 400.0) * sc) as usize;
            let tail_steps = r.int_range(2, 30) as usize;
            let onset = n - t_over - tail_steps;
            let mut plan = diverging(c, r, n, onset, t_over, 100.0);
            plan.tail = Tail::Overflow {
                onset,
                mon_eps: [
                    sign(r) * r.log_range(1e-4, 1e-3),
                    sign(r) * r.log_range(1e-4, 1e-3),
                    sign(r) * r.log_range(1e-4, 1e-3),
                ],
            };
            plan.end = End::Running;
            plan.onset = Some(onset as i64 + 1);
            plan
        }
        Scenario::CrashNoNan => {
            let len = ((r.range(20.0, 200.0) * sc) as usize).max(10);
            let onset = n - len;
            let d_on = r.range(1.5, 4.0);
            let rate = ((d_on - c.a) / onset as f64).max(0.0);
            let sat = r.range(-0.5, 0.2);
            let before = move |x: f64| -rate * x;
            let lenf = len as f64;
            let onf = onset as f64;
            let mut plan = Plan::new(c, n, before);
            let b_on = plan.base[onset];
            let logistic = |t: f64| 1.0 / (1.0 + (-(t - 0.45 * lenf) / (0.1 * lenf)).exp());
            let l0 = logistic(0.0);
            for i in onset..n {
                let t = i as f64 - onf;
                let f = (logistic(t) - l0) / (1.0 - l0);
                plan.base[i] = b_on + (sat - b_on) * f;
                plan.slow[i] = plan.slow[onset];
            }
            let mut tiny = Vec::new();
            if r.chance(0.7) {
                for _ in 0..r.int_range(1, 2) {
                    let eq = r.pick(&[2usize, 4, 5]);
                    let from = n - r.int_range(1, 5) as usize;
                    tiny.push((eq, from, r.range(-30.0, -12.0)));
                }
            }
            plan.tail = Tail::Crash {
                onset,
                len,
                power: r.range(1.0, 2.5),
                cont_dec: r.range(3.0, 8.0),
                mon_dec: [r.range(1.0, 4.0), r.range(1.0, 4.0), r.range(0.5, 3.0)],
                mon_sign: [1.0, sign(r), 1.0],
                tiny,
            };
            plan.end = End::Crash;
            plan.crash_in_pressure = r.chance(0.6);
            plan.onset = Some(onset as i64 + 1);
            plan
        }
        Scenario::SilentDivergence => {
            let onset = r.range(0.2, 0.5) * nf;
            let depth = (r.range(1.5, 3.2) - c.a).max(0.3);
            let mut plan = Plan::new(c, n, saturating(depth, onset / 3.0));
            plan.wander = Some(Wander {
                onset,
                res_phi: r.range(0.95, 0.99),
                res_sd: r.range(0.03, 0.1),
                trend: 0.0,
                mon_phi: 0.9,
                mon_sd: 0.0,
            });
            let k = r.range(1.0, 3.0);
            let eps0 = 1e-3;
            let tau = (nf - onset) / (10f64.powf(k) / eps0).ln();
            let lead = r.pick(&[0usize, 1, 2]);
            let mut gain = [0.0; 3];
            for (m, g) in gain.iter_mut().enumerate() {
                *g = sign(r) * if m == lead { 1.0 } else { r.range(0.02, 0.3) };
            }
            plan.tail = Tail::Silent { onset, tau, eps0, gain };
            plan.end = if r.chance(0.5) { End::Running } else { End::Finished };
            plan.onset = Some(onset as i64 + 1);
            plan
        }
        Scenario::FalseConvergence => {
            let d = r.range(3.4, 4.5);
            let stops = r.chance(0.7);
            let mut plan = converging_to_target(c, r, d, n);
            if !stops {
                plan.target = None;
                plan.mark_on_target = false;
                plan.n_max = n;
            }
            let mut delta = [0.0; 3];
            let mut tau = [1.0; 3];
            for m in 0..3 {
                let drifts = m == 0 || r.chance(0.5);
                let pct = r.range(0.3, 3.0) * if m == 0 { 1.0 } else { r.range(0.3, 1.0) };
                tau[m] = nf * r.range(1.0, 4.0);
                let per_window = (500.0 / tau[m]) * (-(nf - 250.0) / tau[m]).exp();
                delta[m] = if drifts { sign(r) * pct / 100.0 / per_window } else { 0.0 };
            }
            plan.drift = Some(Drift { delta, tau });
            plan
        }
        Scenario::FrozenResidual => {
            let d = r.range(4.2, 5.5);
            let mut plan = converging_to_target(c, r, d, n);
            plan.target = None;
            plan.mark_on_target = false;
            plan.n_max = n;
            let candidates: Vec<usize> =
                [1usize, 2, 4, 5].into_iter().filter(|e| *e != c.lead).collect();
            let eq = r.pick(&candidates);
            let onset = (r.range(0.3, 0.7) * nf) as i64;
            plan.freeze = Some(Freeze { eq, onset });
            plan.end = if r.chance(0.3) { End::Running } else { End::Finished };
            plan.onset = Some(onset);
            plan
        }
        Scenario::Restart => {
            let d = r.range(4.5, 6.0);
            let mut plan = converging_to_target(c, r, d, n);
            let kill_at = (r.range(0.3, 0.7) * nf) as i64;
            let interval = r.pick(&[100i64, 200, 250, 500]);
            let mut checkpoint = kill_at - kill_at % interval;
            if checkpoint == 0 || r.chance(0.25) {
                checkpoint = kill_at;
            }
            plan.restart = Some(Restart {
                kill_at,
                checkpoint,
                jump: r.range(0.3, 1.2),
                tau: r.range(10.0, 60.0),
                mon_jump: sign(r) * r.log_range(1e-4, 2e-3),
            });
            plan
        }
        Scenario::EarlyBlowUp => early_blow_up(c, r),
        Scenario::ShortLaminar => {
            // Residuals reach 4–5 decades at 55–75 % of the run, which then goes on to its
            // iteration limit.
            let d = r.range(4.0, 5.0);
            let reach = (r.range(0.55, 0.75) * nf) as usize;
            let mut plan = converging_to_target(c, r, d, reach);
            plan.target = None;
            plan.mark_on_target = false;
            plan.n_max = n;
            plan.laminar = true;
            plan
        }
        Scenario::NearZeroMonitors => {
            // Deep enough that the start-up asymmetry of the lift (which decays with the
            // residuals) is gone well within a thousandth of a tenth of its size.
            let d = r.range(5.5, 6.5);
            let mut plan = converging_to_target(c, r, d, n);
            // Lift of a symmetric body: the start-up asymmetry decays, the mean is zero.
            let m = &mut c.mons[1];
            m.delta = sign(r) * r.range(0.3, 0.9);
            m.sigma = r.log_range(1e-6, 1e-5);
            plan.zero_mean = Some(1);
            plan.side = Some(r.log_range(3e-22, 3e-21));
            plan
        }
        Scenario::RingDown => {
            let d = r.range(4.5, 6.0);
            let mut plan = converging_to_target(c, r, d, n);
            plan.ringdown = Some(RingDown {
                monitor: r.pick(&[0usize, 1, 2]),
                amp: r.range(0.01, 0.05),
                tau: r.range(150.0, 450.0).min(nf / 6.0),
                period: r.range(25.0, 70.0),
                phase: r.range(0.0, TAU),
            });
            plan
        }
        Scenario::HighResidualStall => {
            // Barely any drop: the leading residual stays near 0.9 of its start.
            c.a = r.range(0.02, 0.06);
            c.bump_h = 0.0;
            let onset = r.range(60.0, 200.0);
            let depth = r.range(0.0, 0.04);
            let mut plan = Plan::new(c, n, saturating(depth, onset / 3.0));
            plan.wander = Some(Wander {
                onset,
                res_phi: r.range(0.6, 0.9),
                res_sd: r.range(0.05, 0.15),
                trend: 0.0,
                mon_phi: r.range(0.9, 0.98),
                mon_sd: r.log_range(5e-4, 3e-3),
            });
            // A weak periodic component buried in the broadband noise.
            let period = r.log_range(6.0, 40.0);
            let mut cy = Cycle::draw(r, onset, period);
            cy.res_amp = r.range(0.02, 0.05);
            cy.noise_damp = 0.0;
            cy.grow = r.range(20.0, 60.0);
            cy.mon_amp =
                [r.log_range(1e-4, 5e-4), r.log_range(1e-4, 5e-4), r.log_range(1e-4, 5e-4)];
            plan.cycle = Some(cy);
            plan.onset = Some(onset as i64 + 1);
            plan
        }
        Scenario::LongPeriodCycle => {
            // A long run whose residuals meet their drop while a monitor cycle persists.
            let d = r.range(3.6, 4.6);
            let mut plan = converging_to_target(c, r, d, n);
            plan.target = None;
            plan.mark_on_target = false;
            plan.n_max = n;
            let onset = r.range(0.2, 0.4) * nf;
            let period = r.range(200.0, 300.0);
            let mut cy = Cycle::draw(r, onset, period);
            cy.grow = r.range(100.0, 300.0);
            cy.jitter = r.range(0.001, 0.005);
            cy.res_amp = r.range(0.005, 0.03);
            cy.noise_damp = 0.0;
            let lead = r.pick(&[0usize, 1, 2]);
            for (m, a) in cy.mon_amp.iter_mut().enumerate() {
                *a = if m == lead { r.range(0.005, 0.03) } else { r.range(0.0, 0.004) };
            }
            plan.cycle = Some(cy);
            plan.onset = Some(onset as i64 + 1);
            plan
        }
        Scenario::ResidualGlitches => {
            let d = r.range(4.5, 6.0);
            let mut plan = converging_to_target(c, r, d, n);
            // One to three failed linear solves anywhere after the start-up, each printing a
            // residual from a third of the start's level to thirty times it, in one equation
            // or in all of them.
            let count = r.pick(&[1usize, 2, 3]);
            for _ in 0..count {
                let step = (r.range(0.15, 0.95) * nf) as usize;
                let equations =
                    if r.chance(0.4) { Vec::new() } else { vec![r.pick(&[0, 1, 2, 3])] };
                plan.glitches.push(Glitch { step, equations, level: r.range(-0.5, 1.5) });
            }
            plan
        }
        Scenario::FloorZeroSweeps => {
            let floor = r.range(-5.5, -4.7);
            let frac = r.range(0.3, 0.5);
            let rate = (-floor - c.a) / (frac * nf);
            c.floor_sd = r.range(0.1, 0.25);
            let mut plan = Plan::new(c, n, move |x| -rate * x);
            plan.floor = Some(floor);
            plan.zero_sweeps = true;
            plan
        }
    }
}

/// The early blow-up: residuals fall for some tens of iterations, a period-3 cycle grows
/// exponentially from `onset`, an excursion about 13 iterations before the crash turns into
/// an explosion of monitors and continuity, and the solver crashes at the last step.
fn early_blow_up(c: &mut Common, r: &mut Rng) -> Plan {
    let onset = r.range(60.0, 85.0);
    let n = (onset + r.range(55.0, 85.0)) as usize;
    let depth = r.range(0.5, 1.5);
    let mut plan = Plan::new(c, n, saturating(depth, 25.0));
    let period = 3.0 * r.range(0.97, 1.03);
    let mut cy = Cycle::draw(r, onset, period);
    cy.exp_growth = true;
    cy.jitter = r.range(0.002, 0.01);
    cy.res_amp = r.range(0.01, 0.03);
    cy.noise_damp = 0.0;
    // e-fold time such that the residual cycle reaches about ±2 decades at the excursion.
    let excursion = n as f64 - 13.0;
    cy.grow = (excursion - onset) / (2.0 / cy.res_amp).ln();
    cy.mon_amp = [r.log_range(3e-4, 1e-3), r.log_range(3e-4, 1e-3), r.log_range(3e-4, 1e-3)];
    plan.cycle = Some(cy);
    plan.res_cap = Some(r.range(0.2, 0.6));
    plan.tail = Tail::Crash {
        onset: excursion as usize,
        len: 13,
        power: r.range(2.0, 4.0),
        cont_dec: r.range(40.0, 50.0),
        mon_dec: [r.range(45.0, 80.0), r.range(45.0, 80.0), r.range(45.0, 75.0)],
        mon_sign: [1.0, sign(r), 1.0],
        tiny: Vec::new(),
    };
    plan.end = End::Crash;
    plan.crash_in_pressure = r.chance(0.6);
    plan.onset = Some(onset as i64 + 1);
    plan
}

/// Convergence down to `d_on` decades at `onset`, then accelerating growth that reaches
/// `g` (log10 of the leading residual) `t_grow` steps later and goes on growing.
fn diverging(c: &Common, r: &mut Rng, n: usize, onset: usize, t_grow: usize, g: f64) -> Plan {
    let d_on = r.range(1.5, 4.0);
    let rate = ((d_on - c.a) / onset as f64).max(0.0);
    let mut plan = Plan::new(c, n, move |x| -rate * x);
    let b_on = plan.base[onset];
    let rise = g - b_on;
    let tg = t_grow.max(1) as f64;
    let g1 = r.range(0.1, 0.4) * rise / tg;
    let g2 = (rise - g1 * tg) / (tg * tg);
    for i in onset..n {
        let t = (i - onset) as f64;
        plan.base[i] = b_on + g1 * t + g2 * t * t;
        plan.slow[i] = plan.slow[onset];
    }
    plan
}
