//! `telltale evaluate`: detection quality of a suspicion file against
//! ground-truth events. The rules live in
//! [`telltale_pipelines::jobs::evaluate`]; this verb reads the files, prints
//! the tables and writes the JSON report.

use crate::UsageError;
use anyhow::Context;
use chrono::{DateTime, TimeDelta, Utc};
use clap::Args;
use std::io::Write;
use std::path::{Path, PathBuf};
use telltale_pipelines::io::{read_events, read_suspicions};
use telltale_pipelines::jobs::{EvaluateSettings, EvaluationReport, Score, evaluate, read_outages};
use telltale_pipelines::registry::Registry;
use telltale_pipelines::time::{format_time, parse_time};

/// Arguments of `telltale evaluate`.
///
/// Exit status: 0 when the report was written (whatever the figures), 1 when
/// the JSON report cannot be written, 2 for bad usage or bad input.
#[derive(Debug, Args)]
pub struct EvaluateArgs {
    /// Suspicions to judge (JSON Lines, CSV or Parquet, as `telltale scan` writes)
    #[arg(long)]
    pub suspicions: PathBuf,
    /// Ground-truth events (CSV, JSON Lines or Parquet: asset,sensor,class,mode,start,end,note)
    #[arg(long)]
    pub events: PathBuf,
    /// Fleet registry (TOML): its assets are the false-alarm exposure
    #[arg(long)]
    pub fleet: PathBuf,
    /// Start of the evaluation span, inclusive: RFC 3339 or a date
    #[arg(long)]
    pub from: String,
    /// End of the evaluation span, exclusive: RFC 3339 or a date
    #[arg(long)]
    pub to: String,
    /// Whole-asset outages (CSV: asset,start,end,note), left out of the clean time
    #[arg(long)]
    pub outages: Option<PathBuf>,
    /// Also write the full report as JSON to this file
    #[arg(long, value_name = "OUT.json")]
    pub json: Option<PathBuf>,
    /// Late detections accepted after an event ends, hours
    #[arg(long, default_value_t = 24.0, value_name = "H")]
    pub grace_hours: f64,
    /// How far a suspicion's onset may precede an event's start, hours
    #[arg(long, default_value_t = 24.0, value_name = "H")]
    pub onset_tolerance_hours: f64,
}

fn time_flag(flag: &str, value: &str) -> Result<DateTime<Utc>, UsageError> {
    parse_time(value).map_err(|e| UsageError(format!("--{flag}: {e}")))
}

pub(crate) fn hours_flag(flag: &str, h: f64) -> Result<TimeDelta, UsageError> {
    // 10^6 h is over a century: far beyond any sensible window
    if !h.is_finite() || !(0.0..=1e6).contains(&h) {
        return Err(UsageError(format!("--{flag} must be between 0 and 1000000 hours, got {h}")));
    }
    Ok(TimeDelta::milliseconds((h * 3_600_000.0).round() as i64))
}

pub(crate) fn input_file(flag: &str, path: &Path) -> Result<(), UsageError> {
    if path.is_file() {
        Ok(())
    } else {
        Err(UsageError(format!("--{flag} {}: no such file", path.display())))
    }
}

impl EvaluateArgs {
    /// Stage 1: every flag checked before any file is read.
    fn settings(&self) -> Result<EvaluateSettings, UsageError> {
        let from = time_flag("from", &self.from)?;
        let to = time_flag("to", &self.to)?;
        super::check_span(
            "span",
            (&self.from, from.timestamp_millis()),
            (&self.to, to.timestamp_millis()),
        )?;
        let mut s = EvaluateSettings::new(from, to);
        s.grace = hours_flag("grace-hours", self.grace_hours)?;
        s.onset_tolerance = hours_flag("onset-tolerance-hours", self.onset_tolerance_hours)?;
        input_file("suspicions", &self.suspicions)?;
        input_file("events", &self.events)?;
        input_file("fleet", &self.fleet)?;
        if let Some(o) = &self.outages {
            input_file("outages", o)?;
        }
        s.check().map_err(|e| UsageError(e.0))?;
        Ok(s)
    }
}

pub(crate) fn run(args: &EvaluateArgs) -> anyhow::Result<()> {
    let settings = args.settings()?;
    let suspicions = read_suspicions(&args.suspicions)
        .with_context(|| format!("reading suspicions {}", args.suspicions.display()))?;
    let events = read_events(&args.events)
        .with_context(|| format!("reading events {}", args.events.display()))?;
    let fleet = Registry::load(&args.fleet)
        .with_context(|| format!("reading the fleet registry {}", args.fleet.display()))?;
    let outages = match &args.outages {
        Some(p) => read_outages(p).with_context(|| format!("reading outages {}", p.display()))?,
        None => Vec::new(),
    };
    let assets: Vec<String> = fleet.assets.iter().map(|a| a.id.clone()).collect();
    if assets.is_empty() {
        return Err(UsageError(format!(
            "--fleet {}: the registry lists no [[asset]]; false-alarm exposure needs the fleet's \
             assets",
            args.fleet.display()
        ))
        .into());
    }
    let report = evaluate(&suspicions, &events, &assets, &outages, &settings)
        .map_err(|e| UsageError(e.0))?;
    if report.suspicions.unknown_asset > 0 {
        tracing::warn!(
            suspicions = report.suspicions.unknown_asset,
            fleet = %args.fleet.display(),
            "suspicions on assets missing from the fleet: counted as false alarms, outside the exposure"
        );
    }
    if report.events.unknown_asset > 0 {
        tracing::warn!(
            events = report.events.unknown_asset,
            fleet = %args.fleet.display(),
            "events on assets missing from the fleet"
        );
    }
    if let Some(path) = &args.json {
        let text = report.to_json().context("serialising the report")?;
        std::fs::write(path, text + "\n")
            .with_context(|| format!("writing the JSON report {}", path.display()))?;
        tracing::info!(json = %path.display(), "report written");
    }
    let mut out = std::io::stdout().lock();
    print_report(&mut out, &report)?;
    out.flush()?;
    Ok(())
}

pub(crate) fn pct(x: Option<f64>) -> String {
    x.map_or_else(|| "-".to_owned(), |v| format!("{:.1}%", 100.0 * v))
}

pub(crate) fn num(x: Option<f64>) -> String {
    x.map_or_else(|| "-".to_owned(), |v| format!("{v:.1}"))
}

fn score_cells(s: &Score) -> String {
    format!(
        "{:>6}  {:>8}  {:>6}  {:>9}  {:>8}  {:>9}  {:>9}",
        s.events,
        s.detected,
        pct(s.recall),
        pct(s.class_accuracy),
        pct(s.mode_accuracy),
        num(s.delay_median_hours),
        num(s.delay_p90_hours)
    )
}

/// The tables on stdout.
pub(crate) fn print_report(out: &mut impl Write, r: &EvaluationReport) -> std::io::Result<()> {
    let s = &r.settings;
    writeln!(
        out,
        "evaluation {} .. {} (grace {} h, onset tolerance {} h)",
        format_time(s.from),
        format_time(s.to),
        s.grace_hours,
        s.onset_tolerance_hours
    )?;
    writeln!(
        out,
        "suspicions {} in span ({} outside, ignored); events {} scored of {}, {} failures",
        r.suspicions.in_span,
        r.suspicions.outside_span,
        r.events.scored,
        r.events.total,
        r.events.failures
    )?;

    writeln!(out, "\ndetection by class (delay in hours from event start to best match)")?;
    let head = format!(
        "{:>6}  {:>8}  {:>6}  {:>9}  {:>8}  {:>9}  {:>9}",
        "events", "detected", "recall", "class_acc", "mode_acc", "delay_med", "delay_p90"
    );
    writeln!(out, "{:<16} {head}", "class")?;
    for c in &r.by_class {
        writeln!(out, "{:<16} {}", c.class.as_str(), score_cells(&c.score))?;
    }
    writeln!(out, "{:<16} {}", "all", score_cells(&r.overall))?;

    writeln!(out, "\ndetection by mode")?;
    writeln!(out, "{:<16} {:<14} {head}", "class", "mode")?;
    for m in &r.by_mode {
        writeln!(
            out,
            "{:<16} {:<14} {}",
            m.class.as_str(),
            m.mode.as_str(),
            score_cells(&m.score)
        )?;
    }

    writeln!(out, "\nconfusion (true class -> class of the best match)")?;
    writeln!(
        out,
        "{:<16} {:>12}  {:>14}  {:>15}  {:>6}",
        "truth", "sensor_fault", "process_change", "equipment_fault", "missed"
    )?;
    for row in &r.confusion {
        writeln!(
            out,
            "{:<16} {:>12}  {:>14}  {:>15}  {:>6}",
            row.truth.as_str(),
            row.sensor_fault,
            row.process_change,
            row.equipment_fault,
            row.missed
        )?;
    }

    let lt = &r.lead_time;
    writeln!(
        out,
        "\nlead time before failures (earliest equipment_fault suspicion in the window)"
    )?;
    if lt.failures.is_empty() {
        writeln!(out, "no failure in the span")?;
    } else {
        let w = lt.failures.iter().map(|f| f.asset.len()).max().unwrap_or(5).max(5);
        writeln!(
            out,
            "{:<w$}  {:<20}  {:<20}  {:<11}  {:<20}  {:>7}",
            "asset", "failure", "window_from", "opened_by", "warned_at", "lead_h"
        )?;
        for f in &lt.failures {
            writeln!(
                out,
                "{:<w$}  {:<20}  {:<20}  {:<11}  {:<20}  {:>7}",
                f.asset,
                format_time(f.at),
                format_time(f.window_start),
                match f.window_open {
                    telltale_pipelines::jobs::WindowOpen::Degradation => "degradation",
                    _ => "lookback",
                },
                f.warned_at.map_or_else(|| "not warned".to_owned(), format_time),
                num(f.lead_hours)
            )?;
        }
        let marks: Vec<String> = lt
            .marks
            .iter()
            .map(|m| {
                format!(">= {} h {}/{} ({})", m.hours, m.warned, lt.failures.len(), pct(m.share))
            })
            .collect();
        writeln!(
            out,
            "warned {}/{}; median lead {} h; {}",
            lt.warned,
            lt.failures.len(),
            num(lt.median_hours),
            marks.join(", ")
        )?;
    }

    let fa = &r.false_alarms;
    writeln!(out, "\nfalse alarms (suspicions matching no event)")?;
    writeln!(
        out,
        "total {}: {} in clean time, {} in maintenance windows, {} in outages, {} on assets \
         outside the fleet; {} unmatched inside event windows not counted",
        fa.total,
        fa.in_clean_time,
        fa.in_maintenance,
        fa.in_outages,
        fa.unknown_asset,
        fa.not_counted_during_events
    )?;
    writeln!(
        out,
        "clean time    {:>8.1} asset-weeks  {:>4} false alarms  {:>7} per 100 asset-weeks",
        fa.exposure_asset_weeks,
        fa.in_clean_time,
        num2(fa.per_100_asset_weeks)
    )?;
    writeln!(
        out,
        "clean assets  {:>8.1} asset-weeks  {:>4} false alarms  {:>7} per 100 asset-weeks ({} assets)",
        fa.clean_assets.exposure_asset_weeks,
        fa.clean_assets.false_alarms,
        num2(fa.clean_assets.per_100_asset_weeks),
        fa.clean_assets.assets.len()
    )?;

    writeln!(out, "\nevents")?;
    let wa = r.per_event.iter().map(|e| e.asset.len()).max().unwrap_or(5).max(5);
    let ws = r
        .per_event
        .iter()
        .filter_map(|e| e.sensor.as_ref().map(String::len))
        .max()
        .unwrap_or(6)
        .max(6);
    writeln!(
        out,
        "{:<wa$}  {:<ws$}  {:<15}  {:<13}  {:<20}  {:<8}  {:<15}  {:<13}  {:>7}",
        "asset",
        "sensor",
        "class",
        "mode",
        "start",
        "detected",
        "best_class",
        "best_mode",
        "delay_h"
    )?;
    for e in &r.per_event {
        let (class, mode, delay) = match &e.best {
            Some(b) => (b.class.as_str(), b.mode.as_str(), format!("{:.1}", b.delay_hours)),
            None => ("-", "-", "-".to_owned()),
        };
        writeln!(
            out,
            "{:<wa$}  {:<ws$}  {:<15}  {:<13}  {:<20}  {:<8}  {:<15}  {:<13}  {:>7}",
            e.asset,
            e.sensor.as_deref().unwrap_or("-"),
            e.class.as_str(),
            e.mode.map_or("-", |m| m.as_str()),
            format_time(e.start),
            if e.detected() { "yes" } else { "no" },
            class,
            mode,
            delay
        )?;
    }
    Ok(())
}

pub(crate) fn num2(x: Option<f64>) -> String {
    x.map_or_else(|| "-".to_owned(), |v| format!("{v:.2}"))
}
