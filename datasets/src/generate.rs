//! Generating a fleet: one asset in memory at a time, written in
//! `(asset, sensor, ts)` order so the history file is clustered by asset.
//!
//! A generator thread simulates the next asset while the caller's thread
//! encodes the previous one; at most three assets are in memory at once.

use crate::error::{Error, Result};
use crate::layout::{self, AssetInfo};
use crate::params::FleetValidParams;
use crate::plan::{FleetPlan, Outage, Timeline, plan_fleet};
use crate::simulate::{AssetData, simulate};
use std::path::{Path, PathBuf};
use std::sync::mpsc;
use std::time::{Duration, Instant};
use telltale_pipelines::io::{HistoryWriter, HistoryWriterOptions};
use telltale_pipelines::record::Event;

/// File name of the history written by [`generate_fleet`].
pub const HISTORY_FILE: &str = "history.parquet";
/// File name of the fleet registry written by [`generate_fleet`].
pub const REGISTRY_FILE: &str = "fleet.toml";

/// What [`generate_fleet`] wrote, and the truth about it.
#[derive(Debug, Clone)]
pub struct FleetSummary {
    /// `out_dir/history.parquet` (DESIGN.md 4.1).
    pub history: PathBuf,
    /// `out_dir/fleet.toml` (DESIGN.md 4.2).
    pub registry: PathBuf,
    /// Fit, control and scan spans.
    pub timeline: Timeline,
    /// Every asset, in index order.
    pub assets: Vec<AssetInfo>,
    /// Ground-truth events (DESIGN.md 4.3), sorted by start, asset, sensor.
    pub events: Vec<Event>,
    /// Whole-asset outages: coverage facts, not events.
    pub outages: Vec<Outage>,
    /// Assets without any event or outage.
    pub clean_assets: Vec<String>,
    /// Rows written to the history file.
    pub rows: u64,
    /// Wall time of the generation and writing.
    pub elapsed: Duration,
}

/// Generate one asset in memory (for tests and inspection).
///
/// The result is identical to the rows [`generate_fleet`] writes for that
/// asset, whatever order assets are generated in.
///
/// # Errors
/// [`Error::AssetIndex`] if `asset_index >= params.asset_count()`.
pub fn generate_asset(params: &FleetValidParams, asset_index: usize) -> Result<AssetData> {
    let plan = plan_fleet(params);
    generate_planned_asset(params, &plan, asset_index)
}

/// Generate one asset of an existing plan (saves re-planning in loops).
///
/// # Errors
/// [`Error::AssetIndex`] if `asset_index` is beyond the plan's assets.
pub fn generate_planned_asset(
    params: &FleetValidParams,
    plan: &FleetPlan,
    asset_index: usize,
) -> Result<AssetData> {
    if asset_index >= plan.assets.len() {
        return Err(Error::AssetIndex { index: asset_index, count: plan.assets.len() });
    }
    Ok(simulate(plan, params.seed, params.noise_multiplier, asset_index))
}

/// Generate the whole fleet into `out_dir` (created if missing): `history.parquet`
/// and `fleet.toml`. The events are returned, not written: write them with the
/// pipelines' events writer.
///
/// # Errors
/// [`Error::Io`] if the directory or registry cannot be written,
/// [`Error::Write`] if the history file cannot.
pub fn generate_fleet(
    params: &FleetValidParams,
    out_dir: impl AsRef<Path>,
) -> Result<FleetSummary> {
    let started = Instant::now();
    let out_dir = out_dir.as_ref();
    std::fs::create_dir_all(out_dir)
        .map_err(|source| Error::Io { path: out_dir.into(), source })?;
    let plan = plan_fleet(params);
    let registry = out_dir.join(REGISTRY_FILE);
    std::fs::write(&registry, layout::registry_toml(&plan.assets))
        .map_err(|source| Error::Io { path: registry.clone(), source })?;

    let history = out_dir.join(HISTORY_FILE);
    let mut writer = HistoryWriter::try_new(&history, HistoryWriterOptions::default())?;
    let mut order: Vec<usize> = (0..plan.assets.len()).collect();
    order.sort_by(|&a, &b| plan.assets[a].id.cmp(&plan.assets[b].id));

    let (tx, rx) = mpsc::sync_channel::<AssetData>(1);
    let written: Result<()> = std::thread::scope(|scope| {
        let plan = &plan;
        let order = &order;
        scope.spawn(move || {
            for &i in order {
                let data = simulate(plan, params.seed, params.noise_multiplier, i);
                if tx.send(data).is_err() {
                    break;
                }
            }
        });
        for _ in 0..order.len() {
            let data = rx.recv().map_err(|_| Error::Generator)?;
            for s in &data.sensors {
                writer.write_series(&data.info.id, s.sensor, &s.ts_ms, &s.values)?;
            }
        }
        Ok(())
    });
    // Dropping the receiver (end of scope) lets the generator stop on an error.
    written?;
    let rows = writer.close()?;
    Ok(FleetSummary {
        history,
        registry,
        timeline: plan.timeline,
        assets: plan.assets,
        events: plan.events,
        outages: plan.outages,
        clean_assets: plan.clean_assets,
        rows,
        elapsed: started.elapsed(),
    })
}
