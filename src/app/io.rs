//! File I/O helpers for the commands: read text with a clear error, write atomically.
//!
//! Invariant: an output file is either absent or complete. Every file is written to a temporary
//! name in the target folder and renamed into place.

use crate::error::{Error, Result};
use crate::lang::diag::Diagnostic;
use std::path::Path;

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

/// Reads `DIR/plan.json`; a malformed plan is bad input (exit 2) with line and column.
pub fn read_plan(dir: &Path) -> Result<crate::family::plan::Plan> {
    let path = dir.join("plan.json");
    let text = read_text(&path)?;
    let name = path.display().to_string();
    let plan = crate::family::plan::Plan::from_json(&text).map_err(|e| {
        let offset = crate::lang::diag::offset_of(&text, e.line(), e.column());
        Error::input(Diagnostic::at(
            &name,
            &text,
            offset,
            1,
            format!("not a phasewright plan: {e}"),
            Some("pass a folder written by `phasewright compile`".into()),
        ))
    })?;
    if plan.format != crate::family::plan::PLAN_FORMAT {
        return Err(Error::input(Diagnostic::whole_file(
            &name,
            format!("unsupported plan format `{}`", plan.format),
            Some(format!(
                "this phasewright reads `{}`",
                crate::family::plan::PLAN_FORMAT
            )),
        )));
    }
    Ok(plan)
}

/// Reads every circuit file of a plan back with phasewright's OpenQASM 3 reader.
pub fn read_plan_circuits(
    dir: &Path,
    plan: &crate::family::plan::Plan,
) -> Result<Vec<crate::circuit::Circuit>> {
    plan.circuits
        .iter()
        .map(|e| {
            let path = dir.join(&e.file);
            let text = read_text(&path)?;
            let prog =
                crate::qasm::read(&path.display().to_string(), &text).map_err(Error::input)?;
            Ok(prog.circuit)
        })
        .collect()
}

/// Reads and parses a `.dev` device file; problems are diagnostics (exit 2).
pub fn read_device(path: &Path) -> Result<crate::device::Device> {
    let text = read_text(path)?;
    crate::lang::dev::parse_device(&path.display().to_string(), &text).map_err(Error::Input)
}
