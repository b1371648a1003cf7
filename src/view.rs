//! Views of a run for people and programs: the plain-text and JSON views of the one-shot
//! commands (`parse`, `check`) and the formatting every view shares.
//!
//! * [`number`]: one rule for numbers (precision from the uncertainty, three significant
//!   digits otherwise), used by the live panels, the report and these text views;
//! * [`words`]: plurals and inline code in judge texts;
//! * [`parse`], [`check`]: what those commands print;
//! * [`evidence`]: the judge's evidence beyond the verdict (window used, reference of a
//!   near-zero monitor, round-off monitors not judged, ETA range) and
//!   [`evidence::no_verdict_reason`], the one wording of why a run has nothing to judge;
//! * [`headless`]: the status, state and JSON lines of `watch --headless` (the loop that
//!   prints them is `crate::watch::headless`);
//! * [`time`]: the one spelling of wall-clock times (RFC 3339, UTC).
//!
//! The live panels live in `tui`, the documents in `report`; both format through this module
//! so a number reads the same everywhere.

pub mod check;
pub mod evidence;
pub mod headless;
pub mod number;
pub mod parse;
pub mod parsers;
pub mod time;
pub mod words;
