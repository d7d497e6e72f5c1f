//! # telltale-datasets
//!
//! A deterministic demo fleet with ground truth: a water utility's pumping
//! stations (an invented scenario). Each station has booster pumps and
//! raw-water pumps on variable-speed drives, each pump ten sensors:
//!
//! | sensor               | unit | role      | what drives it                                         |
//! |----------------------|------|-----------|--------------------------------------------------------|
//! | `speed`              | rpm  | context   | demand shared by the running pumps; 0 when stopped     |
//! | `flow`               | m3/h | context   | proportional to speed (affinity law)                   |
//! | `suction_pressure`   | bar  | context   | reservoir / intake level                               |
//! | `ambient_temp`       | degC | context   | site weather: daily cycle, fronts, heatwave            |
//! | `discharge_pressure` | bar  | condition | suction + head, head proportional to speed^2           |
//! | `motor_current`      | A    | condition | proportional to speed^3 (power)                        |
//! | `bearing_de_temp`    | degC | condition | first-order lag to ambient + load (tau 35 min)         |
//! | `bearing_nde_temp`   | degC | condition | first-order lag to ambient + load (tau 40 min)         |
//! | `vibration`          | mm/s | condition | velocity RMS, rises with speed^2 and wear              |
//! | `winding_temp`       | degC | condition | first-order lag to ambient + load (tau 20 min)         |
//!
//! Every class and mode of the verdict vocabulary is injected (see
//! [`Case`] and the [`plan`] module for the time line and labelling rules),
//! with ground-truth [`Event`](telltale_pipelines::record::Event)s. The first
//! `fit_days` are clean on every asset, followed by a clean control span; some
//! assets stay clean throughout.
//!
//! Everything is deterministic in the seed: each asset's random stream is
//! derived from `(seed, asset index)` and each site's from `(seed, site index)`,
//! so the data do not depend on the order or thread of generation.
//!
//! ```
//! use telltale_datasets::{FleetParams, generate_asset, plan_fleet};
//! let params = FleetParams::small().check()?;
//! let plan = plan_fleet(&params);
//! assert!(plan.events.iter().all(|e| e.start >= plan.timeline.control.end));
//! let pump = generate_asset(&params, 0)?;
//! assert_eq!(pump.sensors.len(), 10);
//! # Ok::<(), telltale_datasets::Error>(())
//! ```
//!
//! Presets, measured with `cargo run --release --example generate_fleet`
//! (2 shared cores, load about 5, writing Parquet included):
//!
//! | preset        | assets | days | interval | rows        | time   | rows/s | peak RSS |
//! |---------------|--------|------|----------|-------------|--------|--------|----------|
//! | `small()`     | 24     | 5    | 5 min    | 0.35 M      | 0.07 s | 4.8 M  | 13 MB    |
//! | `demo()`      | 30     | 84   | 1 min    | 36.3 M      | 7-9 s  | 4-5 M  | 87 MB    |
//! | `benchmark()` | 1,000  | 7    | 1 min    | 100.7 M     | 24 s   | 4.2 M  | 25 MB    |
//!
//! The demo keeps 1-minute samples over 12 weeks: generation stays well under
//! ten seconds; if fit and scan of 36 M rows prove too slow for the demo,
//! `FleetParams::demo().sample_interval_s(120)` halves the rows with every
//! case and span unchanged (cases are placed as fractions of the event window).

mod error;
mod generate;
mod layout;
mod params;
pub mod plan;
mod seed;
mod simulate;

pub use error::{Error, FleetParamsError, Result};
pub use generate::{
    FleetSummary, HISTORY_FILE, REGISTRY_FILE, generate_asset, generate_fleet,
    generate_planned_asset,
};
pub use layout::{AssetInfo, PumpGroup, Role, SensorInfo, sensor_infos, site_name};
pub use params::{FaultMix, FleetParams, FleetValidParams};
pub use plan::{Case, FleetPlan, Outage, TimeSpan, Timeline, plan_fleet};
pub use simulate::{AssetData, SensorSeries};

/// The fleet registry (DESIGN.md 4.2) for `params`, as TOML text.
pub fn registry_toml(params: &FleetValidParams) -> String {
    layout::registry_toml(&layout::assets(params.sites, params.pumps_per_site))
}
