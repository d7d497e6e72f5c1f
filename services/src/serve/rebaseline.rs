//! The re-baseline worker: does the re-baselines that accepted process
//! changes ask for ([`super::db`] keeps them), from the archived history.
//!
//! ```text
//!  feedback process_change_accepted ─► rebaselines row 'pending' (same transaction) ─► wake
//!  worker (at start, on wake, every --rebaseline-retry-s):
//!    for each pending row, oldest first (one at a time, off the async workers):
//!      store file ─► recorded as a version ('fit') if it is not the latest one
//!      pipelines::jobs::rebaseline(history, baseline, onset .. min(onset + learn, now))
//!        Done   ─► new baseline written to the store atomically ─► version N+1, row 'done'
//!        NotYet ─► row stays 'pending' with what is missing (tried again later)
//!        error  ─► row 'failed' with the reason
//! ```
//!
//! Scoring picks the new file up at its next request (the baseline cache
//! follows the file's modification time). A crash between writing the file
//! and recording its version leaves the row pending; the retry then learns
//! from the file already re-learnt (the same span, so the same sensor
//! baselines) and records the file it found as a `fit` version first.

use super::AppState;
use super::db::{NewVersion, RebaselineRow, sha256_hex};
use std::path::PathBuf;
use std::time::Duration;
use telltale_pipelines::jobs::{RebaselineOutcome, RebaselineRequest, Relearnt, rebaseline};
use telltale_pipelines::time::{format_time, from_millis};

/// Settings of the worker.
#[derive(Debug, Clone)]
pub struct RebaselineConfig {
    /// The archived history to learn from (`None`: requests wait, saying so).
    pub history: Option<PathBuf>,
    /// Longest span learnt from after the onset, ms.
    pub learn_ms: i64,
    /// Fewest ms of readings after the onset before learning.
    pub min_span_ms: i64,
    /// How often pending requests are tried again.
    pub retry: Duration,
}

impl Default for RebaselineConfig {
    fn default() -> Self {
        RebaselineConfig {
            history: None,
            learn_ms: 7 * 86_400_000,
            min_span_ms: 86_400_000,
            retry: Duration::from_secs(600),
        }
    }
}

fn describe(r: &Relearnt, sensor: Option<&str>, from: &str, to: &str) -> String {
    // regime 0 is the stopped one (models' regime numbering)
    let list = |v: &[usize]| {
        if v.is_empty() {
            "none".to_owned()
        } else {
            let name =
                |g: &usize| if *g == 0 { "stopped".to_owned() } else { format!("running #{g}") };
            v.iter().map(name).collect::<Vec<_>>().join(", ")
        }
    };
    match r {
        Relearnt::Sensor(rep) => format!(
            "sensor {} re-learnt from {from} to {to} ({} grid rows): regimes re-learnt: {}; kept \
             (too few rows since the onset): {}; regression on the context {}; PCA monitor {}; the \
             other sensors, the regimes and the calibration kept",
            sensor.unwrap_or("?"),
            rep.rows,
            list(&rep.relearnt_regimes),
            list(&rep.kept_regimes),
            if rep.regression_relearnt { "re-learnt" } else { "kept" },
            if rep.pca_relearnt { "re-learnt" } else { "kept" },
        ),
        Relearnt::Asset(why) => {
            format!("whole asset re-learnt and re-calibrated from {from} to {to}: {why}")
        }
    }
}

/// Records the baseline file now in the store (`bytes`, read as `stored`)
/// as a version of `asset` unless it is the latest one; returns its number.
pub(crate) fn record_store_file(
    state: &AppState,
    asset: &str,
    bytes: &[u8],
    stored: &telltale_pipelines::jobs::StoredBaseline,
) -> Result<i64, super::db::DbError> {
    let fitted = format!(
        "found in the store (fit span {} .. {})",
        stored.fit_from.as_deref().unwrap_or("start of history"),
        stored.fit_until
    );
    state.db().record_store_version(
        asset,
        &sha256_hex(bytes),
        &String::from_utf8_lossy(bytes),
        &fitted,
    )
}

/// Tries one pending re-baseline; every outcome is recorded on its row.
fn run_one(state: &AppState, cfg: &RebaselineConfig, row: &RebaselineRow) {
    let db = state.db();
    let record = |st: &str, detail: &str| {
        if let Err(e) = db.rebaseline_attempt(row.seq, st, detail) {
            tracing::error!(suspicion = %row.suspicion_id, error = %e, "re-baseline not recorded");
        }
    };
    let Some(history) = &cfg.history else {
        record(
            "pending",
            "this service was started without --history, so it cannot read the readings since \
             the onset; restart it with --history H (it then does the pending re-baselines), or \
             re-fit the asset with `telltale fit --asset ID --from ONSET`",
        );
        return;
    };
    let store = &state.inner.store;
    let path = store.baseline_path(&row.asset);
    let bytes = match std::fs::read(&path) {
        Ok(b) => b,
        Err(e) => {
            record("failed", &format!("{}: cannot read the asset's baseline: {e}", path.display()));
            return;
        }
    };
    let stored = match store.read_baseline(&row.asset) {
        Ok(s) => s,
        Err(e) => {
            record("failed", &e.to_string());
            return;
        }
    };
    if let Err(e) = record_store_file(state, &row.asset, &bytes, &stored) {
        tracing::error!(asset = %row.asset, error = %e, "baseline version not recorded");
        return;
    }
    let req = RebaselineRequest {
        sensor: row.sensor.clone(),
        onset_ms: row.onset_ms,
        until_ms: chrono::Utc::now().timestamp_millis(),
        learn_ms: cfg.learn_ms,
        min_span_ms: cfg.min_span_ms,
    };
    match rebaseline(history, &stored, &req) {
        Ok(RebaselineOutcome::Done { baseline, relearnt, from_ms, to_ms }) => {
            let (from, to) = (format_time(from_millis(from_ms)), format_time(from_millis(to_ms)));
            let detail = describe(&relearnt, row.sensor.as_deref(), &from, &to);
            let written = store
                .write_baseline(&baseline)
                .and_then(|p| std::fs::read(&p).map_err(|e| telltale_pipelines::Error::io(&p, e)));
            let new_bytes = match written {
                Ok(b) => b,
                Err(e) => {
                    record("pending", &format!("the new baseline could not be written: {e}"));
                    return;
                }
            };
            let v = NewVersion {
                suspicion_id: row.suspicion_id.clone(),
                sensor: row.sensor.clone(),
                from_ms,
                to_ms,
                detail: detail.clone(),
                sha256: sha256_hex(&new_bytes),
                baseline: String::from_utf8_lossy(&new_bytes).into_owned(),
            };
            match db.finish_rebaseline(row.seq, &row.asset, &v) {
                Ok(n) => tracing::info!(asset = %row.asset, version = n, %detail, "re-baselined"),
                Err(e) => tracing::error!(asset = %row.asset, error = %e, "version not recorded"),
            }
        }
        Ok(RebaselineOutcome::NotYet(why)) => record("pending", &why),
        Err(e) => record("failed", &e.to_string()),
    }
}

/// Tries every pending re-baseline once, oldest first.
pub fn run_pending(state: &AppState, cfg: &RebaselineConfig) {
    match state.db().pending_rebaselines() {
        Ok(rows) => rows.iter().for_each(|r| run_one(state, cfg, r)),
        Err(e) => tracing::error!(error = %e, "pending re-baselines not read"),
    }
}

/// Starts the worker on the runtime: at once, then whenever feedback
/// wakes it and every `cfg.retry`.
pub fn spawn_worker(state: AppState, cfg: RebaselineConfig) {
    tokio::spawn(async move {
        let wake = state.rebaseline_wake();
        loop {
            let (st, c) = (state.clone(), cfg.clone());
            if let Err(e) = tokio::task::spawn_blocking(move || run_pending(&st, &c)).await {
                tracing::error!(error = %e, "re-baseline worker failed");
            }
            tokio::select! {
                () = wake.notified() => {}
                () = tokio::time::sleep(cfg.retry) => {}
            }
        }
    });
}
