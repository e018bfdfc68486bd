//! The one nom error type of every reader built on nom: the `.ham` parser, the `.dev` reader and
//! the OpenQASM 3 subset reader.
//!
//! In: what nom reports while a production fails (the remaining input, the innermost `context`
//! label) and, for errors a production raises by hand, the exact catalogue code, message, hint
//! and caret width. Out: a [`SyntaxError`], turned into a [`crate::diag::Diagnostic`] (file,
//! line:column, caret excerpt, hint) by the one mapping [`SyntaxError::diagnostic`], worded by
//! each reader's [`Wording`] (its code, what it calls the text at the failure, its hints), so
//! all of them are rendered the same way, once, by the command layer. (The OpenQASM 3 reader,
//! which reads only the subset phasewright writes, does not word the nom error: it reports the
//! whole statement as unsupported.) Invariant: of two failed
//! alternatives the one that got further into the input is kept (the first on a tie), a context
//! label never overrides an earlier label or a message raised by hand, and a message raised by
//! hand is reported exactly as raised.

use crate::diag::{Code, Diagnostic, LineIndex};
use nom::error::{ContextError, ErrorKind, FromExternalError, ParseError};
use nom::{IResult, Offset};

/// Result of a production of a nom-based reader.
pub type Res<'a, T> = IResult<&'a str, T, SyntaxError<'a>>;

/// A nom error that remembers where it happened, what was expected there and, for errors raised
/// by hand, the exact message.
#[derive(Clone, Debug)]
pub struct SyntaxError<'a> {
    /// The input left where the production failed (a slice of the source text).
    pub at: &'a str,
    /// The innermost `context` label: what was expected at `at` (e.g. "a qubit count").
    pub expected: Option<&'static str>,
    /// The message of an error raised by hand; it overrides `expected`.
    pub reported: Option<Reported>,
}

/// An error message a production raised by hand, for the diagnostic as it stands.
#[derive(Clone, Debug, PartialEq)]
pub struct Reported {
    /// Catalogue code of the diagnostic.
    pub code: Code,
    pub message: String,
    pub hint: Option<String>,
    /// Caret width in bytes from `at`.
    pub len: usize,
}

impl<'a> SyntaxError<'a> {
    /// An error raised by hand at `at`, `len` bytes wide.
    pub fn reported(
        at: &'a str,
        code: Code,
        message: String,
        hint: Option<String>,
        len: usize,
    ) -> Self {
        SyntaxError {
            at,
            expected: None,
            reported: Some(Reported {
                code,
                message,
                hint,
                len,
            }),
        }
    }

    /// Byte offset of the error in `src`, the text `at` was sliced from.
    pub fn offset(&self, src: &str) -> usize {
        src.offset(self.at)
    }

    /// The diagnostic of this error in `src` (the text `at` was sliced from), read as `file`.
    ///
    /// A message raised by hand is kept as it is (code, message, hint, caret width). Otherwise
    /// the message is `expected {label}, found {found}` (`expected {label}` when nothing is
    /// found), where the label is the innermost context label or, without one,
    /// [`Wording::unlabelled`]; with neither it is `unexpected {found}`. `lines`, when given,
    /// finds the line by binary search (for readers that report many errors in one file).
    pub fn diagnostic(
        &self,
        wording: &Wording,
        file: &str,
        src: &str,
        lines: Option<&LineIndex>,
    ) -> Diagnostic {
        let offset = self.offset(src);
        let (code, len, message, hint) = match &self.reported {
            Some(r) => (r.code, r.len, r.message.clone(), r.hint.clone()),
            None => {
                let (found, len) = (wording.found)(self.at);
                let label = self.expected.or(wording.unlabelled);
                let message = match (label, found) {
                    (Some(label), Some(found)) => format!("expected {label}, found {found}"),
                    (Some(label), None) => format!("expected {label}"),
                    (None, Some(found)) => format!("unexpected {found}"),
                    (None, None) => "unexpected text".to_string(),
                };
                (wording.code, len, message, (wording.hint)(self.expected))
            }
        };
        match lines {
            Some(lines) => {
                Diagnostic::at_indexed(code, file, src, lines, offset, len, message, hint)
            }
            None => Diagnostic::at(code, file, src, offset, len, message, hint),
        }
    }
}

/// How one reader words the syntax errors no production raised by hand.
pub struct Wording {
    /// Catalogue code of the diagnostic.
    pub code: Code,
    /// What was expected where no production put a context label (`None`: the message is
    /// `unexpected {found}`).
    pub unlabelled: Option<&'static str>,
    /// What stands at the failure, as the message names it (`None` when the message names
    /// nothing), and the caret width in bytes.
    pub found: fn(&str) -> (Option<String>, usize),
    /// The hint for the innermost context label (`None` when there was no label).
    pub hint: fn(Option<&'static str>) -> Option<String>,
}

impl<'a> ParseError<&'a str> for SyntaxError<'a> {
    fn from_error_kind(input: &'a str, _kind: ErrorKind) -> Self {
        SyntaxError {
            at: input,
            expected: None,
            reported: None,
        }
    }
    fn append(_input: &'a str, _kind: ErrorKind, other: Self) -> Self {
        other
    }
    fn or(self, other: Self) -> Self {
        // Keep the error that got further into the input.
        if other.at.len() < self.at.len() {
            other
        } else {
            self
        }
    }
}

impl<'a> ContextError<&'a str> for SyntaxError<'a> {
    fn add_context(_input: &'a str, ctx: &'static str, mut other: Self) -> Self {
        if other.expected.is_none() && other.reported.is_none() {
            other.expected = Some(ctx);
        }
        other
    }
}

impl<'a, E> FromExternalError<&'a str, E> for SyntaxError<'a> {
    fn from_external_error(input: &'a str, kind: ErrorKind, _e: E) -> Self {
        Self::from_error_kind(input, kind)
    }
}

#[cfg(test)]
mod tests {
    use super::*;
    use nom::branch::alt;
    use nom::bytes::complete::tag;
    use nom::error::context;
    use nom::sequence::pair;

    #[test]
    fn the_alternative_that_got_further_is_kept() {
        let src = "ab!";
        let r: Res<'_, _> = alt((
            context("a then c", pair(tag("a"), tag("c"))),
            context("ab then d", pair(tag("ab"), tag("d"))),
        ))(src);
        let Err(nom::Err::Error(e)) = r else {
            panic!("both alternatives fail: {r:?}")
        };
        assert_eq!(e.offset(src), 2);
        assert_eq!(e.expected, Some("ab then d"));
    }

    #[test]
    fn the_innermost_label_and_a_reported_message_win() {
        let inner: Res<'_, &str> = context("outer", context("inner", tag("x")))("y");
        let Err(nom::Err::Error(e)) = inner else {
            panic!("`x` does not match `y`")
        };
        assert_eq!(e.expected, Some("inner"));
        let by_hand = SyntaxError::reported("y", Code::HamSyntax, "bad".into(), None, 1);
        let e = SyntaxError::add_context("y", "label", by_hand);
        assert_eq!(e.expected, None);
        assert_eq!(e.reported.map(|r| r.message), Some("bad".to_string()));
    }

    #[test]
    fn one_mapping_words_every_case_and_keeps_a_message_raised_by_hand() {
        const W: Wording = Wording {
            code: Code::DevSyntax,
            unlabelled: None,
            found: |at| {
                let n = at.find(' ').unwrap_or(at.len());
                ((n > 0).then(|| format!("`{}`", &at[..n])), n)
            },
            hint: |label| label.map(|l| format!("write {l}")),
        };
        let src = "first line\nqubits many more";
        let at = &src[18..]; // "many more", line 2, column 8
        let lines = LineIndex::new(src);
        let labelled = SyntaxError {
            at,
            expected: Some("a count"),
            reported: None,
        };
        let d = labelled.diagnostic(&W, "f.dev", src, None);
        assert_eq!((d.line, d.column, d.width), (2, 8, 4));
        assert_eq!(d.message, "expected a count, found `many`");
        assert_eq!(d.hint.as_deref(), Some("write a count"));
        assert_eq!(labelled.diagnostic(&W, "f.dev", src, Some(&lines)), d);
        let bare = SyntaxError {
            expected: None,
            ..labelled.clone()
        };
        assert_eq!(
            bare.diagnostic(&W, "f.dev", src, None).message,
            "unexpected `many`"
        );
        let with_default = Wording {
            unlabelled: Some("a statement"),
            ..W
        };
        let at_end = SyntaxError {
            at: &src[src.len()..],
            expected: None,
            reported: None,
        };
        assert_eq!(
            at_end.diagnostic(&with_default, "f.dev", src, None).message,
            "expected a statement"
        );
        let by_hand = SyntaxError::reported(at, Code::HamSyntax, "bad".into(), Some("h".into()), 2);
        let d = by_hand.diagnostic(&W, "f.ham", src, Some(&lines));
        assert_eq!(
            (d.code, d.message.as_str(), d.hint.as_deref(), d.width),
            (Code::HamSyntax, "bad", Some("h"), 2)
        );
    }
}
