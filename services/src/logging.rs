//! Logs and progress go to stderr; stdout carries data only.

use std::io::IsTerminal;
use tracing_subscriber::EnvFilter;

/// How log lines on stderr are written.
#[derive(Debug, Clone, Copy, PartialEq, Eq, Default, clap::ValueEnum)]
pub enum LogFormat {
    /// Plain lines for people: level and message, no timestamps.
    #[default]
    Text,
    /// One JSON object per line for log collectors: `timestamp` (RFC 3339,
    /// UTC), `level`, `fields` (with `message`), and the spans in effect
    /// (`span`, `spans`: a served request's method, route and uri).
    Json,
}

/// Install the stderr subscriber. `-v` raises the level, `-q` lowers it;
/// `RUST_LOG` overrides both. Colour only on a terminal and never with `NO_COLOR`.
pub fn init(verbose: u8, quiet: bool, format: LogFormat) {
    let level = match (quiet, verbose) {
        (true, _) => "error",
        (false, 0) => "info",
        (false, 1) => "debug",
        (false, _) => "trace",
    };
    let filter = EnvFilter::try_from_default_env().unwrap_or_else(|_| EnvFilter::new(level));
    let ansi = std::io::stderr().is_terminal() && std::env::var_os("NO_COLOR").is_none();
    let _ = match format {
        LogFormat::Text => tracing_subscriber::fmt()
            .with_env_filter(filter)
            .with_writer(std::io::stderr)
            .with_ansi(ansi)
            .with_target(false)
            .without_time()
            .try_init(),
        LogFormat::Json => tracing_subscriber::fmt()
            .json()
            .with_env_filter(filter)
            .with_writer(std::io::stderr)
            .with_target(false)
            .try_init(),
    };
}

/// Whether progress bars should be drawn: stderr is a terminal and not quiet.
pub fn show_progress(quiet: bool) -> bool {
    !quiet && std::io::stderr().is_terminal()
}
