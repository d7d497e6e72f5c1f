//! `telltale import-events`: turn a work-order export (CSV) into an events
//! file (DESIGN.md 4.3) of `failure` and `maintenance` records. The rules
//! (columns, time forms, keyword matching, failure-over-maintenance
//! precedence) live in [`telltale_pipelines::jobs::workorders`]; this verb
//! checks the flags, runs the import, writes the files and prints a summary.

use crate::UsageError;
use anyhow::Context;
use clap::Args;
use std::io::Write;
use std::path::{Path, PathBuf};
use telltale_pipelines::io::{FileFormat, write_events};
use telltale_pipelines::jobs::{
    ImportReport, ImportSettings, ValidImportSettings, import_workorders, write_rejects,
};
use telltale_pipelines::record::Class;
use telltale_pipelines::registry::Registry;
use telltale_pipelines::time::format_time;

/// How many unused rows the summary lists.
const SHOWN_UNUSED: usize = 5;

/// Arguments of `telltale import-events`.
///
/// Exit status: 0 when at least one row gave an event (unused rows are
/// reported, not fatal), 1 when a file cannot be written, 2 for bad usage,
/// bad input, or when no row could be used.
#[derive(Debug, Args)]
pub struct ImportArgs {
    /// Work-order export (CSV with a header row)
    #[arg(long, value_name = "FILE")]
    pub workorders: PathBuf,
    /// Events file to write (.csv, .jsonl or .parquet), replaced atomically
    #[arg(long, value_name = "EVENTS.csv")]
    pub out: PathBuf,
    /// Column holding the asset id
    #[arg(long, default_value = "asset", value_name = "NAME")]
    pub asset_column: String,
    /// Column holding the work order's time (the event start)
    #[arg(long, default_value = "date", value_name = "NAME")]
    pub date_column: String,
    /// Column holding the free text matched against the keywords (the event note)
    #[arg(long, default_value = "description", value_name = "NAME")]
    pub text_column: String,
    /// Column holding the end of the work (optional; empty cells mean no end)
    #[arg(long, value_name = "NAME")]
    pub end_column: Option<String>,
    /// Extra time layout (chrono strftime, e.g. "%d/%m/%Y %H:%M"), tried before RFC 3339,
    /// YYYY-MM-DD and YYYY-MM-DD HH:MM[:SS]; times without an offset are read as UTC
    #[arg(long, value_name = "FORMAT")]
    pub date_format: Option<String>,
    /// Failure keywords, comma-separated words or phrases (replace the built-in English list)
    #[arg(long, value_name = "a,b,c")]
    pub failure_words: Option<String>,
    /// Maintenance keywords, comma-separated words or phrases (replace the built-in list)
    #[arg(long, value_name = "a,b,c")]
    pub maintenance_words: Option<String>,
    /// Field delimiter of the export: one character, or "tab"
    #[arg(long, default_value = ",", value_name = "CHAR")]
    pub delimiter: String,
    /// Fleet registry (TOML): rows on assets it does not list are unused
    #[arg(long, value_name = "F")]
    pub fleet: Option<PathBuf>,
    /// Also write the unused rows as CSV (row, reason, detail, then the original fields)
    #[arg(long, value_name = "FILE.csv")]
    pub rejects: Option<PathBuf>,
}

/// A comma-separated keyword flag: trimmed, empty items dropped.
fn word_list(flag: &str, value: &str) -> Result<Vec<String>, UsageError> {
    let words: Vec<String> =
        value.split(',').map(str::trim).filter(|w| !w.is_empty()).map(str::to_owned).collect();
    if words.is_empty() {
        return Err(UsageError(format!(
            "--{flag} {value:?} holds no keyword; give comma-separated words, e.g. \
             \"seized,tripped,burnt out\", or leave the flag out for the built-in list"
        )));
    }
    Ok(words)
}

fn delimiter(value: &str) -> Result<char, UsageError> {
    if value.eq_ignore_ascii_case("tab") || value == "\\t" {
        return Ok('\t');
    }
    let mut chars = value.chars();
    match (chars.next(), chars.next()) {
        (Some(c), None) => Ok(c),
        _ => Err(UsageError(format!(
            "--delimiter {value:?}: give one character such as ',' or ';', or \"tab\""
        ))),
    }
}

/// Whether two paths name the same existing file.
fn same_file(a: &Path, b: &Path) -> bool {
    match (a.canonicalize(), b.canonicalize()) {
        (Ok(x), Ok(y)) => x == y,
        _ => false,
    }
}

impl ImportArgs {
    /// Stage 1: every flag checked before any file is read.
    fn settings(&self) -> Result<ImportSettings, UsageError> {
        if !self.workorders.is_file() {
            return Err(UsageError(format!(
                "--workorders {}: no such file; give the work-order export (CSV)",
                self.workorders.display()
            )));
        }
        super::check_fleet_flag(self.fleet.as_ref())?;
        FileFormat::from_path(&self.out).map_err(|e| UsageError(format!("--out {e}")))?;
        if same_file(&self.out, &self.workorders) {
            return Err(UsageError(format!(
                "--out {} is the work-order export itself; write the events to another file",
                self.out.display()
            )));
        }
        if let Some(r) = &self.rejects {
            if r.extension().and_then(|e| e.to_str()).map(str::to_ascii_lowercase).as_deref()
                != Some("csv")
            {
                return Err(UsageError(format!(
                    "--rejects {}: the rejects file is CSV; give a name ending in .csv",
                    r.display()
                )));
            }
            if same_file(r, &self.workorders) || r == &self.out || same_file(r, &self.out) {
                return Err(UsageError(format!(
                    "--rejects {} is the same file as --workorders or --out; give another name",
                    r.display()
                )));
            }
        }
        let mut s = ImportSettings {
            asset_column: self.asset_column.clone(),
            date_column: self.date_column.clone(),
            text_column: self.text_column.clone(),
            end_column: self.end_column.clone(),
            date_format: self.date_format.clone(),
            delimiter: delimiter(&self.delimiter)?,
            ..ImportSettings::default()
        };
        if let Some(w) = &self.failure_words {
            s.failure_words = word_list("failure-words", w)?;
        }
        if let Some(w) = &self.maintenance_words {
            s.maintenance_words = word_list("maintenance-words", w)?;
        }
        Ok(s)
    }
}

/// The library's setting names, as the flags that set them.
fn flag_words(message: &str) -> String {
    [
        ("asset_column", "--asset-column"),
        ("date_column", "--date-column"),
        ("text_column", "--text-column"),
        ("end_column", "--end-column"),
        ("date_format", "--date-format"),
        ("the failure keyword list", "--failure-words"),
        ("the maintenance keyword list", "--maintenance-words"),
        ("delimiter", "--delimiter"),
    ]
    .iter()
    .fold(message.to_owned(), |m, (from, to)| m.replacen(from, to, 1))
}

pub(crate) fn run(args: &ImportArgs) -> anyhow::Result<()> {
    let mut settings = args.settings()?;
    if let Some(f) = &args.fleet {
        let fleet = Registry::load(f)
            .with_context(|| format!("reading the fleet registry {}", f.display()))?;
        if fleet.assets.is_empty() {
            return Err(UsageError(format!(
                "--fleet {}: the registry lists no [[asset]], so every row would be unused; \
                 add the assets or leave --fleet out",
                f.display()
            ))
            .into());
        }
        settings.known_assets = Some(fleet.assets.iter().map(|a| a.id.clone()).collect());
    }
    let valid: ValidImportSettings = settings.check().map_err(|e| UsageError(flag_words(&e.0)))?;
    let report = import_workorders(&args.workorders, &valid)
        .with_context(|| format!("reading work orders {}", args.workorders.display()))?;

    if let Some(r) = &args.rejects {
        write_rejects(r, &report)
            .with_context(|| format!("writing the rejects file {}", r.display()))?;
        tracing::info!(rejects = %r.display(), rows = report.unused.len(), "unused rows written");
    }
    let wrote = !report.events.is_empty();
    if wrote {
        write_events(&args.out, &report.events)
            .with_context(|| format!("writing events {}", args.out.display()))?;
        tracing::info!(out = %args.out.display(), events = report.events.len(), "events written");
    }
    let mut out = std::io::stdout().lock();
    print_summary(&mut out, args, &report, wrote)?;
    out.flush()?;
    if !wrote {
        let hint = if report.rows_read == 0 {
            "the export has no data rows".to_owned()
        } else {
            format!(
                "none of the {} rows gave an event; see the reasons above{}",
                report.rows_read,
                if args.rejects.is_some() { " and in the rejects file" } else { "" }
            )
        };
        return Err(UsageError(format!(
            "--workorders {}: {hint}; --out {} was not written",
            args.workorders.display(),
            args.out.display()
        ))
        .into());
    }
    Ok(())
}

/// The summary on stdout.
fn print_summary(
    out: &mut impl Write,
    args: &ImportArgs,
    r: &ImportReport,
    wrote: bool,
) -> std::io::Result<()> {
    writeln!(
        out,
        "work orders {}: {} rows read{}",
        args.workorders.display(),
        r.rows_read,
        if r.blank_rows > 0 {
            format!(", {} blank rows skipped", r.blank_rows)
        } else {
            String::new()
        }
    )?;
    let failures = r.count(Class::Failure);
    let maintenance = r.count(Class::Maintenance);
    writeln!(
        out,
        "events {}: failure {}, maintenance {}{}",
        failures + maintenance,
        failures,
        maintenance,
        if wrote { format!(" -> {}", args.out.display()) } else { " (nothing written)".into() }
    )?;
    if let (Some(first), Some(last)) =
        (r.events.iter().map(|e| e.start).min(), r.events.iter().map(|e| e.start).max())
    {
        let assets: std::collections::BTreeSet<&str> =
            r.events.iter().map(|e| e.asset.as_str()).collect();
        writeln!(
            out,
            "span {} .. {} over {} assets",
            format_time(first),
            format_time(last),
            assets.len()
        )?;
    }
    writeln!(out, "unused rows {}", r.unused.len())?;
    for (reason, n) in r.unused_by_reason() {
        writeln!(out, "  {:<18} {n:>6}", reason.as_str())?;
    }
    if !r.unused.is_empty() {
        writeln!(out, "first unused rows:")?;
        for u in r.unused.iter().take(SHOWN_UNUSED) {
            writeln!(out, "  {}", u.detail)?;
        }
        if r.unused.len() > SHOWN_UNUSED {
            let more = r.unused.len() - SHOWN_UNUSED;
            match &args.rejects {
                Some(p) => writeln!(out, "  ... {more} more in {}", p.display())?,
                None => writeln!(out, "  ... {more} more; --rejects FILE.csv lists them all")?,
            }
        }
    }
    Ok(())
}
