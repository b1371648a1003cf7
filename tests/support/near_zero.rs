//! The synthetic tarn scenario `near-zero-monitors` (our invented solver; its lift settles
//! at zero and its side force carries only round-off, see `tests/synth_scenarios.rs`) written
//! as tarn writes it, for the tests that read the judge's evidence off what settle shows.

use std::path::{Path, PathBuf};

use settle::synth::{self, Options, Scenario};

/// Seed 1 of the scenario, 900 iterations: a log and a force CSV written into `dir`.
pub fn write_case(dir: &Path) -> (PathBuf, PathBuf) {
    let run = synth::generate_with(
        Scenario::NearZeroMonitors,
        1,
        &Options { iterations: Some(900), ..Options::default() },
    );
    let (log, csv) = (dir.join("tarn.log"), dir.join("forces.csv"));
    let mut bytes = Vec::new();
    synth::write_tarn_log(&run, &mut bytes).expect("write log");
    std::fs::write(&log, bytes).expect("log written");
    let mut bytes = Vec::new();
    synth::write_forces_csv(&run, &mut bytes).expect("write csv");
    std::fs::write(&csv, bytes).expect("csv written");
    (log, csv)
}
