//! The `settle` command line: parses arguments and calls one library function per command.
//!
//! Errors end here as `anyhow` messages with exit code 1; clap's usage errors exit with 2;
//! `check` and headless `watch` exit with the verdict's code (`Verdict::exit_code`).

use std::io::Write;
use std::path::{Path, PathBuf};
use std::process::ExitCode;
use std::sync::Arc;
use std::time::Duration;

use anyhow::{Context, Result, bail};
use clap::{Args, Parser as ClapParser, Subcommand};

use settle::follow::{FollowConfig, Waker};
use settle::judge::{self, Criteria, Judgement};
use settle::parser::Registry;
use settle::record::Output;
use settle::run::RunStore;
use settle::run::config::{self, RunSpec};
use settle::run::pipeline::{self, SourceReader};
use settle::view;

/// settle follows the residual and monitor logs of iterative CFD runs, judges with published
/// statistical tests whether each run has really converged, and shows the evidence.
#[derive(ClapParser, Debug)]
#[command(name = "settle", version, about, propagate_version = true)]
struct Cli {
    /// Extra folder of parser definitions (*.toml); may be repeated. Its definitions add to
    /// or override the shipped ones and those in $XDG_CONFIG_HOME/settle/parsers.
    #[arg(long = "parsers", value_name = "DIR", global = true)]
    parser_dirs: Vec<PathBuf>,
    #[command(subcommand)]
    command: Command,
}

#[derive(Subcommand, Debug)]
enum Command {
    /// Show what settle extracts from log files: parser, records, series, events, skips.
    ///
    /// Use it when writing a parser definition or when a run's verdict looks wrong: it
    /// shows exactly which series, values and events settle read.
    Parse(ParseArgs),
    /// List the parser definitions, show one, or test which one claims a file.
    Parsers(ParsersArgs),
    /// Judge one run once, to the end of its data, and print the verdict with its evidence.
    ///
    /// PATH is a log file, several files of one run (residual log + monitor files), or a
    /// case directory holding settle.toml. The exit code tells the verdict: 0 converged,
    /// 10 converging, 11 stalled, 12 oscillating, 13 suspect, 14 diverging (1 = error,
    /// 2 = usage error).
    Check(CheckArgs),
}

#[derive(Args, Debug)]
struct ParseArgs {
    /// Log files to read (a glob in the file name, quoted, reads restart files in order).
    #[arg(required = true, value_name = "FILE")]
    files: Vec<PathBuf>,
    /// Parser definition to use instead of automatic detection (see `settle parsers list`).
    #[arg(long, value_name = "NAME")]
    parser: Option<String>,
    /// Print the summary as one JSON object.
    #[arg(long)]
    json: bool,
    /// Keep following the files and print one line per new record, until Ctrl-C.
    #[arg(long)]
    follow: bool,
    /// Seconds between file checks while following (file events also wake settle; on
    /// network filesystems only this poll sees other nodes' writes).
    #[arg(long, value_name = "SECONDS", default_value_t = 1.0)]
    poll: f64,
}

#[derive(Args, Debug)]
struct ParsersArgs {
    #[command(subcommand)]
    action: ParsersAction,
}

#[derive(Subcommand, Debug)]
enum ParsersAction {
    /// List every parser definition with its engine and where it comes from.
    List,
    /// Print the TOML text of a definition (a good start for your own).
    Show {
        /// Definition name.
        name: String,
    },
    /// Show which definition claims FILE and why (scores and matched patterns).
    Test {
        /// Log file to test.
        file: PathBuf,
    },
}

#[derive(Args, Debug)]
pub struct CriteriaArgs {
    /// Required residual drop from its peak, in decades (default 3: common practice).
    #[arg(long, value_name = "DECADES")]
    residual_drop: Option<f64>,
    /// Absolute level every residual must reach (default: none).
    #[arg(long, value_name = "VALUE")]
    residual_below: Option<f64>,
    /// Final window in iterations for monitor drift/band and trends (default 500).
    #[arg(long, value_name = "ITERATIONS")]
    window: Option<usize>,
    /// Maximum monitor drift over the window, percent of its mean (default 0.1).
    #[arg(long, value_name = "PERCENT")]
    drift: Option<f64>,
    /// Maximum monitor band (max − min) over the window, percent of its mean (default 0.5).
    #[arg(long, value_name = "PERCENT")]
    band: Option<f64>,
}

impl CriteriaArgs {
    fn to_criteria(&self) -> Criteria {
        Criteria {
            residual_drop: self.residual_drop,
            residual_below: self.residual_below,
            window: self.window,
            drift: self.drift,
            band: self.band,
            ..Criteria::default()
        }
    }
}

#[derive(Args, Debug)]
struct CheckArgs {
    /// A log file, several files of one run, or a case directory holding settle.toml.
    #[arg(required = true, value_name = "PATH")]
    paths: Vec<PathBuf>,
    /// Parser definition for every file given (default: detect per file).
    #[arg(long, value_name = "NAME")]
    parser: Option<String>,
    /// Run config to use (default: settle.toml in a directory given as PATH).
    #[arg(long, value_name = "FILE")]
    config: Option<PathBuf>,
    /// Print one JSON object (schema in the README) instead of text.
    #[arg(long)]
    json: bool,
    #[command(flatten)]
    criteria: CriteriaArgs,
}

fn main() -> ExitCode {
    let cli = Cli::parse();
    match run(cli) {
        Ok(code) => ExitCode::from(code),
        Err(e) => {
            let _ = writeln!(std::io::stderr(), "settle: {e:#}");
            ExitCode::from(1)
        }
    }
}

fn run(cli: Cli) -> Result<u8> {
    let registry =
        Arc::new(Registry::load(&cli.parser_dirs).context("loading parser definitions")?);
    match cli.command {
        Command::Parse(a) => cmd_parse(a, registry),
        Command::Parsers(a) => cmd_parsers(a, &registry),
        Command::Check(a) => cmd_check(a, registry),
    }
}

/// Write to stdout; a closed pipe (`settle ... | head`) ends the program quietly.
fn out(text: &str) -> Result<()> {
    let mut stdout = std::io::stdout().lock();
    match stdout.write_all(text.as_bytes()).and_then(|()| stdout.flush()) {
        Ok(()) => Ok(()),
        Err(e) if e.kind() == std::io::ErrorKind::BrokenPipe => std::process::exit(0),
        Err(e) => Err(e.into()),
    }
}

fn cmd_parsers(a: ParsersArgs, registry: &Registry) -> Result<u8> {
    match a.action {
        ParsersAction::List => {
            let mut o = String::new();
            let w = registry.definitions().iter().map(|d| d.name().len()).max().unwrap_or(4);
            for d in registry.definitions() {
                let origin = match d.origin() {
                    settle::parser::Origin::Builtin => "built in".to_string(),
                    settle::parser::Origin::File(p) => p.display().to_string(),
                };
                o.push_str(&format!(
                    "{:<w$}  {:<5}  {}  [{}]\n",
                    d.name(),
                    d.engine(),
                    d.description(),
                    origin
                ));
            }
            out(&o)?;
        }
        ParsersAction::Show { name } => {
            let Some(d) = registry.get(&name) else {
                bail!("unknown parser `{name}` (see `settle parsers list`)");
            };
            out(d.source_text())?;
        }
        ParsersAction::Test { file } => {
            let head = read_head(&file)?;
            let det = registry.detect(&head);
            let mut o = match &det.chosen {
                Some(n) => format!("{}: parser `{n}` claims this file\n", file.display()),
                None => format!("{}: no parser definition claims this file\n", file.display()),
            };
            for c in &det.candidates {
                o.push_str(&format!(
                    "  {:<12} score {:>6.2}  {}\n",
                    c.name,
                    c.score,
                    c.reasons.join("; ")
                ));
            }
            out(&o)?;
        }
    }
    Ok(0)
}

fn read_head(path: &Path) -> Result<Vec<u8>> {
    use std::io::Read;
    let f = std::fs::File::open(path).with_context(|| format!("cannot open {}", path.display()))?;
    let mut head = Vec::new();
    f.take(64 * 1024).read_to_end(&mut head)?;
    Ok(head)
}

fn cmd_parse(a: ParseArgs, registry: Arc<Registry>) -> Result<u8> {
    let spec = config::from_files(&a.files, a.parser.as_deref());
    if !a.follow {
        let (run, _) = pipeline::read_run(&spec, registry)?;
        if a.json {
            let sources: Vec<_> = run.sources.iter().map(view::parse::source_json).collect();
            out(&format!(
                "{}\n",
                serde_json::to_string_pretty(&serde_json::json!({ "sources": sources }))?
            ))?;
        } else {
            out(&view::parse::run_text(&run))?;
        }
        return Ok(0);
    }
    follow_records(&spec, registry, a.poll, a.json)
}

/// `parse --follow`: print one line per new record as the files grow.
fn follow_records(spec: &RunSpec, registry: Arc<Registry>, poll: f64, json: bool) -> Result<u8> {
    let poll = Duration::from_secs_f64(poll.clamp(0.05, 60.0));
    let cfg = FollowConfig { poll_interval: poll, ..FollowConfig::default() };
    let mut readers = Vec::new();
    for s in &spec.sources {
        readers.push(SourceReader::new(s, registry.clone(), cfg.clone())?);
    }
    let mut names: Vec<std::collections::HashMap<u32, String>> =
        vec![Default::default(); readers.len()];
    let mut waker = Waker::new();
    loop {
        let dirty = waker.take_names_dirty();
        for (i, r) in readers.iter_mut().enumerate() {
            if dirty {
                r.follower_mut().hint_names();
            }
            for d in r.follower().watch_dirs() {
                waker.watch(&d);
            }
            let items = r.read(false)?;
            let mut o = String::new();
            for item in items {
                use settle::run::ingest::IngestItem;
                match item {
                    IngestItem::Output(Output::Series(s)) => {
                        names[i].insert(s.id, s.name);
                    }
                    IngestItem::Output(Output::Record(rec)) => {
                        o.push_str(&view::parse::record_line(r.label(), &rec, &names[i], json));
                    }
                    IngestItem::Output(Output::Event(e)) if !json => {
                        o.push_str(&format!(
                            "{}: {} {}: {}\n",
                            r.label(),
                            e.severity.as_str(),
                            e.rule,
                            view::parse::clean(&e.message)
                        ));
                    }
                    IngestItem::Output(Output::EndOfRun { message, .. }) if !json => {
                        o.push_str(&format!(
                            "{}: end of run: {}\n",
                            r.label(),
                            view::parse::clean(&message)
                        ));
                    }
                    IngestItem::Restart(reason) => {
                        names[i].clear();
                        if !json {
                            o.push_str(&format!("{}: restart ({reason:?})\n", r.label()));
                        }
                    }
                    IngestItem::Note(n) if !json => {
                        o.push_str(&format!("{}: note: {}\n", r.label(), view::parse::clean(&n)));
                    }
                    _ => {}
                }
            }
            if !o.is_empty() {
                out(&o)?;
            }
        }
        waker.wait(poll);
    }
}

/// Build the run spec of `check`/`report`/`watch` from PATH arguments.
fn resolve_run(
    paths: &[PathBuf],
    config_file: Option<&Path>,
    parser: Option<&str>,
) -> Result<RunSpec> {
    if let Some(c) = config_file {
        return Ok(config::load(c)?);
    }
    if let [dir] = paths
        && dir.is_dir()
    {
        let c = dir.join(config::CONFIG_NAME);
        if c.is_file() {
            return Ok(config::load(&c)?);
        }
        bail!(
            "{} is a directory without {}; give the log files instead",
            dir.display(),
            config::CONFIG_NAME
        );
    }
    for p in paths {
        if p.is_dir() {
            bail!(
                "{} is a directory; check judges one run: give its log files, or one case directory holding {}",
                p.display(),
                config::CONFIG_NAME
            );
        }
    }
    Ok(config::from_files(paths, parser))
}

fn judge_run(run: &RunStore, criteria: &Criteria) -> Judgement {
    judge::judge(&run.judge_input(), criteria)
}

fn cmd_check(a: CheckArgs, registry: Arc<Registry>) -> Result<u8> {
    let mut spec = resolve_run(&a.paths, a.config.as_deref(), a.parser.as_deref())?;
    spec.criteria = spec.criteria.merged(&a.criteria.to_criteria());
    config::check_criteria(&spec.criteria).map_err(|(k, m)| {
        anyhow::anyhow!("--{}: {m}", k.trim_start_matches("criteria.").replace('_', "-"))
    })?;
    let (run, parsers) = pipeline::read_run(&spec, registry)?;
    let j = judge_run(&run, &spec.criteria);
    if a.json {
        out(&format!(
            "{}\n",
            serde_json::to_string_pretty(&view::check::json(&run, &parsers, &j))?
        ))?;
    } else {
        out(&view::check::text(&run, &j))?;
    }
    Ok(j.verdict.exit_code() as u8)
}
