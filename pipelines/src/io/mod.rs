//! Reading and writing telltale's files.

pub mod write;

pub use write::{HistoryWriter, HistoryWriterOptions};
