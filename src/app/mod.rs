//! The command layer: clap definitions (validated values only) and one function per command
//! that builds the real objects, runs the library, and does the file I/O.
//!
//! In: parsed command-line arguments. Out: files in the target folder, text on stdout, or an
//! [`Error`] for `main` to render once. **Only this module and `main.rs` touch the file system.**

pub mod compile;
pub mod convert;
pub mod estimate;
pub mod io;
pub mod sample;
pub mod verify;

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
    Compile(compile::CompileArgs),
    /// Map a fermionic .ham file or an FCIDUMP integral file to a qubit Hamiltonian (.ham).
    #[command(after_help = convert::EXAMPLES)]
    Convert(convert::ConvertArgs),
    /// Turn measured counts into energies or a density of states.
    #[command(long_about = estimate::ESTIMATE_HELP)]
    Estimate(estimate::EstimateArgs),
    Sample(sample::SampleArgs),
    Verify(verify::VerifyArgs),
}

/// Runs one command.
pub fn run(cli: Cli) -> Result<()> {
    match cli.command {
        Command::Compile(a) => compile::run(&a),
        Command::Convert(a) => convert::run(a),
        Command::Estimate(a) => estimate::run(&a),
        Command::Sample(a) => sample::run(&a),
        Command::Verify(a) => verify::run(&a),
    }
}
