//! Counts files: the format, the outcome masks it holds per circuit, and its writer; the
//! reader that checks a file against its plan is [`read`].
//!
//! In: the text of a counts file, its name, the [plan](crate::plan::Plan) it answers
//! and an optional bit-order override ([`parse`]); or outcome masks to write ([`to_json`]).
//! Out: one [`CircuitCounts`] per plan circuit, in plan order, or every problem found as a
//! [diagnostic](crate::diag::Diagnostic) (with line, column and caret where the text
//! allows); or the text of a counts file. Invariant: nothing is guessed: an unknown or
//! missing circuit id, a bitstring of the wrong length or alphabet, a zero, negative or
//! fractional count, a repeated key, a shot total that disagrees with `shots`, are all errors
//! naming the circuit.
//!
//! Format `phasewright-counts/1` (documented in `docs/counts.md`):
//!
//! ```json
//! {
//!   "format": "phasewright-counts/1",
//!   "bit_order": "first",
//!   "shots": 1000,
//!   "counts": {
//!     "k01_re": {"000": 480, "001": 20, "100": 500}
//!   }
//! }
//! ```
//!
//! `bit_order` (optional, default `first`): `first` means the leftmost character of a bitstring
//! is classical bit 0; `last` means the rightmost is bit 0. A command-line override wins over
//! the file's key. `shots` (optional): when present, every circuit's counts must add up to it.
//! Only this wrapped form is accepted; a bare `{id: {bits: n}}` map is refused with a hint, so
//! a file always says which convention it uses.

pub mod read;

pub use read::parse;
pub(crate) use read::strip_position;

use super::error::{BitstringProblem, EstimateError};

/// Identifies the schema of a counts file.
pub const COUNTS_FORMAT: &str = "phasewright-counts/1";

/// Most classical bits a bitstring may have (bit masks are `u128`).
pub const MAX_BITS: usize = 128;

/// Which end of a bitstring holds classical bit 0.
#[derive(Clone, Copy, Debug, PartialEq, Eq)]
pub enum BitOrder {
    /// Leftmost character is bit 0 (phasewright's own convention).
    First,
    /// Rightmost character is bit 0.
    Last,
}

impl BitOrder {
    pub fn name(self) -> &'static str {
        match self {
            BitOrder::First => "first",
            BitOrder::Last => "last",
        }
    }
}

/// Measured outcomes of one circuit. Bit `b` of an outcome mask is classical bit `b`.
#[derive(Clone, Debug, PartialEq)]
pub struct CircuitCounts {
    pub num_bits: usize,
    /// Distinct outcomes with their (positive) counts, sorted by outcome mask.
    pub outcomes: Vec<(u128, u64)>,
}

impl CircuitCounts {
    /// Total number of shots.
    pub fn shots(&self) -> u64 {
        self.outcomes.iter().map(|(_, c)| c).sum()
    }
}

/// A parsed and checked counts file.
#[derive(Clone, Debug, PartialEq)]
pub struct CountsFile {
    /// The convention that was applied (flag, else file key, else `first`).
    pub bit_order: BitOrder,
    /// One entry per plan circuit, in plan order.
    pub circuits: Vec<CircuitCounts>,
}

/// Turns a bitstring into an outcome mask (bit b = classical bit b).
pub fn bitstring_mask(bits: &str, nbits: usize, order: BitOrder) -> Result<u128, EstimateError> {
    let problem = |p| Err(EstimateError::Bitstring(p));
    if let Some(bad) = bits.chars().find(|c| *c != '0' && *c != '1') {
        return problem(BitstringProblem::Character {
            bits: bits.to_string(),
            bad,
        });
    }
    let len = bits.len();
    if len != nbits {
        return problem(BitstringProblem::Length {
            bits: bits.to_string(),
            len,
            expected: nbits,
        });
    }
    if len > MAX_BITS {
        return problem(BitstringProblem::TooLong { max: MAX_BITS });
    }
    let mut mask = 0u128;
    for (i, c) in bits.bytes().enumerate() {
        if c == b'1' {
            let b = match order {
                BitOrder::First => i,
                BitOrder::Last => len - 1 - i,
            };
            mask |= 1u128 << b;
        }
    }
    Ok(mask)
}

/// Writes an outcome mask as a bitstring in the given order (the inverse of [`bitstring_mask`]).
pub fn mask_bitstring(mask: u128, nbits: usize, order: BitOrder) -> String {
    (0..nbits)
        .map(|i| {
            let b = match order {
                BitOrder::First => i,
                BitOrder::Last => nbits - 1 - i,
            };
            if (mask >> b) & 1 == 1 {
                '1'
            } else {
                '0'
            }
        })
        .collect()
}

/// Renders a counts file in the documented format (bit order `first`), keys sorted.
pub fn to_json(ids: &[&str], circuits: &[CircuitCounts], shots: Option<u64>) -> String {
    let mut counts = serde_json::Map::new();
    let mut order: Vec<usize> = (0..ids.len()).collect();
    order.sort_by_key(|&i| ids[i]);
    for i in order {
        let mut m = serde_json::Map::new();
        let c = &circuits[i];
        let mut rows: Vec<(String, u64)> = c
            .outcomes
            .iter()
            .map(|&(mask, n)| (mask_bitstring(mask, c.num_bits, BitOrder::First), n))
            .collect();
        rows.sort();
        for (b, n) in rows {
            m.insert(b, n.into());
        }
        counts.insert(ids[i].to_string(), serde_json::Value::Object(m));
    }
    let mut top = serde_json::Map::new();
    top.insert("format".into(), COUNTS_FORMAT.into());
    top.insert("bit_order".into(), "first".into());
    if let Some(n) = shots {
        top.insert("shots".into(), n.into());
    }
    top.insert("counts".into(), serde_json::Value::Object(counts));
    serde_json::to_string_pretty(&serde_json::Value::Object(top)).expect("serialises") + "\n"
}

#[cfg(test)]
pub(crate) mod tests {
    use super::*;
    use crate::diag::Diagnostic;
    use crate::plan::*;

    pub(crate) fn tiny_plan() -> Plan {
        let circuit = |id: &str, k: usize, part: Part| CircuitEntry {
            id: id.into(),
            file: format!("{id}.qasm"),
            k,
            time: 0.5 * k as f64,
            part: Some(part),
            state: 0,
            group: None,
            num_qubits: 3,
            num_clbits: 3,
            ancilla_bit: Some(2),
            reads: vec![Read {
                target: Target::Overlap,
                bits: vec![2],
            }],
            costs: Costs::default(),
            final_layout: vec![],
            sha256: None,
            shots: None,
            fanout: None,
            flipped: false,
        };
        Plan {
            format: PLAN_FORMAT.into(),
            family: Family::Overlap,
            hamiltonian: HamiltonianInfo {
                source: "t.ham".into(),
                num_qubits: 2,
                constant: 0.0,
                one_norm: 1.0,
                terms: vec![TermInfo {
                    pauli: "Z0".into(),
                    coeff: 1.0,
                }],
            },
            formula: FormulaInfo {
                order: 2,
                steps_per_dt: 1,
                dt: 0.5,
            },
            states: vec!["00".into()],
            seed: None,
            energy_unit: None,
            coefficient_cutoff: None,
            points: 2,
            control: crate::family::control::Control::Evolution,
            device: None,
            flip: None,
            shard: None,
            circuits: vec![circuit("k1_re", 1, Part::Re), circuit("k1_im", 1, Part::Im)],
        }
    }

    fn parse_str(src: &str) -> Result<CountsFile, Vec<Diagnostic>> {
        parse(src, "c.json", &tiny_plan(), None)
    }

    #[test]
    fn reads_the_documented_format() {
        let src = r#"{"format": "phasewright-counts/1", "shots": 10,
          "counts": {"k1_re": {"001": 7, "000": 3}, "k1_im": {"111": 10}}}"#;
        let c = parse_str(src).unwrap();
        assert_eq!(c.bit_order, BitOrder::First);
        // "001" with bit 0 leftmost is classical bit 2 set.
        assert_eq!(c.circuits[0].outcomes, vec![(0, 3), (0b100, 7)]);
        assert_eq!(c.circuits[1].outcomes, vec![(0b111, 10)]);
    }

    #[test]
    fn bit_order_flag_overrides_the_file_key() {
        let src = r#"{"format": "phasewright-counts/1", "bit_order": "first",
          "counts": {"k1_re": {"001": 7}, "k1_im": {"100": 1}}}"#;
        let c = parse(src, "c.json", &tiny_plan(), Some(BitOrder::Last)).unwrap();
        assert_eq!(c.bit_order, BitOrder::Last);
        assert_eq!(c.circuits[0].outcomes, vec![(0b001, 7)]);
        assert_eq!(c.circuits[1].outcomes, vec![(0b100, 1)]);
        let src2 = src.replace("\"first\"", "\"last\"");
        let c2 = parse_str(&src2).unwrap();
        assert_eq!(c2.bit_order, BitOrder::Last);
        assert_eq!(c2.circuits[0].outcomes, vec![(0b001, 7)]);
    }

    #[test]
    fn masks_round_trip_through_bitstrings() {
        for order in [BitOrder::First, BitOrder::Last] {
            for m in 0..32u128 {
                let s = mask_bitstring(m, 5, order);
                assert_eq!(bitstring_mask(&s, 5, order).unwrap(), m);
            }
        }
    }

    #[test]
    fn wrong_length_names_the_circuit_and_points_at_the_key() {
        let src = "{\"format\": \"phasewright-counts/1\",\n \"counts\": {\"k1_re\": {\"01\": 7},\n \"k1_im\": {\"000\": 1}}}";
        let d = parse_str(src).unwrap_err();
        assert_eq!(d.len(), 1);
        assert!(d[0].message.contains("k1_re"), "{}", d[0].message);
        assert!(d[0].message.contains("2 bits, expected 3"));
        assert_eq!((d[0].line, d[0].column), (2, 23));
    }

    #[test]
    fn unknown_missing_zero_negative_and_repeated_are_all_reported() {
        let src = r#"{"format": "phasewright-counts/1", "counts": {
            "k9_re": {"000": 1},
            "k1_re": {"000": 0, "001": -3, "010": 1.5, "010": 2}}}"#;
        let d = parse_str(src).unwrap_err();
        let text: Vec<&str> = d.iter().map(|d| d.message.as_str()).collect();
        assert!(
            text.iter().any(|m| m.contains("unknown circuit `k9_re`")),
            "{text:?}"
        );
        assert!(text.iter().any(|m| m.contains("a zero count")), "{text:?}");
        assert!(
            text.iter().any(|m| m.contains("negative count -3")),
            "{text:?}"
        );
        assert!(text
            .iter()
            .any(|m| m.contains("not a positive integer (1.5)")));
        assert!(text
            .iter()
            .any(|m| m.contains("`010` appears more than once")));
        assert!(
            text.iter().any(|m| m.contains("has no counts: `k1_im`")),
            "{text:?}"
        );
        assert!(d.iter().all(|d| d.line > 0), "every problem has a position");
    }

    #[test]
    fn non_json_and_bare_maps_are_refused_with_a_hint() {
        let d = parse_str("{\"format\": \"phasewright-counts/1\",\n \"counts\": {]}").unwrap_err();
        assert!(d[0].message.starts_with("not valid JSON"));
        assert_eq!(d[0].line, 2);
        let d = parse_str(r#"{"k1_re": {"000": 1}}"#).unwrap_err();
        assert!(d[0].message.contains("no `format` key"));
        assert!(d[0]
            .hint
            .as_deref()
            .unwrap()
            .contains("phasewright-counts/1"));
        let d = parse_str("[1, 2]").unwrap_err();
        assert!(d[0].message.contains("JSON object"));
    }

    #[test]
    fn a_repeated_id_or_bitstring_is_shown_where_it_repeats() {
        let src = "{\"format\": \"phasewright-counts/1\", \"counts\": {\n \"k1_re\": {\"000\": 1},\n \"k1_im\": {\"000\": 1, \"000\": 2},\n \"k1_re\": {\"000\": 1}}}";
        let d = parse_str(src).unwrap_err();
        let dup = d
            .iter()
            .find(|d| d.message.contains("`k1_re` appears more than once"))
            .unwrap();
        assert_eq!(
            (dup.line, dup.column),
            (4, 2),
            "caret on the second `k1_re`"
        );
        let bits = d
            .iter()
            .find(|d| d.message.contains("`000` appears more than once"))
            .unwrap();
        assert_eq!(
            (bits.line, bits.column),
            (3, 22),
            "caret on the second `000`"
        );
    }

    #[test]
    fn a_repeated_unknown_id_is_shown_at_each_place() {
        let src = "{\"format\": \"phasewright-counts/1\", \"counts\": {\n \"zz\": {\"000\": 1},\n \"k1_re\": {\"000\": 1},\n \"k1_im\": {\"000\": 1},\n \"zz\": {\"000\": 2}}}";
        let d = parse_str(src).unwrap_err();
        let places: Vec<(usize, usize)> = d
            .iter()
            .filter(|d| d.message.contains("unknown circuit `zz`"))
            .map(|d| (d.line, d.column))
            .collect();
        assert_eq!(places, [(2, 2), (5, 2)], "one caret under each `zz`");
    }

    #[test]
    fn shots_key_is_checked_per_circuit() {
        let src = r#"{"format": "phasewright-counts/1", "shots": 8,
          "counts": {"k1_re": {"000": 7}, "k1_im": {"000": 8}}}"#;
        let d = parse_str(src).unwrap_err();
        assert_eq!(d.len(), 1);
        assert!(d[0].message.contains("`k1_re` has 7 shots"));
    }

    #[test]
    fn bad_characters_and_unknown_keys() {
        let src = r#"{"format": "phasewright-counts/1", "counts": {"k1_re": {"0a1": 7}, "k1_im": {"000": 8}}}"#;
        let d = parse_str(src).unwrap_err();
        assert!(d[0].message.contains("contains `a`"));
        let src = r#"{"format": "phasewright-counts/1", "extra": 1, "counts": {}}"#;
        let d = parse_str(src).unwrap_err();
        assert!(
            d[0].message.contains("unknown field `extra`"),
            "{}",
            d[0].message
        );
    }

    #[test]
    fn writer_output_parses_back() {
        let plan = tiny_plan();
        let cs = vec![
            CircuitCounts {
                num_bits: 3,
                outcomes: vec![(0, 3), (0b100, 7)],
            },
            CircuitCounts {
                num_bits: 3,
                outcomes: vec![(0b011, 10)],
            },
        ];
        let ids: Vec<&str> = plan.circuits.iter().map(|c| c.id.as_str()).collect();
        let text = to_json(&ids, &cs, Some(10));
        let back = parse(&text, "c.json", &plan, None).unwrap();
        assert_eq!(back.circuits, cs);
    }
}
