//! `telltale backtest`: walk-forward replay of the verdict engine over an
//! archive, scored against its failure and maintenance records (and any
//! labelled changes).
//!
//! # Replay
//!
//! The replay span `[from, to)` is cut into *folds* of
//! [`BacktestSettings::refit_every_ms`] (default 7 days) and each fold into
//! *review steps* of [`BacktestSettings::step_ms`] (default 24 h).
//!
//! - **Fit at each fold start `t`**, on trailing history only: every asset is
//!   fitted on `[max(t − fit_window, since), t)` (`fit_window` default 28
//!   days), where `since` is the asset's latest *reset* before `t` or the
//!   onset of its latest accepted process change. An asset whose span is
//!   shorter than [`BacktestSettings::min_fit_ms`] (default 7 days) is
//!   *carried* on its previous baseline when it has one (accepted process
//!   change) and *paused* (not judged) when it has none (after a reset).
//! - **Resets** are archive events: a `maintenance` event (the machine was
//!   worked on; its baseline restarts at the event's `end`, or `start` when
//!   it has none) and a `failure` event (at its `start`). From a reset's
//!   `start` the asset's old baseline no longer applies: its suspicions from
//!   then on are dropped and the asset is paused until a new fit.
//! - **Holds**: a `sensor_fault` or `equipment_fault` suspicion keeps the asset
//!   on the baseline it was judged against (it is not re-learned over an
//!   unresolved fault) until a reset. A `process_change` is taken as
//!   accepted by the reviewer: the asset is re-fitted from its onset once
//!   `min_fit` of history after it exists.
//! - **Review steps**: each step `[τ, τ + step)` is one `scan` of the fold's
//!   baselines, reading history only before `τ + step` (with the scan's usual
//!   warm-up before `τ`), and decides with the fleet-wide Benjamini–Hochberg
//!   step over that step's verdicts. Every decision made at the end of a step
//!   therefore uses data before that time only; the no-look-ahead test
//!   (`tests/integration/backtest.rs`) alters the data after a time and
//!   checks every decision reported by then is unchanged.
//! - **Continuing episodes**: a change re-reported in a later step, same
//!   asset, sensor and class, whose onset lies no later than one step after
//!   the earlier report's `detected`, is the same episode: it is counted as
//!   continuing and not reported again. The first report stands.
//!
//! # Scoring
//!
//! The reported suspicions are scored by [`evaluate`](super::evaluate) (its
//! matching rules); time an asset was paused counts as an outage (no
//! exposure). Figures for failure-only archives are always computed too:
//! lead time before each `failure`, shares warned 24 h / 72 h / 7 days
//! ahead, and suspicions of any class per 100 asset-weeks in *quiet time*:
//! the replay span minus, per asset, `[failure − quiet_before, failure +
//! quiet_after)` around each failure (defaults 30 and 7 days), the
//! maintenance windows plus the grace, and the paused time.
//!
//! # Sensitivity sweep
//!
//! The scans run with the Benjamini–Hochberg level at the loosest sweep
//! point, and each suspicion keeps its adjusted p-value (the `fleet_fdr`
//! evidence item). A suspicion is rejected at level `q` exactly when its
//! adjusted p-value is at most `q`, so each sweep point is the default
//! replay filtered at `q` and merged again; the replay policy (holds,
//! re-fits) stays that of the default level at every point. Levels looser
//! than the default add little: an episode takes part in a verdict only at
//! `episode_p` (default 0.01) or below, a scan setting the sweep leaves alone.
//!
//! The figures support decisions about trust and tuning; telltale is
//! decision support, not a protective or safety function.

use super::evaluate::{EvaluateSettings, EvaluationReport, Outage, evaluate};
use super::fit::{FitSettings, run_fit};
use super::scan::{ScanSettings, run_scan};
use super::store::Store;
use crate::error::{Error, Result};
use crate::io::HistoryReader;
use crate::record::{Class, Event, Suspicion};
use crate::time::{format_time, from_millis};
use serde::{Deserialize, Serialize};
use std::collections::{BTreeMap, BTreeSet};
use std::path::PathBuf;
use std::time::Instant;
use telltale_models::verdict::VerdictParams;

const HOUR_MS: i64 = 3_600_000;
const DAY_MS: i64 = 24 * HOUR_MS;
const WEEK_MS: f64 = 7.0 * DAY_MS as f64;

/// Settings of one backtest; build with [`BacktestSettings::new`] and set
/// the public fields.
///
/// | field             | default  | meaning                                                   |
/// |-------------------|----------|-----------------------------------------------------------|
/// | `from_ms`         | first reading + `fit_window`, next midnight UTC | replay start |
/// | `to_ms`           | last reading, next full hour | replay end, exclusive                 |
/// | `fit_window_ms`   | 28 days  | trailing history each fit uses                            |
/// | `refit_every_ms`  | 7 days   | fold length: baselines re-fitted at each fold start       |
/// | `step_ms`         | 24 h     | review step: one scan and one decision per step           |
/// | `min_fit_ms`      | 7 days   | least history after a reset or accepted change to re-fit  |
/// | `quiet_before_ms` | 30 days  | time before a failure that is not quiet                   |
/// | `quiet_after_ms`  | 7 days   | time after a failure that is not quiet                    |
/// | `sweep`           | 1e-10 .. 0.01 | Benjamini–Hochberg levels of the sensitivity sweep   |
#[derive(Debug, Clone)]
#[non_exhaustive]
pub struct BacktestSettings {
    /// History file or directory.
    pub history: PathBuf,
    /// Optional fleet registry.
    pub registry: Option<PathBuf>,
    /// Archive events: failures, maintenance, optional labelled changes.
    pub events: Vec<Event>,
    /// Whole-asset outages known beforehand (no exposure).
    pub outages: Vec<Outage>,
    /// Directory for the per-fold baseline stores (`fold-NNN`), created if missing.
    pub work_dir: PathBuf,
    /// Replay start, epoch ms (`None`: see the table).
    pub from_ms: Option<i64>,
    /// Replay end, epoch ms, exclusive (`None`: see the table).
    pub to_ms: Option<i64>,
    /// Trailing history of each fit, ms.
    pub fit_window_ms: i64,
    /// Fold length, ms.
    pub refit_every_ms: i64,
    /// Review step, ms.
    pub step_ms: i64,
    /// Least history for a re-fit after a reset or an accepted change, ms.
    pub min_fit_ms: i64,
    /// Time before each failure left out of quiet time, ms.
    pub quiet_before_ms: i64,
    /// Time after each failure left out of quiet time, ms.
    pub quiet_after_ms: i64,
    /// Benjamini–Hochberg levels of the sweep (the default level is added).
    pub sweep: Vec<f64>,
    /// Verdict-engine settings; `fdr_q` is the default decision level.
    pub params: VerdictParams,
    /// Skip unreadable history files.
    pub skip_bad_files: bool,
    /// Threads (`0`: the available cores).
    pub threads: usize,
}

impl BacktestSettings {
    /// Default settings.
    pub fn new(
        history: impl Into<PathBuf>,
        events: Vec<Event>,
        work_dir: impl Into<PathBuf>,
    ) -> Self {
        BacktestSettings {
            history: history.into(),
            registry: None,
            events,
            outages: Vec::new(),
            work_dir: work_dir.into(),
            from_ms: None,
            to_ms: None,
            fit_window_ms: 28 * DAY_MS,
            refit_every_ms: 7 * DAY_MS,
            step_ms: DAY_MS,
            min_fit_ms: 7 * DAY_MS,
            quiet_before_ms: 30 * DAY_MS,
            quiet_after_ms: 7 * DAY_MS,
            sweep: vec![1e-10, 1e-8, 1e-6, 1e-5, 1e-4, 1e-3, 3e-3, 0.01],
            params: VerdictParams::default(),
            skip_bad_files: false,
            threads: 0,
        }
    }

    fn check(&self) -> std::result::Result<(), String> {
        let hour = |name: &str, v: i64, min: i64| {
            if v < min {
                Err(format!(
                    "{name} must be at least {} h, got {} h",
                    min / HOUR_MS,
                    v as f64 / HOUR_MS as f64
                ))
            } else {
                Ok(())
            }
        };
        hour("the fit window", self.fit_window_ms, DAY_MS)?;
        hour("the re-fit cadence", self.refit_every_ms, HOUR_MS)?;
        hour("the review step", self.step_ms, HOUR_MS)?;
        hour("the least re-fit history", self.min_fit_ms, HOUR_MS)?;
        hour("the quiet margin before a failure", self.quiet_before_ms, 0)?;
        hour("the quiet margin after a failure", self.quiet_after_ms, 0)?;
        if self.refit_every_ms % self.step_ms != 0 {
            return Err(format!(
                "the re-fit cadence ({} h) must be a whole number of review steps ({} h)",
                self.refit_every_ms / HOUR_MS,
                self.step_ms / HOUR_MS
            ));
        }
        if self.min_fit_ms > self.fit_window_ms {
            return Err("the least re-fit history must not exceed the fit window".to_owned());
        }
        if let Some(q) = self.sweep.iter().find(|q| !(q.is_finite() && **q > 0.0 && **q < 1.0)) {
            return Err(format!("sweep levels must lie in (0, 1), got {q}"));
        }
        self.params.validate()
    }
}

/// One suspicion as the replay reported it.
#[derive(Debug, Clone, PartialEq, Serialize, Deserialize)]
pub struct Reported {
    /// The suspicion, as its review step's scan wrote it (rank within the step).
    pub suspicion: Suspicion,
    /// Its Benjamini–Hochberg adjusted p-value within the step.
    pub adjusted_p: f64,
    /// End of the review step that reported it: the time of the decision.
    pub reported: chrono::DateTime<chrono::Utc>,
    /// Fold index (0-based).
    pub fold: usize,
}

/// What happened at one fold start.
#[derive(Debug, Clone, PartialEq, Serialize, Deserialize)]
pub struct FoldRecord {
    /// Fold index.
    pub fold: usize,
    /// Fold start (the fit's `until`).
    pub start: chrono::DateTime<chrono::Utc>,
    /// Fold end, exclusive.
    pub end: chrono::DateTime<chrono::Utc>,
    /// Assets fitted on fresh history.
    pub fitted: usize,
    /// Assets carried on their previous baseline (hold or young accepted change).
    pub carried: usize,
    /// Assets not judged in this fold (no usable baseline).
    pub paused: usize,
    /// Suspicions the fold's steps reported at the default level (after merging).
    pub reported: usize,
    /// Fit wall time, seconds.
    pub fit_seconds: f64,
    /// Scan wall time over the fold's steps, seconds.
    pub scan_seconds: f64,
}

/// A span during which an asset was not judged.
#[derive(Debug, Clone, PartialEq, Serialize, Deserialize)]
pub struct Paused {
    /// Asset id.
    pub asset: String,
    /// Start.
    pub start: chrono::DateTime<chrono::Utc>,
    /// End, exclusive.
    pub end: chrono::DateTime<chrono::Utc>,
    /// Why.
    pub reason: String,
}

/// The raw outcome of a replay, before scoring.
#[derive(Debug, Clone, PartialEq)]
pub struct Replay {
    /// Replay start.
    pub from_ms: i64,
    /// Replay end, exclusive.
    pub to_ms: i64,
    /// Every suspicion the steps reported at the loosest sweep level, in
    /// report order (unmerged).
    pub candidates: Vec<Reported>,
    /// The folds.
    pub folds: Vec<FoldRecord>,
    /// Paused spans.
    pub paused: Vec<Paused>,
    /// Assets of the history.
    pub assets: Vec<String>,
    /// History rows read by the scans (warm-up included).
    pub rows_scanned: u64,
    /// Fit wall time, seconds.
    pub fit_seconds: f64,
    /// Scan wall time, seconds.
    pub scan_seconds: f64,
    /// Whole replay wall time, seconds.
    pub seconds: f64,
}

/// The suspicions kept at level `q`: candidates with an adjusted p-value at
/// most `q`, continuing episodes merged (see the [module docs](self)).
/// Returns indices into `candidates`, in report order.
pub fn merge_at(candidates: &[Reported], q: f64, step_ms: i64) -> Vec<usize> {
    let mut kept: Vec<usize> = Vec::new();
    // (asset, sensor, class) -> detected ms of the latest report
    let mut open: BTreeMap<(String, Option<String>, Class), i64> = BTreeMap::new();
    for (i, c) in candidates.iter().enumerate() {
        if c.adjusted_p > q {
            continue;
        }
        let s = &c.suspicion;
        let key = (s.asset.clone(), s.sensor.clone(), s.class);
        let onset = s.onset.timestamp_millis();
        let detected = s.detected.timestamp_millis();
        match open.get_mut(&key) {
            Some(last) if onset <= *last + step_ms => {
                *last = (*last).max(detected);
            }
            _ => {
                open.insert(key, detected);
                kept.push(i);
            }
        }
    }
    kept
}

/// A reset of one asset from the archive.
#[derive(Debug, Clone, Copy)]
struct Reset {
    /// From here the old baseline no longer applies.
    start: i64,
    /// From here the new baseline may learn.
    learn_from: i64,
}

fn resets(events: &[Event]) -> BTreeMap<String, Vec<Reset>> {
    let mut out: BTreeMap<String, Vec<Reset>> = BTreeMap::new();
    for e in events {
        let r = match e.class {
            Class::Maintenance => Reset {
                start: e.start.timestamp_millis(),
                learn_from: e.end.unwrap_or(e.start).timestamp_millis(),
            },
            Class::Failure => {
                Reset { start: e.start.timestamp_millis(), learn_from: e.start.timestamp_millis() }
            }
            _ => continue,
        };
        out.entry(e.asset.clone()).or_default().push(r);
    }
    for v in out.values_mut() {
        v.sort_by_key(|r| (r.start, r.learn_from));
    }
    out
}

#[derive(Debug, Default, Clone)]
struct AssetState {
    /// Fold of the baseline in force (its store).
    baseline_fold: Option<usize>,
    /// Sensor or equipment suspicion since the baseline was fitted: hold.
    hold: bool,
    /// Earliest time the next fit may learn from (reset or accepted change).
    learn_from: Option<i64>,
    /// Paused since (no baseline in force).
    paused_since: Option<i64>,
    /// Why it is paused.
    paused_reason: String,
}

fn ceil_to(t: i64, unit: i64) -> i64 {
    t.div_euclid(unit) * unit + if t.rem_euclid(unit) == 0 { 0 } else { unit }
}

fn fold_store(settings: &BacktestSettings, fold: usize) -> PathBuf {
    settings.work_dir.join(format!("fold-{fold:03}"))
}

/// Runs the walk-forward replay; see the [module docs](self).
///
/// # Errors
/// [`Error::BadInput`] for bad settings, an unreadable history or registry,
/// an empty replay span; [`Error::Io`] when a store cannot be written.
pub fn run_replay(settings: &BacktestSettings) -> Result<Replay> {
    let started = Instant::now();
    settings.check().map_err(|m| Error::bad_input(&settings.history, m))?;
    let inventory = HistoryReader::try_new(&settings.history)?
        .with_skip_bad_files(settings.skip_bad_files)
        .inventory()?;
    let (Some(first), Some(last)) = (inventory.first_ms, inventory.last_ms) else {
        return Err(Error::bad_input(&settings.history, "the history holds no readings"));
    };
    let from = settings.from_ms.unwrap_or_else(|| ceil_to(first + settings.fit_window_ms, DAY_MS));
    let to = settings.to_ms.unwrap_or_else(|| ceil_to(last + 1, HOUR_MS));
    if from >= to {
        return Err(Error::bad_input(
            &settings.history,
            format!(
                "empty replay span {} .. {}: the history ({} .. {}) must be longer than the fit \
                 window; give --from and --to, or a shorter --fit-days",
                format_time(from_millis(from)),
                format_time(from_millis(to)),
                format_time(from_millis(first)),
                format_time(from_millis(last))
            ),
        ));
    }
    let assets: Vec<String> = inventory.assets.iter().map(|a| a.asset.clone()).collect();
    let resets = resets(&settings.events);
    let mut state: BTreeMap<String, AssetState> =
        assets.iter().map(|a| (a.clone(), AssetState::default())).collect();
    let sweep_max = settings.sweep.iter().copied().fold(settings.params.fdr_q, f64::max);
    let mut scan_params = settings.params;
    scan_params.fdr_q = sweep_max;
    let q_default = settings.params.fdr_q;

    let mut candidates: Vec<Reported> = Vec::new();
    let mut folds: Vec<FoldRecord> = Vec::new();
    let mut paused: Vec<Paused> = Vec::new();
    let (mut fit_seconds, mut scan_seconds, mut rows_scanned) = (0.0, 0.0, 0u64);
    let mut fold = 0usize;
    let mut t = from;
    while t < to {
        let fold_end = (t + settings.refit_every_ms).min(to);
        let store_dir = fold_store(settings, fold);
        if store_dir.exists() {
            std::fs::remove_dir_all(&store_dir).map_err(|e| Error::io(&store_dir, e))?;
        }
        let store = Store::open(&store_dir)?;
        // plan the fold: fit groups by learning start, carried assets, paused ones
        let mut groups: BTreeMap<i64, Vec<String>> = BTreeMap::new();
        let mut carried = 0usize;
        for (asset, st) in state.iter_mut() {
            for r in resets.get(asset).into_iter().flatten().filter(|r| r.start < t) {
                if st.learn_from.is_none_or(|l| l < r.learn_from) {
                    st.learn_from = Some(r.learn_from);
                    st.hold = false;
                    // the reset falls before this fold: the last fold's
                    // steps already dropped the asset from its start
                }
            }
            let since = st.learn_from.unwrap_or(i64::MIN).max(t - settings.fit_window_ms);
            let fresh_enough = t - since >= settings.min_fit_ms;
            let can_carry = st.baseline_fold.is_some() && st.paused_since.is_none();
            if (st.hold || !fresh_enough) && can_carry {
                let prev = Store::open(fold_store(settings, st.baseline_fold.unwrap_or(0)))?;
                store.write_baseline(&prev.read_baseline(asset)?)?;
                carried += 1;
            } else if fresh_enough {
                groups.entry(since).or_default().push(asset.clone());
            } else {
                st.baseline_fold = None;
                if st.paused_since.is_none() {
                    st.paused_since = Some(t);
                    st.paused_reason = "too little history since the last reset".to_owned();
                }
            }
        }
        let fit_started = Instant::now();
        let mut fitted = 0usize;
        for (since, group) in &groups {
            let span = HistoryReader::try_new(&settings.history)?
                .with_skip_bad_files(settings.skip_bad_files)
                .with_time_range(*since, t)
                .inventory()?;
            let with_data: Vec<String> = group
                .iter()
                .filter(|a| span.assets.binary_search_by(|x| x.asset.as_str().cmp(a)).is_ok())
                .cloned()
                .collect();
            let mut ok: BTreeSet<String> = BTreeSet::new();
            if !with_data.is_empty() {
                let mut fs = FitSettings::new(&settings.history, t, &store_dir);
                fs.registry.clone_from(&settings.registry);
                fs.from_ms = (*since > i64::MIN).then_some(*since);
                fs.assets.clone_from(&with_data);
                fs.skip_bad_files = settings.skip_bad_files;
                fs.threads = settings.threads;
                fs.verdict = settings.params;
                let report = run_fit(&fs)?;
                ok.extend(report.assets_fitted.into_iter().map(|f| f.asset));
            }
            for a in group {
                let Some(st) = state.get_mut(a) else { continue };
                if ok.contains(a) {
                    fitted += 1;
                    st.baseline_fold = Some(fold);
                    st.hold = false;
                    if let Some(p) = st.paused_since.take() {
                        paused.push(Paused {
                            asset: a.clone(),
                            start: from_millis(p),
                            end: from_millis(t),
                            reason: std::mem::take(&mut st.paused_reason),
                        });
                    }
                } else {
                    st.baseline_fold = None;
                    if st.paused_since.is_none() {
                        st.paused_since = Some(t);
                        st.paused_reason =
                            "its history in the fit span could not be fitted".to_owned();
                    }
                }
            }
        }
        let fit_s = fit_started.elapsed().as_secs_f64();
        fit_seconds += fit_s;
        let judged = state.values().filter(|s| s.baseline_fold.is_some()).count();
        tracing::info!(
            fold,
            start = %format_time(from_millis(t)),
            fitted,
            carried,
            paused = state.len() - judged,
            seconds = format!("{fit_s:.1}"),
            "fold baselines ready"
        );
        // review steps
        let scan_started = Instant::now();
        let mut reported_in_fold = 0usize;
        let mut tau = t;
        while tau < fold_end && judged > 0 {
            let step_end = (tau + settings.step_ms).min(fold_end);
            let mut ss = ScanSettings::new(&settings.history, &store_dir, tau, step_end);
            ss.registry.clone_from(&settings.registry);
            ss.skip_bad_files = settings.skip_bad_files;
            ss.params = scan_params;
            ss.threads = settings.threads;
            let report = run_scan(&ss)?;
            rows_scanned += report.rows_read;
            // resets inside the step: the asset's old baseline stops applying
            for (asset, st) in state.iter_mut() {
                if st.baseline_fold.is_none() {
                    continue;
                }
                if let Some(r) = resets
                    .get(asset)
                    .into_iter()
                    .flatten()
                    .find(|r| r.start >= tau && r.start < step_end)
                {
                    st.baseline_fold = None;
                    st.paused_since = Some(r.start);
                    st.paused_reason = "re-baselining after maintenance or a failure".to_owned();
                }
            }
            let step_first = candidates.len();
            for s in report.suspicions {
                let st = &state[&s.asset];
                if let Some(p) = st.paused_since
                    && s.detected.timestamp_millis() >= p
                {
                    continue;
                }
                let adjusted_p =
                    s.evidence.iter().find(|e| e.test == "fleet_fdr").map_or(1.0, |e| e.statistic);
                candidates.push(Reported {
                    suspicion: s,
                    adjusted_p,
                    reported: from_millis(step_end),
                    fold,
                });
            }
            // the default-level decisions of this step drive the policy
            let kept = merge_at(&candidates, q_default, settings.step_ms);
            for &i in kept.iter().filter(|&&i| i >= step_first) {
                reported_in_fold += 1;
                let s = &candidates[i].suspicion;
                let Some(st) = state.get_mut(&s.asset) else { continue };
                match s.class {
                    Class::SensorFault | Class::EquipmentFault => st.hold = true,
                    Class::ProcessChange => {
                        let onset = s.onset.timestamp_millis();
                        st.learn_from = Some(st.learn_from.map_or(onset, |l| l.max(onset)));
                    }
                    _ => {}
                }
            }
            tau = step_end;
        }
        let scan_s = scan_started.elapsed().as_secs_f64();
        scan_seconds += scan_s;
        folds.push(FoldRecord {
            fold,
            start: from_millis(t),
            end: from_millis(fold_end),
            fitted,
            carried,
            paused: state.len() - judged,
            reported: reported_in_fold,
            fit_seconds: fit_s,
            scan_seconds: scan_s,
        });
        t = fold_end;
        fold += 1;
    }
    for (asset, st) in &state {
        if let Some(p) = st.paused_since {
            paused.push(Paused {
                asset: asset.clone(),
                start: from_millis(p),
                end: from_millis(to),
                reason: st.paused_reason.clone(),
            });
        }
    }
    paused.sort_by(|a, b| (&a.asset, a.start).cmp(&(&b.asset, b.start)));
    Ok(Replay {
        from_ms: from,
        to_ms: to,
        candidates,
        folds,
        paused,
        assets,
        rows_scanned,
        fit_seconds,
        scan_seconds,
        seconds: started.elapsed().as_secs_f64(),
    })
}

/// Suspicions in quiet time: the failure-only false-alarm proxy.
#[derive(Debug, Clone, PartialEq, Serialize, Deserialize)]
pub struct QuietReport {
    /// Quiet time summed over the assets, asset-weeks.
    pub exposure_asset_weeks: f64,
    /// Suspicions (any class) detected in quiet time.
    pub suspicions: usize,
    /// suspicions per 100 asset-weeks of quiet time.
    pub per_100_asset_weeks: Option<f64>,
    /// The same suspicions by class.
    pub by_class: BTreeMap<String, usize>,
}

/// One point of the sensitivity sweep.
#[derive(Debug, Clone, PartialEq, Serialize, Deserialize)]
pub struct SweepPoint {
    /// Benjamini–Hochberg level.
    pub fdr_q: f64,
    /// Whether this is the default level.
    pub default: bool,
    /// Suspicions reported.
    pub suspicions: usize,
    /// Recall over labelled changes (none in a failure-only archive).
    pub recall: Option<f64>,
    /// Class accuracy among detected labelled changes.
    pub class_accuracy: Option<f64>,
    /// False alarms per 100 asset-weeks of clean time.
    pub false_alarms_per_100_asset_weeks: Option<f64>,
    /// Suspicions per 100 asset-weeks of quiet time.
    pub quiet_per_100_asset_weeks: Option<f64>,
    /// Failures warned (any lead).
    pub failures_warned: usize,
    /// Share of failures warned at least 72 h ahead.
    pub warned_72h_share: Option<f64>,
}

/// One row of the per-asset table.
#[derive(Debug, Clone, PartialEq, Serialize, Deserialize)]
pub struct AssetRow {
    /// Asset id.
    pub asset: String,
    /// Time judged, weeks.
    pub judged_weeks: f64,
    /// Suspicions reported.
    pub suspicions: usize,
    /// Of them `sensor_fault`.
    pub sensor_fault: usize,
    /// Of them `process_change`.
    pub process_change: usize,
    /// Of them `equipment_fault`.
    pub equipment_fault: usize,
    /// Of them false alarms in clean time.
    pub false_alarms: usize,
    /// Of them in quiet time.
    pub in_quiet_time: usize,
    /// Labelled changes scored.
    pub events: usize,
    /// Of them detected.
    pub events_detected: usize,
    /// Failures in the span.
    pub failures: usize,
    /// Of them warned.
    pub failures_warned: usize,
}

/// The settings a backtest ran with.
#[derive(Debug, Clone, PartialEq, Serialize, Deserialize)]
pub struct BacktestEcho {
    /// Replay start.
    pub from: chrono::DateTime<chrono::Utc>,
    /// Replay end, exclusive.
    pub to: chrono::DateTime<chrono::Utc>,
    /// Fit window, days.
    pub fit_window_days: f64,
    /// Fold length, days.
    pub refit_every_days: f64,
    /// Review step, hours.
    pub step_hours: f64,
    /// Least re-fit history, days.
    pub min_fit_days: f64,
    /// Quiet margins around failures, days.
    pub quiet_before_days: f64,
    /// After a failure, days.
    pub quiet_after_days: f64,
    /// Default Benjamini–Hochberg level.
    pub fdr_q: f64,
}

/// Run time.
#[derive(Debug, Clone, PartialEq, Serialize, Deserialize)]
pub struct Runtime {
    /// Fits, seconds.
    pub fit_seconds: f64,
    /// Scans, seconds.
    pub scan_seconds: f64,
    /// Whole replay and scoring, seconds.
    pub seconds: f64,
    /// History rows read by the scans (warm-up included).
    pub rows_scanned: u64,
}

/// Everything a backtest measures (`summary.json`).
#[derive(Debug, Clone, PartialEq, Serialize, Deserialize)]
#[non_exhaustive]
pub struct BacktestReport {
    /// Settings.
    pub settings: BacktestEcho,
    /// `labelled` when the archive holds verdict-class events, else `failure_only`.
    pub archive: String,
    /// Assets replayed.
    pub assets: usize,
    /// Time judged over all assets, asset-weeks.
    pub judged_asset_weeks: f64,
    /// Suspicions reported at the default level.
    pub suspicions: usize,
    /// Re-reports of an episode already reported, merged (default level).
    pub continuing_merged: usize,
    /// Scored by the evaluation rules.
    pub evaluation: EvaluationReport,
    /// Quiet-time proxy.
    pub quiet: QuietReport,
    /// The sweep, by level.
    pub sweep: Vec<SweepPoint>,
    /// Per asset.
    pub per_asset: Vec<AssetRow>,
    /// Folds.
    pub folds: Vec<FoldRecord>,
    /// Paused spans.
    pub paused: Vec<Paused>,
    /// Run time.
    pub runtime: Runtime,
}

impl BacktestReport {
    /// Pretty JSON.
    ///
    /// # Errors
    /// Only if serialisation fails.
    pub fn to_json(&self) -> serde_json::Result<String> {
        serde_json::to_string_pretty(self)
    }
}

/// Merged, disjoint, sorted intervals.
fn union(mut iv: Vec<(i64, i64)>) -> Vec<(i64, i64)> {
    iv.retain(|(a, b)| b > a);
    iv.sort_unstable();
    let mut out: Vec<(i64, i64)> = Vec::new();
    for (a, b) in iv {
        match out.last_mut() {
            Some(last) if a <= last.1 => last.1 = last.1.max(b),
            _ => out.push((a, b)),
        }
    }
    out
}

fn covered(iv: &[(i64, i64)], t: i64) -> bool {
    iv.iter().any(|&(a, b)| a <= t && t < b)
}

fn length(iv: &[(i64, i64)]) -> i64 {
    iv.iter().map(|(a, b)| b - a).sum()
}

/// Per asset, the time that is not quiet, clipped to `[from, to)`.
fn not_quiet(
    replay: &Replay,
    events: &[Event],
    outages: &[Outage],
    st: &BacktestSettings,
    grace_ms: i64,
) -> BTreeMap<String, Vec<(i64, i64)>> {
    let (lo, hi) = (replay.from_ms, replay.to_ms);
    let mut raw: BTreeMap<String, Vec<(i64, i64)>> = BTreeMap::new();
    for e in events {
        let s = e.start.timestamp_millis();
        let iv = match e.class {
            Class::Failure => (s - st.quiet_before_ms, s + st.quiet_after_ms),
            Class::Maintenance => (s, e.end.unwrap_or(e.start).timestamp_millis() + grace_ms),
            _ => continue,
        };
        raw.entry(e.asset.clone()).or_default().push(iv);
    }
    for o in outages {
        raw.entry(o.asset.clone())
            .or_default()
            .push((o.start.timestamp_millis(), o.end.timestamp_millis() + grace_ms));
    }
    raw.into_iter()
        .map(|(a, v)| (a, union(v.into_iter().map(|(x, y)| (x.max(lo), y.min(hi))).collect())))
        .collect()
}

fn outages_with_pauses(settings: &BacktestSettings, replay: &Replay) -> Vec<Outage> {
    let mut o = settings.outages.clone();
    o.extend(replay.paused.iter().map(|p| Outage {
        asset: p.asset.clone(),
        start: p.start,
        end: p.end,
        note: format!("not judged: {}", p.reason),
    }));
    o
}

/// The kept suspicions at level `q`, ranked over the whole replay (score,
/// then detection time, asset, sensor).
pub fn ranked_at(replay: &Replay, q: f64, step_ms: i64) -> Vec<Suspicion> {
    let mut out: Vec<Suspicion> = merge_at(&replay.candidates, q, step_ms)
        .into_iter()
        .map(|i| replay.candidates[i].suspicion.clone())
        .collect();
    out.sort_by(|a, b| {
        b.score
            .total_cmp(&a.score)
            .then(a.detected.cmp(&b.detected))
            .then(a.asset.cmp(&b.asset))
            .then(a.sensor.cmp(&b.sensor))
    });
    for (i, s) in out.iter_mut().enumerate() {
        s.rank = u32::try_from(i + 1).unwrap_or(u32::MAX);
    }
    out
}

fn eval_settings(replay: &Replay) -> EvaluateSettings {
    EvaluateSettings::new(from_millis(replay.from_ms), from_millis(replay.to_ms))
}

struct Scored {
    suspicions: Vec<Suspicion>,
    evaluation: EvaluationReport,
    quiet: QuietReport,
    quiet_hits: Vec<bool>,
}

fn score_at(
    replay: &Replay,
    settings: &BacktestSettings,
    outages: &[Outage],
    not_quiet: &BTreeMap<String, Vec<(i64, i64)>>,
    q: f64,
) -> std::result::Result<Scored, String> {
    let suspicions = ranked_at(replay, q, settings.step_ms);
    let es = eval_settings(replay);
    let evaluation =
        evaluate(&suspicions, &settings.events, &replay.assets, outages, &es).map_err(|e| e.0)?;
    let span = replay.to_ms - replay.from_ms;
    let empty = Vec::new();
    let exposure: i64 =
        replay.assets.iter().map(|a| span - length(not_quiet.get(a).unwrap_or(&empty))).sum();
    let mut by_class: BTreeMap<String, usize> = BTreeMap::new();
    let quiet_hits: Vec<bool> = suspicions
        .iter()
        .map(|s| {
            let t = s.detected.timestamp_millis();
            let hit = replay.assets.binary_search(&s.asset).is_ok()
                && t >= replay.from_ms
                && t < replay.to_ms
                && !covered(not_quiet.get(&s.asset).unwrap_or(&empty), t);
            if hit {
                *by_class.entry(s.class.as_str().to_owned()).or_default() += 1;
            }
            hit
        })
        .collect();
    let n = quiet_hits.iter().filter(|h| **h).count();
    let weeks = exposure as f64 / WEEK_MS;
    let quiet = QuietReport {
        exposure_asset_weeks: weeks,
        suspicions: n,
        per_100_asset_weeks: (weeks > 0.0).then(|| n as f64 / weeks * 100.0),
        by_class,
    };
    Ok(Scored { suspicions, evaluation, quiet, quiet_hits })
}

/// Scores a replay; returns the report and the suspicions reported at the
/// default level, ranked.
///
/// # Errors
/// [`Error::BadInput`] when the evaluation settings are refused (an empty span).
pub fn score_replay(
    replay: &Replay,
    settings: &BacktestSettings,
) -> Result<(BacktestReport, Vec<Suspicion>)> {
    let bad = |m: String| Error::bad_input(&settings.history, m);
    let outages = outages_with_pauses(settings, replay);
    let grace_ms = eval_settings(replay).grace.num_milliseconds();
    // quiet time leaves out the paused spans as well as known outages
    let nq = not_quiet(replay, &settings.events, &outages, settings, grace_ms);
    let q0 = settings.params.fdr_q;
    let main = score_at(replay, settings, &outages, &nq, q0).map_err(bad)?;
    let mut levels: Vec<f64> = settings.sweep.clone();
    levels.push(q0);
    levels.sort_by(f64::total_cmp);
    levels.dedup();
    let mut sweep = Vec::with_capacity(levels.len());
    for &q in &levels {
        let s = if q == q0 {
            None
        } else {
            Some(score_at(replay, settings, &outages, &nq, q).map_err(bad)?)
        };
        let s = s.as_ref().unwrap_or(&main);
        let ev = &s.evaluation;
        sweep.push(SweepPoint {
            fdr_q: q,
            default: q == q0,
            suspicions: s.suspicions.len(),
            recall: ev.overall.recall,
            class_accuracy: ev.overall.class_accuracy,
            false_alarms_per_100_asset_weeks: ev.false_alarms.per_100_asset_weeks,
            quiet_per_100_asset_weeks: s.quiet.per_100_asset_weeks,
            failures_warned: ev.lead_time.warned,
            warned_72h_share: ev
                .lead_time
                .marks
                .iter()
                .find(|m| (m.hours - 72.0).abs() < 1e-9)
                .and_then(|m| m.share),
        });
    }
    let span = replay.to_ms - replay.from_ms;
    let mut paused_ms: BTreeMap<&str, Vec<(i64, i64)>> = BTreeMap::new();
    for p in &replay.paused {
        paused_ms
            .entry(p.asset.as_str())
            .or_default()
            .push((p.start.timestamp_millis(), p.end.timestamp_millis()));
    }
    let judged_ms =
        |a: &str| -> i64 { span - length(&union(paused_ms.get(a).cloned().unwrap_or_default())) };
    let ev = &main.evaluation;
    let per_asset: Vec<AssetRow> = replay
        .assets
        .iter()
        .map(|a| {
            let mine: Vec<(usize, &Suspicion)> =
                main.suspicions.iter().enumerate().filter(|(_, s)| &s.asset == a).collect();
            let count = |c: Class| mine.iter().filter(|(_, s)| s.class == c).count();
            let events: Vec<_> = ev.per_event.iter().filter(|e| &e.asset == a).collect();
            let failures: Vec<_> = ev.lead_time.failures.iter().filter(|f| &f.asset == a).collect();
            AssetRow {
                asset: a.clone(),
                judged_weeks: judged_ms(a) as f64 / WEEK_MS,
                suspicions: mine.len(),
                sensor_fault: count(Class::SensorFault),
                process_change: count(Class::ProcessChange),
                equipment_fault: count(Class::EquipmentFault),
                false_alarms: ev
                    .false_alarms
                    .list
                    .iter()
                    .filter(|f| &f.asset == a && f.clean_time)
                    .count(),
                in_quiet_time: mine.iter().filter(|(i, _)| main.quiet_hits[*i]).count(),
                events: events.len(),
                events_detected: events.iter().filter(|e| e.detected()).count(),
                failures: failures.len(),
                failures_warned: failures.iter().filter(|f| f.warned_at.is_some()).count(),
            }
        })
        .collect();
    let filtered = replay.candidates.iter().filter(|c| c.adjusted_p <= q0).count();
    let report = BacktestReport {
        settings: BacktestEcho {
            from: from_millis(replay.from_ms),
            to: from_millis(replay.to_ms),
            fit_window_days: settings.fit_window_ms as f64 / DAY_MS as f64,
            refit_every_days: settings.refit_every_ms as f64 / DAY_MS as f64,
            step_hours: settings.step_ms as f64 / HOUR_MS as f64,
            min_fit_days: settings.min_fit_ms as f64 / DAY_MS as f64,
            quiet_before_days: settings.quiet_before_ms as f64 / DAY_MS as f64,
            quiet_after_days: settings.quiet_after_ms as f64 / DAY_MS as f64,
            fdr_q: q0,
        },
        archive: if settings.events.iter().any(|e| e.class.is_verdict()) {
            "labelled".to_owned()
        } else {
            "failure_only".to_owned()
        },
        assets: replay.assets.len(),
        judged_asset_weeks: replay.assets.iter().map(|a| judged_ms(a) as f64 / WEEK_MS).sum(),
        suspicions: main.suspicions.len(),
        continuing_merged: filtered - main.suspicions.len(),
        evaluation: main.evaluation.clone(),
        quiet: main.quiet.clone(),
        sweep,
        per_asset,
        folds: replay.folds.clone(),
        paused: replay.paused.clone(),
        runtime: Runtime {
            fit_seconds: replay.fit_seconds,
            scan_seconds: replay.scan_seconds,
            seconds: replay.seconds,
            rows_scanned: replay.rows_scanned,
        },
    };
    Ok((report, main.suspicions))
}

/// File names [`write_outputs`] writes in the output directory.
pub const OUTPUT_FILES: [&str; 7] = [
    "summary.json",
    "suspicions.jsonl",
    "per_event.csv",
    "failures.csv",
    "per_asset.csv",
    "sweep.csv",
    "folds.csv",
];

fn opt(x: Option<f64>) -> String {
    x.map_or(String::new(), |v| format!("{v:.6}"))
}

fn csv_bytes(
    path: &std::path::Path,
    header: &[&str],
    rows: impl IntoIterator<Item = Vec<String>>,
) -> Result<Vec<u8>> {
    let mut w = csv::Writer::from_writer(Vec::new());
    let err = |e: csv::Error| Error::io(path, std::io::Error::other(e));
    w.write_record(header).map_err(err)?;
    for r in rows {
        w.write_record(&r).map_err(err)?;
    }
    w.into_inner().map_err(|e| Error::io(path, std::io::Error::other(e.to_string())))
}

/// Writes `summary.json`, `suspicions.jsonl` and the CSV tables (per event,
/// per failure, per asset, sweep, folds) into `dir`, each atomically.
///
/// # Errors
/// [`Error::Io`] when a file cannot be written.
pub fn write_outputs(
    dir: &std::path::Path,
    report: &BacktestReport,
    suspicions: &[Suspicion],
) -> Result<()> {
    use super::store::write_atomic;
    std::fs::create_dir_all(dir).map_err(|e| Error::io(dir, e))?;
    let ev = &report.evaluation;
    let p = dir.join(OUTPUT_FILES[0]);
    let json = report.to_json().map_err(|e| Error::io(&p, std::io::Error::other(e)))?;
    write_atomic(&p, json.as_bytes())?;
    let p = dir.join(OUTPUT_FILES[1]);
    let mut buf = Vec::new();
    crate::io::write_suspicions_to(&mut buf, crate::io::FileFormat::Jsonl, suspicions, &p)?;
    write_atomic(&p, &buf)?;
    let t = |d: chrono::DateTime<chrono::Utc>| format_time(d);
    let p = dir.join(OUTPUT_FILES[2]);
    let rows = ev.per_event.iter().map(|e| {
        let b = e.best.as_ref();
        vec![
            e.asset.clone(),
            e.sensor.clone().unwrap_or_default(),
            e.class.as_str().to_owned(),
            e.mode.map_or(String::new(), |m| m.as_str().to_owned()),
            t(e.start),
            e.end.map_or(String::new(), t),
            e.detected().to_string(),
            b.map_or(String::new(), |b| format!("{}/{}", b.class.as_str(), b.mode.as_str())),
            b.map_or(String::new(), |b| t(b.detected)),
            opt(b.map(|b| b.delay_hours)),
            b.map_or(String::new(), |b| b.id.clone()),
        ]
    });
    let header = [
        "asset",
        "sensor",
        "class",
        "mode",
        "start",
        "end",
        "detected",
        "verdict",
        "detected_at",
        "delay_hours",
        "suspicion",
    ];
    write_atomic(&p, &csv_bytes(&p, &header, rows)?)?;
    let p = dir.join(OUTPUT_FILES[3]);
    let rows = ev.lead_time.failures.iter().map(|f| {
        vec![
            f.asset.clone(),
            t(f.at),
            t(f.window_start),
            format!("{:?}", f.window_open).to_lowercase(),
            f.warned_by.clone().unwrap_or_default(),
            f.warned_at.map_or(String::new(), t),
            opt(f.lead_hours),
        ]
    });
    let header =
        ["asset", "failure", "window_start", "window_open", "warned_by", "warned_at", "lead_hours"];
    write_atomic(&p, &csv_bytes(&p, &header, rows)?)?;
    let p = dir.join(OUTPUT_FILES[4]);
    let rows = report.per_asset.iter().map(|a| {
        vec![
            a.asset.clone(),
            format!("{:.3}", a.judged_weeks),
            a.suspicions.to_string(),
            a.sensor_fault.to_string(),
            a.process_change.to_string(),
            a.equipment_fault.to_string(),
            a.false_alarms.to_string(),
            a.in_quiet_time.to_string(),
            a.events.to_string(),
            a.events_detected.to_string(),
            a.failures.to_string(),
            a.failures_warned.to_string(),
        ]
    });
    let header = [
        "asset",
        "judged_weeks",
        "suspicions",
        "sensor_fault",
        "process_change",
        "equipment_fault",
        "false_alarms",
        "in_quiet_time",
        "events",
        "events_detected",
        "failures",
        "failures_warned",
    ];
    write_atomic(&p, &csv_bytes(&p, &header, rows)?)?;
    let p = dir.join(OUTPUT_FILES[5]);
    let rows = report.sweep.iter().map(|s| {
        vec![
            format!("{:e}", s.fdr_q),
            s.default.to_string(),
            s.suspicions.to_string(),
            opt(s.recall),
            opt(s.class_accuracy),
            opt(s.false_alarms_per_100_asset_weeks),
            opt(s.quiet_per_100_asset_weeks),
            s.failures_warned.to_string(),
            opt(s.warned_72h_share),
        ]
    });
    let header = [
        "fdr_q",
        "default",
        "suspicions",
        "recall",
        "class_accuracy",
        "false_alarms_per_100_asset_weeks",
        "quiet_per_100_asset_weeks",
        "failures_warned",
        "warned_72h_share",
    ];
    write_atomic(&p, &csv_bytes(&p, &header, rows)?)?;
    let p = dir.join(OUTPUT_FILES[6]);
    let rows = report.folds.iter().map(|f| {
        vec![
            f.fold.to_string(),
            t(f.start),
            t(f.end),
            f.fitted.to_string(),
            f.carried.to_string(),
            f.paused.to_string(),
            f.reported.to_string(),
            format!("{:.3}", f.fit_seconds),
            format!("{:.3}", f.scan_seconds),
        ]
    });
    let header = [
        "fold",
        "start",
        "end",
        "fitted",
        "carried",
        "paused",
        "reported",
        "fit_seconds",
        "scan_seconds",
    ];
    write_atomic(&p, &csv_bytes(&p, &header, rows)?)?;
    Ok(())
}

#[cfg(test)]
mod tests {
    //! Hand-made cases for the replay's bookkeeping and scoring rules; every
    //! expected figure is a hand computation from the records of its test,
    //! with the arithmetic in the comments.
    use super::*;
    use crate::record::{Mode, suspicion_id};
    use crate::time::parse_time;

    fn t(s: &str) -> chrono::DateTime<chrono::Utc> {
        parse_time(s).unwrap()
    }

    fn ms(s: &str) -> i64 {
        t(s).timestamp_millis()
    }

    fn cand(
        asset: &str,
        sensor: &str,
        mode: Mode,
        onset: &str,
        detected: &str,
        adjusted_p: f64,
    ) -> Reported {
        Reported {
            suspicion: Suspicion {
                id: suspicion_id(asset, Some(sensor), mode.class(), mode, t(onset)),
                rank: 1,
                asset: asset.into(),
                sensor: Some(sensor.into()),
                class: mode.class(),
                mode,
                score: 1.0 - adjusted_p,
                magnitude: 3.0,
                onset: t(onset),
                detected: t(detected),
                summary: String::new(),
                evidence: vec![],
            },
            adjusted_p,
            reported: t(detected),
            fold: 0,
        }
    }

    fn point(asset: &str, class: Class, start: &str, end: Option<&str>) -> Event {
        Event {
            asset: asset.into(),
            sensor: None,
            class,
            mode: None,
            start: t(start),
            end: end.map(t),
            note: String::new(),
        }
    }

    #[test]
    fn continuing_episodes_merge_and_others_do_not() {
        let day = DAY_MS;
        let c = vec![
            // 0: first report of an episode
            cand("P1", "vib", Mode::Degradation, "2026-03-15", "2026-03-16T12:00:00Z", 1e-5),
            // 1: same key, onset within one step of the last detection: merged
            cand("P1", "vib", Mode::Degradation, "2026-03-16", "2026-03-17T12:00:00Z", 1e-4),
            // 2: same asset and sensor, other class: its own suspicion
            cand("P1", "vib", Mode::Bias, "2026-03-16", "2026-03-17T12:00:00Z", 1e-4),
            // 3: same key, onset 03-20 > last detection 03-17T12 + 24 h: new
            cand("P1", "vib", Mode::Degradation, "2026-03-20", "2026-03-20T06:00:00Z", 1e-4),
            // 4: same key as 3 but above the level: dropped before merging
            cand("P1", "vib", Mode::Degradation, "2026-03-20", "2026-03-21T06:00:00Z", 0.5),
        ];
        assert_eq!(merge_at(&c, 0.01, day), vec![0, 2, 3]);
        // at 1e-5 only the first survives
        assert_eq!(merge_at(&c, 1e-5, day), vec![0]);
        // at 0.5 the fifth continues the fourth (onset 03-20 <= 03-20T06 + 24 h)
        assert_eq!(merge_at(&c, 0.5, day), vec![0, 2, 3]);
        // a longer step joins the fourth to the first (03-20 <= 03-17T12 + 3 d)
        assert_eq!(merge_at(&c, 0.01, 3 * day), vec![0, 2]);
    }

    #[test]
    fn maintenance_learns_from_its_end_and_a_failure_from_its_start() {
        let ev = vec![
            point("P2", Class::Maintenance, "2026-03-10", Some("2026-03-10T06:00:00Z")),
            point("P1", Class::Failure, "2026-03-20", None),
            point("P2", Class::Maintenance, "2026-03-02", None),
        ];
        let r = resets(&ev);
        let p1 = &r["P1"];
        assert_eq!((p1[0].start, p1[0].learn_from), (ms("2026-03-20"), ms("2026-03-20")));
        // sorted by start; a maintenance row without end learns from its start
        let p2 = &r["P2"];
        assert_eq!((p2[0].start, p2[0].learn_from), (ms("2026-03-02"), ms("2026-03-02")));
        assert_eq!((p2[1].start, p2[1].learn_from), (ms("2026-03-10"), ms("2026-03-10T06:00:00Z")));
    }

    #[test]
    fn intervals_union_and_length() {
        let u = union(vec![(5, 7), (1, 3), (2, 4), (9, 9), (7, 8)]);
        assert_eq!(u, vec![(1, 4), (5, 8)]);
        assert_eq!(length(&u), 6);
        assert!(covered(&u, 1) && !covered(&u, 4) && covered(&u, 7));
    }

    /// A failure-only archive over four weeks, two pumps:
    /// - P1 fails 2026-03-20T00; an equipment suspicion detected 03-16T12
    ///   warns it 84 h ahead, re-reported once the next day (merged).
    /// - P2 has maintenance 03-10T00..06 and was not judged 03-10..03-13
    ///   (paused); a sensor suspicion on 03-05 lies in quiet time, one on
    ///   03-10T08 inside the maintenance.
    fn failure_only_case() -> (Replay, BacktestSettings) {
        let events = vec![
            point("P1", Class::Failure, "2026-03-20", None),
            point("P2", Class::Maintenance, "2026-03-10", Some("2026-03-10T06:00:00Z")),
        ];
        let mut st = BacktestSettings::new("history.parquet", events, "work");
        st.sweep = vec![1e-6, 1e-4];
        let candidates = vec![
            cand("P2", "flow", Mode::Bias, "2026-03-04", "2026-03-05T10:00:00Z", 0.005),
            cand("P2", "flow", Mode::Bias, "2026-03-10T02:00:00Z", "2026-03-10T08:00:00Z", 0.002),
            cand("P1", "vib", Mode::Degradation, "2026-03-15", "2026-03-16T12:00:00Z", 1e-5),
            cand("P1", "vib", Mode::Degradation, "2026-03-16", "2026-03-17T12:00:00Z", 1e-4),
        ];
        let replay = Replay {
            from_ms: ms("2026-03-01"),
            to_ms: ms("2026-03-29"),
            candidates,
            folds: vec![],
            paused: vec![Paused {
                asset: "P2".into(),
                start: t("2026-03-10"),
                end: t("2026-03-13"),
                reason: "maintenance".into(),
            }],
            assets: vec!["P1".into(), "P2".into()],
            rows_scanned: 0,
            fit_seconds: 0.0,
            scan_seconds: 0.0,
            seconds: 0.0,
        };
        (replay, st)
    }

    #[test]
    fn failure_only_archive_scores_lead_time_and_quiet_time() {
        let (replay, st) = failure_only_case();
        let (r, sus) = score_replay(&replay, &st).unwrap();
        assert_eq!(r.archive, "failure_only");
        // kept at 0.01: candidates 0, 1, 2 (3 continues 2)
        assert_eq!((r.suspicions, r.continuing_merged, sus.len()), (3, 1, 3));
        // lead: 03-20T00 - 03-16T12 = 84 h
        let lt = &r.evaluation.lead_time;
        assert_eq!(lt.warned, 1);
        assert!((lt.failures[0].lead_hours.unwrap() - 84.0).abs() < 1e-9);
        let share = |h: f64| lt.marks.iter().find(|m| (m.hours - h).abs() < 1e-9).unwrap().share;
        assert_eq!((share(24.0), share(72.0), share(168.0)), (Some(1.0), Some(1.0), Some(0.0)));
        // Not quiet, clipped to [03-01, 03-29):
        //   P1: failure - 30 d .. + 7 d -> [03-01, 03-27): quiet 2 d = 48 h
        //   P2: maintenance 03-10T00 .. 03-10T06 + 24 h grace, and the pause
        //       03-10 .. 03-13 + 24 h grace -> [03-10, 03-14): quiet 24 d = 576 h
        // exposure 624 h = 3.714 asset-weeks; one quiet suspicion (03-05)
        assert!((r.quiet.exposure_asset_weeks - 624.0 / 168.0).abs() < 1e-9);
        assert_eq!(r.quiet.suspicions, 1);
        assert!((r.quiet.per_100_asset_weeks.unwrap() - 100.0 * 168.0 / 624.0).abs() < 1e-9);
        assert_eq!(r.quiet.by_class.get("sensor_fault"), Some(&1));
        // judged: P1 4 weeks, P2 4 weeks - 3 days
        assert!((r.judged_asset_weeks - (8.0 - 3.0 / 7.0)).abs() < 1e-9);
        let p1 = &r.per_asset[0];
        let p2 = &r.per_asset[1];
        assert_eq!((p1.asset.as_str(), p1.suspicions, p1.equipment_fault), ("P1", 1, 1));
        assert_eq!((p1.failures, p1.failures_warned, p1.in_quiet_time), (1, 1, 0));
        assert_eq!(
            (p2.asset.as_str(), p2.suspicions, p2.sensor_fault, p2.in_quiet_time),
            ("P2", 2, 2, 1)
        );
        assert!((p2.judged_weeks - 25.0 / 7.0).abs() < 1e-9);
    }

    #[test]
    fn sweep_tightens_and_marks_the_default() {
        let (replay, st) = failure_only_case();
        let (r, _) = score_replay(&replay, &st).unwrap();
        let pts: Vec<(f64, bool, usize, usize)> =
            r.sweep.iter().map(|p| (p.fdr_q, p.default, p.suspicions, p.failures_warned)).collect();
        // 1e-6: nothing kept, the failure unwarned; 1e-4: candidates 2 and 3,
        // merged to one, which warns; 0.01 (the default): three kept
        assert_eq!(pts, vec![(1e-6, false, 0, 0), (1e-4, false, 1, 1), (0.01, true, 3, 1)]);
        assert_eq!(r.sweep[0].quiet_per_100_asset_weeks, Some(0.0));
        assert_eq!(r.sweep[0].warned_72h_share, Some(0.0));
        assert_eq!(r.sweep[1].warned_72h_share, Some(1.0));
        // no labelled changes in a failure-only archive: no recall
        assert!(r.sweep.iter().all(|p| p.recall.is_none()));
    }

    #[test]
    fn ranking_over_the_replay_is_by_score_then_detection() {
        let (replay, _) = failure_only_case();
        let ranked = ranked_at(&replay, 0.01, DAY_MS);
        // scores 1 - p: 0.99999 (P1), 0.998 (P2 03-10), 0.995 (P2 03-05)
        let order: Vec<(&str, u32)> = ranked.iter().map(|s| (s.asset.as_str(), s.rank)).collect();
        assert_eq!(order, vec![("P1", 1), ("P2", 2), ("P2", 3)]);
        assert_eq!(ranked[1].detected, t("2026-03-10T08:00:00Z"));
    }
}
