//! The batch jobs built on the readers and the models.
//!
//! - [`fit`]: `telltale fit`, learning each asset's baseline from history
//!   and writing it to the [`store`].
//! - [`naive`]: a deliberately naive comparison detector (hourly robust
//!   z-scores, every finding a sensor bias), a benchmark yardstick.
//! - [`scan`]: `telltale scan`, judging new history against the stored
//!   baselines and reporting ranked suspicions with evidence.
//! - [`store`]: the baseline store directory (one JSON file per asset and a
//!   manifest), written atomically.
//! - [`backtest`]: `telltale backtest`, a walk-forward replay of fit and
//!   scan over an archive, scored against its failure and maintenance records.
//! - [`mod@rebaseline`]: learning an asset's baseline again from the onset
//!   of an accepted process change (the service's re-baseline).
//! - [`mod@evaluate`]: `telltale evaluate`, detection quality of suspicions
//!   against ground-truth events (recall, verdict accuracy, delay, lead time,
//!   false alarms per 100 asset-weeks).
//!
//! ```no_run
//! use telltale_pipelines::jobs::{FitSettings, run_fit};
//! let mut settings = FitSettings::new("history.parquet", 1_778_025_600_000, "store/");
//! settings.registry = Some("fleet.toml".into());
//! let report = run_fit(&settings)?;
//! println!("{} baselines written", report.assets_fitted.len());
//! # Ok::<(), telltale_pipelines::Error>(())
//! ```

pub mod backtest;
pub mod evaluate;
pub mod fit;
pub mod naive;
pub mod rebaseline;
pub mod scan;
pub mod store;
pub mod workorders;

pub use backtest::{
    AssetRow, BacktestReport, BacktestSettings, FoldRecord, Paused, QuietReport, Replay, Reported,
    SweepPoint, merge_at, ranked_at, run_replay, score_replay, write_outputs,
};
pub use evaluate::{
    BestMatch, ClassScore, CleanAssets, ConfusionRow, EvaluateSettings, EvaluationReport,
    EventCounts, EventOutcome, FailureOutcome, FalseAlarm, FalseAlarmReport,
    InvalidEvaluateSettings, LeadMark, LeadTimeReport, ModeScore, Outage, Score, SettingsEcho,
    SuspicionCounts, WindowOpen, evaluate, read_outages, read_outages_from,
};
pub use fit::{
    FailedAsset, FailureKind, FitOutcome, FitReport, FitSettings, FittedAsset, TrainingChunks,
    run_fit,
};
pub use naive::{NaiveSettings, run_naive};
pub use rebaseline::{RebaselineOutcome, RebaselineRequest, Relearnt, rebaseline};
pub use scan::{ScanReport, ScanSettings, run_scan, scan_asset};
pub use store::{Manifest, ManifestEntry, Store, StoredBaseline, StoredRole, StoredSensor};
pub use workorders::{
    DEFAULT_FAILURE_WORDS, DEFAULT_MAINTENANCE_WORDS, ImportReport, ImportSettings,
    InvalidImportSettings, UnusedReason, UnusedRow, ValidImportSettings, import_workorders,
    import_workorders_from, write_rejects, write_rejects_to,
};
