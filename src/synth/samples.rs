//! The committed demo files in `samples/`, regenerated from fixed scenarios and seeds.
//!
//! [`write_samples`] is the only producer of those files; a unit test checks that the
//! committed copies are byte for byte what it writes, so parser tests may compare their
//! counts with the generator (`generate_with` with the same arguments as here).

use std::fmt::Write as _;
use std::fs;
use std::io::{self, Write};
use std::path::Path;

use super::tarn::fmt_sci;
use super::{End, Options, Scenario, SynthRun, generate_with, write_forces_csv, write_tarn_log};

/// One tarn sample case: directory, scenario, seed, length.
struct TarnSample {
    case: &'static str,
    scenario: Scenario,
    seed: u64,
    iterations: usize,
    why: &'static str,
}

const TARN_SAMPLES: [TarnSample; 2] = [
    TarnSample {
        case: "duct-bend-07",
        scenario: Scenario::Converging,
        seed: 7,
        iterations: 1500,
        why: "a clean run that meets its residual targets, with clipping notices early on, \
              and runs long enough past them that its monitors have settled over the final \
              500 iterations (the default window)",
    },
    TarnSample {
        case: "mixer-22",
        scenario: Scenario::CrashNoNan,
        seed: 22,
        iterations: 520,
        why: "continuity and forces explode, the pressure solver hits its sweep limit, and the \
              log ends mid-record in a crash trace without any nan",
    },
];

/// The plain-table samples: file, scenario, seed, length, case.
const DAT_SAMPLE: (Scenario, u64, usize, &str) =
    (Scenario::PseudoPlateauThenConverge, 3, 1800, "wing-t3");
const CSV_SAMPLE: (Scenario, u64, usize, &str) =
    (Scenario::ResidualLimitCycle, 11, 1600, "diffuser-k4");

fn sample_run(scenario: Scenario, seed: u64, iterations: usize, case: &str) -> SynthRun {
    let options = Options { iterations: Some(iterations), case: Some(case.to_string()) };
    generate_with(scenario, seed, &options)
}

/// The minimal run config written beside a tarn case: its name and its two sources.
pub fn settle_toml(case: &str) -> String {
    format!(
        "# Run config of the sample case {case} (synthetic data, see ../README.md).\n\
         name = \"{case}\"\n\n[[source]]\npath = \"tarn.log\"\n\n[[source]]\npath = \"forces.csv\"\n"
    )
}

/// Residual of the velocity equations as one column: the largest of the three.
fn res_u(run: &SynthRun, i: usize) -> f64 {
    run.steps[i].residuals[..3].iter().map(|r| r.1).fold(f64::NAN, f64::max)
}

fn res(run: &SynthRun, i: usize, eq: &str) -> f64 {
    run.steps[i].residuals.iter().find(|r| r.0 == eq).map_or(f64::NAN, |r| r.1)
}

/// A whitespace table (`iter res_p res_U res_k Cd Cl`), Fortran-style upper-case exponents,
/// as many in-house solvers write their history file.
pub fn write_history_dat(run: &SynthRun, w: &mut impl Write) -> io::Result<()> {
    writeln!(
        w,
        "{:>6} {:>12} {:>12} {:>12} {:>12} {:>12}",
        "iter", "res_p", "res_U", "res_k", "Cd", "Cl"
    )?;
    for (i, st) in run.steps.iter().enumerate() {
        writeln!(
            w,
            "{:>6} {:>12} {:>12} {:>12} {:>12.6} {:>12.6}",
            st.iteration,
            fmt_sci(res(run, i, "p"), 4).to_uppercase(),
            fmt_sci(res_u(run, i), 4).to_uppercase(),
            fmt_sci(res(run, i, "k"), 4).to_uppercase(),
            st.drag,
            st.lift
        )?;
    }
    Ok(())
}

/// A comma-separated history (`iteration,res_p,res_U,res_k,Cd,Cl`).
pub fn write_history_csv(run: &SynthRun, w: &mut impl Write) -> io::Result<()> {
    writeln!(w, "iteration,res_p,res_U,res_k,Cd,Cl")?;
    for (i, st) in run.steps.iter().enumerate() {
        writeln!(
            w,
            "{},{},{},{},{},{}",
            st.iteration,
            fmt_sci(res(run, i, "p"), 4),
            fmt_sci(res_u(run, i), 4),
            fmt_sci(res(run, i, "k"), 4),
            fmt_sci(st.drag, 4),
            fmt_sci(st.lift, 4)
        )?;
    }
    Ok(())
}

fn write_file(path: &Path, bytes: &[u8]) -> io::Result<()> {
    if let Some(dir) = path.parent() {
        fs::create_dir_all(dir)?;
    }
    fs::write(path, bytes)
}

/// Facts of one tarn sample for the README.
fn describe(run: &SynthRun, log: &[u8], csv: &[u8]) -> String {
    // A crash's cut-short last record prints no notice or warning lines.
    let printed = &run.steps[..run.complete_steps()];
    let notices: usize = printed.iter().map(|s| s.notices.len()).sum();
    let warnings: usize = printed.iter().map(|s| s.warnings.len()).sum();
    let end = match run.end {
        End::Finished if run.solver_converged => "targets-reached line, then the end-of-run line",
        End::Finished => "end-of-run line",
        End::Crash => "cut-short last record, then the crash trace (no end-of-run line)",
        End::Running => "no end line (the log just stops)",
    };
    let mut s = String::new();
    let _ = writeln!(
        s,
        "* steps (records): {} (iterations 1–{})",
        run.steps.len(),
        run.last_iteration()
    );
    let _ = writeln!(s, "* `notice:` lines: {notices}; `warning:` lines: {warnings}");
    let _ = writeln!(s, "* ends with: {end}");
    let _ = writeln!(s, "* `tarn.log`: {} lines, {} bytes", count_lines(log), log.len());
    let _ = writeln!(
        s,
        "* `forces.csv`: {} lines (2 header lines + {} rows), {} bytes",
        count_lines(csv),
        count_lines(csv) - 2,
        csv.len()
    );
    let _ = writeln!(s, "* expected verdict: `{}`", run.expected());
    s
}

fn count_lines(bytes: &[u8]) -> usize {
    bytes.iter().filter(|&&b| b == b'\n').count()
}

/// Write every sample under `dir` (normally the repository's `samples/`): the tarn cases
/// with their `settle.toml`, the plain tables, and `README.md` describing them.
pub fn write_samples(dir: &Path) -> io::Result<()> {
    let mut readme = String::from(README_HEAD);
    for s in &TARN_SAMPLES {
        let run = sample_run(s.scenario, s.seed, s.iterations, s.case);
        let (mut log, mut csv) = (Vec::new(), Vec::new());
        write_tarn_log(&run, &mut log)?;
        write_forces_csv(&run, &mut csv)?;
        let case_dir = dir.join(s.case);
        write_file(&case_dir.join("tarn.log"), &log)?;
        write_file(&case_dir.join("forces.csv"), &csv)?;
        write_file(&case_dir.join("settle.toml"), settle_toml(s.case).as_bytes())?;
        let _ = writeln!(readme, "## `{}/`\n", s.case);
        let _ = writeln!(
            readme,
            "Scenario `{}`, seed {}, {} iterations: {}.\n",
            s.scenario, s.seed, s.iterations, s.why
        );
        readme.push_str(&describe(&run, &log, &csv));
        readme.push('\n');
    }
    for (file, (scenario, seed, iterations, case), what) in [
        ("history.dat", DAT_SAMPLE, "whitespace table, one header line, upper-case exponents"),
        ("history.csv", CSV_SAMPLE, "comma-separated, one header line"),
    ] {
        let run = sample_run(scenario, seed, iterations, case);
        let mut bytes = Vec::new();
        if file.ends_with(".dat") {
            write_history_dat(&run, &mut bytes)?;
        } else {
            write_history_csv(&run, &mut bytes)?;
        }
        write_file(&dir.join("plain").join(file), &bytes)?;
        let _ = writeln!(readme, "## `plain/{file}`\n");
        let _ = writeln!(
            readme,
            "Scenario `{scenario}`, seed {seed}, {iterations} iterations, case {case}: {what}. \
             Columns: iteration, `res_p`, `res_U` (largest of the three velocity residuals), \
             `res_k`, `Cd` (drag), `Cl` (lift).\n"
        );
        let _ = writeln!(
            readme,
            "* rows: {} (plus the header), iterations 1–{}, {} bytes",
            run.steps.len(),
            run.last_iteration(),
            bytes.len()
        );
        let _ = writeln!(readme, "* expected verdict: `{}`\n", run.expected());
    }
    readme.push_str(README_TAIL);
    write_file(&dir.join("README.md"), readme.as_bytes())
}

const README_HEAD: &str = "\
# Samples

Demo data for settle, in our own invented scenario: the solver \"tarn\" (its log format is
described in `../parsers/TARN_FORMAT.md`) and invented cases. Every number is synthetic:
the files are written by `settle::synth::write_samples` from fixed scenarios and seeds,
and a unit test checks that the committed files are byte for byte what the generator
writes. Do not edit them by hand.

Each tarn case directory holds the residual log `tarn.log`, the force monitor file
`forces.csv` beside it, and a minimal run config `settle.toml` naming the run and its two
sources.

";

const README_TAIL: &str = "\
## Regenerating

    SETTLE_REGENERATE_SAMPLES=1 cargo test --lib synth::samples

rewrites this directory from the generator and then checks it. Without the variable the
test only compares.
";

#[cfg(test)]
mod tests {
    use super::*;
    use std::path::PathBuf;

    fn committed() -> PathBuf {
        PathBuf::from(env!("CARGO_MANIFEST_DIR")).join("samples")
    }

    fn files(dir: &Path) -> Vec<PathBuf> {
        let mut out = Vec::new();
        let mut stack = vec![dir.to_path_buf()];
        while let Some(d) = stack.pop() {
            for e in fs::read_dir(&d).expect("sample directory is readable") {
                let p = e.expect("directory entry is readable").path();
                if p.is_dir() {
                    stack.push(p);
                } else {
                    out.push(p.strip_prefix(dir).expect("entry lies under dir").to_path_buf());
                }
            }
        }
        out.sort();
        out
    }

    #[test]
    fn committed_samples_are_what_the_generator_writes() {
        if std::env::var_os("SETTLE_REGENERATE_SAMPLES").is_some() {
            write_samples(&committed()).expect("samples/ is writable");
        }
        let tmp = tempfile::tempdir().expect("temp dir");
        write_samples(tmp.path()).expect("write samples");
        let fresh = files(tmp.path());
        assert_eq!(files(&committed()), fresh);
        for rel in &fresh {
            let a = fs::read(committed().join(rel)).expect("committed sample");
            let b = fs::read(tmp.path().join(rel)).expect("fresh sample");
            assert!(a == b, "{} differs from the generator's output", rel.display());
            assert!(b.len() < 700_000, "{} is {} bytes", rel.display(), b.len());
        }
    }

    #[test]
    fn plain_tables_have_header_and_one_row_per_step() {
        let run = sample_run(DAT_SAMPLE.0, DAT_SAMPLE.1, 300, "t");
        let mut dat = Vec::new();
        write_history_dat(&run, &mut dat).expect("write to memory");
        let text = String::from_utf8(dat).expect("ascii");
        let lines: Vec<&str> = text.lines().collect();
        assert_eq!(lines.len(), run.steps.len() + 1);
        assert_eq!(
            lines[0].split_whitespace().collect::<Vec<_>>(),
            ["iter", "res_p", "res_U", "res_k", "Cd", "Cl"]
        );
        let first: Vec<&str> = lines[1].split_whitespace().collect();
        assert_eq!(first[0], "1");
        assert_eq!(first[1], "1.0000E+00");
        let mut csv = Vec::new();
        write_history_csv(&run, &mut csv).expect("write to memory");
        let text = String::from_utf8(csv).expect("ascii");
        assert_eq!(text.lines().count(), run.steps.len() + 1);
        assert!(text.lines().skip(1).all(|l| l.split(',').count() == 6));
    }
}
