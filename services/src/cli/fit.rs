//! `telltale fit`: learn per-asset baselines from history and write them to
//! the baseline store.

use crate::UsageError;
use anyhow::Context;
use clap::Args;
use std::io::Write;
use std::path::PathBuf;
use telltale_pipelines::jobs::{FitOutcome, FitReport, FitSettings, run_fit};

/// Arguments of `telltale fit`.
///
/// Exit status: 0 when every asset was fitted or the only failures were too
/// little data (warned on stderr); 1 when some asset could not be modelled
/// (the other baselines are still written) or the store cannot be written;
/// 2 for bad usage or input, including a span in which no asset could be fitted.
#[derive(Debug, Args)]
pub struct FitArgs {
    /// History: a Parquet file or a folder of them (long format: asset, sensor, ts, value[, quality])
    #[arg(long)]
    pub history: PathBuf,
    /// Fleet registry (TOML) with groups, sensor roles, ranges and bands
    #[arg(long)]
    pub fleet: Option<PathBuf>,
    /// Start of the fit span, inclusive: RFC 3339 or a date (default: the start of the history)
    #[arg(long)]
    pub from: Option<String>,
    /// End of the fit span, exclusive: RFC 3339 (2026-05-06T00:00:00Z) or a date (2026-05-06)
    #[arg(long)]
    pub until: String,
    /// Baseline store directory (created if missing)
    #[arg(long)]
    pub store: PathBuf,
    /// Fit only this asset (repeatable); other baselines in the store are left as they are
    #[arg(long = "asset", value_name = "ID")]
    pub assets: Vec<String>,
    /// Skip unreadable history files (each is reported) instead of failing
    #[arg(long)]
    pub skip_bad_files: bool,
    /// Threads for decoding and fitting (default: the available cores; 1 = sequential)
    #[arg(short = 'j', long)]
    pub threads: Option<usize>,
}

impl FitArgs {
    /// Stage 1: every flag checked before any data is read.
    fn settings(&self) -> Result<FitSettings, UsageError> {
        let until = super::time_flag_ms("until", &self.until)?;
        let from = self.from.as_deref().map(|v| super::time_flag_ms("from", v)).transpose()?;
        if let Some(f) = from
            && f >= until
        {
            return Err(UsageError(format!(
                "--from {} is not before --until {}; the fit span [from, until) would be empty",
                self.from.as_deref().unwrap_or_default(),
                self.until
            )));
        }
        super::check_fleet_flag(self.fleet.as_ref())?;
        if self.threads == Some(0) {
            return Err(UsageError(
                "--threads must be at least 1; leave it out to use every core".to_owned(),
            ));
        }
        let mut s = FitSettings::new(&self.history, until, &self.store);
        s.registry = self.fleet.clone();
        s.from_ms = from;
        s.skip_bad_files = self.skip_bad_files;
        s.threads = self.threads.unwrap_or(0);
        s.assets = self.assets.clone();
        Ok(s)
    }
}

pub(crate) fn run(args: &FitArgs) -> anyhow::Result<()> {
    let settings = args.settings()?;
    if let Some(n) = args.threads {
        // The history reader decodes on rayon's global pool: size it too, so
        // `-j1` really is the single-threaded path. It can only be set once
        // per process; a second call keeps the first size.
        if rayon::ThreadPoolBuilder::new().num_threads(n).build_global().is_err() {
            tracing::debug!("rayon's global pool was already set up; -j applies to fitting only");
        }
    }
    tracing::info!(
        history = %args.history.display(),
        store = %args.store.display(),
        until = %args.until,
        "fitting baselines"
    );
    let report = run_fit(&settings)
        .with_context(|| format!("fitting baselines into {}", args.store.display()))?;
    tracing::info!(
        assets = report.assets_fitted.len(),
        failed = report.assets_failed.len(),
        rows = report.rows_read,
        seconds = format!("{:.1}", report.seconds),
        "baselines written"
    );
    print_table(&report)?;
    match report.outcome() {
        FitOutcome::NothingFitted => Err(UsageError(format!(
            "no asset could be fitted from {} in the span before {}{}; widen --from/--until or \
             check the history",
            args.history.display(),
            args.until,
            first_reason(&report)
        ))
        .into()),
        FitOutcome::Failed => {
            let list: Vec<String> = report
                .assets_failed
                .iter()
                .map(|f| format!("{} ({})", f.asset, f.reason))
                .collect();
            anyhow::bail!(
                "{} of {} assets could not be fitted: {}; the other baselines were written to {}",
                report.assets_failed.len(),
                report.assets_failed.len() + report.assets_fitted.len(),
                list.join("; "),
                report.store.display()
            )
        }
        _ => Ok(()),
    }
}

fn first_reason(report: &FitReport) -> String {
    report.assets_failed.first().map_or_else(String::new, |f| {
        format!(
            " ({} assets not fitted, e.g. {}: {})",
            report.assets_failed.len(),
            f.asset,
            f.reason
        )
    })
}

/// Data on stdout: one line per asset, then a summary line.
fn print_table(report: &FitReport) -> std::io::Result<()> {
    let mut out = std::io::stdout().lock();
    let w = report
        .assets_fitted
        .iter()
        .map(|a| a.asset.len())
        .chain(report.assets_failed.iter().map(|a| a.asset.len()))
        .max()
        .unwrap_or(5)
        .max(5);
    writeln!(
        out,
        "{:<w$}  {:>7}  {:>7}  {:>7}  {:>9}  {:>6}",
        "asset", "sensors", "regimes", "stopped", "rows", "step_s"
    )?;
    for a in &report.assets_fitted {
        writeln!(
            out,
            "{:<w$}  {:>7}  {:>7}  {:>7}  {:>9}  {:>6}",
            a.asset,
            a.sensors,
            a.regimes,
            if a.stopped { "yes" } else { "no" },
            a.rows,
            a.step_ms as f64 / 1000.0
        )?;
    }
    for f in &report.assets_failed {
        writeln!(out, "{:<w$}  not fitted: {}", f.asset, f.reason)?;
    }
    writeln!(
        out,
        "{} baselines written to {} ({} not fitted, {} rows, {:.1} s)",
        report.assets_fitted.len(),
        report.store.display(),
        report.assets_failed.len(),
        report.rows_read,
        report.seconds
    )?;
    out.flush()
}
