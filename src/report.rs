//! The convergence report: content shared by every format, and the HTML, Markdown and JSON
//! serialisers, plus grid convergence (GCI) for mesh studies.

pub mod gci;
