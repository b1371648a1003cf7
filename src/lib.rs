//! settle: a terminal run monitor and convergence judge for iterative CFD solvers.
//!
//! Data flows `follow` → `parser` → `run` (store) → `judge` → views (`tui`, headless lines,
//! JSON, `report`) and opt-in `actions`. Every stage below the binary is a library module
//! with a small public API; `main.rs` only parses the command line and calls into it.
#![forbid(unsafe_code)]

pub mod actions;
pub mod demo;
pub mod follow;
pub mod glob;
pub mod judge;
pub mod parser;
pub mod record;
pub mod report;
pub mod run;
pub mod synth;
pub mod tui;
pub mod view;
pub mod watch;
pub mod words;
