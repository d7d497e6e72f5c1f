//! Errors of the per-asset baseline.

/// Errors from checking [`AssetBaselineParams`](super::AssetBaselineParams).
#[derive(Debug, Clone, PartialEq, thiserror::Error)]
#[non_exhaustive]
pub enum BaselineParamsError {
    /// Fixed grid step not positive.
    #[error("baseline step_ms must be > 0 (milliseconds), got {0}; 60000 (one minute) is usual")]
    Step(i64),
    /// `max_running_regimes` outside 1..=8.
    #[error("max_running_regimes must be in 1..=8, got {0}; 4 is the default")]
    MaxRegimes(usize),
    /// A share parameter outside its range.
    #[error("{name} must be in {range}, got {value}; the default is {default}")]
    Share {
        /// parameter name
        name: &'static str,
        /// allowed range, as text
        range: &'static str,
        /// value given
        value: f64,
        /// default value
        default: f64,
    },
    /// Too few rows required per baseline.
    #[error("min_rows must be at least 8, got {0}; 30 is the default")]
    MinRows(usize),
    /// Huber constant not positive.
    #[error("huber_k must be a finite number > 0 (in residual sigma), got {0}; 1.345 is usual")]
    HuberK(f64),
}

/// Errors from fitting or applying an asset baseline.
#[derive(Debug, Clone, PartialEq, thiserror::Error)]
#[non_exhaustive]
pub enum BaselineError {
    /// Invalid parameters.
    #[error(transparent)]
    Params(#[from] BaselineParamsError),
    /// Grid step not positive.
    #[error("grid step must be > 0 ms, got {0}; pass a positive step")]
    Step(i64),
    /// No sensors given.
    #[error("asset has no sensors; pass at least one sensor series")]
    NoSensors,
    /// No usable reading in any sensor.
    #[error(
        "asset has no good finite reading in any sensor; check the quality flags and the time range"
    )]
    NoReadings,
    /// `ts_ms`, `values`, `good` lengths differ.
    #[error(
        "sensor #{sensor}: ts has {ts} entries, values {values}, good {good}; the three must have the same length"
    )]
    LengthMismatch {
        /// sensor position in the asset
        sensor: usize,
        /// length of `ts_ms`
        ts: usize,
        /// length of `values`
        values: usize,
        /// length of `good`
        good: usize,
    },
    /// Timestamps not strictly increasing.
    #[error(
        "sensor #{sensor}: timestamp at index {index} is not after the previous one; sort by time and drop duplicates first"
    )]
    Unsorted {
        /// sensor position in the asset
        sensor: usize,
        /// first offending index
        index: usize,
    },
    /// The grid would be too long.
    #[error(
        "grid of {rows} rows exceeds the limit of {max} at step {step_ms} ms; use a coarser step or a shorter period"
    )]
    GridTooLong {
        /// rows requested
        rows: usize,
        /// limit
        max: usize,
        /// step used
        step_ms: i64,
    },
    /// Too few rows with data to fit a baseline.
    #[error(
        "only {got} grid rows have data, at least {need} are needed to fit a baseline; use a longer fit period"
    )]
    TooFewRows {
        /// rows with at least one value
        got: usize,
        /// minimum
        need: usize,
    },
    /// Only a condition sensor can be re-learnt alone.
    #[error(
        "sensor #{0} defines the operating regimes (a context sensor or the asset's rest \
         indicator), or is not in the baseline, so it cannot be re-learnt alone; re-fit the whole \
         asset"
    )]
    ContextSensor(usize),
    /// A frame or row does not have the baseline's number of sensors.
    #[error(
        "data has {got} sensors but the baseline was fitted on {want}; pass the sensors in fit order"
    )]
    SensorCount {
        /// sensors given
        got: usize,
        /// sensors in the baseline
        want: usize,
    },
    /// The k-means step failed.
    #[error(
        "regime clustering failed: {0}; check the context sensors for constant or non-finite values"
    )]
    Clustering(String),
}
