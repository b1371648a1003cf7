//! Writers for the invented solver "tarn": its residual log and its `forces.csv`, exactly as
//! `TARN_FORMAT.md` specifies.
//!
//! The log is rendered piece by piece (banner, one step, end) so that the live demo can
//! stream the very same bytes that [`write_tarn_log`] writes in one go.

use std::fmt::Write as _;
use std::io::{self, Write};

use super::{EQUATIONS, End, SynthRun};

/// Width of the `---` and `===` rules of the banner and the footer.
pub const SEPARATOR_WIDTH: usize = 62;
/// Columns of `forces.csv` (a run with an out-of-plane force adds a fifth, `side`).
pub const CSV_HEADER_FIELDS: [&str; 4] = ["step", "drag", "lift", "dp"];

/// Format a number as tarn prints it: `1.2345e-03` with `digits` decimals and a two-digit
/// exponent; `nan`/`-nan` by the sign bit, `inf`/`-inf`, and asterisks (as wide as a
/// positive number) when the magnitude needs a three-digit exponent, as a Fortran edit
/// descriptor with a two-digit exponent field does.
pub fn fmt_sci(v: f64, digits: usize) -> String {
    if v.is_nan() {
        return if v.is_sign_negative() { "-nan".into() } else { "nan".into() };
    }
    if v.is_infinite() {
        return if v < 0.0 { "-inf".into() } else { "inf".into() };
    }
    let s = format!("{v:.digits$e}");
    let (mant, exp) = s.split_once('e').unwrap_or((s.as_str(), "0"));
    let exp: i32 = exp.parse().unwrap_or(0);
    if exp.abs() >= 100 {
        return "*".repeat(digits + 6);
    }
    let sign = if exp < 0 { '-' } else { '+' };
    format!("{mant}e{sign}{:02}", exp.abs())
}

/// The banner: solver line, case facts and the `---` rule (6 lines).
pub fn render_banner(run: &SynthRun) -> String {
    let h = &run.header;
    let r = h.relaxation;
    let mut s = String::new();
    let _ = writeln!(s, "tarn {} - incompressible RANS solver ({})", h.version, h.model);
    let _ = writeln!(s, "case       : {}", run.case);
    let _ = writeln!(s, "mesh       : {} cells, {} zones", h.cells, h.zones);
    let _ = writeln!(s, "started    : {}", h.started);
    if h.model == "laminar" {
        let _ = writeln!(s, "relaxation : U {}  p {}", r[0], r[1]);
    } else {
        let _ = writeln!(s, "relaxation : U {}  p {}  k {}  omega {}", r[0], r[1], r[2], r[3]);
    }
    let _ = writeln!(s, "{}", "-".repeat(SEPARATOR_WIDTH));
    s
}

/// One step record (preceded by the restart line when there is one). The last step of a
/// crashed run stops after the equation lines printed before the crash.
pub fn render_step(run: &SynthRun, index: usize) -> String {
    let st = &run.steps[index];
    let mut s = String::new();
    if let Some(from) = st.restart_from {
        let _ = writeln!(s, "restarting from checkpoint at step {from}");
    }
    match (st.time, st.dt) {
        (Some(t), Some(dt)) => {
            let _ = writeln!(
                s,
                "[step {:>6}]  time {}  dt {}",
                st.iteration,
                fmt_sci(t, 4),
                fmt_sci(dt, 4)
            );
        }
        _ => {
            let _ = writeln!(s, "[step {:>6}]  cfl {}", st.iteration, fmt_sci(st.cfl, 2));
        }
    }
    let partial = match &run.crash {
        Some(c) if index + 1 == run.steps.len() => Some(c.printed_equations),
        _ => None,
    };
    let equations = partial.unwrap_or(EQUATIONS.len()).min(st.residuals.len());
    for e in 0..equations {
        let (name, v) = st.residuals[e];
        let sweeps = st.sweeps.get(e).copied().unwrap_or(0);
        let _ = writeln!(s, "  {name:<9}res {}   lin {sweeps:>3} sweeps", fmt_sci(v, 4));
    }
    if partial.is_some() {
        return s;
    }
    let _ = writeln!(s, "  continuity  imbalance {}", fmt_sci(st.continuity, 4));
    let _ = writeln!(
        s,
        "  forces   drag {}  lift {}  dp {}",
        fmt_sci(st.drag, 4),
        fmt_sci(st.lift, 4),
        fmt_sci(st.dp, 4)
    );
    for w in &st.warnings {
        let _ = writeln!(s, "  warning: {w}");
    }
    for n in &st.notices {
        let _ = writeln!(s, "  notice: {n}");
    }
    let _ = writeln!(s, "  wall {:.2} s", st.wall);
    s
}

/// What follows the last step: the end lines, the crash signature, or nothing.
pub fn render_end(run: &SynthRun) -> String {
    let mut s = String::new();
    match run.end {
        End::Finished => {
            if run.solver_converged {
                let _ = writeln!(s, "tarn: residual targets reached");
            }
            let _ = writeln!(s, "{}", "=".repeat(SEPARATOR_WIDTH));
            let _ = writeln!(s, "{}", finished_line(run));
        }
        End::Crash => {
            if let Some(c) = &run.crash {
                let _ = writeln!(s, "*** {}", c.message);
                for t in &c.trace {
                    let _ = writeln!(s, "    {t}");
                }
            }
        }
        End::Running => {}
    }
    s
}

/// `tarn: finished after N steps (wall T s)`.
pub(super) fn finished_line(run: &SynthRun) -> String {
    format!("tarn: finished after {} steps (wall {:.1} s)", run.last_iteration(), run.wall_total())
}

/// Write the complete tarn log of `run`.
pub fn write_tarn_log(run: &SynthRun, w: &mut impl Write) -> io::Result<()> {
    w.write_all(render_banner(run).as_bytes())?;
    for i in 0..run.steps.len() {
        w.write_all(render_step(run, i).as_bytes())?;
    }
    w.write_all(render_end(run).as_bytes())
}

/// The header lines of `forces.csv`.
pub fn csv_header(run: &SynthRun) -> String {
    let side = if has_side(run) { ",side" } else { "" };
    format!("# tarn force monitor, case {}\n{}{side}\n", run.case, CSV_HEADER_FIELDS.join(","))
}

/// The run writes the out-of-plane force column.
fn has_side(run: &SynthRun) -> bool {
    run.steps.first().is_some_and(|s| s.side.is_some())
}

/// The `forces.csv` row of step `index`, or `None` for a crashed run's cut-short last step
/// (its forces line was never printed).
pub fn csv_row(run: &SynthRun, index: usize) -> Option<String> {
    if run.crash.is_some() && index + 1 == run.steps.len() {
        return None;
    }
    let st = &run.steps[index];
    let side = match (has_side(run), st.side) {
        (true, Some(v)) => format!(",{}", fmt_sci(v, 4)),
        (true, None) => ",nan".to_string(),
        (false, _) => String::new(),
    };
    Some(format!(
        "{},{},{},{}{side}\n",
        st.iteration,
        fmt_sci(st.drag, 4),
        fmt_sci(st.lift, 4),
        fmt_sci(st.dp, 4)
    ))
}

/// Write `forces.csv`: a comment line, the header, one row per printed forces line.
pub fn write_forces_csv(run: &SynthRun, w: &mut impl Write) -> io::Result<()> {
    w.write_all(csv_header(run).as_bytes())?;
    for i in 0..run.steps.len() {
        if let Some(row) = csv_row(run, i) {
            w.write_all(row.as_bytes())?;
        }
    }
    Ok(())
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn numbers_print_like_the_spec() {
        // Shapes from TARN_FORMAT.md.
        assert_eq!(fmt_sci(1.0, 4), "1.0000e+00");
        assert_eq!(fmt_sci(0.042110, 4), "4.2110e-02");
        assert_eq!(fmt_sci(153.2, 4), "1.5320e+02");
        assert_eq!(fmt_sci(5.0, 2), "5.00e+00");
        assert_eq!(fmt_sci(-0.0211, 4), "-2.1100e-02");
        assert_eq!(fmt_sci(9.99996e-4, 4), "1.0000e-03");
        assert_eq!(fmt_sci(1e-99, 4), "1.0000e-99");
        assert_eq!(fmt_sci(3.2e104, 4), "**********");
        assert_eq!(fmt_sci(-3.2e104, 4), "**********");
        assert_eq!(fmt_sci(f64::NAN, 4), "nan");
        assert_eq!(fmt_sci(-f64::NAN, 4), "-nan");
        assert_eq!(fmt_sci(f64::INFINITY, 4), "inf");
        assert_eq!(fmt_sci(0.0, 4), "0.0000e+00");
    }
}
