//! The counts reader: text of a counts file → checked [`CountsFile`], or every problem found.
//!
//! In: the text of a counts file, its name, the [`Plan`] it answers and an optional bit-order
//! override. Out: one [`CircuitCounts`] per plan circuit, in plan order, or every problem as a
//! [`Diagnostic`] with line, column and caret where the text allows. Stages: JSON syntax and
//! the wrapped shape; header keys (`format`, `bit_order`, `shots`, `shard`); circuits (known
//! id, each id and bitstring once, bitstrings of the right length and alphabet, positive
//! integer counts, totals that agree with `shots`); every plan circuit answered. Invariant:
//! a problem with a repeated key is shown at the repeat (the n-th occurrence), never at the
//! first.

use super::{bitstring_mask, BitOrder, CircuitCounts, CountsFile, COUNTS_FORMAT};
use crate::diag::{Code, Diagnostic};
use crate::lang::json_span::{locate, Step};
use crate::plan::Plan;
use serde::de::{Deserializer, MapAccess, Visitor};
use serde::Deserialize;
use std::collections::BTreeMap;
use std::fmt;

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
            let off = crate::diag::offset_of(src, e.line(), e.column());
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
            let mut off = crate::diag::offset_of(src, e.line(), e.column());
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
            // A repeated unknown id is reported at each of its places, not twice at the first.
            diags.push(at_or_file(
                Code::CountsEntry,
                nth_key_at(&["counts", id], occurrence),
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

/// A serde_json message without its trailing ` at line L column C` (the diagnostic shows the place).
pub(crate) fn strip_position(msg: &str) -> String {
    match msg.rfind(" at line ") {
        Some(i) => msg[..i].to_string(),
        None => msg.to_string(),
    }
}
