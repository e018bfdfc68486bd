//! The phasewright binary: argument parsing and dispatch only. All work happens in the library.
//!
//! Exit status: 0 success (also when the reader of stdout stops early, as `| head` does), 1 an
//! internal failure, 2 bad input or usage. Nothing here panics on a closed stream.

use clap::Parser;
use std::io::Write;
use std::process::ExitCode;

fn main() -> ExitCode {
    let cli = match phasewright::cli::Cli::try_parse() {
        Ok(cli) => cli,
        Err(e) => {
            // Help and version go to stdout, usage errors to stderr with their catalogue code;
            // a closed stream is ignored.
            match phasewright::cli::usage_code(e.kind()) {
                None => {
                    let _ = e.print();
                }
                Some(code) => {
                    let text = e.render().to_string();
                    let body = text.strip_prefix("error: ").unwrap_or(&text);
                    let _ = writeln!(
                        std::io::stderr(),
                        "error {code}: {body}(`phasewright explain {code}` says more)"
                    );
                }
            }
            return ExitCode::from(u8::try_from(e.exit_code()).unwrap_or(2));
        }
    };
    match phasewright::cli::run(cli) {
        Ok(()) => ExitCode::SUCCESS,
        Err(e) => {
            let _ = write!(std::io::stderr(), "{e}");
            ExitCode::from(e.exit_code())
        }
    }
}
