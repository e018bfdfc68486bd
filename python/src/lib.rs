//! `phasewright._native`: the phasewright library as a CPython extension module (built by
//! maturin from `pyproject.toml`; the Python package `phasewright` wraps it).
//!
//! In: a command's arguments exactly as on the command line (the wrapper spells its keyword
//! arguments as options), parsed by the same clap definitions as the binary, so defaults,
//! ranges and messages are the command line's. Out: the JSON document the command's `--json`
//! prints (as text; the wrapper decodes it and builds numpy arrays), or a raised
//! `PhasewrightError` carrying the diagnostic's code (`H104`), its rendered text and the exit
//! status the command would have. Invariant: nothing crosses into Python as a panic: the work
//! runs under `catch_unwind` with the interpreter released, and a panic (a phasewright bug)
//! becomes a `PhasewrightError` with code X101. Nothing is printed on stdout.

use clap::Parser;
use phasewright::cli::{self, Cli, Command, Global};
use phasewright::diag::Code;
use phasewright::error::Error;
use pyo3::prelude::*;
use std::path::Path;

pyo3::create_exception!(
    phasewright,
    PhasewrightError,
    pyo3::exceptions::PyException,
    "A phasewright error: `code` is the diagnostic's code (e.g. `H104`, see `phasewright explain CODE`), `exit_status` the status the command line would exit with (2 bad input, 1 internal failure), and str(e) the rendered diagnostic."
);

/// A failure on its way to Python: code, rendered text, exit status, and for `verify` the
/// report of the files that failed.
struct Failure {
    code: String,
    message: String,
    exit_status: u8,
    report: Option<String>,
}

impl Failure {
    fn from_error(e: &Error) -> Failure {
        Failure {
            code: e.code().unwrap_or(Code::Internal).id().to_string(),
            message: e.to_string().trim_end().to_string(),
            exit_status: e.exit_code(),
            report: None,
        }
    }

    fn usage(code: Code, message: String) -> Failure {
        Failure::from_error(&Error::usage(code, message, None))
    }

    fn into_py(self, py: Python<'_>) -> PyErr {
        let err = PhasewrightError::new_err(self.message);
        let value = err.value(py);
        // Setting attributes on a fresh exception instance cannot fail short of memory
        // exhaustion; the error itself is still raised if it does.
        let _ = value.setattr("code", self.code);
        let _ = value.setattr("exit_status", self.exit_status);
        if let Some(r) = self.report {
            let _ = value.setattr("report_json", r);
        }
        err
    }
}

/// Runs `work` without the interpreter lock and with panics caught.
fn guarded<T: Send>(
    py: Python<'_>,
    work: impl FnOnce() -> Result<T, Failure> + Send,
) -> PyResult<T> {
    let outcome = py.detach(|| {
        std::panic::catch_unwind(std::panic::AssertUnwindSafe(work)).unwrap_or_else(|panic| {
            let what = panic
                .downcast_ref::<&str>()
                .map(|s| s.to_string())
                .or_else(|| panic.downcast_ref::<String>().cloned())
                .unwrap_or_else(|| "no message".into());
            Err(Failure::from_error(&Error::Internal(format!(
                "phasewright panicked (a bug, please report it): {what}"
            ))))
        })
    });
    outcome.map_err(|f| f.into_py(py))
}

/// Parses `phasewright COMMAND ARGS…` with the binary's own definitions.
fn parse(command: &str, args: Vec<String>) -> Result<Command, Failure> {
    let argv = ["phasewright".to_string(), command.to_string()]
        .into_iter()
        .chain(args);
    let cli = Cli::try_parse_from(argv).map_err(|e| {
        let code = cli::usage_code(e.kind()).unwrap_or(Code::UsageOption);
        let text = e.render().to_string();
        let body = text.strip_prefix("error: ").unwrap_or(&text).trim_end();
        Failure {
            code: code.id().to_string(),
            message: format!("error {code}: {body}"),
            exit_status: 2,
            report: None,
        }
    })?;
    Ok(cli.command)
}

/// Progress bars hidden, nothing printed: the results come back as values.
const QUIET: Global = Global {
    json: false,
    quiet: true,
};

fn to_text(v: &serde_json::Value) -> Result<String, Failure> {
    serde_json::to_string(v).map_err(|e| {
        Failure::from_error(&Error::Internal(format!("cannot serialise a result: {e}")))
    })
}

fn wrong_command() -> Failure {
    Failure::from_error(&Error::Internal("the parser chose another command".into()))
}

/// `compile ARGS…`: writes the campaign folder; returns `{"report": <compile --json>, "plan":
/// <plan.json>}` as JSON text and the warnings.
#[pyfunction]
fn compile(py: Python<'_>, args: Vec<String>) -> PyResult<(String, Vec<String>)> {
    guarded(py, move || {
        let Command::Compile(a) = parse("compile", args)? else {
            return Err(wrong_command());
        };
        let warnings = std::sync::Mutex::new(Vec::new());
        let outcome = cli::compile_campaign(&a, &|w| {
            if let Ok(mut v) = warnings.lock() {
                v.push(w.to_string());
            }
        })
        .map_err(|e| Failure::from_error(&e))?;
        let plan: serde_json::Value = serde_json::from_str(&outcome.plan.to_json())
            .map_err(|e| Failure::from_error(&Error::Internal(format!("plan JSON: {e}"))))?;
        let doc = serde_json::json!({ "report": outcome.json, "plan": plan });
        Ok((to_text(&doc)?, warnings.into_inner().unwrap_or_default()))
    })
}

/// `verify ARGS…`: returns the `verify --json` document as JSON text; a failed check raises
/// with the document in `report_json`.
#[pyfunction]
fn verify(py: Python<'_>, args: Vec<String>) -> PyResult<String> {
    guarded(py, move || {
        let Command::Verify(a) = parse("verify", args)? else {
            return Err(wrong_command());
        };
        let report = cli::verify_campaign(&a, &QUIET).map_err(|e| Failure::from_error(&e))?;
        let text = to_text(&report.json)?;
        match &report.failure {
            None => Ok(text),
            Some(e) => {
                let mut f = Failure::from_error(e);
                for d in &report.diagnostics {
                    f.message = format!("{}\n{}", f.message, d.trim_end());
                }
                f.report = Some(text);
                Err(f)
            }
        }
    })
}

/// `rehearse ARGS…`: writes the counts file; returns the `rehearse --json` summary as JSON
/// text. Counts go to a file, never to the process's stdout.
#[pyfunction]
fn rehearse(py: Python<'_>, args: Vec<String>) -> PyResult<String> {
    guarded(py, move || {
        let Command::Rehearse(a) = parse("rehearse", args)? else {
            return Err(wrong_command());
        };
        if a.out.as_deref().is_some_and(|p| p == Path::new("-")) {
            return Err(Failure::usage(
                Code::OutputPath,
                "out=\"-\" would write the counts on the process's stdout; name a file".into(),
            ));
        }
        match cli::rehearse_campaign(&a, &QUIET).map_err(|e| Failure::from_error(&e))? {
            Some(summary) => to_text(&summary),
            None => Err(wrong_command()),
        }
    })
}

/// `estimate ARGS…`: returns the `estimate --json` document as JSON text. `counts_text`, when
/// given, is the counts document itself (named by `--counts` in diagnostics).
#[pyfunction]
#[pyo3(signature = (args, counts_text=None))]
fn estimate(py: Python<'_>, args: Vec<String>, counts_text: Option<String>) -> PyResult<String> {
    guarded(py, move || {
        let Command::Estimate(a) = parse("estimate", args)? else {
            return Err(wrong_command());
        };
        if a.plot.as_deref().is_some_and(|p| p == Path::new("-")) {
            return Err(Failure::usage(
                Code::OutputPath,
                "plot=\"-\" would write the SVG on the process's stdout; name an .svg file".into(),
            ));
        }
        if counts_text.is_none() && a.counts == Path::new("-") {
            return Err(Failure::usage(
                Code::UsageOption,
                "counts=\"-\" would read the process's stdin; pass a file or a dict".into(),
            ));
        }
        let outcome = cli::estimate_campaign(&a, counts_text.as_deref())
            .map_err(|e| Failure::from_error(&e))?;
        to_text(&outcome.json)
    })
}

/// The plan of a campaign folder, read and validated as every command reads it, as JSON text.
#[pyfunction]
fn load_plan(py: Python<'_>, dir: std::path::PathBuf) -> PyResult<String> {
    guarded(py, move || {
        let plan = phasewright::files::read_plan(&dir).map_err(|e| Failure::from_error(&e))?;
        Ok(plan.to_json())
    })
}

/// The long form of a diagnostic code (`H104`), as `phasewright explain` prints it.
#[pyfunction]
fn explain(code: &str) -> PyResult<String> {
    match Code::find(code) {
        Some(c) => Ok(format!("{}: {}\n\n{}", c.id(), c.title(), c.explanation())),
        None => Err(pyo3::exceptions::PyValueError::new_err(format!(
            "`{code}` is not a phasewright diagnostic code"
        ))),
    }
}

/// The compiled half of the `phasewright` Python package.
#[pymodule]
mod _native {
    #[pymodule_export]
    use super::{compile, estimate, explain, load_plan, rehearse, verify, PhasewrightError};

    #[pymodule_init]
    fn init(m: &pyo3::Bound<'_, pyo3::types::PyModule>) -> pyo3::PyResult<()> {
        use pyo3::types::PyModuleMethods;
        m.add("__version__", env!("CARGO_PKG_VERSION"))
    }
}
