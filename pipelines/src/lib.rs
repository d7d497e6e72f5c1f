//! # telltale-pipelines
//!
//! Everything that touches files: the Parquet history reader (DESIGN.md 4.1),
//! the fleet registry (4.2), event files (4.3) and suspicion files (4.4), and
//! the batch jobs built on them.

pub mod error;
pub mod io;
pub mod record;
pub mod registry;
pub mod time;

pub use error::{Error, Result};
