//! Reference states: the checked form of a letter string such as `0+1r` or `ssss`.
//!
//! In: the text a user typed (`--state`) or a plan recorded (`states`), and the qubit count of
//! the Hamiltonian. Out: a [`RefState`], or a [`StateError`] naming the first bad letter (its
//! character index and byte offset, for a caret) or the length that does not match.
//!
//! Letters, qubit 0 first: `0 1 + - r l` for the Pauli eigenstates |0⟩ |1⟩ |+⟩ |−⟩ |+i⟩ |−i⟩,
//! and `ss` for a singlet on two neighbouring qubits (read left to right, so `ssss` is two
//! singlets). The gates that prepare each letter are in [`RefState::prep`].
//!
//! **Invariant:** a [`RefState`] is built only by [`RefState::parse`], so every one holds valid
//! letters, pairs every `s`, and has exactly one letter per qubit; code that takes a
//! `&RefState` never re-checks it.

use crate::circuit::{Gate, Qubit};
use crate::diag::{Code, Diagnostic};
use std::fmt;

/// A reference state checked against a qubit count (see the module header).
#[derive(Clone, Debug, PartialEq, Eq, PartialOrd, Ord, Hash)]
pub struct RefState {
    text: String,
}

/// Why a letter string is not a reference state for the given qubit count.
#[derive(Clone, Debug, PartialEq, Eq)]
pub enum StateError {
    /// A letter outside `0 1 + - r l s`, or an unpaired `s`.
    Letter {
        /// Character index of the letter (0 = qubit 0).
        index: usize,
        /// Byte offset of the letter in the text.
        offset: usize,
        letter: char,
        reason: &'static str,
    },
    /// Valid letters, but not one per qubit.
    Length { letters: usize, qubits: usize },
}

/// The hint every letter error carries.
pub const LETTER_HINT: &str = "use 0 1 + - r l (|0⟩ |1⟩ |+⟩ |−⟩ |+i⟩ |−i⟩) per qubit, or ss for a singlet on two neighbouring qubits; qubit 0 first";

impl RefState {
    /// Checks `text` letter by letter (the first bad letter is reported), then its length
    /// against `qubits`.
    pub fn parse(text: &str, qubits: usize) -> Result<RefState, StateError> {
        let letters: Vec<(usize, char)> = text.char_indices().collect();
        let mut i = 0;
        while i < letters.len() {
            let (offset, letter) = letters[i];
            match letter {
                '0' | '1' | '+' | '-' | 'r' | 'l' => {}
                's' if letters.get(i + 1).map(|l| l.1) == Some('s') => i += 1,
                's' => {
                    return Err(StateError::Letter {
                        index: i,
                        offset,
                        letter,
                        reason: "a singlet `ss` needs two neighbouring letters",
                    })
                }
                _ => {
                    return Err(StateError::Letter {
                        index: i,
                        offset,
                        letter,
                        reason: "not a reference-state letter",
                    })
                }
            }
            i += 1;
        }
        if letters.len() != qubits {
            return Err(StateError::Length {
                letters: letters.len(),
                qubits,
            });
        }
        Ok(RefState { text: text.into() })
    }

    /// The letters, qubit 0 first (one byte each).
    pub fn as_str(&self) -> &str {
        &self.text
    }

    /// Number of qubits (= letters).
    pub fn num_qubits(&self) -> usize {
        self.text.len()
    }

    /// Gates preparing the state from |0…0⟩. Per qubit, a Pauli eigenstate:
    /// `0` → nothing, `1` → X, `+` → H, `-` → X·H, `r` → S·H (|+i⟩), `l` → S†·H (|−i⟩); and
    /// `ss` on qubits (i, i+1) → the singlet `(|01⟩ − |10⟩)/√2`, by H, Z on i, CNOT i→i+1, X on
    /// i+1 (H|0⟩ = |+⟩, Z|+⟩ = |−⟩, the CNOT gives `(|00⟩ − |11⟩)/√2`, X on the second qubit
    /// the singlet). Singlet pairs (dimers) are the usual low-energy references for
    /// antiferromagnets.
    pub fn prep(&self) -> Vec<Gate> {
        let mut out = Vec::new();
        let letters = self.text.as_bytes();
        let mut i = 0;
        while i < letters.len() {
            let q = i as Qubit;
            match letters[i] {
                b'1' => out.push(Gate::X(q)),
                b'+' => out.push(Gate::H(q)),
                b'-' => out.extend([Gate::X(q), Gate::H(q)]),
                b'r' => out.extend([Gate::H(q), Gate::S(q)]),
                b'l' => out.extend([Gate::H(q), Gate::Sdg(q)]),
                b's' => {
                    out.extend([Gate::H(q), Gate::Z(q), Gate::Cx(q, q + 1), Gate::X(q + 1)]);
                    i += 1;
                }
                _ => {}
            }
            i += 1;
        }
        out
    }
}

impl fmt::Display for RefState {
    fn fmt(&self, f: &mut fmt::Formatter<'_>) -> fmt::Result {
        f.write_str(&self.text)
    }
}

impl StateError {
    /// The diagnostic for a state typed as the value of `option` (exit 2): a caret under the
    /// bad letter, or under the whole text for a wrong length.
    pub fn diagnostic(&self, option: &str, text: &str) -> Diagnostic {
        match *self {
            StateError::Letter {
                offset,
                letter,
                reason,
                ..
            } => Diagnostic::at(
                Code::UsageOption,
                option,
                text,
                offset,
                letter.len_utf8(),
                format!("`{letter}`: {reason}"),
                Some(LETTER_HINT.into()),
            ),
            StateError::Length { letters, qubits } => Diagnostic::at(
                Code::UsageOption,
                option,
                text,
                0,
                text.len(),
                format!("the state has {letters} letters but the Hamiltonian has {qubits} qubits"),
                Some(format!("give exactly {qubits} letters, qubit 0 first")),
            ),
        }
    }
}

impl fmt::Display for StateError {
    fn fmt(&self, f: &mut fmt::Formatter<'_>) -> fmt::Result {
        match self {
            StateError::Letter {
                index,
                letter,
                reason,
                ..
            } => write!(f, "letter {index} `{letter}`: {reason}"),
            StateError::Length { letters, qubits } => {
                write!(f, "{letters} letters for {qubits} qubits")
            }
        }
    }
}

impl std::error::Error for StateError {}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn every_letter_and_singlet_pairs_parse() {
        let s = RefState::parse("01+-rlss", 8).unwrap();
        assert_eq!(s.as_str(), "01+-rlss");
        assert_eq!(s.num_qubits(), 8);
        assert_eq!(s.to_string(), "01+-rlss");
        // Gates in the order of the module header, one letter after another.
        assert_eq!(
            s.prep(),
            vec![
                Gate::X(1),
                Gate::H(2),
                Gate::X(3),
                Gate::H(3),
                Gate::H(4),
                Gate::S(4),
                Gate::H(5),
                Gate::Sdg(5),
                Gate::H(6),
                Gate::Z(6),
                Gate::Cx(6, 7),
                Gate::X(7),
            ]
        );
        assert!(RefState::parse("0000", 4).unwrap().prep().is_empty());
        assert_eq!(RefState::parse("ssss", 4).unwrap().prep().len(), 8);
    }

    #[test]
    fn a_bad_letter_is_named_with_its_position() {
        assert_eq!(
            RefState::parse("01x0", 4),
            Err(StateError::Letter {
                index: 2,
                offset: 2,
                letter: 'x',
                reason: "not a reference-state letter",
            })
        );
        // A multibyte letter: character index 1, byte offset 1; the next letter's offset
        // counts its bytes.
        assert_eq!(
            RefState::parse("0ψ1", 3),
            Err(StateError::Letter {
                index: 1,
                offset: 1,
                letter: 'ψ',
                reason: "not a reference-state letter",
            })
        );
        assert_eq!(
            RefState::parse("0ψ", 3).unwrap_err().to_string(),
            "letter 1 `ψ`: not a reference-state letter"
        );
        // An unpaired `s`: `sss` pairs the first two and leaves the third alone.
        assert_eq!(
            RefState::parse("sss0", 4),
            Err(StateError::Letter {
                index: 2,
                offset: 2,
                letter: 's',
                reason: "a singlet `ss` needs two neighbouring letters",
            })
        );
        // Letters are checked before the length.
        assert!(matches!(
            RefState::parse("x", 4),
            Err(StateError::Letter { index: 0, .. })
        ));
    }

    #[test]
    fn a_wrong_length_is_refused_with_both_counts() {
        assert_eq!(
            RefState::parse("010", 4),
            Err(StateError::Length {
                letters: 3,
                qubits: 4
            })
        );
        assert_eq!(
            RefState::parse("", 1),
            Err(StateError::Length {
                letters: 0,
                qubits: 1
            })
        );
        let d = RefState::parse("01011", 4)
            .unwrap_err()
            .diagnostic("--state", "01011");
        assert_eq!(
            d.message,
            "the state has 5 letters but the Hamiltonian has 4 qubits"
        );
        assert_eq!(
            d.hint.as_deref(),
            Some("give exactly 4 letters, qubit 0 first")
        );
        let d = RefState::parse("0q", 2)
            .unwrap_err()
            .diagnostic("--state", "0q");
        assert_eq!((d.column, d.width), (2, 1));
        assert_eq!(d.message, "`q`: not a reference-state letter");
    }
}
