//! The fit job: learn every asset's baseline from history in `[from, until)`
//! and write it to the baseline store (DESIGN.md section 5, `telltale fit`).
//!
//! ```text
//!  inventory (ids + ts only) ─► resolve with the registry ─► warnings (once each)
//!        │
//!  for_each_asset (calling thread, one asset at a time, in completion order)
//!        │  AssetHistory ─► batch  [a1 a2 … a(2·threads)]
//!        │                    │ full (or end of history)
//!        │                    ▼
//!        │        par_iter on a pool of `threads`: align + fit (models) ─► write
//!        │        STORE/baselines/<asset>.json atomically; failures recorded
//!        ▼
//!  STORE/store.json updated once, atomically, with the assets written
//! ```
//!
//! The job adds no statistics of its own: it hands the reader's series,
//! tagged with the registry's role, range and band, to
//! [`AssetBaselineValidParams::fit`] unchanged, with the grid spanning the
//! data read (the reader already cut it to `[from, until)`).
//!
//! Memory: the reader bounds what it buffers (see [`HistoryReader`]); the
//! job holds at most `2 × threads` complete asset histories plus, while they
//! are fitted, one aligned frame per thread. Peak memory grows with the
//! threads and the largest assets' windows, never with the fleet.
//!
//! Per-asset failures follow the "report and carry on" rule: a failing
//! asset is logged with its reason, recorded in [`FitReport::assets_failed`],
//! and the other assets are fitted. [`FitReport::outcome`] then decides the
//! exit status: `Complete` (exit 0) when every failure is too little data
//! and at least one asset was fitted, a run with a modelling failure is
//! `Failed` (exit 1, every other baseline still written), and a span where
//! nothing could be fitted is `NothingFitted` (exit 2: the span or history is
//! wrong). A store write error stops the job at once (exit 1).

use crate::error::{Error, Result};
use crate::io::{AssetHistory, BadFile, HistoryReader};
use crate::jobs::store::{
    ManifestEntry, STORE_FORMAT_VERSION, Store, StoredBaseline, StoredSensor, TELLTALE_VERSION,
};
use crate::registry::{Registry, ResolvedAsset, Role, SensorSpec, resolve};
use crate::time::{format_time, from_millis};
use rayon::prelude::*;
use std::path::PathBuf;
use std::time::Instant;
use telltale_models::ParamGuard;
use telltale_models::baseline::{
    AssetBaseline, AssetBaselineValidParams, BaselineError, SensorRole, SensorSeries,
    SensorSpec as ModelSpec,
};
use telltale_models::verdict::{Calibration, VerdictParams, calibrate};

/// Settings of one fit run; build with [`FitSettings::new`] and set the
/// public fields.
#[derive(Debug, Clone)]
#[non_exhaustive]
pub struct FitSettings {
    /// History file or directory (DESIGN.md 4.1).
    pub history: PathBuf,
    /// Optional fleet registry (4.2).
    pub registry: Option<PathBuf>,
    /// Start of the fit span, epoch ms, inclusive (`None`: the start of the history).
    pub from_ms: Option<i64>,
    /// End of the fit span, epoch ms, exclusive.
    pub until_ms: i64,
    /// Store directory (created if missing).
    pub store: PathBuf,
    /// Skip unreadable history files instead of failing.
    pub skip_bad_files: bool,
    /// Baseline parameters, checked.
    pub params: AssetBaselineValidParams,
    /// Threads fitting assets in parallel (`0`: the available cores; `1`:
    /// the plain sequential path).
    pub threads: usize,
    /// Fit only these assets (empty: every asset); the others' baselines stay untouched.
    pub assets: Vec<String>,
    /// Verdict-engine settings the calibration is made for.
    pub verdict: VerdictParams,
}

impl FitSettings {
    /// Settings with default baseline parameters, every asset, no registry,
    /// no start, threads = available cores.
    ///
    /// # Panics
    /// Never: the default baseline parameters are valid.
    pub fn new(history: impl Into<PathBuf>, until_ms: i64, store: impl Into<PathBuf>) -> Self {
        #[expect(clippy::expect_used, reason = "the defaults are checked by the models' tests")]
        let params = AssetBaseline::params().check().expect("default baseline params are valid");
        FitSettings {
            history: history.into(),
            registry: None,
            from_ms: None,
            until_ms,
            store: store.into(),
            skip_bad_files: false,
            params,
            threads: 0,
            assets: Vec::new(),
            verdict: VerdictParams::default(),
        }
    }

    fn threads(&self) -> usize {
        if self.threads > 0 {
            self.threads
        } else {
            std::thread::available_parallelism().map_or(1, usize::from)
        }
    }
}

/// One asset written to the store.
#[derive(Debug, Clone, PartialEq)]
pub struct FittedAsset {
    /// Asset id.
    pub asset: String,
    /// Sensors in the baseline.
    pub sensors: usize,
    /// Running regimes found (the stopped regime not counted).
    pub regimes: usize,
    /// Whether a stopped (rest) regime was found.
    pub stopped: bool,
    /// Readings read for the asset (all sensors, bad quality included).
    pub rows: usize,
    /// Grid step, ms.
    pub step_ms: i64,
    /// The baseline file written.
    pub file: PathBuf,
}

/// Why an asset could not be fitted.
#[derive(Debug, Clone, Copy, PartialEq, Eq)]
#[non_exhaustive]
pub enum FailureKind {
    /// Too little usable data in the span (too few grid rows, no good reading).
    InsufficientData,
    /// The model could not be fitted for another reason.
    Fit,
}

/// One asset that was not fitted.
#[derive(Debug, Clone, PartialEq)]
pub struct FailedAsset {
    /// Asset id.
    pub asset: String,
    /// What kind of failure.
    pub kind: FailureKind,
    /// The reason, with what to do.
    pub reason: String,
}

/// How a fit run ended, for the exit status; see the [module docs](self).
#[derive(Debug, Clone, Copy, PartialEq, Eq)]
#[non_exhaustive]
pub enum FitOutcome {
    /// At least one asset fitted; any failure was too little data (exit 0, with warnings).
    Complete,
    /// No asset could be fitted (exit 2: widen the span or check the history).
    NothingFitted,
    /// Some asset failed for a reason other than too little data (exit 1).
    Failed,
}

/// What a fit run did.
#[derive(Debug, Clone, PartialEq)]
pub struct FitReport {
    /// Assets written, sorted by id.
    pub assets_fitted: Vec<FittedAsset>,
    /// Assets not fitted, sorted by id.
    pub assets_failed: Vec<FailedAsset>,
    /// Readings in the span over all assets read.
    pub rows_read: u64,
    /// History files skipped as unreadable (only with `skip_bad_files`).
    pub bad_files: Vec<BadFile>,
    /// Wall time of the run, seconds.
    pub seconds: f64,
    /// The store directory.
    pub store: PathBuf,
}

impl FitReport {
    /// The exit-status decision; see the [module docs](self).
    pub fn outcome(&self) -> FitOutcome {
        if self.assets_failed.iter().any(|f| f.kind == FailureKind::Fit) {
            FitOutcome::Failed
        } else if self.assets_fitted.is_empty() {
            FitOutcome::NothingFitted
        } else {
            FitOutcome::Complete
        }
    }
}

/// One asset waiting in a batch: its history and the specs that apply.
struct Pending {
    history: AssetHistory,
    resolved: ResolvedAsset,
}

/// The result of fitting one asset.
enum Done {
    Fitted(FittedAsset, ManifestEntry),
    Failed(FailedAsset),
}

/// The registry spec of sensor `id` of an asset, or the default.
fn spec_of<'a>(resolved: &'a ResolvedAsset, id: &str) -> Option<&'a SensorSpec> {
    resolved.sensors.iter().find(|s| s.spec.id == id).map(|s| &s.spec)
}

/// The models' description of a registry sensor.
pub fn model_spec(spec: &SensorSpec) -> ModelSpec {
    ModelSpec {
        role: match spec.role {
            Role::Context => SensorRole::Context,
            Role::Condition => SensorRole::Condition,
        },
        range: spec.range.map(|(lo, hi)| [lo, hi]),
        band: spec.band.map(|(lo, hi)| [lo, hi]),
    }
}

fn classify(e: &BaselineError) -> FailureKind {
    match e {
        BaselineError::TooFewRows { .. } | BaselineError::NoReadings | BaselineError::NoSensors => {
            FailureKind::InsufficientData
        }
        _ => FailureKind::Fit,
    }
}

/// Context shared by every asset of one run.
struct RunCtx<'a> {
    settings: &'a FitSettings,
    store: &'a Store,
    history: String,
    fit_from: Option<String>,
    fit_until: String,
}

fn fit_one(ctx: &RunCtx<'_>, p: &Pending) -> Result<Done> {
    let started = Instant::now();
    let h = &p.history;
    let specs: Vec<SensorSpec> = h
        .sensors
        .iter()
        .map(|s| {
            spec_of(&p.resolved, &s.sensor)
                .cloned()
                .unwrap_or_else(|| SensorSpec::default_for(&s.sensor))
        })
        .collect();
    let series: Vec<SensorSeries<'_>> = h
        .sensors
        .iter()
        .zip(&specs)
        .map(|(s, spec)| SensorSeries {
            ts_ms: &s.ts_ms,
            values: &s.value,
            good: &s.good,
            spec: model_spec(spec),
        })
        .collect();
    let (baseline, calibration) = match fit_and_calibrate(ctx.settings, &series) {
        Ok(b) => b,
        Err(e) => {
            let kind = classify(&e);
            let reason = e.to_string();
            tracing::warn!(asset = %h.asset, %reason, "baseline not fitted");
            return Ok(Done::Failed(FailedAsset { asset: h.asset.clone(), kind, reason }));
        }
    };
    let stored = StoredBaseline {
        format_version: STORE_FORMAT_VERSION,
        asset: h.asset.clone(),
        group: p.resolved.group.clone(),
        site: p.resolved.site.clone(),
        criticality: p.resolved.criticality,
        sensors: specs
            .iter()
            .map(|s| StoredSensor {
                id: s.id.clone(),
                role: s.role.into(),
                unit: s.unit.clone(),
                range: s.range.map(|(lo, hi)| [lo, hi]),
                band: s.band.map(|(lo, hi)| [lo, hi]),
            })
            .collect(),
        fit_from: ctx.fit_from.clone(),
        fit_until: ctx.fit_until.clone(),
        baseline,
        calibration: Some(calibration),
    };
    let file = ctx.store.write_baseline(&stored)?;
    let b = &stored.baseline;
    let fitted = FittedAsset {
        asset: h.asset.clone(),
        sensors: b.sensors.len(),
        regimes: b.regimes.n_running(),
        stopped: !b.regimes.rest_rules().is_empty(),
        rows: h.rows(),
        step_ms: b.step_ms,
        file,
    };
    tracing::debug!(
        asset = %h.asset,
        sensors = fitted.sensors,
        regimes = fitted.regimes,
        rows = fitted.rows,
        elapsed_ms = started.elapsed().as_millis() as u64,
        "baseline written"
    );
    let entry = ManifestEntry {
        asset: h.asset.clone(),
        file: Store::relative_file(&h.asset),
        history: ctx.history.clone(),
        fit_from: ctx.fit_from.clone(),
        fit_until: ctx.fit_until.clone(),
        written: format_time(chrono::Utc::now()),
        telltale_version: TELLTALE_VERSION.to_owned(),
    };
    Ok(Done::Fitted(fitted, entry))
}

/// The interleaved split of a fit span into training and held-out chunks
/// (see [`fit_and_calibrate`]'s documentation in the module source):
/// chunks of `clamp(span / 6, one block, 2 days)`, rounded down to whole
/// blocks, counted from the block boundary at or before the first reading;
/// even chunks train.
#[derive(Debug, Clone, Copy, PartialEq, Eq)]
pub struct TrainingChunks {
    base: i64,
    chunk: i64,
}

impl TrainingChunks {
    /// The split of `[first_ms, end_ms)` for evaluation steps of `block_ms`.
    pub fn new(first_ms: i64, end_ms: i64, block_ms: i64) -> Self {
        let block = block_ms.max(1);
        let span = (end_ms - first_ms).max(1);
        let chunk = (span / 6).clamp(block, 2 * 86_400_000);
        let chunk = (chunk / block).max(1) * block;
        TrainingChunks { base: first_ms.div_euclid(block) * block, chunk }
    }
    /// Whether a reading at `t_ms` trains the baseline (else it is held out).
    pub fn trains(&self, t_ms: i64) -> bool {
        (t_ms - self.base).div_euclid(self.chunk) % 2 == 0
    }
}

/// Fits the baseline on half of the asset's fit span and calibrates the
/// verdict engine on the other half, scored as if it were new (see
/// [`telltale_models::verdict::calibrate`](mod@telltale_models::verdict::calibrate)).
///
/// The span is cut into chunks of `clamp(span / 6, one block, 2 days)`
/// (rounded to whole blocks); even chunks train, odd chunks are held out.
/// Interleaving, rather than a train-then-test split, lets both halves see
/// every duty pattern (pumps that swap duty weekly, weekend stops); chunks
/// of days keep the slow autocorrelation of the held-out blocks realistic.
pub(crate) fn fit_and_calibrate(
    settings: &FitSettings,
    series: &[SensorSeries<'_>],
) -> std::result::Result<(AssetBaseline, Calibration), BaselineError> {
    let v = &settings.verdict;
    let first = series.iter().filter_map(|s| s.usable().next().map(|(t, _)| t)).min();
    let last = series.iter().filter_map(|s| s.usable().last().map(|(t, _)| t)).max();
    let (Some(first), Some(last)) = (first, last) else {
        return Err(BaselineError::NoReadings);
    };
    let end = (last + 1).min(settings.until_ms);
    let chunks = TrainingChunks::new(first, end, v.block_ms);
    let train_of = |t: i64| chunks.trains(t);
    // training copies: readings of the even chunks only
    let kept: Vec<(Vec<i64>, Vec<f64>, Vec<bool>)> = series
        .iter()
        .map(|s| {
            let mut out = (Vec::new(), Vec::new(), Vec::new());
            for i in 0..s.ts_ms.len() {
                if train_of(s.ts_ms[i]) {
                    out.0.push(s.ts_ms[i]);
                    out.1.push(s.values[i]);
                    out.2.push(s.good[i]);
                }
            }
            out
        })
        .collect();
    let train: Vec<SensorSeries<'_>> = series
        .iter()
        .zip(&kept)
        .map(|(s, k)| SensorSeries { ts_ms: &k.0, values: &k.1, good: &k.2, spec: s.spec })
        .collect();
    let baseline = settings.params.fit(&train, Some(first), Some(end))?;
    let frame = baseline.align(series, Some(baseline.fit_start_ms), Some(end))?;
    let held: Vec<bool> = (0..frame.n_rows()).map(|r| !train_of(frame.row_start_ms(r))).collect();
    let cal = calibrate(
        &baseline,
        frame.values.view(),
        frame.origin_ms,
        &held,
        v.block_ms,
        v.spike_factor,
        v.min_fill,
        v.occupancy_window,
        v.cusum_k,
    );
    Ok((baseline, cal))
}

/// Fits a batch, in parallel on `pool` (sequentially without one); results in batch order.
fn fit_batch(
    ctx: &RunCtx<'_>,
    pool: Option<&rayon::ThreadPool>,
    batch: &[Pending],
) -> Vec<Result<Done>> {
    match pool {
        Some(pool) => pool.install(|| batch.par_iter().map(|p| fit_one(ctx, p)).collect()),
        None => batch.iter().map(|p| fit_one(ctx, p)).collect(),
    }
}

/// Runs the fit job; see the [module docs](self).
///
/// # Errors
/// [`Error::BadInput`] for an empty span, an unreadable registry or history
/// (naming the file), or a requested asset without history in the span;
/// [`Error::Io`] when the store cannot be written. Per-asset fit failures
/// are not errors: they are in the report.
pub fn run_fit(settings: &FitSettings) -> Result<FitReport> {
    let started = Instant::now();
    if let Some(from) = settings.from_ms
        && from >= settings.until_ms
    {
        return Err(Error::bad_input(
            &settings.history,
            format!(
                "empty fit span: from {} is not before until {}; --from must be earlier than \
                 --until",
                format_time(from_millis(from)),
                format_time(from_millis(settings.until_ms))
            ),
        ));
    }
    let registry = settings.registry.as_ref().map(Registry::load).transpose()?;
    let reader = HistoryReader::try_new(&settings.history)?
        .with_time_range(settings.from_ms.unwrap_or(i64::MIN), settings.until_ms)
        .with_skip_bad_files(settings.skip_bad_files);
    let inventory = reader.inventory()?;
    let resolution = resolve(registry.as_ref(), &inventory);
    for w in &resolution.warnings {
        tracing::warn!("{w}");
    }
    for id in &settings.assets {
        if inventory.assets.binary_search_by(|a| a.asset.as_str().cmp(id)).is_err() {
            return Err(Error::bad_input(
                &settings.history,
                format!(
                    "asset {id:?} has no readings in the fit span; check the asset id (the span \
                     holds {} assets) and --from/--until",
                    inventory.assets.len()
                ),
            ));
        }
    }
    for a in &resolution.assets {
        let missing: Vec<&str> = a
            .sensors
            .iter()
            .filter(|s| !s.has_data && s.registered)
            .map(|s| s.spec.id.as_str())
            .collect();
        let has_any = a.sensors.iter().any(|s| s.has_data);
        if has_any && !missing.is_empty() && wanted(settings, &a.asset) {
            tracing::warn!(
                asset = %a.asset,
                sensors = %missing.join(", "),
                "registered sensors have no readings in the fit span; the baseline leaves them out"
            );
        }
    }
    let store = Store::open(&settings.store)?;
    let ctx = RunCtx {
        settings,
        store: &store,
        // absolute where possible, so the manifest says which history it was
        history: std::fs::canonicalize(&settings.history)
            .unwrap_or_else(|_| settings.history.clone())
            .display()
            .to_string(),
        fit_from: settings.from_ms.map(|t| format_time(from_millis(t))),
        fit_until: format_time(from_millis(settings.until_ms)),
    };
    let threads = settings.threads();
    let pool = if threads > 1 {
        Some(
            rayon::ThreadPoolBuilder::new()
                .num_threads(threads)
                .thread_name(|i| format!("telltale-fit-{i}"))
                .build()
                .map_err(|e| Error::io(&settings.store, std::io::Error::other(e)))?,
        )
    } else {
        None
    };
    let batch_cap = 2 * threads;
    let mut batch: Vec<Pending> = Vec::with_capacity(batch_cap);
    let mut fitted = Vec::new();
    let mut failed = Vec::new();
    let mut entries = Vec::new();
    let mut flush = |batch: &mut Vec<Pending>| -> Result<()> {
        for r in fit_batch(&ctx, pool.as_ref(), batch) {
            match r? {
                Done::Fitted(f, e) => {
                    fitted.push(f);
                    entries.push(e);
                }
                Done::Failed(f) => failed.push(f),
            }
        }
        batch.clear();
        Ok(())
    };
    let summary = reader.for_each_asset(|history| {
        if !wanted(settings, &history.asset) {
            return Ok(());
        }
        let resolved =
            match resolution.assets.binary_search_by(|a| a.asset.as_str().cmp(&history.asset)) {
                Ok(i) => resolution.assets[i].clone(),
                // not in the inventory (cannot happen with the same reader): defaults
                Err(_) => ResolvedAsset {
                    asset: history.asset.clone(),
                    group: history.asset.clone(),
                    site: None,
                    criticality: 3,
                    sensors: Vec::new(),
                },
            };
        batch.push(Pending { history, resolved });
        if batch.len() >= batch_cap { flush(&mut batch) } else { Ok(()) }
    })?;
    flush(&mut batch)?;
    if !entries.is_empty() {
        store.record(entries, &format_time(chrono::Utc::now()))?;
    }
    fitted.sort_by(|a: &FittedAsset, b: &FittedAsset| a.asset.cmp(&b.asset));
    failed.sort_by(|a: &FailedAsset, b: &FailedAsset| a.asset.cmp(&b.asset));
    Ok(FitReport {
        assets_fitted: fitted,
        assets_failed: failed,
        rows_read: summary.rows_in_range,
        bad_files: summary.bad_files,
        seconds: started.elapsed().as_secs_f64(),
        store: settings.store.clone(),
    })
}

fn wanted(settings: &FitSettings, asset: &str) -> bool {
    settings.assets.is_empty() || settings.assets.iter().any(|a| a == asset)
}

#[cfg(test)]
mod tests {
    use super::*;

    fn report(fitted: usize, failed: &[FailureKind]) -> FitReport {
        FitReport {
            assets_fitted: (0..fitted)
                .map(|i| FittedAsset {
                    asset: format!("a{i}"),
                    sensors: 1,
                    regimes: 1,
                    stopped: false,
                    rows: 1,
                    step_ms: 1,
                    file: PathBuf::new(),
                })
                .collect(),
            assets_failed: failed
                .iter()
                .enumerate()
                .map(|(i, &kind)| FailedAsset {
                    asset: format!("f{i}"),
                    kind,
                    reason: String::new(),
                })
                .collect(),
            rows_read: 0,
            bad_files: Vec::new(),
            seconds: 0.0,
            store: PathBuf::new(),
        }
    }

    #[test]
    fn too_little_data_on_some_assets_still_completes() {
        assert_eq!(report(3, &[]).outcome(), FitOutcome::Complete);
        assert_eq!(report(3, &[FailureKind::InsufficientData]).outcome(), FitOutcome::Complete);
    }

    #[test]
    fn nothing_fitted_is_its_own_outcome() {
        assert_eq!(report(0, &[]).outcome(), FitOutcome::NothingFitted);
        assert_eq!(
            report(0, &[FailureKind::InsufficientData]).outcome(),
            FitOutcome::NothingFitted
        );
    }

    #[test]
    fn a_model_failure_fails_the_run() {
        let r = report(5, &[FailureKind::InsufficientData, FailureKind::Fit]);
        assert_eq!(r.outcome(), FitOutcome::Failed);
        assert_eq!(report(0, &[FailureKind::Fit]).outcome(), FitOutcome::Failed);
    }

    #[test]
    fn insufficient_data_errors_are_classified() {
        assert_eq!(
            classify(&BaselineError::TooFewRows { got: 3, need: 30 }),
            FailureKind::InsufficientData
        );
        assert_eq!(classify(&BaselineError::NoReadings), FailureKind::InsufficientData);
        assert_eq!(classify(&BaselineError::Clustering("x".into())), FailureKind::Fit);
    }

    #[test]
    fn empty_span_is_bad_input() {
        let mut s = FitSettings::new("nowhere.parquet", 1000, "store");
        s.from_ms = Some(1000);
        let e = run_fit(&s).unwrap_err();
        assert!(e.is_bad_input() && e.to_string().contains("--from"), "{e}");
    }
}
