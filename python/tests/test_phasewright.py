"""The phasewright Python module end to end: compile a bundled example, verify, rehearse and
estimate it through the module, and check the numbers against an independent dense
computation in numpy; bad input raises PhasewrightError with the diagnostic's code.

Run from the checkout root after `python3 -m pip install .`: `python3 -m pytest python/tests`.
"""

import json
import warnings
from functools import reduce
from pathlib import Path

import numpy as np
import pytest

import phasewright as pw

ROOT = Path(__file__).resolve().parents[2]
EXAMPLES = ROOT / "examples"

# Pauli matrices and the single-qubit reference states of `--state` letters (README,
# "Reference states": 0 1 + - r l are |0>, |1>, |+>, |->, |+i>, |-i>; `ss` a singlet).
PAULI = {
    "I": np.eye(2),
    "X": np.array([[0, 1], [1, 0]], dtype=complex),
    "Y": np.array([[0, -1j], [1j, 0]]),
    "Z": np.diag([1.0 + 0j, -1.0]),
}
LETTER = {
    "0": np.array([1, 0], dtype=complex),
    "1": np.array([0, 1], dtype=complex),
    "+": np.array([1, 1], dtype=complex) / np.sqrt(2),
    "-": np.array([1, -1], dtype=complex) / np.sqrt(2),
    "r": np.array([1, 1j]) / np.sqrt(2),
    "l": np.array([1, -1j]) / np.sqrt(2),
}
SINGLET = np.array([0, 1, -1, 0], dtype=complex) / np.sqrt(2)


def dense_hamiltonian(plan):
    """H = c + Σ_j c_j P_j as a dense matrix from the plan's terms (`X0 Y1 Z3`), qubit 0 the
    leftmost Kronecker factor; the constant is returned apart (the circuits never see it)."""
    h = plan["hamiltonian"]
    n = h["qubit_count"]
    H = np.zeros((2**n, 2**n), dtype=complex)
    for term in h["terms"]:
        ops = ["I"] * n
        for factor in term["pauli"].split():
            ops[int(factor[1:])] = factor[0]
        H += term["coeff"] * reduce(np.kron, [PAULI[o] for o in ops])
    return H, h["constant"]


def reference_vector(state):
    parts, i = [], 0
    while i < len(state):
        if state[i : i + 2] == "ss":
            parts.append(SINGLET)
            i += 2
        else:
            parts.append(LETTER[state[i]])
            i += 1
    return reduce(np.kron, parts)


@pytest.fixture(scope="module")
def campaign(tmp_path_factory):
    """The invented 4-qubit plaquette of examples/mixed_field4.ham, 8 time points."""
    out = tmp_path_factory.mktemp("py") / "mixed"
    with warnings.catch_warnings():
        warnings.simplefilter("ignore", pw.PhasewrightWarning)
        result = pw.compile(
            EXAMPLES / "mixed_field4.ham", out, state="0+1r", dt=0.25, points=8
        )
    return out, result


def test_compile_returns_the_plan_it_wrote_and_its_costs(campaign):
    out, result = campaign
    with open(out / "plan.json", encoding="utf-8") as f:
        assert result["plan"] == json.load(f)
    assert pw.load_plan(out) == result["plan"]
    ids = [c["id"] for c in result["plan"]["circuits"]]
    assert ids[:2] == ["k01-re", "k01-im"] and len(ids) == 2 * 7
    assert [c["id"] for c in result["circuits"]] == ids
    assert result["total"]["two_qubit"] == sum(
        c["costs"]["two_qubit"] for c in result["circuits"]
    )
    for c in result["plan"]["circuits"]:
        assert (out / c["file"]).read_text().startswith("OPENQASM 3.0;")


def test_verify_values_match_a_dense_numpy_evolution(campaign):
    out, result = campaign
    report = pw.verify(out)
    assert report["ok"] and report["method"] == "statevector"
    assert report["max_compile_error"] <= 1e-9
    assert report["simulated"].shape == report["ideal"].shape == (14,)
    np.testing.assert_allclose(report["simulated"], report["ideal"], atol=1e-9)
    # Independent check: <psi| exp(-i (H - c) t) |psi> by dense diagonalisation
    # (numpy.linalg.eigh, H = V diag(E) V^†, so exp(-iHt) = V diag(exp(-iEt)) V^†); the
    # identity term is never compiled (README, Conventions), so it is left out. Tolerance
    # 1e-9: both sides are exact up to floating-point round-off.
    plan = result["plan"]
    H, _ = dense_hamiltonian(plan)
    E, V = np.linalg.eigh(H)
    psi = reference_vector(plan["states"][0])
    weights = np.abs(V.conj().T @ psi) ** 2
    for i, circuit in zip(report["read_circuit"], report["circuits"]):
        entry = plan["circuits"][i]
        assert entry["id"] == circuit["id"]
        s = np.sum(weights * np.exp(-1j * E * entry["time"]))
        want = s.real if entry["part"] == "re" else s.imag
        assert report["exact"][i] == pytest.approx(want, abs=1e-9), entry["id"]


def test_rehearse_writes_the_counts_it_returns_and_sample_is_its_alias(campaign):
    out, _ = campaign
    counts = pw.rehearse(out, shots=500, seed=3, out=out.parent / "c.json")
    with open(out.parent / "c.json", encoding="utf-8") as f:
        assert counts == json.load(f)
    assert counts["format"] == "phasewright-counts/1"
    assert counts["shots"] == 500
    for outcomes in counts["counts"].values():
        assert sum(outcomes.values()) == 500
    # Same seed, same file, whatever the name it is called by.
    again = pw.sample(out, shots=500, seed=3, out=out.parent / "d.json")
    assert again == counts
    assert pw.sample is pw.rehearse


def test_rehearse_shares_are_the_whole_run_cut_in_pieces(campaign):
    out, _ = campaign
    whole = pw.rehearse(out, shots=300, seed=8, out=out.parent / "whole.json")
    seen = {}
    for i in (1, 2, 3):
        part = pw.rehearse(
            out, shots=300, seed=8, shard=(i, 3), out=out.parent / f"part{i}.json"
        )
        assert part["shard"]["index"] == i and part["shard"]["count"] == 3
        seen.update(part["counts"])
    assert seen == whole["counts"]


def test_estimate_energy_matches_dense_diagonalisation(tmp_path):
    # The invented 6-site Heisenberg chain of examples/, from three singlets on neighbouring
    # pairs; overlap campaign, 24 points, 10^6 shots per circuit (rehearsed, fixed seed).
    out = tmp_path / "heis"
    pw.compile(
        EXAMPLES / "heisenberg_chain6.ham", out, state="ssssss", dt=0.2, points=24
    )
    counts = pw.rehearse(out, shots=1_000_000, seed=1)
    result = pw.estimate(out, counts)
    # Exact ground energy by dense diagonalisation of the 64x64 matrix (numpy.linalg.eigh),
    # the identity term added back as estimate does.
    H, c = dense_hamiltonian(pw.load_plan(out))
    e0 = np.linalg.eigvalsh(H)[0] + c  # measured: E = -9.974279 against -9.974309
    # Textbook value for this chain (open 6-site spin-1/2 Heisenberg chain with Pauli
    # matrices, J = 1: E0 = 4 x (-2.4935) = -9.9743; Bethe-ansatz / exact-diagonalisation
    # tables of small chains, value from memory), a check of the dense matrix itself.
    assert e0 == pytest.approx(-9.9743, abs=1e-3)
    answer = result["answer"]
    assert answer is not None, result["warnings"]
    total = np.hypot(answer["sigma_stat"], answer["sigma_sys"])
    assert abs(answer["energy"] - e0) <= 4 * total + 1e-3, (answer, e0)
    # The overlaps come back as a complex numpy series S_0..S_{K-1}, S_0 = 1.
    S = result["overlaps"]
    assert S.dtype == complex and S.shape == (24,)
    assert S[0] == 1
    assert result["overlap_std_errors"].shape == (24, 2)
    # ... and each agrees, within 5 standard errors (normal shot noise; 46 values), with the
    # value of the product formula the circuits implement, which verify computes (its
    # `ideal`; the Strang step is far from exp(-iH dt) at late times, so the comparison is
    # with the formula, not with the exact evolution checked in the test above).
    checks = pw.verify(out, skip_exact=True)
    plan = pw.load_plan(out)
    for i, entry in enumerate(plan["circuits"]):
        k, part = entry["k"], entry["part"]
        value = S[k].real if part == "re" else S[k].imag
        err = result["overlap_std_errors"][k][0 if part == "re" else 1]
        assert 0 < err < 2e-3, (entry["id"], err)
        assert abs(value - checks["ideal"][i]) <= 5 * err, entry["id"]
    columns = result["energies"]
    assert list(columns["dimension"]) == list(range(1, 25))
    assert columns["krylov"].shape == (24,)


def test_bad_input_raises_with_the_diagnostic_code(tmp_path):
    ham = tmp_path / "bad.ham"
    ham.write_text("qubits 2\n0.5 X0 Z7\n")
    with pytest.raises(pw.PhasewrightError) as info:
        pw.compile(ham, tmp_path / "out", state="00", dt=0.1, points=3)
    e = info.value
    assert e.code == "H104"
    assert e.exit_status == 2
    text = str(e)
    assert text.startswith("error H104:") and "bad.ham:2:" in text and "^" in text
    assert "H104" in pw.explain(e.code)
    assert not (tmp_path / "out").exists()


@pytest.mark.parametrize(
    "call, code",
    [
        # an option value the command line refuses (--order is 1, 2 or 4)
        (lambda d: pw.compile(EXAMPLES / "mixed_field4.ham", d / "o", state="0000", dt=0.1, points=3, order=3), "U101"),
        # not a number where one is needed, and a request far beyond the limits
        (lambda d: pw.compile(EXAMPLES / "mixed_field4.ham", d / "o", state="0000", dt=float("nan"), points=3), "U101"),
        (lambda d: pw.compile(EXAMPLES / "mixed_field4.ham", d / "o", state="0000", dt=0.1, points=10**9), "U401"),
        # a device file given as the Hamiltonian
        (lambda d: pw.compile(EXAMPLES / "line8.dev", d / "o", state="0000", dt=0.1, points=3), "H103"),
        # a state of the wrong length
        (lambda d: pw.compile(EXAMPLES / "mixed_field4.ham", d / "o", state="00", dt=0.1, points=3), "U101"),
        # a folder that holds no campaign
        (lambda d: pw.verify(d), "I101"),
        (lambda d: pw.load_plan(d), "I101"),
        # a counts document that is not one
        (lambda d: pw.estimate(d / "c", {"k01-re": {"0": 3}}), "C101"),
        # a share that does not exist
        (lambda d: pw.rehearse(d / "c", shard=(5, 4)), "U101"),
    ],
)
def test_every_bad_input_is_a_phasewright_error(tmp_path, call, code):
    with warnings.catch_warnings():
        warnings.simplefilter("ignore", pw.PhasewrightWarning)
        pw.compile(EXAMPLES / "mixed_field4.ham", tmp_path / "c", state="0000", dt=0.1, points=3)
    with pytest.raises(pw.PhasewrightError) as info:
        call(tmp_path)
    assert info.value.code == code, str(info.value)
    assert info.value.exit_status == 2
    assert str(info.value).startswith(f"error {code}")


def test_warnings_arrive_and_an_edited_circuit_is_named(tmp_path):
    out = tmp_path / "c"
    # The warning the command prints on stderr arrives as a Python warning, and in the result.
    with pytest.warns(pw.PhasewrightWarning, match="ground-state weight 0.0006"):
        result = pw.compile(EXAMPLES / "mixed_field4.ham", out, state="0000", dt=0.1, points=3)
    assert len(result["warnings"]) == 1 and "0.0006" in result["warnings"][0]
    f = out / "k01-re.qasm"
    f.write_text(f.read_text() + "// edited\n")
    with pytest.raises(pw.PhasewrightError) as info:
        pw.verify(out)
    assert info.value.code == "P302" and "k01-re.qasm" in str(info.value)
    assert info.value.exit_status == 2


def test_a_failed_check_raises_with_the_report(campaign):
    out, _ = campaign
    # Round-off makes the compile error of this campaign nonzero (about 1e-15, the README's
    # tables show the same), so a zero tolerance fails the check: exit status 1, and the
    # exception carries the report that says by how much.
    with pytest.raises(pw.PhasewrightError) as info:
        pw.verify(out, tolerance=0.0)
    e = info.value
    assert e.code == "X101" and e.exit_status == 1
    assert "exceeds the tolerance" in str(e)
    assert e.report["ok"] is False
    assert 0 < e.report["max_compile_error"] <= 1e-9
