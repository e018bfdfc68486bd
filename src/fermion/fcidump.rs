//! FCIDUMP integral files and the spin-orbital Hamiltonian they define.
//!
//! In: the text of an FCIDUMP file (Knowles & Handy, Comput. Phys. Commun. 54, 75 (1989)): a
//! namelist header `&FCI NORB=…, NELEC=…, MS2=…, ORBSYM=…, &END` (or `/`), then lines
//! `value i j k l`. Orbitals are numbered from 1; `(ij|kl)` is in chemists' notation with the
//! 8-fold symmetry of real orbitals; `k = l = 0` marks `h_ij`; `i = j = k = l = 0` the core
//! energy; `j = k = l = 0` an orbital energy (ignored). Out: an [`Integrals`] value, optionally
//! reduced to an active space (frozen doubly occupied core, dropped virtuals), and the
//! spin-orbital [`FermionOp`]
//!
//! `H = E_core + Σ_{pq,σ} h_pq a†_{pσ} a_{qσ} + ½ Σ_{pqrs,στ} (pq|rs) a†_{pσ} a†_{rτ} a_{sτ} a_{qσ}`
//!
//! with spatial orbital `p` (0-based in the active space) on modes `2p` (α) and `2p + 1` (β).
//! Errors (truncated file, missing header fields, indices beyond NORB, non-numeric values) are
//! diagnostics with line and column.

use super::{FermionOp, Ladder};
use crate::diag::{Code, Diagnostic};
use num_complex::Complex64;

/// One- and two-electron integrals over `norb` spatial orbitals (Hartree).
#[derive(Clone, Debug, PartialEq)]
pub struct Integrals {
    pub norb: usize,
    pub nelec: usize,
    /// `2 S_z = N_α − N_β`.
    pub ms2: i64,
    pub core_energy: f64,
    /// `h[p * norb + q]`.
    pub one_body: Vec<f64>,
    /// `(pq|rs)` at `((p * norb + q) * norb + r) * norb + s`.
    pub two_body: Vec<f64>,
}

impl Integrals {
    pub fn h(&self, p: usize, q: usize) -> f64 {
        self.one_body[p * self.norb + q]
    }
    pub fn eri(&self, p: usize, q: usize, r: usize, s: usize) -> f64 {
        let n = self.norb;
        self.two_body[((p * n + q) * n + r) * n + s]
    }
}

/// True when the text looks like an FCIDUMP file (first token `&FCI`, any case).
pub fn looks_like_fcidump(src: &str) -> bool {
    src.trim_start()
        .get(..4)
        .is_some_and(|h| h.eq_ignore_ascii_case("&FCI"))
}

/// Largest NORB accepted (the two-electron table has NORB⁴ entries).
pub const MAX_NORB: usize = 64;

struct Tok<'a> {
    text: &'a str,
    offset: usize,
}

/// Splits `src[from..to]` into header tokens: words, `=`, with commas as separators and
/// `!` comments skipped.
fn header_tokens(src: &str, from: usize, to: usize) -> Vec<Tok<'_>> {
    let mut out = Vec::new();
    let s = &src[from..to];
    let mut k = 0;
    let b = s.as_bytes();
    while k < b.len() {
        let c = b[k];
        if c == b'!' {
            // A Fortran namelist comment runs to the end of the line.
            while k < b.len() && b[k] != b'\n' {
                k += 1;
            }
        } else if c.is_ascii_whitespace() || c == b',' {
            k += 1;
        } else if c == b'=' {
            out.push(Tok {
                text: &s[k..k + 1],
                offset: from + k,
            });
            k += 1;
        } else {
            let start = k;
            while k < b.len() && !(b[k].is_ascii_whitespace() || b[k] == b',' || b[k] == b'=') {
                k += 1;
            }
            out.push(Tok {
                text: &s[start..k],
                offset: from + start,
            });
        }
    }
    out
}

/// Where the header ends (`&END`, `$END` or `/`, outside `!` comments): offset and length.
fn header_end(src: &str, from: usize) -> Option<(usize, usize)> {
    let mut pos = from;
    for line in src[from..].split_inclusive('\n') {
        let code = line.split('!').next().unwrap_or("");
        let upper = code.to_ascii_uppercase();
        let found = [
            upper.find("&END").map(|k| (k, 4)),
            upper.find("$END").map(|k| (k, 4)),
            upper.find('/').map(|k| (k, 1)),
        ]
        .into_iter()
        .flatten()
        .min_by_key(|(k, _)| *k);
        if let Some((k, len)) = found {
            return Some((pos + k, len));
        }
        pos += line.len();
    }
    None
}

fn parse_f64(t: &str) -> Option<f64> {
    let t = t.replace(['D', 'd'], "e");
    t.parse::<f64>().ok().filter(|v| v.is_finite())
}

/// Reads an FCIDUMP file. `file` is only used in diagnostics.
pub fn parse_fcidump(file: &str, src: &str) -> Result<Integrals, Vec<Diagnostic>> {
    let diag = |code: Code, off: usize, len: usize, msg: String, hint: &str| {
        Diagnostic::at(code, file, src, off, len, msg, Some(hint.to_string()))
    };
    let lead = src.len() - src.trim_start().len();
    if !looks_like_fcidump(src) {
        return Err(vec![diag(
            Code::FciSyntax,
            lead,
            4,
            "not an FCIDUMP file: it must start with `&FCI`".into(),
            "an integral file starts with a header such as `&FCI NORB=2,NELEC=2,MS2=0,`",
        )]);
    }
    // The header ends at `&END`, `$END` or a `/` on its own.
    let head_from = lead + 4;
    let Some((head_to, end_len)) = header_end(src, head_from) else {
        return Err(vec![diag(
            Code::FciSyntax,
            src.len(),
            0,
            "truncated file: the `&FCI` header never ends".into(),
            "the header closes with `&END` (or `/`) before the integral lines",
        )]);
    };

    let toks = header_tokens(src, head_from, head_to);
    let mut errors = Vec::new();
    let mut fields: Vec<(&str, usize, Vec<&Tok>)> = Vec::new();
    let mut k = 0;
    while k < toks.len() {
        if k + 1 < toks.len() && toks[k + 1].text == "=" {
            fields.push((toks[k].text, toks[k].offset, Vec::new()));
            k += 2;
        } else if let Some(f) = fields.last_mut() {
            f.2.push(&toks[k]);
            k += 1;
        } else {
            errors.push(diag(
                Code::FciSyntax,
                toks[k].offset,
                toks[k].text.len(),
                format!("unexpected `{}` in the header", toks[k].text),
                "header entries are written `NAME=value,`",
            ));
            k += 1;
        }
    }
    let field = |name: &str| fields.iter().find(|(n, _, _)| n.eq_ignore_ascii_case(name));
    let int_field = |name: &str, required: bool, errors: &mut Vec<Diagnostic>| -> Option<i64> {
        match field(name) {
            None => {
                if required {
                    errors.push(diag(Code::FciSyntax,
                        lead,
                        4,
                        format!("missing header field {name}"),
                        "the `&FCI` header needs NORB (orbitals) and NELEC (electrons); MS2 defaults to 0",
                    ));
                }
                None
            }
            Some((_, off, vals)) => match vals.first() {
                Some(v) => match v.text.parse::<i64>() {
                    Ok(x) => Some(x),
                    Err(_) => {
                        errors.push(diag(
                            Code::FciValue,
                            v.offset,
                            v.text.len(),
                            format!("{name} must be an integer, found `{}`", v.text),
                            "write e.g. `NORB=4,`",
                        ));
                        None
                    }
                },
                None => {
                    errors.push(diag(
                        Code::FciSyntax,
                        *off,
                        name.len(),
                        format!("header field {name} has no value"),
                        "write e.g. `NORB=4,`",
                    ));
                    None
                }
            },
        }
    };
    let norb = int_field("NORB", true, &mut errors);
    let nelec = int_field("NELEC", true, &mut errors);
    let ms2 = int_field("MS2", false, &mut errors).unwrap_or(0);
    for uhf in ["IUHF", "UHF"] {
        if let Some((n, off, vals)) = field(uhf) {
            let on = vals.first().is_some_and(|v| {
                let t = v.text.to_ascii_uppercase();
                t == "1" || t == ".TRUE." || t == "T" || t == ".T."
            });
            if on {
                errors.push(diag(
                    Code::FciSyntax,
                    *off,
                    n.len(),
                    "unrestricted (spin-separated) integral files are not supported".into(),
                    "write the integrals over restricted (spin-free) orbitals",
                ));
            }
        }
    }
    let (norb, nelec) = match (norb, nelec) {
        (Some(n), Some(e)) => (n, e),
        _ => return Err(errors),
    };
    let norb_off = field("NORB").map_or(lead, |f| f.2[0].offset);
    if norb < 1 || norb as usize > MAX_NORB {
        errors.push(diag(
            Code::FciLimit,
            norb_off,
            norb.to_string().len(),
            format!("NORB = {norb} is outside 1..={MAX_NORB}"),
            "NORB counts spatial orbitals",
        ));
        return Err(errors);
    }
    let norb = norb as usize;
    let nelec_off = field("NELEC").map_or(lead, |f| f.2[0].offset);
    if nelec < 0 || nelec as usize > 2 * norb || (nelec + ms2) % 2 != 0 || ms2.abs() > nelec {
        errors.push(diag(
            Code::FciValue,
            nelec_off,
            nelec.to_string().len(),
            format!("NELEC = {nelec} with MS2 = {ms2} does not fit {norb} orbitals"),
            "need 0 ≤ NELEC ≤ 2·NORB, |MS2| ≤ NELEC and NELEC + MS2 even",
        ));
        return Err(errors);
    }
    if let Some((_, off, vals)) = field("ORBSYM") {
        if vals.len() != norb {
            errors.push(diag(
                Code::FciValue,
                *off,
                6,
                format!("ORBSYM lists {} orbitals but NORB = {norb}", vals.len()),
                "ORBSYM has one symmetry label per orbital",
            ));
        }
    }

    let mut ints = Integrals {
        norb,
        nelec: nelec as usize,
        ms2,
        core_energy: 0.0,
        one_body: vec![0.0; norb * norb],
        two_body: vec![0.0; norb * norb * norb * norb],
    };
    let body_from = head_to + end_len;
    let mut lines_read = 0;
    let mut pos = body_from;
    for line in src[body_from..].split_inclusive('\n') {
        let line_off = pos;
        pos += line.len();
        let mut toks = Vec::new();
        let mut k = 0;
        let b = line.as_bytes();
        while k < b.len() {
            if b[k].is_ascii_whitespace() || b[k] == b',' {
                k += 1;
                continue;
            }
            let s = k;
            while k < b.len() && !(b[k].is_ascii_whitespace() || b[k] == b',') {
                k += 1;
            }
            toks.push((line_off + s, &line[s..k]));
        }
        if toks.is_empty() {
            continue;
        }
        if toks.len() != 5 {
            let (off, t) = toks[0];
            let msg = if toks.len() < 5 {
                format!(
                    "truncated integral line: {} of 5 fields (a value and four orbital indices)",
                    toks.len()
                )
            } else {
                "too many fields: an integral line is a value and four orbital indices".into()
            };
            errors.push(diag(
                Code::FciSyntax,
                off,
                t.len(),
                msg,
                "each line reads `value i j k l`",
            ));
            continue;
        }
        let (voff, vtext) = toks[0];
        let Some(value) = parse_f64(vtext) else {
            errors.push(diag(
                Code::FciSyntax,
                voff,
                vtext.len(),
                format!("not a number: `{vtext}`"),
                "integral values are decimal numbers such as `0.6746` or `-1.25D-02`",
            ));
            continue;
        };
        let mut idx = [0usize; 4];
        let mut bad = false;
        for (slot, &(off, t)) in idx.iter_mut().zip(&toks[1..]) {
            match t.parse::<i64>() {
                Ok(v) if v >= 0 && v as usize <= norb => *slot = v as usize,
                Ok(v) => {
                    errors.push(diag(
                        Code::FciValue,
                        off,
                        t.len(),
                        format!("orbital index {v} is outside 0..={norb} (NORB = {norb})"),
                        "orbitals are numbered 1..NORB; 0 marks unused positions",
                    ));
                    bad = true;
                }
                Err(_) => {
                    errors.push(diag(
                        Code::FciValue,
                        off,
                        t.len(),
                        format!("orbital index must be an integer, found `{t}`"),
                        "each line reads `value i j k l` with integer indices",
                    ));
                    bad = true;
                }
            }
        }
        if bad {
            continue;
        }
        lines_read += 1;
        let [i, j, k, l] = idx;
        match (i > 0, j > 0, k > 0, l > 0) {
            (true, true, true, true) => {
                let (i, j, k, l) = (i - 1, j - 1, k - 1, l - 1);
                let n = norb;
                for (a, b, c, d) in [
                    (i, j, k, l),
                    (j, i, k, l),
                    (i, j, l, k),
                    (j, i, l, k),
                    (k, l, i, j),
                    (l, k, i, j),
                    (k, l, j, i),
                    (l, k, j, i),
                ] {
                    ints.two_body[((a * n + b) * n + c) * n + d] = value;
                }
            }
            (true, true, false, false) => {
                ints.one_body[(i - 1) * norb + (j - 1)] = value;
                ints.one_body[(j - 1) * norb + (i - 1)] = value;
            }
            (false, false, false, false) => ints.core_energy = value,
            (true, false, false, false) => {} // orbital energy
            _ => errors.push(diag(Code::FciValue,
                toks[1].0,
                line.trim_end().len() - (toks[1].0 - line_off),
                format!("index pattern `{i} {j} {k} {l}` is not an FCIDUMP entry"),
                "use `i j k l` (two-electron), `i j 0 0` (one-electron), `i 0 0 0` (orbital energy) or `0 0 0 0` (core energy)",
            )),
        }
    }
    if lines_read == 0 && errors.is_empty() {
        errors.push(diag(
            Code::FciSyntax,
            src.len(),
            0,
            "truncated file: no integrals after the header".into(),
            "the header is followed by lines `value i j k l`",
        ));
    }
    if errors.is_empty() {
        Ok(ints)
    } else {
        Err(errors)
    }
}

/// An active space: `frozen` lowest orbitals doubly occupied, the next `active` orbitals kept,
/// the rest dropped.
#[derive(Clone, Copy, Debug, PartialEq, Eq)]
pub struct ActiveSpace {
    pub frozen: usize,
    pub active: usize,
}

impl ActiveSpace {
    /// Parses `FIRST-LAST`: orbitals FIRST..=LAST (numbered from 1 as in the file) are active.
    pub fn parse(s: &str) -> Result<ActiveSpace, super::FermionError> {
        let err = || {
            super::FermionError::ActiveSpace(format!("bad active space `{s}`: write FIRST-LAST, orbitals numbered from 1 as in the integral file, e.g. `2-5`"))
        };
        let (a, b) = s.split_once('-').ok_or_else(err)?;
        let a: usize = a.trim().parse().map_err(|_| err())?;
        let b: usize = b.trim().parse().map_err(|_| err())?;
        if a == 0 || b < a {
            return Err(err());
        }
        Ok(ActiveSpace {
            frozen: a - 1,
            active: b - a + 1,
        })
    }
}

/// Reduces the integrals to an active space. Frozen orbitals are doubly occupied:
/// `E' = E + Σ_c 2 h_cc + Σ_{cd} [2 (cc|dd) − (cd|dc)]` and
/// `h'_pq = h_pq + Σ_c [2 (pq|cc) − (pc|cq)]` (c, d over frozen orbitals; the standard
/// frozen-core expressions, e.g. Helgaker, Jørgensen & Olsen, Molecular Electronic-Structure
/// Theory (2000), Sec. 10.8 — recalled from memory, checked against the PySCF CASCI energy in
/// tests).
pub fn restrict(ints: &Integrals, space: ActiveSpace) -> Result<Integrals, super::FermionError> {
    let ActiveSpace { frozen, active } = space;
    let refuse = |m: String| Err(super::FermionError::ActiveSpace(m));
    if frozen + active > ints.norb {
        return refuse(format!(
            "active space reaches orbital {} but the file has NORB = {}",
            frozen + active,
            ints.norb
        ));
    }
    if 2 * frozen > ints.nelec {
        return refuse(format!(
            "{frozen} frozen orbitals need {} electrons but NELEC = {}",
            2 * frozen,
            ints.nelec
        ));
    }
    let nelec = ints.nelec - 2 * frozen;
    let (na, nb) = alpha_beta(nelec, ints.ms2);
    if na > active || nb > active {
        return refuse(format!(
            "{nelec} active electrons (MS2 = {}) do not fit {active} active orbitals",
            ints.ms2
        ));
    }
    let mut core = ints.core_energy;
    for c in 0..frozen {
        core += 2.0 * ints.h(c, c);
        for d in 0..frozen {
            core += 2.0 * ints.eri(c, c, d, d) - ints.eri(c, d, d, c);
        }
    }
    let n = active;
    let mut one = vec![0.0; n * n];
    for p in 0..n {
        for q in 0..n {
            let (pp, qq) = (p + frozen, q + frozen);
            let mut v = ints.h(pp, qq);
            for c in 0..frozen {
                v += 2.0 * ints.eri(pp, qq, c, c) - ints.eri(pp, c, c, qq);
            }
            one[p * n + q] = v;
        }
    }
    let mut two = vec![0.0; n * n * n * n];
    for p in 0..n {
        for q in 0..n {
            for r in 0..n {
                for s in 0..n {
                    two[((p * n + q) * n + r) * n + s] =
                        ints.eri(p + frozen, q + frozen, r + frozen, s + frozen);
                }
            }
        }
    }
    Ok(Integrals {
        norb: n,
        nelec,
        ms2: ints.ms2,
        core_energy: core,
        one_body: one,
        two_body: two,
    })
}

/// `(N_α, N_β)` from the electron count and `MS2 = N_α − N_β` (inputs already validated).
pub fn alpha_beta(nelec: usize, ms2: i64) -> (usize, usize) {
    let n = nelec as i64;
    (((n + ms2) / 2) as usize, ((n - ms2) / 2) as usize)
}

/// The spin-orbital Hamiltonian on `2·norb` modes (mode `2p` = orbital p α, `2p+1` = β).
pub fn spin_orbital_hamiltonian(ints: &Integrals) -> FermionOp {
    let n = ints.norb;
    let mut op = FermionOp::new(2 * n);
    op.add_product(Complex64::new(ints.core_energy, 0.0), &[]);
    for p in 0..n {
        for q in 0..n {
            let h = ints.h(p, q);
            if h == 0.0 {
                continue;
            }
            for s in 0..2 {
                op.add_product(
                    Complex64::new(h, 0.0),
                    &[(2 * p + s, Ladder::Create), (2 * q + s, Ladder::Annihilate)],
                );
            }
        }
    }
    for p in 0..n {
        for q in 0..n {
            for r in 0..n {
                for s in 0..n {
                    let v = ints.eri(p, q, r, s);
                    if v == 0.0 {
                        continue;
                    }
                    for sig in 0..2 {
                        for tau in 0..2 {
                            op.add_product(
                                Complex64::new(0.5 * v, 0.0),
                                &[
                                    (2 * p + sig, Ladder::Create),
                                    (2 * r + tau, Ladder::Create),
                                    (2 * s + tau, Ladder::Annihilate),
                                    (2 * q + sig, Ladder::Annihilate),
                                ],
                            );
                        }
                    }
                }
            }
        }
    }
    op
}
