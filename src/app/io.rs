//! File I/O helpers for the commands: read text with a clear error, write atomically.
//!
//! Invariant: an output file is either absent or complete. Every file is written to a temporary
//! name in the target folder and renamed into place.

use crate::error::{Error, Result};
use crate::family::plan::{PathStep, Plan, PLAN_FORMAT};
use crate::lang::diag::Diagnostic;
use crate::lang::json_span::{locate, Step};
use std::io::Write;
use std::path::Path;

/// Writes `text` to stdout and flushes. A reader that has gone away (`| head -1`) is
/// [`Error::BrokenPipe`], which `main` turns into a quiet exit.
pub fn emit(text: &str) -> Result<()> {
    let mut out = std::io::stdout().lock();
    out.write_all(text.as_bytes())
        .and_then(|()| out.flush())
        .map_err(|source| {
            if source.kind() == std::io::ErrorKind::BrokenPipe {
                Error::BrokenPipe
            } else {
                Error::Io {
                    path: "<stdout>".into(),
                    source,
                    reading: false,
                }
            }
        })
}

/// Reads a UTF-8 text file; a file that is not text is a diagnostic (exit status 2).
pub fn read_text(path: &Path) -> Result<String> {
    let bytes = std::fs::read(path).map_err(|source| Error::Io {
        path: path.display().to_string(),
        source,
        reading: true,
    })?;
    String::from_utf8(bytes).map_err(|e| {
        Error::input(Diagnostic::whole_file(
            &path.display().to_string(),
            format!(
                "not a text file (invalid UTF-8 at byte {})",
                e.utf8_error().valid_up_to()
            ),
            Some("pass a plain-text input file".into()),
        ))
    })
}

/// Reads and parses a `.ham` file: not text, or not valid `.ham`, is a diagnostic (exit 2).
pub fn read_hamiltonian(path: &Path) -> Result<crate::lang::ham::HamFile> {
    let src = read_text(path)?;
    crate::lang::ham::parse_hamiltonian(&path.display().to_string(), &src).map_err(Error::Input)
}

/// Writes `contents` to `path` through a temporary file in the same folder.
pub fn write_atomic(path: &Path, contents: &[u8]) -> Result<()> {
    let dir = path
        .parent()
        .filter(|p| !p.as_os_str().is_empty())
        .unwrap_or(Path::new("."));
    let name = path
        .file_name()
        .map(|n| n.to_string_lossy().into_owned())
        .unwrap_or_default();
    let tmp = dir.join(format!(".{name}.{}.tmp", std::process::id()));
    let werr = |source| Error::Io {
        path: path.display().to_string(),
        source,
        reading: false,
    };
    std::fs::write(&tmp, contents).map_err(werr)?;
    std::fs::rename(&tmp, path).map_err(|source| {
        let _ = std::fs::remove_file(&tmp);
        Error::Io {
            path: path.display().to_string(),
            source,
            reading: false,
        }
    })
}

/// Reads `DIR/plan.json` and validates it ([`Plan::validate`]): malformed JSON, another
/// format, or values that do not fit together are bad input (exit 2), each problem with its
/// line and column.
pub fn read_plan(dir: &Path) -> Result<Plan> {
    let path = dir.join("plan.json");
    let text = read_text(&path)?;
    let name = path.display().to_string();
    let not_a_plan = |e: serde_json::Error| {
        let offset = crate::lang::diag::offset_of(&text, e.line(), e.column());
        Error::input(Diagnostic::at(
            &name,
            &text,
            offset,
            1,
            format!("not a phasewright plan: {e}"),
            Some("pass a folder written by `phasewright compile`".into()),
        ))
    };
    let value: serde_json::Value = serde_json::from_str(&text).map_err(not_a_plan)?;
    let format = value.get("format").and_then(|f| f.as_str());
    if format != Some(PLAN_FORMAT) {
        let shown = format.map_or_else(|| "none".to_string(), |f| format!("`{f}`"));
        let span = locate(&text, &[Step::Key("format")]).map_or((0, 1), |s| s.value);
        return Err(Error::input(Diagnostic::at(
            &name,
            &text,
            span.0,
            span.1,
            format!("unsupported plan format {shown}"),
            Some(format!(
                "this phasewright reads `{PLAN_FORMAT}`; recompile the campaign with it"
            )),
        )));
    }
    let plan = Plan::from_json(&text).map_err(not_a_plan)?;
    let problems = plan.validate();
    if problems.is_empty() {
        return Ok(plan);
    }
    Err(Error::Input(
        problems
            .into_iter()
            .map(|p| {
                let steps: Vec<Step> = p
                    .path
                    .iter()
                    .map(|s| match *s {
                        PathStep::Key(k) => Step::Key(k),
                        PathStep::Index(i) => Step::Index(i),
                    })
                    .collect();
                let hint = p.hint.or_else(|| {
                    Some("recompile the campaign rather than editing plan.json".into())
                });
                match locate(&text, &steps) {
                    Some(span) => {
                        let (o, l) = span.value;
                        Diagnostic::at(&name, &text, o, l, p.message, hint)
                    }
                    None => Diagnostic::whole_file(&name, p.message, hint),
                }
            })
            .collect(),
    ))
}

/// Reads every circuit file of a plan back with phasewright's OpenQASM 3 reader.
pub fn read_plan_circuits(dir: &Path, plan: &Plan) -> Result<Vec<crate::circuit::Circuit>> {
    plan.circuits
        .iter()
        .map(|e| {
            let path = dir.join(&e.file);
            let text = read_text(&path)?;
            let name = path.display().to_string();
            let prog = crate::qasm::read(&name, &text).map_err(Error::input)?;
            let c = prog.circuit;
            if c.num_clbits != e.num_clbits || c.num_qubits > e.num_qubits {
                return Err(Error::input(Diagnostic::whole_file(
                    &name,
                    format!(
                        "uses {} qubits and {} classical bits, but plan.json gives circuit `{}` {} and {}",
                        c.num_qubits, c.num_clbits, e.id, e.num_qubits, e.num_clbits
                    ),
                    Some("the file and the plan come from different compilations; recompile".into()),
                )));
            }
            Ok(c)
        })
        .collect()
}

/// Reads and parses a `.dev` device file; problems are diagnostics (exit 2).
pub fn read_device(path: &Path) -> Result<crate::device::Device> {
    let text = read_text(path)?;
    crate::lang::dev::parse_device(&path.display().to_string(), &text).map_err(Error::Input)
}
