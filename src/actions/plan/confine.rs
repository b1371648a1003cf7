//! Where a command may come from: the case directories (the config's and the run's, where
//! commands run) and the rule that no program is taken from inside them through a
//! relative path or an empty or relative `PATH` entry.

use std::ffi::OsStr;
use std::path::{Path, PathBuf};

use super::PlannedAction;

/// The case directories (config directory and run directory), as written and resolved.
pub(super) struct CaseDirs {
    /// Distinct absolute directories, for the permission check.
    pub(super) dirs: Vec<PathBuf>,
    /// Their lexical and canonical forms, for "inside" tests.
    forms: Vec<PathBuf>,
}

impl CaseDirs {
    pub(super) fn new(dirs: &[&Path]) -> CaseDirs {
        let mut out = CaseDirs { dirs: Vec::new(), forms: Vec::new() };
        for d in dirs {
            let lexical = lexical(d);
            let canonical = std::fs::canonicalize(d).unwrap_or_else(|_| lexical.clone());
            if !out.forms.contains(&canonical) {
                out.dirs.push(lexical.clone());
            }
            for f in [lexical, canonical] {
                if !out.forms.contains(&f) {
                    out.forms.push(f);
                }
            }
        }
        out
    }

    /// Whether `p` (absolute) lies inside one of the case directories.
    fn contains(&self, p: &Path) -> bool {
        let lex = lexical(p);
        let canonical = std::fs::canonicalize(p).unwrap_or_else(|_| lex.clone());
        [lex, canonical].iter().any(|f| self.forms.iter().any(|d| f.starts_with(d)))
    }

    /// Refuse a program that would be taken from inside the case directory: a relative
    /// path resolving there, or (for a bare name) an empty or relative `PATH` entry, which
    /// the command resolves against its working directory, the run's directory.
    pub(super) fn check_program(
        &self,
        p: &PlannedAction,
        path_var: Option<&OsStr>,
        run_dir: &Path,
    ) -> Result<(), String> {
        let word = &p.program_word;
        if word.contains('/') {
            if Path::new(word).is_relative() && self.contains(&p.program) {
                return Err(format!(
                    "`command`: the program {word:?} is a relative path inside the case \
                     directory ({}); a file there can be replaced by whatever writes into the \
                     case. Give an absolute path outside the case directory",
                    lexical(&p.program).display()
                ));
            }
            return Ok(());
        }
        let Some(path_var) = path_var else {
            return Ok(());
        };
        for entry in std::env::split_paths(path_var) {
            if entry.is_absolute() {
                continue;
            }
            let resolved = run_dir.join(&entry);
            if self.contains(&resolved) {
                let shown = if entry.as_os_str().is_empty() {
                    "an empty entry".to_string()
                } else {
                    format!("the relative entry {:?}", entry.display().to_string())
                };
                return Err(format!(
                    "`command`: {word:?} is looked up in PATH, which has {shown}; commands run \
                     in the case directory, so that entry is {} and a file named {word:?} \
                     there would run. Remove such entries from PATH or give the program's \
                     absolute path",
                    lexical(&resolved).display()
                ));
            }
        }
        Ok(())
    }
}

/// `p` with `.` and `..` components resolved without touching the file system.
pub(super) fn lexical(p: &Path) -> PathBuf {
    use std::path::Component;
    let mut out = PathBuf::new();
    for c in p.components() {
        match c {
            Component::CurDir => {}
            Component::ParentDir => {
                out.pop();
            }
            other => out.push(other.as_os_str()),
        }
    }
    out
}
