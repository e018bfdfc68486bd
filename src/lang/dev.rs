//! The `.dev` device language (grammar: `grammar/device.ebnf`; examples: `grammar/README.md`,
//! "Device files").
//!
//! In: a file name and its text. Out: a [`Device`], or every problem found, each a
//! [`Diagnostic`] with a caret under the offending text. Two stages: nom productions turn each
//! line into a statement holding source slices (so every value keeps its position); a second
//! pass checks meaning (gate names, universality, qubit ranges, links, rates, units) and builds
//! the device. A line with a syntax error is reported and skipped, so one run lists the
//! problems of every line. Never panics on any input.
//!
//! Statements (one per line, `#` starts a comment): `name`, `qubits`, `native`, `lattice`,
//! `link`, `cut`, `error`, `time`, `coherence`. Lattices and links add couplings and cuts remove them, in
//! file order; error rates and times are checked against the final coupling graph.

use crate::device::lattice::{self, Lattice, ShapeError};
use crate::device::native::{gate_arity, is_standard_gate, STDGATES};
use crate::device::{Calibration, Device, Link, NativeSet};
use crate::diag::{Code, Diagnostic, LineIndex};
use crate::lang::suggest::{closest, DEV_STATEMENTS};
use crate::lang::syntax_error::{Res, Wording};
use nom::branch::alt;
use nom::bytes::complete::{tag, take_while1};
use nom::character::complete::{alpha1, char, digit1, satisfy, space0, space1};
use nom::combinator::{cut, eof, map, not, opt, peek, recognize};
use nom::error::context;
use nom::multi::many1;
use nom::number::complete::recognize_float;
use nom::sequence::{pair, preceded, terminated, tuple};
use std::collections::{BTreeMap, BTreeSet};

/// Largest device the language accepts (the all-pairs distance table grows as the square).
pub const MAX_DEVICE_QUBITS: u64 = 2048;

/// Most couplings a device may have (breadth-first search from every qubit costs
/// qubits × couplings).
pub const MAX_DEVICE_LINKS: usize = 65_536;

/// An error-rate target: a qubit or a link `a-b`.
#[derive(Debug)]
enum Target<'a> {
    Qubit(&'a str),
    Link(&'a str, &'a str, &'a str),
}

#[derive(Debug)]
enum Stmt<'a> {
    Name(&'a str),
    Qubits(&'a str),
    Native(Vec<&'a str>),
    Lattice(&'a str, Vec<&'a str>),
    Link(&'a str, &'a str),
    Cut(&'a str, &'a str),
    Error(&'a str, Option<Target<'a>>, &'a str),
    Time(&'a str, &'a str, &'a str),
    /// `coherence [qubit] value unit`.
    Coherence(Option<&'a str>, &'a str, &'a str),
}

// ---- productions, bottom-up -------------------------------------------------------------

fn ident(i: &str) -> Res<'_, &str> {
    crate::lang::ident::ident(i)
}

fn keyword<'a>(word: &'static str) -> impl FnMut(&'a str) -> Res<'a, &'a str> {
    terminated(
        tag(word),
        not(peek(satisfy(crate::lang::ident::is_ident_char))),
    )
}

fn arg<'a, O>(
    what: &'static str,
    p: impl FnMut(&'a str) -> Res<'a, O>,
) -> impl FnMut(&'a str) -> Res<'a, O> {
    context(what, preceded(space1, p))
}

fn name_value(i: &str) -> Res<'_, &str> {
    take_while1(|c: char| !c.is_whitespace() && c != '#')(i)
}

fn target(i: &str) -> Res<'_, Target<'_>> {
    preceded(
        space1,
        alt((
            map(recognize(tuple((digit1, char('-'), digit1))), |s: &str| {
                let k = s.find('-').expect("dash");
                Target::Link(s, &s[..k], &s[k + 1..])
            }),
            map(terminated(digit1, peek(space1)), Target::Qubit),
        )),
    )(i)
}

fn statement(i: &str) -> Res<'_, Stmt<'_>> {
    alt((
        map(
            preceded(keyword("name"), cut(arg("a device name", name_value))),
            Stmt::Name,
        ),
        map(
            preceded(keyword("qubits"), cut(arg("a qubit count", digit1))),
            Stmt::Qubits,
        ),
        map(
            preceded(
                keyword("native"),
                cut(context("gate names", many1(preceded(space1, ident)))),
            ),
            Stmt::Native,
        ),
        map(
            preceded(
                keyword("lattice"),
                cut(pair(
                    arg(
                        "a lattice kind (line, ring, grid, brickwall, bridgedhex, octagon, full)",
                        ident,
                    ),
                    context("a lattice size", many1(preceded(space1, digit1))),
                )),
            ),
            |(k, s)| Stmt::Lattice(k, s),
        ),
        map(
            preceded(
                keyword("link"),
                cut(pair(
                    arg("a qubit number", digit1),
                    arg("a qubit number", digit1),
                )),
            ),
            |(a, b)| Stmt::Link(a, b),
        ),
        map(
            preceded(
                keyword("cut"),
                cut(pair(
                    arg("a qubit number", digit1),
                    arg("a qubit number", digit1),
                )),
            ),
            |(a, b)| Stmt::Cut(a, b),
        ),
        map(
            preceded(
                keyword("error"),
                cut(tuple((
                    arg("a gate name or `readout`", ident),
                    opt(target),
                    arg("an error rate", recognize_float),
                ))),
            ),
            |(g, t, r)| Stmt::Error(g, t, r),
        ),
        map(
            preceded(
                keyword("time"),
                cut(tuple((
                    arg("a gate name or `measure`", ident),
                    arg("a duration such as `300ns`", recognize_float),
                    context("a time unit (`ns` or `us`)", preceded(space0, alpha1)),
                ))),
            ),
            |(g, v, u)| Stmt::Time(g, v, u),
        ),
        map(
            preceded(
                keyword("coherence"),
                cut(tuple((
                    // A qubit number only when another number follows it (`coherence 7
                    // 80us`); `coherence 100 us` is the default with a spaced unit.
                    opt(preceded(
                        space1,
                        terminated(
                            digit1,
                            peek(pair(
                                space1,
                                satisfy(|c: char| {
                                    c.is_ascii_digit() || matches!(c, '.' | '+' | '-')
                                }),
                            )),
                        ),
                    )),
                    arg("a coherence time such as `100us`", recognize_float),
                    context("a time unit (`ns` or `us`)", preceded(space0, alpha1)),
                ))),
            ),
            |(q, v, u)| Stmt::Coherence(q, v, u),
        ),
    ))(i)
}

/// One line: optional statement, optional comment, end.
fn line(i: &str) -> Res<'_, Option<Stmt<'_>>> {
    let (i, _) = space0(i)?;
    let (i, s) = opt(statement)(i)?;
    let (i, _) = space0(i)?;
    let (i, _) = opt(preceded(char('#'), nom::combinator::rest))(i)?;
    let (i, _) = context("the end of the line", eof)(i)?;
    Ok((i, s))
}

// ---- meaning ------------------------------------------------------------------------------

struct Ctx<'s> {
    file: &'s str,
    src: &'s str,
    diags: Vec<Diagnostic>,
    /// Line starts, built at the first diagnostic.
    lines: Option<LineIndex>,
}

impl<'s> Ctx<'s> {
    fn offset(&self, s: &str) -> usize {
        (s.as_ptr() as usize).saturating_sub(self.src.as_ptr() as usize)
    }

    fn err(&mut self, code: Code, at: &str, msg: impl Into<String>, hint: Option<&str>) {
        let offset = self.offset(at);
        let lines = self.lines.get_or_insert_with(|| LineIndex::new(self.src));
        let d = Diagnostic::at_indexed(
            code,
            self.file,
            self.src,
            lines,
            offset,
            at.len(),
            msg,
            hint.map(str::to_string),
        );
        self.diags.push(d);
    }

    /// `s` as a qubit of a device with `size` qubits, or a diagnostic.
    fn qubit(&mut self, s: &str, size: u32) -> Option<u32> {
        let q = self.uint(s, "qubit")?;
        if q >= size {
            self.err(
                Code::DevQubitRange,
                s,
                format!("qubit {q} does not exist (the device has {size} qubits)"),
                None,
            );
            return None;
        }
        Some(q)
    }

    fn uint(&mut self, s: &str, what: &str) -> Option<u32> {
        match s.parse::<u64>() {
            Ok(v) if v <= u32::MAX as u64 => Some(v as u32),
            _ => {
                self.err(
                    Code::DevLimit,
                    s,
                    format!("{what} `{s}` is too large"),
                    None,
                );
                None
            }
        }
    }
}

const GATE_HINT: &str = "use gate names from the OpenQASM 3 standard library (e.g. rz sx x rx ry \
                         h cx cz) or `U` for the built-in general rotation";
const SETS_HINT: &str = "supported sets contain cx or cz, and one of: U; rz with sx, rx, ry or h; \
                         rx with ry (e.g. `native rz sx x cx`)";

/// How the `.dev` reader words a syntax error: `expected {label}, found `{word}`` (the label
/// `a statement` where no production put one; `expected {label}` at the end of the line), the
/// caret under the word, no hint.
const DEV_WORDING: Wording = Wording {
    code: Code::DevSyntax,
    unlabelled: Some("a statement"),
    found: |at| {
        let word = at.split_whitespace().next().unwrap_or("");
        let found = (!word.is_empty()).then(|| format!("`{word}`"));
        (found, at.find(char::is_whitespace).unwrap_or(at.len()))
    },
    hint: |_| None,
};

/// `; did you mean `X`?` for a near miss of one of `candidates`, else nothing.
fn did_you_mean(word: &str, candidates: &[&str]) -> String {
    closest(word, candidates)
        .map(|c| format!("; did you mean `{c}`?"))
        .unwrap_or_default()
}

/// Canonical spelling of a gate name: `u` is accepted for the built-in `U`.
fn canonical(name: &str) -> &str {
    if name == "u" {
        "U"
    } else {
        name
    }
}

/// Parses a `.dev` file. `file` names the source in diagnostics and, without a `name`
/// statement, gives the device its name (the file stem).
pub fn parse_device(file: &str, src: &str) -> Result<Device, Vec<Diagnostic>> {
    let mut cx = Ctx {
        file,
        src,
        diags: Vec::new(),
        lines: None,
    };
    let mut stmts: Vec<(&str, Stmt)> = Vec::new();
    for raw in src.split('\n') {
        let text = raw.strip_suffix('\r').unwrap_or(raw);
        match line(text) {
            Ok((_, Some(s))) => stmts.push((text, s)),
            Ok((_, None)) => {}
            Err(nom::Err::Error(e)) | Err(nom::Err::Failure(e)) => {
                let at_word = ident(text.trim_start()).map(|(_, w)| w).ok();
                match at_word {
                    Some(w) if e.at.as_ptr() == text.trim_start().as_ptr() => cx.err(
                        Code::DevUnknownWord,
                        w,
                        format!("unknown statement `{w}`{}", did_you_mean(w, DEV_STATEMENTS)),
                        Some("statements are: name qubits native lattice link cut error time coherence"),
                    ),
                    _ => {
                        let lines = cx.lines.get_or_insert_with(|| LineIndex::new(src));
                        let d = e.diagnostic(&DEV_WORDING, file, src, Some(lines));
                        cx.diags.push(d);
                    }
                }
            }
            Err(nom::Err::Incomplete(_)) => unreachable!("complete parsers"),
        }
    }
    build(&mut cx, &stmts)
        .filter(|_| cx.diags.is_empty())
        .ok_or(cx.diags)
}

fn build(cx: &mut Ctx, stmts: &[(&str, Stmt)]) -> Option<Device> {
    // A line that failed to parse may be the missing statement: do not also report it missing.
    let syntax_errors = !cx.diags.is_empty();
    let mut name: Option<String> = None;
    let mut declared: Option<(u32, &str)> = None;
    let mut native: Option<(&str, Vec<String>)> = None;
    let mut native_listed = 0usize;
    for (text, s) in stmts {
        match s {
            Stmt::Name(n) => {
                if name.is_some() {
                    cx.err(
                        Code::DevDeclare,
                        text.trim(),
                        "the device name is given twice",
                        None,
                    );
                }
                name = Some(n.to_string());
            }
            Stmt::Qubits(n) => {
                if declared.is_some() {
                    cx.err(
                        Code::DevDeclare,
                        text.trim(),
                        "`qubits` is given twice",
                        None,
                    );
                }
                if let Some(v) = cx.uint(n, "qubit count") {
                    if v == 0 {
                        cx.err(
                            Code::DevDeclare,
                            n,
                            "a device needs at least one qubit",
                            None,
                        );
                    } else if v as u64 > MAX_DEVICE_QUBITS {
                        cx.err(
                            Code::DevLimit,
                            n,
                            format!("{v} qubits is more than phasewright handles"),
                            Some(&format!("at most {MAX_DEVICE_QUBITS} qubits")),
                        );
                    } else {
                        declared = Some((v, n));
                    }
                }
            }
            Stmt::Native(gates) => {
                if native.is_some() {
                    cx.err(
                        Code::DevDeclare,
                        text.trim(),
                        "`native` is given twice",
                        Some("list every native gate on one line"),
                    );
                }
                let mut names = Vec::new();
                for g in gates {
                    let c = canonical(g);
                    if is_standard_gate(c) {
                        names.push(c.to_string());
                    } else {
                        cx.err(
                            Code::DevUnknownWord,
                            g,
                            format!("unknown gate name `{g}`{}", did_you_mean(g, STDGATES)),
                            Some(GATE_HINT),
                        );
                    }
                }
                native_listed = gates.len();
                native = Some((text.trim(), names));
            }
            _ => {}
        }
    }
    // Couplings, in file order.
    let mut size: u64 = declared.map_or(0, |(v, _)| v as u64);
    let mut couplings: BTreeSet<Link> = BTreeSet::new();
    let mut ops: Vec<(bool, &str, &str)> = Vec::new();
    for (_, s) in stmts {
        match s {
            Stmt::Lattice(kind, sizes) => {
                let nums: Vec<u32> = sizes.iter().filter_map(|t| cx.uint(t, "size")).collect();
                if nums.len() != sizes.len() {
                    continue;
                }
                let kinds_hint = format!("lattices are: {}", lattice::kinds_list());
                let lat = match Lattice::new(kind, &nums) {
                    Ok(lat) => lat,
                    Err(ShapeError::UnknownKind) => {
                        let names: Vec<&str> = lattice::KINDS.iter().map(|k| k.0).collect();
                        cx.err(
                            Code::DevUnknownWord,
                            kind,
                            format!("unknown lattice `{kind}`{}", did_you_mean(kind, &names)),
                            Some(&kinds_hint),
                        );
                        continue;
                    }
                    Err(ShapeError::Arity { expected }) => {
                        let at = sizes.last().copied().unwrap_or(kind);
                        cx.err(
                            Code::DevValue,
                            at,
                            format!(
                                "`{kind}` takes {expected} size{}",
                                if expected == 1 { "" } else { "s" }
                            ),
                            Some(&kinds_hint),
                        );
                        continue;
                    }
                    Err(ShapeError::Size {
                        index,
                        message,
                        hint,
                    }) => {
                        let at = sizes.get(index).copied().unwrap_or(kind);
                        cx.err(Code::DevValue, at, message, Some(&hint));
                        continue;
                    }
                };
                let total = lat.qubits();
                if total > MAX_DEVICE_QUBITS {
                    cx.err(
                        Code::DevLimit,
                        kind,
                        format!("a {total}-qubit lattice is more than phasewright handles"),
                        Some(&format!("at most {MAX_DEVICE_QUBITS} qubits")),
                    );
                    continue;
                }
                if let Some((v, at)) = declared {
                    if total > v as u64 {
                        cx.err(
                            Code::DevValue,
                            kind,
                            format!("this lattice has {total} qubits but the device declares {v}"),
                            Some(&format!(
                                "raise `qubits` (line of `{at}`) or shrink the lattice"
                            )),
                        );
                        continue;
                    }
                }
                size = size.max(total);
                couplings.extend(lat.links());
            }
            Stmt::Link(a, b) => ops.push((true, a, b)),
            Stmt::Cut(a, b) => ops.push((false, a, b)),
            _ => {}
        }
        // Links and cuts apply after the lattices that precede them; collect them in order.
        for (add, a, b) in ops.drain(..) {
            let (Some(qa), Some(qb)) = (cx.uint(a, "qubit"), cx.uint(b, "qubit")) else {
                continue;
            };
            let mut ok = true;
            for (q, t) in [(qa, a), (qb, b)] {
                if q as u64 >= size {
                    cx.err(
                        Code::DevQubitRange,
                        t,
                        format!("qubit {q} does not exist (the device has {size} qubits)"),
                        Some("qubits are numbered from 0; declare more with `qubits N`"),
                    );
                    ok = false;
                }
            }
            if !ok {
                continue;
            }
            if qa == qb {
                let whole = &cx.src[cx.offset(a)..cx.offset(b) + b.len()];
                cx.err(
                    Code::DevQubitRange,
                    whole,
                    format!("qubit {qa} is linked to itself"),
                    None,
                );
                continue;
            }
            let l = (qa.min(qb), qa.max(qb));
            if add {
                couplings.insert(l);
            } else if !couplings.remove(&l) {
                let whole = &cx.src[cx.offset(a)..cx.offset(b) + b.len()];
                cx.err(
                    Code::DevQubitRange,
                    whole,
                    format!("there is no coupling {}-{} to cut", l.0, l.1),
                    None,
                );
            }
        }
    }
    if couplings.len() > MAX_DEVICE_LINKS {
        cx.diags.push(Diagnostic::whole_file(
            Code::DevLimit,
            cx.file,
            format!(
                "the device has {} couplings, more than phasewright handles",
                couplings.len()
            ),
            Some(format!("at most {MAX_DEVICE_LINKS} couplings")),
        ));
    }
    let size_given = stmts
        .iter()
        .any(|(_, s)| matches!(s, Stmt::Lattice(..) | Stmt::Qubits(..)));
    if size == 0 && declared.is_none() && !syntax_errors && !size_given {
        cx.diags.push(Diagnostic::whole_file(
            Code::DevDeclare,
            cx.file,
            "the device declares no qubits",
            Some("add `qubits N` or a `lattice` line".into()),
        ));
    }
    let native_set = match &native {
        None => {
            if !syntax_errors {
                cx.diags.push(Diagnostic::whole_file(
                    Code::DevDeclare,
                    cx.file,
                    "the device lists no native gates",
                    Some("add a line such as `native rz sx x cx`".into()),
                ));
            }
            None
        }
        Some((at, names)) => {
            let refs: Vec<&str> = names.iter().map(String::as_str).collect();
            match NativeSet::from_names(&refs) {
                Ok(s) => Some(s),
                Err(reason) => {
                    // With a misspelt name the set is judged once the name is fixed.
                    if names.len() == native_listed {
                        cx.err(Code::DevDeclare, at, reason.to_string(), Some(SETS_HINT));
                    }
                    None
                }
            }
        }
    };
    // Calibration lines are judged against the native gates and the size; when either failed
    // to read, judging them would only repeat that error on every line.
    if (native.is_none() || size == 0) && !cx.diags.is_empty() {
        return None;
    }
    let native_names: Vec<String> = native.as_ref().map(|(_, n)| n.clone()).unwrap_or_default();
    let cal = calibration(cx, stmts, &native_names, size as u32, &couplings);
    let native_set = native_set?;
    if !cx.diags.is_empty() {
        return None;
    }
    let name = name.unwrap_or_else(|| {
        std::path::Path::new(cx.file).file_stem().map_or_else(
            || "device".to_string(),
            |s| s.to_string_lossy().into_owned(),
        )
    });
    let links: Vec<Link> = couplings.into_iter().collect();
    Some(Device::new(&name, size as usize, &links, native_set, cal))
}

/// A calibrated gate must be a standard gate and native to the device; otherwise a diagnostic
/// at the gate name (`hint` says what to write instead) and `false`.
fn check_calibrated_gate(
    cx: &mut Ctx,
    gate: &str,
    canonical_name: &str,
    native: &[String],
    hint: &str,
) -> bool {
    if !is_standard_gate(canonical_name) {
        cx.err(
            Code::DevUnknownWord,
            gate,
            format!("unknown gate name `{gate}`{}", did_you_mean(gate, STDGATES)),
            Some(GATE_HINT),
        );
        return false;
    }
    if !native.iter().any(|n| n == canonical_name) {
        cx.err(
            Code::DevUnknownWord,
            gate,
            format!("`{gate}` is not a native gate of this device"),
            Some(hint),
        );
        return false;
    }
    true
}

/// A duration `value unit` in ns, or a diagnostic: an unknown unit, or a value that is not
/// finite or fails `ok` (`must` says what it must be).
fn duration_ns(
    cx: &mut Ctx,
    value: &str,
    unit: &str,
    ok: impl Fn(f64) -> bool,
    must: &str,
) -> Option<f64> {
    let scale = match unit {
        "ns" => 1.0,
        "us" => 1000.0,
        _ => {
            cx.err(
                Code::DevUnknownWord,
                unit,
                format!("unknown time unit `{unit}`"),
                Some("use ns or us"),
            );
            return None;
        }
    };
    match value.parse::<f64>() {
        Ok(v) if v.is_finite() && ok(v) && (v * scale).is_finite() => Some(v * scale),
        Ok(v) if v.is_finite() && ok(v) => {
            cx.err(
                Code::DevValue,
                value,
                format!("duration {value} {unit} is too large"),
                None,
            );
            None
        }
        _ => {
            cx.err(
                Code::DevValue,
                value,
                format!("duration {value} must be {must}"),
                None,
            );
            None
        }
    }
}

fn calibration(
    cx: &mut Ctx,
    stmts: &[(&str, Stmt)],
    native: &[String],
    size: u32,
    couplings: &BTreeSet<Link>,
) -> Calibration {
    let mut cal = Calibration::default();
    let mut seen: BTreeMap<String, ()> = BTreeMap::new();
    for (text, s) in stmts {
        match s {
            Stmt::Error(gate, target, rate_text) => {
                let readout = matches!(*gate, "readout" | "measure");
                let g = canonical(gate);
                if !readout
                    && !check_calibrated_gate(
                        cx,
                        gate,
                        g,
                        native,
                        "give error rates for the gates on the `native` line, or `readout`",
                    )
                {
                    continue;
                }
                let rate = match rate_text.parse::<f64>() {
                    Ok(r) if (0.0..=1.0).contains(&r) => r,
                    _ => {
                        cx.err(
                            Code::DevValue,
                            rate_text,
                            format!("error rate {rate_text} is outside [0, 1]"),
                            Some("an error rate is a probability, e.g. 0.008"),
                        );
                        continue;
                    }
                };
                let two = !readout && gate_arity(g) == 2;
                let key = match target {
                    None => g.to_string(),
                    Some(Target::Qubit(q)) => format!("{g} {q}"),
                    Some(Target::Link(_, a, b)) => format!("{g} {a}-{b}"),
                };
                if seen.insert(key, ()).is_some() {
                    cx.err(
                        Code::DevDeclare,
                        text.trim(),
                        "this error rate is given twice",
                        None,
                    );
                    continue;
                }
                match target {
                    None if readout => cal.readout_error_rate = rate,
                    None => {
                        cal.error_rate.insert(g.to_string(), rate);
                    }
                    Some(Target::Qubit(t)) => {
                        if two {
                            cx.err(
                                Code::DevValue,
                                t,
                                format!("`{gate}` acts on two qubits: name a link such as `3-9`"),
                                None,
                            );
                            continue;
                        }
                        let Some(q) = cx.qubit(t, size) else {
                            continue;
                        };
                        if readout {
                            cal.qubit_readout_error_rate.insert(q, rate);
                        } else {
                            cal.qubit_error_rate.insert((g.to_string(), q), rate);
                        }
                    }
                    Some(Target::Link(whole, a, b)) => {
                        if !two {
                            cx.err(
                                Code::DevValue,
                                whole,
                                format!("`{gate}` acts on one qubit: name a qubit, not a link"),
                                None,
                            );
                            continue;
                        }
                        let (Some(qa), Some(qb)) = (cx.uint(a, "qubit"), cx.uint(b, "qubit"))
                        else {
                            continue;
                        };
                        let l = (qa.min(qb), qa.max(qb));
                        if !couplings.contains(&l) {
                            cx.err(Code::DevQubitRange,
                                whole,
                                format!("qubits {qa} and {qb} are not coupled"),
                                Some("error overrides apply to existing couplings (see `lattice`, `link`, `cut`)"),
                            );
                            continue;
                        }
                        cal.link_error_rate.insert((g.to_string(), l.0, l.1), rate);
                    }
                }
            }
            Stmt::Time(gate, value, unit) => {
                let measure = matches!(*gate, "measure" | "readout");
                let g = if measure { "measure" } else { canonical(gate) };
                if !measure
                    && !check_calibrated_gate(
                        cx,
                        gate,
                        g,
                        native,
                        "give times for the gates on the `native` line, or `measure`",
                    )
                {
                    continue;
                }
                let Some(ns) = duration_ns(cx, value, unit, |v| v >= 0.0, "a non-negative number")
                else {
                    continue;
                };
                if cal.time_ns.insert(g.to_string(), ns).is_some() {
                    cx.err(
                        Code::DevDeclare,
                        text.trim(),
                        format!("the time of `{g}` is given twice"),
                        None,
                    );
                }
            }
            Stmt::Coherence(qubit, value, unit) => {
                let Some(ns) = duration_ns(cx, value, unit, |v| v > 0.0, "a positive number")
                else {
                    continue;
                };
                let twice = match qubit {
                    None => cal.coherence_ns.replace(ns).is_some(),
                    Some(t) => {
                        let Some(q) = cx.qubit(t, size) else {
                            continue;
                        };
                        cal.qubit_coherence_ns.insert(q, ns).is_some()
                    }
                };
                if twice {
                    cx.err(
                        Code::DevDeclare,
                        text.trim(),
                        "this coherence time is given twice",
                        None,
                    );
                }
            }
            _ => {}
        }
    }
    cal
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn the_sketch_parses() {
        let src = "# demo\nqubits 12\nnative rz sx x cx\nlattice grid 3 4\nlink 3 9\ncut 5 6\n\
                   error cx 0.008\nerror cx 3-9 0.02\nerror sx 0.0003\nerror readout 0.015\n\
                   time cx 300ns\ntime sx 35ns\ntime measure 1.2us\n";
        let d = parse_device("demo/chip.dev", src).unwrap();
        assert_eq!(d.name, "chip");
        assert_eq!(d.num_qubits, 12);
        assert!(d.coupled(3, 9) && !d.coupled(5, 6) && d.coupled(0, 4));
        // grid 3×4 has 17 links; +1 link, −1 cut.
        assert_eq!(d.links().len(), 17);
        assert_eq!(d.calibration.time_ns["measure"], 1200.0);
        assert_eq!(d.gate_error(&crate::circuit::Gate::Cx(9, 3)), 0.02);
        assert_eq!(d.gate_error(&crate::circuit::Gate::Cx(0, 1)), 0.008);
    }

    #[test]
    fn a_syntax_error_points_at_the_argument() {
        let e = parse_device("a.dev", "qubits x4\nnative rz sx cx\n").unwrap_err();
        assert_eq!(e.len(), 1);
        assert_eq!((e[0].line, e[0].column), (1, 8));
        assert!(e[0].message.contains("qubit count"), "{}", e[0].message);
    }
}
