//! Reading long-format history (DESIGN.md 4.1) one asset at a time.
//!
//! The reader never holds the whole fleet. It plans the read from the Parquet
//! footers, then either streams row groups in file order and hands an asset
//! out as soon as the last row group that may hold it has been read, or, when
//! the rows are shuffled so that every asset is spread over the whole input,
//! partitions the rows by asset into temporary spill files first.
//!
//! ```text
//!  files (byte-sorted paths)     row groups              footers only
//!  a/p=1/x.parquet ─┬─ rg0 [ts 00..06) asset [b1..b1] ─┐
//!                   └─ rg1 [ts 06..12) asset [b1..b3]  ├─► prune by ts min/max vs [from, until)
//!  a/p=2/y.parquet ─── rg2 [ts 00..12) asset [b3..r2] ─┘   asset index: stats or asset column
//!
//!  plan: peak buffered rows ≤ budget? ──yes──► STREAM         no ──► SPILL
//!
//!  STREAM   decode rg0 rg1 (rayon) ─► per-asset buffers ─► b1 complete after rg1 ─► f(b1)
//!           decode rg2 ...          ─► b3 complete after rg2, r2 ...              ─► f(b3), f(r2)
//!
//!  SPILL    pass 1: every row ─► bucket (asset id mod N) file, rows kept in input order
//!           pass 2: bucket k ─► per-asset buffers ─► f(each asset of bucket k)
//! ```
//!
//! Each emitted [`AssetHistory`] holds one series per sensor, sorted by time,
//! with duplicate `(asset, sensor, ts)` rows reduced to the last one in input
//! order (file path order, then row order). Readings are epoch milliseconds;
//! sub-millisecond precision is truncated toward the earlier millisecond.
//! Memory is bounded by the rows of the assets that are "open" at a time
//! (the planner checks that bound against [`HistoryReader::with_memory_budget`]
//! before it chooses to stream) plus a few decoded row groups in flight.
//!
//! The callback of [`HistoryReader::for_each_asset`] always runs on the
//! calling thread, one asset at a time, while a producer thread decodes the
//! following row groups in parallel with rayon.

use super::schema::{self, Columns, LocalDict, TsError, TsKind};
use crate::error::{Error, Result};
use arrow_array::RecordBatch;
use parquet::arrow::ProjectionMask;
use parquet::arrow::arrow_reader::{
    ArrowReaderMetadata, ArrowReaderOptions, ParquetRecordBatchReaderBuilder,
};
use parquet::basic::{ConvertedType, LogicalType, TimeUnit as PqUnit};
use parquet::file::statistics::Statistics;
use rayon::prelude::*;
use std::collections::HashMap;
use std::fs::File;
use std::io::{BufReader, BufWriter, Read, Write};
use std::path::{Path, PathBuf};
use std::sync::mpsc;

/// Bytes of memory one buffered reading costs (ts, value, good, vector slack).
const BYTES_PER_ROW: usize = 24;
/// Bytes of one spilled reading: asset u32, sensor u32, ts i64, value f64, good u8.
const SPILL_ROW: usize = 25;

/// How [`HistoryReader::for_each_asset`] lays out its work.
#[derive(Debug, Clone, Copy, PartialEq, Eq, Default)]
#[non_exhaustive]
pub enum ReadStrategy {
    /// Stream when the assets are clustered enough to fit the memory budget, else spill.
    #[default]
    Auto,
    /// Always stream (memory may exceed the budget on shuffled input).
    Stream,
    /// Always partition through spill files.
    Spill,
}

/// Where the streaming plan learnt which row groups hold which assets.
#[derive(Debug, Clone, Copy, PartialEq, Eq)]
#[non_exhaustive]
pub enum AssetIndex {
    /// No index needed: all selected rows fit the budget, assets are handed out at the end.
    None,
    /// The `asset` column's row-group min/max statistics.
    Statistics,
    /// A first pass that decoded only the `asset` column.
    Decoded,
}

/// The plan [`HistoryReader::for_each_asset`] followed.
#[derive(Debug, Clone, Copy, PartialEq, Eq)]
#[non_exhaustive]
pub enum ReadPlan {
    /// Row groups streamed in order; assets emitted when complete.
    Stream {
        /// How completeness was known.
        index: AssetIndex,
    },
    /// Rows partitioned by asset into this many temporary files, then read bucket by bucket.
    Spill {
        /// Number of spill files.
        buckets: usize,
    },
}

/// A file (or one row group of it) that could not be read, with the reason.
#[derive(Debug, Clone, PartialEq, Eq)]
pub struct BadFile {
    /// The file.
    pub path: PathBuf,
    /// What is wrong, and where.
    pub reason: String,
}

/// One sensor's readings of one asset, sorted by time, one reading per time.
#[derive(Debug, Clone, PartialEq, Default)]
pub struct SensorSeries {
    /// Sensor id.
    pub sensor: String,
    /// Reading times, epoch milliseconds UTC, strictly increasing.
    pub ts_ms: Vec<i64>,
    /// Values; NaN is a missing reading (null or NaN in the file).
    pub value: Vec<f64>,
    /// `false` where the `quality` column said uncertain/bad (or non-zero); all
    /// `true` without a quality column. Non-good readings stay in the series so
    /// that jobs can decide; baselines exclude them.
    pub good: Vec<bool>,
}

impl SensorSeries {
    /// Number of readings.
    pub fn len(&self) -> usize {
        self.ts_ms.len()
    }

    /// Whether there are no readings.
    pub fn is_empty(&self) -> bool {
        self.ts_ms.is_empty()
    }

    /// Whether reading `i` is usable for a baseline: good quality and not missing.
    pub fn is_usable(&self, i: usize) -> bool {
        self.good[i] && !self.value[i].is_nan()
    }
}

/// All readings of one asset within the time range, sensors sorted by id.
#[derive(Debug, Clone, PartialEq, Default)]
pub struct AssetHistory {
    /// Asset id.
    pub asset: String,
    /// One series per sensor, sorted by sensor id.
    pub sensors: Vec<SensorSeries>,
}

impl AssetHistory {
    /// The series of `sensor`, if the asset has it.
    pub fn sensor(&self, sensor: &str) -> Option<&SensorSeries> {
        self.sensors
            .binary_search_by(|s| s.sensor.as_str().cmp(sensor))
            .ok()
            .map(|i| &self.sensors[i])
    }

    /// Readings over all sensors.
    pub fn rows(&self) -> usize {
        self.sensors.iter().map(SensorSeries::len).sum()
    }
}

/// What a read did: counts for logs and tests, and the files it had to skip.
#[derive(Debug, Clone, PartialEq)]
pub struct ReadSummary {
    /// Parquet files found.
    pub files: usize,
    /// Files or row groups skipped as unreadable (only with `with_skip_bad_files(true)`).
    pub bad_files: Vec<BadFile>,
    /// Row groups in the readable files.
    pub row_groups: usize,
    /// Row groups skipped because their `ts` statistics lie outside the time range.
    pub row_groups_pruned: usize,
    /// Row groups decoded.
    pub row_groups_read: usize,
    /// Rows decoded (before the time filter).
    pub rows_decoded: u64,
    /// Rows inside the time range.
    pub rows_in_range: u64,
    /// Rows dropped as earlier duplicates of the same (asset, sensor, ts).
    pub duplicates_dropped: u64,
    /// Assets handed out, sorted.
    pub assets: Vec<String>,
    /// The plan followed.
    pub plan: ReadPlan,
    /// Largest number of readings buffered at once (streaming) or in one bucket (spill).
    pub peak_buffered_rows: u64,
}

/// One sensor in an [`Inventory`].
#[derive(Debug, Clone, PartialEq, Eq)]
pub struct SensorInventory {
    /// Sensor id.
    pub sensor: String,
    /// Rows (duplicates included) inside the time range.
    pub rows: u64,
    /// Earliest reading, epoch ms.
    pub first_ms: i64,
    /// Latest reading, epoch ms.
    pub last_ms: i64,
}

/// One asset in an [`Inventory`].
#[derive(Debug, Clone, PartialEq, Eq)]
pub struct AssetInventory {
    /// Asset id.
    pub asset: String,
    /// Sensors, sorted by id.
    pub sensors: Vec<SensorInventory>,
}

/// What a history holds, from the id and time columns only (no values decoded).
#[derive(Debug, Clone, PartialEq, Eq)]
pub struct Inventory {
    /// Assets, sorted by id.
    pub assets: Vec<AssetInventory>,
    /// Rows (duplicates included) inside the time range.
    pub rows: u64,
    /// Earliest reading, epoch ms (`None` without rows).
    pub first_ms: Option<i64>,
    /// Latest reading, epoch ms.
    pub last_ms: Option<i64>,
    /// Parquet files found.
    pub files: usize,
    /// Files or row groups skipped as unreadable.
    pub bad_files: Vec<BadFile>,
}

impl Inventory {
    /// Asset ids, sorted.
    pub fn asset_ids(&self) -> Vec<&str> {
        self.assets.iter().map(|a| a.asset.as_str()).collect()
    }
}

/// Reader of a history file or directory tree; see the [module docs](self).
///
/// ```no_run
/// use telltale_pipelines::io::HistoryReader;
/// let summary = HistoryReader::try_new("history/")?
///     .with_time_range(1_767_225_600_000, 1_769_904_000_000)
///     .with_skip_bad_files(false)
///     .for_each_asset(|a| {
///         println!("{}: {} readings", a.asset, a.rows());
///         Ok::<(), telltale_pipelines::Error>(())
///     })?;
/// eprintln!("{} rows in range", summary.rows_in_range);
/// # Ok::<(), telltale_pipelines::Error>(())
/// ```
#[derive(Debug, Clone)]
pub struct HistoryReader {
    root: PathBuf,
    files: Vec<PathBuf>,
    from_ms: i64,
    until_ms: i64,
    skip_bad_files: bool,
    batch_size: usize,
    memory_budget: usize,
    spill_dir: Option<PathBuf>,
    strategy: ReadStrategy,
}

impl HistoryReader {
    /// A reader of one Parquet file or of every `*.parquet` file under a
    /// directory (recursively; `key=value` folders are just folders; names
    /// starting with `.` or `_` are ignored). Files are read in the byte
    /// order of their paths.
    ///
    /// # Errors
    /// [`Error::Io`] if the path cannot be listed, [`Error::BadInput`] if it
    /// holds no Parquet file.
    pub fn try_new(path: impl AsRef<Path>) -> Result<Self> {
        let root = path.as_ref().to_path_buf();
        let meta = std::fs::metadata(&root).map_err(|e| {
            if e.kind() == std::io::ErrorKind::NotFound {
                // the user named a path that is not there: bad input (exit 2), not a failure
                Error::bad_input(&root, "no such file or directory; check the --history path")
            } else {
                Error::io(&root, e)
            }
        })?;
        let mut files = Vec::new();
        if meta.is_dir() {
            list_parquet(&root, &mut files)?;
            if files.is_empty() {
                return Err(Error::bad_input(
                    &root,
                    "no *.parquet files in this directory; point --history at a Parquet file or \
                     a folder of them",
                ));
            }
        } else {
            files.push(root.clone());
        }
        files
            .sort_by(|a, b| a.as_os_str().as_encoded_bytes().cmp(b.as_os_str().as_encoded_bytes()));
        Ok(Self {
            root,
            files,
            from_ms: i64::MIN,
            until_ms: i64::MAX,
            skip_bad_files: false,
            batch_size: 8192,
            memory_budget: 384 << 20,
            spill_dir: None,
            strategy: ReadStrategy::Auto,
        })
    }

    /// Keep readings with `from_ms <= ts < until_ms` (epoch ms). Default: everything.
    pub fn with_time_range(mut self, from_ms: i64, until_ms: i64) -> Self {
        self.from_ms = from_ms;
        self.until_ms = until_ms;
        self
    }

    /// Skip unreadable files (warning through `tracing` and listing them in
    /// the summary) instead of failing. Default `false`.
    pub fn with_skip_bad_files(mut self, skip: bool) -> Self {
        self.skip_bad_files = skip;
        self
    }

    /// Rows per decoded record batch (default 8192).
    pub fn with_batch_size(mut self, rows: usize) -> Self {
        self.batch_size = rows.max(1);
        self
    }

    /// Memory the reader may use for buffered readings (default 384 MiB).
    /// Streaming is chosen only when the open assets fit; spill buckets are
    /// sized to it.
    pub fn with_memory_budget(mut self, bytes: usize) -> Self {
        self.memory_budget = bytes.max(1 << 16);
        self
    }

    /// Directory for spill files (default: the system temporary directory).
    pub fn with_spill_dir(mut self, dir: impl Into<PathBuf>) -> Self {
        self.spill_dir = Some(dir.into());
        self
    }

    /// Force a plan (default [`ReadStrategy::Auto`]).
    pub fn with_strategy(mut self, strategy: ReadStrategy) -> Self {
        self.strategy = strategy;
        self
    }

    /// The Parquet files, in read order.
    pub fn files(&self) -> &[PathBuf] {
        &self.files
    }

    /// The path given to [`HistoryReader::try_new`].
    pub fn root(&self) -> &Path {
        &self.root
    }

    fn budget_rows(&self) -> u64 {
        (self.memory_budget / BYTES_PER_ROW) as u64
    }

    fn bad(&self, bad: &mut Vec<BadFile>, err: Error) -> Result<()> {
        if !self.skip_bad_files {
            return Err(err);
        }
        let (path, reason) = match &err {
            Error::Io { path, source } => (path.clone(), source.to_string()),
            Error::Parquet { path, source } | Error::ParquetWrite { path, source } => {
                (path.clone(), source.to_string())
            }
            Error::BadInput { path, message } => (path.clone(), message.clone()),
        };
        tracing::warn!(path = %path.display(), %reason, "skipping unreadable history");
        bad.push(BadFile { path, reason });
        Ok(())
    }

    /// Load every footer, check schemas and select row groups by time.
    fn open(&self) -> Result<Opened> {
        let opened: Vec<Result<OpenFile>> = self.files.par_iter().map(|p| open_file(p)).collect();
        let mut out = Opened::default();
        for r in opened {
            match r {
                Ok(f) => out.files.push(f),
                Err(e) => self.bad(&mut out.bad, e)?,
            }
        }
        for (fi, f) in out.files.iter().enumerate() {
            let md = f.meta.metadata();
            if md.file_metadata().num_rows() == 0 {
                tracing::warn!(path = %f.path.display(), "history file has no rows");
            }
            for rg in 0..md.num_row_groups() {
                out.total_rgs += 1;
                let g = md.row_group(rg);
                if let Some((lo, hi)) = ts_stats(f, rg)
                    && (hi < self.from_ms || lo >= self.until_ms)
                {
                    out.pruned += 1;
                    continue;
                }
                let asset_range = f.asset_leaf.and_then(|leaf| match g.column(leaf).statistics() {
                    Some(s @ Statistics::ByteArray(_)) if !s.is_min_max_deprecated() => {
                        match (s.min_bytes_opt(), s.max_bytes_opt()) {
                            (Some(a), Some(b)) => Some((a.to_vec(), b.to_vec())),
                            _ => None,
                        }
                    }
                    _ => None,
                });
                out.rgs.push(RgRef { file: fi, rg, rows: g.num_rows().max(0) as u64, asset_range });
            }
        }
        Ok(out)
    }

    /// Hand every asset's history in the time range to `f`, one asset at a
    /// time, on the calling thread. The order of assets is the order in which
    /// they become complete (sorted within one step); the summary lists them
    /// sorted. An error from `f` stops the read and is returned.
    ///
    /// # Errors
    /// A file that cannot be read (unless skipping), a bad value (null or
    /// implausible `ts`, unknown quality word, null id) naming file, row and
    /// column, a spill-file I/O error, or the callback's error.
    pub fn for_each_asset<F, E>(&self, mut f: F) -> std::result::Result<ReadSummary, E>
    where
        F: FnMut(AssetHistory) -> std::result::Result<(), E>,
        E: From<Error>,
    {
        let mut opened = self.open()?;
        let mut summary = ReadSummary {
            files: self.files.len(),
            bad_files: std::mem::take(&mut opened.bad),
            row_groups: opened.total_rgs,
            row_groups_pruned: opened.pruned,
            row_groups_read: 0,
            rows_decoded: 0,
            rows_in_range: 0,
            duplicates_dropped: 0,
            assets: Vec::new(),
            plan: ReadPlan::Stream { index: AssetIndex::None },
            peak_buffered_rows: 0,
        };
        let selected_rows: u64 = opened.rgs.iter().map(|r| r.rows).sum();
        let budget = self.budget_rows();
        let plan = match self.strategy {
            ReadStrategy::Spill => None,
            ReadStrategy::Stream | ReadStrategy::Auto if selected_rows <= budget => {
                Some(StreamIndex::AtEnd)
            }
            s => {
                let force = s == ReadStrategy::Stream;
                match stats_index(&opened.rgs) {
                    Some((idx, peak)) if force || peak <= budget => Some(idx),
                    _ => {
                        let (idx, peak) =
                            self.decoded_index(&mut opened, &mut summary.bad_files)?;
                        (force || peak <= budget).then_some(idx)
                    }
                }
            }
        };
        match plan {
            Some(index) => {
                summary.plan = ReadPlan::Stream { index: index.kind() };
                self.stream(&opened, &index, &mut summary, &mut f)?;
            }
            None => {
                let buckets = ((selected_rows as usize * SPILL_ROW) / self.memory_budget.max(1))
                    .saturating_mul(2)
                    .clamp(1, 4096);
                summary.plan = ReadPlan::Spill { buckets };
                self.spill(&opened, buckets, &mut summary, &mut f)?;
            }
        }
        summary.assets.sort();
        Ok(summary)
    }

    /// Decode the `asset` column of every selected row group to learn where each asset lives.
    fn decoded_index(
        &self,
        opened: &mut Opened,
        bad: &mut Vec<BadFile>,
    ) -> Result<(StreamIndex, u64)> {
        let results: Vec<Result<Vec<(String, u64)>>> = opened
            .rgs
            .par_iter()
            .map(|r| {
                let c = decode_rg(&opened.files, r, Want::AssetOnly, self)?;
                let mut counts = vec![0u64; c.assets.names.len()];
                for &a in &c.asset {
                    counts[a as usize] += 1;
                }
                Ok(c.assets.names.into_iter().zip(counts).filter(|(_, n)| *n > 0).collect())
            })
            .collect();
        let mut keep = Vec::with_capacity(opened.rgs.len());
        let mut per_rg = Vec::with_capacity(opened.rgs.len());
        for (r, res) in opened.rgs.drain(..).zip(results) {
            match res {
                Ok(v) => {
                    keep.push(r);
                    per_rg.push(v);
                }
                Err(e) => self.bad(bad, e)?,
            }
        }
        opened.rgs = keep;
        // first/last row group and rows of each asset
        let mut span: HashMap<String, (usize, usize, u64)> = HashMap::new();
        for (i, v) in per_rg.iter().enumerate() {
            for (name, n) in v {
                let e = span.entry(name.clone()).or_insert((i, i, 0));
                e.1 = i;
                e.2 += n;
            }
        }
        let mut diff = vec![0i128; per_rg.len() + 1];
        for &(first, last, n) in span.values() {
            diff[first] += i128::from(n);
            diff[last + 1] -= i128::from(n);
        }
        let peak = running_max(&diff);
        let last = span.into_iter().map(|(k, (_, l, _))| (k, l)).collect();
        Ok((StreamIndex::Decoded(last), peak))
    }

    fn stream<F, E>(
        &self,
        opened: &Opened,
        index: &StreamIndex,
        summary: &mut ReadSummary,
        f: &mut F,
    ) -> std::result::Result<(), E>
    where
        F: FnMut(AssetHistory) -> std::result::Result<(), E>,
        E: From<Error>,
    {
        let mut state = Buffers::default();
        let mut last_of: Vec<usize> = Vec::new(); // per global asset id
        let mut done: Vec<bool> = Vec::new();
        let mut by_last: Vec<Vec<u32>> = vec![Vec::new(); opened.rgs.len() + 1];
        let n = opened.rgs.len();
        let mut result: std::result::Result<(), E> = Ok(());
        let produced = self.produce(opened, Want::All, |k, msg| {
            let chunk = match msg {
                Msg::Chunk(c) => c,
                Msg::Bad(e) => {
                    self.bad(&mut summary.bad_files, e)?;
                    return release(k, &mut by_last, &mut state, summary, f, &mut result);
                }
            };
            summary.row_groups_read += 1;
            summary.rows_decoded += chunk.rows_decoded;
            summary.rows_in_range += chunk.ts.len() as u64;
            let (amap, smap) = state.globalize(&chunk);
            for (local, &g) in amap.iter().enumerate() {
                let g = g as usize;
                if g >= last_of.len() {
                    last_of.resize(g + 1, usize::MAX);
                    done.resize(g + 1, false);
                }
                if last_of[g] == usize::MAX {
                    let name = &chunk.assets.names[local];
                    let l = match index {
                        StreamIndex::AtEnd => n,
                        StreamIndex::Statistics => last_candidate(&opened.rgs, k, name.as_bytes()),
                        StreamIndex::Decoded(m) => m.get(name).copied().unwrap_or(k).max(k),
                    };
                    last_of[g] = l;
                    by_last[l].push(g as u32);
                }
            }
            for &a in &chunk.asset {
                if done[amap[a as usize] as usize] {
                    let name = &chunk.assets.names[a as usize];
                    return Err(Error::bad_input(
                        &opened.files[chunk.file].path,
                        format!(
                            "row group {}: asset {name:?} appears after the row-group statistics \
                             said it could not; the file's statistics are wrong, rewrite it",
                            chunk.rg
                        ),
                    ));
                }
            }
            state.append(&chunk, &amap, &smap);
            summary.peak_buffered_rows = summary.peak_buffered_rows.max(state.rows);
            for &g in &by_last[k] {
                done[g as usize] = true;
            }
            release(k, &mut by_last, &mut state, summary, f, &mut result)
        });
        // the callback's own error first: `produced` then only says "stopped"
        result?;
        produced.map_err(E::from)?;
        // whatever is left (index AtEnd, or skipped row groups)
        let mut rest: Vec<u32> = by_last.iter_mut().flat_map(std::mem::take).collect();
        rest.sort_by(|a, b| state.asset_names[*a as usize].cmp(&state.asset_names[*b as usize]));
        for g in rest {
            if let Some(a) = state.take(g, summary) {
                summary.assets.push(a.asset.clone());
                f(a)?;
            }
        }
        Ok(())
    }

    /// Decode the selected row groups in order on a producer thread (rayon
    /// inside), calling `sink(k, chunk)` on this thread in row-group order.
    fn produce(
        &self,
        opened: &Opened,
        want: Want,
        mut sink: impl FnMut(usize, Msg) -> Result<()>,
    ) -> Result<()> {
        let window = rayon::current_num_threads().max(2);
        let (tx, rx) = mpsc::sync_channel::<(usize, Msg)>(window);
        std::thread::scope(|s| {
            s.spawn(move || {
                for (w, group) in opened.rgs.chunks(window).enumerate() {
                    let decoded: Vec<Result<Chunk>> =
                        group.par_iter().map(|r| decode_rg(&opened.files, r, want, self)).collect();
                    for (i, d) in decoded.into_iter().enumerate() {
                        let msg = match d {
                            Ok(c) => Msg::Chunk(Box::new(c)),
                            Err(e) => Msg::Bad(e),
                        };
                        if tx.send((w * window + i, msg)).is_err() {
                            return;
                        }
                    }
                }
            });
            for (k, msg) in rx.iter() {
                // dropping rx on error stops the producer at its next send
                sink(k, msg)?;
            }
            Ok(())
        })
    }

    fn spill<F, E>(
        &self,
        opened: &Opened,
        buckets: usize,
        summary: &mut ReadSummary,
        f: &mut F,
    ) -> std::result::Result<(), E>
    where
        F: FnMut(AssetHistory) -> std::result::Result<(), E>,
        E: From<Error>,
    {
        let dir_base = self.spill_dir.clone().unwrap_or_else(std::env::temp_dir);
        let dir = tempfile::Builder::new()
            .prefix("telltale-spill-")
            .tempdir_in(&dir_base)
            .map_err(|e| Error::io(&dir_base, e))?;
        let paths: Vec<PathBuf> =
            (0..buckets).map(|b| dir.path().join(format!("bucket-{b:05}.bin"))).collect();
        let mut writers = Vec::with_capacity(buckets);
        for p in &paths {
            let file = File::create(p).map_err(|e| Error::io(p, e))?;
            writers.push(BufWriter::with_capacity(64 << 10, file));
        }
        let mut state = Buffers::default();
        let mut bucket_rows = vec![0u64; buckets];
        let mut rec = [0u8; SPILL_ROW];
        self.produce(opened, Want::All, |_, msg| {
            let chunk = match msg {
                Msg::Chunk(c) => c,
                Msg::Bad(e) => return self.bad(&mut summary.bad_files, e),
            };
            summary.row_groups_read += 1;
            summary.rows_decoded += chunk.rows_decoded;
            summary.rows_in_range += chunk.ts.len() as u64;
            let (amap, smap) = state.globalize(&chunk);
            for i in 0..chunk.ts.len() {
                let a = amap[chunk.asset[i] as usize];
                let b = a as usize % buckets;
                rec[0..4].copy_from_slice(&a.to_le_bytes());
                rec[4..8].copy_from_slice(&smap[chunk.sensor[i] as usize].to_le_bytes());
                rec[8..16].copy_from_slice(&chunk.ts[i].to_le_bytes());
                rec[16..24].copy_from_slice(&chunk.value[i].to_bits().to_le_bytes());
                rec[24] = u8::from(chunk.good[i]);
                writers[b].write_all(&rec).map_err(|e| Error::io(&paths[b], e))?;
                bucket_rows[b] += 1;
            }
            Ok(())
        })
        .map_err(E::from)?;
        for (w, p) in writers.into_iter().zip(&paths) {
            w.into_inner().map_err(|e| Error::io(p, e.into_error()))?;
        }
        for (b, p) in paths.iter().enumerate() {
            let file = File::open(p).map_err(|e| Error::io(p, e))?;
            let mut r = BufReader::with_capacity(1 << 20, file);
            let mut ids: Vec<u32> = Vec::new();
            let mut block = vec![0u8; SPILL_ROW * 8192];
            let mut left = bucket_rows[b] as usize;
            while left > 0 {
                let n = left.min(8192);
                let bytes = &mut block[..n * SPILL_ROW];
                r.read_exact(bytes).map_err(|e| Error::io(p, e))?;
                for rec in bytes.chunks_exact(SPILL_ROW) {
                    let word = |k: usize| {
                        let mut w = [0u8; 8];
                        w.copy_from_slice(&rec[k..k + 8]);
                        w
                    };
                    let a = u32::from_le_bytes([rec[0], rec[1], rec[2], rec[3]]);
                    let s = u32::from_le_bytes([rec[4], rec[5], rec[6], rec[7]]);
                    let ts = i64::from_le_bytes(word(8));
                    let v = f64::from_bits(u64::from_le_bytes(word(16)));
                    if state.push_one(a, s, ts, v, rec[24] != 0) {
                        ids.push(a);
                    }
                }
                left -= n;
            }
            summary.peak_buffered_rows = summary.peak_buffered_rows.max(state.rows);
            drop(r);
            let _ = std::fs::remove_file(p);
            ids.sort_by(|x, y| state.asset_names[*x as usize].cmp(&state.asset_names[*y as usize]));
            for g in ids {
                if let Some(a) = state.take(g, summary) {
                    summary.assets.push(a.asset.clone());
                    f(a)?;
                }
            }
        }
        Ok(())
    }

    /// Assets, sensors, row counts and time span, decoding only `asset`,
    /// `sensor` and `ts` (values are not read). Respects the time range.
    ///
    /// # Errors
    /// As [`HistoryReader::for_each_asset`].
    pub fn inventory(&self) -> Result<Inventory> {
        let opened = self.open()?;
        let mut bad = opened.bad.clone();
        let mut names = LocalDict::default();
        let mut snames = LocalDict::default();
        // (asset, sensor) -> (rows, first, last)
        let mut stats: HashMap<(u32, u32), (u64, i64, i64)> = HashMap::new();
        self.produce(&opened, Want::NoValues, |_, msg| {
            let c = match msg {
                Msg::Chunk(c) => c,
                Msg::Bad(e) => return self.bad(&mut bad, e),
            };
            let amap: Vec<u32> = c.assets.names.iter().map(|s| names.intern(s)).collect();
            let smap: Vec<u32> = c.sensors.names.iter().map(|s| snames.intern(s)).collect();
            for i in 0..c.ts.len() {
                let key = (amap[c.asset[i] as usize], smap[c.sensor[i] as usize]);
                let t = c.ts[i];
                let e = stats.entry(key).or_insert((0, t, t));
                e.0 += 1;
                e.1 = e.1.min(t);
                e.2 = e.2.max(t);
            }
            Ok(())
        })?;
        let mut per_asset: HashMap<u32, Vec<SensorInventory>> = HashMap::new();
        let (mut rows, mut first, mut last) = (0u64, None::<i64>, None::<i64>);
        for ((a, s), (n, lo, hi)) in stats {
            rows += n;
            first = Some(first.map_or(lo, |x| x.min(lo)));
            last = Some(last.map_or(hi, |x| x.max(hi)));
            per_asset.entry(a).or_default().push(SensorInventory {
                sensor: snames.names[s as usize].clone(),
                rows: n,
                first_ms: lo,
                last_ms: hi,
            });
        }
        let mut assets: Vec<AssetInventory> = per_asset
            .into_iter()
            .map(|(a, mut sensors)| {
                sensors.sort_by(|x, y| x.sensor.cmp(&y.sensor));
                AssetInventory { asset: names.names[a as usize].clone(), sensors }
            })
            .collect();
        assets.sort_by(|x, y| x.asset.cmp(&y.asset));
        Ok(Inventory {
            assets,
            rows,
            first_ms: first,
            last_ms: last,
            files: self.files.len(),
            bad_files: bad,
        })
    }
}

fn release<F, E>(
    k: usize,
    by_last: &mut [Vec<u32>],
    state: &mut Buffers,
    summary: &mut ReadSummary,
    f: &mut F,
    result: &mut std::result::Result<(), E>,
) -> Result<()>
where
    F: FnMut(AssetHistory) -> std::result::Result<(), E>,
{
    let mut ready = std::mem::take(&mut by_last[k]);
    ready.sort_by(|a, b| state.asset_names[*a as usize].cmp(&state.asset_names[*b as usize]));
    for g in ready {
        if let Some(a) = state.take(g, summary) {
            summary.assets.push(a.asset.clone());
            if let Err(e) = f(a) {
                *result = Err(e);
                // stop the producer; the caller returns `result`
                return Err(Error::bad_input("", "stopped by the asset callback"));
            }
        }
    }
    Ok(())
}

fn list_parquet(dir: &Path, out: &mut Vec<PathBuf>) -> Result<()> {
    let rd = std::fs::read_dir(dir).map_err(|e| Error::io(dir, e))?;
    for entry in rd {
        let entry = entry.map_err(|e| Error::io(dir, e))?;
        let name = entry.file_name();
        let bytes = name.as_encoded_bytes();
        if bytes.starts_with(b".") || bytes.starts_with(b"_") {
            continue;
        }
        let path = entry.path();
        let meta = std::fs::metadata(&path).map_err(|e| Error::io(&path, e))?;
        if meta.is_dir() {
            list_parquet(&path, out)?;
        } else if bytes.ends_with(b".parquet") {
            out.push(path);
        }
    }
    Ok(())
}

#[derive(Default)]
struct Opened {
    files: Vec<OpenFile>,
    bad: Vec<BadFile>,
    rgs: Vec<RgRef>,
    total_rgs: usize,
    pruned: usize,
}

struct OpenFile {
    path: PathBuf,
    meta: ArrowReaderMetadata,
    cols: Columns,
    rg_first_row: Vec<u64>,
    asset_leaf: Option<usize>,
    ts_leaf: Option<usize>,
}

struct RgRef {
    file: usize,
    rg: usize,
    rows: u64,
    asset_range: Option<(Vec<u8>, Vec<u8>)>,
}

fn open_file(path: &Path) -> Result<OpenFile> {
    let file = File::open(path).map_err(|e| Error::io(path, e))?;
    let len = file.metadata().map_err(|e| Error::io(path, e))?.len();
    if len == 0 {
        return Err(Error::bad_input(
            path,
            "file is empty (0 bytes); re-export it or remove it from the history folder",
        ));
    }
    let meta = ArrowReaderMetadata::load(&file, ArrowReaderOptions::new()).map_err(|e| {
        Error::bad_input(
            path,
            format!("not a readable Parquet file ({e}); the file may be truncated or corrupt, re-export it"),
        )
    })?;
    let cols = schema::check_schema(meta.schema()).map_err(|m| Error::bad_input(path, m))?;
    let md = meta.metadata();
    let mut rg_first_row = Vec::with_capacity(md.num_row_groups());
    let mut acc = 0u64;
    for g in md.row_groups() {
        rg_first_row.push(acc);
        acc += g.num_rows().max(0) as u64;
    }
    let leaf = |name: &str| {
        md.file_metadata()
            .schema_descr()
            .columns()
            .iter()
            .position(|c| c.path().parts().len() == 1 && c.path().parts()[0] == name)
    };
    let asset_leaf = leaf("asset");
    let ts_leaf = leaf("ts");
    Ok(OpenFile { path: path.to_path_buf(), meta, cols, rg_first_row, asset_leaf, ts_leaf })
}

/// `ts` min/max of one row group in epoch ms, when the statistics allow it.
///
/// The unit comes from the Parquet logical type, not from the Arrow type:
/// Parquet has no seconds unit, so an Arrow `Timestamp(s)` column is stored in
/// milliseconds and its statistics are milliseconds.
fn ts_stats(f: &OpenFile, rg: usize) -> Option<(i64, i64)> {
    let leaf = f.ts_leaf?;
    let desc = f.meta.metadata().file_metadata().schema_descr().column(leaf);
    let unit = match desc.logical_type_ref() {
        Some(LogicalType::Timestamp(t)) => match t.unit {
            PqUnit::MILLIS => arrow_schema::TimeUnit::Millisecond,
            PqUnit::MICROS => arrow_schema::TimeUnit::Microsecond,
            PqUnit::NANOS => arrow_schema::TimeUnit::Nanosecond,
        },
        Some(_) => return None,
        None => match desc.converted_type() {
            ConvertedType::TIMESTAMP_MILLIS => arrow_schema::TimeUnit::Millisecond,
            ConvertedType::TIMESTAMP_MICROS => arrow_schema::TimeUnit::Microsecond,
            ConvertedType::NONE if f.cols.ts_kind == TsKind::EpochMs => {
                arrow_schema::TimeUnit::Millisecond
            }
            _ => return None,
        },
    };
    match f.meta.metadata().row_group(rg).column(leaf).statistics()? {
        Statistics::Int64(s) => {
            Some((schema::raw_to_ms(*s.min_opt()?, unit), schema::raw_to_ms(*s.max_opt()?, unit)))
        }
        _ => None,
    }
}

#[derive(Debug)]
enum StreamIndex {
    AtEnd,
    Statistics,
    Decoded(HashMap<String, usize>),
}

impl StreamIndex {
    fn kind(&self) -> AssetIndex {
        match self {
            StreamIndex::AtEnd => AssetIndex::None,
            StreamIndex::Statistics => AssetIndex::Statistics,
            StreamIndex::Decoded(_) => AssetIndex::Decoded,
        }
    }
}

fn running_max(diff: &[i128]) -> u64 {
    let mut cur = 0i128;
    let mut peak = 0i128;
    for d in diff {
        cur += d;
        peak = peak.max(cur);
    }
    peak.max(0) as u64
}

/// Index from the asset column's min/max statistics, with an upper bound on
/// buffered rows: a row group's rows are held until the last later row group
/// whose asset range overlaps its own.
fn stats_index(rgs: &[RgRef]) -> Option<(StreamIndex, u64)> {
    let ranges: Vec<&(Vec<u8>, Vec<u8>)> =
        rgs.iter().map(|r| r.asset_range.as_ref()).collect::<Option<_>>()?;
    let mut diff = vec![0i128; rgs.len() + 1];
    for h in 0..rgs.len() {
        let (lo, hi) = ranges[h];
        let last = (h + 1..rgs.len())
            .rev()
            .find(|&j| ranges[j].0 <= *hi && *lo <= ranges[j].1)
            .unwrap_or(h);
        diff[h] += i128::from(rgs[h].rows);
        diff[last + 1] -= i128::from(rgs[h].rows);
    }
    Some((StreamIndex::Statistics, running_max(&diff)))
}

/// The last selected row group at or after `k` whose asset range may hold `asset`.
fn last_candidate(rgs: &[RgRef], k: usize, asset: &[u8]) -> usize {
    (k..rgs.len())
        .rev()
        .find(|&j| {
            rgs[j]
                .asset_range
                .as_ref()
                .is_none_or(|(lo, hi)| lo.as_slice() <= asset && asset <= hi.as_slice())
        })
        .unwrap_or(k)
}

#[derive(Debug, Clone, Copy, PartialEq, Eq)]
enum Want {
    AssetOnly,
    NoValues,
    All,
}

enum Msg {
    Chunk(Box<Chunk>),
    Bad(Error),
}

/// The rows of one row group inside the time range, in file order.
#[derive(Default)]
struct Chunk {
    file: usize,
    rg: usize,
    rows_decoded: u64,
    assets: LocalDict,
    sensors: LocalDict,
    asset: Vec<u32>,
    sensor: Vec<u32>,
    ts: Vec<i64>,
    value: Vec<f64>,
    good: Vec<bool>,
}

fn decode_rg(files: &[OpenFile], r: &RgRef, want: Want, opts: &HistoryReader) -> Result<Chunk> {
    let (f, rg) = (&files[r.file], r.rg);
    let path = &f.path;
    let file = File::open(path).map_err(|e| Error::io(path, e))?;
    let c = &f.cols;
    let mut roots = vec![c.asset];
    if want != Want::AssetOnly {
        roots.extend([c.sensor, c.ts]);
    }
    if want == Want::All {
        roots.push(c.value);
        roots.extend(c.quality);
    }
    let mask = ProjectionMask::roots(f.meta.parquet_schema(), roots);
    let reader = ParquetRecordBatchReaderBuilder::new_with_metadata(file, f.meta.clone())
        .with_projection(mask)
        .with_row_groups(vec![rg])
        .with_batch_size(opts.batch_size)
        .build()
        .map_err(|e| Error::bad_input(path, format!("row group {rg}: {e}")))?;
    let mut chunk = Chunk { file: r.file, rg, ..Chunk::default() };
    let mut first_row = f.rg_first_row.get(rg).copied().unwrap_or(0);
    let mut a_ids = Vec::new();
    let mut s_ids = Vec::new();
    let mut ts = Vec::new();
    let mut vals = Vec::new();
    let mut good = Vec::new();
    let row_err = |row: u64, col: &str, what: String| {
        Error::bad_input(
            path,
            format!("row {} (1-based, row group {rg}), column `{col}`: {what}", row + 1),
        )
    };
    for batch in reader {
        let batch: RecordBatch = batch.map_err(|e| {
            Error::bad_input(
                path,
                format!(
                    "row group {rg}: cannot decode ({e}); the file may be corrupt, re-export it"
                ),
            )
        })?;
        let n = batch.num_rows();
        let col = |name: &str| {
            batch.column_by_name(name).ok_or_else(|| {
                Error::bad_input(path, format!("column `{name}` vanished from row group {rg}"))
            })
        };
        a_ids.clear();
        schema::map_ids(col("asset")?, &mut chunk.assets, &mut a_ids).map_err(|i| {
            row_err(
                first_row + i as u64,
                "asset",
                "asset id is null; every row needs an asset".into(),
            )
        })?;
        chunk.rows_decoded += n as u64;
        if want == Want::AssetOnly {
            chunk.asset.extend_from_slice(&a_ids);
            first_row += n as u64;
            continue;
        }
        s_ids.clear();
        schema::map_ids(col("sensor")?, &mut chunk.sensors, &mut s_ids).map_err(|i| {
            row_err(
                first_row + i as u64,
                "sensor",
                "sensor id is null; every row needs a sensor".into(),
            )
        })?;
        ts.clear();
        schema::ts_to_ms(col("ts")?, c.ts_kind, &mut ts).map_err(|e| match e {
            TsError::Null(i) => row_err(
                first_row + i as u64,
                "ts",
                "time is null; every reading needs a time".into(),
            ),
            TsError::OutOfRange(i, raw) => row_err(
                first_row + i as u64,
                "ts",
                format!(
                    "time {raw} (in {}) is outside 1900-01-01..2200-01-01; check the unit of the \
                     ts column",
                    unit_name(c.ts_kind)
                ),
            ),
        })?;
        vals.clear();
        good.clear();
        if want == Want::All {
            schema::values_to_f64(col("value")?, &mut vals);
            match c.quality {
                Some(_) => schema::quality_to_good(col("quality")?, &mut good).map_err(|(i, w)| {
                    row_err(
                        first_row + i as u64,
                        "quality",
                        format!("unknown quality {w:?}; use good, uncertain or bad (or UInt8, 0 = good)"),
                    )
                })?,
                None => good.resize(n, true),
            }
        }
        let (lo, hi) = (opts.from_ms, opts.until_ms);
        if ts.iter().all(|t| (lo..hi).contains(t)) {
            chunk.asset.extend_from_slice(&a_ids);
            chunk.sensor.extend_from_slice(&s_ids);
            chunk.ts.extend_from_slice(&ts);
            chunk.value.extend_from_slice(&vals);
            chunk.good.extend_from_slice(&good);
        } else {
            for i in 0..n {
                if (lo..hi).contains(&ts[i]) {
                    chunk.asset.push(a_ids[i]);
                    chunk.sensor.push(s_ids[i]);
                    chunk.ts.push(ts[i]);
                    if want == Want::All {
                        chunk.value.push(vals[i]);
                        chunk.good.push(good[i]);
                    }
                }
            }
        }
        first_row += n as u64;
    }
    Ok(chunk)
}

fn unit_name(k: TsKind) -> &'static str {
    match k {
        TsKind::EpochMs => "epoch ms",
        TsKind::Timestamp(arrow_schema::TimeUnit::Second) => "s",
        TsKind::Timestamp(arrow_schema::TimeUnit::Millisecond) => "ms",
        TsKind::Timestamp(arrow_schema::TimeUnit::Microsecond) => "us",
        TsKind::Timestamp(arrow_schema::TimeUnit::Nanosecond) => "ns",
    }
}

#[derive(Default)]
struct SensorBuf {
    ts: Vec<i64>,
    value: Vec<f64>,
    good: Vec<bool>,
}

#[derive(Default)]
struct AssetBuf {
    /// (global sensor id, readings); an asset has a handful of sensors, so a
    /// linear search with a last-hit cache beats hashing
    sensors: Vec<(u32, SensorBuf)>,
    last: usize,
}

impl AssetBuf {
    fn sensor(&mut self, s: u32) -> &mut SensorBuf {
        if self.sensors.get(self.last).is_none_or(|(id, _)| *id != s) {
            self.last = match self.sensors.iter().position(|(id, _)| *id == s) {
                Some(i) => i,
                None => {
                    self.sensors.push((s, SensorBuf::default()));
                    self.sensors.len() - 1
                }
            };
        }
        &mut self.sensors[self.last].1
    }
}

/// Per-asset buffers keyed by dense global ids.
#[derive(Default)]
struct Buffers {
    asset_ids: HashMap<String, u32>,
    asset_names: Vec<String>,
    sensor_ids: HashMap<String, u32>,
    sensor_names: Vec<String>,
    bufs: Vec<Option<AssetBuf>>,
    rows: u64,
}

impl Buffers {
    fn globalize(&mut self, c: &Chunk) -> (Vec<u32>, Vec<u32>) {
        let mut amap = Vec::with_capacity(c.assets.names.len());
        for name in &c.assets.names {
            let next = self.asset_names.len() as u32;
            let id = *self.asset_ids.entry(name.clone()).or_insert(next);
            if id == next {
                self.asset_names.push(name.clone());
                self.bufs.push(None);
            }
            amap.push(id);
        }
        let mut smap = Vec::with_capacity(c.sensors.names.len());
        for name in &c.sensors.names {
            let next = self.sensor_names.len() as u32;
            let id = *self.sensor_ids.entry(name.clone()).or_insert(next);
            if id == next {
                self.sensor_names.push(name.clone());
            }
            smap.push(id);
        }
        (amap, smap)
    }

    /// Append a chunk, run by run of equal (asset, sensor).
    fn append(&mut self, c: &Chunk, amap: &[u32], smap: &[u32]) {
        let n = c.ts.len();
        let mut i = 0;
        while i < n {
            let (a, s) = (c.asset[i], c.sensor[i]);
            let mut j = i + 1;
            while j < n && c.asset[j] == a && c.sensor[j] == s {
                j += 1;
            }
            let buf = self.bufs[amap[a as usize] as usize]
                .get_or_insert_with(AssetBuf::default)
                .sensor(smap[s as usize]);
            buf.ts.extend_from_slice(&c.ts[i..j]);
            buf.value.extend_from_slice(&c.value[i..j]);
            buf.good.extend_from_slice(&c.good[i..j]);
            i = j;
        }
        self.rows += n as u64;
    }

    /// Append one reading; returns true when the asset's buffer was created.
    fn push_one(&mut self, a: u32, s: u32, ts: i64, v: f64, good: bool) -> bool {
        let slot = &mut self.bufs[a as usize];
        let created = slot.is_none();
        let buf = slot.get_or_insert_with(AssetBuf::default).sensor(s);
        buf.ts.push(ts);
        buf.value.push(v);
        buf.good.push(good);
        self.rows += 1;
        created
    }

    fn take(&mut self, g: u32, summary: &mut ReadSummary) -> Option<AssetHistory> {
        let buf = self.bufs.get_mut(g as usize)?.take()?;
        let mut sensors: Vec<SensorSeries> = buf
            .sensors
            .into_iter()
            .map(|(s, b)| {
                self.rows -= b.ts.len() as u64;
                let (series, dropped) = finish_series(self.sensor_names[s as usize].clone(), b);
                summary.duplicates_dropped += dropped;
                series
            })
            .collect();
        sensors.sort_by(|x, y| x.sensor.cmp(&y.sensor));
        Some(AssetHistory { asset: self.asset_names[g as usize].clone(), sensors })
    }
}

/// Sort by time (stable, so input order breaks ties) and keep the last of equal times.
fn finish_series(sensor: String, b: SensorBuf) -> (SensorSeries, u64) {
    if b.ts.windows(2).all(|w| w[0] < w[1]) {
        return (SensorSeries { sensor, ts_ms: b.ts, value: b.value, good: b.good }, 0);
    }
    let mut perm: Vec<u32> = (0..b.ts.len() as u32).collect();
    perm.sort_by_key(|&i| b.ts[i as usize]);
    let n = perm.len();
    let mut out = SensorSeries {
        sensor,
        ts_ms: Vec::with_capacity(n),
        value: Vec::with_capacity(n),
        good: Vec::with_capacity(n),
    };
    for (k, &i) in perm.iter().enumerate() {
        let i = i as usize;
        let last_of_time = k + 1 == n || b.ts[perm[k + 1] as usize] != b.ts[i];
        if last_of_time {
            out.ts_ms.push(b.ts[i]);
            out.value.push(b.value[i]);
            out.good.push(b.good[i]);
        }
    }
    let dropped = (n - out.ts_ms.len()) as u64;
    (out, dropped)
}
