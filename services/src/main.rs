//! The `telltale` binary: parse arguments, set up logging, run, map the result
//! to an exit code (0 finished, 1 runtime failure, 2 bad usage or bad input).

use clap::Parser;
use std::process::ExitCode;

fn main() -> ExitCode {
    let cli = telltale::cli::Cli::parse();
    let format = cli.log_format;
    telltale::logging::init(cli.verbose, cli.quiet, format);
    match telltale::run(cli) {
        Ok(()) => ExitCode::SUCCESS,
        Err(err) => {
            if telltale::is_broken_pipe(&err) {
                return ExitCode::SUCCESS;
            }
            if format == telltale::logging::LogFormat::Json {
                tracing::error!(error = %format!("{err:#}"), exit_code = telltale::exit_code(&err), "telltale failed");
            } else {
                eprintln!("telltale: error: {err:#}");
            }
            ExitCode::from(telltale::exit_code(&err))
        }
    }
}
