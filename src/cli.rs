//! The command line as a library: the argument definitions the binary parses with, the
//! dispatcher that runs one command, and four commands as functions that return their
//! results instead of printing them.
//!
//! In: command-line words, parsed by [`Cli`] (`Cli::try_parse` in `main.rs`,
//! `Cli::try_parse_from` in the Python module, so both share every default, range and
//! message). Out: [`run`] does what the command does (files, text on stdout) or returns the one
//! [`Error`](crate::error::Error) to render; [`compile_campaign`], [`verify_campaign`],
//! [`rehearse_campaign`] and [`estimate_campaign`] write the same files as their commands and
//! return what `--json` would print. Invariant: every item here is a re-export of the private
//! command layer, exactly what `main.rs` and the `phasewright-python` crate call; the work,
//! and all reading and writing of files, stays behind it.

pub use crate::app::compile::{compile_campaign, CompileArgs, CompileOutcome};
pub use crate::app::estimate::{estimate_campaign, EstimateArgs, EstimateOutcome};
pub use crate::app::rehearse::{rehearse_campaign, RehearseArgs};
pub use crate::app::verify::{verify_campaign, VerifyArgs, VerifyReport};
pub use crate::app::{run, usage_code, Cli, Command, Global};
