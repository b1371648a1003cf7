//! Raw `lines` rules → [`LinesProgram`]: which keys each rule kind accepts, which capture
//! names it may use, and how each named capture becomes a series.
//!
//! Capture names `iteration` and `time` belong to step rules, `message` to event and end
//! rules, `name` (a captured series name) to step and value rules. Every other named group
//! of a step or value rule is a value and becomes a series.

use crate::parser::compile::{parse_role, parse_severity};
use crate::parser::error::Problem;
use crate::parser::lines::{Attach, Dispatch, Kind, LinesProgram, Repeat, Rule, ValueCapture};
use crate::parser::matcher::Matcher;
use crate::parser::raw::{RawDefinition, RawRule};
use crate::record::{Role, Severity};

const RESERVED: [&str; 4] = ["iteration", "time", "name", "message"];

pub fn compile(raw: RawDefinition) -> Result<LinesProgram, Problem> {
    if raw.table.is_some() {
        return Err(Problem::new("table", "a `[table]` section needs engine = \"table\""));
    }
    let start_after = match &raw.start_after {
        Some(p) => Some(Matcher::new(p, None).map_err(|m| Problem::new("start_after", m))?),
        None => None,
    };
    let mut prog = LinesProgram {
        start_after,
        rules: Vec::new(),
        steps: Vec::new(),
        values: Vec::new(),
        events: Vec::new(),
        ends: Vec::new(),
        anchors: Vec::new(),
        dispatch: Dispatch::new(&[]),
    };
    let mut anchor_patterns: Vec<String> = Vec::new();
    for (i, r) in raw.rules.iter().enumerate() {
        let rule = compile_rule(i, r, &mut prog.anchors, &mut anchor_patterns)?;
        let list = match rule.kind {
            Kind::Step => &mut prog.steps,
            Kind::Value => &mut prog.values,
            Kind::Event => &mut prog.events,
            Kind::End => &mut prog.ends,
        };
        list.push(i);
        prog.rules.push(rule);
    }
    prog.dispatch = Dispatch::new(&prog.rules);
    if prog.steps.is_empty() {
        return Err(Problem::new(
            "rules",
            "a lines definition needs at least one rule with kind = \"step\" (the line that \
             opens each record)",
        ));
    }
    Ok(prog)
}

fn compile_rule(
    i: usize,
    r: &RawRule,
    anchors: &mut Vec<Matcher>,
    anchor_patterns: &mut Vec<String>,
) -> Result<Rule, Problem> {
    let key = format!("rules[{i}]");
    let k = |field: &str| format!("{key}.{field}");
    let kind = match r.kind.as_str() {
        "step" => Kind::Step,
        "value" => Kind::Value,
        "event" => Kind::Event,
        "end" => Kind::End,
        other => {
            return Err(Problem::new(
                k("kind"),
                format!("unknown rule kind `{other}` (expected step, value, event or end)"),
            ));
        }
    };
    let not_for = |field: &str, present: bool| -> Result<(), Problem> {
        if present {
            Err(Problem::new(k(field), format!("not used by {} rules", kind.as_str())))
        } else {
            Ok(())
        }
    };
    match kind {
        Kind::Step => {
            not_for("after", r.after.is_some())?;
            not_for("attach", r.attach.is_some())?;
            not_for("severity", r.severity.is_some())?;
        }
        Kind::Value => not_for("severity", r.severity.is_some())?,
        Kind::Event => {
            not_for("series", r.series.is_some())?;
            not_for("role", r.role.is_some())?;
            not_for("attach", r.attach.is_some())?;
            not_for("captures", !r.captures.is_empty())?;
        }
        Kind::End => {
            not_for("series", r.series.is_some())?;
            not_for("role", r.role.is_some())?;
            not_for("repeat", r.repeat.is_some())?;
            not_for("attach", r.attach.is_some())?;
            not_for("severity", r.severity.is_some())?;
            not_for("captures", !r.captures.is_empty())?;
            not_for("after", r.after.is_some())?;
        }
    }
    if let Some(lit) = &r.literal
        && lit.is_empty()
    {
        return Err(Problem::new(k("literal"), "must not be empty"));
    }
    let matcher = Matcher::new(&r.pattern, r.literal.as_deref())
        .map_err(|m| Problem::new(k("pattern"), m))?;

    let mut name_group = None;
    let mut iteration_group = None;
    let mut time_group = None;
    let mut message_group = None;
    let mut value_groups: Vec<(usize, String)> = Vec::new();
    for (gi, gname) in matcher.regex.capture_names().enumerate() {
        let Some(gname) = gname else { continue };
        match gname {
            "iteration" | "time" if kind != Kind::Step => {
                return Err(Problem::new(
                    k("pattern"),
                    format!("the `{gname}` capture belongs in step rules (kind = \"step\")"),
                ));
            }
            "iteration" => iteration_group = Some(gi),
            "time" => time_group = Some(gi),
            "message" if !matches!(kind, Kind::Event | Kind::End) => {
                return Err(Problem::new(
                    k("pattern"),
                    "the `message` capture belongs in event and end rules",
                ));
            }
            "message" => message_group = Some(gi),
            "name" if matches!(kind, Kind::Event | Kind::End) => {
                return Err(Problem::new(
                    k("pattern"),
                    format!(
                        "{} rules use only a `message` capture; rename group `name`",
                        kind.as_str()
                    ),
                ));
            }
            "name" => name_group = Some(gi),
            other if matches!(kind, Kind::Event | Kind::End) => {
                return Err(Problem::new(
                    k("pattern"),
                    format!(
                        "{} rules use only a `message` capture; group `{other}` has no meaning \
                         here (use an unnamed group)",
                        kind.as_str()
                    ),
                ));
            }
            other => value_groups.push((gi, other.to_string())),
        }
    }
    debug_assert!(value_groups.iter().all(|(_, n)| !RESERVED.contains(&n.as_str())));
    if kind == Kind::Value && value_groups.is_empty() {
        return Err(Problem::new(
            k("pattern"),
            "value rule has no value capture: name a group `(?P<value>...)`, or give each \
             value its own named group",
        ));
    }
    for cap in r.captures.keys() {
        if !value_groups.iter().any(|(_, n)| n == cap) {
            return Err(Problem::new(
                format!("{key}.captures.{cap}"),
                format!("the pattern has no value group named `{cap}`"),
            ));
        }
    }
    if r.series.is_some() && name_group.is_none() && value_groups.is_empty() {
        return Err(Problem::new(k("series"), "the pattern captures no values to name"));
    }

    let default_role = if kind == Kind::Step { Role::Info } else { Role::Residual };
    let rule_role = match &r.role {
        Some(w) => parse_role(w, &k("role"))?,
        None => default_role,
    };
    let mut values = Vec::new();
    for (gi, gname) in &value_groups {
        let raw_cap = r.captures.get(gname);
        let cap_key = format!("{key}.captures.{gname}");
        let role = match raw_cap.and_then(|c| c.role.as_deref()) {
            Some(w) => parse_role(w, &format!("{cap_key}.role"))?,
            None => rule_role,
        };
        let (series, series_key) = match raw_cap.and_then(|c| c.series.clone()) {
            Some(s) => (s, format!("{cap_key}.series")),
            None if gname == "value" => match (&r.series, name_group) {
                (Some(s), _) => (s.clone(), k("series")),
                (None, Some(_)) => ("{name}".to_string(), k("pattern")),
                (None, None) => {
                    return Err(Problem::new(
                        k("series"),
                        "the `value` capture needs a series name: set `series = \"...\"` or \
                         capture the name with `(?P<name>...)`",
                    ));
                }
            },
            None => match (name_group, &r.series) {
                (Some(_), _) => (format!("{{name}}/{gname}"), k("pattern")),
                (None, Some(s)) => (format!("{s}/{gname}"), k("series")),
                (None, None) => (gname.clone(), k("pattern")),
            },
        };
        let uses_name = check_template(&series, &series_key, name_group.is_some())?;
        values.push(ValueCapture { group: *gi, label: gname.clone(), series, uses_name, role });
    }

    let repeat = match r.repeat.as_deref() {
        None if kind == Kind::Event => Repeat::All,
        None => Repeat::Last,
        Some("first") => Repeat::First,
        Some("last") => Repeat::Last,
        Some("min") => Repeat::Min,
        Some("max") => Repeat::Max,
        Some("all") => Repeat::All,
        Some(other) => {
            return Err(Problem::new(
                k("repeat"),
                format!("unknown repeat policy `{other}` (expected first, last, min, max or all)"),
            ));
        }
    };
    if kind == Kind::Event && !matches!(repeat, Repeat::First | Repeat::All) {
        return Err(Problem::new(
            k("repeat"),
            "event rules accept repeat = \"first\" (once per record) or \"all\" (every match)",
        ));
    }
    let attach = match r.attach.as_deref() {
        None | Some("current") => Attach::Current,
        Some("next") => Attach::Next,
        Some(other) => {
            return Err(Problem::new(
                k("attach"),
                format!("unknown attach `{other}` (expected current or next)"),
            ));
        }
    };
    let severity = match &r.severity {
        Some(w) => parse_severity(w, &k("severity"))?,
        None => Severity::Warning,
    };
    let event_name = match (&r.name, kind) {
        (Some(n), _) => n.clone(),
        (None, Kind::Event) => {
            return Err(Problem::new(
                key.clone(),
                "event rules need a `name` (the event's rule name, e.g. name = \"clipping\")",
            ));
        }
        (None, _) => String::new(),
    };
    let after = match &r.after {
        Some(p) => Some(match anchor_patterns.iter().position(|q| q == p) {
            Some(ix) => ix,
            None => {
                anchors.push(Matcher::new(p, None).map_err(|m| Problem::new(k("after"), m))?);
                anchor_patterns.push(p.clone());
                anchors.len() - 1
            }
        }),
        None => None,
    };
    let label = match &r.name {
        Some(n) => format!("{key} ({n})"),
        None => key.clone(),
    };
    Ok(Rule {
        label,
        kind,
        matcher,
        after,
        repeat,
        attach,
        name_group,
        iteration_group,
        time_group,
        message_group,
        values,
        severity,
        event_name,
    })
}

/// Check a series name template; returns whether it uses `{name}`.
fn check_template(t: &str, key: &str, has_name: bool) -> Result<bool, Problem> {
    let mut rest = t;
    let mut uses = false;
    while let Some(open) = rest.find('{') {
        let after = &rest[open..];
        if let Some(tail) = after.strip_prefix("{name}") {
            uses = true;
            rest = tail;
        } else {
            let end = after.find('}').map_or(after.len(), |e| e + 1);
            return Err(Problem::new(
                key,
                format!(
                    "unknown placeholder `{}` in series name (only {{name}} exists)",
                    &after[..end]
                ),
            ));
        }
    }
    if uses && !has_name {
        return Err(Problem::new(
            key,
            format!("series name `{t}` uses {{name}} but the pattern has no `(?P<name>...)` group"),
        ));
    }
    if t.replace("{name}", "").trim().is_empty() && !uses {
        return Err(Problem::new(key, "series name must not be empty"));
    }
    Ok(uses)
}
