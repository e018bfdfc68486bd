//! The phasewright binary: argument parsing and dispatch only. All work happens in the library.

use clap::Parser;
use std::process::ExitCode;

fn main() -> ExitCode {
    let cli = phasewright::app::Cli::parse();
    match phasewright::app::run(cli) {
        Ok(()) => ExitCode::SUCCESS,
        Err(e) => {
            eprint!("{e}");
            ExitCode::from(e.exit_code())
        }
    }
}
