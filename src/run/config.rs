//! The run config `settle.toml` beside a case: run name, sources, criteria, stale limit and
//! actions. Raw (serde, unknown keys rejected) and validated ([`RunSpec`]) are two types;
//! nothing downstream re-validates.

use std::path::{Path, PathBuf};
use std::time::Duration;

use serde::Deserialize;
use thiserror::Error;

use crate::actions::{ActionConfig, FileFacts};
use crate::judge::Criteria;

/// File name looked for in case directories.
pub const CONFIG_NAME: &str = "settle.toml";
/// Default time without growth before a live run is `stale`.
pub const DEFAULT_STALE_LIMIT: Duration = Duration::from_secs(300);

/// Errors reading or validating a run config.
#[derive(Debug, Error)]
pub enum ConfigError {
    #[error("cannot read run config {path}: {source}")]
    Read { path: PathBuf, source: std::io::Error },
    /// `message` starts with the file, line, column and key of the problem.
    #[error("run config {message}")]
    Syntax { path: PathBuf, message: String },
    #[error("run config {path}: key `{key}`: {message}")]
    Invalid { path: PathBuf, key: String, message: String },
}

/// A duration written as seconds (`90`, `2.5`) or with a unit (`500ms`, `30s`, `5m`, `1h`).
#[derive(Debug, Clone, PartialEq, Deserialize)]
#[serde(untagged)]
pub enum RawDuration {
    Seconds(f64),
    Text(String),
}

impl RawDuration {
    /// Convert, or say what was expected.
    pub fn to_duration(&self) -> Result<Duration, String> {
        match self {
            RawDuration::Seconds(s) => seconds(*s),
            RawDuration::Text(t) => parse_duration(t),
        }
    }
}

fn seconds(s: f64) -> Result<Duration, String> {
    if (0.0..1e9).contains(&s) {
        Ok(Duration::from_secs_f64(s))
    } else {
        Err(format!("expected a non-negative number of seconds, found {s}"))
    }
}

/// Parse `500ms`, `30s`, `5m`, `1h`, `2.5` (seconds).
pub fn parse_duration(text: &str) -> Result<Duration, String> {
    let t = text.trim();
    let split = t.find(|c: char| !(c.is_ascii_digit() || c == '.')).unwrap_or(t.len());
    let (num, unit) = t.split_at(split);
    let value: f64 = num
        .parse()
        .map_err(|_| format!("expected a duration like `30s`, `5m` or `500ms`, found `{text}`"))?;
    let factor = match unit.trim() {
        "" | "s" => 1.0,
        "ms" => 1e-3,
        "m" | "min" => 60.0,
        "h" => 3600.0,
        other => {
            return Err(format!("unknown duration unit `{other}` in `{text}` (use ms, s, m or h)"));
        }
    };
    seconds(value * factor)
}

/// One `[[source]]` table as written.
#[derive(Debug, Clone, Deserialize, PartialEq)]
#[serde(deny_unknown_fields)]
pub struct RawSource {
    /// File path, or a glob in the file-name part (`run.log.*` for restart logs). Relative
    /// paths are relative to the config file's directory.
    pub path: String,
    /// Parser definition name; detected automatically when absent.
    pub parser: Option<String>,
}

/// `settle.toml` as written.
#[derive(Debug, Clone, Deserialize, Default)]
#[serde(deny_unknown_fields)]
pub struct RawConfig {
    pub name: Option<String>,
    #[serde(default)]
    pub source: Vec<RawSource>,
    #[serde(default)]
    pub criteria: Criteria,
    pub stale_limit: Option<RawDuration>,
    /// Scheduler job id of the run, for the `{job}` placeholder of actions.
    pub job: Option<String>,
    /// Opt-in commands on verdict transitions; validated by the actions module.
    #[serde(default)]
    pub action: Vec<ActionConfig>,
}

/// A source ready to follow.
#[derive(Debug, Clone, PartialEq)]
pub struct SourceSpec {
    /// Path or glob, resolved against the config directory.
    pub path: PathBuf,
    /// As the user wrote it (used as the source's label).
    pub label: String,
    pub parser: Option<String>,
}

/// A validated run.
#[derive(Debug, Clone)]
pub struct RunSpec {
    pub name: String,
    /// The case directory (config directory, or the first file's directory).
    pub dir: PathBuf,
    pub sources: Vec<SourceSpec>,
    pub criteria: Criteria,
    pub stale_limit: Duration,
    pub job: Option<String>,
    pub actions: Vec<ActionConfig>,
    /// The config file, when there is one.
    pub config_path: Option<PathBuf>,
    /// Owner, mode and type of the config file whose text this spec was parsed from (taken
    /// from the same descriptor, see [`load`]); the trust check of actions uses these and
    /// never looks at the file by name again. `None` without a config file, or when the
    /// text did not come from [`load`].
    pub config_facts: Option<FileFacts>,
}

/// Read and validate a `settle.toml`.
///
/// The file is opened once: its owner and mode are taken from that descriptor (`fstat`)
/// and its text is read from it, so the actions' trust check judges the very file whose
/// text was parsed, even if the name is swapped meanwhile.
pub fn load(path: &Path) -> Result<RunSpec, ConfigError> {
    let (text, facts) = crate::actions::read_config(path)
        .map_err(|source| ConfigError::Read { path: path.to_path_buf(), source })?;
    let mut spec = parse(&text, path)?;
    spec.config_facts = Some(facts);
    Ok(spec)
}

/// Validate config text; `path` names the file in errors and anchors relative paths.
pub fn parse(text: &str, path: &Path) -> Result<RunSpec, ConfigError> {
    let raw: RawConfig = toml::from_str(text).map_err(|e| ConfigError::Syntax {
        path: path.to_path_buf(),
        message: crate::parser::toml_error_message(&path.display().to_string(), text, &e),
    })?;
    let dir = path.parent().map(Path::to_path_buf).unwrap_or_default();
    let dir = if dir.as_os_str().is_empty() { PathBuf::from(".") } else { dir };
    let invalid = |key: &str, message: String| ConfigError::Invalid {
        path: path.to_path_buf(),
        key: key.to_string(),
        message,
    };
    if raw.source.is_empty() {
        return Err(invalid("source", "expected at least one [[source]] with a `path`".into()));
    }
    let mut sources = Vec::new();
    for (i, s) in raw.source.iter().enumerate() {
        if s.path.trim().is_empty() {
            return Err(invalid(&format!("source[{i}].path"), "expected a file path".into()));
        }
        sources.push(SourceSpec {
            path: dir.join(&s.path),
            label: s.path.clone(),
            parser: s.parser.clone(),
        });
    }
    let stale_limit = match &raw.stale_limit {
        Some(d) => d.to_duration().map_err(|m| invalid("stale_limit", m))?,
        None => DEFAULT_STALE_LIMIT,
    };
    check_criteria(&raw.criteria).map_err(|(k, m)| invalid(&k, m))?;
    let name = raw.name.clone().unwrap_or_else(|| dir_name(&dir));
    Ok(RunSpec {
        name,
        dir,
        sources,
        criteria: raw.criteria,
        stale_limit,
        job: raw.job,
        actions: raw.action,
        config_path: Some(path.to_path_buf()),
        config_facts: None,
    })
}

/// A run made from plain file arguments (no config), every file read with `parser` (or
/// detected): see [`from_files_with`].
pub fn from_files(files: &[PathBuf], parser: Option<&str>) -> RunSpec {
    let parsers: Vec<Option<String>> = files.iter().map(|_| parser.map(str::to_string)).collect();
    from_files_with(files, &parsers)
}

/// A run made from plain file arguments, each with its own parser (`None`: detected; a
/// missing entry counts as `None`). The files are the run's sources, in order. The run is
/// named `dir/file.ext` after a single file, else after the first file's directory.
pub fn from_files_with(files: &[PathBuf], parsers: &[Option<String>]) -> RunSpec {
    let first = files.first().cloned().unwrap_or_default();
    let dir = first.parent().map(Path::to_path_buf).filter(|d| !d.as_os_str().is_empty());
    let dir = dir.unwrap_or_else(|| PathBuf::from("."));
    let name = match files {
        [one] => one
            .file_name()
            .map(|s| format!("{}/{}", dir_name(&dir), s.to_string_lossy()))
            .unwrap_or_else(|| dir_name(&dir)),
        _ => dir_name(&dir),
    };
    RunSpec {
        name,
        dir,
        sources: files
            .iter()
            .enumerate()
            .map(|(i, f)| SourceSpec {
                path: f.clone(),
                label: f.display().to_string(),
                parser: parsers.get(i).cloned().flatten(),
            })
            .collect(),
        criteria: Criteria::default(),
        stale_limit: DEFAULT_STALE_LIMIT,
        job: None,
        actions: Vec::new(),
        config_path: None,
        config_facts: None,
    }
}

fn dir_name(dir: &Path) -> String {
    let abs = std::fs::canonicalize(dir).unwrap_or_else(|_| dir.to_path_buf());
    abs.file_name().map(|n| n.to_string_lossy().into_owned()).unwrap_or_else(|| "run".into())
}

/// Reject criteria values that cannot mean anything (negative drops, zero windows).
pub fn check_criteria(c: &Criteria) -> Result<(), (String, String)> {
    let positive = |key: String, v: Option<f64>| match v {
        Some(x) if !(x.is_finite() && x > 0.0) => {
            Err((key, format!("expected a positive number, found {x}")))
        }
        _ => Ok(()),
    };
    positive("criteria.residual_drop".into(), c.residual_drop)?;
    positive("criteria.residual_below".into(), c.residual_below)?;
    positive("criteria.drift".into(), c.drift)?;
    positive("criteria.band".into(), c.band)?;
    positive("criteria.ci".into(), c.ci)?;
    if c.window == Some(0) {
        return Err(("criteria.window".into(), "expected at least 1 iteration".into()));
    }
    for (name, s) in &c.series {
        let k = |f: &str| format!("criteria.series.{name}.{f}");
        positive(k("drop"), s.drop)?;
        positive(k("below"), s.below)?;
        positive(k("drift"), s.drift)?;
        positive(k("band"), s.band)?;
        positive(k("ci"), s.ci)?;
        positive(k("scale"), s.scale)?;
        positive(k("drift_abs"), s.drift_abs)?;
        positive(k("band_abs"), s.band_abs)?;
        positive(k("ci_abs"), s.ci_abs)?;
    }
    Ok(())
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn full_config_parses() {
        let text = r#"
name = "duct-bend-07"
stale_limit = "2m"
job = "4711"

[[source]]
path = "tarn.log"
parser = "tarn"

[[source]]
path = "forces.csv"

[criteria]
residual_drop = 4
window = 300

[criteria.series.p]
below = 1e-5

[criteria.series."res*"]
ignore = true

[[action]]
on = "diverging"
command = ["scancel", "{job}"]
"#;
        let spec = parse(text, Path::new("/case/settle.toml")).unwrap();
        assert_eq!(spec.name, "duct-bend-07");
        assert_eq!(spec.stale_limit, Duration::from_secs(120));
        assert_eq!(spec.sources[0].path, PathBuf::from("/case/tarn.log"));
        assert_eq!(spec.sources[0].parser.as_deref(), Some("tarn"));
        assert_eq!(spec.sources[1].parser, None);
        assert_eq!(spec.criteria.residual_drop, Some(4.0));
        assert_eq!(spec.criteria.window, Some(300));
        assert_eq!(spec.criteria.series["p"].below, Some(1e-5));
        assert!(spec.criteria.series["res*"].ignore);
        assert_eq!(spec.job.as_deref(), Some("4711"));
        assert_eq!(spec.actions.len(), 1);
        assert_eq!(spec.actions[0].command, vec!["scancel", "{job}"]);
    }

    #[test]
    fn per_series_scale_and_absolute_limits_parse_and_are_checked() {
        let text = "[[source]]\npath='a'\n[criteria.series.Cs]\nscale = 0.03\nband_abs = 2e-5\n\
                    drift_abs = 1e-5\nci_abs = 4e-6\n";
        let spec = parse(text, Path::new("s.toml")).unwrap();
        let cs = &spec.criteria.series["Cs"];
        assert_eq!(
            (cs.scale, cs.drift_abs, cs.band_abs, cs.ci_abs),
            (Some(0.03), Some(1e-5), Some(2e-5), Some(4e-6))
        );
        let err =
            parse("[[source]]\npath='a'\n[criteria.series.Cs]\nscale = 0\n", Path::new("s.toml"))
                .unwrap_err()
                .to_string();
        assert!(err.contains("criteria.series.Cs.scale") && err.contains("positive"), "{err}");
        let err = parse(
            "[[source]]\npath='a'\n[criteria.series.Cs]\nband_abs = -1\n",
            Path::new("s.toml"),
        )
        .unwrap_err()
        .to_string();
        assert!(err.contains("band_abs"), "{err}");
    }

    #[test]
    fn unknown_keys_are_errors_naming_the_file() {
        let err =
            parse("name = 'x'\ncolour = 3\n[[source]]\npath='a'\n", Path::new("c/settle.toml"))
                .unwrap_err()
                .to_string();
        assert!(err.contains("c/settle.toml"), "{err}");
        assert!(err.contains("colour"), "{err}");
        let err = parse("[[source]]\npath='a'\n[criteria]\ndirft = 1\n", Path::new("s.toml"))
            .unwrap_err()
            .to_string();
        assert!(err.contains("dirft"), "{err}");
    }

    #[test]
    fn bad_values_name_the_key() {
        let err = parse("[[source]]\npath='a'\n[criteria]\ndrift = -1\n", Path::new("s.toml"))
            .unwrap_err()
            .to_string();
        assert!(err.contains("criteria.drift") && err.contains("positive"), "{err}");
        let err = parse("stale_limit = '5 weeks'\n[[source]]\npath='a'\n", Path::new("s.toml"))
            .unwrap_err()
            .to_string();
        assert!(err.contains("stale_limit"), "{err}");
        let err = parse("name = 'x'\n", Path::new("s.toml")).unwrap_err().to_string();
        assert!(err.contains("[[source]]"), "{err}");
    }

    #[test]
    fn durations() {
        assert_eq!(parse_duration("500ms").unwrap(), Duration::from_millis(500));
        assert_eq!(parse_duration("5m").unwrap(), Duration::from_secs(300));
        assert_eq!(parse_duration("1.5").unwrap(), Duration::from_millis(1500));
        assert!(parse_duration("fast").is_err());
        assert!(parse_duration("3d").is_err());
    }

    #[test]
    fn runs_from_files_are_named_after_their_directory() {
        let spec = from_files(&[PathBuf::from("cases/wing/run.log")], Some("tarn"));
        assert_eq!(spec.name, "wing/run.log");
        assert_eq!(spec.sources[0].parser.as_deref(), Some("tarn"));
        let spec =
            from_files(&[PathBuf::from("cases/wing/a.log"), "cases/wing/b.csv".into()], None);
        assert_eq!(spec.name, "wing");
        assert_eq!(spec.sources.len(), 2);
    }
}
