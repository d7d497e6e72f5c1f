//! The crate's errors: parameter errors apart from generation errors, as the
//! rest of the workspace does.

use std::path::PathBuf;

/// A parameter of [`FleetParams`](crate::FleetParams) is out of its range.
#[derive(Debug, Clone, PartialEq, thiserror::Error)]
#[non_exhaustive]
pub enum FleetParamsError {
    /// `sites` outside 1..=1000.
    #[error("sites must be between 1 and 1000, got {0}; lower the number of sites")]
    Sites(usize),
    /// `pumps_per_site` outside 1..=99.
    #[error(
        "pumps_per_site must be between 1 and 99, got {0}; split a large station into two sites"
    )]
    PumpsPerSite(usize),
    /// `days` too short.
    #[error("days must be at least 2 (one to fit, one to scan), got {0}; lengthen the period")]
    Days(u32),
    /// `fit_days` not inside `1..days`.
    #[error(
        "fit_days must be at least 1 and less than days ({days}), got {fit_days}; leave at least one day to scan"
    )]
    FitDays {
        /// Requested fit span in days.
        fit_days: u32,
        /// Total days.
        days: u32,
    },
    /// `sample_interval_s` outside 1..=3600 or not a divisor of one day.
    #[error(
        "sample_interval_s must be 1..=3600 seconds and divide 86400, got {0}; use e.g. 10, 30, 60, 120 or 300"
    )]
    SampleInterval(u32),
    /// `noise_multiplier` not finite or outside 0..=20.
    #[error(
        "noise_multiplier must be finite and within 0..=20, got {0}; 1.0 is the calibrated level"
    )]
    NoiseMultiplier(f64),
    /// `FaultMix::Share` outside 0..=1.
    #[error("fault share must be within 0..=1 (share of assets with an injected case), got {0}")]
    FaultShare(f64),
    /// The start time is not on the sampling grid of a day.
    #[error("start must be midnight UTC, got {0}; use a date such as 2026-05-04T00:00:00Z")]
    Start(String),
}

/// Errors while generating or writing a fleet.
#[derive(Debug, thiserror::Error)]
#[non_exhaustive]
pub enum Error {
    /// The parameters were rejected.
    #[error(transparent)]
    Params(#[from] FleetParamsError),
    /// An asset index beyond the fleet.
    #[error("asset index {index} is out of range; the fleet has {count} assets")]
    AssetIndex {
        /// The requested index.
        index: usize,
        /// The number of assets.
        count: usize,
    },
    /// The output directory or a file could not be written.
    #[error("{path}: {source}; check that the directory is writable")]
    Io {
        /// The file or directory.
        path: PathBuf,
        /// The underlying error.
        #[source]
        source: std::io::Error,
    },
    /// Writing the history file failed.
    #[error(transparent)]
    Write(#[from] telltale_pipelines::Error),
    /// The generator thread stopped unexpectedly.
    #[error(
        "the generator thread stopped before finishing the fleet; rerun, and report it if it repeats"
    )]
    Generator,
}

/// Result with the crate's [`Error`].
pub type Result<T, E = Error> = std::result::Result<T, E>;
