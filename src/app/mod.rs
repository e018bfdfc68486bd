//! The command layer: clap definitions (validated values only) and one function per command
//! that builds the real objects, runs the library, and does the file I/O.
//!
//! In: parsed command-line arguments. Out: files in the target folder, text on stdout, or an
//! [`Error`] for `main` to render once. **Only this module and `main.rs` touch the file system.**

pub mod estimate;
pub mod io;

use crate::error::Result;
use clap::{Parser, Subcommand};

/// Compile qubit Hamiltonians into real-time-evolution circuit campaigns, check them by
/// simulation, and turn measured counts into energies.
#[derive(Parser, Debug)]
#[command(name = "phasewright", version, about, long_about = None)]
pub struct Cli {
    #[command(subcommand)]
    pub command: Command,
}

#[derive(Subcommand, Debug)]
pub enum Command {
    /// Turn measured counts into energies or a density of states.
    #[command(long_about = estimate::ESTIMATE_HELP)]
    Estimate(estimate::EstimateArgs),
}

/// Runs one command.
pub fn run(cli: Cli) -> Result<()> {
    match cli.command {
        Command::Estimate(args) => estimate::run(&args),
    }
}
