//! File I/O helpers for the commands: read text with a clear error, write atomically.
//!
//! Invariant: an output file is either absent or complete. Every file is written to a temporary
//! name in the target folder and renamed into place.

use crate::diag::Code;
use crate::diag::Diagnostic;
use crate::error::{Error, Result};
use crate::lang::json_span::{locate, Step};
use crate::plan::{sha256_hex, PathStep, Plan, PLAN_FORMAT, READABLE_PLAN_FORMATS};
use std::io::Write;
use std::path::{Path, PathBuf};

/// Writes `text` to stdout and flushes. A reader that has gone away (`| head -1`) is
/// [`Error::BrokenPipe`], which `main` turns into a quiet exit.
pub fn emit(text: &str) -> Result<()> {
    emit_bytes(text.as_bytes())
}

/// [`emit`] for bytes.
pub fn emit_bytes(bytes: &[u8]) -> Result<()> {
    let mut out = std::io::stdout().lock();
    out.write_all(bytes)
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

/// Is `path` the conventional `-` (stdin for an input, stdout for an output)?
pub fn is_stdio(path: &Path) -> bool {
    path.as_os_str() == "-"
}

/// The name of an input in diagnostics: its path, or `<stdin>` for `-`.
pub fn display_name(path: &Path) -> String {
    if is_stdio(path) {
        "<stdin>".into()
    } else {
        path.display().to_string()
    }
}

/// Reads a UTF-8 text file (`-`: all of stdin); a file that is not text is a diagnostic (exit
/// status 2).
pub fn read_text(path: &Path) -> Result<String> {
    let name = display_name(path);
    let read = if is_stdio(path) {
        let mut buf = Vec::new();
        std::io::Read::read_to_end(&mut std::io::stdin().lock(), &mut buf).map(|_| buf)
    } else {
        std::fs::read(path)
    };
    let bytes = read.map_err(|source| Error::Io {
        path: name.clone(),
        source,
        reading: true,
    })?;
    String::from_utf8(bytes).map_err(|e| {
        Error::input(Diagnostic::whole_file(
            Code::UsageInput,
            &name,
            format!(
                "not a text file (invalid UTF-8 at byte {})",
                e.utf8_error().valid_up_to()
            ),
            Some("pass a plain-text input file".into()),
        ))
    })
}

/// Refuses two inputs of one command that both want stdin (`-`).
pub fn one_stdin(inputs: &[(&str, Option<&Path>)]) -> Result<()> {
    let from_stdin: Vec<&str> = inputs
        .iter()
        .filter(|(_, p)| p.is_some_and(is_stdio))
        .map(|(what, _)| *what)
        .collect();
    if from_stdin.len() > 1 {
        return Err(Error::usage(
            Code::UsageConflict,
            format!("{} cannot all read stdin (`-`)", from_stdin.join(" and ")),
            Some("at most one input can come from stdin; give the others as files"),
        ));
    }
    Ok(())
}

/// Parses `.ham` text; problems are diagnostics, sharpened with "did you mean" and the
/// recognition of a device file ([`crate::lang::suggest`]).
pub fn parse_hamiltonian_text(
    name: &str,
    src: &str,
    encoding: Option<crate::fermion::Encoding>,
) -> Result<crate::hamiltonian::HamRead> {
    crate::hamiltonian::parse_hamiltonian_with(name, src, encoding)
        .map_err(|d| Error::Input(crate::lang::suggest::hamiltonian_hints(name, src, d)))
}

/// Reads and parses a `.ham` file: not text, or not valid `.ham`, is a diagnostic (exit 2).
pub fn read_hamiltonian(path: &Path) -> Result<crate::hamiltonian::HamFile> {
    let src = read_text(path)?;
    parse_hamiltonian_text(&display_name(path), &src, None).map(|r| r.ham)
}

/// Refuses an output file path before any work is done (exit 2): an existing folder, a
/// missing parent folder, or (when `extension` is given) another file type. `-` (stdout) is
/// accepted when `stdout_ok`.
pub fn check_out_file(
    path: &Path,
    option: &str,
    extension: Option<&str>,
    stdout_ok: bool,
) -> Result<()> {
    if is_stdio(path) {
        return if stdout_ok {
            Ok(())
        } else {
            Err(Error::usage(
                Code::OutputPath,
                format!("{option} - (stdout) is not available here"),
                Some("name a file"),
            ))
        };
    }
    if path.is_dir() {
        return Err(Error::usage(
            Code::OutputPath,
            format!("{option} `{}` is a folder", path.display()),
            Some("name a file inside it"),
        ));
    }
    if let Some(ext) = extension {
        let ok = path
            .extension()
            .and_then(|e| e.to_str())
            .is_some_and(|e| e.eq_ignore_ascii_case(ext));
        if !ok {
            return Err(Error::usage(
                Code::OutputPath,
                format!(
                    "{option} `{}`: phasewright writes {} files only",
                    path.display(),
                    ext.to_uppercase()
                ),
                Some(&format!("name the file with a .{ext} extension")),
            ));
        }
    }
    let parent = path.parent().filter(|p| !p.as_os_str().is_empty());
    if let Some(p) = parent {
        if !p.is_dir() {
            return Err(Error::usage(
                Code::OutputPath,
                format!(
                    "{option} `{}`: the folder `{}` does not exist",
                    path.display(),
                    p.display()
                ),
                Some("create the folder first, or write somewhere else"),
            ));
        }
    }
    Ok(())
}

/// Writes a whole output: to stdout for `-`, else atomically to the file.
pub fn write_output(path: &Path, contents: &[u8]) -> Result<()> {
    if is_stdio(path) {
        return emit_bytes(contents);
    }
    write_atomic(path, contents)
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
        let mut offset = crate::diag::offset_of(&text, e.line(), e.column());
        if e.classify() == serde_json::error::Category::Data {
            // An unknown key or variant is reported at its closing quote: show all of it.
            offset = crate::lang::json_span::token_start(&text, offset);
        }
        Error::input(Diagnostic::at(
            Code::PlanSyntax,
            &name,
            &text,
            offset,
            1,
            format!(
                "not a phasewright plan: {}",
                crate::estimate::counts::strip_position(&e.to_string())
            ),
            Some("pass a folder written by `phasewright compile`".into()),
        ))
    };
    let value: serde_json::Value = serde_json::from_str(&text).map_err(not_a_plan)?;
    let format = value.get("format").and_then(|f| f.as_str());
    if !format.is_some_and(|f| READABLE_PLAN_FORMATS.contains(&f)) {
        let shown = format.map_or_else(|| "none".to_string(), |f| format!("`{f}`"));
        let span = locate(&text, &[Step::Key("format")]).map_or((0, 1), |s| s.value);
        return Err(Error::input(Diagnostic::at(
            Code::PlanSyntax,
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
                        Diagnostic::at(Code::PlanInconsistent, &name, &text, o, l, p.message, hint)
                    }
                    None => Diagnostic::whole_file(Code::PlanInconsistent, &name, p.message, hint),
                }
            })
            .collect(),
    ))
}

/// Reads every circuit file of a plan back with phasewright's OpenQASM 3 reader, after
/// checking that none is missing or changed ([`check_campaign_files`]).
pub fn read_plan_circuits(dir: &Path, plan: &Plan) -> Result<Vec<crate::circuit::Circuit>> {
    check_campaign_files(dir, plan)?;
    plan.circuits
        .iter()
        .map(|e| read_plan_circuit(dir, e))
        .collect()
}

/// Reads, checks and parses one circuit file of a plan (as [`read_plan_circuits`] does for
/// each; call [`check_campaign_files`] first), so callers can hold one circuit at a time.
pub fn read_plan_circuit(
    dir: &Path,
    e: &crate::plan::CircuitEntry,
) -> Result<crate::circuit::Circuit> {
    {
        {
            let path = dir.join(&e.file);
            let bytes = campaign_file(dir, e)?;
            if let Some(d) = changed_file(dir, e, &bytes) {
                return Err(Error::input(d));
            }
            let text = String::from_utf8(bytes).map_err(|_| {
                Error::input(Diagnostic::whole_file(
                    Code::QasmSyntax,
                    &path.display().to_string(),
                    "not a text file",
                    Some("a circuit file is OpenQASM 3 text; recompile the campaign".into()),
                ))
            })?;
            let name = path.display().to_string();
            let prog = crate::qasm::read(&name, &text).map_err(Error::input)?;
            let c = prog.circuit;
            if c.num_clbits != e.num_clbits || c.num_qubits > e.num_qubits {
                return Err(Error::input(Diagnostic::whole_file(Code::QasmPlan,
                    &name,
                    format!(
                        "uses {} qubits and {} classical bits, but plan.json gives circuit `{}` {} and {}",
                        c.num_qubits, c.num_clbits, e.id, e.num_qubits, e.num_clbits
                    ),
                    Some("the file and the plan come from different compilations; recompile".into()),
                )));
            }
            let measured: Vec<u32> = c.measurements().iter().map(|&(_, b)| b).collect();
            if let Some(b) = e
                .reads
                .iter()
                .flat_map(|r| &r.bits)
                .find(|b| !measured.contains(b))
            {
                return Err(Error::input(Diagnostic::whole_file(
                    Code::QasmPlan,
                    &name,
                    format!(
                        "never measures classical bit {b}, which plan.json reads for circuit `{}`",
                        e.id
                    ),
                    Some(
                        "the file and the plan come from different compilations; recompile".into(),
                    ),
                )));
            }
            Ok(c)
        }
    }
}

/// Reads and parses a `.dev` device file (`-`: stdin); problems are diagnostics (exit 2),
/// and a Hamiltonian given as the device is named as such.
pub fn read_device(path: &Path) -> Result<crate::device::Device> {
    let text = read_text(path)?;
    let name = display_name(path);
    crate::lang::dev::parse_device(&name, &text)
        .map_err(|d| Error::Input(crate::lang::suggest::device_hints(&name, &text, d)))
}

/// Compares a campaign file's bytes with the SHA-256 its plan records; `None` when they agree
/// (or the plan records none).
fn changed_file(dir: &Path, e: &crate::plan::CircuitEntry, bytes: &[u8]) -> Option<Diagnostic> {
    let want = e.sha256.as_deref()?;
    let got = sha256_hex(bytes);
    (got != want).then(|| {
        Diagnostic::whole_file(
            Code::PlanFiles,
            &dir.join(&e.file).display().to_string(),
            format!(
                "changed since it was compiled: its SHA-256 is {}…, plan.json records {}…",
                &got[..12],
                &want[..want.len().min(12)]
            ),
            Some(
                "recompile the campaign; a circuit edited by hand no longer matches its plan"
                    .into(),
            ),
        )
    })
}

/// Reads one campaign file's bytes; a missing file is a diagnostic naming it.
fn campaign_file(dir: &Path, e: &crate::plan::CircuitEntry) -> std::result::Result<Vec<u8>, Error> {
    let path = dir.join(&e.file);
    std::fs::read(&path).map_err(|source| {
        if source.kind() == std::io::ErrorKind::NotFound {
            Error::input(Diagnostic::whole_file(
                Code::PlanFiles,
                &path.display().to_string(),
                format!("missing: plan.json lists it for circuit `{}`", e.id),
                Some("the campaign folder is incomplete; recompile it".into()),
            ))
        } else {
            Error::Io {
                path: path.display().to_string(),
                source,
                reading: true,
            }
        }
    })
}

/// Checks that every file the plan records a SHA-256 for is present and unchanged; all
/// problems are reported together (exit 2), each naming its file.
pub fn check_campaign_files(dir: &Path, plan: &Plan) -> Result<()> {
    let mut diags = Vec::new();
    for e in plan.circuits.iter().filter(|e| e.sha256.is_some()) {
        match campaign_file(dir, e) {
            Ok(bytes) => diags.extend(changed_file(dir, e, &bytes)),
            Err(Error::Input(ds)) => diags.extend(ds),
            Err(other) => return Err(other),
        }
    }
    if diags.is_empty() {
        Ok(())
    } else {
        Err(Error::Input(diags))
    }
}

/// What an output folder named on the command line holds now.
#[derive(Clone, Debug, PartialEq, Eq)]
pub enum OutFolder {
    /// Nothing there yet.
    Absent,
    /// An empty folder, or an older phasewright campaign (its plan and the files it lists).
    Replaceable,
    /// A folder with other entries (the first few named).
    Foreign(Vec<String>),
    /// Something that is not a folder.
    NotAFolder,
}

/// Looks at `dir` before a campaign is written into it.
pub fn inspect_out_folder(dir: &Path) -> Result<OutFolder> {
    let meta = match std::fs::symlink_metadata(dir) {
        Ok(m) => m,
        Err(e) if e.kind() == std::io::ErrorKind::NotFound => return Ok(OutFolder::Absent),
        Err(source) => {
            return Err(Error::Io {
                path: dir.display().to_string(),
                source,
                reading: true,
            })
        }
    };
    if !meta.is_dir() {
        return Ok(OutFolder::NotAFolder);
    }
    let listed: std::collections::BTreeSet<String> = std::fs::read_to_string(dir.join("plan.json"))
        .ok()
        .and_then(|t| serde_json::from_str::<serde_json::Value>(&t).ok())
        .filter(|v| {
            v.get("format")
                .and_then(|f| f.as_str())
                .is_some_and(|f| f.starts_with("phasewright-plan/"))
        })
        .map(|v| {
            let mut s: std::collections::BTreeSet<String> = v["circuits"]
                .as_array()
                .into_iter()
                .flatten()
                .filter_map(|c| c["file"].as_str().map(str::to_string))
                .collect();
            s.insert("plan.json".into());
            s
        })
        .unwrap_or_default();
    let entries = std::fs::read_dir(dir).map_err(|source| Error::Io {
        path: dir.display().to_string(),
        source,
        reading: true,
    })?;
    let mut foreign = Vec::new();
    for entry in entries.flatten() {
        let name = entry.file_name().to_string_lossy().into_owned();
        let is_file = entry.file_type().is_ok_and(|t| t.is_file());
        if !(is_file && listed.contains(&name)) {
            foreign.push(name);
        }
    }
    foreign.sort();
    Ok(if foreign.is_empty() {
        OutFolder::Replaceable
    } else {
        OutFolder::Foreign(foreign)
    })
}

/// Refuses an output folder that cannot be replaced (exit 2): a file, or (without `force`) a
/// folder holding anything but an older campaign.
pub fn check_out_folder(dir: &Path, force: bool) -> Result<()> {
    if dir.as_os_str() == "-" {
        return Err(Error::usage(
            Code::OutputPath,
            "a campaign is a folder of files and cannot go to stdout (`-o -`)",
            Some("name a folder, e.g. -o out/campaign"),
        ));
    }
    if dir.file_name().is_none() {
        return Err(Error::usage(
            Code::OutputPath,
            format!("`{}` cannot be replaced by a campaign", dir.display()),
            Some("name a folder of its own, e.g. -o out/campaign"),
        ));
    }
    match inspect_out_folder(dir)? {
        OutFolder::Absent | OutFolder::Replaceable => Ok(()),
        OutFolder::NotAFolder => Err(Error::usage(
            Code::OutputPath,
            format!("`{}` exists and is not a folder", dir.display()),
            Some("-o names the campaign folder; choose a new name or remove the file"),
        )),
        OutFolder::Foreign(_) if force => Ok(()),
        OutFolder::Foreign(names) => {
            let shown: Vec<String> = names.iter().take(5).map(|n| format!("`{n}`")).collect();
            let more = if names.len() > 5 {
                format!(" and {} more", names.len() - 5)
            } else {
                String::new()
            };
            Err(Error::usage(Code::OutputPath,
                format!(
                    "`{}` holds {}{more}, which is not part of an older phasewright campaign; refusing to replace it",
                    dir.display(),
                    shown.join(", ")
                ),
                Some("choose an empty or new folder, move those files away, or pass --force to replace the folder whole"),
            ))
        }
    }
}

/// Writes `files` (name, bytes), in order, as the whole content of folder `dir`: into a
/// temporary sibling folder first, which then takes the place of `dir` (an older `dir` is moved
/// aside and removed). A reader never sees a mix of old and new files, and a run killed midway
/// leaves `dir` as it was (plus a hidden `.NAME.phasewright-PID.tmp` sibling, removed by the
/// next run once its process is gone). Call [`check_out_folder`] first.
pub fn replace_folder(dir: &Path, files: &[(&str, &[u8])]) -> Result<()> {
    let tmp = staging_folder(dir)?;
    for &(file, bytes) in files {
        let p = tmp.join(file);
        if let Err(e) = std::fs::write(&p, bytes) {
            let _ = std::fs::remove_dir_all(&tmp);
            return Err(write_error(&p, e));
        }
    }
    swap_in_folder(&tmp, dir)
}

fn write_error(path: &Path, source: std::io::Error) -> Error {
    Error::Io {
        path: path.display().to_string(),
        source,
        reading: false,
    }
}

/// The first half of [`replace_folder`]: creates (empty) and returns the temporary sibling
/// folder `.NAME.phasewright-PID.tmp` of `dir` that files are written into before
/// [`swap_in_folder`] puts it in `dir`'s place.
pub fn staging_folder(dir: &Path) -> Result<PathBuf> {
    let parent = dir
        .parent()
        .filter(|p| !p.as_os_str().is_empty())
        .unwrap_or(Path::new("."));
    std::fs::create_dir_all(parent).map_err(|e| write_error(parent, e))?;
    let name = dir
        .file_name()
        .map(|n| n.to_string_lossy().into_owned())
        .unwrap_or_default();
    remove_abandoned_siblings(parent, &name);
    let tmp = parent.join(format!(".{name}.phasewright-{}.tmp", std::process::id()));
    let _ = std::fs::remove_dir_all(&tmp);
    std::fs::create_dir(&tmp).map_err(|e| write_error(&tmp, e))?;
    Ok(tmp)
}

/// The second half of [`replace_folder`]: the filled staging folder `tmp` takes the place of
/// `dir` (an older `dir` moved aside, then removed); on failure `tmp` is removed and `dir` is
/// left as it was.
pub fn swap_in_folder(tmp: &Path, dir: &Path) -> Result<()> {
    let old = tmp.with_extension("old");
    let existed = dir.exists();
    if existed {
        if let Err(e) = std::fs::rename(dir, &old) {
            let _ = std::fs::remove_dir_all(tmp);
            return Err(write_error(dir, e));
        }
    }
    if let Err(e) = std::fs::rename(tmp, dir) {
        if existed {
            let _ = std::fs::rename(&old, dir);
        }
        let _ = std::fs::remove_dir_all(tmp);
        return Err(write_error(dir, e));
    }
    if existed {
        let _ = std::fs::remove_dir_all(&old);
    }
    Ok(())
}

/// Removes `.NAME.phasewright-PID.tmp|.old` siblings left by runs that were killed, when the
/// system says (through /proc) that their process no longer exists. Elsewhere they are kept.
fn remove_abandoned_siblings(parent: &Path, name: &str) {
    let proc_fs = Path::new("/proc/self");
    if !proc_fs.exists() {
        return;
    }
    let prefix = format!(".{name}.phasewright-");
    let Ok(entries) = std::fs::read_dir(parent) else {
        return;
    };
    for entry in entries.flatten() {
        let file = entry.file_name().to_string_lossy().into_owned();
        let Some(rest) = file.strip_prefix(&prefix) else {
            continue;
        };
        let Some(pid) = rest
            .strip_suffix(".tmp")
            .or_else(|| rest.strip_suffix(".old"))
            .and_then(|p| p.parse::<u32>().ok())
        else {
            continue;
        };
        if pid != std::process::id() && !Path::new("/proc").join(pid.to_string()).exists() {
            let _ = std::fs::remove_dir_all(entry.path());
        }
    }
}
