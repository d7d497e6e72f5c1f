//! `telltale backtest`: walk-forward replay of fit and scan over an archive,
//! scored against its failure, maintenance and labelled-change records. The
//! replay and scoring rules live in [`telltale_pipelines::jobs::backtest`];
//! this verb checks the flags, runs it, writes the output directory and
//! prints the summary.

use super::evaluate::{hours_flag, input_file, num, num2, pct, print_report};
use crate::UsageError;
use anyhow::Context;
use clap::Args;
use std::io::Write;
use std::path::PathBuf;
use telltale_pipelines::io::read_events;
use telltale_pipelines::jobs::backtest::OUTPUT_FILES;
use telltale_pipelines::jobs::{
    BacktestReport, BacktestSettings, read_outages, run_replay, score_replay, write_outputs,
};
use telltale_pipelines::record::Class;
use telltale_pipelines::time::format_time;

/// Arguments of `telltale backtest`.
///
/// Exit status: 0 when the backtest ran (whatever the figures), 1 on a
/// runtime failure, 2 for bad usage or bad input.
#[derive(Debug, Args)]
pub struct BacktestArgs {
    /// History: a Parquet file or a folder of them
    #[arg(long)]
    pub history: PathBuf,
    /// Fleet registry (TOML): roles, groups, sites, ranges and criticality
    #[arg(long)]
    pub fleet: Option<PathBuf>,
    /// Archive events (CSV, JSON Lines or Parquet): failures, maintenance, optional labelled changes
    #[arg(long)]
    pub events: PathBuf,
    /// Output directory (created if missing): summary.json, CSV tables, suspicions, baselines
    #[arg(long)]
    pub out: PathBuf,
    /// Whole-asset outages known beforehand (CSV: asset,start,end,note), not judged
    #[arg(long)]
    pub outages: Option<PathBuf>,
    /// Replay start, inclusive (default: first reading + the fit window, next midnight UTC)
    #[arg(long)]
    pub from: Option<String>,
    /// Replay end, exclusive (default: just after the last reading)
    #[arg(long)]
    pub to: Option<String>,
    /// Trailing history each fit learns from, days
    #[arg(long, default_value_t = 28.0, value_name = "D")]
    pub fit_days: f64,
    /// Re-fit cadence, days (a whole number of review steps)
    #[arg(long, default_value_t = 7.0, value_name = "D")]
    pub refit_days: f64,
    /// Review step: one scan and one decision per step, hours
    #[arg(long, default_value_t = 24.0, value_name = "H")]
    pub step_hours: f64,
    /// Least history after maintenance, a failure or an accepted change before re-fitting, days
    #[arg(long, default_value_t = 7.0, value_name = "D")]
    pub min_fit_days: f64,
    /// Time before each failure that is not quiet, days
    #[arg(long, default_value_t = 30.0, value_name = "D")]
    pub quiet_before_days: f64,
    /// Time after each failure that is not quiet, days
    #[arg(long, default_value_t = 7.0, value_name = "D")]
    pub quiet_after_days: f64,
    /// Skip unreadable history files (each is reported) instead of failing
    #[arg(long)]
    pub skip_bad_files: bool,
    /// Threads (default: the available cores)
    #[arg(short = 'j', long)]
    pub threads: Option<usize>,
}

fn ms(flag: &str, hours: f64) -> Result<i64, UsageError> {
    Ok(hours_flag(flag, hours)?.num_milliseconds())
}

impl BacktestArgs {
    /// Stage 1: every flag checked before any data is read (the events are read here).
    fn settings(&self) -> Result<BacktestSettings, UsageError> {
        input_file("events", &self.events)?;
        super::check_fleet_flag(self.fleet.as_ref())?;
        if let Some(o) = &self.outages {
            input_file("outages", o)?;
        }
        if !self.history.exists() {
            return Err(UsageError(format!(
                "--history {}: no such file or folder",
                self.history.display()
            )));
        }
        let threads = super::threads_flag(self.threads)?;
        let from = self.from.as_deref().map(|v| super::time_flag_ms("from", v)).transpose()?;
        let to = self.to.as_deref().map(|v| super::time_flag_ms("to", v)).transpose()?;
        if let (Some(f), Some(t), Some(fs), Some(ts)) =
            (from, to, self.from.as_deref(), self.to.as_deref())
        {
            super::check_span("replay span", (fs, f), (ts, t))?;
        }
        let mut s = BacktestSettings::new(&self.history, Vec::new(), self.out.join("baselines"));
        s.registry = self.fleet.clone();
        s.from_ms = from;
        s.to_ms = to;
        s.fit_window_ms = ms("fit-days", self.fit_days * 24.0)?;
        s.refit_every_ms = ms("refit-days", self.refit_days * 24.0)?;
        s.step_ms = ms("step-hours", self.step_hours)?;
        s.min_fit_ms = ms("min-fit-days", self.min_fit_days * 24.0)?;
        s.quiet_before_ms = ms("quiet-before-days", self.quiet_before_days * 24.0)?;
        s.quiet_after_ms = ms("quiet-after-days", self.quiet_after_days * 24.0)?;
        s.skip_bad_files = self.skip_bad_files;
        s.threads = threads;
        Ok(s)
    }
}

pub(crate) fn run(args: &BacktestArgs) -> anyhow::Result<()> {
    let mut settings = args.settings()?;
    settings.events = read_events(&args.events)
        .with_context(|| format!("reading events {}", args.events.display()))?;
    if let Some(p) = &args.outages {
        settings.outages =
            read_outages(p).with_context(|| format!("reading outages {}", p.display()))?;
    }
    if !settings.events.iter().any(|e| e.class == Class::Failure) {
        tracing::warn!(
            events = %args.events.display(),
            "the archive holds no failure: lead time cannot be measured"
        );
    }
    let replay = run_replay(&settings).with_context(|| {
        format!("replaying {} with the events of {}", args.history.display(), args.events.display())
    })?;
    let (report, suspicions) = score_replay(&replay, &settings).context("scoring the replay")?;
    write_outputs(&args.out, &report, &suspicions)
        .with_context(|| format!("writing the backtest into {}", args.out.display()))?;
    let mut out = std::io::stdout().lock();
    print_summary(&mut out, &report)?;
    writeln!(out, "\nfiles in {}:", args.out.display())?;
    for f in OUTPUT_FILES {
        writeln!(out, "  {f}")?;
    }
    writeln!(out, "  baselines/fold-NNN (the baselines each fold judged against)")?;
    writeln!(
        out,
        "\ntelltale is decision support, not a protective or safety function: these figures \
         support a review; site procedures, local codes and licensed practice decide."
    )?;
    out.flush()?;
    Ok(())
}

fn print_summary(out: &mut impl Write, r: &BacktestReport) -> std::io::Result<()> {
    let s = &r.settings;
    writeln!(
        out,
        "backtest {} .. {}: {} assets, {} folds (re-fit every {} d on the trailing {} d), review \
         step {} h",
        format_time(s.from),
        format_time(s.to),
        r.assets,
        r.folds.len(),
        s.refit_every_days,
        s.fit_window_days,
        s.step_hours
    )?;
    writeln!(
        out,
        "judged {:.1} asset-weeks ({} paused spans); {} suspicions at q = {} ({} continuing \
         reports merged); archive: {}",
        r.judged_asset_weeks,
        r.paused.len(),
        r.suspicions,
        s.fdr_q,
        r.continuing_merged,
        r.archive.replace('_', "-")
    )?;
    writeln!(
        out,
        "run time {:.1} s (fits {:.1} s, scans {:.1} s)",
        r.runtime.seconds, r.runtime.fit_seconds, r.runtime.scan_seconds
    )?;
    let lt = &r.evaluation.lead_time;
    let marks: Vec<String> = lt
        .marks
        .iter()
        .map(|m| format!(">= {} h {}/{}", m.hours, m.warned, lt.failures.len()))
        .collect();
    writeln!(
        out,
        "\nfailures {}: warned {}, median lead {} h; {}",
        lt.failures.len(),
        lt.warned,
        num(lt.median_hours),
        marks.join(", ")
    )?;
    let q = &r.quiet;
    writeln!(
        out,
        "quiet time (not within {} d before or {} d after a failure, outside maintenance and \
         outages): {} suspicions over {:.1} asset-weeks = {} per 100 asset-weeks",
        s.quiet_before_days,
        s.quiet_after_days,
        q.suspicions,
        q.exposure_asset_weeks,
        num2(q.per_100_asset_weeks)
    )?;
    writeln!(out, "\nsensitivity (Benjamini-Hochberg level across the fleet per review step)")?;
    writeln!(
        out,
        "{:>8}  {:>10}  {:>7}  {:>9}  {:>12}  {:>12}  {:>7}  {:>9}",
        "fdr_q",
        "suspicions",
        "recall",
        "class_acc",
        "FA/100 a-wk",
        "quiet/100 aw",
        "warned",
        ">=72h"
    )?;
    for p in &r.sweep {
        writeln!(
            out,
            "{:>8}  {:>10}  {:>7}  {:>9}  {:>12}  {:>12}  {:>7}  {:>9}{}",
            format!("{:e}", p.fdr_q),
            p.suspicions,
            pct(p.recall),
            pct(p.class_accuracy),
            num2(p.false_alarms_per_100_asset_weeks),
            num2(p.quiet_per_100_asset_weeks),
            p.failures_warned,
            pct(p.warned_72h_share),
            if p.default { "  <- default" } else { "" }
        )?;
    }
    writeln!(out)?;
    print_report(out, &r.evaluation)
}
