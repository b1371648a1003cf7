//! The raw `[[action]]` tables as the user typed them (serde, `deny_unknown_fields`).
//!
//! Nothing here is trusted or checked beyond its TOML shape; [`super::plan::load_plan`]
//! turns a list of these into a validated [`super::ActionPlan`] at one boundary, so nothing
//! downstream re-validates.

use std::time::Duration;

use serde::{Deserialize, Serialize};

/// One `[[action]]` table of `settle.toml`.
///
/// ```toml
/// [[action]]
/// on = "diverging"                 # a verdict word, or a list of them
/// command = ["scancel", "{job}"]   # argument vector, run without a shell
/// hold = 3                         # consecutive new records the verdict must hold (default 3)
/// timeout = "30s"                  # "500ms", "30s", "2m", or seconds as a number (default 30 s)
/// ```
#[derive(Debug, Clone, PartialEq, Serialize, Deserialize)]
#[serde(deny_unknown_fields)]
pub struct ActionConfig {
    /// The verdict (or verdicts) that trigger the command.
    pub on: OnSpec,
    /// Program and arguments. Arguments that are exactly `{job}`, `{run}`, `{verdict}` or
    /// `{iteration}` are replaced by the validated fact; nothing else is substituted.
    pub command: Vec<String>,
    /// Consecutive new records the verdict must have held before the command fires.
    #[serde(default)]
    pub hold: Option<u64>,
    /// How long the command may run before its process group is killed.
    #[serde(default)]
    pub timeout: Option<TimeoutSpec>,
}

impl ActionConfig {
    /// Default of `hold`: three consecutive records (RELIABILITY §6, "require 3 consecutive
    /// matching values"; common practice, no source).
    pub const DEFAULT_HOLD: u64 = 3;
    /// Default of `timeout`: 30 s.
    pub const DEFAULT_TIMEOUT: Duration = Duration::from_secs(30);
    /// Longest accepted `timeout`: one hour. An action is a short scheduler call, not a job.
    pub const MAX_TIMEOUT: Duration = Duration::from_secs(3600);
}

/// `on = "diverging"` or `on = ["diverging", "stale"]`.
#[derive(Debug, Clone, PartialEq, Serialize, Deserialize)]
#[serde(untagged)]
pub enum OnSpec {
    One(String),
    Many(Vec<String>),
}

impl OnSpec {
    /// The verdict words, in the order written.
    pub fn words(&self) -> Vec<&str> {
        match self {
            OnSpec::One(w) => vec![w.as_str()],
            OnSpec::Many(ws) => ws.iter().map(String::as_str).collect(),
        }
    }
}

/// `timeout = "30s"` or `timeout = 30` (seconds; fractions allowed).
#[derive(Debug, Clone, PartialEq, Serialize, Deserialize)]
#[serde(untagged)]
pub enum TimeoutSpec {
    Seconds(f64),
    Text(String),
}

impl TimeoutSpec {
    /// The duration, or a message saying what was expected.
    pub fn to_duration(&self) -> Result<Duration, String> {
        let secs = match self {
            TimeoutSpec::Seconds(s) => *s,
            TimeoutSpec::Text(t) => parse_seconds(t)?,
        };
        if !secs.is_finite() || secs <= 0.0 {
            return Err(format!("expected a positive duration, found {secs}"));
        }
        let d = Duration::from_secs_f64(secs.min(ActionConfig::MAX_TIMEOUT.as_secs_f64() + 1.0));
        if d > ActionConfig::MAX_TIMEOUT {
            return Err(format!(
                "{secs} s is longer than the limit of {} s",
                ActionConfig::MAX_TIMEOUT.as_secs()
            ));
        }
        Ok(d)
    }
}

/// Parse `"500ms"`, `"30s"`, `"30 s"`, `"2m"`, `"2min"`, `"1h"` or a bare number of seconds.
fn parse_seconds(text: &str) -> Result<f64, String> {
    let t = text.trim();
    let split = t.find(|c: char| !(c.is_ascii_digit() || c == '.')).unwrap_or(t.len());
    let (num, unit) = t.split_at(split);
    let expected =
        || format!("expected a duration such as \"30s\", \"500ms\" or \"2m\", found {text:?}");
    let value: f64 = num.parse().map_err(|_| expected())?;
    let scale = match unit.trim() {
        "" | "s" | "sec" | "secs" => 1.0,
        "ms" => 1e-3,
        "m" | "min" | "mins" => 60.0,
        "h" => 3600.0,
        _ => return Err(expected()),
    };
    Ok(value * scale)
}

#[cfg(test)]
mod tests {
    use super::*;

    #[derive(Deserialize)]
    struct Wrap {
        action: Vec<ActionConfig>,
    }

    #[test]
    fn parses_full_and_minimal_tables() {
        let text = r#"
            [[action]]
            on = "diverging"
            command = ["scancel", "{job}"]
            hold = 5
            timeout = "2m"

            [[action]]
            on = ["stalled", "stale"]
            command = ["true"]
            timeout = 0.5
        "#;
        let w: Wrap = toml::from_str(text).expect("valid test TOML");
        assert_eq!(w.action.len(), 2);
        assert_eq!(w.action[0].on.words(), vec!["diverging"]);
        assert_eq!(w.action[0].hold, Some(5));
        assert_eq!(
            w.action[0].timeout.as_ref().map(|t| t.to_duration()),
            Some(Ok(Duration::from_secs(120)))
        );
        assert_eq!(w.action[1].on.words(), vec!["stalled", "stale"]);
        assert_eq!(w.action[1].hold, None);
        assert_eq!(
            w.action[1].timeout.as_ref().map(|t| t.to_duration()),
            Some(Ok(Duration::from_millis(500)))
        );
    }

    #[test]
    fn integer_timeout_is_seconds() {
        let w: Wrap =
            toml::from_str("[[action]]\non = \"stale\"\ncommand = [\"true\"]\ntimeout = 30\n")
                .expect("valid test TOML");
        assert_eq!(
            w.action[0].timeout.as_ref().map(|t| t.to_duration()),
            Some(Ok(Duration::from_secs(30)))
        );
    }

    #[test]
    fn unknown_key_is_rejected() {
        let r: Result<Wrap, _> =
            toml::from_str("[[action]]\non = \"stale\"\ncommand = [\"true\"]\nshell = true\n");
        let msg = r.err().map(|e| e.to_string()).unwrap_or_default();
        assert!(msg.contains("shell"), "{msg}");
    }

    #[test]
    fn duration_words() {
        assert_eq!(parse_seconds("30s"), Ok(30.0));
        assert_eq!(parse_seconds("30 s"), Ok(30.0));
        assert_eq!(parse_seconds("250ms"), Ok(0.25));
        assert_eq!(parse_seconds("1.5min"), Ok(90.0));
        assert_eq!(parse_seconds("1h"), Ok(3600.0));
        assert!(parse_seconds("soon").is_err());
        assert!(parse_seconds("3 weeks").is_err());
        assert!(TimeoutSpec::Seconds(0.0).to_duration().is_err());
        assert!(TimeoutSpec::Seconds(-1.0).to_duration().is_err());
        assert!(TimeoutSpec::Seconds(f64::NAN).to_duration().is_err());
        assert!(TimeoutSpec::Text("2h".into()).to_duration().is_err());
        assert_eq!(TimeoutSpec::Text("1h".into()).to_duration(), Ok(Duration::from_secs(3600)));
    }
}
