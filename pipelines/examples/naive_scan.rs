//! The naive comparison detector of [`telltale_pipelines::jobs::naive`]: hourly
//! robust z-scores against the fit period, every finding a sensor bias. A
//! benchmark yardstick for the verdict engine, not a product command.
//!
//! ```text
//! cargo run --release -p telltale-pipelines --example naive_scan -- \
//!     --history DIR/history.parquet --fleet DIR/fleet.toml \
//!     --fit-from T --fit-until T --from T --to T --out naive.jsonl
//! ```
//!
//! Writes the suspicions (DESIGN.md 4.4; the format follows the `--out`
//! extension: `.jsonl`, `.csv` or `.parquet`) and prints one line with the
//! count and the wall time to stderr. Exit 0 on success, 1 on a runtime
//! failure, 2 on bad usage or bad input.

use clap::Parser;
use std::path::PathBuf;
use std::process::ExitCode;
use std::time::Instant;
use telltale_pipelines::io::write_suspicions;
use telltale_pipelines::jobs::{NaiveSettings, run_naive};
use telltale_pipelines::time::parse_time;

/// Naive comparison scan: hourly robust z-scores, every finding a sensor bias.
#[derive(Debug, Parser)]
#[command(name = "naive_scan")]
struct Args {
    /// History: a Parquet file or a directory of them.
    #[arg(long)]
    history: PathBuf,
    /// Fleet registry (TOML); used only for units in the summaries.
    #[arg(long)]
    fleet: Option<PathBuf>,
    /// Start of the fit span (RFC 3339 or a date), inclusive.
    #[arg(long, value_parser = parse_ms)]
    fit_from: i64,
    /// End of the fit span, exclusive.
    #[arg(long, value_parser = parse_ms)]
    fit_until: i64,
    /// Start of the scan span, inclusive.
    #[arg(long, value_parser = parse_ms)]
    from: i64,
    /// End of the scan span, exclusive.
    #[arg(long, value_parser = parse_ms)]
    to: i64,
    /// Suspicions file (.jsonl, .csv or .parquet).
    #[arg(long)]
    out: PathBuf,
    /// |z| threshold for an abnormal hour (default 3.5: common practice, no source).
    #[arg(long, default_value_t = 3.5)]
    z: f64,
    /// Consecutive abnormal hours that make an episode.
    #[arg(long, default_value_t = 3)]
    min_hours: usize,
    /// Threads (default: every core).
    #[arg(short = 'j', long)]
    threads: Option<usize>,
    /// Skip unreadable history files instead of failing.
    #[arg(long)]
    skip_bad_files: bool,
}

fn parse_ms(s: &str) -> Result<i64, String> {
    parse_time(s).map(|t| t.timestamp_millis())
}

fn main() -> ExitCode {
    let args = Args::parse();
    let started = Instant::now();
    let mut settings =
        NaiveSettings::new(&args.history, args.fit_from, args.fit_until, args.from, args.to);
    settings.registry = args.fleet.clone();
    settings.threshold = args.z;
    settings.min_hours = args.min_hours;
    settings.threads = args.threads.unwrap_or(0);
    settings.skip_bad_files = args.skip_bad_files;
    let result = run_naive(&settings).and_then(|found| {
        write_suspicions(&args.out, &found)?;
        Ok(found)
    });
    match result {
        Ok(found) => {
            eprintln!(
                "naive_scan: {} suspicions written to {} in {:.2} s",
                found.len(),
                args.out.display(),
                started.elapsed().as_secs_f64()
            );
            ExitCode::SUCCESS
        }
        Err(e) => {
            eprintln!("naive_scan: error: {e}");
            ExitCode::from(if e.is_bad_input() { 2 } else { 1 })
        }
    }
}
