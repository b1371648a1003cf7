//! From command-line paths to runs: the one place `check`, `report` and `watch` decide which
//! files form a run, so the same arguments mean the same run(s) in every command.
//!
//! The rules (documented in the README, "Runs made of several files"):
//!
//! * Files given together are **one run**, its sources (a residual log and its monitor
//!   files): `settle check run.log forces.dat probes.csv` and `settle watch run.log
//!   forces.dat probes.csv` both mean one run of three sources.
//! * `+` on its own separates runs: `settle watch a/run.log a/forces.dat + b/run.log`.
//!   `watch --each` makes every file its own run.
//! * A directory holding `settle.toml` is the run that file describes.
//! * A directory without `settle.toml` is looked into: its files that a parser definition
//!   recognises are its sources. With exactly one free-text log (a `lines` definition)
//!   they form one run (the log and its monitor tables); otherwise each recognised file is
//!   a run of its own. Its subdirectories (one level down) are looked at the same way, so
//!   a folder of case directories is a sweep of runs. Whatever is left out is said in a
//!   note: a folder with no recognised file, files no definition recognises, empty files.
//! * `--parser NAME` names the definition of every file argument; given as many times as
//!   there are files, it names each file's definition in order. Files found by looking
//!   into directories are always detected.

use std::io::Read;
use std::path::{Path, PathBuf};

use crate::parser::Registry;
use crate::run::config::{self, RunSpec};

/// Runs found from the arguments, with what was left out and why.
#[derive(Debug, Default)]
pub struct Resolved {
    pub runs: Vec<RunSpec>,
    /// One line per folder or file that was looked at and left out, with the reason.
    pub notes: Vec<String>,
}

/// The argument that separates runs.
pub const RUN_SEPARATOR: &str = "+";

/// Bytes of a file looked at to recognise it (what detection uses for a source).
const HEAD_BYTES: u64 = 64 * 1024;
/// Files looked at per folder; a folder with more is most likely not a case directory.
const MAX_FILES: usize = 500;

/// Every run the arguments describe (`watch`). `each`: every file argument is its own run.
pub fn runs(
    paths: &[PathBuf],
    parsers: &[String],
    registry: &Registry,
    each: bool,
) -> Result<Resolved, String> {
    let groups: Vec<&[PathBuf]> =
        paths.split(|p| p.as_os_str() == RUN_SEPARATOR).filter(|g| !g.is_empty()).collect();
    if groups.is_empty() {
        return Err("give at least one log file or case directory".into());
    }
    let n_files = paths.iter().filter(|p| p.as_os_str() != RUN_SEPARATOR && !p.is_dir()).count();
    let mut file_parsers = parsers_per_file(parsers, n_files)?.into_iter();
    let mut out = Resolved::default();
    for group in groups {
        let (dirs, files): (Vec<&PathBuf>, Vec<&PathBuf>) = group.iter().partition(|p| p.is_dir());
        if let (Some(d), Some(f)) = (dirs.first(), files.first()) {
            return Err(format!(
                "{} is a directory and {} a file: a run is either its files or one case directory; separate runs with `{RUN_SEPARATOR}`",
                d.display(),
                f.display()
            ));
        }
        for d in dirs {
            expand_dir(d, registry, &mut out)?;
        }
        let named: Vec<Option<String>> =
            files.iter().map(|_| file_parsers.next().flatten()).collect();
        if each {
            for (f, p) in files.iter().zip(named) {
                out.runs.push(config::from_files_with(std::slice::from_ref(f), &[p]));
            }
        } else if !files.is_empty() {
            let files: Vec<PathBuf> = files.into_iter().cloned().collect();
            out.runs.push(config::from_files_with(&files, &named));
        }
    }
    Ok(out)
}

/// The one run the arguments describe (`check`, `report`): files given together, or one
/// case directory.
pub fn one_run(
    paths: &[PathBuf],
    parsers: &[String],
    registry: &Registry,
) -> Result<(RunSpec, Vec<String>), String> {
    if paths.iter().any(|p| p.as_os_str() == RUN_SEPARATOR) {
        return Err(format!(
            "`{RUN_SEPARATOR}` separates runs, and this command judges one run: give one run's files, or one case directory (`settle watch` takes several runs)"
        ));
    }
    if paths.len() > 1
        && let Some(d) = paths.iter().find(|p| p.is_dir())
    {
        return Err(format!(
            "{} is a directory: this command judges one run; give that run's files, or one case directory",
            d.display()
        ));
    }
    let mut found = runs(paths, parsers, registry, false)?;
    match found.runs.len() {
        1 => Ok((found.runs.remove(0), found.notes)),
        0 => Err(found.notes.join("; ")),
        n => {
            let names: Vec<&str> = found.runs.iter().map(|r| r.name.as_str()).collect();
            Err(format!(
                "{} holds {n} runs ({}) and no {}: this command judges one run; give one of them",
                paths.first().map(|p| p.display().to_string()).unwrap_or_default(),
                names.join(", "),
                config::CONFIG_NAME
            ))
        }
    }
}

/// `--parser` values → one optional parser per file argument: none (detect each), one
/// (for every file) or one per file in order.
pub fn parsers_per_file(parsers: &[String], n_files: usize) -> Result<Vec<Option<String>>, String> {
    match parsers {
        [] => Ok(vec![None; n_files]),
        [one] => Ok(vec![Some(one.clone()); n_files]),
        many if many.len() == n_files => Ok(many.iter().cloned().map(Some).collect()),
        many => Err(format!(
            "--parser is given {} times for {n_files} file{}: give it once (for every file) or once per file, in order",
            many.len(),
            if n_files == 1 { "" } else { "s" }
        )),
    }
}

/// A directory argument: its `settle.toml`, or what its files and subdirectories hold.
fn expand_dir(dir: &Path, registry: &Registry, out: &mut Resolved) -> Result<(), String> {
    let cfg = dir.join(config::CONFIG_NAME);
    if cfg.is_file() {
        out.runs.push(config::load(&cfg).map_err(|e| e.to_string())?);
        return Ok(());
    }
    let before = out.runs.len();
    let scan = scan_folder(dir, registry)?;
    let own_files = scan.recognised.len();
    out.runs.extend(scan.runs());
    if own_files > 0 {
        out.notes.extend(scan.notes(dir));
    }
    let mut subs: Vec<PathBuf> = std::fs::read_dir(dir)
        .map_err(|e| format!("{}: {e}", dir.display()))?
        .filter_map(|e| e.ok().map(|e| e.path()))
        .filter(|p| p.is_dir() && !hidden(p))
        .collect();
    subs.sort_by(|a, b| crate::follow::natural_cmp(&a.to_string_lossy(), &b.to_string_lossy()));
    for sub in subs {
        let cfg = sub.join(config::CONFIG_NAME);
        if cfg.is_file() {
            out.runs.push(config::load(&cfg).map_err(|e| e.to_string())?);
            continue;
        }
        let scan = scan_folder(&sub, registry)?;
        if scan.recognised.is_empty() {
            out.notes.push(format!(
                "{}: left out: no {} and no file a parser definition recognises{}",
                sub.display(),
                config::CONFIG_NAME,
                scan.looked_at()
            ));
            continue;
        }
        out.runs.extend(scan.runs());
        out.notes.extend(scan.notes(&sub));
    }
    if out.runs.len() == before {
        let mut msg = format!(
            "{}: no {} here or in its subdirectories, and no file a parser definition recognises{}; give the log files instead",
            dir.display(),
            config::CONFIG_NAME,
            scan.looked_at()
        );
        if let Some(why) = scan.unrecognised_detail() {
            msg.push_str(&format!(" ({why})"));
        }
        return Err(msg);
    }
    Ok(())
}

fn hidden(p: &Path) -> bool {
    p.file_name().is_some_and(|n| n.to_string_lossy().starts_with('.'))
}

/// What detection made of the files of one folder.
#[derive(Debug, Default)]
struct FolderScan {
    /// Recognised files with the definition that claims each and its engine.
    recognised: Vec<(PathBuf, String, String)>,
    unrecognised: Vec<PathBuf>,
    empty: Vec<PathBuf>,
    unreadable: Vec<(PathBuf, String)>,
    skipped_extra: usize,
}

fn scan_folder(dir: &Path, registry: &Registry) -> Result<FolderScan, String> {
    let mut files: Vec<PathBuf> = std::fs::read_dir(dir)
        .map_err(|e| format!("{}: {e}", dir.display()))?
        .filter_map(|e| e.ok().map(|e| e.path()))
        .filter(|p| p.is_file() && !hidden(p))
        .filter(|p| p.file_name().is_none_or(|n| n != config::CONFIG_NAME))
        .collect();
    files.sort_by(|a, b| crate::follow::natural_cmp(&a.to_string_lossy(), &b.to_string_lossy()));
    let mut scan = FolderScan::default();
    if files.len() > MAX_FILES {
        scan.skipped_extra = files.len() - MAX_FILES;
        files.truncate(MAX_FILES);
    }
    for f in files {
        let head = match read_head(&f) {
            Ok(h) => h,
            Err(e) => {
                scan.unreadable.push((f, e.to_string()));
                continue;
            }
        };
        if head.is_empty() {
            scan.empty.push(f);
            continue;
        }
        if head.contains(&0) {
            scan.unrecognised.push(f); // binary data: not a log
            continue;
        }
        match registry.detect(&head).chosen {
            Some(name) => {
                let engine = registry
                    .entries()
                    .iter()
                    .find(|e| e.name() == name)
                    .map(|e| e.engine().to_string())
                    .unwrap_or_default();
                scan.recognised.push((f, name, engine));
            }
            None => scan.unrecognised.push(f),
        }
    }
    Ok(scan)
}

fn read_head(path: &Path) -> std::io::Result<Vec<u8>> {
    let mut head = Vec::new();
    std::fs::File::open(path)?.take(HEAD_BYTES).read_to_end(&mut head)?;
    Ok(head)
}

impl FolderScan {
    /// The runs of the folder: one run when exactly one recognised file is a free-text log
    /// (the other files are its monitor tables), otherwise one run per file.
    fn runs(&self) -> Vec<RunSpec> {
        let logs = self.recognised.iter().filter(|(_, _, e)| e == "lines").count();
        let files: Vec<PathBuf> = self.recognised.iter().map(|(f, _, _)| f.clone()).collect();
        let parsers: Vec<Option<String>> =
            self.recognised.iter().map(|(_, p, _)| Some(p.clone())).collect();
        if logs == 1 {
            // The log first: its series keep their plain names (see `series_names`).
            let mut order: Vec<usize> = (0..files.len()).collect();
            order.sort_by_key(|&i| self.recognised[i].2 != "lines");
            let files: Vec<PathBuf> = order.iter().map(|&i| files[i].clone()).collect();
            let parsers: Vec<Option<String>> = order.iter().map(|&i| parsers[i].clone()).collect();
            return vec![config::from_files_with(&files, &parsers)];
        }
        files
            .iter()
            .zip(parsers)
            .map(|(f, p)| config::from_files_with(std::slice::from_ref(f), &[p]))
            .collect()
    }

    /// What was left out of a folder that gave runs.
    fn notes(&self, dir: &Path) -> Vec<String> {
        let mut notes = Vec::new();
        let names = |v: &[PathBuf]| {
            let mut shown: Vec<String> = v
                .iter()
                .take(5)
                .map(|p| p.file_name().unwrap_or_default().to_string_lossy().into_owned())
                .collect();
            if v.len() > 5 {
                shown.push(format!("and {} more", v.len() - 5));
            }
            shown.join(", ")
        };
        if !self.unrecognised.is_empty() {
            notes.push(format!(
                "{}: {} file{} no parser definition recognises, not read: {}",
                dir.display(),
                self.unrecognised.len(),
                plural(self.unrecognised.len()),
                names(&self.unrecognised)
            ));
        }
        if !self.empty.is_empty() {
            notes.push(format!(
                "{}: empty, so not recognised and not watched (name them in a {} to follow them as they grow): {}",
                dir.display(),
                config::CONFIG_NAME,
                names(&self.empty)
            ));
        }
        for (f, e) in &self.unreadable {
            notes.push(format!("{}: cannot be read: {e}", f.display()));
        }
        if self.skipped_extra > 0 {
            notes.push(format!(
                "{}: only the first {MAX_FILES} files were looked at ({} more)",
                dir.display(),
                self.skipped_extra
            ));
        }
        notes
    }

    fn looked_at(&self) -> String {
        let n = self.unrecognised.len() + self.empty.len() + self.unreadable.len();
        if n == 0 {
            " (it holds no files)".to_string()
        } else {
            format!(" ({n} file{} looked at)", plural(n))
        }
    }

    fn unrecognised_detail(&self) -> Option<String> {
        let f = self.unrecognised.first()?;
        Some(format!(
            "`settle parsers test {}` shows why; `settle parsers draft {}` proposes a definition",
            f.display(),
            f.display()
        ))
    }
}

fn plural(n: usize) -> &'static str {
    if n == 1 { "" } else { "s" }
}
