//! Plain-text and JSON views for the one-shot commands (`parse`, `check`). Pure functions of
//! the store and the judgement; the live panels live in `tui`, the documents in `report`.

pub mod check;
pub mod parse;
pub mod parsers;
