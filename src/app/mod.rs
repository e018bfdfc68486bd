//! The command layer: clap definitions (validated values only) and one function per command
//! that builds the real objects, runs the library, and does the file I/O.
//!
//! In: parsed command-line arguments. Out: files in the target folder, text on stdout, or an
//! [`Error`] for `main` to render once. A private module: `main.rs` and the Python module reach
//! it through [`crate::cli`] (the definitions, [`run`] and the commands as functions), and
//! programs and tests through [`crate::files`] (the readers and the campaign writer); pure
//! pieces live in the library (the cost report in [`crate::report::costs`], the estimate
//! report in [`crate::report::estimates`], the files' digest in
//! [`crate::plan::sha256_hex`]). **Only this module and `main.rs` touch the
//! file system or the standard streams** (the library's one exception is the `/proc/meminfo`
//! query of [`crate::sim::available_memory_bytes`]); every write to stdout goes through
//! [`io::emit`] (reports through [`Global::say`] / [`Global::json`]; counts on `-o -`,
//! completion scripts and man pages directly), so a closed pipe is a quiet exit, never a
//! panic; stderr is written with `write!` and its error ignored.

pub mod allot;
pub mod budget;
pub mod compile;
pub mod convert;
pub mod estimate;
pub mod explain;
pub mod io;
pub mod rehearse;
pub mod shard;
pub mod shell;
pub mod verify;

use crate::error::{Error, Result};
use clap::{Args, Parser, Subcommand};
use indicatif::{ProgressBar, ProgressStyle};

/// Compile qubit Hamiltonians into real-time-evolution circuit campaigns, check them by
/// simulation, and turn measured counts into energies.
///
/// Exit status: 0 success, 1 internal failure (a phasewright bug, or `verify` finding a compile
/// error above the tolerance), 2 bad input or usage (a diagnostic says what and where).
#[derive(Parser, Debug)]
#[command(name = "phasewright", version, about, long_about = None)]
pub struct Cli {
    #[command(flatten)]
    pub global: Global,
    #[command(subcommand)]
    pub command: Command,
}

/// Options every command takes.
#[derive(Args, Debug, Clone, Copy, Default)]
pub struct Global {
    /// Print machine-readable JSON on stdout instead of tables and summaries.
    #[arg(long, global = true)]
    pub json: bool,
    /// Print nothing on stdout but requested JSON, and no progress bars; errors still go to
    /// stderr and the exit status tells the outcome.
    #[arg(short = 'q', long, global = true)]
    pub quiet: bool,
}

impl Global {
    /// Prints human-readable text on stdout (nothing with `--json` or `--quiet`).
    pub fn say(&self, text: &str) -> Result<()> {
        if self.json || self.quiet {
            return Ok(());
        }
        io::emit(text)
    }

    /// Prints `value` as pretty JSON on stdout when `--json` was given.
    pub fn json(&self, value: &serde_json::Value) -> Result<()> {
        if !self.json {
            return Ok(());
        }
        let text = serde_json::to_string_pretty(value)
            .map_err(|e| Error::Internal(format!("cannot serialise JSON output: {e}")))?;
        io::emit(&(text + "\n"))
    }

    /// Prints `warning: …` on stderr (nothing with `--quiet`).
    pub fn warn(&self, text: &str) {
        if !self.quiet {
            use std::io::Write;
            let _ = writeln!(std::io::stderr(), "warning: {text}");
        }
    }

    /// A progress bar on stderr (hidden with `--quiet`, and by indicatif when stderr is not
    /// a terminal).
    pub fn progress(&self, len: usize, template: &str) -> ProgressBar {
        if self.quiet {
            return ProgressBar::hidden();
        }
        let bar = ProgressBar::new(len as u64);
        if let Ok(style) = ProgressStyle::with_template(template) {
            bar.set_style(style);
        }
        bar
    }
}

#[derive(Subcommand, Debug)]
pub enum Command {
    Allot(allot::AllotArgs),
    Budget(budget::BudgetArgs),
    Compile(compile::CompileArgs),
    /// Map a fermionic .ham file or an FCIDUMP integral file to a qubit Hamiltonian (.ham).
    #[command(after_help = convert::EXAMPLES)]
    Convert(convert::ConvertArgs),
    /// Turn measured counts into energies or a density of states.
    #[command(long_about = estimate::ESTIMATE_HELP)]
    Estimate(estimate::EstimateArgs),
    /// Explain a diagnostic code (the `H104` of `error H104: …`), or list them all.
    #[command(after_help = explain::EXAMPLES)]
    Explain(explain::ExplainArgs),
    /// Print a shell completion script for phasewright.
    #[command(after_help = shell::COMPLETION_EXAMPLES)]
    Completions(shell::CompletionsArgs),
    /// Join the share folders of `compile --shard I/N` into one campaign folder.
    #[command(after_help = shard::MERGE_EXAMPLES)]
    Merge(shard::MergeArgs),
    /// Write man pages for phasewright and each of its commands.
    #[command(after_help = shell::MANUAL_EXAMPLES)]
    Manual(shell::ManualArgs),
    #[command(alias = "sample")]
    Rehearse(rehearse::RehearseArgs),
    Verify(verify::VerifyArgs),
}

/// The catalogue code of a command-line error found by the argument parser; `None` for help
/// and version requests, which are not errors.
pub fn usage_code(kind: clap::error::ErrorKind) -> Option<crate::diag::Code> {
    use crate::diag::Code;
    use clap::error::ErrorKind as K;
    match kind {
        K::DisplayHelp | K::DisplayVersion | K::DisplayHelpOnMissingArgumentOrSubcommand => None,
        K::ArgumentConflict | K::MissingRequiredArgument | K::MissingSubcommand => {
            Some(Code::UsageConflict)
        }
        _ => Some(Code::UsageOption),
    }
}

/// Runs one command.
pub fn run(cli: Cli) -> Result<()> {
    let g = cli.global;
    match cli.command {
        Command::Allot(a) => allot::run(&a, &g),
        Command::Budget(a) => budget::run(&a, &g),
        Command::Compile(a) => compile::run(&a, &g),
        Command::Convert(a) => convert::run(a, &g),
        Command::Estimate(a) => estimate::run(&a, &g),
        Command::Explain(a) => explain::run(&a, &g),
        Command::Completions(a) => shell::completions(&a, &g),
        Command::Manual(a) => shell::manual(&a, &g),
        Command::Merge(a) => shard::merge(&a, &g),
        Command::Rehearse(a) => rehearse::run(&a, &g),
        Command::Verify(a) => verify::run(&a, &g),
    }
}
