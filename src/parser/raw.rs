//! The parser definition exactly as typed in TOML: the "raw" half of raw-vs-validated.
//!
//! Every struct denies unknown keys so a typo (`patern`) is an error naming the key, never a
//! silently ignored setting. Words with a fixed set of values (roles, repeat policies,
//! severities, delimiters) stay strings here and are checked in `compile`, which can then
//! say which values are allowed in our own words. Nothing outside `compile` reads these types.

use std::collections::BTreeMap;

use serde::Deserialize;

#[derive(Debug, Deserialize)]
#[serde(deny_unknown_fields)]
pub struct RawDefinition {
    pub name: Option<String>,
    pub description: Option<String>,
    pub engine: String,
    #[serde(default)]
    pub detect: Vec<RawDetect>,
    pub start_after: Option<String>,
    #[serde(default)]
    pub rules: Vec<RawRule>,
    pub table: Option<RawTable>,
}

#[derive(Debug, Deserialize)]
#[serde(deny_unknown_fields)]
pub struct RawDetect {
    pub pattern: String,
    pub weight: Option<i64>,
    pub min_lines: Option<i64>,
}

#[derive(Debug, Deserialize)]
#[serde(deny_unknown_fields)]
pub struct RawRule {
    pub kind: String,
    pub name: Option<String>,
    pub pattern: String,
    pub literal: Option<String>,
    pub after: Option<String>,
    pub series: Option<String>,
    pub role: Option<String>,
    pub repeat: Option<String>,
    pub attach: Option<String>,
    pub severity: Option<String>,
    #[serde(default)]
    pub captures: BTreeMap<String, RawCapture>,
}

#[derive(Debug, Deserialize)]
#[serde(deny_unknown_fields)]
pub struct RawCapture {
    pub series: Option<String>,
    pub role: Option<String>,
}

#[derive(Debug, Default, Deserialize)]
#[serde(deny_unknown_fields)]
pub struct RawTable {
    pub delimiter: Option<String>,
    pub comment: Option<OneOrMany>,
    pub header: Option<String>,
    pub columns: Option<Vec<String>>,
    pub iteration: Option<ColumnRef>,
    pub time: Option<ColumnRef>,
    pub auto_index: Option<bool>,
    pub residuals: Option<Vec<String>>,
    pub ignore: Option<Vec<String>>,
    pub default_role: Option<String>,
    #[serde(default)]
    pub roles: Vec<RawRoleRule>,
    pub case_sensitive: Option<bool>,
    pub vectors: Option<String>,
}

#[derive(Debug, Deserialize)]
#[serde(deny_unknown_fields)]
pub struct RawRoleRule {
    pub columns: OneOrMany,
    pub role: String,
}

/// A string or a list of strings (`comment = "#"` or `comment = ["#", "%"]`).
#[derive(Debug, Deserialize)]
#[serde(untagged)]
pub enum OneOrMany {
    One(String),
    Many(Vec<String>),
}

impl OneOrMany {
    pub fn into_vec(self) -> Vec<String> {
        match self {
            OneOrMany::One(s) => vec![s],
            OneOrMany::Many(v) => v,
        }
    }
}

/// A table column given by name (`"step"`) or by 1-based position (`1`).
#[derive(Debug, Clone, Deserialize)]
#[serde(untagged)]
pub enum ColumnRef {
    Position(i64),
    Name(String),
}
