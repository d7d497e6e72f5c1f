//! `telltale demo`: generate the demo fleet (a water utility's pumping
//! stations) with its ground truth.

use crate::UsageError;
use anyhow::Context;
use clap::{Args, ValueEnum};
use std::collections::BTreeMap;
use std::io::Write;
use std::path::PathBuf;
use telltale_datasets::{FleetParams, generate_fleet};
use telltale_pipelines::io::{FileFormat, write_events};
use telltale_pipelines::jobs::{FitSettings, ScanSettings, run_fit, run_scan};
use telltale_pipelines::record::Suspicion;
use telltale_pipelines::report::{ReportSettings, html, run_report};
use telltale_pipelines::time::{format_time, from_millis};

/// Size presets of the demo fleet.
#[derive(Debug, Clone, Copy, PartialEq, Eq, ValueEnum)]
pub enum Preset {
    /// 24 pumps, 5 days at 5-minute samples: a few seconds, for trying things out
    Small,
    /// 30 pumps at 3 stations, 12 weeks at 1-minute samples (about 36M rows)
    Demo,
    /// 1,000 pumps, 1 week at 1-minute samples (about 100M rows), for benchmarks
    Benchmark,
}

/// Arguments of `telltale demo`.
#[derive(Debug, Args)]
pub struct DemoArgs {
    /// Directory to write into (created if missing)
    #[arg(short, long, default_value = "telltale-demo")]
    pub out: PathBuf,
    /// Size preset; the flags below override its parts
    #[arg(long, value_enum, default_value_t = Preset::Demo)]
    pub preset: Preset,
    /// Seed of every random stream (same seed, same fleet)
    #[arg(long)]
    pub seed: Option<u64>,
    /// Number of pumping stations
    #[arg(long)]
    pub sites: Option<usize>,
    /// Pumps per station
    #[arg(long)]
    pub pumps_per_site: Option<usize>,
    /// Days of history
    #[arg(long)]
    pub days: Option<u32>,
    /// Clean days at the start, for fitting baselines
    #[arg(long)]
    pub fit_days: Option<u32>,
    /// Sampling interval of every sensor, in seconds
    #[arg(long)]
    pub sample_interval_s: Option<u32>,
    /// Multiplies every sensor's measurement noise (1 = as designed)
    #[arg(long)]
    pub noise: Option<f64>,
    /// Only generate the fleet and its truth; do not fit or scan
    #[arg(long)]
    pub generate_only: bool,
    /// Suspicions shown in the table on stdout (all are in suspicions.jsonl)
    #[arg(long, default_value_t = 15)]
    pub top: usize,
    /// After the run, serve the demo's store over HTTP on this address, with the scan's
    /// suspicions already stored and re-baselining from the demo history (loopback: no key;
    /// any other address: a write key is created and printed once)
    #[arg(long, value_name = "ADDR")]
    pub serve: Option<std::net::SocketAddr>,
}

impl DemoArgs {
    fn params(&self) -> FleetParams {
        let mut p = match self.preset {
            Preset::Small => FleetParams::small(),
            Preset::Demo => FleetParams::demo(),
            Preset::Benchmark => FleetParams::benchmark(),
        };
        if let Some(v) = self.seed {
            p = p.seed(v);
        }
        if let Some(v) = self.sites {
            p = p.sites(v);
        }
        if let Some(v) = self.pumps_per_site {
            p = p.pumps_per_site(v);
        }
        if let Some(v) = self.days {
            p = p.days(v);
        }
        if let Some(v) = self.fit_days {
            p = p.fit_days(v);
        }
        if let Some(v) = self.sample_interval_s {
            p = p.sample_interval_s(v);
        }
        if let Some(v) = self.noise {
            p = p.noise_multiplier(v);
        }
        p
    }
}

/// Name of the ground-truth events file in the demo directory.
pub(crate) const EVENTS_FILE: &str = "events.csv";
/// Name of the whole-asset outages file (coverage facts, not events).
pub(crate) const OUTAGES_FILE: &str = "outages.csv";
/// Name of the suspicions file the demo's scan writes.
pub(crate) const SUSPICIONS_FILE: &str = "suspicions.jsonl";
/// Name of the baseline store folder in the demo directory.
pub(crate) const STORE_DIR: &str = "store";
/// Name of the weekly review page the demo writes (the scan span's last week).
pub(crate) const REVIEW_FILE: &str = "review.html";

pub(crate) fn run(args: &DemoArgs, _quiet: bool) -> anyhow::Result<()> {
    // Stage 1: check every setting before any work.
    if args.serve.is_some() && args.generate_only {
        return Err(UsageError(
            "--serve needs the fitted store: drop --generate-only (or run `telltale serve` on a \
             store of your own)"
                .to_owned(),
        )
        .into());
    }
    let params = args
        .params()
        .check()
        .map_err(|e| UsageError(format!("{e}; adjust the matching `telltale demo` flag")))?;
    tracing::info!(
        assets = params.asset_count(),
        rows = params.grid_rows(),
        out = %args.out.display(),
        "generating the demo fleet"
    );
    let summary = generate_fleet(&params, &args.out)
        .with_context(|| format!("generating the demo fleet into {}", args.out.display()))?;
    let events_path = args.out.join(EVENTS_FILE);
    write_events(&events_path, &summary.events)
        .with_context(|| format!("writing {}", events_path.display()))?;
    let outages_path = args.out.join(OUTAGES_FILE);
    write_outages(&outages_path, &summary.outages)
        .with_context(|| format!("writing {}", outages_path.display()))?;

    let secs = summary.elapsed.as_secs_f64();
    tracing::info!(
        rows = summary.rows,
        seconds = format!("{secs:.1}"),
        rows_per_s = format!("{:.0}", summary.rows as f64 / secs.max(1e-9)),
        "demo fleet written"
    );

    // Data on stdout: what was generated and where the truth lies.
    let mut out = std::io::stdout().lock();
    let t = &summary.timeline;
    writeln!(out, "demo fleet in {}", args.out.display())?;
    writeln!(out, "  history   {} ({} rows)", summary.history.display(), summary.rows)?;
    writeln!(out, "  registry  {}", summary.registry.display())?;
    writeln!(out, "  truth     {} ({} events)", events_path.display(), summary.events.len())?;
    writeln!(
        out,
        "  outages   {} ({} whole-asset outages)",
        outages_path.display(),
        summary.outages.len()
    )?;
    writeln!(
        out,
        "  assets    {} ({} left clean as false-alarm controls)",
        summary.assets.len(),
        summary.clean_assets.len()
    )?;
    writeln!(out, "  fit span  {} .. {}", format_time(t.fit.start), format_time(t.fit.end))?;
    writeln!(out, "  scan span {} .. {}", format_time(t.scan.start), format_time(t.scan.end))?;
    writeln!(out)?;
    writeln!(out, "{:<16} {:<14} {:>6}", "class", "mode", "events")?;
    let mut counts: BTreeMap<(String, String), usize> = BTreeMap::new();
    for e in &summary.events {
        let mode = e.mode.map(|m| m.as_str().to_string()).unwrap_or_else(|| "-".into());
        *counts.entry((e.class.as_str().to_string(), mode)).or_default() += 1;
    }
    for ((class, mode), n) in counts {
        writeln!(out, "{class:<16} {mode:<14} {n:>6}")?;
    }
    out.flush()?;
    drop(out);
    if args.generate_only {
        return Ok(());
    }
    fit_and_scan(args, &summary)
}

/// Fits on the demo's clean weeks, scans the rest, writes suspicions.jsonl
/// and prints the top of the ranked list.
fn fit_and_scan(args: &DemoArgs, summary: &telltale_datasets::FleetSummary) -> anyhow::Result<()> {
    let t = &summary.timeline;
    let store = args.out.join(STORE_DIR);
    let mut fit = FitSettings::new(&summary.history, t.fit.end.timestamp_millis(), &store);
    fit.registry = Some(summary.registry.clone());
    fit.from_ms = Some(t.fit.start.timestamp_millis());
    tracing::info!(store = %store.display(), "fitting baselines on the clean weeks");
    let fitted = run_fit(&fit).context("fitting the demo fleet's baselines")?;
    tracing::info!(
        assets = fitted.assets_fitted.len(),
        seconds = format!("{:.1}", fitted.seconds),
        "baselines written"
    );
    let mut scan = ScanSettings::new(
        &summary.history,
        &store,
        t.scan.start.timestamp_millis(),
        t.scan.end.timestamp_millis(),
    );
    scan.registry = Some(summary.registry.clone());
    tracing::info!("scanning the rest of the history");
    let report = run_scan(&scan).context("scanning the demo fleet")?;
    super::scan::log_report(&report);
    let sus_path = args.out.join(SUSPICIONS_FILE);
    super::scan::write_out(&report.suspicions, Some(&sus_path), FileFormat::Jsonl)?;

    // the weekly review of the scan span's last week (the week before it is
    // the review's previous period)
    let week_ms = 7 * 24 * 3_600_000;
    let to = t.scan.end.timestamp_millis();
    let from = (to - week_ms).max(t.scan.start.timestamp_millis());
    let mut rs = ReportSettings::new(&summary.history, &store, from, to);
    rs.registry = Some(summary.registry.clone());
    tracing::info!("writing the weekly review of the last week");
    let review = run_report(&rs).context("gathering the demo's weekly review")?;
    let page = html::render(&review).context("drawing the demo's weekly review")?;
    let review_path = args.out.join(REVIEW_FILE);
    super::report::write_file(&review_path, &page)?;

    let mut out = std::io::stdout().lock();
    writeln!(out)?;
    writeln!(
        out,
        "fit {} baselines in {:.1} s; scanned {} assets in {:.1} s: {} suspicions",
        fitted.assets_fitted.len(),
        fitted.seconds,
        report.assets_scanned,
        report.seconds,
        report.suspicions.len()
    )?;
    writeln!(out)?;
    print_top(&mut out, &report.suspicions, args.top)?;
    writeln!(out)?;
    writeln!(out, "  suspicions {}", sus_path.display())?;
    writeln!(out, "  baselines  {}", store.display())?;
    writeln!(
        out,
        "  review     {} (the week {} .. {})",
        review_path.display(),
        format_time(from_millis(from)),
        format_time(from_millis(to))
    )?;
    writeln!(
        out,
        "  measure    telltale evaluate --suspicions {} --events {} --outages {} --fleet {} \\\n             --from {} --to {}",
        sus_path.display(),
        args.out.join(EVENTS_FILE).display(),
        args.out.join(OUTAGES_FILE).display(),
        summary.registry.display(),
        format_time(t.scan.start),
        format_time(t.scan.end)
    )?;
    writeln!(
        out,
        "telltale is decision support, not a protective or safety function: follow site \
         procedures before acting."
    )?;
    out.flush()?;
    drop(out);
    match args.serve {
        Some(addr) => serve_demo(addr, &store, &summary.history, &report.suspicions),
        None => Ok(()),
    }
}

/// `--serve`: stores the scan's suspicions in the demo's database (one
/// scored-window row per asset over the scan span) and serves the store,
/// with re-baselining from the demo history.
fn serve_demo(
    addr: std::net::SocketAddr,
    store: &std::path::Path,
    history: &std::path::Path,
    found: &[Suspicion],
) -> anyhow::Result<()> {
    use crate::serve::db::{Db, Scope, WindowRecord};
    use telltale_pipelines::jobs::Store;
    use telltale_pipelines::jobs::scan::priority;
    let db_file = super::serve::db_path(None, store);
    let db = Db::open(&db_file).with_context(|| format!("opening {}", db_file.display()))?;
    let baselines = Store::open(store)?;
    let mut by_asset: BTreeMap<&str, Vec<(Suspicion, f64)>> = BTreeMap::new();
    for s in found {
        let crit = baselines.read_baseline(&s.asset).map_or(3, |b| b.criticality);
        by_asset.entry(&s.asset).or_default().push((s.clone(), priority(s, crit)));
    }
    for (asset, items) in &by_asset {
        let (from, to) = items.iter().fold((i64::MAX, i64::MIN), |(a, b), (s, _)| {
            let d = s.detected.timestamp_millis();
            (a.min(d), b.max(d + 1))
        });
        let w = WindowRecord {
            asset: (*asset).to_owned(),
            from_ms: from,
            to_ms: to,
            readings: 0,
            key_id: None,
        };
        db.record_window(&w, items, None)
            .with_context(|| format!("storing the scan's suspicions in {}", db_file.display()))?;
    }
    let open = addr.ip().is_loopback();
    let mut argv: Vec<String> = ["serve", "--store"].map(String::from).to_vec();
    argv.push(store.display().to_string());
    argv.extend(["--listen".to_owned(), addr.to_string(), "--history".to_owned()]);
    argv.push(history.display().to_string());
    if open {
        argv.push("--open".to_owned());
    } else if db.active_keys()? == 0 {
        let (info, key) = db.add_key("demo", Scope::Write)?;
        println!(
            "write key {} (shown once; `telltale keys list --db {}`): {key}",
            info.id,
            db_file.display()
        );
    }
    drop(db);
    tracing::info!(suspicions = found.len(), db = %db_file.display(), "serving the demo store");
    #[derive(clap::Parser)]
    struct Wrap {
        #[command(flatten)]
        serve: super::serve::ServeArgs,
    }
    let wrap = <Wrap as clap::Parser>::try_parse_from(&argv)
        .map_err(|e| UsageError(format!("--serve {addr}: {e}")))?;
    super::serve::run(&wrap.serve)
}

/// The ranked list as a table: one line per suspicion, the summary below it.
fn print_top(out: &mut impl Write, items: &[Suspicion], top: usize) -> std::io::Result<()> {
    let aw = items.iter().take(top).map(|s| s.asset.len()).max().unwrap_or(5).max(5);
    let sw = items
        .iter()
        .take(top)
        .map(|s| s.sensor.as_deref().map_or(1, str::len))
        .max()
        .unwrap_or(6)
        .max(6);
    writeln!(
        out,
        "{:>4}  {:<aw$}  {:<sw$}  {:<30}  {:>5}  {:<20}",
        "rank", "asset", "sensor", "verdict", "score", "onset"
    )?;
    for s in items.iter().take(top) {
        writeln!(
            out,
            "{:>4}  {:<aw$}  {:<sw$}  {:<30}  {:>5.2}  {:<20}",
            s.rank,
            s.asset,
            s.sensor.as_deref().unwrap_or("-"),
            format!("{}/{}", s.class, s.mode),
            s.score,
            format_time(s.onset)
        )?;
        writeln!(out, "      {}", s.summary)?;
    }
    if items.len() > top {
        writeln!(out, "  ... {} more in the file", items.len() - top)?;
    }
    Ok(())
}

fn write_outages(
    path: &std::path::Path,
    outages: &[telltale_datasets::Outage],
) -> anyhow::Result<()> {
    let mut w = csv::Writer::from_path(path)?;
    w.write_record(["asset", "start", "end", "note"])?;
    for o in outages {
        w.write_record([&o.asset, &format_time(o.start), &format_time(o.end), &o.note])?;
    }
    w.flush()?;
    Ok(())
}
