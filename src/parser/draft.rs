//! `settle parsers draft FILE…`: propose a parser definition from a sample of a file.
//!
//! Drafting is a heuristic, so every step follows a rule that can be stated (and is, here
//! and in comments of the TOML it writes). Lines are first reduced to *shapes*: the line
//! with its numbers blanked (`  Ux res # lin # sweeps`, see `shape.rs`).
//!
//! **Table or log.** A file is a table when, with one delimiter (tab if the file has tabs,
//! then comma, semicolon, blanks), three fifths of its lines that are not blank or comments
//! split into the same number of cells (at least two), with a number in the first cell,
//! and four fifths of those rows have the same width. It then gets a `table` definition
//! (`draft/table.rs`):
//!
//! * the header is the last line above the first data row (a comment prefix removed); a
//!   header cell in brackets lists the names of a vector column (`(total_x total_y
//!   total_z)`), and bracketed data cells are vectors (the engine reads both);
//! * the first column is the iteration when its numbers are whole and rise, the physical
//!   time when they are fractional and rise, otherwise rows are numbered;
//! * every other column's role is guessed from its values (below).
//!
//! Anything else is a log and gets a `lines` definition (`draft/log.rs`):
//!
//! 1. **Step line.** Among shapes seen at least three times, those with a number that
//!    rises from one occurrence to the next (nine times in ten) can open records: a whole
//!    number is the iteration, a fractional one the physical time. Shapes seen less than a
//!    twenty-fifth as often as the most frequent such shape are dropped (an output written
//!    every 100 steps). The winner is, in order: a shape with a word such as `step`,
//!    `iter`, `time`, `cycle`; one with an iteration number; the one seen least often (the
//!    outer loop, not inner iterations with a global counter); the one seen first. Other
//!    numbers on the step line are read as values.
//! 2. **Records** run from one step line to the next.
//! 3. **Events.** A line with a keyword (errors: `error`, `fatal`, `abort`, `exception`,
//!    `traceback`, …; warnings: `warning`, `warn`, `notice`, `caution`; the end of the
//!    run: `finished`, `completed`, `terminated`, `end`; information: `converged`,
//!    `reached`, `restart`) is an event unless it has numbers and recurs in half the
//!    records or more (then it is a value line: `continuity error 1e-3`). An end line must
//!    be seen at most twice. One rule per distinct start of line up to the keyword; the
//!    first line after the last error line, when no rule reads it, becomes a `stack_trace`
//!    event limited to lines after the error.
//! 4. **Value lines** are the other shapes with numbers seen in at least two records.
//!    Shapes that differ in a single word (`Ux res # …`, `p res # …`) fold into one rule
//!    with that word captured as `name`; the largest folds are made first.
//! 5. **Numbers** get names from the words around them: a bracketed run of numbers is a
//!    vector (`Total : (# # #)` → `Total_x`, `Total_y`, `Total_z`; `x`, `y`, `z` when the
//!    word is the captured name); else the word right after the number when it ends the
//!    line or precedes a separator (`,` `;` `)` `]` `.` `|`) and is not a unit (`5
//!    sweeps`); else the word before it, over punctuation (`drag 0.41`, `r(p)=1e-3`). When the same line right
//!    above a rule's first line in four records of five is a header whose words match the
//!    numbers (a small table, one row per variable), the header's words name them.
//!    Whole numbers that count 1, 2, 3… within each record (inner-iteration counters) are
//!    not read.
//! 6. **Series names.** A rule with a captured name gives `{name}` for the capture whose
//!    role is residual (or its only capture) and `{name}/capture` for the others; a
//!    single-number line gives a series named by its first word (`continuity`, `wall`);
//!    a line with several numbers one series per capture, prefixed by its first word
//!    when the capture name is generic (`mean`, `max`, …). Names are kept unique.
//! 7. **Repeats and blocks.** When a rule gives the same series several times in half the
//!    records or more, it is either an echoed block printed under several labels (the
//!    nearest line above with words and no numbers differs between the repeats: `Total`
//!    under `Forces` and under `Moments`), which becomes one rule per label with `after`
//!    set to the label line, `repeat = "first"` and series prefixed by the label's first
//!    word; or inner iterations, which get `repeat = "all"`. A rule with no words of its
//!    own (`name value` lines of an echoed monitor block) that sits under the same label
//!    line nine times in ten gets `after` set to that label, so it reads nothing else.
//! 8. **Values before their step line**: a rule whose first line comes before the first
//!    step line, and that is seen about once per record, gets `attach = "next"`.
//! 9. **Roles** are guessed per capture, and per variable in a folded rule, by `roles.rs`:
//!    values spanning decades and falling are residuals, sweep counts and error measures
//!    indicators, step sizes and clocks info, everything else monitors. Variables of one
//!    folded rule whose roles differ get separate rules (names listed in the pattern).
//!    Each guess is written beside the role as a `guess:` comment with its reason.
//! 10. **Detection**: the first line, when it does not recur, as a banner (weight 10) and
//!     the step line seen at least twice (weight 5); a table's header line (weight 6).
//!
//! After drafting, the definition is compiled and run over the sample, and what it
//! extracts (series, counts, first and last values, events, the unused line shapes) is
//! printed below it as TOML comments, so the user sees at once whether it is right.

mod emit;
mod log;
mod names;
mod roles;
mod table;

use std::io::{BufRead, BufReader};
use std::path::{Path, PathBuf};

use super::check::{examine, extract_summary, lines_of};
use super::{Definition, Origin, Registry};

pub use roles::{Guess, guess};

/// Lines of a file read as the sample by default.
pub const DEFAULT_SAMPLE_LINES: usize = 20_000;
/// Bytes read at most, whatever the line count (a file of very long lines).
const MAX_SAMPLE_BYTES: u64 = 64 << 20;

/// One proposed definition.
#[derive(Debug, Clone)]
pub struct Drafted {
    /// The definition's name (and file stem when written).
    pub name: String,
    /// The files it was drafted from (several when they share one format).
    pub files: Vec<PathBuf>,
    /// The TOML text.
    pub toml: String,
    /// What it extracts from the sample, as TOML comments.
    pub report: String,
}

/// The first `max_lines` lines of a file (at most 64 MiB).
pub fn read_sample(path: &Path, max_lines: usize) -> std::io::Result<Vec<u8>> {
    use std::io::Read;
    let f = std::fs::File::open(path)?;
    let mut r = BufReader::new(f.take(MAX_SAMPLE_BYTES));
    let mut out = Vec::new();
    for _ in 0..max_lines.max(1) {
        if r.read_until(b'\n', &mut out)? == 0 {
            break;
        }
    }
    Ok(out)
}

/// A definition name from a file name: letters, digits, `_`, `-`, `.`.
fn name_from(stem: &str) -> String {
    let n: String = stem
        .chars()
        .map(|c| if c.is_ascii_alphanumeric() || matches!(c, '_' | '-') { c } else { '_' })
        .collect();
    let n = n.trim_matches('_').to_string();
    if n.is_empty() { "drafted".into() } else { n }
}

/// Draft one definition called `name` from `text` (a sample of `file`).
pub fn draft_text(name: &str, file: &str, text: &[u8]) -> Result<Drafted, String> {
    let lines = lines_of(text);
    if lines.iter().all(|l| l.trim_ascii().is_empty()) {
        return Err(format!("{file}: no lines to draft from (the file is empty)"));
    }
    let toml = match table::table_shape(&lines) {
        Some(shape) => table::draft_table(name, file, &lines, &shape)?,
        None => log::draft_log(name, file, &lines)?,
    };
    let def = Definition::from_text(&toml, Origin::File(PathBuf::from(file)), file, name)
        .map_err(|e| {
            format!("the draft for {file} does not compile (a bug in drafting, please report it): {e}\n{toml}")
        })?;
    let exam = examine(&def, text);
    let mut report = format!("\n# ---- what this definition reads from {file} ----\n");
    report.push_str(&extract_summary(&exam, "# "));
    // Would detection pick it for this file among the shipped definitions?
    let mut reg = Registry::builtin();
    reg.insert(def.clone());
    let head = &text[..text.len().min(64 * 1024)];
    let det = reg.detect(head);
    if det.chosen.as_deref() != Some(name) {
        report.push_str(&format!(
            "# detection: {}; name this definition with --parser {name}, or strengthen its [[detect]] patterns\n",
            det.summary
        ));
    }
    Ok(Drafted { name: name.to_string(), files: vec![PathBuf::from(file)], toml, report })
}

/// Draft one definition per file; files whose drafts come out the same (apart from their
/// names) share one. `base`: the name of the first file's definition; the others are
/// `base-TAG`, TAG the part of their file name that differs from the others. Without it,
/// each is named after its file.
pub fn draft_files(
    samples: &[(PathBuf, Vec<u8>)],
    base: Option<&str>,
) -> Result<Vec<Drafted>, String> {
    if let Some(b) = base
        && (b.is_empty()
            || !b.chars().all(|c| c.is_ascii_alphanumeric() || matches!(c, '_' | '-' | '.')))
    {
        return Err(format!("`{b}` is not a usable name: use letters, digits, `_`, `-` or `.`"));
    }
    let labels: Vec<String> = samples.iter().map(|(p, _)| p.display().to_string()).collect();
    let label_refs: Vec<&str> = labels.iter().map(String::as_str).collect();
    let tags = crate::run::store::source_tags(&label_refs);
    let mut out: Vec<Drafted> = Vec::new();
    for (i, (path, text)) in samples.iter().enumerate() {
        let stem = path.file_stem().map(|s| s.to_string_lossy().into_owned()).unwrap_or_default();
        let name = match base {
            Some(b) if i == 0 => b.to_string(),
            Some(b) => format!("{b}-{}", name_from(&tags[i])),
            None => name_from(&stem),
        };
        let d = draft_text(&name, &labels[i], text)?;
        let body = |t: &str| -> String {
            t.lines()
                .filter(|l| {
                    !(l.starts_with('#')
                        || l.starts_with("name =")
                        || l.starts_with("description ="))
                })
                .collect::<Vec<_>>()
                .join("\n")
        };
        match out.iter_mut().find(|o| body(&o.toml) == body(&d.toml)) {
            Some(same) => {
                same.files.push(path.clone());
                same.report.push_str(&format!(
                    "# {} has the same format: this definition reads it too\n{}",
                    labels[i], d.report
                ));
            }
            None => out.push(d),
        }
    }
    Ok(out)
}
