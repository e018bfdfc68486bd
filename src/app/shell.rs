//! `phasewright completions SHELL` and `phasewright manual`: shell completion scripts and man
//! pages generated from the command-line definitions themselves, so they never drift from
//! `--help`.
//!
//! In: a shell name, or an output folder (or `-` for stdout, the top-level page only). Out: the
//! script on stdout; one roff page per command (`phasewright.1`, `phasewright-compile.1`, …) in
//! the folder.

use super::Global;
use crate::diag::Code;
use crate::error::{Error, Result};
use clap::{Args, CommandFactory};
use std::path::PathBuf;

pub const COMPLETION_EXAMPLES: &str = "\
Examples:
  phasewright completions bash > ~/.local/share/bash-completion/completions/phasewright
  phasewright completions zsh > ~/.zfunc/_phasewright
  phasewright completions fish > ~/.config/fish/completions/phasewright.fish";

pub const MANUAL_EXAMPLES: &str = "\
Examples:
  phasewright manual -o ~/.local/share/man/man1     one page per command, then `man phasewright-compile`
  phasewright manual -o - | man -l -                read the top-level page now";

#[derive(Args, Debug)]
pub struct CompletionsArgs {
    /// The shell: bash, zsh, fish, elvish or powershell.
    #[arg(value_enum)]
    pub shell: clap_complete::Shell,
}

#[derive(Args, Debug)]
pub struct ManualArgs {
    /// Folder for the pages (created if missing), or `-` for the top-level page on stdout.
    #[arg(short = 'o', long = "out", allow_hyphen_values = true)]
    pub out: PathBuf,
}

pub fn completions(args: &CompletionsArgs, _g: &Global) -> Result<()> {
    let mut cmd = super::Cli::command();
    let mut buf = Vec::new();
    clap_complete::generate(args.shell, &mut cmd, "phasewright", &mut buf);
    let text = String::from_utf8(buf)
        .map_err(|e| Error::Internal(format!("completion script is not UTF-8: {e}")))?;
    super::io::emit(&text)
}

fn render(cmd: clap::Command, title: &str) -> Result<Vec<u8>> {
    let mut buf = Vec::new();
    clap_mangen::Man::new(cmd)
        .title(title.to_string())
        .render(&mut buf)
        .map_err(|e| Error::Internal(format!("cannot render the manual: {e}")))?;
    Ok(buf)
}

pub fn manual(args: &ManualArgs, g: &Global) -> Result<()> {
    let mut top = super::Cli::command();
    top.build();
    if args.out.as_os_str() == "-" {
        let page = render(top, "phasewright")?;
        return super::io::emit(&String::from_utf8_lossy(&page));
    }
    if args.out.is_file() {
        return Err(Error::usage(
            Code::OutputPath,
            format!("-o `{}` is a file", args.out.display()),
            Some("name a folder for the pages, or `-` for stdout"),
        ));
    }
    std::fs::create_dir_all(&args.out).map_err(|source| Error::Io {
        path: args.out.display().to_string(),
        source,
        reading: false,
    })?;
    let mut pages = vec![("phasewright".to_string(), top.clone())];
    for sub in top.get_subcommands().filter(|s| s.get_name() != "help") {
        let name = format!("phasewright-{}", sub.get_name());
        pages.push((name, sub.clone()));
    }
    for (name, cmd) in &pages {
        let path = args.out.join(format!("{name}.1"));
        std::fs::write(&path, render(cmd.clone(), name)?).map_err(|source| Error::Io {
            path: path.display().to_string(),
            source,
            reading: false,
        })?;
    }
    g.say(&format!(
        "{} manual pages written to {}\n",
        pages.len(),
        args.out.display()
    ))
}
