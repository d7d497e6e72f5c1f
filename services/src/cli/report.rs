//! `telltale report`: the weekly reliability review of [--from, --to) as one
//! self-contained HTML file, or Markdown.

use crate::UsageError;
use anyhow::Context;
use clap::{Args, ValueEnum};
use std::io::Write;
use std::path::{Path, PathBuf};
use telltale_pipelines::report::{ReportSettings, html, markdown, run_report};

/// Output formats of the report.
#[derive(Debug, Clone, Copy, PartialEq, Eq, ValueEnum)]
pub enum ReportFormat {
    /// One self-contained HTML page (inline CSS and SVG, prints on A4)
    Html,
    /// Markdown: the ranked list and the caution, for e-mail and work orders
    Md,
}

/// Arguments of `telltale report`.
///
/// Exit status: 0 when the report was written, 1 on a runtime failure, 2 for
/// bad usage or input.
#[derive(Debug, Args)]
pub struct ReportArgs {
    /// History: a Parquet file or a folder of them
    #[arg(long)]
    pub history: PathBuf,
    /// Fleet registry (TOML): groups, sites, criticality, instrument ranges and normal bands
    #[arg(long)]
    pub fleet: Option<PathBuf>,
    /// Baseline store written by `telltale fit`
    #[arg(long)]
    pub store: PathBuf,
    /// Start of the period, inclusive: RFC 3339 or a date
    #[arg(long)]
    pub from: String,
    /// End of the period, exclusive: RFC 3339 or a date
    #[arg(long)]
    pub to: String,
    /// Output file (default: stdout)
    #[arg(short, long)]
    pub out: Option<PathBuf>,
    /// Output format (default: from the --out extension, .md for Markdown, else html)
    #[arg(long, value_enum)]
    pub format: Option<ReportFormat>,
    /// A `telltale backtest --out` folder whose figures to add (its summary.json)
    #[arg(long)]
    pub backtest: Option<PathBuf>,
    /// Panels drawn, from the top of the ranked list
    #[arg(long, default_value_t = telltale_pipelines::report::DEFAULT_PANEL_CAP)]
    pub panels: usize,
    /// Skip unreadable history files (each is reported) instead of failing
    #[arg(long)]
    pub skip_bad_files: bool,
    /// Threads (default: the available cores)
    #[arg(short = 'j', long)]
    pub threads: Option<usize>,
}

impl ReportArgs {
    /// Every flag checked before any data is read.
    pub(crate) fn settings(&self) -> Result<ReportSettings, UsageError> {
        let from = super::time_flag_ms("from", &self.from)?;
        let to = super::time_flag_ms("to", &self.to)?;
        super::check_span("report period", (&self.from, from), (&self.to, to))?;
        super::check_fleet_flag(self.fleet.as_ref())?;
        super::check_store_flag(&self.store)?;
        if let Some(dir) = &self.backtest
            && !dir.join("summary.json").is_file()
        {
            return Err(UsageError(format!(
                "--backtest {}: no summary.json there; give the --out folder of `telltale backtest`",
                dir.display()
            )));
        }
        let threads = super::threads_flag(self.threads)?;
        let mut s = ReportSettings::new(&self.history, &self.store, from, to);
        s.registry = self.fleet.clone();
        s.backtest = self.backtest.clone();
        s.panel_cap = self.panels;
        s.skip_bad_files = self.skip_bad_files;
        s.threads = threads;
        Ok(s)
    }

    fn format(&self) -> ReportFormat {
        match (self.format, &self.out) {
            (Some(f), _) => f,
            (None, Some(p))
                if p.extension().is_some_and(|e| {
                    e.eq_ignore_ascii_case("md") || e.eq_ignore_ascii_case("markdown")
                }) =>
            {
                ReportFormat::Md
            }
            _ => ReportFormat::Html,
        }
    }
}

/// Writes `text` to `path` through a temporary file beside it (atomic rename).
pub(crate) fn write_file(path: &Path, text: &str) -> anyhow::Result<()> {
    let tmp = path.with_extension(format!(
        "{}.tmp",
        path.extension().and_then(|e| e.to_str()).unwrap_or("out")
    ));
    std::fs::write(&tmp, text)
        .and_then(|()| std::fs::rename(&tmp, path))
        .with_context(|| format!("writing the report to {}", path.display()))
}

pub(crate) fn run(args: &ReportArgs) -> anyhow::Result<()> {
    let settings = args.settings()?;
    let format = args.format();
    super::size_global_pool(args.threads);
    let started = std::time::Instant::now();
    let report = run_report(&settings).with_context(|| {
        format!("reporting {} against {}", args.history.display(), args.store.display())
    })?;
    let text = match format {
        ReportFormat::Html => html::render(&report).context("drawing the report")?,
        ReportFormat::Md => markdown::render(&report),
    };
    tracing::info!(
        assets = report.fleet.assets,
        suspicions = report.items.len(),
        panels = report.panels.len(),
        bytes = text.len(),
        seconds = format!("{:.1}", started.elapsed().as_secs_f64()),
        "report written"
    );
    match &args.out {
        Some(p) => write_file(p, &text),
        None => {
            let mut out = std::io::stdout().lock();
            out.write_all(text.as_bytes()).context("writing the report to stdout")?;
            out.flush().context("writing the report to stdout")
        }
    }
}
