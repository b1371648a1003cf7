//! What `settle parsers list` prints: every definition with its engine, description and
//! origin, and for one that replaced a definition of the same name, which one it replaced
//! and from where (the later one wins: shipped, then the user folder, then `--parsers`).

use std::fmt::Write;

use crate::parser::{Origin, Registry, RegistryError};

/// Where a definition came from, in words.
pub fn origin_text(origin: Option<&Origin>) -> String {
    match origin {
        Some(Origin::Builtin) => "built in".to_string(),
        Some(Origin::File(p)) => p.display().to_string(),
        None => "nowhere".to_string(),
    }
}

/// The listing: one line per definition; a line below each definition that replaced
/// another, and one below each that does not compile (with the reason).
pub fn list(registry: &Registry) -> String {
    let mut o = String::new();
    let entries = registry.entries();
    let w = entries.iter().map(|e| e.name().len()).max().unwrap_or(4).max(4);
    let dw =
        entries.iter().map(|e| e.description().chars().count()).max().unwrap_or(11).clamp(11, 70);
    let _ = writeln!(o, "{:<w$}  {:<6} {:<dw$}  FROM", "NAME", "ENGINE", "DESCRIPTION");
    for e in entries {
        let _ = writeln!(
            o,
            "{:<w$}  {:<6} {:<dw$}  {}",
            e.name(),
            e.engine(),
            e.description(),
            origin_text(Some(e.origin()))
        );
        if !e.replaced().is_empty() {
            let replaced: Vec<String> = e.replaced().iter().map(|r| origin_text(Some(r))).collect();
            let _ = writeln!(
                o,
                "{:<w$}  ↳ this one is used; it replaces `{}` from {}",
                "",
                e.name(),
                replaced.join(", then ")
            );
        }
        match e.definition() {
            Err(RegistryError::Invalid { message, .. }) => {
                let _ = writeln!(o, "{:<w$}  ✗ cannot be used: {message}", "");
            }
            Err(err) => {
                let _ = writeln!(o, "{:<w$}  ✗ {err}", "");
            }
            Ok(_) => {}
        }
    }
    o
}
