//! # telltale-pipelines
//!
//! Everything that touches files, and the batch jobs built on them:
//!
//! - [`io::HistoryReader`]: long-format Parquet history (DESIGN.md 4.1), one
//!   file or a directory tree, handed to the jobs one [`io::AssetHistory`] at a
//!   time in bounded memory; [`io::HistoryReader::inventory`] lists assets,
//!   sensors, row counts and the time span without decoding values.
//! - [`io::HistoryWriter`]: writes history in the layout the reader likes best.
//! - [`registry::Registry`]: the optional fleet registry (4.2) and
//!   [`registry::resolve`], which applies it (or the defaults) to an inventory.
//! - [`io::read_events`] / [`io::write_events`] (4.3) and
//!   [`io::read_suspicions`] / [`io::write_suspicions`] (4.4) in JSON Lines,
//!   CSV and Parquet.
//!
//! Every error names the file and, where it applies, the row and field;
//! [`Error::is_bad_input`] tells bad input (exit code 2) from runtime failures.
//!
//! ```no_run
//! use telltale_pipelines::io::HistoryReader;
//! use telltale_pipelines::registry::{Registry, resolve};
//!
//! let reader = HistoryReader::try_new("history/")?.with_skip_bad_files(true);
//! let inventory = reader.inventory()?;
//! let fleet = Registry::load("fleet.toml")?;
//! let resolution = resolve(Some(&fleet), &inventory);
//! for w in &resolution.warnings {
//!     eprintln!("warning: {w}");
//! }
//! let summary = reader.for_each_asset(|asset| {
//!     // fit or scan one asset here
//!     eprintln!("{}: {} sensors", asset.asset, asset.sensors.len());
//!     Ok::<(), telltale_pipelines::Error>(())
//! })?;
//! for bad in &summary.bad_files {
//!     eprintln!("skipped {}: {}", bad.path.display(), bad.reason);
//! }
//! # Ok::<(), telltale_pipelines::Error>(())
//! ```

pub mod error;
pub mod io;
pub mod jobs;
pub mod record;
pub mod registry;
pub mod report;
pub mod time;

pub use error::{Error, Result};
pub use io::{AssetHistory, HistoryReader, HistoryWriter, HistoryWriterOptions, SensorSeries};
pub use registry::Registry;
