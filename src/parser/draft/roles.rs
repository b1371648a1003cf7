//! Guessing how the judge should treat a series, from its name and its values, with the
//! reason written out (it goes into the draft as a TOML comment).
//!
//! The rules, first match wins (common practice, no source; they are guesses for a person
//! to confirm):
//!
//! 1. whole numbers with a name like a solver count (`sweeps`, `iter`, `its`, `lin`, …):
//!    **indicator** (a linear-solver sweep count);
//! 2. a name like an error measure (`err`, `imbalance`, `continuity`, `divergence`, …):
//!    **indicator**;
//! 3. a name like a step size or a clock (`cfl`, `courant`, `dt`, `time`, `wall`, `cpu`,
//!    …): **info**
//!    (shown, not judged);
//! 4. values never negative that span at least two decades and fall (the median of the last
//!    fifth at least ten times below the median of the first fifth): **residual**;
//! 5. values never negative that span at least one decade, with a name like a residual
//!    (`res`, `residual`, `rms`, `norm`, …): **residual**; with such a name but a narrower
//!    span (a linear solver's final residual): **indicator**;
//! 6. anything else: **monitor** (judged for stationarity and blow-up).

use crate::record::Role;

/// A guessed role and why.
#[derive(Debug, Clone, PartialEq)]
pub struct Guess {
    pub role: Role,
    pub reason: String,
}

const COUNT_WORDS: &[&str] =
    &["sweep", "iter", "nit", "lin", "cg", "gmres", "amg", "cycles", "solves", "corrector"];
/// Short count words, matched as whole words only (`12 its`, not `units`).
const COUNT_SHORT: &[&str] = &["its", "it", "n", "count"];
const ERROR_WORDS: &[&str] =
    &["err", "imbalance", "continuity", "divergence", "closure", "unbalance", "defect"];
const INFO_WORDS: &[&str] = &[
    "cfl", "courant", "dt", "deltat", "timestep", "time", "wall", "cpu", "clock", "elapsed", "mem",
    "memory", "relax", "urf", "seconds",
];
const RESIDUAL_WORDS: &[&str] = &["res", "resid", "residual", "rms", "norm", "l2", "linf"];

fn has_any(name: &str, words: &[&str]) -> bool {
    let n = name.to_ascii_lowercase();
    words.iter().any(|w| n.contains(w))
}

/// The word parts of a name (`U_res` → `u`, `res`), for matching short words exactly.
fn has_word(name: &str, words: &[&str]) -> bool {
    name.to_ascii_lowercase()
        .split(|c: char| !c.is_ascii_alphanumeric())
        .any(|part| words.iter().any(|w| part == *w || (w.len() >= 4 && part.starts_with(w))))
}

fn median(mut v: Vec<f64>) -> f64 {
    if v.is_empty() {
        return f64::NAN;
    }
    v.sort_by(f64::total_cmp);
    v[v.len() / 2]
}

/// Guess the role of a series called `name` (the capture or column name, with the
/// variable name for folded rules) from its values in order.
pub fn guess(name: &str, values: &[f64], whole: bool) -> Guess {
    let g = |role, reason: String| Guess { role, reason };
    if whole && (has_any(name, COUNT_WORDS) || has_word(name, COUNT_SHORT)) {
        return g(Role::Indicator, "whole numbers named like a solver count".into());
    }
    if has_any(name, ERROR_WORDS) {
        return g(Role::Indicator, "named like an error measure".into());
    }
    if has_word(name, INFO_WORDS) {
        return g(Role::Info, "named like a step size or a clock: shown, not judged".into());
    }
    let finite: Vec<f64> = values.iter().copied().filter(|v| v.is_finite()).collect();
    let nonneg = !finite.is_empty() && finite.iter().all(|&v| v >= 0.0);
    let positive: Vec<f64> = finite.iter().copied().filter(|&v| v > 0.0).collect();
    let decades = match (
        positive.iter().copied().reduce(f64::min),
        positive.iter().copied().reduce(f64::max),
    ) {
        (Some(lo), Some(hi)) => (hi / lo).log10(),
        _ => 0.0,
    };
    if nonneg && positive.len() >= 5 && decades >= 2.0 {
        let fifth = (positive.len() / 5).max(1);
        let head = median(positive[..fifth].to_vec());
        let tail = median(positive[positive.len() - fifth..].to_vec());
        if tail * 10.0 <= head {
            return g(
                Role::Residual,
                format!(
                    "falls {:.1} decades ({} → {})",
                    (head / tail).log10(),
                    short(head),
                    short(tail)
                ),
            );
        }
    }
    if nonneg && decades >= 1.0 && has_word(name, RESIDUAL_WORDS) {
        return g(Role::Residual, format!("named like a residual, spans {decades:.1} decades"));
    }
    if nonneg && has_word(name, RESIDUAL_WORDS) {
        return g(
            Role::Indicator,
            format!(
                "named like a residual but stays within {decades:.1} decades (a linear solver's final residual?): a health number"
            ),
        );
    }
    let why = if finite.is_empty() {
        "no finite value in the sample".to_string()
    } else if decades < 2.0 {
        format!("varies within {decades:.1} decades")
    } else {
        "does not fall".to_string()
    };
    g(Role::Monitor, format!("{why}: a quantity to settle"))
}

/// [`guess`] for a value printed several times per record (inner iterations): values that
/// fall at least a decade within most records (seven in ten) are residuals, whatever they
/// do from one record to the next.
pub fn guess_inner(name: &str, per_record: &[Vec<f64>], whole: bool) -> Guess {
    let all: Vec<f64> = per_record.iter().flatten().copied().collect();
    let plain = guess(name, &all, whole);
    if plain.role != Role::Monitor {
        return plain;
    }
    let multi: Vec<&Vec<f64>> = per_record.iter().filter(|r| r.len() >= 2).collect();
    let falling = multi
        .iter()
        .filter(|r| {
            let (a, b) = (r[0], r[r.len() - 1]);
            a > 0.0 && b >= 0.0 && b * 10.0 <= a
        })
        .count();
    if !multi.is_empty() && falling * 10 >= multi.len() * 7 {
        return Guess {
            role: Role::Residual,
            reason: format!(
                "falls a decade or more within {falling} of {} steps (inner iterations)",
                multi.len()
            ),
        };
    }
    plain
}

fn short(v: f64) -> String {
    if v != 0.0 && !(1e-2..1e4).contains(&v.abs()) { format!("{v:.2e}") } else { format!("{v:.3}") }
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn falling_decades_are_residuals_and_names_decide_the_rest() {
        let falling: Vec<f64> = (0..100).map(|i| 10f64.powf(-(i as f64) / 20.0)).collect();
        assert_eq!(guess("Ux", &falling, false).role, Role::Residual);
        let flat: Vec<f64> = (0..100).map(|i| 0.41 + 1e-3 * (i as f64).sin()).collect();
        assert_eq!(guess("drag", &flat, false).role, Role::Monitor);
        assert_eq!(guess("p/sweeps", &[3.0, 4.0, 5.0], true).role, Role::Indicator);
        assert_eq!(guess("continuity", &falling, false).role, Role::Indicator);
        assert_eq!(guess("cfl", &[1.0, 2.0], false).role, Role::Info);
        assert_eq!(guess("wall", &[0.4, 0.5], false).role, Role::Info);
        // A rising quantity spanning decades is not a residual.
        let rising: Vec<f64> = falling.iter().rev().copied().collect();
        assert_eq!(guess("q", &rising, false).role, Role::Monitor);
        // "res" in a word such as "pressure" is not a residual name.
        assert_eq!(guess("pressure", &[1.0, 1.5, 1.2, 1.1, 1.3], false).role, Role::Monitor);
    }
}
