//! "Did you mean": keyword typos in both input languages, and a file of the other language
//! recognised as such.
//!
//! In: the source text of a `.ham` or `.dev` file and the diagnostics its reader produced. Out:
//! the same diagnostics, sharpened: a line that starts with a misspelt keyword (`qbits 8`,
//! `natve rz sx`) gets one diagnostic under that word naming the keyword meant, and a `.dev`
//! file read as a Hamiltonian (or the reverse) gets one diagnostic saying so instead of a
//! cascade. Invariant: only failed reads are rewritten, never a file that parsed, and a
//! suggestion is made only within a small edit distance (Damerau–Levenshtein, via `strsim`).

use crate::diag::{Code, Diagnostic};

/// Words that start a statement of the `.ham` language (`in` appears inside `sum`).
pub const HAM_KEYWORDS: &[&str] = &["qubits", "let", "sum", "in", "encoding"];

/// Statements of the `.dev` language.
pub const DEV_STATEMENTS: &[&str] = &[
    "name",
    "qubits",
    "native",
    "lattice",
    "link",
    "cut",
    "error",
    "time",
    "coherence",
];

/// The closest candidate to `word`: edit distance 1 for words of up to four letters, 2 beyond,
/// and never `word` itself. Ties go to the earlier candidate.
pub fn closest<'a>(word: &str, candidates: &[&'a str]) -> Option<&'a str> {
    if word.chars().count() < 2 {
        return None;
    }
    let limit = if word.chars().count() <= 4 { 1 } else { 2 };
    candidates
        .iter()
        .filter(|c| **c != word)
        .map(|c| (strsim::damerau_levenshtein(word, c), *c))
        .filter(|(d, _)| *d <= limit)
        .min_by_key(|(d, _)| *d)
        .map(|(_, c)| c)
}

/// Which input language a text reads like.
#[derive(Clone, Copy, Debug, PartialEq, Eq)]
pub enum Language {
    Hamiltonian,
    Device,
    /// Neither clearly (or both equally).
    Unclear,
}

fn first_word(line: &str) -> &str {
    let t = line.trim_start();
    let end = t
        .find(|c: char| !(c.is_ascii_alphanumeric() || c == '_'))
        .unwrap_or(t.len());
    &t[..end]
}

/// Code lines (comments and blanks dropped), each with its byte offset in `src`.
fn code_lines(src: &str) -> impl Iterator<Item = (usize, &str)> {
    let mut offset = 0;
    src.split_inclusive('\n').filter_map(move |raw| {
        let at = offset;
        offset += raw.len();
        let code = raw.split('#').next().unwrap_or("").trim_end();
        (!code.trim().is_empty()).then_some((at, code))
    })
}

/// A `.ham` line: a `let`, `sum` or `encoding` statement, or a term that starts with a number,
/// a sign, a bracket, or a Pauli / fermionic factor glued to its index (`X3`, `Z{i}`, `cr{k}`).
fn looks_like_ham_line(code: &str) -> bool {
    let t = code.trim_start();
    let w = first_word(t);
    if matches!(w, "let" | "sum" | "encoding") {
        return true;
    }
    let mut chars = t.chars();
    match chars.next() {
        Some(c) if c.is_ascii_digit() || matches!(c, '-' | '+' | '(' | '.') => true,
        Some('X' | 'Y' | 'Z') => matches!(chars.next(), Some(d) if d.is_ascii_digit() || d == '{'),
        _ => t.starts_with("cr{") || t.starts_with("an{") || t.starts_with("n{"),
    }
}

/// Counts lines typical of each language (`qubits` counts for neither) and names the clear
/// winner, with the offset of its first typical line.
pub fn sniff(src: &str) -> (Language, Option<usize>) {
    let (mut dev, mut ham) = (0usize, 0usize);
    let (mut first_dev, mut first_ham) = (None, None);
    for (at, code) in code_lines(src) {
        let w = first_word(code);
        let start = at + (code.len() - code.trim_start().len());
        if w != "qubits" && DEV_STATEMENTS.contains(&w) {
            dev += 1;
            first_dev.get_or_insert(start);
        } else if looks_like_ham_line(code) {
            ham += 1;
            first_ham.get_or_insert(start);
        }
    }
    if dev > ham {
        (Language::Device, first_dev)
    } else if ham > dev {
        (Language::Hamiltonian, first_ham)
    } else {
        (Language::Unclear, None)
    }
}

/// Names bound by `let NAME` in a `.ham` text (never suggested away).
fn let_names(src: &str) -> Vec<&str> {
    code_lines(src)
        .filter_map(|(_, code)| code.trim_start().strip_prefix("let "))
        .map(first_word)
        .collect()
}

/// Sharpens the diagnostics of a failed `.ham` read (see the module notes).
pub fn hamiltonian_hints(file: &str, src: &str, diags: Vec<Diagnostic>) -> Vec<Diagnostic> {
    if let (Language::Device, Some(at)) = sniff(src) {
        let w = first_word(&src[at..]);
        return vec![Diagnostic::at(
            Code::HamUnknownWord,
            file,
            src,
            at,
            w.len(),
            format!("`{w}` is a device statement: this file describes a device (.dev), not a Hamiltonian"),
            Some("pass it with --device FILE; the first argument is the Hamiltonian (.ham or FCIDUMP)".into()),
        )];
    }
    let bound = let_names(src);
    keyword_hints(file, src, diags, HAM_KEYWORDS, &bound, "statements start with qubits, let, sum or encoding; a term starts with its coefficient or a factor such as X0")
}

/// Sharpens the diagnostics of a failed `.dev` read: a Hamiltonian given as the device.
pub fn device_hints(file: &str, src: &str, diags: Vec<Diagnostic>) -> Vec<Diagnostic> {
    if let (Language::Hamiltonian, Some(at)) = sniff(src) {
        let line_end = src[at..].find('\n').map_or(src.len(), |i| at + i);
        return vec![Diagnostic::at(
            Code::DevUnknownWord,
            file,
            src,
            at,
            line_end - at,
            "this line is a Hamiltonian term or statement: the file holds a Hamiltonian (.ham), not a device",
            Some("the Hamiltonian is the first argument; --device takes a .dev file (qubits, native, lattice, ...)".into()),
        )];
    }
    diags
}

/// Replaces the diagnostics on any line that starts with a near-miss of a keyword by one
/// diagnostic under that word.
fn keyword_hints(
    file: &str,
    src: &str,
    diags: Vec<Diagnostic>,
    keywords: &[&str],
    bound: &[&str],
    hint: &str,
) -> Vec<Diagnostic> {
    let mut out: Vec<Diagnostic> = Vec::with_capacity(diags.len());
    let mut rewritten_lines = Vec::new();
    for d in diags {
        let line_start = src
            .split_inclusive('\n')
            .take(d.line.saturating_sub(1))
            .map(str::len)
            .sum::<usize>();
        let line = src[line_start.min(src.len())..]
            .lines()
            .next()
            .unwrap_or("");
        let w = first_word(line);
        let suggestion = (d.line > 0 && !w.is_empty() && !bound.contains(&w))
            .then(|| closest(w, keywords))
            .flatten();
        match suggestion {
            Some(k) => {
                if !rewritten_lines.contains(&d.line) {
                    rewritten_lines.push(d.line);
                    let at = line_start + (line.len() - line.trim_start().len());
                    out.push(Diagnostic::at(
                        Code::HamUnknownWord,
                        file,
                        src,
                        at,
                        w.len(),
                        format!("unknown keyword `{w}`; did you mean `{k}`?"),
                        Some(hint.into()),
                    ));
                }
            }
            None => out.push(d),
        }
    }
    out
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn near_misses_get_the_keyword_far_ones_nothing() {
        assert_eq!(closest("qbits", HAM_KEYWORDS), Some("qubits"));
        assert_eq!(closest("lte", HAM_KEYWORDS), Some("let"));
        assert_eq!(closest("natve", DEV_STATEMENTS), Some("native"));
        assert_eq!(closest("lattic", DEV_STATEMENTS), Some("lattice"));
        assert_eq!(
            closest("qubits", HAM_KEYWORDS),
            None,
            "never the word itself"
        );
        assert_eq!(closest("J", HAM_KEYWORDS), None);
        assert_eq!(closest("hopping", HAM_KEYWORDS), None);
    }

    #[test]
    fn each_language_is_recognised() {
        let dev = "# a chip\nqubits 8\nname line8\nnative rz sx x cz\nlattice line 8\n";
        assert_eq!(sniff(dev).0, Language::Device);
        let ham = "qubits 2\nlet J = 1\n-J * Z0 Z1\n0.5 X0\n";
        assert_eq!(sniff(ham).0, Language::Hamiltonian);
        assert_eq!(sniff("qubits 2\n").0, Language::Unclear);
    }

    #[test]
    fn a_misspelt_keyword_line_becomes_one_diagnostic_under_the_word() {
        let src = "qbits 8\nZ0 Z1\n";
        let d = Diagnostic::at(
            Code::HamSyntax,
            "a.ham",
            src,
            6,
            1,
            "unexpected `8` after the factors",
            None,
        );
        let out = hamiltonian_hints("a.ham", src, vec![d]);
        assert_eq!(out.len(), 1);
        assert_eq!((out[0].line, out[0].column, out[0].width), (1, 1, 5));
        assert!(
            out[0].message.contains("did you mean `qubits`"),
            "{}",
            out[0].message
        );
    }

    #[test]
    fn let_bound_names_are_not_corrected() {
        let src = "qubits 2\nlet sun = 1\nsun Z0 *\n";
        let d = Diagnostic::at(Code::HamSyntax, "a.ham", src, 28, 1, "unexpected `*`", None);
        let out = hamiltonian_hints("a.ham", src, vec![d.clone()]);
        assert_eq!(out, vec![d]);
    }
}
