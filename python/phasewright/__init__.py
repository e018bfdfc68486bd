"""phasewright from Python: compile a qubit Hamiltonian into a campaign of OpenQASM 3
circuits, verify it, rehearse it with simulated shots, and estimate energies from counts.

Every function calls the phasewright library itself (the compiled ``_native`` module, built
from the same crate as the ``phasewright`` command) and is named after its command:
``compile``, ``verify``, ``rehearse`` (alias ``sample``), ``estimate``; ``load_plan`` reads a
campaign's plan.json as plain Python objects. Keyword arguments are the command's options
(``steps=2`` is ``--steps 2``; ``None`` or ``False`` leaves an option out, so the command line's
default applies; ``shard=(2, 4)`` is ``--shard 2/4``), checked by the command line's own parser.

Results are the documents the commands print with ``--json``, decoded into dicts and lists,
with numpy arrays where a result is a series of numbers (overlaps, energies per Krylov
dimension, densities of states, simulated values). Problems raise ``PhasewrightError``, whose
``code`` is the diagnostic's code (``"H104"``; ``explain(code)`` says more), ``exit_status``
the status the command would exit with (2 bad input, 1 internal failure) and ``str(e)`` the
rendered diagnostic with its file, line, column and caret.

Bitstrings list classical bit 0 first (leftmost), as everywhere in phasewright.
"""

from __future__ import annotations

import json
import os
import warnings
from typing import Any, Dict, List, Mapping, Optional, Sequence, Tuple, Union

import numpy as np

from . import _native
from ._native import PhasewrightError

__all__ = [
    "PhasewrightError",
    "PhasewrightWarning",
    "compile",
    "estimate",
    "explain",
    "load_plan",
    "rehearse",
    "sample",
    "verify",
]

__version__ = _native.__version__

PathLike = Union[str, "os.PathLike[str]"]


class PhasewrightWarning(UserWarning):
    """A warning a phasewright command prints on stderr (e.g. a low ground-state weight)."""


def _value(value: Any) -> str:
    if isinstance(value, tuple) and len(value) == 2:
        return f"{value[0]}/{value[1]}"
    if isinstance(value, float):
        return repr(value)  # shortest text that reads back as the same double
    if isinstance(value, os.PathLike):
        return os.fspath(value)
    return str(value)


def _options(**options: Any) -> List[str]:
    """Command-line options from keywords: ``None``/``False`` omitted, ``True`` a bare flag,
    anything else ``--name=value`` (the ``=`` form keeps values such as ``-+-+`` intact)."""
    args: List[str] = []
    for name, value in options.items():
        if value is None or value is False:
            continue
        flag = "--" + name.replace("_", "-")
        args.append(flag if value is True else f"{flag}={_value(value)}")
    return args


def _positional(path: PathLike) -> List[str]:
    # After `--` a path is never taken for an option, whatever it starts with.
    return ["--", os.fspath(path)]


def _column(rows: Sequence[Mapping[str, Any]], key: str) -> np.ndarray:
    """One column of a list of records as a float array (``None`` becomes NaN)."""
    return np.array(
        [np.nan if r.get(key) is None else r[key] for r in rows], dtype=float
    )


def _series(rows: Optional[Sequence[Mapping[str, Any]]]) -> Tuple[Any, Any]:
    """A ``[{k, re, im, re_std_error, im_std_error}]`` series as a complex array of values
    and a ``(K, 2)`` array of standard errors (real, imaginary)."""
    if rows is None:
        return None, None
    values = _column(rows, "re") + 1j * _column(rows, "im")
    errors = np.stack(
        [_column(rows, "re_std_error"), _column(rows, "im_std_error")], axis=-1
    ).reshape(len(rows), 2)
    return values, errors


def _with_report(error: PhasewrightError) -> PhasewrightError:
    text = getattr(error, "report_json", None)
    error.report = None if text is None else json.loads(text)
    return error


def compile(
    hamiltonian: PathLike,
    out: PathLike,
    *,
    dt: float,
    points: int,
    state: Optional[str] = None,
    order: Optional[int] = None,
    steps: Optional[int] = None,
    measure: Optional[str] = None,
    control: Optional[str] = None,
    samples: Optional[int] = None,
    seed: Optional[int] = None,
    device: Optional[PathLike] = None,
    encoding: Optional[str] = None,
    active: Optional[str] = None,
    opt: Optional[int] = None,
    cutoff: Optional[float] = None,
    shard: Optional[Tuple[int, int]] = None,
    force: bool = False,
) -> Dict[str, Any]:
    """``phasewright compile``: write the campaign for ``hamiltonian`` (a .ham or FCIDUMP file)
    into the folder ``out`` (OpenQASM 3 files and plan.json).

    Returns the ``compile --json`` report (``circuits`` with their costs, ``total``,
    ``control``, ``reference``, …) with two more keys: ``plan``, the plan written (as
    ``load_plan(out)`` reads it), and ``warnings``, the warnings the command prints (each also
    issued as a ``PhasewrightWarning``). Costs are estimates: they depend on the device
    calibration.
    """
    hamiltonian = os.fspath(hamiltonian)
    if hamiltonian == "-" or (device is not None and os.fspath(device) == "-"):
        raise ValueError("pass files: '-' would read the process's standard input")
    args = _options(
        state=state,
        dt=dt,
        points=points,
        order=order,
        steps=steps,
        measure=measure,
        control=control,
        samples=samples,
        seed=seed,
        device=device,
        encoding=encoding,
        active=active,
        opt=opt,
        cutoff=cutoff,
        shard=shard,
        force=force,
        out=out,
    )
    text, printed = _native.compile(args + _positional(hamiltonian))
    doc = json.loads(text)
    result = doc["report"]
    result["plan"] = doc["plan"]
    result["warnings"] = list(printed)
    for w in printed:
        warnings.warn(w, PhasewrightWarning, stacklevel=2)
    return result


def load_plan(directory: PathLike) -> Dict[str, Any]:
    """The plan of a campaign folder (``DIR/plan.json``, format ``phasewright-plan/3``) as
    dicts and lists, read and checked as every command reads it."""
    return json.loads(_native.load_plan(os.fspath(directory)))


def verify(
    directory: PathLike,
    *,
    method: Optional[str] = None,
    skip_exact: bool = False,
    tolerance: Optional[float] = None,
    shard: Optional[Tuple[int, int]] = None,
) -> Dict[str, Any]:
    """``phasewright verify``: check every circuit file (or share ``shard=(i, n)`` of them)
    against its plan, by statevector simulation or by the exact tableau proof.

    Returns the ``verify --json`` document. For the statevector method it also holds numpy
    arrays over every read of every circuit, in plan order: ``simulated``, ``ideal``,
    ``exact`` (NaN with ``skip_exact``) and ``read_circuit`` (the index in ``circuits`` of
    each read's circuit). A compile error above the tolerance, or a file that differs from
    its plan, raises ``PhasewrightError`` (exit status 1) whose ``report`` is the document.
    """
    args = _options(
        method=method, skip_exact=skip_exact, tolerance=tolerance, shard=shard
    ) + _positional(directory)
    try:
        doc = json.loads(_native.verify(args))
    except PhasewrightError as e:
        raise _with_report(e) from None
    if doc.get("method") == "statevector":
        reads = [(i, r) for i, c in enumerate(doc["circuits"]) for r in c["reads"]]
        records = [r for _, r in reads]
        doc["read_circuit"] = np.array([i for i, _ in reads], dtype=np.int64)
        for key in ("simulated", "ideal", "exact"):
            doc[key] = _column(records, key)
    return doc


def rehearse(
    directory: PathLike,
    *,
    shots: Optional[int] = None,
    seed: Optional[int] = None,
    noise: bool = False,
    out: Optional[PathLike] = None,
    shard: Optional[Tuple[int, int]] = None,
) -> Dict[str, Any]:
    """``phasewright rehearse``: draw ``shots`` from every circuit's exact output distribution
    and write the counts file (``out``, default ``DIR/counts.json``).

    Returns the counts document as written (``format``, ``bit_order``, ``shots``, ``counts``:
    circuit id → bitstring → count, classical bit 0 leftmost), ready for ``estimate``. With
    ``shard=(i, n)`` only share i of n is sampled, each circuit from the random stream of its
    index in the whole campaign, so that the shares' files joined by ``phasewright merge`` are
    the one file of a single run.
    """
    args = _options(shots=shots, seed=seed, noise=noise, out=out, shard=shard)
    summary = json.loads(_native.rehearse(args + _positional(directory)))
    with open(summary["out"], encoding="utf-8") as f:
        return json.load(f)


#: ``sample`` is ``rehearse`` (the command line keeps ``sample`` as a hidden alias too).
sample = rehearse


def estimate(
    directory: PathLike,
    counts: Union[PathLike, Mapping[str, Any]],
    *,
    bit_order: Optional[str] = None,
    threshold: Optional[float] = None,
    sigma: Optional[float] = None,
    exact: Optional[float] = None,
    bootstrap: Optional[int] = None,
    seed: Optional[int] = None,
    undo_loss: bool = False,
    accuracy: Optional[float] = None,
    plot: Optional[PathLike] = None,
) -> Dict[str, Any]:
    """``phasewright estimate``: turn counts (a counts file, or the dict ``rehearse``
    returns) into energies (overlap and Krylov campaigns) or a density of states (trace
    campaigns).

    Returns the ``estimate --json`` document (``phasewright-estimate/1``: ``answer``,
    ``warnings``, …) with its series as numpy arrays:

    * energies: ``overlaps`` (complex, ``S_k`` for k = 0..K-1) and ``overlap_std_errors``
      (K×2, real and imaginary); ``hamiltonian_elements`` and
      ``hamiltonian_element_std_errors`` for Krylov campaigns (else None); ``energies``, a
      dict of columns over the Krylov dimension (``dimension``, ``krylov``,
      ``krylov_std_error``, ``pencil``, ``pencil_std_error``, ``threshold``, ``kept``; NaN
      where the command prints ``-``);
    * density of states: ``trace`` (complex) and ``trace_std_errors``; ``dos``, a dict of
      columns (``energy``, ``density``, ``std_error``, ``quadrature_bound``, ``exact``).

    Energies from noisy hardware depend on the device calibration; validate against trusted
    methods.
    """
    counts_text = None
    if isinstance(counts, Mapping):
        counts_text, counts_name = json.dumps(counts), "<counts dict>"
    else:
        counts_name = os.fspath(counts)
    args = _options(
        counts=counts_name,
        bit_order=bit_order,
        threshold=threshold,
        sigma=sigma,
        exact=exact,
        bootstrap=bootstrap,
        seed=seed,
        undo_loss=undo_loss,
        accuracy=accuracy,
        plot=plot,
    )
    doc = json.loads(_native.estimate(args + _positional(directory), counts_text))
    if "energies" in doc:
        doc["overlaps"], doc["overlap_std_errors"] = _series(doc["overlaps"])
        (
            doc["hamiltonian_elements"],
            doc["hamiltonian_element_std_errors"],
        ) = _series(doc.get("hamiltonian_elements"))
        rows = doc["energies"]
        doc["energies"] = {"dimension": np.array([r["dimension"] for r in rows])}
        doc["energies"] |= {
            key: _column(rows, key)
            for key in (
                "krylov",
                "krylov_std_error",
                "pencil",
                "pencil_std_error",
                "threshold",
                "kept",
            )
        }
    if "dos" in doc:
        doc["trace"], doc["trace_std_errors"] = _series(doc["trace"])
        rows = doc["dos"]
        doc["dos"] = {
            key: _column(rows, key)
            for key in ("energy", "density", "std_error", "quadrature_bound", "exact")
        }
    return doc


def explain(code: str) -> str:
    """The long form of a diagnostic code such as ``"H104"``."""
    return _native.explain(code)
