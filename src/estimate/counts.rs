//! Counts files: parse, check against the plan, and hold measured outcomes per circuit.
//!
//! In: the text of a counts file, its name, the [`Plan`] it answers and an optional bit-order
//! override. Out: one [`CircuitCounts`] per plan circuit, in plan order, or every problem found
//! as a [`Diagnostic`] (with line, column and caret where the text allows). Invariant: nothing
//! is guessed: an unknown or missing circuit id, a bitstring of the wrong length or alphabet, a
//! zero, negative or fractional count, a repeated key, a shot total that disagrees with `shots`,
//! are all errors naming the circuit.
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

use crate::family::plan::Plan;
use crate::lang::diag::{Code, Diagnostic};
use crate::lang::json_span::{locate, Step};
use serde::de::{Deserializer, MapAccess, Visitor};
use serde::Deserialize;
use std::collections::BTreeMap;
use std::fmt;

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

/// Map entries in file order, duplicates kept (serde_json's maps would silently keep the last).
struct Entries<V>(Vec<(String, V)>);

impl<'de, V: Deserialize<'de>> Deserialize<'de> for Entries<V> {
    fn deserialize<D: Deserializer<'de>>(d: D) -> Result<Self, D::Error> {
        struct V2<V>(std::marker::PhantomData<V>);
        impl<'de, V: Deserialize<'de>> Visitor<'de> for V2<V> {
            type Value = Entries<V>;
            fn expecting(&self, f: &mut fmt::Formatter) -> fmt::Result {
                f.write_str("an object")
            }
            fn visit_map<A: MapAccess<'de>>(self, mut m: A) -> Result<Entries<V>, A::Error> {
                let mut v = Vec::new();
                while let Some((k, val)) = m.next_entry::<String, V>()? {
                    v.push((k, val));
                }
                Ok(Entries(v))
            }
        }
        d.deserialize_map(V2(std::marker::PhantomData))
    }
}

#[derive(Deserialize)]
#[serde(deny_unknown_fields)]
struct RawFile {
    format: serde_json::Value,
    #[serde(default)]
    bit_order: Option<serde_json::Value>,
    #[serde(default)]
    shots: Option<serde_json::Value>,
    /// Marks the counts of one share of a campaign (`rehearse --shard I/N`); only `merge`
    /// takes such a file, so it is refused against a whole plan.
    #[serde(default)]
    shard: Option<serde_json::Value>,
    counts: Entries<Entries<serde_json::Value>>,
}

const SHAPE_HINT: &str = "a counts file is {\"format\": \"phasewright-counts/1\", \"counts\": {\"<circuit id>\": {\"<bitstring>\": count}}}; see docs/counts.md";

/// Parses `src` (the file `file`) against `plan`. `order_override` (from the command line) wins
/// over the file's `bit_order` key.
pub fn parse(
    src: &str,
    file: &str,
    plan: &Plan,
    order_override: Option<BitOrder>,
) -> Result<CountsFile, Vec<Diagnostic>> {
    let here = |code: Code, offset: usize, len: usize, msg: String, hint: Option<&str>| {
        Diagnostic::at(code, file, src, offset, len, msg, hint.map(str::to_string))
    };
    // Stage 1: syntax, and the one shape we accept.
    let value: serde_json::Value = match serde_json::from_str(src) {
        Ok(v) => v,
        Err(e) => {
            let off = crate::lang::diag::offset_of(src, e.line(), e.column());
            return Err(vec![here(
                Code::CountsSyntax,
                off,
                1,
                format!("not valid JSON: {}", strip_position(&e.to_string())),
                Some("the counts file must be a JSON document; see docs/counts.md"),
            )]);
        }
    };
    match &value {
        serde_json::Value::Object(m) if m.contains_key("format") => {}
        serde_json::Value::Object(_) => {
            return Err(vec![Diagnostic::whole_file(
                Code::CountsSyntax,
                file,
                "no `format` key: this is not a phasewright counts file",
                Some(SHAPE_HINT.to_string()),
            )])
        }
        _ => {
            return Err(vec![Diagnostic::whole_file(
                Code::CountsSyntax,
                file,
                "the top level must be a JSON object",
                Some(SHAPE_HINT.to_string()),
            )])
        }
    }
    let raw: RawFile = match serde_json::from_str(src) {
        Ok(r) => r,
        Err(e) => {
            let mut off = crate::lang::diag::offset_of(src, e.line(), e.column());
            if e.classify() == serde_json::error::Category::Data {
                off = crate::lang::json_span::token_start(src, off);
            }
            return Err(vec![here(
                Code::CountsSyntax,
                off,
                1,
                strip_position(&e.to_string()),
                Some(SHAPE_HINT),
            )]);
        }
    };
    let mut diags = Vec::new();
    let key_at = |path: &[&str]| locate(src, &steps(path)).map(|s| s.key_or_value());
    let value_at = |path: &[&str]| locate(src, &steps(path)).map(|s| s.value);
    // The n-th occurrence (from 0) of a repeated key, so a duplicate is shown where it repeats.
    let nth_key_at = |path: &[&str], n: usize| {
        let mut st = steps(path);
        if let Some(Step::Key(k)) = st.pop() {
            st.push(Step::KeyNth(k, n));
        }
        locate(src, &st).map(|s| s.key_or_value())
    };
    let at_or_file =
        |code: Code, span: Option<(usize, usize)>, msg: String, hint: Option<&str>| match span {
            Some((o, l)) => here(code, o, l, msg, hint),
            None => Diagnostic::whole_file(code, file, msg, hint.map(str::to_string)),
        };

    // Stage 2: header keys.
    if raw.format.as_str() != Some(COUNTS_FORMAT) {
        diags.push(at_or_file(
            Code::CountsSyntax,
            value_at(&["format"]),
            format!("unsupported format {}", raw.format),
            Some("this version reads \"phasewright-counts/1\""),
        ));
    }
    let file_order = match &raw.bit_order {
        None => None,
        Some(v) => match v.as_str() {
            Some("first") => Some(BitOrder::First),
            Some("last") => Some(BitOrder::Last),
            _ => {
                diags.push(at_or_file(
                    Code::CountsSyntax,
                    value_at(&["bit_order"]),
                    format!("unknown bit order {v}"),
                    Some("use \"first\" (leftmost character is classical bit 0) or \"last\""),
                ));
                None
            }
        },
    };
    let bit_order = order_override.or(file_order).unwrap_or(BitOrder::First);
    let shots = match &raw.shots {
        None => None,
        Some(v) => match v.as_u64().filter(|&n| n > 0) {
            Some(n) => Some(n),
            None => {
                diags.push(at_or_file(
                    Code::CountsSyntax,
                    value_at(&["shots"]),
                    format!("`shots` must be a positive integer, found {v}"),
                    None,
                ));
                None
            }
        },
    };

    if let (Some(mark), None) = (&raw.shard, &plan.shard) {
        let share = match (mark.get("index"), mark.get("count")) {
            (Some(i), Some(n)) => format!("share {i}/{n}"),
            _ => "one share".to_string(),
        };
        diags.push(at_or_file(
            Code::CountsPlan,
            key_at(&["shard"]),
            format!("these are the counts of {share} of a campaign, not of the whole plan"),
            Some("join the counts files of every share with `phasewright merge` first"),
        ));
        return Err(diags);
    }

    // Stage 3: circuits.
    let index: BTreeMap<&str, usize> = plan
        .circuits
        .iter()
        .enumerate()
        .map(|(i, c)| (c.id.as_str(), i))
        .collect();
    let mut found: Vec<Option<CircuitCounts>> = vec![None; plan.circuits.len()];
    let mut id_seen: BTreeMap<&str, usize> = BTreeMap::new();
    for (id, entries) in &raw.counts.0 {
        let occurrence = {
            let n = id_seen.entry(id.as_str()).or_insert(0);
            *n += 1;
            *n - 1
        };
        let Some(&ci) = index.get(id.as_str()) else {
            diags.push(at_or_file(
                Code::CountsEntry,
                key_at(&["counts", id]),
                format!("unknown circuit `{id}`: the plan has no circuit with this id"),
                Some("counts must answer the circuits of this campaign's plan.json"),
            ));
            continue;
        };
        if occurrence > 0 {
            diags.push(at_or_file(
                Code::CountsEntry,
                nth_key_at(&["counts", id], occurrence),
                format!("circuit `{id}` appears more than once"),
                Some("merge its counts into one entry"),
            ));
            continue;
        }
        let nbits = plan.circuits[ci].num_clbits;
        let mut outcomes: BTreeMap<u128, u64> = BTreeMap::new();
        let mut seen: BTreeMap<&str, usize> = BTreeMap::new();
        let mut ok = true;
        for (bits, count) in &entries.0 {
            let kspan = || key_at(&["counts", id, bits]);
            let occurrence = {
                let n = seen.entry(bits.as_str()).or_insert(0);
                *n += 1;
                *n - 1
            };
            if occurrence > 0 {
                diags.push(at_or_file(
                    Code::CountsEntry,
                    nth_key_at(&["counts", id, bits], occurrence),
                    format!("circuit `{id}`: bitstring `{bits}` appears more than once"),
                    Some("each outcome is listed once with its total count"),
                ));
                ok = false;
                continue;
            }
            let mask = match bitstring_mask(bits, nbits, bit_order) {
                Ok(m) => m,
                Err(msg) => {
                    diags.push(at_or_file(Code::CountsEntry,
                        kspan(),
                        format!("circuit `{id}`: {msg}"),
                        Some(&format!(
                            "circuit `{id}` has {nbits} classical bits; write one 0/1 character per bit"
                        )),
                    ));
                    ok = false;
                    continue;
                }
            };
            match count.as_u64() {
                Some(n) if n > 0 => {
                    outcomes.insert(mask, n);
                }
                _ => {
                    let what = if count.as_u64() == Some(0) {
                        "a zero count".to_string()
                    } else if count.as_i64().is_some_and(|n| n < 0) {
                        format!("a negative count {count}")
                    } else {
                        format!("a count that is not a positive integer ({count})")
                    };
                    diags.push(at_or_file(
                        Code::CountsEntry,
                        value_at(&["counts", id, bits]),
                        format!("circuit `{id}`: bitstring `{bits}` has {what}"),
                        Some("counts are positive integers; leave out outcomes never seen"),
                    ));
                    ok = false;
                }
            }
        }
        if !ok {
            continue;
        }
        let cc = CircuitCounts {
            num_bits: nbits,
            outcomes: outcomes.into_iter().collect(),
        };
        // Checked here, so that `shots()` never overflows on a counts file that was read.
        let Some(total) = cc
            .outcomes
            .iter()
            .try_fold(0u64, |sum, &(_, n)| sum.checked_add(n))
        else {
            diags.push(at_or_file(
                Code::CountsEntry,
                key_at(&["counts", id]),
                format!(
                    "circuit `{id}`: the counts add up to more than {} shots",
                    u64::MAX
                ),
                Some("counts are tallies of shots; check the file for a damaged number"),
            ));
            continue;
        };
        if total == 0 {
            diags.push(at_or_file(
                Code::CountsEntry,
                key_at(&["counts", id]),
                format!("circuit `{id}` has no shots"),
                Some("every circuit of the plan needs measured outcomes"),
            ));
            continue;
        }
        if let Some(n) = shots {
            if total != n {
                diags.push(at_or_file(
                    Code::CountsEntry,
                    key_at(&["counts", id]),
                    format!("circuit `{id}` has {total} shots but the file says `shots`: {n}"),
                    Some("drop the `shots` key if circuits were run with different shot counts"),
                ));
                continue;
            }
        }
        found[ci] = Some(cc);
    }
    let missing: Vec<&str> = plan
        .circuits
        .iter()
        .zip(&found)
        .filter(|(c, f)| f.is_none() && !raw.counts.0.iter().any(|(id, _)| *id == c.id))
        .map(|(c, _)| c.id.as_str())
        .collect();
    if !missing.is_empty() {
        let shown: Vec<String> = missing.iter().take(8).map(|s| format!("`{s}`")).collect();
        let more = if missing.len() > 8 {
            format!(" and {} more", missing.len() - 8)
        } else {
            String::new()
        };
        diags.push(at_or_file(
            Code::CountsPlan,
            key_at(&["counts"]),
            format!(
                "{} circuit{} of the plan {} no counts: {}{more}",
                missing.len(),
                if missing.len() == 1 { "" } else { "s" },
                if missing.len() == 1 { "has" } else { "have" },
                shown.join(", ")
            ),
            Some("run every circuit of the campaign; estimates need all of them"),
        ));
    }
    if !diags.is_empty() {
        return Err(diags);
    }
    Ok(CountsFile {
        bit_order,
        circuits: found.into_iter().map(|c| c.expect("checked")).collect(),
    })
}

fn steps<'a>(path: &[&'a str]) -> Vec<Step<'a>> {
    path.iter().map(|k| Step::Key(k)).collect()
}

/// Turns a bitstring into an outcome mask (bit b = classical bit b).
pub fn bitstring_mask(bits: &str, nbits: usize, order: BitOrder) -> Result<u128, String> {
    if let Some(bad) = bits.chars().find(|c| *c != '0' && *c != '1') {
        return Err(format!(
            "bitstring `{bits}` contains `{bad}`; only 0 and 1 are allowed"
        ));
    }
    let len = bits.len();
    if len != nbits {
        return Err(format!(
            "bitstring `{bits}` has {len} bits, expected {nbits}"
        ));
    }
    if len > MAX_BITS {
        return Err(format!(
            "bitstrings longer than {MAX_BITS} bits are not supported"
        ));
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

/// A serde_json message without its trailing ` at line L column C` (the diagnostic shows the place).
pub(crate) fn strip_position(msg: &str) -> String {
    match msg.rfind(" at line ") {
        Some(i) => msg[..i].to_string(),
        None => msg.to_string(),
    }
}

#[cfg(test)]
pub(crate) mod tests {
    use super::*;
    use crate::family::plan::*;

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
