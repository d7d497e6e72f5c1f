//! Gathering the report's data: two scans (this period and the one before),
//! then one pass over this period's history for the charts and the per-asset
//! figures. See the [module docs](super).

use super::{BAND_SIGMA, DEFAULT_PANEL_CAP, GAP_ROWS, MAIN_COLUMNS, PEER_COLUMNS, SPARK_FACTOR};
use crate::error::{Error, Result};
use crate::io::{AssetHistory, HistoryReader};
use crate::jobs::backtest::BacktestReport;
use crate::jobs::store::{Store, StoredBaseline, StoredRole};
use crate::jobs::{ScanReport, ScanSettings, run_scan};
use crate::record::{Class, Mode, Suspicion};
use crate::registry::Registry;
use rayon::prelude::*;
use serde::Serialize;
use std::collections::{BTreeMap, BTreeSet};
use std::path::PathBuf;
use std::time::Instant;
use telltale_models::baseline::{STOPPED, SensorSeries, align};
use telltale_models::downsample::{MinMax, coarsen, column_of, minmax_columns};

/// Settings of one report; build with [`ReportSettings::new`] and set the public fields.
#[derive(Debug, Clone)]
#[non_exhaustive]
pub struct ReportSettings {
    /// History file or directory.
    pub history: PathBuf,
    /// Optional fleet registry (groups, sites, criticality), as for the scan.
    pub registry: Option<PathBuf>,
    /// Baseline store.
    pub store: PathBuf,
    /// Start of the period, epoch ms, inclusive.
    pub from_ms: i64,
    /// End of the period, epoch ms, exclusive.
    pub to_ms: i64,
    /// Panels drawn (the top of the ranked list).
    pub panel_cap: usize,
    /// Optional backtest output directory (its `summary.json`).
    pub backtest: Option<PathBuf>,
    /// Skip unreadable history files.
    pub skip_bad_files: bool,
    /// Threads (`0`: the available cores).
    pub threads: usize,
}

impl ReportSettings {
    /// Default settings for a period.
    pub fn new(
        history: impl Into<PathBuf>,
        store: impl Into<PathBuf>,
        from_ms: i64,
        to_ms: i64,
    ) -> Self {
        ReportSettings {
            history: history.into(),
            registry: None,
            store: store.into(),
            from_ms,
            to_ms,
            panel_cap: DEFAULT_PANEL_CAP,
            backtest: None,
            skip_bad_files: false,
            threads: 0,
        }
    }

    fn scan(&self, from_ms: i64, to_ms: i64) -> ScanSettings {
        let mut s = ScanSettings::new(&self.history, &self.store, from_ms, to_ms);
        s.registry = self.registry.clone();
        s.skip_bad_files = self.skip_bad_files;
        s.threads = self.threads;
        s
    }
}

/// Where a suspicion stands against the previous period of the same length.
#[derive(Debug, Clone, Copy, PartialEq, Eq, Serialize)]
#[serde(rename_all = "snake_case")]
pub enum Status {
    /// Raised this period; nothing of the same asset, sensor, class and mode last period.
    New,
    /// Raised this period and last period (same asset, sensor, class and mode), or raised
    /// last period only while its sensors still sit outside their baseline band at the end
    /// of this period.
    Continuing,
    /// Raised last period only, and its sensors are back inside their baseline band over
    /// the last day of this period (at least 90 % of judged rows; an asset-level
    /// suspicion: every sensor of the asset).
    Closed,
}

impl Status {
    /// The word shown in the report.
    pub fn as_str(self) -> &'static str {
        match self {
            Status::New => "new",
            Status::Continuing => "continuing",
            Status::Closed => "closed",
        }
    }
}

/// One line of the ranked list.
#[derive(Debug, Clone, PartialEq, Serialize)]
pub struct Item {
    /// The scan's suspicion (rank, verdict, score, evidence).
    pub suspicion: Suspicion,
    /// New, continuing or closed.
    pub status: Status,
    /// Index into [`Report::panels`], when drawn.
    pub panel: Option<usize>,
}

/// One sensor's chart: min and max per column of its readings, the baseline
/// band and the peers' median.
#[derive(Debug, Clone, PartialEq, Serialize)]
pub struct SensorChart {
    /// Sensor id.
    pub sensor: String,
    /// Engineering unit, if registered.
    pub unit: Option<String>,
    /// Context or condition.
    pub role: &'static str,
    /// Start of the charted span (the period), ms.
    pub from_ms: i64,
    /// End (exclusive), ms.
    pub to_ms: i64,
    /// Min and max of the readings per column (`None`: no reading in the column).
    pub columns: Vec<Option<MinMax>>,
    /// Baseline band per column: location ± [`BAND_SIGMA`] × scale of the sensor's
    /// baseline in the column's majority regime (`None`: no regime or no baseline).
    pub band: Vec<Option<[f64; 2]>>,
    /// The peers' median per column of [`PEER_COLUMNS`] (each peer's mean per
    /// column, then the median across peers); empty without peers.
    pub peers: Vec<Option<f64>>,
    /// Peers that have this sensor.
    pub peer_assets: Vec<String>,
    /// Instrument range, if registered.
    pub range: Option<[f64; 2]>,
}

/// One suspicion's panel.
#[derive(Debug, Clone, PartialEq, Serialize)]
pub struct Panel {
    /// Suspicion id.
    pub id: String,
    /// Asset id.
    pub asset: String,
    /// The sensor drawn large.
    pub main: SensorChart,
    /// The asset's other sensors, small.
    pub neighbours: Vec<SensorChart>,
    /// Onset, ms.
    pub onset_ms: i64,
    /// Detection, ms.
    pub detected_ms: i64,
}

/// Share of an asset's grid rows in one operating regime.
#[derive(Debug, Clone, PartialEq, Serialize)]
pub struct RegimeShare {
    /// `stopped`, `regime 1`, ... or `no data`.
    pub regime: String,
    /// Share of the period's grid rows, 0..1.
    pub share: f64,
    /// Mean of each context sensor in the regime's rows (sensor, mean).
    pub context: Vec<(String, f64)>,
}

/// Share of a sensor's readings inside its registered normal band.
#[derive(Debug, Clone, Copy, PartialEq, Serialize)]
pub struct TimeInBand {
    /// The band `[lo, hi]`, sensor units.
    pub band: [f64; 2],
    /// Share of the running (not stopped) grid rows with a value that are inside it, 0..1.
    pub share: f64,
}

/// One sensor's data quality over the period.
#[derive(Debug, Clone, PartialEq, Serialize)]
pub struct SensorQuality {
    /// Sensor id.
    pub sensor: String,
    /// Share of grid rows with a reading, 0..1.
    pub coverage: f64,
    /// Runs of at least [`GAP_ROWS`] grid rows without a reading.
    pub gaps: usize,
    /// Hours in those runs.
    pub gap_hours: f64,
    /// Finite readings outside the instrument range.
    pub out_of_range: u64,
    /// Suspicions of mode `stuck` this period.
    pub stuck: usize,
    /// Time in the registered normal band, where one is given and the asset ran.
    pub in_band: Option<TimeInBand>,
}

/// One asset's figures.
#[derive(Debug, Clone, PartialEq, Serialize)]
pub struct AssetSummary {
    /// Asset id.
    pub asset: String,
    /// Group id.
    pub group: String,
    /// Site, if registered.
    pub site: Option<String>,
    /// Grid rows in the period.
    pub rows: usize,
    /// Grid step, ms.
    pub step_ms: i64,
    /// Mean over sensors of their coverage, 0..1.
    pub coverage: f64,
    /// Shares of time per regime.
    pub regimes: Vec<RegimeShare>,
    /// Per sensor.
    pub sensors: Vec<SensorQuality>,
    /// Suspicions this period.
    pub suspicions: usize,
}

/// Counts for the fleet at a glance.
#[derive(Debug, Clone, PartialEq, Serialize)]
pub struct FleetSummary {
    /// Assets with a baseline and history in the period.
    pub assets: usize,
    /// Assets with history but not judged, with the reason.
    pub skipped: Vec<(String, String)>,
    /// Sensors over those assets.
    pub sensors: usize,
    /// Readings in the period.
    pub readings: u64,
    /// Mean over asset-sensors of their coverage, 0..1.
    pub coverage: f64,
    /// Suspicions this period by class (vocabulary order).
    pub by_class: Vec<(Class, usize)>,
    /// New this period.
    pub new: usize,
    /// Continuing (this period's and last period's still out of band).
    pub continuing: usize,
    /// Last period's, back in band.
    pub closed: usize,
    /// Suspicions in the previous period.
    pub previous: usize,
}

/// The backtest figures shown when a backtest directory is given.
#[derive(Debug, Clone, PartialEq, Serialize)]
pub struct BacktestFigures {
    /// The directory read.
    pub dir: String,
    /// Its `summary.json`.
    pub report: BacktestReport,
}

/// Everything the report shows, as plain data.
#[derive(Debug, Clone, PartialEq, Serialize)]
pub struct Report {
    /// telltale version.
    pub telltale_version: &'static str,
    /// Start of the period, ms.
    pub from_ms: i64,
    /// End (exclusive), ms.
    pub to_ms: i64,
    /// Start of the previous period (same length), ms.
    pub previous_from_ms: i64,
    /// Fleet at a glance.
    pub fleet: FleetSummary,
    /// This period's suspicions, ranked.
    pub items: Vec<Item>,
    /// Last period's suspicions not raised again, by their previous rank.
    pub earlier: Vec<Item>,
    /// Panels, in rank order.
    pub panels: Vec<Panel>,
    /// Per asset, sorted by id.
    pub assets: Vec<AssetSummary>,
    /// Backtest figures, if a directory was given.
    pub backtest: Option<BacktestFigures>,
    /// Wall time of gathering, seconds.
    #[serde(skip)]
    pub seconds: f64,
}

/// The key under which two periods' suspicions are "the same kind".
fn kind(s: &Suspicion) -> (String, Option<String>, Class, Mode) {
    (s.asset.clone(), s.sensor.clone(), s.class, s.mode)
}

/// Least share of the last day's judged rows inside the baseline band for a
/// last-period suspicion to count as closed (common practice, no source).
const CLOSED_IN_BAND: f64 = 0.9;

/// The status of each current suspicion, and of each previous one not
/// raised again (its index in `previous` with its status); see [`Status`].
/// `back_in_band` says whether a previous suspicion's sensors sat inside
/// their band at the end of the current period.
fn statuses(
    current: &[Suspicion],
    previous: &[Suspicion],
    back_in_band: impl Fn(&Suspicion) -> bool,
) -> (Vec<Status>, Vec<(usize, Status)>) {
    let prev_kinds: BTreeSet<_> = previous.iter().map(kind).collect();
    let cur_kinds: BTreeSet<_> = current.iter().map(kind).collect();
    let now = current
        .iter()
        .map(|s| if prev_kinds.contains(&kind(s)) { Status::Continuing } else { Status::New })
        .collect();
    let before = previous
        .iter()
        .enumerate()
        .filter(|(_, s)| !cur_kinds.contains(&kind(s)))
        .map(|(k, s)| (k, if back_in_band(s) { Status::Closed } else { Status::Continuing }))
        .collect();
    (now, before)
}

/// What one asset's pass gives.
struct Gathered {
    summary: AssetSummary,
    /// Per sensor id: mean per peer column.
    peer_means: BTreeMap<String, Vec<Option<f64>>>,
    /// Per sensor id: share of judged rows within the band over the last day (`None`: none judged).
    last_day_in_band: BTreeMap<String, Option<f64>>,
    /// Per sensor id, for panel assets: the full-width chart.
    charts: Vec<SensorChart>,
}

/// Band per column of `n`: the sensor's baseline in each column's majority regime.
fn band_columns(
    stored: &StoredBaseline,
    s: usize,
    regimes: &[Option<usize>],
    row_ms: &dyn Fn(usize) -> i64,
    from_ms: i64,
    to_ms: i64,
    n: usize,
) -> Vec<Option<[f64; 2]>> {
    let n_reg = stored.baseline.regimes.n_regimes() + 1;
    let mut votes = vec![vec![0u32; n_reg]; n];
    for (r, g) in regimes.iter().enumerate() {
        if let (Some(g), Some(c)) = (g, column_of(row_ms(r), from_ms, to_ms, n))
            && *g < n_reg
        {
            votes[c][*g] += 1;
        }
    }
    votes
        .iter()
        .map(|v| {
            let (g, &count) = v.iter().enumerate().max_by_key(|&(g, c)| (*c, usize::MAX - g))?;
            if count == 0 {
                return None;
            }
            stored
                .baseline
                .baseline_for(s, g)
                .map(|b| [b.location - BAND_SIGMA * b.scale, b.location + BAND_SIGMA * b.scale])
        })
        .collect()
}

fn gather_asset(
    stored: &StoredBaseline,
    history: &AssetHistory,
    from_ms: i64,
    to_ms: i64,
    chart: bool,
    stuck: &BTreeMap<(String, String), usize>,
    suspicions: usize,
) -> std::result::Result<Gathered, String> {
    let b = &stored.baseline;
    let empty = crate::io::SensorSeries::default();
    let raw: Vec<&crate::io::SensorSeries> =
        stored.sensors.iter().map(|st| history.sensor(&st.id).unwrap_or(&empty)).collect();
    let series: Vec<SensorSeries<'_>> = raw
        .iter()
        .zip(&b.sensors)
        .map(|(h, spec)| SensorSeries {
            ts_ms: &h.ts_ms,
            values: &h.value,
            good: &h.good,
            spec: *spec,
        })
        .collect();
    let frame = align(&series, b.step_ms, Some(from_ms), Some(to_ms), b.params.reduce())
        .map_err(|e| e.to_string())?;
    let n = frame.n_rows();
    let p = stored.sensors.len();
    let regimes: Vec<Option<usize>> = (0..n)
        .map(|r| {
            let row = frame.values.row(r);
            if row.iter().all(|v| !v.is_finite()) { None } else { b.regimes.classify(row) }
        })
        .collect();
    // regime shares, with the context sensors' means per regime
    let ctx: Vec<usize> = b.regimes.context_sensors().to_vec();
    // regime → (rows, per context sensor (sum, count))
    type Tally = (usize, Vec<(f64, usize)>);
    let mut by_regime: BTreeMap<Option<usize>, Tally> = BTreeMap::new();
    for (r, g) in regimes.iter().enumerate() {
        let e = by_regime.entry(*g).or_insert_with(|| (0, vec![(0.0, 0); ctx.len()]));
        e.0 += 1;
        for (k, &j) in ctx.iter().enumerate() {
            let v = frame.values[[r, j]];
            if v.is_finite() {
                e.1[k].0 += v;
                e.1[k].1 += 1;
            }
        }
    }
    let regime_shares: Vec<RegimeShare> = by_regime
        .iter()
        .map(|(g, (count, sums))| RegimeShare {
            regime: match g {
                None => "no data".to_owned(),
                Some(g) if *g == STOPPED => "stopped".to_owned(),
                Some(g) => format!("regime {g}"),
            },
            share: *count as f64 / n.max(1) as f64,
            context: if g.is_some() {
                ctx.iter()
                    .zip(sums)
                    .filter(|(_, (_, c))| *c > 0)
                    .map(|(&j, (s, c))| (stored.sensors[j].id.clone(), s / *c as f64))
                    .collect()
            } else {
                Vec::new()
            },
        })
        .collect();
    let day_from = (to_ms - 86_400_000).max(from_ms);
    let mut sensors = Vec::with_capacity(p);
    let mut peer_means = BTreeMap::new();
    let mut last_day_in_band = BTreeMap::new();
    let mut charts = Vec::new();
    for (s, st) in stored.sensors.iter().enumerate() {
        let col = frame.values.column(s);
        let with_value = col.iter().filter(|v| v.is_finite()).count();
        let mut gaps = 0;
        let mut gap_rows = 0;
        let mut run = 0;
        for v in col.iter().chain(std::iter::once(&0.0)) {
            if v.is_finite() {
                if run >= GAP_ROWS {
                    gaps += 1;
                    gap_rows += run;
                }
                run = 0;
            } else {
                run += 1;
            }
        }
        let h = raw[s];
        let out_of_range = st.range.map_or(0, |[lo, hi]| {
            h.ts_ms
                .iter()
                .zip(&h.value)
                .filter(|&(&t, &v)| {
                    t >= from_ms && t < to_ms && v.is_finite() && (v < lo || v > hi)
                })
                .count() as u64
        });
        // the normal band is for the running machine: stopped rows are left out
        let in_band = st.band.and_then(|[lo, hi]| {
            let running = col
                .iter()
                .zip(&regimes)
                .filter(|&(v, g)| v.is_finite() && g.is_some_and(|g| g != STOPPED));
            let (n_run, inside) = running.fold((0usize, 0usize), |(n, k), (&v, _)| {
                (n + 1, k + usize::from(v >= lo && v <= hi))
            });
            (n_run > 0).then(|| TimeInBand { band: [lo, hi], share: inside as f64 / n_run as f64 })
        });
        sensors.push(SensorQuality {
            sensor: st.id.clone(),
            coverage: with_value as f64 / n.max(1) as f64,
            gaps,
            gap_hours: (gap_rows as i64 * b.step_ms) as f64 / 3_600_000.0,
            out_of_range,
            stuck: stuck.get(&(stored.asset.clone(), st.id.clone())).copied().unwrap_or(0),
            in_band,
        });
        // the last day against the baseline band (for "closed")
        let (mut judged, mut inside) = (0usize, 0usize);
        for r in 0..n {
            if frame.row_start_ms(r) < day_from {
                continue;
            }
            let v = col[r];
            if let (Some(g), true) = (regimes[r], v.is_finite())
                && let Some(bl) = b.baseline_for(s, g)
            {
                judged += 1;
                if bl.z(v).abs() <= BAND_SIGMA {
                    inside += 1;
                }
            }
        }
        last_day_in_band.insert(st.id.clone(), (judged > 0).then(|| inside as f64 / judged as f64));
        // mean per peer column, from the raw finite readings
        let mut sums = vec![(0.0, 0usize); PEER_COLUMNS];
        for (&t, &v) in h.ts_ms.iter().zip(&h.value) {
            if v.is_finite()
                && let Some(c) = column_of(t, from_ms, to_ms, PEER_COLUMNS)
            {
                sums[c].0 += v;
                sums[c].1 += 1;
            }
        }
        peer_means.insert(
            st.id.clone(),
            sums.iter().map(|&(s, c)| (c > 0).then(|| s / c as f64)).collect(),
        );
        if chart {
            let row_ms = |r: usize| frame.row_start_ms(r);
            charts.push(SensorChart {
                sensor: st.id.clone(),
                unit: st.unit.clone(),
                role: match st.role {
                    StoredRole::Context => "context",
                    StoredRole::Condition => "condition",
                },
                from_ms,
                to_ms,
                columns: minmax_columns(&h.ts_ms, &h.value, from_ms, to_ms, MAIN_COLUMNS),
                band: band_columns(stored, s, &regimes, &row_ms, from_ms, to_ms, MAIN_COLUMNS),
                peers: Vec::new(),
                peer_assets: Vec::new(),
                range: st.range,
            });
        }
    }
    let coverage = sensors.iter().map(|q| q.coverage).sum::<f64>() / p.max(1) as f64;
    Ok(Gathered {
        summary: AssetSummary {
            asset: stored.asset.clone(),
            group: stored.group.clone(),
            site: stored.site.clone(),
            rows: n,
            step_ms: b.step_ms,
            coverage,
            regimes: regime_shares,
            sensors,
            suspicions,
        },
        peer_means,
        last_day_in_band,
        charts,
    })
}

/// A small copy of a full-width chart for a neighbouring sensor.
fn spark(c: &SensorChart) -> SensorChart {
    let mut out = c.clone();
    out.columns = coarsen(&c.columns, SPARK_FACTOR);
    // the band of a joined column: the widest of its columns' bands
    out.band = c
        .band
        .chunks(SPARK_FACTOR)
        .map(|ch| {
            ch.iter().flatten().fold(None, |acc: Option<[f64; 2]>, b| match acc {
                None => Some(*b),
                Some(a) => Some([a[0].min(b[0]), a[1].max(b[1])]),
            })
        })
        .collect();
    out
}

fn median(v: &mut [f64]) -> Option<f64> {
    if v.is_empty() {
        return None;
    }
    v.sort_by(f64::total_cmp);
    let m = v.len() / 2;
    Some(if v.len() % 2 == 1 { v[m] } else { 0.5 * (v[m - 1] + v[m]) })
}

/// The sensor a panel draws large: the suspicion's sensor; for an
/// asset-level suspicion the first of the asset's sensors its summary names,
/// else its first condition sensor (a display choice, not a judgement).
fn main_sensor(s: &Suspicion, charts: &[SensorChart]) -> Option<usize> {
    if let Some(id) = &s.sensor {
        return charts.iter().position(|c| &c.sensor == id);
    }
    // position of the first whole-word mention of the sensor id
    let named = |c: &SensorChart| -> Option<usize> {
        if c.sensor.is_empty() {
            return None;
        }
        let word = |c: Option<char>| c.is_some_and(|c| c.is_alphanumeric() || c == '_' || c == '-');
        s.summary.match_indices(c.sensor.as_str()).map(|(i, _)| i).find(|&i| {
            let before = s.summary[..i].chars().next_back();
            let after = s.summary[i + c.sensor.len()..].chars().next();
            !word(before) && !word(after)
        })
    };
    charts
        .iter()
        .enumerate()
        .filter_map(|(i, c)| named(c).map(|pos| (pos, i)))
        .min()
        .map(|(_, i)| i)
        .or_else(|| charts.iter().position(|c| c.role == "condition"))
        .or(if charts.is_empty() { None } else { Some(0) })
}

/// Reads a backtest output directory's `summary.json`.
///
/// # Errors
/// [`Error::BadInput`] naming the file when it is missing or not a backtest summary.
pub fn read_backtest(dir: &std::path::Path) -> Result<BacktestFigures> {
    let path = dir.join(crate::jobs::backtest::OUTPUT_FILES[0]);
    let text = std::fs::read_to_string(&path).map_err(|e| {
        Error::bad_input(
            &path,
            format!("cannot read the backtest summary ({e}); give the --out folder of `telltale backtest`"),
        )
    })?;
    let report: BacktestReport = serde_json::from_str(&text).map_err(|e| {
        Error::bad_input(
            &path,
            format!("not a backtest summary: {e}; re-run `telltale backtest` with this telltale"),
        )
    })?;
    Ok(BacktestFigures { dir: dir.display().to_string(), report })
}

/// Gathers the report; see the [module docs](super).
///
/// # Errors
/// Those of [`run_scan`] (bad span, store or history), an unreadable
/// backtest directory, and history reading errors.
pub fn run_report(settings: &ReportSettings) -> Result<Report> {
    let started = Instant::now();
    // read the backtest first: a bad directory fails before the long part
    let backtest = settings.backtest.as_deref().map(read_backtest).transpose()?;
    let (from, to) = (settings.from_ms, settings.to_ms);
    let len = to - from;
    let current: ScanReport = run_scan(&settings.scan(from, to))?;
    let prev_from = from.saturating_sub(len.max(0));
    let previous: ScanReport = run_scan(&settings.scan(prev_from, from))?;
    let registry = settings.registry.as_ref().map(Registry::load).transpose()?;
    let store = Store::open(&settings.store)?;
    let listed = store.list()?;

    let panel_ids: Vec<&Suspicion> = current.suspicions.iter().take(settings.panel_cap).collect();
    let panel_assets: BTreeSet<&str> = panel_ids.iter().map(|s| s.asset.as_str()).collect();
    let mut stuck: BTreeMap<(String, String), usize> = BTreeMap::new();
    let mut per_asset: BTreeMap<&str, usize> = BTreeMap::new();
    for s in &current.suspicions {
        *per_asset.entry(s.asset.as_str()).or_default() += 1;
        if s.mode == Mode::Stuck
            && let Some(sensor) = &s.sensor
        {
            *stuck.entry((s.asset.clone(), sensor.clone())).or_default() += 1;
        }
    }

    let threads = if settings.threads > 0 {
        settings.threads
    } else {
        std::thread::available_parallelism().map_or(1, usize::from)
    };
    let pool = rayon::ThreadPoolBuilder::new()
        .num_threads(threads)
        .thread_name(|i| format!("telltale-report-{i}"))
        .build()
        .map_err(|e| Error::io(&settings.store, std::io::Error::other(e)))?;
    let reader = HistoryReader::try_new(&settings.history)?
        .with_time_range(from, to)
        .with_skip_bad_files(settings.skip_bad_files);
    let mut gathered: Vec<Gathered> = Vec::new();
    let mut batch: Vec<(AssetHistory, StoredBaseline)> = Vec::new();
    let cap = 2 * threads;
    let flush = |batch: &mut Vec<(AssetHistory, StoredBaseline)>, out: &mut Vec<Gathered>| {
        let res: Vec<(String, std::result::Result<Gathered, String>)> = pool.install(|| {
            batch
                .par_drain(..)
                .map(|(h, b)| {
                    let chart = panel_assets.contains(h.asset.as_str());
                    let n = per_asset.get(h.asset.as_str()).copied().unwrap_or(0);
                    (h.asset.clone(), gather_asset(&b, &h, from, to, chart, &stuck, n))
                })
                .collect()
        });
        for (a, r) in res {
            match r {
                Ok(g) => out.push(g),
                Err(reason) => tracing::warn!(asset = %a, %reason, "asset left out of the report"),
            }
        }
    };
    let summary = reader.for_each_asset(|history| -> Result<()> {
        if listed.binary_search(&history.asset).is_err() {
            return Ok(());
        }
        let mut stored = store.read_baseline(&history.asset)?;
        if let Some(r) = registry.as_ref()
            && let Some(a) = r.asset(&history.asset)
        {
            stored.group = a.group.clone();
            stored.site = a.site.clone();
            stored.criticality = a.criticality;
        }
        batch.push((history, stored));
        if batch.len() >= cap {
            flush(&mut batch, &mut gathered);
        }
        Ok(())
    })?;
    flush(&mut batch, &mut gathered);
    gathered.sort_by(|a, b| a.summary.asset.cmp(&b.summary.asset));
    let index: BTreeMap<&str, usize> =
        gathered.iter().enumerate().map(|(i, g)| (g.summary.asset.as_str(), i)).collect();

    // peers as the scan forms them: same site and group, else same site
    let peers_of = |i: usize| -> Vec<usize> {
        let me = &gathered[i].summary;
        let same = |j: usize, group: bool| {
            let o = &gathered[j].summary;
            j != i && o.site == me.site && (!group || o.group == me.group)
        };
        if me.site.is_none() && me.group == me.asset {
            return Vec::new();
        }
        let sg: Vec<usize> = (0..gathered.len()).filter(|&j| same(j, true)).collect();
        if sg.len() >= 2 || me.site.is_none() {
            sg
        } else {
            (0..gathered.len()).filter(|&j| same(j, false)).collect()
        }
    };

    // panels
    let mut panels: Vec<Panel> = Vec::new();
    let mut panel_of: BTreeMap<&str, usize> = BTreeMap::new();
    for s in &panel_ids {
        let Some(&i) = index.get(s.asset.as_str()) else { continue };
        let peers = peers_of(i);
        let mut charts = gathered[i].charts.clone();
        for c in &mut charts {
            let with: Vec<&Vec<Option<f64>>> =
                peers.iter().filter_map(|&j| gathered[j].peer_means.get(&c.sensor)).collect();
            c.peer_assets = peers
                .iter()
                .filter(|&&j| gathered[j].peer_means.contains_key(&c.sensor))
                .map(|&j| gathered[j].summary.asset.clone())
                .collect();
            if !with.is_empty() {
                c.peers = (0..PEER_COLUMNS)
                    .map(|k| {
                        let mut v: Vec<f64> = with.iter().filter_map(|m| m[k]).collect();
                        median(&mut v)
                    })
                    .collect();
            }
        }
        let Some(m) = main_sensor(s, &charts) else { continue };
        let main = charts[m].clone();
        let neighbours: Vec<SensorChart> =
            charts.iter().enumerate().filter(|&(k, _)| k != m).map(|(_, c)| spark(c)).collect();
        panel_of.insert(s.id.as_str(), panels.len());
        panels.push(Panel {
            id: s.id.clone(),
            asset: s.asset.clone(),
            main,
            neighbours,
            onset_ms: s.onset.timestamp_millis(),
            detected_ms: s.detected.timestamp_millis(),
        });
    }

    // new / continuing / closed
    let back_in_band = |s: &Suspicion| {
        index.get(s.asset.as_str()).is_none_or(|&i| {
            let g = &gathered[i];
            let shares: Vec<Option<f64>> = match &s.sensor {
                Some(id) => vec![g.last_day_in_band.get(id).copied().flatten()],
                None => g.last_day_in_band.values().copied().collect(),
            };
            shares.iter().flatten().all(|&x| x >= CLOSED_IN_BAND)
        })
    };
    let (now, before) = statuses(&current.suspicions, &previous.suspicions, back_in_band);
    let items: Vec<Item> = current
        .suspicions
        .iter()
        .zip(now)
        .map(|(s, status)| Item {
            suspicion: s.clone(),
            status,
            panel: panel_of.get(s.id.as_str()).copied(),
        })
        .collect();
    let earlier: Vec<Item> = before
        .into_iter()
        .map(|(k, status)| Item { suspicion: previous.suspicions[k].clone(), status, panel: None })
        .collect();

    let by_class: Vec<(Class, usize)> =
        [Class::EquipmentFault, Class::SensorFault, Class::ProcessChange]
            .iter()
            .map(|&c| (c, current.suspicions.iter().filter(|s| s.class == c).count()))
            .collect();
    let count = |v: &[Item], st: Status| v.iter().filter(|i| i.status == st).count();
    let sensors: usize = gathered.iter().map(|g| g.summary.sensors.len()).sum();
    let coverage = if sensors == 0 {
        0.0
    } else {
        gathered.iter().flat_map(|g| g.summary.sensors.iter().map(|q| q.coverage)).sum::<f64>()
            / sensors as f64
    };
    let fleet = FleetSummary {
        assets: gathered.len(),
        skipped: current.assets_skipped.clone(),
        sensors,
        readings: summary.rows_in_range,
        coverage,
        by_class,
        new: count(&items, Status::New),
        continuing: count(&items, Status::Continuing) + count(&earlier, Status::Continuing),
        closed: count(&earlier, Status::Closed),
        previous: previous.suspicions.len(),
    };
    Ok(Report {
        telltale_version: crate::jobs::store::TELLTALE_VERSION,
        from_ms: from,
        to_ms: to,
        previous_from_ms: prev_from,
        fleet,
        items,
        earlier,
        panels,
        assets: gathered.into_iter().map(|g| g.summary).collect(),
        backtest,
        seconds: started.elapsed().as_secs_f64(),
    })
}

#[cfg(test)]
mod tests {
    use super::*;

    fn sus(asset: &str, sensor: Option<&str>, mode: Mode, onset_h: i64) -> Suspicion {
        let onset = crate::time::from_millis(1_778_025_600_000 + onset_h * 3_600_000);
        Suspicion {
            id: crate::record::suspicion_id(asset, sensor, mode.class(), mode, onset),
            rank: 1,
            asset: asset.to_owned(),
            sensor: sensor.map(str::to_owned),
            class: mode.class(),
            mode,
            score: 0.9,
            magnitude: 3.0,
            onset,
            detected: onset,
            summary: String::new(),
            evidence: Vec::new(),
        }
    }

    #[test]
    fn statuses_follow_asset_sensor_class_and_mode_not_the_onset() {
        let previous = vec![
            sus("north-b1", Some("flow"), Mode::Bias, -30), // raised again (new onset): continuing
            sus("north-b2", Some("flow"), Mode::Stuck, -20), // not again, back in band: closed
            sus("north-b3", None, Mode::Degradation, -10),  // not again, still out: continuing
        ];
        let current = vec![
            sus("north-b1", Some("flow"), Mode::Bias, 5),
            sus("north-b2", Some("flow"), Mode::Drift, 6), // another mode: new
            sus("north-b4", Some("speed"), Mode::Bias, 7),
        ];
        let (now, before) = statuses(&current, &previous, |s| s.asset == "north-b2");
        assert_eq!(now, vec![Status::Continuing, Status::New, Status::New]);
        assert_eq!(before, vec![(1, Status::Closed), (2, Status::Continuing)]);
    }

    fn chart(sensor: &str, role: &'static str) -> SensorChart {
        SensorChart {
            sensor: sensor.to_owned(),
            unit: None,
            role,
            from_ms: 0,
            to_ms: 1,
            columns: Vec::new(),
            band: Vec::new(),
            peers: Vec::new(),
            peer_assets: Vec::new(),
            range: None,
        }
    }

    #[test]
    fn an_asset_level_panel_draws_the_first_sensor_its_summary_names_as_a_word() {
        let charts = [
            chart("speed", "context"),
            chart("flow", "context"),
            chart("bearing_de_temp", "condition"),
            chart("winding_temp", "condition"),
        ];
        let mut s = sus("north-b1", None, Mode::Degradation, 0);
        // "overflow" is not "flow"; "bearing_de_temp" comes before "winding_temp"
        s.summary = "north-b1 overflow: bearing_de_temp, winding_temp moving together".into();
        assert_eq!(main_sensor(&s, &charts), Some(2));
        s.summary = "north-b1: winding_temp and flow".into();
        assert_eq!(main_sensor(&s, &charts), Some(3));
        // none named: the first condition sensor
        s.summary = "north-b1 changed".into();
        assert_eq!(main_sensor(&s, &charts), Some(2));
        // a sensor-level suspicion draws its own sensor
        let t = sus("north-b1", Some("flow"), Mode::Bias, 0);
        assert_eq!(main_sensor(&t, &charts), Some(1));
    }

    #[test]
    fn median_of_even_and_odd_counts() {
        assert_eq!(median(&mut [3.0, 1.0, 2.0]), Some(2.0));
        assert_eq!(median(&mut [4.0, 1.0, 2.0, 3.0]), Some(2.5));
        assert_eq!(median(&mut []), None);
    }
}
