//! Labelled synthetic solver histories in our invented scenario (solver "tarn").
//!
//! [`generate`] builds a deterministic history for a [`Scenario`] and a seed: residuals,
//! sweep counts, continuity, force monitors, CFL, clipping notices and the way the run
//! ends. The histories follow the facts of real solver runs (normalised residuals starting at 1,
//! AR(1)-correlated noise, start-up transients, linear-solver floors, sweep limits when
//! diverging) and vary by seed in length, rates, noise, onset and period, so that an
//! accuracy benchmark over many seeds means something. Every number here is invented.
//!
//! The same run can be written as a tarn log ([`write_tarn_log`], exactly as
//! `TARN_FORMAT.md` specifies), as the `forces.csv` monitor file ([`write_forces_csv`]), or
//! applied directly to a run store ([`to_store`]) with the series names the tarn parser
//! produces, so the judge can be measured without parsing. This module never reads files
//! and owns no thread; `demo` streams the same text live.

mod model;
pub mod rng;
mod samples;
mod scenario;
mod store;
mod tarn;

pub use samples::{settle_toml, write_history_csv, write_history_dat, write_samples};
pub use scenario::Scenario;
pub use store::{
    delay_prefixes, live_prefixes, prefix_input, sparse_input, to_store, to_store_prefix,
};
pub use tarn::{
    CSV_HEADER_FIELDS, SEPARATOR_WIDTH, csv_header, csv_row, fmt_sci, render_banner, render_end,
    render_step, write_forces_csv, write_tarn_log,
};

use crate::judge::Verdict;

/// Equation names in the order tarn prints them.
pub const EQUATIONS: [&str; 6] = ["Ux", "Uy", "Uz", "p", "k", "omega"];
/// The linear-solver sweep limit of tarn.
pub const SWEEP_LIMIT: u32 = 200;

/// How the log ends.
#[derive(Debug, Clone, Copy, PartialEq, Eq)]
pub enum End {
    /// The solver printed its end-of-run line.
    Finished,
    /// The solver crashed: the last record is cut short and a crash trace follows.
    Crash,
    /// The log simply stops (a live run, or a job killed without a word).
    Running,
}

/// The banner facts of one run.
#[derive(Debug, Clone, PartialEq)]
pub struct Header {
    pub version: &'static str,
    pub cells: u64,
    pub zones: u32,
    /// `YYYY-MM-DD HH:MM:SS`.
    pub started: String,
    /// Under-relaxation factors of U, p, k and omega.
    pub relaxation: [f64; 4],
    /// The flow model printed in the banner: `k-omega SST`, or `laminar` (no k and omega
    /// equations).
    pub model: &'static str,
}

/// The crash signature that ends an [`End::Crash`] log.
#[derive(Debug, Clone, PartialEq)]
pub struct Crash {
    /// Equation lines of the last step printed before the crash (0–6); the rest of that
    /// record (continuity, forces, wall) is never printed.
    pub printed_equations: usize,
    /// The fatal line without its `*** ` prefix, e.g.
    /// `tarn fatal: floating point exception (signal 8)`.
    pub message: String,
    /// Stack-trace lines without indentation, e.g. `at tarn::solve_pressure (pressure.f90:212)`.
    pub trace: Vec<String>,
}

/// One iteration (steady) or time step (unsteady) of a synthetic run.
#[derive(Debug, Clone, PartialEq)]
pub struct Step {
    pub iteration: i64,
    /// Physical time, for time-accurate runs.
    pub time: Option<f64>,
    /// Time-step size, for time-accurate runs (printed on the step line instead of the CFL).
    pub dt: Option<f64>,
    /// Normalised residual of each equation, in [`EQUATIONS`] order. NaN prints as
    /// `nan`/`-nan` by sign, infinities as `inf`, finite magnitudes of 1e100 or more as
    /// asterisks (the printed field overflows).
    pub residuals: Vec<(&'static str, f64)>,
    /// Linear-solver sweeps of each equation (0 when the solver skipped it).
    pub sweeps: Vec<u32>,
    pub continuity: f64,
    pub drag: f64,
    pub lift: f64,
    pub dp: f64,
    /// Out-of-plane force of a 2-D case, written only to `forces.csv` (column `side`) when
    /// the scenario has one.
    pub side: Option<f64>,
    /// Courant number of a steady run (not printed for time-accurate runs).
    pub cfl: f64,
    /// `notice:` lines (bounding/clipping), without the prefix.
    pub notices: Vec<String>,
    /// `warning:` lines (sweep limit), without the prefix.
    pub warnings: Vec<String>,
    /// Wall-clock seconds of the step.
    pub wall: f64,
    /// A `restarting from checkpoint at step N` line printed before this step.
    pub restart_from: Option<i64>,
}

/// A complete synthetic run with its label.
#[derive(Debug, Clone, PartialEq)]
pub struct SynthRun {
    pub scenario: Scenario,
    pub seed: u64,
    pub case: String,
    pub header: Header,
    pub steps: Vec<Step>,
    /// Iteration where the labelled behaviour begins (plateau, cycle, growth, freeze, the
    /// residual criteria first met under a drifting monitor), for detection delay. `None`
    /// for healthy scenarios.
    pub onset: Option<i64>,
    pub end: End,
    /// The solver prints `tarn: residual targets reached` before its end line.
    pub solver_converged: bool,
    /// Set exactly when `end` is [`End::Crash`]; the last step is then partial.
    pub crash: Option<Crash>,
    /// What is true of the run by construction (for the accuracy benchmark).
    pub truth: Truth,
}

/// True facts of a synthetic run, known from how it was built, never from a detector.
///
/// Step indices count the steps of [`SynthRun::steps`] (0-based), so that a restart that
/// repeats iteration numbers stays unambiguous; the iteration is `steps[k].iteration`.
#[derive(Debug, Clone, Default, PartialEq)]
pub struct Truth {
    /// First step from which every default criterion truly holds to the end of the run
    /// (runs labelled `converged` only): every residual's printed value at least 3 decades
    /// below its running peak (a fact of the printed data), and every judged monitor of the
    /// noise-free model within 0.1 % (the default drift limit) of its final noise-free value,
    /// relative to the reference the judge uses (the mean, or a tenth of the monitor's
    /// largest magnitude when the mean is near zero). See [`Truth::residuals_met`].
    pub settled: Option<usize>,
    /// First step from which every residual's printed value stays at least 3 decades below
    /// its running peak; for a run that stops before (`still-converging`), found on the
    /// continuation of the same run (same seed, same noise) beyond its last step, so its
    /// value can exceed the run's length. `None` when the residuals never get there.
    pub residuals_met: Option<usize>,
}

impl SynthRun {
    /// The verdict of the complete history.
    pub fn expected(&self) -> Verdict {
        self.scenario.expected()
    }

    /// Time-accurate run (step lines carry time and dt).
    pub fn unsteady(&self) -> bool {
        self.steps.first().is_some_and(|s| s.time.is_some())
    }

    /// Steps whose record is printed in full (all but a crash's cut-short last step).
    pub fn complete_steps(&self) -> usize {
        match self.crash {
            Some(_) => self.steps.len().saturating_sub(1),
            None => self.steps.len(),
        }
    }

    /// Iteration number of the last step.
    pub fn last_iteration(&self) -> i64 {
        self.steps.last().map_or(0, |s| s.iteration)
    }

    /// Sum of the wall time of the steps after the last restart (one solver process).
    pub fn wall_total(&self) -> f64 {
        let from = self.steps.iter().rposition(|s| s.restart_from.is_some()).unwrap_or(0);
        self.steps[from..].iter().map(|s| s.wall).sum()
    }
}

/// Options of [`generate_with`].
#[derive(Debug, Clone, Default, PartialEq)]
pub struct Options {
    /// Approximate run length in iterations (at least 200); `None` draws 1500–4000 from the
    /// seed. The scenario's transients scale with it, so a short run tells the same story.
    pub iterations: Option<usize>,
    /// Case name; `None` draws one of the invented cases from the seed.
    pub case: Option<String>,
}

/// The synthetic run of `scenario` for `seed`; the same pair always gives the same run.
pub fn generate(scenario: Scenario, seed: u64) -> SynthRun {
    generate_with(scenario, seed, &Options::default())
}

/// [`generate`] with options (a fixed length for samples and quick demos).
pub fn generate_with(scenario: Scenario, seed: u64, options: &Options) -> SynthRun {
    model::generate(scenario, seed, options)
}
