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
use clap::{Args, CommandFactory, Parser as ClapParser, Subcommand};

use settle::follow::{FollowConfig, Waker};
use settle::judge::{self, Criteria, Judgement};
use settle::parser::Registry;
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
    /// PATH is a log file, several files of one run (residual log + monitor files: files
    /// given together are one run), or a case directory (its settle.toml, or the files in it
    /// a parser definition recognises). The exit code tells the verdict: 0 converged,
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
    /// Files given together are one run, as in `check` (a residual log + its monitor
    /// files); `+` separates runs (`watch a/run.log a/forces.dat + b/run.log`), and --each
    /// makes every file its own run. A directory is its settle.toml, or the run(s) its
    /// recognised files form; a folder of case directories is a sweep, one run each (what
    /// is left out is said, with the reason). Several runs open an overview, the runs
    /// needing a decision first. Without a terminal (a pipe, a batch job, TERM=dumb)
    /// settle switches to headless status lines.
    ///
    /// Keys in the panels: ? lists them all; y shows the whole why in a box when it does
    /// not fit under the header (any key closes it); q quits. A run without a verdict shows
    /// its state instead (waiting, unreadable, no-parser, nothing-to-judge) with the reason.
    /// After q or Ctrl-C one line stays in the scroll-back: the open run's verdict (or
    /// state) and its first reason, or the counts of an overview; headless mode ends with
    /// one `(final)` line per run.
    Watch(WatchArgs),
    /// A live run of our invented demo solver, judged as it grows (the quickest tour).
    ///
    /// A background writer produces a growing log and force-monitor file in a temporary
    /// directory (removed on exit) and settle watches them.
    ///
    /// Keys as in `watch`: ? lists them; y shows the whole why in a box when it does not
    /// fit; q quits. After q or Ctrl-C the demo prints one line with the final verdict and
    /// its first reason (`demo converging: CONVERGED at it 2 400 — …`), so it stays in the
    /// scroll-back.
    Demo(DemoArgs),
    /// Print a shell completion script (bash, zsh, fish, elvish, powershell).
    ///
    /// Install for bash: settle completions bash > ~/.local/share/bash-completion/completions/settle
    /// (zsh: into a folder of your $fpath as _settle; fish: ~/.config/fish/completions/settle.fish).
    Completions {
        /// The shell to complete for.
        #[arg(value_enum)]
        shell: clap_complete::Shell,
    },
    /// Print the manual page (roff), or write one page per command into a folder.
    ///
    /// Install: settle man --dir ~/.local/share/man/man1 (then `man settle`); or
    /// settle man | man -l - to read it once.
    Man {
        /// Write settle.1 and one settle-COMMAND.1 per command into this folder.
        #[arg(long, value_name = "DIR")]
        dir: Option<PathBuf>,
    },
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
    /// crash after divergence, or stale; a run without records when it went stale or no
    /// parser recognises its file, or whose records hold nothing to judge when they end:
    /// exit code 16), also as soon as one diverges, or never.
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
    /// Files of one run, case directories, or a folder of case directories; `+` between
    /// two runs' files.
    #[arg(required = true, value_name = "PATH")]
    paths: Vec<PathBuf>,
    /// Parser definition of the files given (default: detect per file); once for every
    /// file, or once per file in order.
    #[arg(long, value_name = "NAME")]
    parser: Vec<String>,
    /// Every file argument is a run of its own (default: files given together are one run).
    #[arg(long)]
    each: bool,
    /// Files given together are one run (the default now; kept so old scripts still work).
    #[arg(long, hide = true, conflicts_with = "each")]
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
    /// Parser definition of the files given (default: detect per file); once for every
    /// file, or once per file in order.
    #[arg(long, value_name = "NAME")]
    parser: Vec<String>,
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
    /// Read a final line that has no newline as data even when the file changed in the last
    /// 2 s (by default such a line may be half-written and is left out, with a note).
    #[arg(long)]
    include_partial: bool,
}

#[derive(Args, Debug)]
struct ParseArgs {
    /// Log files to read (a glob in the file name, quoted, reads restart files in order).
    #[arg(required = true, value_name = "FILE")]
    files: Vec<PathBuf>,
    /// Parser definition to use instead of automatic detection (see `settle parsers list`);
    /// once for every file, or once per file in order.
    #[arg(long, value_name = "NAME")]
    parser: Vec<String>,
    /// Print the summary as one JSON object.
    #[arg(long)]
    json: bool,
    /// Keep following the files and print one line per new record, until Ctrl-C.
    #[arg(long)]
    follow: bool,
    /// Read a final line that has no newline as data even when the file changed in the last
    /// 2 s (by default such a line may be half-written and is left out, with a note).
    #[arg(long)]
    include_partial: bool,

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
    /// Propose a definition for a log or monitor file that no definition reads yet.
    ///
    /// Reads the start of each FILE, finds the line that opens each iteration or time step,
    /// the lines that repeat with numbers, warnings, errors and the end-of-run line, guesses
    /// each series' role, and prints the TOML (every guess marked in a comment) followed by
    /// what that definition extracts from the file: series, counts, first and last values,
    /// and the line shapes it leaves unused. A delimited monitor file gets a `table`
    /// definition. Check the guesses, then save with --write (or redirect the output).
    Draft {
        /// Log or monitor files, one definition each (files of the same format share one).
        #[arg(required = true, value_name = "FILE")]
        files: Vec<PathBuf>,
        /// Save into your parser folder: the first file's definition as NAME.toml, the
        /// others' as NAME-TAG.toml (TAG: the part of the file name that differs).
        #[arg(long, value_name = "NAME")]
        write: Option<String>,
        /// With --write: replace a file that already exists.
        #[arg(long, requires = "write")]
        force: bool,
        /// How many lines of each file to read as the sample.
        #[arg(long, value_name = "N", default_value_t = settle::parser::draft::DEFAULT_SAMPLE_LINES)]
        sample: usize,
    },
    /// Validate a definition; with FILE, show how well it reads that file.
    ///
    /// Without FILE: compiles the definition and reports any problem with file, line, key
    /// and what was expected. With FILE: rules that never matched, line shapes no rule used
    /// (most frequent first, with count and example), values that did not read, and rules
    /// whose pattern also matches lines it was probably not meant for.
    Check {
        /// A definition file (.toml) or the name of a known definition.
        #[arg(value_name = "DEF")]
        definition: String,
        /// A log or monitor file to read with it.
        #[arg(value_name = "FILE")]
        file: Option<PathBuf>,
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
    /// A log file, several files of one run, or a case directory.
    #[arg(required = true, value_name = "PATH")]
    paths: Vec<PathBuf>,
    /// Parser definition of the files given (default: detect per file); once for every
    /// file, or once per file in order.
    #[arg(long, value_name = "NAME")]
    parser: Vec<String>,
    /// Run config to use (default: settle.toml in a directory given as PATH).
    #[arg(long, value_name = "FILE")]
    config: Option<PathBuf>,
    /// Print one JSON object (schema in the README) instead of text.
    #[arg(long)]
    json: bool,
    /// Read a final line that has no newline as data even when the file changed in the last
    /// 2 s (by default such a line may be half-written and is left out, with a note).
    #[arg(long)]
    include_partial: bool,
    #[command(flatten)]
    criteria: CriteriaArgs,
}

fn main() -> ExitCode {
    let cli = Cli::parse();
    match run(cli) {
        Ok(code) => ExitCode::from(code),
        Err(e) => {
            let _ = writeln!(std::io::stderr(), "settle: {}", error_text(&e));
            ExitCode::from(1)
        }
    }
}

/// An error and its causes, `: `-separated, each cause shown once: a cause whose text an
/// outer message already contains (a library error that names its cause in its message
/// *and* reports it as its source) is left out, so `… (os error 2): … (os error 2)` cannot
/// happen whichever error type made it.
fn error_text(e: &anyhow::Error) -> String {
    let mut out = String::new();
    for cause in e.chain() {
        let text = cause.to_string();
        if text.is_empty() || out.contains(&text) {
            continue;
        }
        if !out.is_empty() {
            out.push_str(": ");
        }
        out.push_str(&text);
    }
    out
}

fn run(cli: Cli) -> Result<u8> {
    match &cli.command {
        Command::Completions { shell } => {
            let mut out = Vec::new();
            clap_complete::generate(*shell, &mut Cli::command(), "settle", &mut out);
            return write_bytes(&out).map(|()| 0);
        }
        Command::Man { dir } => return cmd_man(dir.as_deref()),
        _ => {}
    }
    let registry =
        Arc::new(Registry::load(&cli.parser_dirs).context("loading parser definitions")?);
    match cli.command {
        Command::Parse(a) => cmd_parse(a, registry),
        Command::Parsers(a) => cmd_parsers(a, &registry),
        Command::Check(a) => cmd_check(a, registry),
        Command::Report(a) => cmd_report(a, registry),
        Command::Watch(a) => cmd_watch(a, registry),
        Command::Demo(a) => cmd_demo(a, registry),
        Command::Completions { .. } | Command::Man { .. } => Ok(0),
    }
}

fn write_bytes(bytes: &[u8]) -> Result<()> {
    let mut stdout = std::io::stdout().lock();
    match stdout.write_all(bytes).and_then(|()| stdout.flush()) {
        Ok(()) => Ok(()),
        Err(e) if e.kind() == std::io::ErrorKind::BrokenPipe => std::process::exit(0),
        Err(e) => Err(e.into()),
    }
}

/// `settle man`: the page of `settle` on stdout, or every command's page into a folder.
fn cmd_man(dir: Option<&Path>) -> Result<u8> {
    let cmd = Cli::command();
    let Some(dir) = dir else {
        let mut out = Vec::new();
        clap_mangen::Man::new(cmd).render(&mut out)?;
        write_bytes(&out)?;
        return Ok(0);
    };
    if !dir.is_dir() {
        bail!(
            "{}: no such folder (create it first, e.g. mkdir -p {})",
            dir.display(),
            dir.display()
        );
    }
    let mut written = Vec::new();
    let mut pages = vec![("settle".to_string(), cmd.clone())];
    for sub in cmd.get_subcommands() {
        let name = format!("settle-{}", sub.get_name());
        pages.push((name.clone(), sub.clone().bin_name(format!("settle {}", sub.get_name()))));
    }
    for (name, page) in pages {
        let mut out = Vec::new();
        clap_mangen::Man::new(page).title(name.clone()).render(&mut out)?;
        let path = dir.join(format!("{name}.1"));
        std::fs::write(&path, out).with_context(|| format!("writing {}", path.display()))?;
        written.push(path);
    }
    let mut o = String::new();
    for w in written {
        o.push_str(&format!("{}\n", w.display()));
    }
    out(&o)?;
    Ok(0)
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
        ParsersAction::List => out(&settle::view::parsers::list(registry))?,
        ParsersAction::Show { name } => {
            let def = registry.definition(&name)?;
            out(def.source_text())?;
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
        ParsersAction::Draft { files, write, force, sample } => {
            return cmd_draft(&files, write.as_deref(), force, sample, registry);
        }
        ParsersAction::Check { definition, file } => {
            return cmd_parsers_check(&definition, file.as_deref(), registry);
        }
    }
    Ok(0)
}

/// `settle parsers draft`: one proposal per distinct format, printed or saved.
fn cmd_draft(
    files: &[PathBuf],
    write: Option<&str>,
    force: bool,
    sample: usize,
    registry: &Registry,
) -> Result<u8> {
    use settle::parser::draft;
    let mut samples = Vec::new();
    for f in files {
        let text = draft::read_sample(f, sample)
            .with_context(|| format!("cannot read {}", f.display()))?;
        samples.push((f.clone(), text));
    }
    let drafts = draft::draft_files(&samples, write).map_err(anyhow::Error::msg)?;
    let mut o = String::new();
    for d in &drafts {
        o.push_str(&d.toml);
        o.push_str(&d.report);
        o.push('\n');
    }
    if let Some(_name) = write {
        let dir = settle::parser::user_parser_dir()
            .context("no user parser folder: set XDG_CONFIG_HOME or HOME")?;
        std::fs::create_dir_all(&dir).with_context(|| format!("creating {}", dir.display()))?;
        for d in &drafts {
            let path = dir.join(format!("{}.toml", d.name));
            if path.exists() && !force {
                bail!(
                    "{} exists; add --force to replace it, or choose another name",
                    path.display()
                );
            }
            if registry.contains(&d.name) && !path.exists() {
                o.push_str(&format!(
                    "# note: `{}` replaces the definition of the same name from {}\n",
                    d.name,
                    settle::view::parsers::origin_text(
                        registry.entries().iter().find(|e| e.name() == d.name).map(|e| e.origin())
                    )
                ));
            }
            std::fs::write(&path, &d.toml)
                .with_context(|| format!("writing {}", path.display()))?;
            o.push_str(&format!(
                "# saved {} (check it: settle parsers check {} FILE)\n",
                path.display(),
                d.name
            ));
        }
    }
    out(&o)?;
    Ok(0)
}

/// `settle parsers check DEF [FILE]`.
fn cmd_parsers_check(definition: &str, file: Option<&Path>, registry: &Registry) -> Result<u8> {
    use settle::parser::{Definition, check};
    let as_path = Path::new(definition);
    let def = if as_path.extension().is_some_and(|e| e == "toml") || as_path.is_file() {
        Definition::from_file(as_path)?
    } else {
        registry.definition(definition)?.clone()
    };
    let Some(file) = file else {
        out(&format!(
            "{}: valid {} definition `{}`; give a FILE to see how it reads it\n",
            definition,
            def.engine(),
            def.name()
        ))?;
        return Ok(0);
    };
    let text = std::fs::read(file).with_context(|| format!("cannot read {}", file.display()))?;
    let report = check::examine(&def, &text);
    out(&check::report_text(&def, &file.display().to_string(), &report))?;
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
    let n = a.files.len();
    let parsers =
        settle::run::resolve::parsers_per_file(&a.parser, n).map_err(anyhow::Error::msg)?;
    let spec = config::from_files_with(&a.files, &parsers);
    if !a.follow {
        let (run, _) = pipeline::read_run_with(&spec, registry, partial_line(a.include_partial))?;
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
///
/// Records are printed from a store per source, so a file rewritten in place is not
/// printed again: only records that differ from what was printed are (after a note).
fn follow_records(spec: &RunSpec, registry: Arc<Registry>, poll: f64, json: bool) -> Result<u8> {
    use settle::run::SourceStore;
    use settle::run::ingest::{self, IngestItem, SourceActivity};

    let poll = Duration::from_secs_f64(poll.clamp(0.05, 60.0));
    let cfg = FollowConfig { poll_interval: poll, ..FollowConfig::default() };
    let mut readers = Vec::new();
    for s in &spec.sources {
        readers.push(SourceReader::new(s, registry.clone(), cfg.clone())?);
    }
    let n = readers.len();
    let mut stores: Vec<SourceStore> =
        readers.iter().map(|r| SourceStore::new(r.label(), "-")).collect();
    let mut activity = vec![SourceActivity::default(); n];
    // Records and events printed so far, and whether the end mark was.
    let mut printed = vec![0usize; n];
    let mut events = vec![0u64; n];
    let mut ended = vec![false; n];
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
            let store = &mut stores[i];
            for item in items {
                match &item {
                    IngestItem::Restart(reason) if !json => {
                        o.push_str(&format!("{}: restart ({reason:?})\n", r.label()));
                    }
                    IngestItem::Note(n) if !json => {
                        o.push_str(&format!("{}: note: {}\n", r.label(), view::parse::clean(n)));
                    }
                    _ => {}
                }
                ingest::apply(store, &mut activity[i], vec![item]);
            }
            if let Some(from) = store.take_rewound()
                && from < printed[i]
            {
                if !json {
                    o.push_str(&format!(
                        "{}: file rewritten; records from number {} on replaced\n",
                        r.label(),
                        from + 1
                    ));
                }
                printed[i] = from;
            }
            let names: std::collections::HashMap<u32, String> = store
                .series()
                .iter()
                .enumerate()
                .map(|(k, s)| (k as u32, s.name.clone()))
                .collect();
            for p in printed[i]..store.closed_records() {
                if let Some(rec) = store.record_at(p) {
                    o.push_str(&view::parse::record_line(r.label(), &rec, &names, json));
                }
            }
            printed[i] = printed[i].max(store.closed_records());
            let total = store.events_dropped + store.events.len() as u64;
            events[i] = events[i].min(total);
            let first =
                usize::try_from(events[i].saturating_sub(store.events_dropped)).unwrap_or(0);
            for e in store.events.iter().skip(first) {
                if !json {
                    o.push_str(&format!(
                        "{}: {} {}: {}\n",
                        r.label(),
                        e.severity.as_str(),
                        e.rule,
                        view::parse::clean(&e.message)
                    ));
                }
            }
            events[i] = total;
            match &store.ended {
                Some((_, message)) if !ended[i] => {
                    ended[i] = true;
                    if !json {
                        o.push_str(&format!(
                            "{}: end of run: {}\n",
                            r.label(),
                            view::parse::clean(message)
                        ));
                    }
                }
                None => ended[i] = false,
                _ => {}
            }
            if !o.is_empty() {
                out(&o)?;
            }
        }
        waker.wait(poll);
    }
}

/// Build the run spec of `check`/`report` from PATH arguments, by the same rules as `watch`
/// (`settle::run::resolve`); notes about files left out go to stderr.
fn resolve_run(
    paths: &[PathBuf],
    config_file: Option<&Path>,
    parsers: &[String],
    registry: &Registry,
) -> Result<RunSpec> {
    if let Some(c) = config_file {
        return Ok(config::load(c)?);
    }
    let (spec, notes) =
        settle::run::resolve::one_run(paths, parsers, registry).map_err(anyhow::Error::msg)?;
    print_notes(&notes);
    Ok(spec)
}

/// Say on stderr what was looked at and left out (never skip silently).
fn print_notes(notes: &[String]) {
    let mut err = std::io::stderr().lock();
    for n in notes {
        let _ = writeln!(err, "settle: note: {n}");
    }
}

/// `--include-partial` as the pipeline's policy for a final line without a newline.
fn partial_line(include: bool) -> pipeline::PartialLine {
    if include { pipeline::PartialLine::Include } else { pipeline::PartialLine::default() }
}

/// Judge a run that was read to its end; a run with nothing to judge is an error naming why,
/// never a verdict.
fn judge_run(run: &RunStore, criteria: &Criteria) -> Result<Judgement> {
    judge::try_judge(&run.judge_input(), criteria)
        .map_err(|why| anyhow::anyhow!(view::check::no_verdict(run, &why)))
}

fn cmd_check(a: CheckArgs, registry: Arc<Registry>) -> Result<u8> {
    let mut spec = resolve_run(&a.paths, a.config.as_deref(), &a.parser, &registry)?;
    spec.criteria = spec.criteria.merged(&a.criteria.to_criteria());
    config::check_criteria(&spec.criteria).map_err(|(k, m)| {
        anyhow::anyhow!("--{}: {m}", k.trim_start_matches("criteria.").replace('_', "-"))
    })?;
    let (run, parsers) = pipeline::read_run_with(&spec, registry, partial_line(a.include_partial))?;
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
    parsers: &[String],
    criteria: &CriteriaArgs,
    registry: Arc<Registry>,
    partial: pipeline::PartialLine,
) -> Result<(RunSpec, RunStore, Vec<String>, Judgement)> {
    let mut spec = resolve_run(paths, config_file, parsers, &registry)?;
    spec.criteria = spec.criteria.merged(&criteria.to_criteria());
    config::check_criteria(&spec.criteria).map_err(|(k, m)| {
        anyhow::anyhow!("--{}: {m}", k.trim_start_matches("criteria.").replace('_', "-"))
    })?;
    let (run, parsers) = pipeline::read_run_with(&spec, registry, partial)?;
    let j = judge_run(&run, &spec.criteria)?;
    Ok((spec, run, parsers, j))
}

fn cmd_report(a: ReportArgs, registry: Arc<Registry>) -> Result<u8> {
    use settle::report::gci::{GridPoint, GridSize, MeshStudy};
    use settle::report::{ParserProvenance, Provenance, ReportInput};

    // Said once, before any work: the report and its plots would each fail on it.
    if let Some(parent) = a.output.parent().filter(|p| !p.as_os_str().is_empty())
        && !parent.is_dir()
    {
        bail!(
            "-o {}: the folder {} does not exist; create it first (mkdir -p {})",
            a.output.display(),
            parent.display(),
            parent.display()
        );
    }
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
                &a.parser,
                &a.criteria,
                registry.clone(),
                partial_line(a.include_partial),
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
        &a.parser,
        &a.criteria,
        registry.clone(),
        partial_line(a.include_partial),
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
    let resolved = settle::watch::resolve_runs(&a.paths, &a.parser, &registry, a.each)
        .map_err(anyhow::Error::msg)?;
    print_notes(&resolved.notes);
    let mut specs = resolved.runs;
    let over = a.criteria.to_criteria();
    for spec in &mut specs {
        spec.criteria = spec.criteria.merged(&over);
        config::check_criteria(&spec.criteria).map_err(|(k, m)| anyhow::anyhow!("{k}: {m}"))?;
    }
    let code = watch_specs(specs, &a.live, registry);
    // The panels covered the notes printed before them: repeat them once they are gone.
    if !resolved.notes.is_empty() && std::io::IsTerminal::is_terminal(&std::io::stdout()) {
        print_notes(&resolved.notes);
    }
    code
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

#[cfg(test)]
mod tests {
    use super::error_text;

    #[derive(Debug, thiserror::Error)]
    #[error("cannot read run config c/settle.toml: {source}")]
    struct Named {
        source: std::io::Error,
    }

    #[test]
    fn each_cause_is_shown_once() {
        let io = std::io::Error::from(std::io::ErrorKind::NotFound);
        let shown = io.to_string();
        let e = anyhow::Error::new(Named { source: io }).context("loading the run");
        assert_eq!(
            error_text(&e),
            format!("loading the run: cannot read run config c/settle.toml: {shown}")
        );
        // Causes not named by the outer message are kept, in order.
        let e = anyhow::anyhow!("inner").context("middle").context("outer");
        assert_eq!(error_text(&e), "outer: middle: inner");
    }
}
