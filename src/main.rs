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
    /// 10 converging, 11 stalled, 12 oscillating, 13 suspect, 14 diverging (1 = error, also
    /// when there is nothing to judge: no data, or no parser recognised the file; 2 = usage
    /// error).
    Check(CheckArgs),
    /// Write a convergence report (HTML, Markdown or JSON, by the extension of -o).
    ///
    /// The report documents which criteria were met, with plots, the findings and their
    /// evidence, iterative uncertainty of each monitor, provenance (file hashes, parser,
    /// criteria) and, with --mesh-study, the grid convergence index of Celik et al. (2008).
    Report(ReportArgs),
    /// Follow runs live: panels in the terminal, or status lines with --headless.
    ///
    /// PATH is a log file (each file is one run), a case directory holding settle.toml, or
    /// a folder whose subdirectories hold settle.toml (a sweep: one run each). Several
    /// runs open an overview, the runs needing a decision first. Without a terminal (a
    /// pipe, a batch job, TERM=dumb) settle switches to headless status lines.
    Watch(WatchArgs),
    /// A live run of our invented demo solver, judged as it grows (the quickest tour).
    ///
    /// A background writer produces a growing log and force-monitor file in a temporary
    /// directory (removed on exit) and settle watches them.
    Demo(DemoArgs),
}

#[derive(Args, Debug)]
struct LiveArgs {
    /// Print status lines instead of panels (one per run when its verdict or a criterion
    /// changes, plus a heartbeat); for batch jobs and pipes.
    #[arg(long)]
    headless: bool,
    /// With --headless: print JSON lines (schema in the README) instead of text.
    #[arg(long, requires = "headless")]
    json: bool,
    /// Execute the actions of settle.toml (without it settle only says what it would run).
    #[arg(long)]
    act: bool,
    /// Seconds between file checks (file events also wake settle, but on network
    /// filesystems only this poll sees writes from other nodes).
    #[arg(long, value_name = "SECONDS", default_value_t = 1.0)]
    poll: f64,
    /// Seconds between re-judgements and chart updates.
    #[arg(long, value_name = "SECONDS", default_value_t = 1.0)]
    refresh: f64,
    /// A log not growing for this long without an end-of-run mark is `stale` (e.g. 90s,
    /// 5m; default: the run config's stale_limit, else 5m).
    #[arg(long, value_name = "DURATION")]
    stale: Option<String>,
    /// Seconds between heartbeat lines in headless mode.
    #[arg(long, value_name = "SECONDS", default_value_t = 60.0)]
    heartbeat: f64,
    /// When headless mode stops by itself: when every run has ended (end-of-run mark,
    /// crash after divergence, or stale), also as soon as one diverges, or never.
    #[arg(long, value_enum, default_value_t = settle::watch::ExitWhen::Ended)]
    exit_when: settle::watch::ExitWhen,
    /// Colour: auto honours NO_COLOR (when set and non-empty).
    #[arg(long, value_enum, default_value_t = ColorArg::Auto)]
    color: ColorArg,
    /// Plain ASCII drawing (no braille or box glyphs); automatic without a UTF-8 locale.
    #[arg(long)]
    ascii: bool,
    /// Draw chart lines with half blocks instead of braille (fonts without braille).
    #[arg(long)]
    no_braille: bool,
    /// Start with mouse capture on (it blocks the terminal's own text selection; `m`
    /// toggles it).
    #[arg(long)]
    mouse: bool,
}

#[derive(Clone, Copy, Debug, clap::ValueEnum)]
enum ColorArg {
    Auto,
    Always,
    Never,
}

#[derive(Args, Debug)]
struct WatchArgs {
    /// Log files, case directories holding settle.toml, or a folder of case directories.
    #[arg(required = true, value_name = "PATH")]
    paths: Vec<PathBuf>,
    /// Parser definition for every file given (default: detect per file).
    #[arg(long, value_name = "NAME")]
    parser: Option<String>,
    /// Treat all FILE arguments as the sources of one run (residual log + monitor files).
    #[arg(long)]
    one_run: bool,
    #[command(flatten)]
    criteria: CriteriaArgs,
    #[command(flatten)]
    live: LiveArgs,
}

#[derive(Args, Debug)]
struct DemoArgs {
    /// Behaviour of the demo run (see --list).
    #[arg(long, default_value = "converging", value_name = "NAME")]
    scenario: String,
    /// List the scenarios and exit.
    #[arg(long)]
    list: bool,
    /// Seed of the synthetic run (the same seed gives the same run).
    #[arg(long, default_value_t = 7)]
    seed: u64,
    /// Iterations written per second.
    #[arg(long, default_value_t = settle::demo::DEFAULT_RATE)]
    rate: f64,
    #[command(flatten)]
    live: LiveArgs,
}

#[derive(Args, Debug)]
struct ReportArgs {
    /// The run to report: a log file, several files of one run, or a case directory holding
    /// settle.toml. With --mesh-study and no PATH, the finest run is reported.
    #[arg(value_name = "PATH")]
    paths: Vec<PathBuf>,
    /// Output file: .html (self-contained), .md (SVG plots written beside it) or .json.
    #[arg(short, long, value_name = "FILE")]
    output: PathBuf,
    /// Parser definition for every file given (default: detect per file).
    #[arg(long, value_name = "NAME")]
    parser: Option<String>,
    /// Run config to use (default: settle.toml in a directory given as PATH).
    #[arg(long, value_name = "FILE")]
    config: Option<PathBuf>,
    #[command(flatten)]
    criteria: CriteriaArgs,
    /// Three runs of a mesh study, coarse to fine (case directories or log files); adds a
    /// grid-convergence section for --monitor.
    #[arg(long, num_args = 3, value_names = ["COARSE", "MEDIUM", "FINE"])]
    mesh_study: Option<Vec<PathBuf>>,
    /// Monitor compared across the mesh study (its mean over the final window is used).
    #[arg(long, value_name = "NAME", requires = "mesh_study")]
    monitor: Option<String>,
    /// Cell counts of the three meshes, coarse to fine.
    #[arg(long, num_args = 3, value_names = ["N1", "N2", "N3"], conflicts_with = "spacing", requires = "mesh_study")]
    cells: Option<Vec<u64>>,
    /// Representative cell sizes of the three meshes, coarse to fine.
    #[arg(long, num_args = 3, value_names = ["H1", "H2", "H3"], requires = "mesh_study")]
    spacing: Option<Vec<f64>>,
    /// Dimension used to turn cell counts into a cell size.
    #[arg(long, default_value_t = 3, value_parser = clap::value_parser!(u8).range(2..=3))]
    dim: u8,
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
        Command::Report(a) => cmd_report(a, registry),
        Command::Watch(a) => cmd_watch(a, registry),
        Command::Demo(a) => cmd_demo(a, registry),
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

/// Judge a run that was read to its end; a run with nothing to judge is an error naming why,
/// never a verdict.
fn judge_run(run: &RunStore, criteria: &Criteria) -> Result<Judgement> {
    judge::try_judge(&run.judge_input(), criteria)
        .map_err(|why| anyhow::anyhow!(view::check::no_verdict(run, &why)))
}

fn cmd_check(a: CheckArgs, registry: Arc<Registry>) -> Result<u8> {
    let mut spec = resolve_run(&a.paths, a.config.as_deref(), a.parser.as_deref())?;
    spec.criteria = spec.criteria.merged(&a.criteria.to_criteria());
    config::check_criteria(&spec.criteria).map_err(|(k, m)| {
        anyhow::anyhow!("--{}: {m}", k.trim_start_matches("criteria.").replace('_', "-"))
    })?;
    let (run, parsers) = pipeline::read_run(&spec, registry)?;
    let j = judge_run(&run, &spec.criteria)?;
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

/// Read and judge one run given on the command line.
fn load_and_judge(
    paths: &[PathBuf],
    config_file: Option<&Path>,
    parser: Option<&str>,
    criteria: &CriteriaArgs,
    registry: Arc<Registry>,
) -> Result<(RunSpec, RunStore, Vec<String>, Judgement)> {
    let mut spec = resolve_run(paths, config_file, parser)?;
    spec.criteria = spec.criteria.merged(&criteria.to_criteria());
    config::check_criteria(&spec.criteria).map_err(|(k, m)| {
        anyhow::anyhow!("--{}: {m}", k.trim_start_matches("criteria.").replace('_', "-"))
    })?;
    let (run, parsers) = pipeline::read_run(&spec, registry)?;
    let j = judge_run(&run, &spec.criteria)?;
    Ok((spec, run, parsers, j))
}

fn cmd_report(a: ReportArgs, registry: Arc<Registry>) -> Result<u8> {
    use settle::report::gci::{GridPoint, GridSize, MeshStudy};
    use settle::report::{ParserProvenance, Provenance, ReportInput};

    let mut mesh = None;
    let mut paths = a.paths.clone();
    if let Some(runs) = &a.mesh_study {
        let monitor = a.monitor.clone().context("--mesh-study needs --monitor NAME")?;
        let sizes: Vec<GridSize> = match (&a.cells, &a.spacing) {
            (Some(c), _) => c.iter().map(|&n| GridSize::Cells(n)).collect(),
            (None, Some(h)) => h.iter().map(|&h| GridSize::Spacing(h)).collect(),
            (None, None) => bail!("--mesh-study needs --cells N1 N2 N3 or --spacing H1 H2 H3"),
        };
        let mut grids = Vec::new();
        for ((path, size), label) in runs.iter().zip(sizes).zip(["coarse", "medium", "fine"]) {
            let (_, _, _, j) = load_and_judge(
                std::slice::from_ref(path),
                None,
                a.parser.as_deref(),
                &a.criteria,
                registry.clone(),
            )
            .with_context(|| format!("mesh study run {}", path.display()))?;
            let m = j.monitors.iter().find(|m| m.series == monitor).with_context(|| {
                format!(
                    "{}: no monitor `{monitor}` (monitors: {})",
                    path.display(),
                    j.monitors.iter().map(|m| m.series.as_str()).collect::<Vec<_>>().join(", ")
                )
            })?;
            grids.push(GridPoint {
                name: format!("{label} ({})", path.display()),
                size,
                value: m.mean,
                iterative_error: m.iterative_error,
            });
        }
        let grids: [GridPoint; 3] =
            grids.try_into().map_err(|_| anyhow::anyhow!("three runs expected"))?;
        mesh = Some(MeshStudy { monitor, grids, dim: a.dim });
        if paths.is_empty() {
            paths.push(runs[2].clone());
        }
    }
    if paths.is_empty() {
        bail!("give the run to report (PATH), or --mesh-study COARSE MEDIUM FINE");
    }
    let (spec, run, parsers, j) = load_and_judge(
        &paths,
        a.config.as_deref(),
        a.parser.as_deref(),
        &a.criteria,
        registry.clone(),
    )?;
    let mut files = Vec::new();
    for s in &spec.sources {
        files.extend(settle::follow::matching_files(&s.path)?);
    }
    let mut parser_prov = Vec::new();
    for name in &parsers {
        if parser_prov.iter().any(|p: &ParserProvenance| &p.name == name) {
            continue;
        }
        if let Some(d) = registry.get(name) {
            let origin = match d.origin() {
                settle::parser::Origin::Builtin => "built in".to_string(),
                settle::parser::Origin::File(p) => p.display().to_string(),
            };
            parser_prov.push(ParserProvenance::new(name.clone(), origin, d.source_text()));
        }
    }
    let provenance =
        Provenance::collect(std::env::args().collect(), parser_prov, &files, &spec.criteria)
            .context("hashing the sources")?;
    let input = ReportInput {
        run: &run,
        judgement: &j,
        criteria: &spec.criteria,
        provenance: &provenance,
        mesh: mesh.as_ref(),
    };
    let written = settle::report::write_report(&a.output, &input)?;
    let mut o = format!("{}: {} — report written:\n", run.name, j.verdict.as_str());
    for w in written {
        o.push_str(&format!("  {}\n", w.display()));
    }
    out(&o)?;
    Ok(0)
}

fn cmd_watch(a: WatchArgs, registry: Arc<Registry>) -> Result<u8> {
    let mut specs = settle::watch::resolve_runs(&a.paths, a.parser.as_deref(), a.one_run)
        .map_err(anyhow::Error::msg)?;
    let over = a.criteria.to_criteria();
    for spec in &mut specs {
        spec.criteria = spec.criteria.merged(&over);
        config::check_criteria(&spec.criteria).map_err(|(k, m)| anyhow::anyhow!("{k}: {m}"))?;
    }
    watch_specs(specs, &a.live, registry)
}

fn cmd_demo(a: DemoArgs, registry: Arc<Registry>) -> Result<u8> {
    use settle::synth::Scenario;
    if a.list {
        let mut o = String::new();
        for s in Scenario::all() {
            o.push_str(&format!("{:<30} {}\n", s.name(), s.description()));
        }
        out(&o)?;
        return Ok(0);
    }
    let Some(scenario) = Scenario::parse(&a.scenario) else {
        bail!("unknown scenario `{}` (see `settle demo --list`)", a.scenario);
    };
    if !(a.rate.is_finite() && a.rate > 0.0) {
        bail!("--rate: expected a positive number of iterations per second");
    }
    let (demo, writer) = settle::demo::start(scenario, a.seed, a.rate)
        .context("starting the demo writer in a temporary directory")?;
    let spec = RunSpec {
        name: format!("demo {}", scenario.name()),
        dir: demo.dir.clone(),
        sources: vec![
            config::SourceSpec {
                path: demo.log.clone(),
                label: "tarn.log".into(),
                parser: Some("tarn".into()),
            },
            config::SourceSpec {
                path: demo.forces.clone(),
                label: "forces.csv".into(),
                parser: Some("csv".into()),
            },
        ],
        ..config::from_files(std::slice::from_ref(&demo.log), None)
    };
    let code = watch_specs(vec![spec], &a.live, registry);
    let _ = writer.stop();
    drop(demo);
    code
}

fn seconds(flag: &str, v: f64) -> Result<Duration> {
    if v.is_finite() && v > 0.0 && v <= 3600.0 {
        Ok(Duration::from_secs_f64(v))
    } else {
        bail!("--{flag}: expected seconds between 0 and 3600, found {v}")
    }
}

/// Watch prepared runs: panels on a terminal, headless lines otherwise.
fn watch_specs(mut specs: Vec<RunSpec>, live: &LiveArgs, registry: Arc<Registry>) -> Result<u8> {
    use settle::tui::{ColorChoice, Msg, TuiOptions};
    use std::io::IsTerminal;
    use std::sync::atomic::{AtomicBool, Ordering};

    if specs.is_empty() {
        bail!("nothing to watch");
    }
    let poll = seconds("poll", live.poll)?.max(Duration::from_millis(50));
    let refresh = seconds("refresh", live.refresh)?;
    if let Some(text) = &live.stale {
        let d = config::parse_duration(text).map_err(|m| anyhow::anyhow!("--stale: {m}"))?;
        for s in &mut specs {
            s.stale_limit = d;
        }
    }
    let stale_limit =
        specs.iter().map(|s| s.stale_limit).min().unwrap_or(config::DEFAULT_STALE_LIMIT);
    let follow = FollowConfig { poll_interval: poll, ..FollowConfig::default() };
    let (runs, sources) = settle::watch::prepare(&specs, &registry, &follow)?;
    let mut hooks = settle::watch::ActionHooks::new(&specs, live.act);
    let (tx, rx) = std::sync::mpsc::channel::<Msg>();
    let shutdown = Arc::new(AtomicBool::new(false));
    let ingest = settle::watch::start_ingest(sources, poll, tx.clone(), shutdown.clone())?;
    let dumb = std::env::var_os("TERM").is_some_and(|t| t == "dumb");
    let headless = live.headless || !std::io::stdout().is_terminal() || dumb;
    let code = if headless {
        settle::watch::forward_signals(tx.clone())?;
        let opts = settle::watch::HeadlessOptions {
            json: live.json,
            heartbeat: seconds("heartbeat", live.heartbeat)?,
            refresh,
            stale_limit,
            exit_when: live.exit_when,
        };
        let mut stdout = std::io::stdout();
        match settle::watch::run_headless(runs, rx, &opts, &mut hooks, &mut stdout) {
            Ok(code) => code,
            Err(e) if e.kind() == std::io::ErrorKind::BrokenPipe => 0,
            Err(e) => return Err(e.into()),
        }
    } else {
        let opts = TuiOptions {
            color: match live.color {
                ColorArg::Auto => ColorChoice::Auto,
                ColorArg::Always => ColorChoice::Always,
                ColorArg::Never => ColorChoice::Never,
            },
            ascii: live.ascii,
            no_braille: live.no_braille,
            refresh,
            stale_limit,
            mouse: live.mouse,
        };
        settle::watch::run_panels(runs, rx, tx, opts, &mut hooks)?
    };
    shutdown.store(true, Ordering::Relaxed);
    drop(ingest);
    Ok(u8::try_from(code).unwrap_or(1))
}
