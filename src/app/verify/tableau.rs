//! `phasewright verify DIR --method tableau`: prove every written file equal to the circuit its
//! plan claims (see `tableau::equiv`), in parallel over circuits, one file in memory per thread.
//!
//! In: the plan and the folder. Out: a table (or JSON) with one verdict per circuit; each file
//! that differs is reported as `file:line:column` with the source line, a caret under the gate
//! and what differs, and the command exits with status 1. A plan or file the check cannot take
//! is bad input (status 2). No overlap values are computed: the method proves equivalence only.

use super::{phase_bar, VerifyArgs, VerifyReport};
use crate::app::io::read_text;
use crate::diag::Code;
use crate::diag::Diagnostic;
use crate::error::{Error, Result};
use crate::plan::{CircuitEntry, Plan};
use crate::report::table::Table;
use crate::tableau::equiv::{CannotCheck, Claim, Proof, Verdict};
use rayon::prelude::*;
use std::path::Path;

/// The outcome for one file.
enum Outcome {
    Proved(Proof),
    Refuted(Diagnostic),
}

fn prove_one(dir: &Path, claim: &Claim, e: &CircuitEntry) -> Result<Outcome> {
    let path = dir.join(&e.file);
    let name = path.display().to_string();
    let text = read_text(&path)?;
    let prog = crate::qasm::read(&name, &text).map_err(Error::input)?;
    let at = |code: Code, gate: Option<usize>, message: String, hint: &str| match gate
        .and_then(|g| prog.spans.get(g))
    {
        Some(&(off, len)) => {
            Diagnostic::at(code, &name, &text, off, len, message, Some(hint.into()))
        }
        None => Diagnostic::whole_file(code, &name, message, Some(hint.into())),
    };
    match claim.check(e, &prog.circuit) {
        Ok(Verdict::Equivalent(p)) => Ok(Outcome::Proved(p)),
        Ok(Verdict::Differs(r)) => Ok(Outcome::Refuted(at(
            Code::QasmPlan,
            r.gate,
            format!("{}: {}", e.id, r.message),
            "the file does not implement the circuit plan.json claims; recompile the campaign",
        ))),
        Err(CannotCheck {
            gate: Some(g),
            message,
        }) => Err(Error::input(at(
            Code::QasmSyntax,
            Some(g),
            message,
            "the tableau method takes the OpenQASM 3 subset phasewright writes",
        ))),
        Err(CannotCheck {
            gate: None,
            message,
        }) => Err(Error::usage(
            Code::PlanSyntax,
            format!("{}: {message}", e.id),
            Some("plan.json does not describe a campaign phasewright wrote"),
        )),
    }
}

/// Proves every file of `plan` (a whole campaign or one share); the report says which differ.
pub fn check(args: &VerifyArgs, g: &crate::app::Global, plan: &Plan) -> Result<VerifyReport> {
    let claim = Claim::from_plan(plan)?;
    let bar = phase_bar(g, plan.circuits.len(), "proving");
    let results: Vec<Result<Outcome>> = plan
        .circuits
        .par_iter()
        .map(|e| {
            let r = prove_one(&args.dir, &claim, e);
            bar.inc(1);
            r
        })
        .collect();
    bar.finish_and_clear();
    // The first error in plan order, whatever thread met it first.
    let outcomes: Vec<Outcome> = results.into_iter().collect::<Result<_>>()?;
    let refuted: Vec<&Diagnostic> = outcomes
        .iter()
        .filter_map(|o| match o {
            Outcome::Refuted(d) => Some(d),
            Outcome::Proved(_) => None,
        })
        .collect();
    let ok = refuted.is_empty();
    let circuits: Vec<serde_json::Value> = plan
        .circuits
        .iter()
        .zip(&outcomes)
        .map(|(e, o)| match o {
            Outcome::Proved(p) => serde_json::json!({
                "id": e.id, "file": e.file, "verdict": "equivalent",
                "gates": p.gates, "rotations": p.rotations,
                "canonical_rotations": p.canonical_rotations, "layers": p.layers,
            }),
            Outcome::Refuted(d) => serde_json::json!({
                "id": e.id, "file": e.file, "verdict": "differs",
                "line": d.line, "column": d.column, "message": d.message,
            }),
        })
        .collect();
    let json = serde_json::json!({
        "method": "tableau",
        "ok": ok,
        "overlaps": "not computed: the tableau method proves equivalence only",
        "circuits": circuits,
    });
    let mut t = Table::new([
        "circuit",
        "gates",
        "rotations",
        "canonical",
        "layers",
        "verdict",
    ]);
    for (e, o) in plan.circuits.iter().zip(&outcomes) {
        match o {
            Outcome::Proved(p) => t.row([
                e.id.clone(),
                p.gates.to_string(),
                p.rotations.to_string(),
                p.canonical_rotations.to_string(),
                p.layers.to_string(),
                "equivalent".to_string(),
            ]),
            Outcome::Refuted(d) => t.row([
                e.id.clone(),
                String::new(),
                String::new(),
                String::new(),
                String::new(),
                format!("differs at line {}", d.line),
            ]),
        }
    }
    let mut text = t.render();
    text += &format!(
        "\n{} of {} circuits proved equivalent to the circuits plan.json claims (tableau \
         method: exact, up to a global phase, rotation angles to 1e-12 relative).\n",
        outcomes.len() - refuted.len(),
        outcomes.len()
    );
    text += "(rotations: met in the file after splitting off quarter turns; canonical: after \
         merging; layers: of mutually commuting rotations)\n";
    text += "Ideal and exact overlaps are not computed by this method: it proves equivalence \
         only (use --method statevector on circuits that fit the simulator).\n";
    let failure = (!ok).then(|| {
        Error::Internal(format!(
            "{} of {} circuits differ from the circuits plan.json claims",
            refuted.len(),
            outcomes.len()
        ))
    });
    Ok(VerifyReport {
        json,
        text,
        diagnostics: refuted.iter().map(|d| d.to_string()).collect(),
        failure,
    })
}
