//! Grammar-aware mutation fuzzing of every reader of user input: `.ham`, `.dev`, FCIDUMP,
//! the OpenQASM 3 subset, counts JSON and plan.json.
//!
//! In: valid seed files (the examples, and a campaign compiled and rehearsed here with the real
//! binary), each changed by one to four structured mutations drawn by proptest from a fixed seed:
//! lines deleted, duplicated or swapped; a number replaced by a boundary value; the text cut at a
//! byte; a word of the file's own language inserted at a token boundary; a character of an
//! identifier flipped; Unicode or control characters inserted; very long lines. Out: pass or a
//! shrunk counterexample. Invariants under test (DESIGN.md, "Conventions"; issue 14, "Fuzzing"):
//! - no reader panics, called in-process under `catch_unwind`;
//! - every error carries a position inside the file: line ≥ 1, column ≥ 1, line at most the
//!   number of lines + 1, column at most the length of that line + 1 (only the few messages about
//!   something *absent* from the file may be whole-file diagnostics, listed in [`WHOLE_FILE`]);
//! - the binary, on a smaller subset, exits 0, 1 or 2 (never 101, never killed by a signal) and
//!   each run finishes within 30 s (a hang guard, not a timing measurement).
//!
//! Unlike `no_panic.rs` (token soup), the inputs here stay close to valid files, so they reach
//! the checks that run after parsing: value ranges, cross references, plan validation.
//!
//! The default run is bounded for CI; `PHASEWRIGHT_FUZZ_CASES=N` runs N in-process cases per
//! reader (and N/8 binary runs) for a longer local session. Findings are kept as fixtures in
//! `tests/data/fuzz/` with a named regression test at the end of this file.

use assert_cmd::Command;
use phasewright::diag::Diagnostic;
use phasewright::error::Error;
use phasewright::files::read_plan;
use phasewright::plan::sha256_hex;
use phasewright::plan::Plan;
use proptest::prelude::*;
use proptest::sample::select;
use proptest::test_runner::{Config, RngSeed, TestCaseError, TestRunner};
use std::cell::Cell;
use std::ops::Range;
use std::panic::{catch_unwind, AssertUnwindSafe};
use std::path::{Path, PathBuf};
use std::sync::{mpsc, OnceLock};
use std::time::Duration;

// ---------------------------------------------------------------------------------------------
// Budget

/// In-process cases per reader: 512 by default, `PHASEWRIGHT_FUZZ_CASES` to raise it.
fn cases() -> u32 {
    std::env::var("PHASEWRIGHT_FUZZ_CASES")
        .ok()
        .and_then(|s| s.parse().ok())
        .unwrap_or(512)
}

/// Binary runs per reader: an eighth of the in-process cases, at least 12.
fn binary_cases() -> u32 {
    (cases() / 8).max(12)
}

/// Longest a single reader call or binary run may take before it counts as a hang: generous,
/// as a valid mutation of the 433-qubit example device compiles in about 2 s on an idle 2-core
/// machine and took over 5 s with other builds beside it.
const HANG: Duration = Duration::from_secs(30);

fn runner(cases: u32, salt: u64) -> TestRunner {
    TestRunner::new(Config {
        cases,
        // Fixed seed: the same cases on every run and every machine.
        rng_seed: RngSeed::Fixed(0x7068_6173_6577_7269 ^ salt),
        // Findings are kept by hand as fixtures in tests/data/fuzz/, not in a side file.
        failure_persistence: None,
        max_shrink_iters: 4096,
        ..Config::default()
    })
}

// ---------------------------------------------------------------------------------------------
// Mutations

/// Values at the edges of what the readers accept: zero, signs, the largest finite double and
/// beyond, not-a-number spellings, one past the qubit and device limits, integers around 2^31,
/// 2^32, 2^64 and 2^128, a subnormal, and spellings of numbers no reader accepts.
const BOUNDARY_NUMBERS: &[&str] = &[
    "0",
    "-1",
    "1",
    "-0",
    "0.0",
    "1e308",
    "-1e308",
    "1e309",
    "1e-320",
    "NaN",
    "nan",
    "inf",
    "-inf",
    "63",
    "64",
    "65",
    "128",
    "129",
    "4096",
    "4097",
    "65536",
    "2147483648",
    "4294967296",
    "9007199254740993",
    "18446744073709551615",
    "18446744073709551616",
    "340282366920938463463374607431768211456",
    "99999999999999999999999999999999999999999999",
    "0x10",
    "1_000",
];

/// Text that readers meet in files edited by hand or damaged in transit: control characters,
/// line-ending variants, byte-order mark, zero-width and bidirectional marks, characters whose
/// case mapping changes their length, full-width and non-ASCII digits, astral characters,
/// quote and comment characters.
const ODD_TEXT: &[&str] = &[
    "\0",
    "\r",
    "\r\n",
    "\n\r",
    "\t",
    "\u{b}",
    "\u{c}",
    "\u{1b}[31m",
    "\u{7f}",
    "\u{85}",
    "\u{a0}",
    "\u{feff}",
    "\u{200b}",
    "\u{202e}",
    "\u{2028}",
    "é",
    "e\u{301}",
    "İ",
    "ß",
    "Ｘ",
    "０",
    "١٢",
    "𝔛",
    "💥",
    "\u{10ffff}",
    "\"",
    "\\",
    "{",
    "}",
    "#",
    "!",
    "//",
    "/*",
];

/// How a word is glued into the text.
const WRAPS: &[(&str, &str)] = &[("", ""), (" ", " "), ("", " "), ("\n", " "), (" ", "\n")];

#[derive(Clone, Copy, Debug)]
enum LongKind {
    /// The token repeated, separated by spaces.
    Spaced,
    /// The token repeated with nothing between.
    Glued,
    /// A run of spaces.
    Blank,
    /// Nines appended to the token (a very long number when it is one).
    Digits,
}

#[derive(Clone, Debug)]
enum Mutation {
    DeleteLine(usize),
    DuplicateLine(usize),
    SwapLines(usize, usize),
    ReplaceNumber(usize, &'static str),
    Truncate(usize),
    InsertWord(usize, usize, (&'static str, &'static str)),
    FlipIdentChar(usize, usize, char),
    InsertOdd(usize, &'static str),
    LongLine(usize, LongKind, usize),
}

fn flip_char() -> impl Strategy<Value = char> {
    prop_oneof![
        proptest::char::range('a', 'z'),
        proptest::char::range('A', 'Z'),
        proptest::char::range('0', '9'),
        select(vec![
            '_', '-', '.', ' ', '$', '&', '"', 'é', 'İ', '\u{0}', '\u{301}'
        ]),
        any::<char>(),
    ]
}

fn mutation() -> impl Strategy<Value = Mutation> {
    prop_oneof![
        any::<usize>().prop_map(Mutation::DeleteLine),
        any::<usize>().prop_map(Mutation::DuplicateLine),
        (any::<usize>(), any::<usize>()).prop_map(|(a, b)| Mutation::SwapLines(a, b)),
        (any::<usize>(), select(BOUNDARY_NUMBERS)).prop_map(|(i, v)| Mutation::ReplaceNumber(i, v)),
        any::<usize>().prop_map(Mutation::Truncate),
        (any::<usize>(), any::<usize>(), select(WRAPS))
            .prop_map(|(at, w, wrap)| Mutation::InsertWord(at, w, wrap)),
        (any::<usize>(), any::<usize>(), flip_char())
            .prop_map(|(t, k, c)| Mutation::FlipIdentChar(t, k, c)),
        (any::<usize>(), select(ODD_TEXT)).prop_map(|(at, s)| Mutation::InsertOdd(at, s)),
        (
            any::<usize>(),
            select(vec![
                LongKind::Spaced,
                LongKind::Glued,
                LongKind::Blank,
                LongKind::Digits
            ]),
            select(vec![64usize, 1000, 20_000]),
        )
            .prop_map(|(t, k, n)| Mutation::LongLine(t, k, n)),
    ]
}

/// One fuzz input: a seed file (by index into the reader's seeds), the tree edits applied to
/// it when it is JSON, then the text mutations, in order.
#[derive(Clone, Debug)]
struct Case {
    seed: usize,
    json: Vec<JsonEdit>,
    text: Vec<Mutation>,
}

fn case(seeds: usize, json: bool) -> BoxedStrategy<Case> {
    use proptest::collection::vec;
    if json {
        (0..seeds, vec(json_edit(), 0..=3), vec(mutation(), 0..=2))
            .prop_filter("at least one change", |(_, j, t)| {
                !(j.is_empty() && t.is_empty())
            })
            .prop_map(|(seed, json, text)| Case { seed, json, text })
            .boxed()
    } else {
        (0..seeds, vec(mutation(), 1..=3))
            .prop_map(|(seed, text)| Case {
                seed,
                json: Vec::new(),
                text,
            })
            .boxed()
    }
}

impl Case {
    fn build(&self, seeds: &[String], vocab: &[String]) -> String {
        let seed = &seeds[self.seed];
        let base = if self.json.is_empty() {
            seed.clone()
        } else {
            mutate_json(seed, &self.json)
        };
        mutate(&base, &self.text, vocab)
    }
}

/// Values a hand-edited JSON file may hold where phasewright expects something else: zero,
/// signs, beyond `u32`/`u64`/`f64` ranges, fractions where counts are integers, strings, null,
/// booleans, empty and nested containers.
const JSON_VALUES: &[&str] = &[
    "0",
    "-1",
    "1",
    "0.5",
    "-0.0",
    "1e308",
    "4097",
    "4294967296",
    "18446744073709551615",
    "18446744073709551616",
    "-9223372036854775809",
    "\"\"",
    "\"k01-re\"",
    "\"0101\"",
    "\"../plan.json\"",
    "\"\\u0000\"",
    "null",
    "true",
    "[]",
    "{}",
    "[[[]]]",
    "{\"\": 0}",
];

/// A structural edit of a JSON document, at a node picked among all nodes in document order
/// (the root is node 0).
#[derive(Clone, Debug)]
enum JsonEdit {
    /// Remove the node from its parent.
    Remove(usize),
    /// Replace the node by a value of [`JSON_VALUES`].
    Replace(usize, &'static str),
    /// Exchange two nodes.
    Swap(usize, usize),
    /// Repeat an array element, or the whole array's last element `n` times.
    Repeat(usize, usize),
    /// Change one character of an object key.
    RenameKey(usize, usize, char),
}

fn json_edit() -> impl Strategy<Value = JsonEdit> {
    prop_oneof![
        any::<usize>().prop_map(JsonEdit::Remove),
        (any::<usize>(), select(JSON_VALUES)).prop_map(|(a, v)| JsonEdit::Replace(a, v)),
        (any::<usize>(), any::<usize>()).prop_map(|(a, b)| JsonEdit::Swap(a, b)),
        (any::<usize>(), select(vec![1usize, 2, 300])).prop_map(|(a, n)| JsonEdit::Repeat(a, n)),
        (any::<usize>(), any::<usize>(), flip_char())
            .prop_map(|(a, k, c)| JsonEdit::RenameKey(a, k, c)),
    ]
}

/// JSON pointers (RFC 6901) of every node of `v`, in document order.
fn pointers(v: &serde_json::Value, at: String, out: &mut Vec<String>) {
    out.push(at.clone());
    match v {
        serde_json::Value::Object(m) => {
            for (k, x) in m {
                pointers(
                    x,
                    format!("{at}/{}", k.replace('~', "~0").replace('/', "~1")),
                    out,
                );
            }
        }
        serde_json::Value::Array(a) => {
            for (i, x) in a.iter().enumerate() {
                pointers(x, format!("{at}/{i}"), out);
            }
        }
        _ => {}
    }
}

/// The parent pointer and the unescaped last step of a non-root pointer.
fn split_pointer(p: &str) -> (&str, String) {
    let k = p.rfind('/').unwrap();
    (&p[..k], p[k + 1..].replace("~1", "/").replace("~0", "~"))
}

fn apply_json(v: &mut serde_json::Value, e: &JsonEdit) {
    use serde_json::Value;
    let mut ps = Vec::new();
    pointers(v, String::new(), &mut ps);
    let node = |i: usize| ps[pick(i, ps.len())].clone();
    match e {
        JsonEdit::Remove(i) => {
            let p = node(*i);
            if p.is_empty() {
                return;
            }
            let (parent, last) = split_pointer(&p);
            match v.pointer_mut(parent) {
                Some(Value::Object(m)) => {
                    m.shift_remove(&last);
                }
                Some(Value::Array(a)) => {
                    a.remove(last.parse::<usize>().unwrap());
                }
                _ => {}
            }
        }
        JsonEdit::Replace(i, text) => {
            if let Some(x) = v.pointer_mut(&node(*i)) {
                *x = serde_json::from_str(text).unwrap();
            }
        }
        JsonEdit::Swap(a, b) => {
            let (pa, pb) = (node(*a), node(*b));
            // A node cannot trade places with one inside it.
            if pa.starts_with(&pb) || pb.starts_with(&pa) {
                return;
            }
            let xa = v.pointer(&pa).cloned().unwrap();
            let xb = std::mem::replace(v.pointer_mut(&pb).unwrap(), xa);
            *v.pointer_mut(&pa).unwrap() = xb;
        }
        JsonEdit::Repeat(i, n) => {
            let p = node(*i);
            if p.is_empty() {
                return;
            }
            let (parent, last) = split_pointer(&p);
            if let Some(Value::Array(a)) = v.pointer_mut(parent) {
                let k = last.parse::<usize>().unwrap();
                let x = a[k].clone();
                for _ in 0..*n {
                    a.insert(k, x.clone());
                }
            }
        }
        JsonEdit::RenameKey(i, k, c) => {
            let p = node(*i);
            if p.is_empty() {
                return;
            }
            let (parent, last) = split_pointer(&p);
            if let Some(Value::Object(m)) = v.pointer_mut(parent) {
                let mut chars: Vec<char> = last.chars().collect();
                if chars.is_empty() {
                    chars.push(*c);
                } else {
                    let at = pick(*k, chars.len());
                    chars[at] = *c;
                }
                let new: String = chars.into_iter().collect();
                let Some(x) = m.shift_remove(&last) else {
                    return;
                };
                m.insert(new, x);
            }
        }
    }
}

/// A JSON seed, edited as a tree, written back as phasewright writes it (pretty, two spaces).
fn mutate_json(seed: &str, edits: &[JsonEdit]) -> String {
    let mut v: serde_json::Value = serde_json::from_str(seed).unwrap();
    for e in edits {
        apply_json(&mut v, e);
    }
    serde_json::to_string_pretty(&v).unwrap() + "\n"
}

#[derive(Clone, Copy, Debug, PartialEq)]
enum Kind {
    Number,
    Ident,
    Space,
    Newline,
    Other,
}

/// Splits `s` into tokens shared by all six languages closely enough for mutation: numbers
/// (`12`, `0.5`, `1e-3`, not the `..` of a range), identifiers, runs of blanks, newlines, and
/// single other characters.
fn tokens(s: &str) -> Vec<(Kind, Range<usize>)> {
    let b = s.as_bytes();
    let mut out = Vec::new();
    let mut k = 0;
    let digits = |mut j: usize| {
        while j < b.len() && b[j].is_ascii_digit() {
            j += 1;
        }
        j
    };
    while k < b.len() {
        let start = k;
        let c = b[k];
        let kind = if c.is_ascii_digit() {
            k = digits(k);
            if k + 1 < b.len() && b[k] == b'.' && b[k + 1].is_ascii_digit() {
                k = digits(k + 1);
            }
            if k < b.len() && (b[k] == b'e' || b[k] == b'E') {
                let mut j = k + 1;
                if j < b.len() && (b[j] == b'+' || b[j] == b'-') {
                    j += 1;
                }
                if j < b.len() && b[j].is_ascii_digit() {
                    k = digits(j);
                }
            }
            Kind::Number
        } else if c.is_ascii_alphabetic() || c == b'_' {
            while k < b.len() && (b[k].is_ascii_alphanumeric() || b[k] == b'_') {
                k += 1;
            }
            Kind::Ident
        } else if c == b' ' || c == b'\t' {
            while k < b.len() && (b[k] == b' ' || b[k] == b'\t') {
                k += 1;
            }
            Kind::Space
        } else if c == b'\n' {
            k += 1;
            Kind::Newline
        } else {
            k += s[k..].chars().next().map_or(1, char::len_utf8);
            Kind::Other
        };
        out.push((kind, start..k));
    }
    out
}

/// A choice among `len` things from a drawn number (shrinks towards the first).
fn pick(p: usize, len: usize) -> usize {
    p % len.max(1)
}

fn floor_boundary(s: &str, mut at: usize) -> usize {
    at = at.min(s.len());
    while !s.is_char_boundary(at) {
        at -= 1;
    }
    at
}

/// The lines of `s`, each with its newline; the line at `i` gains one if it had none, so that
/// moving it does not glue it to its neighbour.
fn lines_with_newline_at(s: &str, i: &[usize]) -> Vec<String> {
    let mut lines: Vec<String> = s.split_inclusive('\n').map(str::to_string).collect();
    for &k in i {
        if let Some(l) = lines.get_mut(k) {
            if !l.ends_with('\n') {
                l.push('\n');
            }
        }
    }
    lines
}

fn apply(src: &str, m: &Mutation, vocab: &[String]) -> String {
    let mut s = src.to_string();
    let nlines = src.split_inclusive('\n').count();
    let toks = tokens(src);
    match m {
        Mutation::DeleteLine(i) if nlines > 0 => {
            let mut lines = lines_with_newline_at(src, &[]);
            lines.remove(pick(*i, nlines));
            s = lines.concat();
        }
        Mutation::DuplicateLine(i) if nlines > 0 => {
            let k = pick(*i, nlines);
            let mut lines = lines_with_newline_at(src, &[k]);
            lines.insert(k, lines[k].clone());
            s = lines.concat();
        }
        Mutation::SwapLines(a, b) if nlines > 0 => {
            let (a, b) = (pick(*a, nlines), pick(*b, nlines));
            let mut lines = lines_with_newline_at(src, &[a, b]);
            lines.swap(a, b);
            s = lines.concat();
        }
        Mutation::ReplaceNumber(i, v) => {
            let nums: Vec<&Range<usize>> = toks
                .iter()
                .filter(|(k, _)| *k == Kind::Number)
                .map(|(_, r)| r)
                .collect();
            if nums.is_empty() {
                s.push_str(v);
            } else {
                s.replace_range(nums[pick(*i, nums.len())].clone(), v);
            }
        }
        Mutation::Truncate(i) => s.truncate(floor_boundary(src, pick(*i, src.len() + 1))),
        Mutation::InsertWord(at, w, (before, after)) => {
            let at = token_start(&toks, src, at);
            let word = &vocab[pick(*w, vocab.len())];
            s.insert_str(at, &format!("{before}{word}{after}"));
        }
        Mutation::FlipIdentChar(t, k, c) => {
            let idents: Vec<&Range<usize>> = toks
                .iter()
                .filter(|(k, _)| *k == Kind::Ident)
                .map(|(_, r)| r)
                .collect();
            if !idents.is_empty() {
                let r = idents[pick(*t, idents.len())].clone();
                let at = r.start + pick(*k, r.len()); // identifiers are ASCII
                s.replace_range(at..at + 1, c.encode_utf8(&mut [0; 4]));
            }
        }
        Mutation::InsertOdd(at, text) => {
            s.insert_str(floor_boundary(src, pick(*at, src.len() + 1)), text)
        }
        Mutation::LongLine(t, kind, n) => {
            let solid: Vec<&Range<usize>> = toks
                .iter()
                .filter(|(k, _)| !matches!(k, Kind::Space | Kind::Newline))
                .map(|(_, r)| r)
                .collect();
            let (at, word) = match solid.len() {
                0 => (src.len(), "0"),
                len => {
                    let r = solid[pick(*t, len)];
                    (r.end, &src[r.clone()])
                }
            };
            let text = match kind {
                LongKind::Spaced => format!(" {word}").repeat(*n),
                LongKind::Glued => word.repeat(*n),
                LongKind::Blank => " ".repeat(*n),
                LongKind::Digits => "9".repeat(*n),
            };
            s.insert_str(at, &text);
        }
        _ => {}
    }
    s
}

/// The start of a token chosen by `at` (or the end of the text).
fn token_start(toks: &[(Kind, Range<usize>)], src: &str, at: &usize) -> usize {
    let k = pick(*at, toks.len() + 1);
    toks.get(k).map_or(src.len(), |(_, r)| r.start)
}

fn mutate(seed: &str, ms: &[Mutation], vocab: &[String]) -> String {
    ms.iter().fold(seed.to_string(), |s, m| apply(&s, m, vocab))
}

// ---------------------------------------------------------------------------------------------
// Vocabularies: words of each language, to insert at token boundaries (grammar/*.ebnf, the
// OpenQASM 3 subset the writer emits, the FCIDUMP namelist header).

const HAM_WORDS: &[&str] = &[
    "qubits", "let", "sum", "in", "encoding", "jw", "bk", "X0", "Y1", "Z63", "Z{i}", "X{i+1}",
    "cr{0}", "an{1}", "n{2}", "+ h.c.", "h.c.", "{", "}", "(", ")", "..", "0..4", "4..0", "=", "*",
    "/", "%", ";", "#", "i", "2.5i", "-", "+",
];
const DEV_WORDS: &[&str] = &[
    "name",
    "qubits",
    "native",
    "lattice",
    "link",
    "cut",
    "error",
    "time",
    "readout",
    "measure",
    "line",
    "ring",
    "grid",
    "brickwall",
    "bridgedhex",
    "octagon",
    "full",
    "rz",
    "sx",
    "x",
    "cx",
    "cz",
    "rx",
    "ry",
    "u",
    "h",
    "swap",
    "ns",
    "us",
    "ms",
    "3-4",
    "0-0",
    "1-",
    "#",
];
const FCIDUMP_WORDS: &[&str] = &[
    "&FCI",
    "&fci",
    "&END",
    "$END",
    "/",
    "NORB=",
    "NELEC=",
    "MS2=",
    "ORBSYM=",
    "ISYM=",
    "UHF=",
    "NORB",
    "=",
    ",",
    "!",
    "0",
    "1  1  1  1",
    "0.5 0 0 0 0",
    "1.0D0",
    "-2.5d-1",
    "1 1 0 0",
];
const QASM_WORDS: &[&str] = &[
    "OPENQASM 3.0;",
    "OPENQASM",
    "include",
    "\"stdgates.inc\"",
    "qubit[4] q;",
    "qubit",
    "bit",
    "bit[2] c;",
    "measure",
    "c[0] = measure $0;",
    "barrier",
    "reset",
    "gphase",
    "U",
    "h",
    "x",
    "y",
    "z",
    "s",
    "sdg",
    "sx",
    "sxdg",
    "rz",
    "rx",
    "ry",
    "cx",
    "cz",
    "swap",
    "pi",
    "π",
    "q[0]",
    "q[9]",
    "$0",
    "$7",
    "c[0]",
    "c[5]",
    ";",
    ",",
    "(",
    ")",
    "[",
    "]",
    "//",
    "/*",
    "*/",
    "=",
    "->",
];
const JSON_WORDS: &[&str] = &[
    "{", "}", "[", "]", ",", ":", "null", "true", "false", "\"\"", "-", "1e400", "[]", "{}",
];

fn words(list: &[&str]) -> Vec<String> {
    list.iter().map(|w| w.to_string()).collect()
}

/// The JSON structure words plus every string literal of the seeds (keys, ids, enum values),
/// each quoted as in the file.
fn json_words(seeds: &[String]) -> Vec<String> {
    let mut out = words(JSON_WORDS);
    for s in seeds {
        let mut rest = s.as_str();
        while let Some(a) = rest.find('"') {
            let Some(b) = rest[a + 1..].find('"') else {
                break;
            };
            out.push(rest[a..a + b + 2].to_string());
            rest = &rest[a + b + 2..];
        }
    }
    out.sort();
    out.dedup();
    out
}

// ---------------------------------------------------------------------------------------------
// Seeds

fn root() -> &'static Path {
    Path::new(env!("CARGO_MANIFEST_DIR"))
}

fn read(p: &Path) -> String {
    std::fs::read_to_string(p).unwrap_or_else(|e| panic!("{}: {e}", p.display()))
}

/// Every file of `examples/` whose name ends with `ext`, as (name, text), in name order.
fn examples(ext: &str) -> Vec<(String, String)> {
    let mut v: Vec<(String, String)> = std::fs::read_dir(root().join("examples"))
        .unwrap()
        .map(|e| e.unwrap().path())
        .filter(|p| p.to_string_lossy().ends_with(ext))
        .map(|p| {
            (
                p.file_name().unwrap().to_string_lossy().into_owned(),
                read(&p),
            )
        })
        .collect();
    v.sort();
    assert!(!v.is_empty(), "no examples/*{ext}");
    v
}

/// Two campaigns compiled and rehearsed with the real binary: `ov` (overlap family, logical
/// qubits `q[k]`) and `kr` (Krylov family on the `line8` device, physical qubits `$k`), each
/// with `counts.json` beside its folder.
struct Campaigns {
    _tmp: tempfile::TempDir,
    dirs: Vec<PathBuf>,
}

fn campaigns() -> &'static Campaigns {
    static C: OnceLock<Campaigns> = OnceLock::new();
    C.get_or_init(|| {
        let tmp = tempfile::tempdir().unwrap();
        let ham = root().join("examples/mixed_field4.ham");
        let dev = root().join("examples/line8.dev");
        let specs: [(&str, Vec<&str>); 2] = [
            ("ov", vec!["--state", "0+1r"]),
            (
                "kr",
                vec![
                    "--state",
                    "01+0",
                    "--measure",
                    "krylov",
                    "--device",
                    dev.to_str().unwrap(),
                ],
            ),
        ];
        let mut dirs = Vec::new();
        for (name, extra) in specs {
            let dir = tmp.path().join(name);
            let out = Command::cargo_bin("phasewright")
                .unwrap()
                .args(["-q", "compile", ham.to_str().unwrap(), "--dt", "0.2"])
                .args(["--points", "2", "-o", dir.to_str().unwrap()])
                .args(extra)
                .output()
                .unwrap();
            assert!(out.status.success(), "{out:?}");
            let counts = counts_path(&dir);
            let out = Command::cargo_bin("phasewright")
                .unwrap()
                .args(["-q", "rehearse", dir.to_str().unwrap(), "--shots", "200"])
                .args(["--seed", "7", "-o", counts.to_str().unwrap()])
                .output()
                .unwrap();
            assert!(out.status.success(), "{out:?}");
            dirs.push(dir);
        }
        Campaigns { _tmp: tmp, dirs }
    })
}

fn counts_path(dir: &Path) -> PathBuf {
    dir.with_extension("counts.json")
}

/// Every `.qasm` file of both campaigns as (campaign index, file name, text).
fn qasm_seeds() -> Vec<(usize, String, String)> {
    let mut v = Vec::new();
    for (c, dir) in campaigns().dirs.iter().enumerate() {
        let mut names: Vec<String> = std::fs::read_dir(dir)
            .unwrap()
            .map(|e| e.unwrap().file_name().to_string_lossy().into_owned())
            .filter(|n| n.ends_with(".qasm"))
            .collect();
        names.sort();
        for n in names {
            let text = read(&dir.join(&n));
            v.push((c, n, text));
        }
    }
    v
}

// ---------------------------------------------------------------------------------------------
// Properties

/// Diagnostics that may stand without a position: each is about something the file lacks, so
/// no place in it is to blame.
const WHOLE_FILE: &[&str] = &[
    "empty program: missing `OPENQASM 3.0;`",
    "no `format` key",
    "the top level must be a JSON object",
    "the device declares no qubits",
    "the device lists no native gates",
    "couplings, more than phasewright handles",
];

/// Checks that the reader's error has at least one diagnostic and that each one points inside
/// `src` (see the module docs).
fn positions_inside(src: &str, diags: &[Diagnostic]) -> Result<(), String> {
    if diags.is_empty() {
        return Err("an error with no diagnostic".into());
    }
    let lines: Vec<&str> = src.split('\n').collect();
    for d in diags {
        if (d.line, d.column) == (0, 0) {
            if WHOLE_FILE.iter().any(|m| d.message.contains(m)) {
                continue;
            }
            return Err(format!("no position for `{}`", d.message));
        }
        let fits = d.line >= 1
            && d.column >= 1
            && d.line <= lines.len()
            && d.column <= lines[d.line - 1].chars().count() + 1;
        if !fits {
            return Err(format!(
                "position {}:{} outside the file ({} lines) for `{}`",
                d.line,
                d.column,
                lines.len(),
                d.message
            ));
        }
    }
    Ok(())
}

/// Runs `f` on a fresh thread (8 MiB of stack, as the binary's main thread has) under
/// `catch_unwind`; a panic or a run longer than [`HANG`] is an error naming what happened.
fn guarded<T: Send + 'static>(f: impl FnOnce() -> T + Send + 'static) -> Result<T, String> {
    let (tx, rx) = mpsc::channel();
    std::thread::Builder::new()
        .stack_size(8 << 20)
        .spawn(move || {
            let _ = tx.send(catch_unwind(AssertUnwindSafe(f)));
        })
        .unwrap();
    match rx.recv_timeout(HANG) {
        Ok(Ok(v)) => Ok(v),
        Ok(Err(p)) => Err(format!(
            "panicked: {}",
            p.downcast_ref::<String>()
                .cloned()
                .or_else(|| p.downcast_ref::<&str>().map(|s| s.to_string()))
                .unwrap_or_default()
        )),
        Err(_) => Err(format!("no answer within {HANG:?}")),
    }
}

/// How many mutated inputs a reader accepted and rejected: a run where either is zero did not
/// exercise both sides of the reader, and fails.
#[derive(Default)]
struct Tally {
    accepted: Cell<u32>,
    rejected: Cell<u32>,
}

impl Tally {
    fn count(&self, ok: bool) {
        let c = if ok { &self.accepted } else { &self.rejected };
        c.set(c.get() + 1);
    }

    fn assert_both(&self, what: &str) {
        let (a, r) = (self.accepted.get(), self.rejected.get());
        eprintln!("{what}: {a} mutated inputs accepted, {r} rejected");
        assert!(
            a > 0 && r > 0,
            "{what}: {a} accepted, {r} rejected: mutations do not reach both outcomes"
        );
    }
}

/// One in-process fuzz run: seeds mutated with `vocab`, each result checked by `check`, which
/// returns whether the reader accepted the input.
fn fuzz_in_process(
    what: &str,
    salt: u64,
    seeds: &[String],
    vocab: &[String],
    json: bool,
    check: impl Fn(usize, String) -> Result<bool, String>,
) {
    let tally = Tally::default();
    let mut r = runner(cases(), salt);
    let result = r.run(&case(seeds.len(), json), |c| {
        let src = c.build(seeds, vocab);
        match check(c.seed, src.clone()) {
            Ok(ok) => {
                tally.count(ok);
                Ok(())
            }
            Err(e) => Err(TestCaseError::fail(format!("{e}\n--- input ---\n{src:?}"))),
        }
    });
    if let Err(e) = result {
        panic!("{what}: {e}");
    }
    tally.assert_both(what);
}

/// Turns a reader result into accepted/rejected, checking the positions of its diagnostics.
fn judged<T>(src: &str, r: Result<Result<T, Vec<Diagnostic>>, String>) -> Result<bool, String> {
    match r? {
        Ok(_) => Ok(true),
        Err(d) => {
            if verbose() {
                eprintln!("rejected: {}", d[0].message);
            }
            positions_inside(src, &d).map(|()| false)
        }
    }
}

/// `PHASEWRIGHT_FUZZ_VERBOSE=1` prints why each mutated input was rejected.
fn verbose() -> bool {
    std::env::var_os("PHASEWRIGHT_FUZZ_VERBOSE").is_some()
}

#[test]
fn ham_reader_mutations() {
    let seeds: Vec<String> = examples(".ham").into_iter().map(|(_, t)| t).collect();
    fuzz_in_process("ham", 1, &seeds, &words(HAM_WORDS), false, |_, src| {
        let s = src.clone();
        judged(
            &src,
            guarded(move || {
                phasewright::hamiltonian::parse_hamiltonian("fuzz.ham", &s).map(|_| ())
            }),
        )
    });
}

#[test]
fn dev_reader_mutations() {
    let seeds: Vec<String> = examples(".dev").into_iter().map(|(_, t)| t).collect();
    fuzz_in_process("dev", 2, &seeds, &words(DEV_WORDS), false, |_, src| {
        let s = src.clone();
        judged(
            &src,
            guarded(move || phasewright::lang::dev::parse_device("fuzz.dev", &s).map(|_| ())),
        )
    });
}

fn fcidump_seeds() -> Vec<String> {
    vec![
        read(&root().join("examples/toy_chain3.fcidump")),
        read(&root().join("tests/data/h2_sto3g_r1.4.fcidump")),
    ]
}

#[test]
fn fcidump_reader_mutations() {
    fuzz_in_process(
        "fcidump",
        3,
        &fcidump_seeds(),
        &words(FCIDUMP_WORDS),
        false,
        |_, src| {
            let s = src.clone();
            judged(
                &src,
                guarded(move || {
                    let ints = phasewright::fermion::fcidump::parse_fcidump("fuzz.fcidump", &s)?;
                    // What `convert` does next with an accepted file.
                    if ints.norb <= 8 {
                        let _ = phasewright::fermion::fcidump::spin_orbital_hamiltonian(&ints);
                    }
                    Ok(())
                }),
            )
        },
    );
}

#[test]
fn qasm_reader_mutations() {
    let seeds: Vec<String> = qasm_seeds().into_iter().map(|(_, _, t)| t).collect();
    fuzz_in_process("qasm", 4, &seeds, &words(QASM_WORDS), false, |_, src| {
        let s = src.clone();
        judged(
            &src,
            guarded(move || {
                phasewright::qasm::read("fuzz.qasm", &s)
                    .map(|_| ())
                    .map_err(|d| vec![d])
            }),
        )
    });
}

fn plans() -> Vec<Plan> {
    campaigns()
        .dirs
        .iter()
        .map(|d| Plan::from_json(&read(&d.join("plan.json"))).unwrap())
        .collect()
}

#[test]
fn counts_reader_mutations() {
    let seeds: Vec<String> = campaigns()
        .dirs
        .iter()
        .map(|d| read(&counts_path(d)))
        .collect();
    let plans = plans();
    let vocab = json_words(&seeds);
    fuzz_in_process("counts", 5, &seeds, &vocab, true, |seed, src| {
        let (s, plan) = (src.clone(), plans[seed].clone());
        judged(
            &src,
            guarded(move || {
                phasewright::estimate::counts::parse(&s, "fuzz.json", &plan, None).map(|_| ())
            }),
        )
    });
}

#[test]
fn plan_reader_mutations() {
    let seeds: Vec<String> = campaigns()
        .dirs
        .iter()
        .map(|d| read(&d.join("plan.json")))
        .collect();
    let vocab = json_words(&seeds);
    let tmp = tempfile::tempdir().unwrap();
    let dir = tmp.path().to_path_buf();
    fuzz_in_process("plan", 6, &seeds, &vocab, true, |_, src| {
        std::fs::write(dir.join("plan.json"), &src).unwrap();
        let d = dir.clone();
        let r = guarded(move || match read_plan(&d) {
            Ok(plan) => {
                // What `verify` and `estimate` do next with a plan that validates.
                let _ = plan.pauli_sum();
                let _ = plan.energy_label();
                Ok(())
            }
            Err(Error::Input(diags)) => Err(Ok(diags)),
            Err(e) => Err(Err(format!("not a diagnostic: {e:?}"))),
        })?;
        match r {
            Ok(()) => Ok(true),
            Err(Ok(diags)) => positions_inside(&src, &diags).map(|()| false),
            Err(Err(e)) => Err(e),
        }
    });
}

// ---------------------------------------------------------------------------------------------
// The binary, on a smaller subset

/// Runs the binary with `args`; the status must be 0, 1 or 2 within [`HANG`], without a panic
/// message, and when the error names `file` with a `file:line:column` prefix, the position must
/// lie inside `text`.
fn run_binary(args: &[&str], file: &Path, text: &[u8]) -> Result<i32, String> {
    let out = Command::cargo_bin("phasewright")
        .unwrap()
        .args(args)
        .timeout(HANG)
        .output()
        .map_err(|e| e.to_string())?;
    let err = String::from_utf8_lossy(&out.stderr);
    let Some(code) = out.status.code() else {
        return Err(format!(
            "killed ({:?}; a kill after {HANG:?} is the hang guard)\n{err}",
            out.status
        ));
    };
    if !(0..=2).contains(&code) || err.contains("panicked") {
        return Err(format!("exit {code}\n{err}"));
    }
    let src = String::from_utf8_lossy(text);
    let lines: Vec<&str> = src.split('\n').collect();
    let prefix = format!("{}:", file.display());
    for l in err.lines() {
        let Some(rest) = l
            .strip_prefix("error ")
            .and_then(|r| r.split_once(": "))
            .and_then(|(_, r)| r.strip_prefix(&prefix))
        else {
            continue;
        };
        let mut it = rest.splitn(3, ':');
        if let (Some(Ok(line)), Some(Ok(col))) = (
            it.next().map(str::parse::<usize>),
            it.next().map(str::parse::<usize>),
        ) {
            let fits = line >= 1
                && col >= 1
                && line <= lines.len()
                && col <= lines[line - 1].chars().count() + 1;
            if !fits {
                return Err(format!("position {line}:{col} outside the file\n{err}"));
            }
        }
    }
    Ok(code)
}

/// One binary fuzz run: `write` puts the mutated bytes in place in a fresh folder and returns
/// the file that holds them and the arguments of the command to run.
fn fuzz_binary(
    what: &str,
    salt: u64,
    seeds: &[String],
    vocab: &[String],
    json: bool,
    setup: impl Fn(usize, &Path, &[u8]) -> (PathBuf, Vec<String>),
) {
    let tally = Tally::default();
    let mut r = runner(binary_cases(), salt);
    // Sometimes a byte that is never valid UTF-8, to reach the binary's text decoding.
    let strategy = (
        case(seeds.len(), json),
        proptest::option::weighted(0.2, any::<usize>()),
    );
    let result = r.run(&strategy, |(c, raw)| {
        let seed = c.seed;
        let mut bytes = c.build(seeds, vocab).into_bytes();
        if let Some(at) = raw {
            bytes.insert(pick(at, bytes.len() + 1), 0xff);
        }
        let tmp = tempfile::tempdir().unwrap();
        let (file, args) = setup(seed, tmp.path(), &bytes);
        let args: Vec<&str> = args.iter().map(String::as_str).collect();
        match run_binary(&args, &file, &bytes) {
            Ok(code) => {
                tally.count(code == 0);
                Ok(())
            }
            Err(e) => Err(TestCaseError::fail(format!(
                "phasewright {}: {e}\n--- input ---\n{:?}",
                args.join(" "),
                String::from_utf8_lossy(&bytes)
            ))),
        }
    });
    if let Err(e) = result {
        panic!("{what} (binary): {e}");
    }
    tally.assert_both(&format!("{what} (binary)"));
}

fn s(p: &Path) -> String {
    p.to_str().unwrap().to_string()
}

/// Copies a campaign folder into `to`.
fn copy_campaign(from: &Path, to: &Path) {
    std::fs::create_dir_all(to).unwrap();
    for e in std::fs::read_dir(from).unwrap() {
        let p = e.unwrap().path();
        std::fs::copy(&p, to.join(p.file_name().unwrap())).unwrap();
    }
}

#[test]
fn ham_binary_mutations() {
    let seeds: Vec<String> = examples(".ham").into_iter().map(|(_, t)| t).collect();
    fuzz_binary(
        "ham",
        11,
        &seeds,
        &words(HAM_WORDS),
        false,
        |_, tmp, bytes| {
            let f = tmp.join("fuzz.ham");
            std::fs::write(&f, bytes).unwrap();
            (
                f.clone(),
                vec!["convert".into(), s(&f), "-o".into(), "-".into()],
            )
        },
    );
}

#[test]
fn dev_binary_mutations() {
    let seeds: Vec<String> = examples(".dev").into_iter().map(|(_, t)| t).collect();
    let ham = s(&root().join("examples/mixed_field4.ham"));
    fuzz_binary(
        "dev",
        12,
        &seeds,
        &words(DEV_WORDS),
        false,
        |_, tmp, bytes| {
            let f = tmp.join("fuzz.dev");
            std::fs::write(&f, bytes).unwrap();
            let args = [
                "-q", "compile", &ham, "--state", "0000", "--dt", "0.2", "--points", "2",
            ]
            .iter()
            .map(|a| a.to_string())
            .chain(["--device".into(), s(&f), "-o".into(), s(&tmp.join("out"))])
            .collect();
            (f, args)
        },
    );
}

#[test]
fn fcidump_binary_mutations() {
    fuzz_binary(
        "fcidump",
        13,
        &fcidump_seeds(),
        &words(FCIDUMP_WORDS),
        false,
        |_, tmp, bytes| {
            let f = tmp.join("fuzz.fcidump");
            std::fs::write(&f, bytes).unwrap();
            let args = vec![
                "convert".into(),
                s(&f),
                "--encoding".into(),
                "jw".into(),
                "-o".into(),
                "-".into(),
            ];
            (f, args)
        },
    );
}

#[test]
fn qasm_binary_mutations() {
    let seeds = qasm_seeds();
    let texts: Vec<String> = seeds.iter().map(|(_, _, t)| t.clone()).collect();
    fuzz_binary(
        "qasm",
        14,
        &texts,
        &words(QASM_WORDS),
        false,
        |seed, tmp, bytes| {
            let (c, name, _) = &seeds[seed];
            let dir = tmp.join("campaign");
            copy_campaign(&campaigns().dirs[*c], &dir);
            let f = dir.join(name);
            std::fs::write(&f, bytes).unwrap();
            // Record the edited file's hash, so that `verify` reads it rather than stopping at
            // the hash check.
            let plan_path = dir.join("plan.json");
            let mut plan: serde_json::Value = serde_json::from_str(&read(&plan_path)).unwrap();
            for e in plan["circuits"].as_array_mut().unwrap() {
                if e["file"] == name.as_str() {
                    e["sha256"] = sha256_hex(bytes).into();
                }
            }
            std::fs::write(&plan_path, serde_json::to_string_pretty(&plan).unwrap()).unwrap();
            (f, vec!["-q".into(), "verify".into(), s(&dir)])
        },
    );
}

#[test]
fn plan_binary_mutations() {
    let seeds: Vec<String> = campaigns()
        .dirs
        .iter()
        .map(|d| read(&d.join("plan.json")))
        .collect();
    let vocab = json_words(&seeds);
    fuzz_binary("plan", 15, &seeds, &vocab, true, |seed, tmp, bytes| {
        let dir = tmp.join("campaign");
        copy_campaign(&campaigns().dirs[seed], &dir);
        let f = dir.join("plan.json");
        std::fs::write(&f, bytes).unwrap();
        (f, vec!["-q".into(), "verify".into(), s(&dir)])
    });
}

#[test]
fn counts_binary_mutations() {
    let seeds: Vec<String> = campaigns()
        .dirs
        .iter()
        .map(|d| read(&counts_path(d)))
        .collect();
    let vocab = json_words(&seeds);
    fuzz_binary("counts", 16, &seeds, &vocab, true, |seed, tmp, bytes| {
        let f = tmp.join("counts.json");
        std::fs::write(&f, bytes).unwrap();
        let dir = s(&campaigns().dirs[seed]);
        (
            f.clone(),
            vec![
                "-q".into(),
                "estimate".into(),
                dir,
                "--counts".into(),
                s(&f),
            ],
        )
    });
}

// ---------------------------------------------------------------------------------------------
// The mutation engine itself

/// Each mutation kind changes the text as described, on a small `.ham` file.
#[test]
fn mutations_do_what_they_say() {
    let src = "qubits 2\nlet J = 0.5\nJ * X0 X1\n";
    let v = words(HAM_WORDS);
    let first = 0;
    let m = |m: Mutation| apply(src, &m, &v);
    assert_eq!(m(Mutation::DeleteLine(first)), "let J = 0.5\nJ * X0 X1\n");
    assert_eq!(
        m(Mutation::DuplicateLine(first)),
        "qubits 2\nqubits 2\nlet J = 0.5\nJ * X0 X1\n"
    );
    assert_eq!(
        m(Mutation::ReplaceNumber(first, "4097")),
        "qubits 4097\nlet J = 0.5\nJ * X0 X1\n"
    );
    assert_eq!(
        tokens("0..7 1e-3 0.5 X0")
            .iter()
            .map(|(k, r)| (*k, &"0..7 1e-3 0.5 X0"[r.clone()]))
            .filter(|(k, _)| *k != Kind::Space)
            .collect::<Vec<_>>(),
        vec![
            (Kind::Number, "0"),
            (Kind::Other, "."),
            (Kind::Other, "."),
            (Kind::Number, "7"),
            (Kind::Number, "1e-3"),
            (Kind::Number, "0.5"),
            (Kind::Ident, "X0"),
        ]
    );
    assert_eq!(
        m(Mutation::InsertWord(first, first, (" ", " "))),
        format!(" {} qubits 2\nlet J = 0.5\nJ * X0 X1\n", v[0])
    );
    assert_eq!(
        m(Mutation::FlipIdentChar(first, first, 'Q')),
        "Qubits 2\nlet J = 0.5\nJ * X0 X1\n"
    );
    assert_eq!(m(Mutation::Truncate(first)), "");
    assert_eq!(
        m(Mutation::LongLine(first, LongKind::Glued, 3))
            .lines()
            .next(),
        Some("qubitsqubitsqubitsqubits 2")
    );
}

// ---------------------------------------------------------------------------------------------
// Findings, kept as fixtures in tests/data/fuzz/

/// Finding 0001: one count of 2^64 − 1 beside another made the per-circuit shot total overflow
/// (a panic in test builds, a wrapped total in release). Now a diagnostic on the circuit's key.
#[test]
fn regression_0001_counts_total_overflow() {
    let path = root().join("tests/data/fuzz/0001_counts_total_overflow.json");
    let src = read(&path);
    let plan = plans().remove(0); // the overlap campaign: circuits k01-re and k01-im, one bit
    let text = src.clone();
    let r = guarded(move || phasewright::estimate::counts::parse(&text, "c.json", &plan, None))
        .unwrap_or_else(|e| panic!("{e}"));
    let diags = r.expect_err("a total beyond u64 must be rejected");
    positions_inside(&src, &diags).unwrap();
    assert_eq!(diags.len(), 1, "{diags:?}");
    assert!(
        diags[0]
            .message
            .contains("add up to more than 18446744073709551615 shots"),
        "{}",
        diags[0].message
    );
    // Line 5 holds the key `"k01-re"`, column 5 its opening quote.
    assert_eq!((diags[0].line, diags[0].column), (5, 5));

    let dir = s(&campaigns().dirs[0]);
    let code = run_binary(
        &["-q", "estimate", &dir, "--counts", &s(&path)],
        &path,
        src.as_bytes(),
    )
    .unwrap();
    assert_eq!(code, 2);
}

/// Finding 0002: a sum over 0..2^31 whose body fails on every pass built an error per pass up
/// to the 5·10^7-statement limit (14 s for the debug binary). Evaluation now stops after 10^5
/// errors, with each out-of-range index reported once at its place.
#[test]
fn regression_0002_ham_sum_fails_every_pass() {
    let path = root().join("tests/data/fuzz/0002_ham_sum_fails_every_pass.ham");
    let src = read(&path);
    let text = src.clone();
    let r =
        guarded(move || phasewright::hamiltonian::parse_hamiltonian("f.ham", &text).map(|_| ()))
            .unwrap_or_else(|e| panic!("{e}"));
    let diags = r.expect_err("index 8 on 8 qubits must be rejected");
    positions_inside(&src, &diags).unwrap();
    // Both factors leave the register at one pass or another: `Z{i}` at i = 8, `Z{i+1}` at 7.
    let found: Vec<(usize, usize, &str)> = diags
        .iter()
        .map(|d| (d.line, d.column, d.message.as_str()))
        .collect();
    assert_eq!(
        found,
        vec![
            (
                4,
                33,
                "qubit index 8 in `Z{i}` is out of range: the file declares `qubits 8`"
            ),
            (
                4,
                38,
                "qubit index 8 in `Z{i+1}` is out of range: the file declares `qubits 8`"
            ),
        ]
    );

    let code = run_binary(&["convert", &s(&path), "-o", "-"], &path, src.as_bytes()).unwrap();
    assert_eq!(code, 2);
}

/// Runs `phasewright args` on a fixture and asserts a bad-input exit (2) with a diagnostic
/// for `file`, rather than an abort.
fn rejected_by_binary(args: &[&str], file: &Path) {
    let text = std::fs::read(file).unwrap();
    let code = run_binary(args, file, &text).unwrap_or_else(|e| panic!("{e}"));
    assert_eq!(code, 2, "expected a diagnostic and exit 2");
}

/// Finding 0003 (fixed by `diag::depth_guard`): 10^4 nested parentheses overflow the stack of the `.ham` expression
/// parser (SIGABRT, exit 134). Driven through the binary so the abort cannot stop this suite.
#[test]
fn regression_0003_ham_deep_parentheses() {
    let f = root().join("tests/data/fuzz/0003_ham_deep_parentheses.ham");
    rejected_by_binary(&["convert", &s(&f), "-o", "-"], &f);
}

/// Finding 0004 (fixed by `diag::depth_guard`): a coefficient of 2·10^5 additions parses into a left-deep tree whose
/// evaluation (or drop) overflows the stack.
#[test]
fn regression_0004_ham_long_operator_chain() {
    let f = root().join("tests/data/fuzz/0004_ham_long_operator_chain.ham");
    rejected_by_binary(&["convert", &s(&f), "-o", "-"], &f);
}

/// Finding 0005 (fixed by `diag::depth_guard`): 2·10^4 nested sums overflow the stack.
#[test]
fn regression_0005_ham_deep_sums() {
    let f = root().join("tests/data/fuzz/0005_ham_deep_sums.ham");
    rejected_by_binary(&["convert", &s(&f), "-o", "-"], &f);
}

/// Finding 0006 (fixed by `diag::depth_guard`): 2·10^4 nested parentheses in a gate angle overflow the stack of the
/// OpenQASM reader. The fixture replaces `k01-re.qasm` of the overlap campaign, with its hash
/// recorded, so `verify` reads it.
#[test]
fn regression_0006_qasm_deep_parentheses() {
    let fixture = root().join("tests/data/fuzz/0006_qasm_deep_parentheses.qasm");
    let bytes = std::fs::read(&fixture).unwrap();
    let tmp = tempfile::tempdir().unwrap();
    let dir = tmp.path().join("campaign");
    copy_campaign(&campaigns().dirs[0], &dir);
    let f = dir.join("k01-re.qasm");
    std::fs::write(&f, &bytes).unwrap();
    let plan_path = dir.join("plan.json");
    let mut plan: serde_json::Value = serde_json::from_str(&read(&plan_path)).unwrap();
    for e in plan["circuits"].as_array_mut().unwrap() {
        if e["file"] == "k01-re.qasm" {
            e["sha256"] = sha256_hex(&bytes).into();
        }
    }
    std::fs::write(&plan_path, serde_json::to_string_pretty(&plan).unwrap()).unwrap();
    rejected_by_binary(&["-q", "verify", &s(&dir)], &f);
}
