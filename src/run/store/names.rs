//! How views name series: a name cut to fit a column, the tag that tells a run's files
//! apart, and whether two same-named series of different files are one quantity printed
//! twice (used by [`RunStore::series_names`](super::RunStore::series_names)).

use super::{Series, SourceStore};

/// A series name cut to at most `max` characters for a narrow column, keeping what tells
/// names apart: the start of a `tag/` and the end of the name (`Forces/Pressure/z` in 12
/// characters is `Force…sure/z`, not `Forces/Pres…`). Views that cut a name show the full
/// one where there is room (the focused series' panel title).
pub fn fit_name(name: &str, max: usize) -> String {
    let n = name.chars().count();
    if n <= max {
        return name.to_string();
    }
    if max <= 1 {
        return "…".chars().take(max).collect();
    }
    let keep = max - 1;
    let head = match name.find('/') {
        Some(i) => name[..i].chars().count().min(keep / 2),
        None => keep / 2,
    };
    let tail = keep - head;
    let start: String = name.chars().take(head).collect();
    let end: String = name.chars().skip(n - tail).collect();
    format!("{start}…{end}")
}

/// How a view names one series (see [`RunStore::series_names`](super::RunStore::series_names)).
#[derive(Debug, Clone, PartialEq, Eq)]
pub struct SeriesName {
    /// Unique within the run: the parser's name, or `tag/name`.
    pub name: String,
    /// `(source, series)` of the earlier series this one repeats; it is not judged.
    pub duplicate_of: Option<(usize, usize)>,
}

/// How many common iterations decide whether two same-named series are one quantity.
const SAME_QUANTITY_POINTS: usize = 20;
/// Disagreements among those points that make two series different quantities (a value
/// printed with few decimals can disagree once or twice near zero).
const DIFFERENT_AFTER: usize = 3;

/// Are `a` (of source `sa`) and `b` (of `sb`) the same quantity printed twice? Same role,
/// and fewer than [`DIFFERENT_AFTER`] disagreements among the first [`SAME_QUANTITY_POINTS`]
/// iterations that both hold. A pair of values agrees when they differ by at most 1e-4 of
/// their size (numbers printed with five significant digits) or by at most 1e-3 of the
/// largest size `a` has had so far (numbers printed with fixed decimals, near zero).
///
/// The decision must not flip back and forth as the files grow. Records are appended with
/// rising iteration numbers, so the set of iterations both series hold only gains members
/// above its current largest one: its first [`SAME_QUANTITY_POINTS`] members never change
/// once there are that many. Whether a pair agrees depends only on values already written
/// (the pair and `a` before it), so it never changes either. The count of disagreements
/// can therefore only grow: the answer is "same" (also with no common iteration yet: no
/// evidence against it) until the data shows enough disagreement, then "different" for
/// good. A restart (iterations going back) is the one case that can reopen the question.
pub fn same_quantity(sa: &SourceStore, a: &Series, sb: &SourceStore, b: &Series) -> bool {
    if a.role != b.role {
        return false;
    }
    let ia = sa.series_iterations(a);
    let ib = sb.series_iterations(b);
    let (va, vb) = (a.values(), b.values());
    let (mut i, mut j, mut compared, mut disagree) = (0, 0, 0, 0);
    let mut scale = 0.0f64;
    let mut scanned = 0;
    while i < ia.len() && j < ib.len() && compared < SAME_QUANTITY_POINTS {
        match ia[i].cmp(&ib[j]) {
            std::cmp::Ordering::Less => i += 1,
            std::cmp::Ordering::Greater => j += 1,
            std::cmp::Ordering::Equal => {
                while scanned <= i {
                    if va[scanned].is_finite() {
                        scale = scale.max(va[scanned].abs());
                    }
                    scanned += 1;
                }
                let (x, y) = (va[i], vb[j]);
                let d = (x - y).abs();
                let agree = (x.is_nan() && y.is_nan())
                    || x == y
                    || d <= 1e-4 * x.abs().max(y.abs())
                    || d <= 1e-3 * scale;
                if !agree {
                    disagree += 1;
                    if disagree >= DIFFERENT_AFTER {
                        return false;
                    }
                }
                compared += 1;
                // Inner iterations: only the first value at an iteration is compared.
                let it = ia[i];
                while i < ia.len() && ia[i] == it {
                    i += 1;
                }
                while j < ib.len() && ib[j] == it {
                    j += 1;
                }
            }
        }
    }
    true
}

/// A short, readable tag for each source of a run: the part of its file name that differs
/// between the run's files.
///
/// File names (without the last extension) are split into words at `_`, `-`, `.` and
/// blanks; the words all names share at the start and at the end are dropped; a tag
/// shorter than three characters takes back the neighbouring dropped words until it is
/// not (`b1_probe_p.csv`, `b1_probe_k.csv` → `probe_p`, `probe_k`); an empty tag is the
/// whole stem. When two tags are still equal (`history.dat`, `history.csv`) the file
/// names are used, and when those are equal too, the labels as given.
pub fn source_tags(labels: &[&str]) -> Vec<String> {
    let files: Vec<&str> = labels.iter().map(|l| l.rsplit('/').next().unwrap_or(l)).collect();
    let stems: Vec<&str> = files
        .iter()
        .map(|f| match f.rfind('.') {
            Some(i) if i > 0 => &f[..i],
            _ => f,
        })
        .collect();
    // Each word with its byte range in the stem, so a tag keeps the stem's own separators.
    let spans: Vec<Vec<(usize, usize)>> = stems
        .iter()
        .map(|s| {
            let mut out = Vec::new();
            let mut start = None;
            for (i, c) in s.char_indices().chain(std::iter::once((s.len(), '_'))) {
                let sep = matches!(c, '_' | '-' | '.' | ' ');
                match (sep, start) {
                    (true, Some(st)) => {
                        out.push((st, i));
                        start = None;
                    }
                    (false, None) => start = Some(i),
                    _ => {}
                }
            }
            out
        })
        .collect();
    let words: Vec<Vec<&str>> = spans
        .iter()
        .zip(&stems)
        .map(|(sp, s)| sp.iter().map(|&(a, b)| &s[a..b]).collect())
        .collect();
    let shortest = words.iter().map(Vec::len).min().unwrap_or(0);
    let (prefix, suffix) = if words.len() < 2 {
        (0, 0)
    } else {
        let same_at = |k: usize, from_end: bool| {
            let pick = |w: &[&str]| -> String {
                if from_end { w[w.len() - 1 - k].to_string() } else { w[k].to_string() }
            };
            words.iter().all(|w| pick(w) == pick(&words[0]))
        };
        let p = (0..shortest).take_while(|&k| same_at(k, false)).count();
        let s = (0..shortest - p).take_while(|&k| same_at(k, true)).count();
        (p, s)
    };
    let mut tags: Vec<String> = words
        .iter()
        .zip(&stems)
        .zip(&spans)
        .map(|((w, stem), sp)| {
            let (mut a, mut b) = (prefix, w.len() - suffix);
            let tag = |a: usize, b: usize| {
                if a < b { stem[sp[a].0..sp[b - 1].1].to_string() } else { String::new() }
            };
            while tag(a, b).chars().count() < 3 && (a > 0 || b < w.len()) {
                if a > 0 {
                    a -= 1;
                } else {
                    b += 1;
                }
            }
            let t = tag(a, b);
            if t.is_empty() { stem.to_string() } else { t }
        })
        .collect();
    let clash = |tags: &[String]| tags.iter().enumerate().any(|(i, t)| tags[..i].contains(t));
    if clash(&tags) {
        tags = files.iter().map(|f| f.to_string()).collect();
    }
    if clash(&tags) {
        tags = labels.iter().map(|l| l.to_string()).collect();
    }
    tags
}
