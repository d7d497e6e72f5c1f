//! `telltale scan`: judge history in [--from, --to) against the stored
//! baselines and write ranked suspicions.

use crate::UsageError;
use anyhow::Context;
use clap::{Args, ValueEnum};
use std::io::Write;
use std::path::PathBuf;
use telltale_pipelines::io::{FileFormat, write_suspicions_to};
use telltale_pipelines::jobs::{ScanReport, ScanSettings, run_scan};
use telltale_pipelines::record::Suspicion;

/// Output formats of the suspicions.
#[derive(Debug, Clone, Copy, PartialEq, Eq, ValueEnum)]
pub enum Format {
    /// JSON Lines, one suspicion per line
    Jsonl,
    /// CSV with a header row (evidence as a JSON string)
    Csv,
    /// Apache Parquet
    Parquet,
}

/// Arguments of `telltale scan`.
///
/// Exit status: 0 when the scan ran (with or without suspicions), 1 on a
/// runtime failure, 2 for bad usage or input (including an empty store).
#[derive(Debug, Args)]
pub struct ScanArgs {
    /// History: a Parquet file or a folder of them
    #[arg(long)]
    pub history: PathBuf,
    /// Fleet registry (TOML); its groups, sites and criticality are used for peers and ranking
    #[arg(long)]
    pub fleet: Option<PathBuf>,
    /// Baseline store written by `telltale fit`
    #[arg(long)]
    pub store: PathBuf,
    /// Start of the span, inclusive: RFC 3339 or a date
    #[arg(long)]
    pub from: String,
    /// End of the span, exclusive: RFC 3339 or a date
    #[arg(long)]
    pub to: String,
    /// Output format (default: from the --out extension, else jsonl)
    #[arg(long, value_enum)]
    pub format: Option<Format>,
    /// Output file (default: stdout)
    #[arg(long)]
    pub out: Option<PathBuf>,
    /// Skip unreadable history files (each is reported) instead of failing
    #[arg(long)]
    pub skip_bad_files: bool,
    /// Threads (default: the available cores)
    #[arg(short = 'j', long)]
    pub threads: Option<usize>,
}

impl ScanArgs {
    /// Every flag checked before any data is read.
    pub(crate) fn settings(&self) -> Result<ScanSettings, UsageError> {
        let from = super::time_flag_ms("from", &self.from)?;
        let to = super::time_flag_ms("to", &self.to)?;
        super::check_span("scan span", (&self.from, from), (&self.to, to))?;
        super::check_fleet_flag(self.fleet.as_ref())?;
        super::check_store_flag(&self.store)?;
        let threads = super::threads_flag(self.threads)?;
        let mut s = ScanSettings::new(&self.history, &self.store, from, to);
        s.registry = self.fleet.clone();
        s.skip_bad_files = self.skip_bad_files;
        s.threads = threads;
        Ok(s)
    }

    fn format(&self) -> Result<FileFormat, UsageError> {
        Ok(match (self.format, &self.out) {
            (Some(Format::Jsonl), _) => FileFormat::Jsonl,
            (Some(Format::Csv), _) => FileFormat::Csv,
            (Some(Format::Parquet), _) => FileFormat::Parquet,
            (None, Some(p)) => FileFormat::from_path(p).map_err(|e| UsageError(e.to_string()))?,
            (None, None) => FileFormat::Jsonl,
        })
    }
}

/// Writes the suspicions where the flags say.
pub(crate) fn write_out(
    items: &[Suspicion],
    out: Option<&std::path::Path>,
    format: FileFormat,
) -> anyhow::Result<()> {
    match out {
        Some(path) => {
            // the explicit format wins over the extension; written to a
            // temporary file beside the target, then renamed (atomic)
            let mut buf = Vec::new();
            write_suspicions_to(&mut buf, format, items, path)?;
            let tmp = path.with_extension(format!(
                "{}.tmp",
                path.extension().and_then(|e| e.to_str()).unwrap_or("out")
            ));
            std::fs::write(&tmp, &buf)
                .and_then(|()| std::fs::rename(&tmp, path))
                .with_context(|| format!("writing suspicions to {}", path.display()))
        }
        None => {
            // Write to memory first (the writer checks every number before
            // writing anything), then to stdout in one go.
            let mut buf = Vec::new();
            write_suspicions_to(&mut buf, format, items, std::path::Path::new("<stdout>"))?;
            let mut out = std::io::stdout().lock();
            out.write_all(&buf).context("writing suspicions to stdout")?;
            out.flush().context("writing suspicions to stdout")
        }
    }
}

/// Logs what a scan did (stderr).
pub(crate) fn log_report(r: &ScanReport) {
    for (a, why) in &r.assets_skipped {
        tracing::warn!(asset = %a, reason = %why, "not scanned");
    }
    tracing::info!(
        assets = r.assets_scanned,
        skipped = r.assets_skipped.len(),
        rows = r.rows_read,
        verdicts = r.verdicts_before_fdr,
        suspicions = r.suspicions.len(),
        seconds = format!("{:.1}", r.seconds),
        rows_per_s = format!("{:.0}", r.rows_read as f64 / r.seconds.max(1e-9)),
        "scan finished"
    );
}

pub(crate) fn run(args: &ScanArgs) -> anyhow::Result<()> {
    let settings = args.settings()?;
    let format = args.format()?;
    super::size_global_pool(args.threads);
    if args.out.is_none() && format == FileFormat::Parquet {
        tracing::info!("writing Parquet to stdout; redirect it to a file");
    }
    let report = run_scan(&settings).with_context(|| {
        format!("scanning {} against {}", args.history.display(), args.store.display())
    })?;
    log_report(&report);
    write_out(&report.suspicions, args.out.as_deref(), format)
}
