//! # telltale
//!
//! The `telltale` command. This crate is thin: it parses and validates
//! arguments, calls the library crates, and maps errors to exit codes. All
//! statistics live in `telltale-models`; all file handling in
//! `telltale-pipelines`; the demo fleet in `telltale-datasets`.
//!
//! Exit codes: `0` finished (with or without suspicions), `1` runtime
//! failure, `2` bad usage or bad input. A broken pipe on stdout exits `0`.

pub mod cli;
pub mod logging;
pub mod serve;

/// A usage or input error: exit code 2, with a message that says what to fix.
#[derive(Debug, thiserror::Error)]
#[error("{0}")]
pub struct UsageError(pub String);

/// Run one parsed command line.
///
/// # Errors
/// Any failure, with context naming the file or flag at fault.
pub fn run(cli: cli::Cli) -> anyhow::Result<()> {
    cli::dispatch(cli)
}

/// The exit code for an error: 2 when the user's input or usage is at fault, 1 otherwise.
pub fn exit_code(err: &anyhow::Error) -> u8 {
    for cause in err.chain() {
        if cause.downcast_ref::<UsageError>().is_some() {
            return 2;
        }
        if let Some(e) = cause.downcast_ref::<telltale_pipelines::Error>() {
            return if e.is_bad_input() { 2 } else { 1 };
        }
    }
    1
}

/// Whether the error is a broken pipe on stdout (the reader went away: not a failure).
pub fn is_broken_pipe(err: &anyhow::Error) -> bool {
    err.chain().any(|c| {
        c.downcast_ref::<std::io::Error>()
            .is_some_and(|e| e.kind() == std::io::ErrorKind::BrokenPipe)
    })
}
