//! Runs: the run config (`settle.toml`), the columnar store with segments, chart
//! downsampling, and the ingest pipeline that moves followed lines through parsers into the
//! store.

pub mod bulk;
pub mod config;
pub mod downsample;
pub mod ingest;
pub mod pipeline;
pub mod resolve;
pub mod store;

pub use store::{RunStore, Segment, SegmentReason, Series, SeriesName, SourceStore};
