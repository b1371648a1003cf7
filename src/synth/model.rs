//! The history model: per-run parameters, the scenario's plan, and the step-by-step
//! simulation that turns them into [`Step`]s.
//!
//! A run is built in three layers. [`Common`] holds what every run of the invented solver
//! has (per-equation offsets, noise levels and autocorrelation, monitor start-up
//! transients, sweep counts, clipping, CFL ramp, floors). A [`plan::Plan`] holds the
//! scenario's story: the noise-free log10 trajectory of the leading residual, the part of
//! it that drives the monitors, and optional overlays (limit cycle, wander, frozen
//! equation, blow-up tail, monitor drift, restart). [`simulate`] then walks the iterations,
//! adding AR(1) noise and deriving continuity, sweeps, notices, warnings and wall time from
//! the residual state, the way they co-vary in real logs.

mod plan;

use std::f64::consts::TAU;

use super::rng::{Ar1, Rng};
use super::{Crash, EQUATIONS, End, Header, Options, SWEEP_LIMIT, Scenario, Step, SynthRun, Truth};
use crate::judge::Criteria;
use plan::{Plan, Tail};

/// Invented case names.
const CASES: [&str; 12] = [
    "duct-bend-07",
    "wing-t3",
    "mixer-22",
    "diffuser-k4",
    "manifold-a9",
    "blade-row-2",
    "inlet-s5",
    "vane-ring-11",
    "plenum-h3",
    "nozzle-c8",
    "elbow-r12",
    "fan-shroud-6",
];

/// Values above this print as asterisks; keep them finite so arithmetic stays defined.
const HUGE: f64 = 1e300;
/// Smallest magnitude the generator produces (the printed exponent has two digits).
const TINY: f64 = 1e-99;

/// Per-equation parameters.
#[derive(Debug, Clone)]
struct Equation {
    /// Level, in decades, the residual settles to relative to the leading one (≤ 0).
    offset: f64,
    /// Multiplies the shared trajectory (≥ 1: converges at least as fast as the lead).
    scale: f64,
    /// Noise standard deviation in decades.
    sigma: f64,
    phi: f64,
    /// Typical linear-solver sweeps.
    sweeps: f64,
    /// Floor relative to the run's floor level, decades.
    floor_spread: f64,
}

/// Per-monitor parameters (drag, lift, dp).
#[derive(Debug, Clone)]
struct Monitor {
    /// Converged value.
    fin: f64,
    /// Start value relative to `fin`, minus one.
    delta: f64,
    /// Exponent coupling the monitor error to the slow residual trajectory.
    beta: f64,
    /// Damped start-up oscillation: relative amplitude, decay, period, phase.
    osc_amp: f64,
    osc_tau: f64,
    osc_period: f64,
    osc_phase: f64,
    /// Relative AR(1) noise.
    sigma: f64,
    phi: f64,
}

/// What every run of the invented solver has, drawn from the seed.
#[derive(Debug, Clone)]
pub(super) struct Common {
    /// Nominal length in iterations.
    n: usize,
    case: String,
    header: Header,
    /// Initial fast drop (decades) and its time constant.
    a: f64,
    tau1: f64,
    /// Start-up bump: height (decades), time of its peak, shape exponent.
    bump_h: f64,
    bump_tau: f64,
    bump_q: f64,
    /// Time constant with which the per-equation offsets appear.
    tau_offset: f64,
    eqs: Vec<Equation>,
    lead: usize,
    shared_phi: f64,
    /// Weight of the noise shared by all equations.
    shared_rho: f64,
    floor_level: f64,
    floor_sd: f64,
    floor_phi: f64,
    mons: Vec<Monitor>,
    cont_c0: f64,
    cont_gamma: f64,
    cont_sigma: f64,
    cont_phi: f64,
    cfl0: f64,
    cfl_max: f64,
    cfl_ramp: f64,
    auto_cfl: bool,
    clip_k0: f64,
    clip_w0: f64,
    clip_tau: f64,
    clip_late: f64,
    wall0: f64,
}

impl Common {
    fn draw(r: &mut Rng, scenario: Scenario, options: &Options) -> Common {
        let drawn_n = r.int_range(1500, 4000) as usize;
        let n = options.iterations.unwrap_or_else(|| default_length(scenario, drawn_n)).max(200);
        let drawn_case = r.pick(&CASES);
        let case = options.case.clone().unwrap_or_else(|| drawn_case.to_string());
        let version = r.pick(&["3.1.4", "3.2.0", "3.2.1"]);
        let cells = r.log_range(1.5e5, 4.0e6) as u64;
        let zones = r.int_range(1, 6) as u32;
        let started = format!(
            "2026-{:02}-{:02} {:02}:{:02}:{:02}",
            r.int_range(1, 12),
            r.int_range(1, 28),
            r.int_range(0, 23),
            r.int_range(0, 59),
            r.int_range(0, 59)
        );
        let heavy = scenario == Scenario::FalseConvergence;
        let relaxation = if heavy {
            [r.pick(&[0.2, 0.3]), r.pick(&[0.05, 0.1]), r.pick(&[0.3, 0.4]), r.pick(&[0.3, 0.4])]
        } else {
            [
                r.pick(&[0.5, 0.6, 0.7, 0.8]),
                r.pick(&[0.2, 0.3, 0.4]),
                r.pick(&[0.6, 0.7, 0.8]),
                r.pick(&[0.6, 0.7, 0.8]),
            ]
        };
        let model = if scenario == Scenario::ShortLaminar { "laminar" } else { "k-omega SST" };
        let header = Header { version, cells, zones, started, relaxation, model };

        let lead = r.pick(&[0usize, 3, 4]);
        let phi_run = r.range(0.5, 0.95);
        let u_sweeps = r.range(1.5, 5.0);
        let eqs = (0..EQUATIONS.len())
            .map(|e| {
                let is_lead = e == lead;
                Equation {
                    offset: if is_lead { 0.0 } else { r.range(-1.5, -0.2) },
                    scale: if is_lead { 1.0 } else { r.range(1.0, 1.15) },
                    sigma: if is_lead { r.range(0.02, 0.08) } else { r.range(0.01, 0.1) },
                    phi: (phi_run + r.range(-0.05, 0.05)).clamp(0.3, 0.97),
                    sweeps: match e {
                        0..=2 => u_sweeps * r.range(0.8, 1.2),
                        3 => r.range(10.0, 40.0),
                        _ => r.range(1.0, 3.0),
                    },
                    floor_spread: r.range(-1.0, 0.2),
                }
            })
            .collect();
        let mons = (0..3)
            .map(|m| {
                let fin = match m {
                    0 => r.log_range(0.02, 0.8),
                    1 => {
                        let sign = if r.chance(0.7) { 1.0 } else { -1.0 };
                        sign * r.log_range(0.01, 0.9)
                    }
                    _ => r.log_range(15.0, 2500.0),
                };
                Monitor {
                    fin,
                    delta: r.range(-0.5, 0.9),
                    beta: r.range(0.85, 1.15),
                    osc_amp: r.range(0.0, 0.08),
                    osc_tau: n as f64 * r.range(0.01, 0.04),
                    osc_period: r.range(15.0, 120.0),
                    osc_phase: r.range(0.0, TAU),
                    sigma: r.log_range(5e-6, 1e-4),
                    phi: r.range(0.8, 0.98),
                }
            })
            .collect();
        let cfl0 = r.pick(&[1.0, 2.0, 5.0, 10.0]);
        let cfl_max = cfl0 * r.pick(&[1.0, 2.0, 5.0, 10.0]);
        Common {
            n,
            case,
            header,
            a: r.range(0.3, 1.0),
            tau1: r.range(8.0, 50.0),
            bump_h: r.range(0.0, 0.35),
            bump_tau: r.range(4.0, 25.0),
            bump_q: 1.0,
            tau_offset: r.range(3.0, 20.0),
            eqs,
            lead,
            shared_phi: phi_run,
            shared_rho: r.range(0.2, 0.6),
            floor_level: -8.0 - r.range(0.0, 1.0),
            floor_sd: r.range(0.03, 0.15),
            floor_phi: r.range(0.0, 0.3),
            mons,
            cont_c0: r.log_range(5e-3, 8e-2),
            cont_gamma: r.range(0.9, 1.1),
            cont_sigma: r.range(0.02, 0.08),
            cont_phi: r.range(0.5, 0.9),
            cfl0,
            cfl_max,
            cfl_ramp: r.range(50.0, 300.0),
            auto_cfl: r.chance(0.5),
            clip_k0: r.log_range(3.0, 3000.0),
            clip_w0: r.log_range(1.0, 500.0),
            clip_tau: r.range(3.0, 40.0),
            clip_late: r.range(0.0, 0.004),
            wall0: cells as f64 / 1e6 * r.range(0.4, 1.6),
        }
    }

    /// The fast start-up part of the leading residual, decades: the initial drop plus the
    /// usual small rise while the flow develops.
    fn fast(&self, x: f64) -> f64 {
        let drop = -self.a * (1.0 - (-x / self.tau1).exp());
        let u = x / self.bump_tau;
        let bump = self.bump_h * u.powf(self.bump_q) * (self.bump_q * (1.0 - u)).exp();
        drop + bump
    }
}

/// Run length of a scenario when the options do not fix it, from the 1500–4000 drawn for
/// every run (mapped linearly, so no scenario draws more numbers than another).
fn default_length(scenario: Scenario, drawn: usize) -> usize {
    let map = |lo: usize, hi: usize| lo + (drawn - 1500) * (hi - lo) / 2500;
    match scenario {
        Scenario::ShortLaminar => map(300, 600),
        Scenario::FloorZeroSweeps => map(500, 1200),
        Scenario::LongPeriodCycle => map(3500, 4500),
        _ => drawn,
    }
}

/// Build the run of `scenario` for `seed`.
pub(super) fn generate(scenario: Scenario, seed: u64, options: &Options) -> SynthRun {
    let index = Scenario::all().iter().position(|s| *s == scenario).unwrap_or(0) as u64;
    let mut root = Rng::new(
        seed.wrapping_mul(0x2545_F491_4F6C_DD1D) ^ (index + 1).wrapping_mul(0x9E37_79B9_7F4A_7C15),
    );
    let mut prng = root.fork(1);
    let nrng = root.fork(2);
    let mut common = Common::draw(&mut prng, scenario, options);
    let plan = plan::build(scenario, &mut common, &mut prng);
    let (mut run, mon_nf) = simulate(&common, &plan, nrng);
    // Printed over the run after its truth is dated: a practitioner reads through them.
    glitch(&mut run.steps, &plan.glitches);
    run.scenario = scenario;
    run.seed = seed;
    if scenario == Scenario::FalseConvergence {
        run.onset = residual_criteria_met_at(&run.steps);
    }
    if scenario.expected() == crate::judge::Verdict::Converged {
        let monitors = monitors_settled_step(&run.steps, &mon_nf);
        run.truth.settled = match (run.truth.residuals_met, monitors) {
            (Some(r), Some(m)) if r < run.steps.len() => Some(r.max(m)),
            _ => None,
        };
    }
    run
}

/// Print each glitch over its step: the residuals at their glitch level, their linear
/// solvers at the sweep limit.
fn glitch(steps: &mut [Step], glitches: &[plan::Glitch]) {
    for g in glitches {
        let Some(st) = steps.get_mut(g.step) else { continue };
        let all: Vec<usize> = (0..st.residuals.len()).collect();
        let eqs = if g.equations.is_empty() { &all } else { &g.equations };
        for &e in eqs {
            let Some(r) = st.residuals.get_mut(e) else { continue };
            r.1 = round_sig(10f64.powf(g.level), 4);
            if let Some(s) = st.sweeps.get_mut(e) {
                *s = SWEEP_LIMIT;
                st.warnings.push(format!(
                    "linear solver for {} reached sweep limit ({SWEEP_LIMIT})",
                    EQUATIONS[e]
                ));
            }
        }
    }
}

/// First iteration at which every residual is at least 3 decades below its running peak
/// (the default residual criterion, common practice): the moment a false convergence
/// becomes a false convergence.
fn residual_criteria_met_at(steps: &[Step]) -> Option<i64> {
    let mut peak = [0.0f64; 6];
    for s in steps {
        let mut all = true;
        for (e, (_, v)) in s.residuals.iter().enumerate() {
            if v.is_finite() {
                peak[e] = peak[e].max(*v);
            }
            all &= v.is_finite() && *v <= peak[e] * 1e-3;
        }
        if all {
            return Some(s.iteration);
        }
    }
    None
}

/// Round to `digits` significant digits (what the log prints), so that the store built
/// directly holds the same numbers a parser reads back from the log.
pub(super) fn round_sig(v: f64, digits: i32) -> f64 {
    if !v.is_finite() || v == 0.0 || v.abs() >= 1e100 {
        return v;
    }
    let e = v.abs().log10().floor() as i32;
    let shift = digits - 1 - e;
    // Powers of ten up to 1e22 are exact, so one correctly rounded operation on the integer
    // mantissa gives the same double as parsing the printed decimal.
    if (0..=22).contains(&shift) {
        let s = 10f64.powi(shift);
        (v * s).round() / s
    } else if (-22..0).contains(&shift) {
        let s = 10f64.powi(-shift);
        (v / s).round() * s
    } else {
        let d = (digits - 1).max(0) as usize;
        format!("{v:.d$e}").parse().unwrap_or(v)
    }
}

fn clamp_mag(v: f64) -> f64 {
    if v.is_nan() {
        return v;
    }
    let m = v.abs().clamp(TINY, HUGE);
    if v < 0.0 { -m } else { m }
}

/// log10(10^a + 10^b) without overflow.
fn log_add(a: f64, b: f64) -> f64 {
    let (hi, lo) = if a > b { (a, b) } else { (b, a) };
    hi + (1.0 + 10f64.powf(lo - hi)).log10()
}

fn signed_nan(rng: &mut Rng) -> f64 {
    if rng.chance(0.5) { -f64::NAN } else { f64::NAN }
}

/// State carried from step to step.
struct Sim<'a> {
    c: &'a Common,
    p: &'a Plan,
    rng: Rng,
    shared: Ar1,
    own: Vec<Ar1>,
    floor_noise: Vec<Ar1>,
    mon_noise: Vec<Ar1>,
    cont_noise: Ar1,
    wander_res: Ar1,
    wander_mon: Vec<Ar1>,
    jitter: Ar1,
    theta: f64,
    runmin: [f64; 6],
    frozen: Option<f64>,
    /// First iteration of the current solver process and its step count.
    process_start: i64,
    process_steps: usize,
    /// Noise-free drag, lift and dp of every step so far (for the true settling iteration).
    mon_nf: Vec<[f64; 3]>,
}

/// Walk the iterations; returns the run (its truth holds the residual dating only) and the
/// noise-free monitors of every step.
fn simulate(c: &Common, p: &Plan, mut rng: Rng) -> (SynthRun, Vec<[f64; 3]>) {
    let shared = Ar1::new(c.shared_phi, 1.0, &mut rng);
    let own = c.eqs.iter().map(|e| Ar1::new(e.phi, 1.0, &mut rng)).collect();
    let floor_noise = c.eqs.iter().map(|_| Ar1::new(c.floor_phi, 1.0, &mut rng)).collect();
    let mon_noise = c.mons.iter().map(|m| Ar1::new(m.phi, m.sigma, &mut rng)).collect();
    let cont_noise = Ar1::new(c.cont_phi, c.cont_sigma, &mut rng);
    let (wr_phi, wr_sd, wm_phi, wm_sd) = p
        .wander
        .as_ref()
        .map_or((0.5, 0.0, 0.5, 0.0), |w| (w.res_phi, w.res_sd, w.mon_phi, w.mon_sd));
    let wander_res = Ar1::new(wr_phi, wr_sd, &mut rng);
    let wander_mon = (0..3).map(|_| Ar1::new(wm_phi, wm_sd, &mut rng)).collect();
    let jitter_sd = p.cycle.as_ref().map_or(0.0, |cy| cy.jitter);
    let jitter = Ar1::new(0.9, jitter_sd, &mut rng);
    let mut sim = Sim {
        c,
        p,
        rng,
        shared,
        own,
        floor_noise,
        mon_noise,
        cont_noise,
        wander_res,
        wander_mon,
        jitter,
        theta: 0.0,
        runmin: [f64::INFINITY; 6],
        frozen: None,
        process_start: 1,
        process_steps: 0,
        mon_nf: Vec::new(),
    };

    let mut steps: Vec<Step> = Vec::new();
    let mut solver_converged = false;
    let mut it: i64 = 1;
    let mut restarted = false;
    let mut restart_from = None;
    loop {
        let (step, below_target) = sim.step(it, restart_from.take());
        steps.push(step);
        if below_target {
            solver_converged = p.mark_on_target;
            break;
        }
        if it as usize >= p.n_max + p.continuation {
            break;
        }
        match &p.restart {
            Some(r) if !restarted && it == r.kill_at => {
                restarted = true;
                restart_from = Some(r.checkpoint);
                it = r.checkpoint + 1;
                sim.process_start = it;
                sim.process_steps = 0;
            }
            _ => it += 1,
        }
    }

    let crash = (p.end == End::Crash).then(|| crash_signature(p, &mut sim.rng));
    let mon_nf = std::mem::take(&mut sim.mon_nf);
    let mut run = SynthRun {
        scenario: Scenario::Converging,
        seed: 0,
        case: c.case.clone(),
        header: c.header.clone(),
        steps,
        onset: p.onset,
        end: p.end,
        solver_converged,
        crash,
        truth: Truth::default(),
    };
    if p.laminar {
        laminar(&mut run.steps);
    }
    // The continuation only dates the residual criteria of a run stopped before.
    run.truth.residuals_met = residuals_met_step(&run.steps);
    let keep = run.steps.len() - p.continuation.min(run.steps.len());
    run.steps.truncate(keep);
    (run, mon_nf)
}

/// Drop the k and omega equations (and their clipping notices and warnings) of a laminar run.
fn laminar(steps: &mut [Step]) {
    for st in steps {
        st.residuals.truncate(4);
        st.sweeps.truncate(4);
        st.notices.clear();
        st.warnings.retain(|w| !w.contains(" k ") && !w.contains(" omega "));
    }
}

/// First step from which every residual's printed value stays at least 3 decades (the
/// default drop, common practice) below its running peak, to the last step.
pub(super) fn residuals_met_step(steps: &[Step]) -> Option<usize> {
    let mut peak: Vec<f64> = Vec::new();
    let mut first_of_run: Option<usize> = None;
    for (k, st) in steps.iter().enumerate() {
        peak.resize(st.residuals.len().max(peak.len()), 0.0);
        let mut met = !st.residuals.is_empty();
        for (e, (_, v)) in st.residuals.iter().enumerate() {
            if v.is_finite() {
                peak[e] = peak[e].max(*v);
            }
            met &= v.is_finite() && *v <= peak[e] * 1e-3;
        }
        first_of_run = if met { first_of_run.or(Some(k)) } else { None };
    }
    first_of_run
}

/// First step from which every judged monitor of the noise-free model stays within the
/// default drift limit (0.1 %) of its final noise-free value, relative to the reference the
/// judge uses by default: `max(|final|, κ·M)` with `M` the largest noise-free magnitude of
/// the latest segment and `κ` [`crate::judge::limits::NEAR_ZERO_SHARE`].
pub(super) fn monitors_settled_step(steps: &[Step], nf: &[[f64; 3]]) -> Option<usize> {
    let n = nf.len().min(steps.len());
    if n == 0 {
        return None;
    }
    let seg = steps[..n].iter().rposition(|s| s.restart_from.is_some()).unwrap_or(0);
    let mut settled = 0usize;
    for m in 0..3 {
        let fin = nf[n - 1][m];
        let big = nf[seg..n].iter().map(|v| v[m].abs()).fold(0.0f64, f64::max);
        let reference = fin.abs().max(crate::judge::limits::NEAR_ZERO_SHARE * big);
        let tol = Criteria::DEFAULT_DRIFT_PCT / 100.0 * reference;
        // NaN (a value the model could not give) counts as outside.
        let inside = |k: usize| (nf[k][m] - fin).abs() <= tol;
        let last_out = (0..n).rev().find(|&k| !inside(k));
        settled = settled.max(last_out.map_or(0, |k| k + 1));
    }
    (settled < n).then_some(settled)
}

/// The crash lines: which routine failed decides how much of the last record was printed.
fn crash_signature(p: &Plan, r: &mut Rng) -> Crash {
    let (printed, frames): (usize, &[&str]) = if p.crash_in_pressure {
        (3, &["at tarn::solve_pressure (pressure.f90:212)"])
    } else if r.chance(0.5) {
        (
            4,
            &[
                "at tarn::k_source (turbulence.f90:588)",
                "at tarn::solve_turbulence (turbulence.f90:601)",
            ],
        )
    } else {
        (
            5,
            &[
                "at tarn::sst_limiter (sst.f90:140)",
                "at tarn::solve_turbulence (turbulence.f90:612)",
            ],
        )
    };
    let message = if r.chance(0.75) {
        "tarn fatal: floating point exception (signal 8)"
    } else {
        "tarn fatal: segmentation fault (signal 11)"
    };
    let mut trace: Vec<String> = frames.iter().map(|f| f.to_string()).collect();
    for f in [
        "at tarn::outer_iteration (iterate.f90:418)",
        "at tarn::run_steady (driver.f90:96)",
        "at tarn::main (tarn.f90:31)",
    ] {
        trace.push(f.to_string());
    }
    Crash { printed_equations: printed, message: message.to_string(), trace }
}

impl Sim<'_> {
    /// Compute one step; the flag says whether every residual is below the solver target.
    fn step(&mut self, it: i64, restart_from: Option<i64>) -> (Step, bool) {
        let (c, p) = (self.c, self.p);
        let i = ((it - 1).max(0) as usize).min(p.base.len() - 1);
        let x = i as f64;
        let base = p.base[i];
        self.process_steps += 1;
        let since_start = (it - self.process_start) as f64;
        let after_restart = (self.process_start > 1).then_some(since_start);

        // Limit-cycle phase and envelope (shared by residuals and monitors).
        let mut env = 0.0;
        if let Some(cy) = &p.cycle {
            self.theta += TAU / cy.period * (1.0 + self.jitter.next(&mut self.rng));
            if x >= cy.onset && cy.exp_growth {
                env = ((x - cy.onset) / cy.grow).exp();
            } else if x >= cy.onset {
                env = 1.0 - (-(x - cy.onset) / cy.grow).exp();
                env *= 1.0 + cy.mod_depth * (TAU * x / cy.mod_period).sin();
            }
        }
        let wander = match &p.wander {
            Some(w) => {
                let ramp = w.ramp(x);
                let trend = w.trend * (x - w.onset).max(0.0);
                ramp * self.wander_res.next(&mut self.rng) + trend
            }
            None => 0.0,
        };
        let restart_jump = match (&p.restart, after_restart) {
            (Some(r), Some(s)) => r.jump * (-s / r.tau).exp(),
            _ => 0.0,
        };
        let crash_g = match &p.tail {
            Tail::Crash { onset, len, power, .. } => {
                ((x - *onset as f64) / *len as f64).clamp(0.0, 1.0).powf(*power)
            }
            _ => 0.0,
        };
        let cont_growth = match &p.tail {
            Tail::Crash { cont_dec, .. } => cont_dec * crash_g,
            _ => 0.0,
        };
        let nan_stage = match &p.tail {
            Tail::Nan { first_nan, .. } if i >= *first_nan => Some(i - first_nan),
            _ => None,
        };

        // Residuals.
        let shared = self.shared.next(&mut self.rng);
        let mut residuals = Vec::with_capacity(6);
        let mut logs = [0.0f64; 6];
        let mut deltas = [0.0f64; 6];
        let mut on_floor = [false; 6];
        let mut frozen_eq = None;
        let ramp_noise = (x / 3.0).min(1.0);
        for (e, eq) in c.eqs.iter().enumerate() {
            let own = self.own[e].next(&mut self.rng);
            let rho = c.shared_rho;
            let damp = p.cycle.as_ref().map_or(1.0, |cy| 1.0 - cy.noise_damp * env.min(1.0));
            let noise =
                eq.sigma * (rho * shared + (1.0 - rho * rho).sqrt() * own) * ramp_noise * damp;
            let cyc = match &p.cycle {
                Some(cy) => cy.res_amp * cy.eq_amp[e] * env * cy.wave(self.theta - cy.eq_lag[e]),
                None => 0.0,
            };
            let mut l = eq.offset * (1.0 - (-x / c.tau_offset).exp())
                + eq.scale * base
                + noise
                + cyc
                + wander
                + restart_jump;
            let fnoise = self.floor_noise[e].next(&mut self.rng);
            // A noisy floor grows its noise in with the others (the first value stays 1).
            let floor_sd = if p.zero_sweeps { c.floor_sd * ramp_noise } else { c.floor_sd };
            let floor = p.floor.unwrap_or(c.floor_level) + eq.floor_spread + floor_sd * fnoise;
            on_floor[e] = p.floor.is_some() && l < floor - 0.3;
            l = log_add(l, floor);
            if let Some(cap) = p.res_cap
                && p.cycle.as_ref().is_some_and(|cy| x >= cy.onset)
            {
                // Normalised residuals saturate once the instability grows: a smooth minimum
                // with the cap (before it the first value stays exactly 1).
                l = -log_add(-l, -cap);
            }
            let mut v = clamp_mag(10f64.powf(l.min(300.0)));
            if let Some(fz) = &p.freeze
                && e == fz.eq
                && it >= fz.onset
            {
                v = *self.frozen.get_or_insert(round_sig(v, 5));
                frozen_eq = Some(e);
                l = v.log10();
            }
            if let Tail::Crash { tiny, .. } = &p.tail
                && let Some((_, _, lv)) = tiny.iter().find(|(te, from, _)| *te == e && i >= *from)
            {
                v = 10f64.powf(*lv);
                l = *lv;
            }
            if let Some(stage) = nan_stage {
                let nan_first = match &p.tail {
                    Tail::Nan { nan_first, .. } => *nan_first,
                    _ => 4,
                };
                if e == nan_first || (stage >= 1 && (e == 3 || e == 2)) || stage >= 2 {
                    v = signed_nan(&mut self.rng);
                }
            }
            if v.is_finite() {
                self.runmin[e] = self.runmin[e].min(l);
                deltas[e] = (l - self.runmin[e]).max(0.0);
            } else {
                deltas[e] = f64::INFINITY;
            }
            let weight = if e == 3 { 1.0 } else { 0.35 };
            deltas[e] = deltas[e].max(cont_growth * weight);
            logs[e] = l;
            residuals.push((EQUATIONS[e], round_sig(v, 5)));
        }
        let below_target =
            p.target.is_some_and(|t| residuals.iter().all(|(_, v)| v.is_finite() && v.log10() < t));

        // Monitors.
        let slow = p.slow[i];
        let div_decades = match &p.tail {
            Tail::Nan { onset, .. } | Tail::Overflow { onset, .. } => {
                (base - p.base[*onset]).max(0.0)
            }
            _ => 0.0,
        };
        let mut mons = [0.0f64; 3];
        let mut mons_nf = [0.0f64; 3];
        for (m, mp) in c.mons.iter().enumerate() {
            let e_slow = 10f64.powf(mp.beta * slow);
            let mut rel = mp.delta * e_slow
                + mp.osc_amp
                    * (-x / mp.osc_tau).exp()
                    * (TAU * x / mp.osc_period + mp.osc_phase).sin();
            // The noise-free part (no cycle phase, wander or noise: only the deterministic
            // terms of the converging scenarios), added term by term beside `rel`.
            let mut rel_nf = rel;
            if let Some(rd) = &p.ringdown
                && rd.monitor == m
            {
                let ring = rd.amp * (-x / rd.tau).exp() * (TAU * x / rd.period + rd.phase).sin();
                rel += ring;
                rel_nf += ring;
            }
            if let Some(cy) = &p.cycle {
                rel += cy.mon_amp[m] * env * cy.wave(self.theta - cy.mon_lag[m]);
            }
            if let Some(w) = &p.wander {
                let ramp = w.ramp(x);
                rel += ramp * self.wander_mon[m].next(&mut self.rng);
            }
            if let Some(d) = &p.drift {
                rel += d.delta[m] * (-x / d.tau[m]).exp();
                rel_nf += d.delta[m] * (-x / d.tau[m]).exp();
            }
            if let (Some(r), Some(s)) = (&p.restart, after_restart) {
                rel += r.mon_jump * (-s / (3.0 * r.tau)).exp();
                rel_nf += r.mon_jump * (-s / (3.0 * r.tau)).exp();
            }
            match &p.tail {
                Tail::Nan { mon_eps, .. } | Tail::Overflow { mon_eps, .. } => {
                    rel += mon_eps[m] * (10f64.powf(div_decades.min(300.0)) - 1.0);
                }
                Tail::Crash { mon_dec, mon_sign, .. } => {
                    rel += mon_sign[m] * (10f64.powf(mon_dec[m] * crash_g) - 1.0);
                }
                Tail::Silent { onset, tau, eps0, gain } => {
                    rel += gain[m] * eps0 * ((x - onset) / tau).exp();
                }
                Tail::None => {}
            }
            let noise = self.mon_noise[m].next(&mut self.rng);
            let mut v = if p.zero_mean == Some(m) {
                // Zero mean: the start-up asymmetry decays to nothing; the noise scales with
                // the start-up magnitude.
                mons_nf[m] = mp.fin * rel_nf;
                clamp_mag(mp.fin * rel + (mp.fin * mp.delta).abs() * noise)
            } else {
                mons_nf[m] = mp.fin * (1.0 + rel_nf);
                clamp_mag(mp.fin * (1.0 + rel) + mp.fin.abs() * noise)
            };
            if nan_stage.is_some_and(|s| s >= 2) {
                v = signed_nan(&mut self.rng);
            }
            mons[m] = round_sig(v, 5);
        }
        self.mon_nf.push(mons_nf);

        // Continuity follows the pressure residual.
        let cn = self.cont_noise.next(&mut self.rng);
        let mut continuity = clamp_mag(
            c.cont_c0 * 10f64.powf((c.cont_gamma * logs[3] + cn + cont_growth).min(300.0)),
        );
        if nan_stage.is_some_and(|s| s >= 1) {
            continuity =
                if self.rng.chance(0.3) { f64::INFINITY } else { signed_nan(&mut self.rng) };
        }
        let continuity = round_sig(continuity, 5);

        // Sweeps and sweep-limit warnings.
        let e_lead = 10f64.powf(slow).min(1.0);
        let mut sweeps = Vec::with_capacity(6);
        let mut warnings = Vec::new();
        for (e, eq) in c.eqs.iter().enumerate() {
            let jitter = (0.12 * self.rng.normal()).exp();
            let growth = (0.8 * deltas[e].min(20.0)).exp();
            let mut s = (eq.sweeps * (0.75 + 0.25 * e_lead) * growth * jitter).round();
            s = s.clamp(1.0, SWEEP_LIMIT as f64);
            if !residuals[e].1.is_finite() {
                s = SWEEP_LIMIT as f64;
            }
            if on_floor[e] && p.zero_sweeps {
                s = 0.0;
            } else if on_floor[e] {
                s = if self.rng.chance(0.85) { 0.0 } else { 1.0 };
            }
            if frozen_eq == Some(e) {
                s = 0.0;
            }
            let s = s as u32;
            if s >= SWEEP_LIMIT {
                warnings.push(format!(
                    "linear solver for {} reached sweep limit ({SWEEP_LIMIT})",
                    EQUATIONS[e]
                ));
            }
            sweeps.push(s);
        }

        // Clipping notices: many in the first iterations, rare later, many again when the
        // solution blows up.
        let mut notices = Vec::new();
        if nan_stage.is_none() {
            let local = self.process_steps as f64 - 1.0;
            let blow = if deltas[c.lead].is_finite() { deltas[c.lead] } else { 0.0 };
            let blow = blow.max(div_decades).max(cont_growth).min(6.0);
            for (name, n0) in [("k", c.clip_k0), ("omega", c.clip_w0)] {
                let startup = n0 * (-local / c.clip_tau).exp();
                let divergence =
                    if blow > 2.0 { n0 * 0.05 * (10f64.powf(blow) - 1.0) } else { 0.0 };
                let mut count = self.rng.poisson(startup + divergence);
                if self.rng.chance(c.clip_late) {
                    count += 1 + self.rng.poisson(2.0);
                }
                let count = count.min(c.header.cells);
                if count > 0 {
                    notices.push(format!("{name} bounded below at {count} cells"));
                }
            }
        }

        // CFL (steady) or time (unsteady).
        let local = self.process_steps as f64 - 1.0;
        let mut cfl = c.cfl0 + (c.cfl_max - c.cfl0) * (local / c.cfl_ramp).min(1.0);
        let lead_delta = deltas[c.lead].min(10.0);
        if c.auto_cfl && lead_delta > 0.5 {
            cfl /= 1.0 + 0.5 * lead_delta * lead_delta;
        }
        let (time, dt) = match p.dt {
            Some(dt) => (Some(round_sig(it as f64 * dt, 5)), Some(dt)),
            None => (None, None),
        };

        let sweep_sum: f64 = sweeps.iter().map(|&s| s as f64).sum();
        let base_sum: f64 = c.eqs.iter().map(|e| e.sweeps).sum();
        let wall =
            c.wall0 * (1.0 + 0.04 * self.rng.normal()) * (sweep_sum / base_sum).max(0.2).sqrt();
        let wall = (wall.max(0.01) * 100.0).round() / 100.0;

        let step = Step {
            iteration: it,
            time,
            dt,
            residuals,
            sweeps,
            continuity,
            drag: mons[0],
            lift: mons[1],
            dp: mons[2],
            side: p.side.map(|sd| round_sig(sd * self.rng.normal(), 5)),
            cfl: round_sig(cfl, 3),
            notices,
            warnings,
            wall,
            restart_from,
        };
        (step, below_target)
    }
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn round_sig_keeps_printed_digits() {
        assert_eq!(round_sig(0.000123456, 5), 0.00012346);
        assert_eq!(round_sig(153.2049, 5), 153.20);
        assert_eq!(round_sig(-2.110049e-2, 5), -2.1100e-2);
        assert_eq!(round_sig(4.9999, 3), 5.0);
        assert!(round_sig(f64::NAN, 5).is_nan());
        assert_eq!(round_sig(2e150, 5), 2e150);
    }

    #[test]
    fn log_add_is_log_of_sum() {
        assert!((log_add(-3.0, -3.0) - (-3.0 + 2f64.log10())).abs() < 1e-12);
        assert!((log_add(-8.0, 0.0)).abs() < 1e-7);
        assert!(log_add(300.0, 299.0).is_finite());
    }
}
