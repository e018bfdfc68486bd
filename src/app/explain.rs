//! `phasewright explain`: the long form of a diagnostic code, or the whole catalogue.
//!
//! In: an optional code such as `H104` (any case). Out: its title and explanation on stdout (or
//! every code with its title when none is given; JSON with `--json`). An unknown code is bad
//! input (exit 2) with the nearest known codes as a hint.

use super::Global;
use crate::diag::Code;
use crate::error::{Error, Result};
use clap::Args;
use serde_json::json;

pub const EXAMPLES: &str = "\
Examples:
  phasewright explain H104      why a qubit index is refused, and what to do
  phasewright explain           every code with its one-line title
  phasewright explain --json    the catalogue as JSON";

#[derive(Args, Debug)]
pub struct ExplainArgs {
    /// The code printed on an error's first line, e.g. `H104`; all codes when left out.
    pub code: Option<String>,
}

fn entry(c: Code) -> serde_json::Value {
    json!({ "code": c.id(), "title": c.title(), "explanation": c.explanation() })
}

/// Wraps `text` at `width` columns (words never split).
fn wrap(text: &str, width: usize) -> String {
    let mut out = String::new();
    let mut line = 0usize;
    for w in text.split_whitespace() {
        let n = w.chars().count();
        if line > 0 && line + 1 + n > width {
            out.push('\n');
            line = 0;
        } else if line > 0 {
            out.push(' ');
            line += 1;
        }
        out.push_str(w);
        line += n;
    }
    out
}

pub fn run(args: &ExplainArgs, g: &Global) -> Result<()> {
    let Some(id) = &args.code else {
        g.json(&json!({ "codes": Code::ALL.iter().map(|&c| entry(c)).collect::<Vec<_>>() }))?;
        let mut text = String::new();
        for c in Code::ALL {
            text.push_str(&format!("{}  {}\n", c.id(), c.title()));
        }
        return g.say(&text);
    };
    let Some(c) = Code::find(id) else {
        let ids: Vec<&str> = Code::ALL.iter().map(|c| c.id()).collect();
        let letter = id.trim().chars().next().map(|l| l.to_ascii_uppercase());
        let same_reader: Vec<&str> = ids
            .iter()
            .copied()
            .filter(|c| Some(c.chars().next().unwrap_or(' ')) == letter)
            .collect();
        let hint = if same_reader.is_empty() {
            "`phasewright explain` lists every code".to_string()
        } else {
            format!("codes of that kind: {}", same_reader.join(", "))
        };
        return Err(Error::usage(
            Code::UsageOption,
            format!("`{}` is not a phasewright diagnostic code", id.trim()),
            Some(&hint),
        ));
    };
    g.json(&entry(c))?;
    g.say(&format!(
        "{}: {}\n\n{}\n",
        c.id(),
        c.title(),
        wrap(c.explanation(), 88)
    ))
}

#[cfg(test)]
mod tests {
    use super::wrap;

    #[test]
    fn wrapping_keeps_every_word_and_the_width() {
        let text = "one two three four five six seven eight nine ten eleven twelve";
        let w = wrap(text, 14);
        assert!(w.lines().all(|l| l.chars().count() <= 14), "{w}");
        assert_eq!(w.split_whitespace().collect::<Vec<_>>().join(" "), text);
    }
}
