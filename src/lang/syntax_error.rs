//! The one nom error type of every reader built on nom: the `.ham` parser, the `.dev` reader and
//! the OpenQASM 3 subset reader.
//!
//! In: what nom reports while a production fails (the remaining input, the innermost `context`
//! label) and, for errors a production raises by hand, the exact catalogue code, message, hint
//! and caret width. Out: a [`SyntaxError`] that each reader turns into a
//! [`crate::diag::Diagnostic`] (file, line:column, caret excerpt, hint) with [`SyntaxError::offset`],
//! so all of them are rendered the same way, once, by the command layer. Invariant: of two
//! failed alternatives the one that got further into the input is kept (the first on a tie),
//! and a context label never overrides an earlier label or a message raised by hand.

use crate::diag::Code;
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
}
