//! Per-asset baselines: the fit side of the verdict engine.
//!
//! One asset at a time, the pipelines layer hands over each sensor's raw
//! series ([`SensorSeries`]: times, values, quality, role, range). The fit
//!
//! 1. aligns the sensors onto a common grid ([`align`], diagram there),
//! 2. learns operating regimes from the context sensors ([`RegimeModel`]):
//!    a stopped regime found by a rest rule, and running regimes by linfa
//!    k-means chosen by silhouette,
//! 3. fits a robust baseline per sensor and regime ([`SensorBaseline`]),
//! 4. fits a redundancy model: a Huber regression of each condition sensor
//!    on the context ([`ConditionRegression`]) and a PCA monitor over all
//!    sensors ([`PcaModel`]: T², SPE, limits, RBC, reconstruction),
//!
//! and returns an [`AssetBaseline`] (serde-serialisable). [`score_rows`]
//! applies it to a new aligned window row by row.
//!
//! Sensors are identified only by their position in the asset; nothing here
//! looks at sensor names or units.
//!
//! ```
//! use linfa::ParamGuard;
//! use telltale_models::baseline::{AssetBaseline, RowScores, SensorRole, SensorSeries, SensorSpec, score_rows};
//! // one context sensor (speed) and one condition sensor that follows speed²
//! let ts: Vec<i64> = (0..600).map(|i| i * 60_000).collect();
//! let speed: Vec<f64> = (0..600).map(|i| 1000.0 + 50.0 * ((i as f64) * 0.1).sin()).collect();
//! let head: Vec<f64> = speed.iter().enumerate().map(|(i, s)| 2e-5 * s * s + 0.01 * ((i * 7 % 11) as f64 - 5.0)).collect();
//! let good = vec![true; 600];
//! let ctx = SensorSpec { role: SensorRole::Context, ..Default::default() };
//! let series = [
//!     SensorSeries { ts_ms: &ts, values: &speed, good: &good, spec: ctx },
//!     SensorSeries { ts_ms: &ts, values: &head, good: &good, spec: SensorSpec::default() },
//! ];
//! let baseline = AssetBaseline::params().check()?.fit(&series, None, None)?;
//! assert_eq!(baseline.step_ms, 60_000);
//! let frame = baseline.align(&series, None, None)?;
//! let mut out = RowScores::new(frame.n_rows(), 2);
//! score_rows(&baseline, frame.values.view(), &mut out)?;
//! assert!(out.residual_z[[10, 1]].abs() < 5.0);
//! # Ok::<(), Box<dyn std::error::Error>>(())
//! ```

mod align;
mod asset;
mod eigen;
mod error;
mod pca;
mod regime;
mod regression;
mod sensor;
#[cfg(test)]
mod tests;

pub use align::{
    AlignedFrame, MAX_GRID_ROWS, Reduce, SensorRole, SensorSeries, SensorSpec, align,
    median_sampling_step_ms,
};
pub use asset::{
    AssetBaseline, AssetBaselineParams, AssetBaselineValidParams, BASELINE_VERSION, PcaMonitor,
    RelearnReport, RowScores, score_rows,
};
pub use eigen::symmetric_eigen;
pub use error::{BaselineError, BaselineParamsError};
pub use pca::{
    PcaLimits, PcaModel, Reconstruction, spe_limit_box, spe_limit_jm, t2_limit_chi2,
    t2_limit_phase1, t2_limit_phase2,
};
pub use regime::{RegimeModel, RestRule, STOPPED};
pub use regression::ConditionRegression;
pub use sensor::{QUANTILE_PROBS, ScaleMethod, SensorBaseline};
