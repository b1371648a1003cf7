//! What a follower follows: one path, or a glob in the file-name component for restart
//! files (`case/run.log*`, `case/run.log.?`), listed in natural order.
//!
//! Restart files are numbered by the job scripts that write them (`run.log.1`, `run.log.2`,
//! …, `run.log.10`), so plain byte order would put `.10` before `.2`; natural order compares
//! digit runs by value. Wildcards are honoured only in the last component: a wildcard in a
//! directory name is taken literally, because listing many directories on a parallel file
//! system at every name check is costly and case directories are named explicitly anyway.

use std::cmp::Ordering;
use std::ffi::OsStr;
use std::fs;
use std::io;
use std::path::{Path, PathBuf};

use crate::glob;

/// A parsed follow target.
#[derive(Debug, Clone)]
pub(crate) struct Spec {
    /// The path as given.
    original: PathBuf,
    /// Directory holding the file(s); `.` for a bare name.
    dir: PathBuf,
    /// The file-name pattern, when the last component contains `*` or `?`.
    pattern: Option<String>,
}

impl Spec {
    pub(crate) fn new(original: PathBuf) -> Spec {
        let pattern = original
            .file_name()
            .and_then(OsStr::to_str)
            .filter(|n| glob::is_pattern(n))
            .map(str::to_owned);
        let dir = match original.parent() {
            Some(p) if !p.as_os_str().is_empty() => p.to_path_buf(),
            _ => PathBuf::from("."),
        };
        Spec { original, dir, pattern }
    }

    /// The path or glob as given.
    pub(crate) fn original(&self) -> &Path {
        &self.original
    }

    /// Whether the spec is a restart-file glob.
    pub(crate) fn is_glob(&self) -> bool {
        self.pattern.is_some()
    }

    /// The files the spec matches now, in natural order. A plain path is returned as is
    /// (whether or not it exists); a glob lists its directory. A missing directory gives an
    /// empty list, other listing errors are returned.
    pub(crate) fn matches(&self) -> io::Result<Vec<PathBuf>> {
        let Some(pattern) = &self.pattern else {
            return Ok(vec![self.original.clone()]);
        };
        let entries = match fs::read_dir(&self.dir) {
            Ok(e) => e,
            Err(e) if e.kind() == io::ErrorKind::NotFound => return Ok(Vec::new()),
            Err(e) => return Err(e),
        };
        let mut names: Vec<String> = Vec::new();
        for entry in entries {
            let entry = entry?;
            // Names that are not UTF-8 cannot match a UTF-8 pattern.
            if let Ok(name) = entry.file_name().into_string()
                && glob::matches(pattern, &name)
            {
                names.push(name);
            }
        }
        names.sort_by(|a, b| natural_cmp(a, b));
        Ok(names.into_iter().map(|n| self.dir.join(n)).collect())
    }

    /// Every match that sorts after `current` (the later restart files), in natural order.
    pub(crate) fn all_after(&self, current: &Path) -> io::Result<Vec<PathBuf>> {
        if self.pattern.is_none() {
            return Ok(Vec::new());
        }
        let cur = file_name_str(current);
        Ok(self
            .matches()?
            .into_iter()
            .filter(|p| natural_cmp(&file_name_str(p), &cur) == Ordering::Greater)
            .collect())
    }

    /// The directory whose events should wake the follower: the spec's directory, or its
    /// nearest existing ancestor while it does not exist.
    pub(crate) fn watch_dir(&self) -> PathBuf {
        let mut dir = self.dir.as_path();
        loop {
            if dir.is_dir() {
                return dir.to_path_buf();
            }
            match dir.parent() {
                Some(p) if !p.as_os_str().is_empty() => dir = p,
                _ => return PathBuf::from(if self.dir.is_absolute() { "/" } else { "." }),
            }
        }
    }
}

fn file_name_str(p: &Path) -> String {
    p.file_name().map(|n| n.to_string_lossy().into_owned()).unwrap_or_default()
}

/// Natural order: digit runs compare by numeric value (`run.log.2` < `run.log.10`), other
/// runs byte-wise; a shorter name that is a prefix of a longer one sorts first. Equal values
/// with different leading zeros are ordered by the number of zeros, so the order is total.
pub fn natural_cmp(a: &str, b: &str) -> Ordering {
    let (a, b) = (a.as_bytes(), b.as_bytes());
    let (mut i, mut j) = (0, 0);
    while i < a.len() && j < b.len() {
        if a[i].is_ascii_digit() && b[j].is_ascii_digit() {
            let ea = i + a[i..].iter().take_while(|c| c.is_ascii_digit()).count();
            let eb = j + b[j..].iter().take_while(|c| c.is_ascii_digit()).count();
            let (da, db) = (&a[i..ea], &b[j..eb]);
            let ta = trim_zeros(da);
            let tb = trim_zeros(db);
            let ord =
                ta.len().cmp(&tb.len()).then_with(|| ta.cmp(tb)).then(da.len().cmp(&db.len()));
            if ord != Ordering::Equal {
                return ord;
            }
            i = ea;
            j = eb;
        } else {
            let ord = a[i].cmp(&b[j]);
            if ord != Ordering::Equal {
                return ord;
            }
            i += 1;
            j += 1;
        }
    }
    (a.len() - i).cmp(&(b.len() - j))
}

fn trim_zeros(d: &[u8]) -> &[u8] {
    let z = d.iter().take_while(|&&c| c == b'0').count();
    &d[z..]
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn natural_order_of_restart_files() {
        let mut v =
            vec!["run.log.10", "run.log.2", "run.log", "run.log.1", "run.log.02", "run.log.b"];
        v.sort_by(|a, b| natural_cmp(a, b));
        assert_eq!(
            v,
            ["run.log", "run.log.1", "run.log.2", "run.log.02", "run.log.10", "run.log.b"]
        );
        assert_eq!(natural_cmp("a", "a"), Ordering::Equal);
        assert_eq!(natural_cmp("a9b", "a10a"), Ordering::Less);
        assert_eq!(natural_cmp("x100000000000000000000001", "x99"), Ordering::Greater);
    }

    #[test]
    fn spec_parts() {
        let s = Spec::new(PathBuf::from("case/run.log*"));
        assert!(s.is_glob());
        assert_eq!(s.dir, PathBuf::from("case"));
        let s = Spec::new(PathBuf::from("run.log"));
        assert!(!s.is_glob());
        assert_eq!(s.dir, PathBuf::from("."));
        assert_eq!(s.matches().ok(), Some(vec![PathBuf::from("run.log")]));
        // A wildcard in a directory component is literal.
        assert!(!Spec::new(PathBuf::from("ca*e/run.log")).is_glob());
    }

    #[test]
    fn glob_lists_in_natural_order_and_finds_the_next_file() {
        let dir = tempfile::tempdir().expect("temp dir");
        for n in ["run.log.10", "run.log.2", "run.log.1", "other.txt"] {
            fs::write(dir.path().join(n), b"x\n").expect("write");
        }
        let s = Spec::new(dir.path().join("run.log.*"));
        let names: Vec<String> =
            s.matches().expect("list").iter().map(|p| file_name_str(p)).collect();
        assert_eq!(names, ["run.log.1", "run.log.2", "run.log.10"]);
        let next = s.all_after(&dir.path().join("run.log.2")).expect("list");
        assert_eq!(next, [dir.path().join("run.log.10")]);
        let later = s.all_after(&dir.path().join("run.log.1")).expect("list");
        assert_eq!(later, [dir.path().join("run.log.2"), dir.path().join("run.log.10")]);
        assert!(s.all_after(&dir.path().join("run.log.10")).expect("list").is_empty());
        let q = Spec::new(dir.path().join("run.log.?"));
        assert_eq!(q.matches().expect("list").len(), 2);
    }

    #[test]
    fn watch_dir_is_the_nearest_existing_ancestor() {
        let dir = tempfile::tempdir().expect("temp dir");
        let s = Spec::new(dir.path().join("a/b/out.log"));
        assert_eq!(s.watch_dir(), dir.path());
        fs::create_dir_all(dir.path().join("a/b")).expect("mkdir");
        assert_eq!(s.watch_dir(), dir.path().join("a/b"));
        assert!(Spec::new(dir.path().join("a/b/x*")).matches().expect("list").is_empty());
        assert!(Spec::new(dir.path().join("zz/x*")).matches().expect("list").is_empty());
    }
}
