//! The convergence report (`settle report`): what a run did, what the judge concluded and why,
//! with plots, evidence, provenance and, for a mesh study, the grid-convergence index.
//!
//! Three formats share one content model (the private `content` module): a self-contained
//! HTML file with inline SVG ([`render_html`]), Markdown with SVG files beside it
//! ([`render_markdown`]) and JSON ([`render_json`]). The renderers are pure functions of a
//! [`ReportInput`]; only [`Provenance::collect`] (hashing the sources) and [`write_report`]
//! (writing the files) do I/O. Every report states plainly that a verdict is evidence, not
//! proof (README, the caution at the top).
//!
//! Sections, in every format: the run name with its verdict, `since` and meaning; the safety
//! statement; *why* (the findings that caused the verdict, with evidence); the criteria table
//! (threshold, final value, met, held since, default or user-set); the residual history plot
//! (log scale, thresholds dashed, restarts marked) with per-residual trends; per monitor a
//! summary row and a plot (final window shaded, mean and confidence band, start-up transient
//! marked, extrapolated value); all findings; grid convergence when a mesh study is given;
//! what was read (line counts, restarts, last warnings and errors); provenance (version,
//! command line, time, parser hashes, file sizes, times and hashes, criteria in effect).

mod content;
pub mod gci;
pub mod html;
pub mod json;
pub mod markdown;
pub mod provenance;
mod svg;
pub mod text;

use std::fs;
use std::path::{Path, PathBuf};

use thiserror::Error;

use crate::judge::{Criteria, Judgement};
use crate::run::RunStore;

pub use gci::{GciError, GciResult, GciWarning, GridPoint, GridSize, MeshStudy, analyse};
pub use html::render_html;
pub use json::render_json;
pub use markdown::render_markdown;
pub use provenance::{ParserProvenance, Provenance, SourceProvenance, format_utc};

/// Everything a report is made from. No field is read from disk by the renderers.
#[derive(Debug, Clone, Copy)]
pub struct ReportInput<'a> {
    pub run: &'a RunStore,
    pub judgement: &'a Judgement,
    pub criteria: &'a Criteria,
    pub provenance: &'a Provenance,
    /// A three-grid study of one monitor, when the user gave one.
    pub mesh: Option<&'a MeshStudy>,
}

/// A report that could not be written.
#[derive(Debug, Error)]
pub enum ReportError {
    #[error(
        "cannot tell the report format of {path}: expected a name ending in .html, .htm, .md \
         or .json"
    )]
    UnknownFormat { path: PathBuf },
    #[error("cannot write {path}: {source}")]
    Io {
        path: PathBuf,
        #[source]
        source: std::io::Error,
    },
}

/// The report formats, chosen by file extension.
#[derive(Debug, Clone, Copy, PartialEq, Eq)]
pub enum Format {
    Html,
    Markdown,
    Json,
}

impl Format {
    /// The format for `path`'s extension (case-insensitive), if it is one we write.
    pub fn from_path(path: &Path) -> Option<Format> {
        let ext = path.extension()?.to_str()?.to_ascii_lowercase();
        match ext.as_str() {
            "html" | "htm" => Some(Format::Html),
            "md" | "markdown" => Some(Format::Markdown),
            "json" => Some(Format::Json),
            _ => None,
        }
    }
}

/// Write the report to `path` in the format its extension names; Markdown also writes its SVG
/// plots beside it (named after the report's file stem). Returns every file written, the
/// report first.
pub fn write_report(path: &Path, input: &ReportInput<'_>) -> Result<Vec<PathBuf>, ReportError> {
    let format =
        Format::from_path(path).ok_or_else(|| ReportError::UnknownFormat { path: path.into() })?;
    let write = |p: &Path, text: &str| {
        fs::write(p, text).map_err(|source| ReportError::Io { path: p.to_path_buf(), source })
    };
    match format {
        Format::Html => {
            write(path, &render_html(input))?;
            Ok(vec![path.to_path_buf()])
        }
        Format::Json => {
            let mut text = serde_json::to_string_pretty(&render_json(input))
                .expect("a serde_json::Value always serialises");
            text.push('\n');
            write(path, &text)?;
            Ok(vec![path.to_path_buf()])
        }
        Format::Markdown => {
            let stem = path.file_stem().map_or("report".into(), |s| s.to_string_lossy());
            let prefix = format!("{}-", text::slug(&stem));
            let (md, svgs) = render_markdown(input, &prefix);
            let dir = path.parent().unwrap_or(Path::new(""));
            let mut written = vec![path.to_path_buf()];
            write(path, &md)?;
            for (name, svg) in svgs {
                let p = dir.join(name);
                write(&p, &svg)?;
                written.push(p);
            }
            Ok(written)
        }
    }
}
