//! The judge: pure functions from series to findings, criteria results and a verdict.
//!
//! It never reads files and never draws; `check`, `watch` and `report` call the same
//! [`judge`] function.

pub mod types;

pub use types::*;

/// Judge a run against the criteria in effect.
///
/// Placeholder signature for the skeleton; the judge work replaces this body.
pub fn judge(input: &RunInput<'_>, criteria: &Criteria) -> Judgement {
    let _ = (input, criteria);
    Judgement::default()
}
