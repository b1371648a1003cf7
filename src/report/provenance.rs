//! Provenance of a report: which program, command, parser definitions, log files and criteria
//! produced it, with content hashes so a reader can tell whether the files changed since.
//!
//! [`Provenance::collect`] is the only function of the report that touches the file system: it
//! stats and hashes the sources. Everything else here is pure (formatting of times, hashes of
//! text, the list of criteria in effect).

use std::fs::File;
use std::io::{self, Read};
use std::path::{Path, PathBuf};
use std::time::{SystemTime, UNIX_EPOCH};

use serde::Serialize;
use sha2::{Digest, Sha256};

use crate::judge::Criteria;

/// A parser definition in use: its name, where it came from and a hash of its text.
#[derive(Debug, Clone, PartialEq, Eq, Serialize)]
pub struct ParserProvenance {
    pub name: String,
    /// `built-in` for a shipped definition, otherwise the path of the user's file.
    pub origin: String,
    /// Lowercase hex SHA-256 of the definition text.
    pub sha256: String,
}

impl ParserProvenance {
    /// Describe a definition from its text (hashed here).
    pub fn new(name: impl Into<String>, origin: impl Into<String>, text: &str) -> Self {
        ParserProvenance {
            name: name.into(),
            origin: origin.into(),
            sha256: hex(&Sha256::digest(text.as_bytes())),
        }
    }
}

/// One log or monitor file read for the report.
#[derive(Debug, Clone, PartialEq, Eq, Serialize)]
pub struct SourceProvenance {
    pub path: PathBuf,
    /// Size in bytes when hashed.
    pub size: u64,
    /// Modification time, when the file system reports one.
    #[serde(serialize_with = "ser_opt_time")]
    pub mtime: Option<SystemTime>,
    /// Lowercase hex SHA-256 of the file content.
    pub sha256: String,
}

/// Everything needed to say how a report was made.
#[derive(Debug, Clone, PartialEq, Serialize)]
pub struct Provenance {
    pub settle_version: String,
    pub command_line: Vec<String>,
    #[serde(serialize_with = "ser_time")]
    pub analysed_at: SystemTime,
    pub parsers: Vec<ParserProvenance>,
    pub sources: Vec<SourceProvenance>,
    /// (key, value, default): each criterion setting in effect; `default` marks the built-in
    /// common-practice values.
    pub criteria: Vec<(String, String, bool)>,
}

impl Default for Provenance {
    fn default() -> Self {
        Provenance {
            settle_version: env!("CARGO_PKG_VERSION").to_string(),
            command_line: Vec::new(),
            analysed_at: UNIX_EPOCH,
            parsers: Vec::new(),
            sources: Vec::new(),
            criteria: Vec::new(),
        }
    }
}

impl Provenance {
    /// Gather provenance now: stat and hash every source file (streamed, 1 MiB at a time).
    ///
    /// `sources` are the concrete files read (every file of a restart glob). An error names
    /// the file that could not be read.
    pub fn collect(
        command_line: Vec<String>,
        parsers: Vec<ParserProvenance>,
        sources: &[PathBuf],
        criteria: &Criteria,
    ) -> io::Result<Provenance> {
        let sources = sources
            .iter()
            .map(|p| {
                source_provenance(p)
                    .map_err(|e| io::Error::new(e.kind(), format!("{}: {e}", p.display())))
            })
            .collect::<io::Result<Vec<_>>>()?;
        Ok(Provenance {
            settle_version: env!("CARGO_PKG_VERSION").to_string(),
            command_line,
            analysed_at: SystemTime::now(),
            parsers,
            sources,
            criteria: criteria_in_effect(criteria),
        })
    }
}

/// Stat and hash one file. The size reported is the number of bytes hashed, so a file that
/// grows while being read is described consistently.
pub fn source_provenance(path: &Path) -> io::Result<SourceProvenance> {
    let mut file = File::open(path)?;
    let mtime = file.metadata()?.modified().ok();
    let mut hasher = Sha256::new();
    let mut buf = vec![0u8; 1 << 20];
    let mut size = 0u64;
    loop {
        let n = match file.read(&mut buf) {
            Ok(0) => break,
            Ok(n) => n,
            Err(e) if e.kind() == io::ErrorKind::Interrupted => continue,
            Err(e) => return Err(e),
        };
        hasher.update(&buf[..n]);
        size += n as u64;
    }
    Ok(SourceProvenance { path: path.to_path_buf(), size, mtime, sha256: hex(&hasher.finalize()) })
}

/// The criteria settings in effect, as (key, value, is-default) rows.
///
/// Global settings come first in a fixed order, then per-series overrides as
/// `series.<pattern>.<field>` in pattern order.
pub fn criteria_in_effect(c: &Criteria) -> Vec<(String, String, bool)> {
    let mut out = Vec::new();
    let mut row = |key: &str, set: Option<String>, default: &str| match set {
        Some(v) => out.push((key.to_string(), v, false)),
        None => out.push((key.to_string(), default.to_string(), true)),
    };
    row(
        "residual_drop",
        c.residual_drop.map(|v| format!("{v} dec")),
        &format!("{} dec", Criteria::DEFAULT_RESIDUAL_DROP),
    );
    row("residual_below", c.residual_below.map(|v| v.to_string()), "none");
    // Unset, the judge fits the window to the run (the report's monitors table gives the
    // window each monitor was judged over).
    row(
        "window",
        c.window.map(|v| format!("{v} it")),
        &format!("fitted to the run, at most {} it", Criteria::DEFAULT_WINDOW),
    );
    row("drift", c.drift.map(|v| format!("{v} %")), &format!("{} %", Criteria::DEFAULT_DRIFT_PCT));
    row("band", c.band.map(|v| format!("{v} %")), &format!("{} %", Criteria::DEFAULT_BAND_PCT));
    row("ci", c.ci.map(|v| format!("{v} %")), "not checked");
    for (pattern, s) in &c.series {
        let key = |field: &str| format!("series.{pattern}.{field}");
        let fields: [(&str, Option<String>); 5] = [
            ("drop", s.drop.map(|v| format!("{v} dec"))),
            ("below", s.below.map(|v| v.to_string())),
            ("drift", s.drift.map(|v| format!("{v} %"))),
            ("band", s.band.map(|v| format!("{v} %"))),
            ("ci", s.ci.map(|v| format!("{v} %"))),
        ];
        for (field, value) in fields {
            if let Some(v) = value {
                out.push((key(field), v, false));
            }
        }
        if let Some(role) = s.role {
            out.push((key("role"), role.as_str().to_string(), false));
        }
        if s.ignore {
            out.push((key("ignore"), "true".to_string(), false));
        }
    }
    out
}

/// Lowercase hex of a byte string.
fn hex(bytes: &[u8]) -> String {
    const DIGITS: &[u8; 16] = b"0123456789abcdef";
    let mut s = String::with_capacity(bytes.len() * 2);
    for &b in bytes {
        s.push(char::from(DIGITS[usize::from(b >> 4)]));
        s.push(char::from(DIGITS[usize::from(b & 0xf)]));
    }
    s
}

pub use crate::view::time::format_utc;

fn ser_time<S: serde::Serializer>(t: &SystemTime, s: S) -> Result<S::Ok, S::Error> {
    s.serialize_str(&format_utc(*t))
}

fn ser_opt_time<S: serde::Serializer>(t: &Option<SystemTime>, s: S) -> Result<S::Ok, S::Error> {
    match t {
        Some(t) => s.serialize_str(&format_utc(*t)),
        None => s.serialize_none(),
    }
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn text_hash_is_sha256() {
        // FIPS 180-2 example "abc" (NIST, SHA-256 test vector).
        let p = ParserProvenance::new("x", "built-in", "abc");
        assert_eq!(p.sha256, "ba7816bf8f01cfea414140de5dae2223b00361a396177a9cb410ff61f20015ad");
    }

    #[test]
    fn criteria_rows_mark_defaults() {
        let mut c = Criteria { drift: Some(0.05), ..Default::default() };
        c.series.insert(
            "res_*".into(),
            crate::judge::SeriesCriteria { drop: Some(4.0), ignore: true, ..Default::default() },
        );
        let rows = criteria_in_effect(&c);
        assert_eq!(rows[0], ("residual_drop".into(), "3 dec".into(), true));
        assert_eq!(rows[3], ("drift".into(), "0.05 %".into(), false));
        assert_eq!(rows[4], ("band".into(), "0.5 %".into(), true));
        assert_eq!(rows[6], ("series.res_*.drop".into(), "4 dec".into(), false));
        assert_eq!(rows[7], ("series.res_*.ignore".into(), "true".into(), false));
        assert_eq!(rows.len(), 8);
    }
}
