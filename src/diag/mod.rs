//! Diagnostics for bad input: file, line, column, the source line with a caret, and a hint.
//!
//! In: a byte offset (and length) into a source text, a message and a hint. Out: a
//! [`Diagnostic`] that owns the excerpt it needs, so it can be rendered once, at the top of the
//! program, after the source is gone. Line and column are computed only here, from the offset
//! (columns count characters, 1-based). [`codes`] holds the catalogue of [`Code`]s every
//! diagnostic and layer error carries.
//!
//! **Invariant:** a leaf module. It imports nothing else of the crate, so every reader (`lang`,
//! `fermion::fcidump`, `qasm::read`, `estimate::counts::read`) and every layer error can use
//! it without depending on another reader.

pub mod codes;

pub use codes::Code;
use std::fmt;

/// One problem in one input file.
#[derive(Clone, Debug, PartialEq)]
pub struct Diagnostic {
    /// The kind of problem, from the catalogue (`phasewright explain CODE`).
    pub code: Code,
    pub file: String,
    /// 1-based line.
    pub line: usize,
    /// 1-based column in characters.
    pub column: usize,
    /// The offending source line, without its newline.
    pub excerpt: String,
    /// Caret width in characters (at least 1).
    pub width: u32,
    pub message: String,
    pub hint: Option<String>,
}

impl Diagnostic {
    /// A diagnostic at byte `offset` spanning `len` bytes of `src`. Finding the line scans
    /// `src` up to `offset`; a reader that may report many problems in one file uses
    /// [`Diagnostic::at_indexed`] instead.
    pub fn at(
        code: Code,
        file: &str,
        src: &str,
        offset: usize,
        len: usize,
        message: impl Into<String>,
        hint: Option<String>,
    ) -> Diagnostic {
        let offset = floor_char_boundary(src, offset.min(src.len()));
        let line_start = src[..offset].rfind('\n').map_or(0, |i| i + 1);
        let line = src[..offset].matches('\n').count() + 1;
        Diagnostic::on_line(
            code, file, src, offset, len, line, line_start, message, hint,
        )
    }

    /// The same as [`Diagnostic::at`], with the line found by binary search in `lines` (built
    /// once from `src`), so `k` diagnostics cost `O(k log lines)` instead of `O(k · src)`.
    #[allow(clippy::too_many_arguments)]
    pub fn at_indexed(
        code: Code,
        file: &str,
        src: &str,
        lines: &LineIndex,
        offset: usize,
        len: usize,
        message: impl Into<String>,
        hint: Option<String>,
    ) -> Diagnostic {
        let offset = floor_char_boundary(src, offset.min(src.len()));
        // Number of line starts at or before `offset` (the first is 0).
        let line = lines.starts.partition_point(|&s| s <= offset);
        let line_start = lines.starts[line - 1];
        Diagnostic::on_line(
            code, file, src, offset, len, line, line_start, message, hint,
        )
    }

    /// A diagnostic at `offset`, which lies on the 1-based line `line` starting at byte
    /// `line_start`.
    #[allow(clippy::too_many_arguments)]
    fn on_line(
        code: Code,
        file: &str,
        src: &str,
        offset: usize,
        len: usize,
        line: usize,
        line_start: usize,
        message: impl Into<String>,
        hint: Option<String>,
    ) -> Diagnostic {
        let line_end = src[offset..].find('\n').map_or(src.len(), |i| offset + i);
        let column = src[line_start..offset].chars().count() + 1;
        let excerpt = src[line_start..line_end].trim_end_matches('\r').to_string();
        let end = floor_char_boundary(src, (offset + len).min(line_end));
        let width = u32::try_from(src[offset..end].chars().count().max(1)).unwrap_or(u32::MAX);
        Diagnostic {
            code,
            file: file.to_string(),
            line,
            column,
            excerpt,
            width,
            message: message.into(),
            hint,
        }
    }

    /// A diagnostic about a whole file (no position inside it).
    pub fn whole_file(
        code: Code,
        file: &str,
        message: impl Into<String>,
        hint: Option<String>,
    ) -> Diagnostic {
        Diagnostic {
            code,
            file: file.to_string(),
            line: 0,
            column: 0,
            excerpt: String::new(),
            width: 0,
            message: message.into(),
            hint,
        }
    }
}

/// The byte offsets at which the lines of a source text start, for [`Diagnostic::at_indexed`].
#[derive(Clone, Debug)]
pub struct LineIndex {
    /// Ascending; the first is 0.
    starts: Vec<usize>,
}

impl LineIndex {
    pub fn new(src: &str) -> LineIndex {
        let mut starts = vec![0];
        starts.extend(src.match_indices('\n').map(|(i, _)| i + 1));
        LineIndex { starts }
    }
}

/// Byte offset of a 1-based (line, column) position, as serde_json reports them (column in
/// bytes; column 0 means the start of the line). Past the end gives `src.len()`.
pub fn offset_of(src: &str, line: usize, column: usize) -> usize {
    let mut off = 0;
    for (i, l) in src.split_inclusive('\n').enumerate() {
        if i + 1 == line {
            return off + column.saturating_sub(1).min(l.len());
        }
        off += l.len();
    }
    src.len()
}

fn floor_char_boundary(s: &str, mut i: usize) -> usize {
    while i > 0 && !s.is_char_boundary(i) {
        i -= 1;
    }
    i
}

impl fmt::Display for Diagnostic {
    fn fmt(&self, f: &mut fmt::Formatter<'_>) -> fmt::Result {
        if self.line == 0 {
            writeln!(f, "error {}: {}: {}", self.code, self.file, self.message)?;
        } else {
            writeln!(
                f,
                "error {}: {}:{}:{}: {}",
                self.code, self.file, self.line, self.column, self.message
            )?;
            let gutter = self.line.to_string().len();
            writeln!(f, "{:gutter$} |", "")?;
            writeln!(f, "{} | {}", self.line, self.excerpt)?;
            writeln!(
                f,
                "{:gutter$} | {}{}",
                "",
                " ".repeat(self.column - 1),
                "^".repeat(self.width as usize)
            )?;
        }
        if let Some(h) = &self.hint {
            writeln!(f, "hint: {h}")?;
        }
        Ok(())
    }
}

/// Renders a list of diagnostics, one after another.
pub fn render_all(ds: &[Diagnostic]) -> String {
    ds.iter()
        .map(|d| d.to_string())
        .collect::<Vec<_>>()
        .join("\n")
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn caret_sits_under_the_offending_text() {
        let src = "qubits 4\nZ0 Q1\n";
        let d = Diagnostic::at(
            Code::HamUnknownWord,
            "a.ham",
            src,
            12,
            2,
            "unknown factor `Q1`",
            Some("use X, Y or Z".into()),
        );
        assert_eq!((d.line, d.column), (2, 4));
        let text = d.to_string();
        assert_eq!(text, "error H103: a.ham:2:4: unknown factor `Q1`\n  |\n2 | Z0 Q1\n  |    ^^\nhint: use X, Y or Z\n");
    }

    #[test]
    fn the_line_index_finds_the_same_place_as_the_scan() {
        let src = "a\n\nbé c\r\n  d\n\n";
        let lines = LineIndex::new(src);
        for offset in 0..=src.len() + 2 {
            for len in [0, 1, 3] {
                let scan = Diagnostic::at(Code::HamSyntax, "f", src, offset, len, "m", None);
                let indexed = Diagnostic::at_indexed(
                    Code::HamSyntax,
                    "f",
                    src,
                    &lines,
                    offset,
                    len,
                    "m",
                    None,
                );
                assert_eq!(scan, indexed, "offset {offset}, len {len}");
            }
        }
        let d = Diagnostic::at_indexed(Code::HamSyntax, "f", src, &lines, 7, 1, "m", None);
        assert_eq!((d.line, d.column, d.excerpt.as_str()), (3, 4, "bé c"));
    }
}

/// Deepest bracket nesting the readers accept (common practice for hand-written and generated
/// inputs alike; recursion-based parsers need a bound to stay inside the thread's stack).
pub const MAX_NESTING: usize = 64;

/// Most arithmetic operators on one line: an expression's tree is as deep as its chain of
/// operators, and evaluating or dropping it recurses that deep.
pub const MAX_OPERATORS_PER_LINE: usize = 1024;

/// Guards the recursive readers against inputs that would exhaust the stack: bracket nesting
/// beyond [`MAX_NESTING`] (`(`, `[`, `{` together) or more than [`MAX_OPERATORS_PER_LINE`]
/// operators on one line. Text after `comment` on a line is ignored. Returns the diagnostic for
/// the first offence: at the bracket that goes one level too deep, or at the line's first
/// operator past the bound.
pub fn depth_guard(kind: Code, file: &str, src: &str, comment: &str) -> Option<Diagnostic> {
    let mut depth = 0usize;
    let mut offset = 0usize;
    for line in src.split_inclusive('\n') {
        let code = line.find(comment).map_or(line, |i| &line[..i]);
        let mut ops = 0usize;
        for (i, b) in code.bytes().enumerate() {
            match b {
                b'(' | b'[' | b'{' => {
                    depth += 1;
                    if depth > MAX_NESTING {
                        return Some(Diagnostic::at(
                            kind,
                            file,
                            src,
                            offset + i,
                            1,
                            format!("brackets nested deeper than {MAX_NESTING} levels"),
                            Some("flatten the expression (or the `sum` blocks)".into()),
                        ));
                    }
                }
                b')' | b']' | b'}' => depth = depth.saturating_sub(1),
                b'+' | b'-' | b'*' | b'/' | b'%' | b'^' => {
                    ops += 1;
                    if ops > MAX_OPERATORS_PER_LINE {
                        return Some(Diagnostic::at(
                            kind,
                            file,
                            src,
                            offset + i,
                            1,
                            format!("more than {MAX_OPERATORS_PER_LINE} operators on one line"),
                            Some("split the expression over several terms or `let` lines".into()),
                        ));
                    }
                }
                _ => {}
            }
        }
        offset += line.len();
    }
    None
}

#[cfg(test)]
mod guard_tests {
    use super::*;

    #[test]
    fn deep_nesting_and_long_chains_are_diagnosed_at_their_place() {
        let deep = format!("qubits 1\n{}1{} Z0\n", "(".repeat(70), ")".repeat(70));
        let d = depth_guard(Code::HamLimit, "t.ham", &deep, "#").expect("too deep");
        assert_eq!((d.line, d.column), (2, MAX_NESTING + 1));
        let long = format!("qubits 1\n1{} Z0\n", "+1".repeat(2000));
        let d = depth_guard(Code::HamLimit, "t.ham", &long, "#").expect("too long");
        assert_eq!((d.line, d.column), (2, 2 * MAX_OPERATORS_PER_LINE + 2));
        // Brackets and operators inside comments do not count; ordinary files pass.
        let fine = format!("qubits 1\n0.5 Z0 # {}\n", "(".repeat(200));
        assert!(depth_guard(Code::HamLimit, "t.ham", &fine, "#").is_none());
    }
}
