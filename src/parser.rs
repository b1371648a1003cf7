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

pub mod check;
mod compile;
mod detect;
pub mod draft;
mod error;
mod lines;
mod matcher;
mod number;
mod raw;
mod series;
mod shape;
mod table;

use std::path::{Path, PathBuf};
use std::sync::{Arc, OnceLock};

pub use detect::{Candidate, Detection, PatternHit};
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
        let text = read_text(path)?;
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

/// The set of known definitions; later ones replace earlier ones of the same name (and
/// remember whom they replaced, for `settle parsers list`).
#[derive(Debug, Clone, Default)]
pub struct Registry {
    entries: Vec<Entry>,
}

impl Registry {
    /// The shipped definitions only (read once per process, then cloned; each is compiled
    /// when first used).
    pub fn builtin() -> Registry {
        static BUILTIN_REGISTRY: OnceLock<Registry> = OnceLock::new();
        BUILTIN_REGISTRY.get_or_init(Registry::read_builtin).clone()
    }

    fn read_builtin() -> Registry {
        let mut reg = Registry::default();
        for (file, text) in BUILTIN {
            let stem = file.trim_end_matches(".toml");
            let entry = Entry::read(text, Origin::Builtin, &format!("<builtin>/{file}"), stem)
                .expect("shipped definitions parse: tests/parser_definitions.rs checks each one");
            reg.push(entry);
        }
        reg
    }

    /// Shipped definitions, then the user's folder (see [`user_parser_dir`]) if it exists,
    /// then each of `extra_dirs` (a folder of `*.toml`, or a single file).
    ///
    /// Every file's TOML is checked now (syntax, unknown keys, value types); regexes and
    /// rules are compiled when a definition is first used.
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

    /// Add one definition file, replacing a definition of the same name. Its TOML is
    /// checked now; it is compiled when first used.
    pub fn add_file(&mut self, path: &Path) -> Result<(), DefinitionError> {
        let text = read_text(path)?;
        let stem = path.file_stem().map(|s| s.to_string_lossy().into_owned()).unwrap_or_default();
        let entry = Entry::read(
            &text,
            Origin::File(path.to_path_buf()),
            &path.display().to_string(),
            &stem,
        )?;
        self.push(entry);
        Ok(())
    }

    /// Add a compiled definition, replacing one of the same name (keeping its position).
    pub fn insert(&mut self, def: Definition) {
        self.push(Entry::from_definition(def));
    }

    fn push(&mut self, mut entry: Entry) {
        match self.entries.iter().position(|e| e.name == entry.name) {
            Some(i) => {
                let old = std::mem::take(&mut self.entries[i].replaced);
                entry.replaced = old;
                entry.replaced.push(self.entries[i].origin.clone());
                self.entries[i] = entry;
            }
            None => self.entries.push(entry),
        }
    }

    /// Every definition by name, compiled or not, in load order.
    pub fn entries(&self) -> &[Entry] {
        &self.entries
    }

    /// The names of all definitions, in load order.
    pub fn names(&self) -> impl Iterator<Item = &str> {
        self.entries.iter().map(Entry::name)
    }

    /// Every definition that compiles, compiling all of them (listings and tests; reading a
    /// file needs only [`Registry::definition`]).
    pub fn definitions(&self) -> Vec<&Definition> {
        self.entries.iter().filter_map(|e| e.definition().ok()).collect()
    }

    /// The definition called `name`, compiled on first use; `None` when unknown or broken.
    pub fn get(&self, name: &str) -> Option<&Definition> {
        self.definition(name).ok()
    }

    /// The definition called `name`, or why there is none (with the closest known name).
    pub fn definition(&self, name: &str) -> Result<&Definition, RegistryError> {
        match self.entries.iter().find(|e| e.name == name) {
            Some(e) => e.definition(),
            None => Err(RegistryError::Unknown {
                name: name.to_string(),
                closest: self.closest(name).map(str::to_string),
            }),
        }
    }

    /// Whether `name` is a known definition (without compiling it).
    pub fn contains(&self, name: &str) -> bool {
        self.entries.iter().any(|e| e.name == name)
    }

    /// The known name nearest to `name`: a typo, at most one edit per three letters
    /// (rounded up), a swap of two neighbours counting as one.
    pub fn closest(&self, name: &str) -> Option<&str> {
        let limit = name.chars().count().div_ceil(3).max(1);
        self.entries
            .iter()
            .map(|e| (edit_distance(name, &e.name), e.name.as_str()))
            .filter(|&(d, _)| d <= limit)
            .min_by_key(|&(d, _)| d)
            .map(|(_, n)| n)
    }

    /// Pick a definition for a file from its first bytes (about 64 KiB). Only the
    /// `[[detect]]` patterns of each definition are compiled for this.
    pub fn detect(&self, head: &[u8]) -> Detection {
        detect::detect(&self.entries, head)
    }
}

fn read_text(path: &Path) -> Result<String, DefinitionError> {
    let bytes = std::fs::read(path)
        .map_err(|source| DefinitionError::Read { path: path.to_path_buf(), source })?;
    String::from_utf8(bytes).map_err(|e| DefinitionError::Read {
        path: path.to_path_buf(),
        source: std::io::Error::new(
            std::io::ErrorKind::InvalidData,
            format!("not UTF-8 text (byte {})", e.utf8_error().valid_up_to()),
        ),
    })
}

/// Why a definition could not be handed out by name.
#[derive(Debug, Clone, PartialEq, Eq, thiserror::Error)]
pub enum RegistryError {
    /// No definition has this name; `closest` is the nearest known name, if one is close.
    #[error("unknown parser `{name}`{}", suggest(.closest))]
    Unknown { name: String, closest: Option<String> },
    /// The definition exists but does not compile (the message names file, line and key).
    #[error("parser `{name}` cannot be used: {message}")]
    Invalid { name: String, message: String },
}

fn suggest(closest: &Option<String>) -> String {
    match closest {
        Some(c) => format!(": did you mean `{c}`? (see `settle parsers list`)"),
        None => " (see `settle parsers list`)".to_string(),
    }
}

/// One named definition of the registry: known by name at once, compiled when first needed.
///
/// Loading reads and checks the TOML of every file (syntax, unknown keys, value types),
/// which is cheap; building the regexes and engine program is what costs time and memory
/// for a large definition, so it waits until the definition is used: `--parser NAME`
/// compiles only NAME, detection compiles only `[[detect]]` patterns, and a definition's
/// rules only when a file is read with it.
#[derive(Debug, Clone)]
pub struct Entry {
    name: String,
    description: String,
    engine: String,
    origin: Origin,
    /// How messages name the file (`<builtin>/tarn.toml` or the path).
    file: String,
    default_name: String,
    text: Arc<str>,
    /// Definitions of the same name this one replaced, earliest first.
    replaced: Vec<Origin>,
    /// The `[[detect]]` entries as read at load (detection compiles only these).
    raw_detect: Arc<Vec<raw::RawDetect>>,
    detect: OnceLock<Result<Vec<DetectRule>, String>>,
    compiled: OnceLock<Result<Definition, String>>,
}

impl Entry {
    /// Check the TOML text (not the regexes) and note name, description and engine.
    fn read(
        text: &str,
        origin: Origin,
        file: &str,
        default_name: &str,
    ) -> Result<Entry, DefinitionError> {
        let raw: raw::RawDefinition =
            toml::from_str(text).map_err(|e| error::from_toml_error(file, text, &e))?;
        let name = raw.name.clone().unwrap_or_else(|| default_name.to_string());
        Ok(Entry {
            name,
            description: raw.description.clone().unwrap_or_default(),
            engine: raw.engine.clone(),
            origin,
            file: file.to_string(),
            default_name: default_name.to_string(),
            text: Arc::from(text),
            replaced: Vec::new(),
            raw_detect: Arc::new(raw.detect),
            detect: OnceLock::new(),
            compiled: OnceLock::new(),
        })
    }

    fn from_definition(def: Definition) -> Entry {
        let file = match &def.origin {
            Origin::Builtin => format!("<builtin>/{}.toml", def.name()),
            Origin::File(p) => p.display().to_string(),
        };
        Entry {
            name: def.name().to_string(),
            description: def.description().to_string(),
            engine: def.engine().to_string(),
            origin: def.origin.clone(),
            file,
            default_name: def.name().to_string(),
            text: Arc::from(def.source_text()),
            replaced: Vec::new(),
            raw_detect: Arc::new(Vec::new()),
            detect: OnceLock::from(Ok(def.compiled.detect.clone())),
            compiled: OnceLock::from(Ok(def)),
        }
    }

    pub fn name(&self) -> &str {
        &self.name
    }

    pub fn description(&self) -> &str {
        &self.description
    }

    /// The engine as written (`lines`, `table`; anything else fails to compile).
    pub fn engine(&self) -> &str {
        &self.engine
    }

    pub fn origin(&self) -> &Origin {
        &self.origin
    }

    /// Where the definitions this one replaced came from, earliest first.
    pub fn replaced(&self) -> &[Origin] {
        &self.replaced
    }

    /// The TOML text.
    pub fn source_text(&self) -> &str {
        &self.text
    }

    /// Has the full definition been compiled yet (for tests of lazy loading)?
    pub fn is_compiled(&self) -> bool {
        self.compiled.get().is_some()
    }

    /// The compiled definition, compiling it on first use.
    pub fn definition(&self) -> Result<&Definition, RegistryError> {
        self.compiled
            .get_or_init(|| {
                Definition::from_text(
                    &self.text,
                    self.origin.clone(),
                    &self.file,
                    &self.default_name,
                )
                .map_err(|e| e.to_string())
            })
            .as_ref()
            .map_err(|m| RegistryError::Invalid { name: self.name.clone(), message: m.clone() })
    }

    /// The detection patterns only (what scoring a file needs), compiled on first use.
    fn detect_rules(&self) -> Result<&[DetectRule], &str> {
        self.detect
            .get_or_init(|| {
                compile::compile_detect(&self.raw_detect)
                    .map_err(|p| error::from_problem(&self.file, &self.text, p).to_string())
            })
            .as_deref()
            .map_err(String::as_str)
    }
}

/// Edit distance over characters, without regard to ASCII case, counting a swap of two
/// neighbours as one edit (optimal string alignment: `tran` is one edit from `tarn`).
fn edit_distance(a: &str, b: &str) -> usize {
    let a: Vec<char> = a.chars().map(|c| c.to_ascii_lowercase()).collect();
    let b: Vec<char> = b.chars().map(|c| c.to_ascii_lowercase()).collect();
    let mut d = vec![vec![0usize; b.len() + 1]; a.len() + 1];
    for (i, row) in d.iter_mut().enumerate() {
        row[0] = i;
    }
    for (j, cell) in d[0].iter_mut().enumerate() {
        *cell = j;
    }
    for i in 1..=a.len() {
        for j in 1..=b.len() {
            let cost = usize::from(a[i - 1] != b[j - 1]);
            let mut v = (d[i - 1][j] + 1).min(d[i][j - 1] + 1).min(d[i - 1][j - 1] + cost);
            if i > 1 && j > 1 && a[i - 1] == b[j - 2] && a[i - 2] == b[j - 1] {
                v = v.min(d[i - 2][j - 2] + 1);
            }
            d[i][j] = v;
        }
    }
    d[a.len()][b.len()]
}

/// A TOML reading error placed at its file, line, column and key, with the expected value
/// in plain words (`path:4:9: criteria.drift: expected a number, found the text "x"`). Run
/// configs use it too, so both kinds of file report errors alike.
pub fn toml_error_message(file: &str, text: &str, err: &toml::de::Error) -> String {
    error::from_toml_error(file, text, err).to_string()
}

/// `$XDG_CONFIG_HOME/settle/parsers`, or `~/.config/settle/parsers` without it.
pub fn user_parser_dir() -> Option<PathBuf> {
    let base = match std::env::var_os("XDG_CONFIG_HOME") {
        Some(x) if !x.is_empty() && Path::new(&x).is_absolute() => PathBuf::from(x),
        _ => PathBuf::from(std::env::var_os("HOME").filter(|h| !h.is_empty())?).join(".config"),
    };
    Some(base.join("settle").join("parsers"))
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn only_the_definitions_used_are_compiled() {
        let dir = tempfile::tempdir().unwrap();
        for name in ["alpha", "beta"] {
            std::fs::write(
                dir.path().join(format!("{name}.toml")),
                format!(
                    "engine = \"lines\"\n[[detect]]\npattern = '^{name} '\nweight = 5\n[[rules]]\nkind = \"step\"\npattern = '^{name} (?P<iteration>\\d+)'\n"
                ),
            )
            .unwrap();
        }
        let reg = Registry::load_from(None, &[dir.path().to_path_buf()]).unwrap();
        let compiled = |reg: &Registry| -> Vec<String> {
            reg.entries().iter().filter(|e| e.is_compiled()).map(|e| e.name().to_string()).collect()
        };
        assert!(compiled(&reg).is_empty(), "loading compiles nothing");
        assert!(reg.definition("beta").is_ok());
        assert_eq!(compiled(&reg), vec!["beta"]);
        // Detection compiles only the detect patterns.
        let det = reg.detect(b"alpha 1\nalpha 2\n");
        assert_eq!(det.chosen.as_deref(), Some("alpha"));
        assert_eq!(compiled(&reg), vec!["beta"]);
    }

    #[test]
    fn typos_find_the_closest_name() {
        let reg = Registry::builtin();
        assert_eq!(reg.closest("tran"), Some("tarn"));
        assert_eq!(reg.closest("cvs"), Some("csv"));
        assert_eq!(reg.closest("tabel"), Some("table"));
        assert_eq!(reg.closest("gully"), None);
        assert_eq!(edit_distance("Tarn", "tarn"), 0);
        assert_eq!(edit_distance("abc", ""), 3);
        match reg.definition("tran") {
            Err(e) => assert!(e.to_string().contains("did you mean `tarn`"), "{e}"),
            Ok(_) => panic!("no such definition"),
        }
    }
}
