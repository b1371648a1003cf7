//! Parser definitions and the engines that run them: log lines in, [`Output`] items out.
//!
//! A parser definition is a TOML file (format documented in `parsers/README.md`). Loading one
//! goes through a single boundary: the raw serde form (`raw.rs`, unknown keys rejected) is
//! compiled into a validated [`Definition`] (`compile.rs`, regexes built, captures checked),
//! and errors name the file, key path, line and column (`error.rs`). A [`Definition`] makes
//! any number of independent [`Parser`]s, one per source; each counts its own lines.
//!
//! Two engines: `lines` (`lines.rs`, regex rules over free text with multi-line records) and
//! `table` (`table.rs`, delimited columns). Numbers are read by `number.rs`; choosing a
//! definition for a file from its first bytes is `detect.rs`. The [`Registry`] holds the
//! shipped definitions (embedded from `parsers/*.toml`) and the user's.
//!
//! A parser never panics and never stops on bad input: lines it cannot use are counted, and
//! the first reasons are reported as [`Output::Skipped`].

mod compile;
mod detect;
mod error;
mod lines;
mod matcher;
mod number;
mod raw;
mod series;
mod table;

use std::path::{Path, PathBuf};
use std::sync::OnceLock;

pub use detect::{Candidate, Detection};
pub use error::DefinitionError;
pub use number::{parse_integer, parse_number};

use crate::record::{Batch, LineStats, RecordRef, Sink};
use compile::{Compiled, DetectRule, Program};

/// The definitions shipped with settle, embedded in the binary.
const BUILTIN: &[(&str, &str)] = &[
    ("table.toml", include_str!("../parsers/table.toml")),
    ("csv.toml", include_str!("../parsers/csv.toml")),
    ("tarn.toml", include_str!("../parsers/tarn.toml")),
];

/// Where a definition came from.
#[derive(Debug, Clone, PartialEq, Eq)]
pub enum Origin {
    /// Shipped in the binary.
    Builtin,
    /// Read from this file.
    File(PathBuf),
}

/// A compiled, validated parser definition.
#[derive(Debug, Clone)]
pub struct Definition {
    compiled: Compiled,
    origin: Origin,
    source_text: String,
}

impl Definition {
    /// Compile a definition from TOML text. `file` names it in error messages;
    /// `default_name` is used when the text has no `name` key.
    pub fn from_text(
        text: &str,
        origin: Origin,
        file: &str,
        default_name: &str,
    ) -> Result<Definition, DefinitionError> {
        let raw: raw::RawDefinition =
            toml::from_str(text).map_err(|e| error::from_toml_error(file, text, &e))?;
        let compiled =
            compile::compile(raw, default_name).map_err(|p| error::from_problem(file, text, p))?;
        Ok(Definition { compiled, origin, source_text: text.to_string() })
    }

    /// Read and compile a definition file; its name defaults to the file stem.
    pub fn from_file(path: &Path) -> Result<Definition, DefinitionError> {
        let bytes = std::fs::read(path)
            .map_err(|source| DefinitionError::Read { path: path.to_path_buf(), source })?;
        let text = String::from_utf8(bytes).map_err(|e| DefinitionError::Read {
            path: path.to_path_buf(),
            source: std::io::Error::new(
                std::io::ErrorKind::InvalidData,
                format!("not UTF-8 text (byte {})", e.utf8_error().valid_up_to()),
            ),
        })?;
        let stem = path.file_stem().map(|s| s.to_string_lossy().into_owned()).unwrap_or_default();
        Definition::from_text(
            &text,
            Origin::File(path.to_path_buf()),
            &path.display().to_string(),
            &stem,
        )
    }

    pub fn name(&self) -> &str {
        &self.compiled.name
    }

    pub fn description(&self) -> &str {
        &self.compiled.description
    }

    /// `"lines"` or `"table"`.
    pub fn engine(&self) -> &'static str {
        match self.compiled.program {
            Program::Lines(_) => "lines",
            Program::Table(_) => "table",
        }
    }

    pub fn origin(&self) -> &Origin {
        &self.origin
    }

    /// The TOML text the definition was compiled from (for provenance hashing in reports).
    pub fn source_text(&self) -> &str {
        &self.source_text
    }

    /// A fresh parser for one source.
    pub fn parser(&self) -> Parser {
        let engine = match &self.compiled.program {
            Program::Lines(p) => Engine::Lines(lines::LinesParser::new(p.clone())),
            Program::Table(p) => Engine::Table(table::TableParser::new(p.clone())),
        };
        Parser { engine }
    }

    fn detect_rules(&self) -> &[DetectRule] {
        &self.compiled.detect
    }
}

/// A running parser: feed it complete lines, collect [`Output`]s.
#[derive(Debug, Clone)]
pub struct Parser {
    engine: Engine,
}

// One parser exists per followed source, so the size of the larger variant costs nothing;
// boxing it would add an indirection on the per-line hot path.
#[allow(clippy::large_enum_variant)]
#[derive(Debug, Clone)]
enum Engine {
    Lines(lines::LinesParser),
    Table(table::TableParser),
}

impl Parser {
    /// One complete line without its `'\n'` (a trailing `'\r'` is removed). Line numbers are
    /// counted here, 1-based.
    pub fn feed(&mut self, line: &[u8], out: &mut dyn Sink) {
        match &mut self.engine {
            Engine::Lines(p) => p.feed(line, out),
            Engine::Table(p) => p.feed(line, out),
        }
    }

    /// Complete lines, each ending in `'\n'` (what [`feed`](Self::feed) takes, many at once).
    pub fn feed_block(&mut self, block: &[u8], out: &mut dyn Sink) {
        match &mut self.engine {
            Engine::Lines(p) => p.feed_block(block, out),
            Engine::Table(p) => p.feed_block(block, out),
        }
    }

    /// End of data: emit the record still open (a log ending mid-record, as after a crash).
    pub fn finish(&mut self, out: &mut dyn Sink) {
        match &mut self.engine {
            Engine::Lines(p) => p.finish(out),
            Engine::Table(p) => p.finish(out),
        }
    }

    pub fn stats(&self) -> LineStats {
        match &self.engine {
            Engine::Lines(p) => p.stats(),
            Engine::Table(p) => p.stats(),
        }
    }

    /// The record a `lines` parser holds open until the next step line closes it, with the
    /// values read so far (a live view may show it once the log has been quiet a while).
    pub fn open_record(&self) -> Option<RecordRef<'_>> {
        match &self.engine {
            Engine::Lines(p) => p.open_record(),
            Engine::Table(_) => None,
        }
    }

    /// A parser for a later part of the file, to be read on another core while this one
    /// reads the parts before it; see [`join`](Self::join).
    pub fn speculative(&self) -> Parser {
        let engine = match &self.engine {
            Engine::Lines(p) => Engine::Lines(p.speculative()),
            Engine::Table(p) => Engine::Table(p.speculative()),
        };
        Parser { engine }
    }

    /// `self` has read everything before `part`; `worker` (from [`speculative`](
    /// Self::speculative), made before the parts preceding `part` were read) has read `part`
    /// into `batch`. Hand `out` exactly what `self` reading `part` would have, and continue
    /// in the state that would leave. Each engine says why its hand-over is exact, and reads
    /// `part` itself when it cannot show it. Returns whether the worker's reading was used.
    pub fn join(&mut self, part: &[u8], worker: Parser, batch: &Batch, out: &mut dyn Sink) -> bool {
        match (&mut self.engine, worker.engine) {
            (Engine::Lines(p), Engine::Lines(w)) => p.join(part, w, batch, out),
            (Engine::Table(p), Engine::Table(w)) => p.join(part, w, batch, out),
            _ => {
                self.feed_block(part, out);
                false
            }
        }
    }
}

/// The set of known definitions; later ones replace earlier ones of the same name.
#[derive(Debug, Clone, Default)]
pub struct Registry {
    defs: Vec<Definition>,
}

impl Registry {
    /// The shipped definitions only (compiled once per process, then cloned: compiled
    /// regexes are shared, not rebuilt).
    pub fn builtin() -> Registry {
        static BUILTIN_REGISTRY: OnceLock<Registry> = OnceLock::new();
        BUILTIN_REGISTRY.get_or_init(Registry::compile_builtin).clone()
    }

    fn compile_builtin() -> Registry {
        let mut reg = Registry::default();
        for (file, text) in BUILTIN {
            let stem = file.trim_end_matches(".toml");
            let def =
                Definition::from_text(text, Origin::Builtin, &format!("<builtin>/{file}"), stem)
                    .expect(
                        "shipped definitions compile: tests/parser_definitions.rs checks each one",
                    );
            reg.insert(def);
        }
        reg
    }

    /// Shipped definitions, then the user's folder (see [`user_parser_dir`]) if it exists,
    /// then each of `extra_dirs` (a folder of `*.toml`, or a single file).
    pub fn load(extra_dirs: &[PathBuf]) -> Result<Registry, DefinitionError> {
        Registry::load_from(user_parser_dir().as_deref(), extra_dirs)
    }

    /// [`Registry::load`] with the user folder given explicitly.
    pub fn load_from(
        user_dir: Option<&Path>,
        extra_dirs: &[PathBuf],
    ) -> Result<Registry, DefinitionError> {
        let mut reg = Registry::builtin();
        if let Some(dir) = user_dir
            && dir.is_dir()
        {
            reg.add_dir(dir)?;
        }
        for path in extra_dirs {
            if path.is_file() {
                reg.add_file(path)?;
            } else {
                reg.add_dir(path)?;
            }
        }
        Ok(reg)
    }

    /// Add every `*.toml` file of a folder, in name order.
    pub fn add_dir(&mut self, dir: &Path) -> Result<(), DefinitionError> {
        let read_err = |source| DefinitionError::Read { path: dir.to_path_buf(), source };
        let mut files: Vec<PathBuf> = std::fs::read_dir(dir)
            .map_err(read_err)?
            .filter_map(|e| e.ok().map(|e| e.path()))
            .filter(|p| p.extension().is_some_and(|x| x == "toml") && p.is_file())
            .collect();
        files.sort();
        for f in files {
            self.add_file(&f)?;
        }
        Ok(())
    }

    /// Add one definition file, replacing a definition of the same name.
    pub fn add_file(&mut self, path: &Path) -> Result<(), DefinitionError> {
        let def = Definition::from_file(path)?;
        self.insert(def);
        Ok(())
    }

    /// Add a compiled definition, replacing one of the same name (keeping its position).
    pub fn insert(&mut self, def: Definition) {
        match self.defs.iter().position(|d| d.name() == def.name()) {
            Some(i) => self.defs[i] = def,
            None => self.defs.push(def),
        }
    }

    pub fn definitions(&self) -> &[Definition] {
        &self.defs
    }

    pub fn get(&self, name: &str) -> Option<&Definition> {
        self.defs.iter().find(|d| d.name() == name)
    }

    /// Pick a definition for a file from its first bytes (about 64 KiB).
    pub fn detect(&self, head: &[u8]) -> Detection {
        detect::detect(&self.defs, head)
    }
}

/// `$XDG_CONFIG_HOME/settle/parsers`, or `~/.config/settle/parsers` without it.
pub fn user_parser_dir() -> Option<PathBuf> {
    let base = match std::env::var_os("XDG_CONFIG_HOME") {
        Some(x) if !x.is_empty() && Path::new(&x).is_absolute() => PathBuf::from(x),
        _ => PathBuf::from(std::env::var_os("HOME").filter(|h| !h.is_empty())?).join(".config"),
    };
    Some(base.join("settle").join("parsers"))
}
