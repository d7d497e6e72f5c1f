//! Command-line interface: one subcommand per job (DESIGN.md section 5).
//!
//! Arguments are converted in two stages: clap parses raw flags into the
//! `*Args` structs here, and each job turns them into checked settings
//! before any data is read, so usage errors surface at once.

mod backtest;
mod demo;
mod evaluate;
mod fit;
mod import;
mod keys;
mod report;
mod scan;
mod serve;

use crate::UsageError;
use clap::{Parser, Subcommand};
use std::path::PathBuf;
use telltale_pipelines::time::parse_time;

pub use backtest::BacktestArgs;
pub use demo::DemoArgs;
pub use evaluate::EvaluateArgs;
pub use fit::FitArgs;
pub use import::ImportArgs;
pub use keys::{KeysAction, KeysArgs};
pub use report::ReportArgs;
pub use scan::ScanArgs;
pub use serve::ServeArgs;

/// telltale: tells a failing sensor from a real process change from a developing
/// equipment fault, with evidence.
///
/// Exit codes: 0 finished (with or without suspicions), 1 runtime failure,
/// 2 bad usage or bad input. Data goes to stdout; logs and progress to stderr.
/// telltale is decision support, not a protective or safety function.
#[derive(Debug, Parser)]
#[command(name = "telltale", version, about, long_about)]
pub struct Cli {
    /// More log output on stderr (-v, -vv)
    #[arg(short, long, action = clap::ArgAction::Count, global = true)]
    pub verbose: u8,
    /// Only errors on stderr; no progress bars
    #[arg(short, long, global = true)]
    pub quiet: bool,
    /// How log lines on stderr are written: text for people, json (one object per line) for log
    /// collectors
    #[arg(long, value_enum, default_value = "text", global = true)]
    pub log_format: crate::logging::LogFormat,
    /// The job to run
    #[command(subcommand)]
    pub command: Command,
}

/// The jobs.
#[derive(Debug, Subcommand)]
pub enum Command {
    /// Generate the demo fleet (a water utility's pumping stations) with its ground truth
    Demo(DemoArgs),
    /// Learn per-asset baselines from history in [--from, --until) and write them to --store
    Fit(FitArgs),
    /// Judge history in [--from, --to) against the stored baselines; write ranked suspicions
    Scan(ScanArgs),
    /// Measure detection quality: suspicions in [--from, --to) against ground-truth events
    Evaluate(EvaluateArgs),
    /// Replay fit and scan walk-forward over an archive; score lead time and false alarms
    Backtest(BacktestArgs),
    /// Turn a work-order export (CSV) into failure and maintenance events; report unused rows
    ImportEvents(ImportArgs),
    /// Write the weekly reliability review of [--from, --to): one self-contained HTML page, or Markdown
    Report(ReportArgs),
    /// Serve scoring, suspicions and feedback over HTTP (needs an API key, see `keys`)
    Serve(ServeArgs),
    /// Create, list and revoke the HTTP service's API keys
    Keys(KeysArgs),
}

/// Run the parsed command.
///
/// # Errors
/// Whatever the job reports, with context.
pub fn dispatch(cli: Cli) -> anyhow::Result<()> {
    match cli.command {
        Command::Demo(args) => demo::run(&args, cli.quiet),
        Command::Fit(args) => fit::run(&args),
        Command::Scan(args) => scan::run(&args),
        Command::Evaluate(args) => evaluate::run(&args),
        Command::Backtest(args) => backtest::run(&args),
        Command::ImportEvents(args) => import::run(&args),
        Command::Serve(args) => serve::run(&args),
        Command::Keys(args) => keys::run(&args),
        Command::Report(args) => report::run(&args),
    }
}

/// A time flag (RFC 3339 or a date) as epoch milliseconds; the error names the flag.
pub(crate) fn time_flag_ms(flag: &str, value: &str) -> Result<i64, UsageError> {
    parse_time(value)
        .map(|t| t.timestamp_millis())
        .map_err(|e| UsageError(format!("--{flag}: {e}")))
}

/// Checks that `--from` is before `--to` (both epoch ms); `span` names the
/// span in the message ("scan span", "report period", ...).
pub(crate) fn check_span(span: &str, from: (&str, i64), to: (&str, i64)) -> Result<(), UsageError> {
    if from.1 >= to.1 {
        return Err(UsageError(format!(
            "--from {} is not before --to {}; the {span} [from, to) would be empty",
            from.0, to.0
        )));
    }
    Ok(())
}

/// Checks that `--store` is an existing directory (written by `telltale fit`).
pub(crate) fn check_store_flag(store: &std::path::Path) -> Result<(), UsageError> {
    if !store.is_dir() {
        return Err(UsageError(format!(
            "--store {}: no such directory; run `telltale fit --store {}` first",
            store.display(),
            store.display()
        )));
    }
    Ok(())
}

/// Checks `--threads` (`None`: every core) and returns the job's setting
/// (`0`: every core).
pub(crate) fn threads_flag(threads: Option<usize>) -> Result<usize, UsageError> {
    if threads == Some(0) {
        return Err(UsageError(
            "--threads must be at least 1; leave it out to use every core".to_owned(),
        ));
    }
    Ok(threads.unwrap_or(0))
}

/// Sizes rayon's global pool to `--threads` when given.
pub(crate) fn size_global_pool(threads: Option<usize>) {
    if let Some(n) = threads
        && rayon::ThreadPoolBuilder::new().num_threads(n).build_global().is_err()
    {
        tracing::debug!("rayon's global pool was already set up");
    }
}

/// Checks that an optional `--fleet` registry file exists.
pub(crate) fn check_fleet_flag(fleet: Option<&PathBuf>) -> Result<(), UsageError> {
    match fleet {
        Some(f) if !f.is_file() => Err(UsageError(format!(
            "--fleet {}: no such file; give the fleet registry TOML or leave --fleet out",
            f.display()
        ))),
        _ => Ok(()),
    }
}
