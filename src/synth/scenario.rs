//! The labelled behaviours a synthetic run can show, with their names and expected verdicts.
//!
//! The label is the ground truth of the accuracy benchmark: what a practitioner looking at
//! the whole history would call the run. It is defined by how the history was built, never
//! by what any detector says about it.

use crate::judge::Verdict;

/// One labelled behaviour of a synthetic run (how real runs behave).
#[derive(Debug, Clone, Copy, PartialEq, Eq, Hash, PartialOrd, Ord)]
pub enum Scenario {
    /// Clean geometric convergence to the solver's targets; monitors settle.
    Converging,
    /// Residuals level off on a plateau above target and wander there.
    Stall,
    /// Residuals enter a periodic limit cycle (period 3–60 iterations) above target.
    ResidualLimitCycle,
    /// A physically unsteady flow solved as steady: monitors oscillate, residuals stuck.
    MonitorOscillation,
    /// Residuals grow after an onset until values turn `nan`.
    DivergeNan,
    /// Residuals and monitors grow until the printed fields overflow into asterisks.
    DivergeOverflow,
    /// Residual targets met (heavy under-relaxation) while a monitor still drifts.
    FalseConvergence,
    /// A live run still falling at a healthy rate, targets not reached yet.
    StillConverging,
    /// Residuals rise for the first ~100 iterations, then converge.
    StartupRise,
    /// The job is restarted mid-run from a checkpoint (iteration may go back), then converges.
    Restart,
    /// One residual repeats exactly the same value from some iteration on.
    FrozenResidual,
    /// Monitors and continuity explode and the log ends in a crash trace, never printing nan.
    CrashNoNan,
    /// Residuals stay bounded and noisy while a monitor grows exponentially.
    SilentDivergence,
    /// Residuals hover on a pseudo-plateau early on, then fall again to convergence.
    PseudoPlateauThenConverge,
    /// Converged onto a flat, noisy floor set by the linear-solver tolerance.
    FloorConverged,
    /// Residuals fall for some tens of iterations, then a period-3 oscillation grows cycle
    /// by cycle until monitors and continuity explode and the solver crashes, all within
    /// about 150 iterations, without ever printing `nan`.
    EarlyBlowUp,
    /// A short laminar run (300–600 iterations) that converges well before its iteration
    /// limit.
    ShortLaminar,
    /// A converging run whose lift has zero mean (a symmetric body) and whose monitor file
    /// carries the out-of-plane force of a 2-D case at round-off level.
    NearZeroMonitors,
    /// A monitor rings down (a decaying oscillation) while the run converges.
    RingDown,
    /// Residuals stuck near their start (about 0.9) in broadband noise with a weak periodic
    /// component.
    HighResidualStall,
    /// Residual targets met while a monitor swings in a long-period cycle (about 240
    /// iterations) over a run of about 4000.
    LongPeriodCycle,
    /// A short run that reaches a noisy linear-solver floor early; every linear solver then
    /// reports zero sweeps.
    FloorZeroSweeps,
    /// A converging run whose log shows one to three one-iteration glitches: failed linear
    /// solves that print a residual near or above the start's level, then back on the trend.
    ResidualGlitches,
}

const ALL: [Scenario; 23] = [
    Scenario::Converging,
    Scenario::Stall,
    Scenario::ResidualLimitCycle,
    Scenario::MonitorOscillation,
    Scenario::DivergeNan,
    Scenario::DivergeOverflow,
    Scenario::FalseConvergence,
    Scenario::StillConverging,
    Scenario::StartupRise,
    Scenario::Restart,
    Scenario::FrozenResidual,
    Scenario::CrashNoNan,
    Scenario::SilentDivergence,
    Scenario::PseudoPlateauThenConverge,
    Scenario::FloorConverged,
    Scenario::EarlyBlowUp,
    Scenario::ShortLaminar,
    Scenario::NearZeroMonitors,
    Scenario::RingDown,
    Scenario::HighResidualStall,
    Scenario::LongPeriodCycle,
    Scenario::FloorZeroSweeps,
    Scenario::ResidualGlitches,
];

impl Scenario {
    /// Every scenario, in a fixed order.
    pub fn all() -> &'static [Scenario] {
        &ALL
    }

    /// Kebab-case name used on the command line and in benchmark tables.
    pub fn name(&self) -> &'static str {
        match self {
            Scenario::Converging => "converging",
            Scenario::Stall => "stall",
            Scenario::ResidualLimitCycle => "residual-limit-cycle",
            Scenario::MonitorOscillation => "monitor-oscillation",
            Scenario::DivergeNan => "diverge-nan",
            Scenario::DivergeOverflow => "diverge-overflow",
            Scenario::FalseConvergence => "false-convergence",
            Scenario::StillConverging => "still-converging",
            Scenario::StartupRise => "startup-rise",
            Scenario::Restart => "restart",
            Scenario::FrozenResidual => "frozen-residual",
            Scenario::CrashNoNan => "crash-no-nan",
            Scenario::SilentDivergence => "silent-divergence",
            Scenario::PseudoPlateauThenConverge => "pseudo-plateau-then-converge",
            Scenario::FloorConverged => "floor-converged",
            Scenario::EarlyBlowUp => "early-blow-up",
            Scenario::ShortLaminar => "short-laminar",
            Scenario::NearZeroMonitors => "near-zero-monitors",
            Scenario::RingDown => "ring-down",
            Scenario::HighResidualStall => "high-residual-stall",
            Scenario::LongPeriodCycle => "long-period-cycle",
            Scenario::FloorZeroSweeps => "floor-zero-sweeps",
            Scenario::ResidualGlitches => "residual-glitches",
        }
    }

    /// The scenario with this kebab-case name.
    pub fn parse(name: &str) -> Option<Scenario> {
        ALL.into_iter().find(|s| s.name() == name)
    }

    /// The verdict a practitioner would give the complete history.
    pub fn expected(&self) -> Verdict {
        match self {
            Scenario::Converging
            | Scenario::StartupRise
            | Scenario::Restart
            | Scenario::PseudoPlateauThenConverge
            | Scenario::FloorConverged
            | Scenario::ShortLaminar
            | Scenario::NearZeroMonitors
            | Scenario::RingDown
            | Scenario::FloorZeroSweeps
            | Scenario::ResidualGlitches => Verdict::Converged,
            Scenario::StillConverging => Verdict::Converging,
            Scenario::Stall | Scenario::HighResidualStall => Verdict::Stalled,
            Scenario::ResidualLimitCycle
            | Scenario::MonitorOscillation
            | Scenario::LongPeriodCycle => Verdict::Oscillating,
            Scenario::DivergeNan
            | Scenario::DivergeOverflow
            | Scenario::CrashNoNan
            | Scenario::SilentDivergence
            | Scenario::EarlyBlowUp => Verdict::Diverging,
            Scenario::FalseConvergence | Scenario::FrozenResidual => Verdict::Suspect,
        }
    }

    /// True for runs with nothing wrong in them (expected `converged` or `converging`):
    /// any alarm verdict on them is a false alarm.
    pub fn healthy(&self) -> bool {
        matches!(self.expected(), Verdict::Converged | Verdict::Converging)
    }

    /// One sentence saying what the history looks like.
    pub fn description(&self) -> &'static str {
        match self {
            Scenario::Converging => {
                "residuals fall geometrically to the solver's targets; monitors settle after a \
                 damped start-up transient; the solver prints its targets-reached mark"
            }
            Scenario::Stall => {
                "residuals fall one to two and a half decades, then level off on a plateau above \
                 target and wander there until the iteration limit"
            }
            Scenario::ResidualLimitCycle => {
                "after an initial drop the residuals lock into a periodic limit cycle (period 3 \
                 to 60 iterations, non-sinusoidal, slightly jittered); monitors ripple with it"
            }
            Scenario::MonitorOscillation => {
                "a physically unsteady flow solved as steady (or a time-accurate run with \
                 shedding): monitors oscillate with a period of 12 to 150 steps while the \
                 residuals stay stuck one to two and a half decades down"
            }
            Scenario::DivergeNan => {
                "converges for a while, then residuals, continuity and sweep counts grow with \
                 acceleration until values print as nan; the log stops or crashes"
            }
            Scenario::DivergeOverflow => {
                "converges for a while, then grows until printed fields overflow into \
                 asterisks; the job is killed while printing them"
            }
            Scenario::FalseConvergence => {
                "heavy under-relaxation: residuals drop past the targets and the solver stops, \
                 while drag still drifts by a few tenths of a percent per 500 iterations"
            }
            Scenario::StillConverging => {
                "a live run falling at a healthy rate, one and a half to two and a half decades \
                 down, targets not reached yet; no end-of-run mark"
            }
            Scenario::StartupRise => {
                "residuals rise by one to two decades during the first ~100 iterations while \
                 the flow develops, then converge to the targets"
            }
            Scenario::Restart => {
                "the job dies mid-run and is restarted from its last checkpoint (the step \
                 number may go back); a short restart transient, then convergence"
            }
            Scenario::FrozenResidual => {
                "one equation stops being solved: its residual repeats exactly the same printed \
                 value with zero sweeps while the others keep converging"
            }
            Scenario::CrashNoNan => {
                "continuity and monitors explode by orders of magnitude, residuals saturate near \
                 one, linear solvers hit their sweep limit, and the log ends mid-record in a \
                 crash trace without ever printing nan"
            }
            Scenario::SilentDivergence => {
                "residuals stay bounded and merely noisy while one monitor grows exponentially \
                 by one to three orders of magnitude"
            }
            Scenario::PseudoPlateauThenConverge => {
                "an early pseudo-plateau of 150 to 600 iterations while a recirculation zone \
                 forms, then the residuals fall again to the targets"
            }
            Scenario::FloorConverged => {
                "converges onto a flat noisy floor set by the linear-solver tolerance (zero \
                 sweeps reported) four to six decades down, and runs to the iteration limit"
            }
            Scenario::EarlyBlowUp => {
                "residuals fall for about 60 iterations, then a period-3 oscillation grows cycle \
                 by cycle from about iteration 70; an excursion, an explosion of monitors (to \
                 1e30 and beyond) and continuity, linear solvers pinned at their sweep limit, \
                 and a floating-point crash near iteration 140, never printing nan"
            }
            Scenario::ShortLaminar => {
                "a laminar quick look of 300 to 600 iterations: residuals fall four to five \
                 decades and the monitors settle in the first two thirds, then the run goes on \
                 to its iteration limit"
            }
            Scenario::NearZeroMonitors => {
                "converges to its targets; lift is zero on average (a symmetric body: only the \
                 start-up transient moves it) and the monitor file carries the out-of-plane \
                 force of a 2-D case, which is pure round-off (about 1e-21)"
            }
            Scenario::RingDown => {
                "converges to its targets while one monitor rings down: an oscillation of \
                 period 25 to 70 iterations whose amplitude shrinks from a few percent with a \
                 decay time of 150 to 450 iterations"
            }
            Scenario::HighResidualStall => {
                "the residuals barely move from their start (about 0.9 of it) and wander in \
                 broadband red noise with a weak periodic component until the iteration limit"
            }
            Scenario::LongPeriodCycle => {
                "residuals meet their targets while a monitor swings in a sustained cycle of \
                 period 200 to 300 iterations (a physically unsteady flow solved as steady) \
                 over a run of 3500 to 4500 iterations"
            }
            Scenario::FloorZeroSweeps => {
                "a run of 500 to 1200 iterations that reaches a noisy linear-solver floor in \
                 its first half; from then on every linear solver reports zero sweeps"
            }
            Scenario::ResidualGlitches => {
                "converges to its targets, but one to three iterations print a residual from a \
                 third of the start's level to thirty times it, with the linear solver at its \
                 sweep limit (a failed solve); the next iteration is back on the trend"
            }
        }
    }
}

impl std::fmt::Display for Scenario {
    fn fmt(&self, f: &mut std::fmt::Formatter<'_>) -> std::fmt::Result {
        f.write_str(self.name())
    }
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn names_round_trip_and_are_unique() {
        let mut names: Vec<&str> = Scenario::all().iter().map(|s| s.name()).collect();
        for s in Scenario::all() {
            assert_eq!(Scenario::parse(s.name()), Some(*s));
            assert!(s.name().chars().all(|c| c.is_ascii_lowercase() || c == '-'));
        }
        names.sort();
        names.dedup();
        assert_eq!(names.len(), 23);
        assert_eq!(Scenario::parse("Converging"), None);
    }

    #[test]
    fn healthy_scenarios_are_the_converging_ones() {
        let healthy: Vec<&str> =
            Scenario::all().iter().filter(|s| s.healthy()).map(|s| s.name()).collect();
        assert_eq!(
            healthy,
            [
                "converging",
                "still-converging",
                "startup-rise",
                "restart",
                "pseudo-plateau-then-converge",
                "floor-converged",
                "short-laminar",
                "near-zero-monitors",
                "ring-down",
                "floor-zero-sweeps",
                "residual-glitches"
            ]
        );
        assert_eq!(Scenario::CrashNoNan.expected(), Verdict::Diverging);
    }
}
