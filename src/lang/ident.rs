//! The one identifier rule of every reader: `.ham` names and keywords, `.dev` statements and
//! names, and the identifiers of the OpenQASM 3 subset read back.
//!
//! In: text. Out: the length of the identifier at its start, or that identifier as a nom
//! parser generic over the error type (the readers use [`super::syntax_error::SyntaxError`]). The rule is an ASCII letter or `_`, then
//! ASCII letters, digits or `_` (the OpenQASM 3 specification allows more letters in
//! identifiers; phasewright writes and reads only these).

use nom::error::{ErrorKind, ParseError};
use nom::IResult;

/// May `c` start an identifier?
pub fn is_ident_start(c: char) -> bool {
    c.is_ascii_alphabetic() || c == '_'
}

/// May `c` continue an identifier?
pub fn is_ident_char(c: char) -> bool {
    c.is_ascii_alphanumeric() || c == '_'
}

/// Length in bytes of the identifier at the start of `i` (0 if none).
pub fn ident_len(i: &str) -> usize {
    match i.chars().next() {
        Some(c) if is_ident_start(c) => i.find(|c: char| !is_ident_char(c)).unwrap_or(i.len()),
        _ => 0,
    }
}

/// The identifier at the start of `i`; a recoverable error of the reader's type `E` when
/// there is none.
pub fn ident<'a, E: ParseError<&'a str>>(i: &'a str) -> IResult<&'a str, &'a str, E> {
    match ident_len(i) {
        0 => Err(nom::Err::Error(E::from_error_kind(
            i,
            ErrorKind::AlphaNumeric,
        ))),
        n => Ok((&i[n..], &i[..n])),
    }
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn identifiers_start_with_a_letter_or_underscore() {
        assert_eq!(ident_len("abc_1 rest"), 5);
        assert_eq!(ident_len("_x9"), 3);
        assert_eq!(ident_len("9x"), 0);
        assert_eq!(ident_len(""), 0);
        assert_eq!(ident_len("é"), 0);
        let r: IResult<&str, &str, nom::error::Error<&str>> = ident("q[3]");
        assert_eq!(r, Ok(("[3]", "q")));
        let r: IResult<&str, &str, nom::error::Error<&str>> = ident("$3");
        assert!(r.is_err());
    }
}
