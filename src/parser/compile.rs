//! The one boundary between what a user typed and what the engines run.
//!
//! `compile` turns a [`RawDefinition`] into a [`Compiled`] definition: engine chosen, regexes
//! built, capture names checked against what each rule kind may use, words such as roles and
//! repeat policies resolved. Problems come back as [`Problem`]s carrying the TOML key path,
//! which `error.rs` places at a line and column. Nothing downstream validates again.

use std::sync::Arc;

use super::error::Problem;
use super::lines::LinesProgram;
use super::matcher::Matcher;
use super::raw::{RawDefinition, RawDetect};
use super::table::TableProgram;
use crate::record::{Role, Severity};

/// A compiled engine program, shared by every parser made from the definition.
#[derive(Debug, Clone)]
pub enum Program {
    Lines(Arc<LinesProgram>),
    Table(Arc<TableProgram>),
}

/// One compiled detection pattern.
#[derive(Debug, Clone)]
pub struct DetectRule {
    pub pattern: String,
    pub matcher: Matcher,
    pub weight: i64,
    pub min_lines: usize,
}

/// Everything a definition says, validated.
#[derive(Debug, Clone)]
pub struct Compiled {
    pub name: String,
    pub description: String,
    pub program: Program,
    pub detect: Vec<DetectRule>,
}

/// Validate and compile. `default_name` (the file stem) is used when the file has no `name`.
pub fn compile(raw: RawDefinition, default_name: &str) -> Result<Compiled, Problem> {
    let name = raw.name.clone().unwrap_or_else(|| default_name.to_string());
    if name.is_empty()
        || !name.chars().all(|c| c.is_ascii_alphanumeric() || matches!(c, '_' | '-' | '.'))
    {
        return Err(Problem::new(
            "name",
            format!("`{name}` is not a usable name: use letters, digits, `_`, `-` or `.`"),
        ));
    }
    let description = raw.description.clone().unwrap_or_default();
    let detect = compile_detect(&raw.detect)?;
    let program = match raw.engine.as_str() {
        "lines" => Program::Lines(Arc::new(super::lines::compile::compile(raw)?)),
        "table" => Program::Table(Arc::new(super::table::compile::compile(raw)?)),
        other => {
            return Err(Problem::new(
                "engine",
                format!("unknown engine `{other}` (expected `lines` or `table`)"),
            ));
        }
    };
    Ok(Compiled { name, description, program, detect })
}

/// The `[[detect]]` patterns alone: what scoring a file needs, without the engine program
/// (the registry compiles definitions lazily and detection needs only these).
pub fn compile_detect(raw: &[RawDetect]) -> Result<Vec<DetectRule>, Problem> {
    let mut detect = Vec::new();
    for (i, d) in raw.iter().enumerate() {
        let key = format!("detect[{i}]");
        let matcher = Matcher::new(&d.pattern, None)
            .map_err(|m| Problem::new(format!("{key}.pattern"), m))?;
        let min_lines = d.min_lines.unwrap_or(1);
        if min_lines < 1 {
            return Err(Problem::new(format!("{key}.min_lines"), "must be at least 1"));
        }
        detect.push(DetectRule {
            pattern: d.pattern.clone(),
            matcher,
            weight: d.weight.unwrap_or(1),
            min_lines: usize::try_from(min_lines).unwrap_or(usize::MAX),
        });
    }
    Ok(detect)
}

/// `residual`, `monitor`, `indicator` or `info`.
pub fn parse_role(word: &str, key: &str) -> Result<Role, Problem> {
    match word {
        "residual" => Ok(Role::Residual),
        "monitor" => Ok(Role::Monitor),
        "indicator" => Ok(Role::Indicator),
        "info" => Ok(Role::Info),
        other => Err(Problem::new(
            key,
            format!("unknown role `{other}` (expected residual, monitor, indicator or info)"),
        )),
    }
}

/// `info`, `warning` or `error`.
pub fn parse_severity(word: &str, key: &str) -> Result<Severity, Problem> {
    match word {
        "info" => Ok(Severity::Info),
        "warning" => Ok(Severity::Warning),
        "error" => Ok(Severity::Error),
        other => Err(Problem::new(
            key,
            format!("unknown severity `{other}` (expected info, warning or error)"),
        )),
    }
}
