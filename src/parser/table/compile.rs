//! Raw `[table]` section → [`TableProgram`], with every default spelled out.
//!
//! Zero configuration must work on the common file: a header line and numeric rows whose
//! first column is the iteration. So: whitespace delimiter, `#` comments, header looked for
//! automatically, first column as index, columns matching `res*` (any case) are residuals,
//! every other column a monitor.

use super::cells::Delimiter;
use super::{Column, TableProgram, VectorNames};
use crate::parser::compile::parse_role;
use crate::parser::error::Problem;
use crate::parser::raw::{ColumnRef, RawDefinition};
use crate::record::Role;

pub fn compile(raw: RawDefinition) -> Result<TableProgram, Problem> {
    if !raw.rules.is_empty() {
        return Err(Problem::new("rules", "rules belong to engine = \"lines\""));
    }
    if raw.start_after.is_some() {
        return Err(Problem::new("start_after", "start_after belongs to engine = \"lines\""));
    }
    let t = raw.table.unwrap_or_default();
    let delimiter = match t.delimiter.as_deref() {
        None => Delimiter::Whitespace,
        Some(word) => match word {
            "whitespace" => Delimiter::Whitespace,
            "comma" => Delimiter::Byte(b','),
            "tab" => Delimiter::Byte(b'\t'),
            "semicolon" => Delimiter::Byte(b';'),
            other => {
                return Err(Problem::new(
                    "table.delimiter",
                    format!(
                        "unknown delimiter `{other}` (expected whitespace, comma, tab or semicolon)"
                    ),
                ));
            }
        },
    };
    let comments = match t.comment {
        None => vec![b"#".to_vec()],
        Some(c) => {
            let list = c.into_vec();
            if list.iter().any(String::is_empty) {
                return Err(Problem::new("table.comment", "comment prefixes must not be empty"));
            }
            list.into_iter().map(String::into_bytes).collect()
        }
    };
    let header_auto = match t.header.as_deref() {
        None | Some("auto") => true,
        Some("none") => false,
        Some(other) => {
            return Err(Problem::new(
                "table.header",
                format!("unknown header mode `{other}` (expected auto or none)"),
            ));
        }
    };
    if let Some(cols) = &t.columns
        && cols.is_empty()
    {
        return Err(Problem::new("table.columns", "must list at least one column name"));
    }
    let column = |c: Option<ColumnRef>, key: &str| -> Result<Option<Column>, Problem> {
        match c {
            None => Ok(None),
            Some(ColumnRef::Position(p)) if p >= 1 => {
                Ok(Some(Column::Position(usize::try_from(p - 1).unwrap_or(usize::MAX))))
            }
            Some(ColumnRef::Position(p)) => Err(Problem::new(
                key,
                format!("column position {p} is invalid: positions start at 1"),
            )),
            Some(ColumnRef::Name(n)) if n.is_empty() => {
                Err(Problem::new(key, "column name must not be empty"))
            }
            Some(ColumnRef::Name(n)) => Ok(Some(Column::Name(n))),
        }
    };
    let iteration = column(t.iteration, "table.iteration")?;
    let time = column(t.time, "table.time")?;
    if iteration.is_some() && iteration == time {
        return Err(Problem::new("table.time", "the time column is also the iteration column"));
    }
    let default_role = match &t.default_role {
        Some(w) => parse_role(w, "table.default_role")?,
        None => Role::Monitor,
    };
    let mut roles = Vec::new();
    for (i, r) in t.roles.into_iter().enumerate() {
        let role = parse_role(&r.role, &format!("table.roles[{i}].role"))?;
        let globs = r.columns.into_vec();
        if globs.is_empty() {
            return Err(Problem::new(
                format!("table.roles[{i}].columns"),
                "list at least one name",
            ));
        }
        roles.push((globs, role));
    }
    let vectors = match t.vectors.as_deref() {
        None | Some("xyz") => VectorNames::Xyz,
        Some("index") => VectorNames::Index,
        Some(other) => {
            return Err(Problem::new(
                "table.vectors",
                format!("unknown vector naming `{other}` (expected xyz or index)"),
            ));
        }
    };
    Ok(TableProgram {
        delimiter,
        comments,
        header_auto,
        columns: t.columns,
        iteration,
        time,
        auto_index: t.auto_index.unwrap_or(true),
        residuals: t.residuals.unwrap_or_else(|| vec!["res*".to_string()]),
        ignore: t.ignore.unwrap_or_default(),
        roles,
        default_role,
        case_sensitive: t.case_sensitive.unwrap_or(false),
        vectors,
    })
}
