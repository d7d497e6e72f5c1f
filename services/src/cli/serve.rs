//! `telltale serve`: the HTTP service over a baseline store and a SQLite
//! database (see the `serve` module).

use crate::UsageError;
use crate::serve::db::Db;
use crate::serve::rebaseline::RebaselineConfig;
use crate::serve::webhook::WebhookConfig;
use crate::serve::window::WindowLimits;
use crate::serve::{AppState, Limits, ServeConfig};
use anyhow::Context;
use clap::Args;
use std::net::SocketAddr;
use std::path::PathBuf;
use std::time::Duration;
use telltale_pipelines::jobs::Store;

/// Arguments of `telltale serve`.
///
/// Refuses to start without an active API key (create one with `telltale
/// keys add`) unless `--open` is given and the address is loopback.
/// Exit status: 0 after a clean shutdown (ctrl-c or SIGTERM), 1 on a runtime
/// failure, 2 for bad usage.
#[derive(Debug, Args)]
pub struct ServeArgs {
    /// Baseline store written by `telltale fit`
    #[arg(long)]
    pub store: PathBuf,
    /// SQLite database for suspicions, feedback and keys (default: STORE/telltale.db)
    #[arg(long)]
    pub db: Option<PathBuf>,
    /// Address to listen on (port 0: any free port; the bound address is printed on stdout)
    #[arg(long, default_value = "127.0.0.1:8467")]
    pub listen: SocketAddr,
    /// Serve without API keys; allowed only on a loopback address
    #[arg(long)]
    pub open: bool,
    /// Largest request body, in MiB
    #[arg(long, default_value_t = 16)]
    pub max_body_mib: usize,
    /// Most readings in one scoring request
    #[arg(long, default_value_t = 200_000)]
    pub max_readings: usize,
    /// Longest window, in hours
    #[arg(long, default_value_t = 168)]
    pub max_span_hours: u32,
    /// Longest time one request may take, in seconds
    #[arg(long, default_value_t = 30)]
    pub request_timeout_s: u64,
    /// Post new and escalated suspicions to this http:// URL (signed; see --webhook-secret-file)
    #[arg(long, value_name = "URL")]
    pub webhook_url: Option<String>,
    /// File holding the webhook's shared secret (the HMAC-SHA256 key); needed with --webhook-url
    #[arg(long, value_name = "FILE")]
    pub webhook_secret_file: Option<PathBuf>,
    /// Notify suspicions whose score reaches this (0..1)
    #[arg(long, default_value_t = 0.5)]
    pub webhook_min_score: f64,
    /// First retry delay after a failed delivery, in milliseconds (doubles per attempt, at most 10 min)
    #[arg(long, default_value_t = 1000)]
    pub webhook_retry_ms: u64,
    /// Archived history (Parquet file or directory) that re-baselines after an accepted process
    /// change learn from; without it they wait (and say so)
    #[arg(long, value_name = "H")]
    pub history: Option<PathBuf>,
    /// A re-baseline learns from at most this many days after the change's onset
    #[arg(long, default_value_t = 7.0)]
    pub rebaseline_learn_days: f64,
    /// ... and waits until the history holds at least this many hours after the onset
    #[arg(long, default_value_t = 24.0)]
    pub rebaseline_min_hours: f64,
    /// How often waiting re-baselines are tried again, in seconds
    #[arg(long, default_value_t = 600)]
    pub rebaseline_retry_s: u64,
}

impl ServeArgs {
    pub(crate) fn config(&self) -> Result<ServeConfig, UsageError> {
        if !self.store.is_dir() {
            return Err(UsageError(format!(
                "--store {}: no such directory; run `telltale fit --store {}` first",
                self.store.display(),
                self.store.display()
            )));
        }
        if self.open && !self.listen.ip().is_loopback() {
            return Err(UsageError(format!(
                "--open serves without keys and is allowed only on a loopback address, not {}; \
                 drop --open and create a key with `telltale keys add`",
                self.listen
            )));
        }
        if self.max_body_mib == 0 || self.max_readings == 0 || self.max_span_hours == 0 {
            return Err(UsageError(
                "--max-body-mib, --max-readings and --max-span-hours must be at least 1".to_owned(),
            ));
        }
        if self.request_timeout_s == 0 {
            return Err(UsageError("--request-timeout-s must be at least 1".to_owned()));
        }
        let d = Limits::default();
        let limits = Limits {
            body_bytes: self.max_body_mib << 20,
            window: WindowLimits {
                max_readings: self.max_readings,
                max_span_ms: i64::from(self.max_span_hours) * 3_600_000,
                ..d.window
            },
            request_timeout: Duration::from_secs(self.request_timeout_s),
            ..d
        };
        let webhook = match (&self.webhook_url, &self.webhook_secret_file) {
            (None, None) => None,
            (None, Some(_)) => {
                return Err(UsageError("--webhook-secret-file needs --webhook-url".to_owned()));
            }
            (Some(_), None) => {
                return Err(UsageError(
                    "--webhook-url needs --webhook-secret-file, the file with the signing secret"
                        .to_owned(),
                ));
            }
            (Some(url), Some(file)) => {
                if !url.starts_with("http://") {
                    return Err(UsageError(format!(
                        "--webhook-url {url}: only http:// is supported (this build has no TLS); \
                         reach an https:// endpoint through a local relay"
                    )));
                }
                let secret = std::fs::read(file).map_err(|e| {
                    UsageError(format!("--webhook-secret-file {}: {e}", file.display()))
                })?;
                let secret = secret.trim_ascii().to_vec();
                if secret.len() < 16 {
                    return Err(UsageError(format!(
                        "--webhook-secret-file {}: the secret has {} bytes; use at least 16",
                        file.display(),
                        secret.len()
                    )));
                }
                if !(0.0..=1.0).contains(&self.webhook_min_score) {
                    return Err(UsageError(format!(
                        "--webhook-min-score {} is not in 0..1",
                        self.webhook_min_score
                    )));
                }
                Some(WebhookConfig {
                    url: url.clone(),
                    secret,
                    min_score: self.webhook_min_score,
                    retry_base: Duration::from_millis(self.webhook_retry_ms.max(1)),
                })
            }
        };
        if let Some(h) = &self.history
            && !h.exists()
        {
            return Err(UsageError(format!(
                "--history {}: no such file or directory; give the Parquet history that                  `telltale fit` read",
                h.display()
            )));
        }
        let hours = |x: f64| (x * 3_600_000.0).round() as i64;
        if !(self.rebaseline_min_hours > 0.0
            && self.rebaseline_learn_days * 24.0 >= self.rebaseline_min_hours
            && self.rebaseline_learn_days <= 366.0)
        {
            return Err(UsageError(format!(
                "--rebaseline-min-hours {} and --rebaseline-learn-days {}: need 0 < min hours <=                  learn days x 24, and learn days <= 366",
                self.rebaseline_min_hours, self.rebaseline_learn_days
            )));
        }
        if self.rebaseline_retry_s == 0 {
            return Err(UsageError("--rebaseline-retry-s must be at least 1".to_owned()));
        }
        let rebaseline = RebaselineConfig {
            history: self.history.clone(),
            learn_ms: hours(self.rebaseline_learn_days * 24.0),
            min_span_ms: hours(self.rebaseline_min_hours),
            retry: Duration::from_secs(self.rebaseline_retry_s),
        };
        Ok(ServeConfig {
            webhook,
            rebaseline,
            store: self.store.clone(),
            db: db_path(self.db.as_ref(), &self.store),
            listen: self.listen,
            open: self.open,
            limits,
        })
    }
}

/// The database path: `--db`, else `STORE/telltale.db`.
pub(crate) fn db_path(db: Option<&PathBuf>, store: &std::path::Path) -> PathBuf {
    db.cloned().unwrap_or_else(|| store.join("telltale.db"))
}

pub(crate) fn run(args: &ServeArgs) -> anyhow::Result<()> {
    let cfg = args.config()?;
    let store = Store::open(&cfg.store)?;
    let db = Db::open(&cfg.db).with_context(|| format!("opening --db {}", cfg.db.display()))?;
    if !cfg.open && db.active_keys()? == 0 {
        return Err(UsageError(format!(
            "{} holds no active API key; create one with `telltale keys add --db {} --scope write \
             --name NAME`, or run with --open on a loopback address",
            cfg.db.display(),
            cfg.db.display()
        ))
        .into());
    }
    if cfg.open {
        tracing::warn!("serving without API keys (--open): anyone on this machine can write");
    }
    let notify_at = cfg.webhook.as_ref().map(|w| w.min_score);
    let state = AppState::new(store, db, cfg.limits, cfg.open, notify_at);
    let workers = std::thread::available_parallelism().map_or(2, usize::from);
    let rt = tokio::runtime::Builder::new_multi_thread()
        .worker_threads(workers)
        .max_blocking_threads(4 * workers)
        .thread_name("telltale-serve")
        .enable_all()
        .build()
        .context("starting the async runtime")?;
    rt.block_on(crate::serve::serve(
        state,
        cfg.listen,
        cfg.webhook.clone(),
        cfg.rebaseline.clone(),
    ))
    .with_context(|| format!("serving on --listen {}", cfg.listen))?;
    tracing::info!("stopped");
    Ok(())
}
