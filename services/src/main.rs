//! The `telltale` binary: parse arguments, set up logging, run, map the result
//! to an exit code (0 finished, 1 runtime failure, 2 bad usage or bad input).

use clap::Parser;
use std::process::ExitCode;

fn main() -> ExitCode {
    let cli = telltale::cli::Cli::parse();
    telltale::logging::init(cli.verbose, cli.quiet);
    match telltale::run(cli) {
        Ok(()) => ExitCode::SUCCESS,
        Err(err) => {
            if telltale::is_broken_pipe(&err) {
                return ExitCode::SUCCESS;
            }
            eprintln!("telltale: error: {err:#}");
            ExitCode::from(telltale::exit_code(&err))
        }
    }
}
