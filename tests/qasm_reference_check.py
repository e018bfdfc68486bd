#!/usr/bin/env python3
"""External cross-check of phasewright's OpenQASM 3 output.

For every .qasm file given (or found in the given folders):
1. parse it with the OpenQASM project's reference parser (`openqasm3` with its parser extra);
2. check that it declares version 3, includes "stdgates.inc", and uses only standard-library
   gates (lowercase `cx`, never `CX`) or the built-in `U`/`gphase`;
3. simulate it with numpy from the gate definitions of the OpenQASM 3 specification
   (stdgates.inc and the built-in U), independently of phasewright's simulator, and report the
   expectation of (-1)^bit for every classical bit.

Prints one JSON object: {file: {"bits": [<E[(-1)^c_i]> ...]}} and exits 1 on any violation.
"""
import json
import math
import os
import sys

import numpy as np
import openqasm3
from openqasm3 import ast

# stdgates.inc of the OpenQASM 3 specification (v3.0 and later), plus the built-in U.
STDGATES = {
    "p", "x", "y", "z", "h", "s", "sdg", "t", "tdg", "sx", "rx", "ry", "rz", "cx", "cy", "cz",
    "cp", "crx", "cry", "crz", "ch", "swap", "ccx", "cswap", "cu", "CX", "phase", "cphase",
    "id", "u1", "u2", "u3",
}
# Legacy names that the current specification keeps only for compatibility: never emitted.
LEGACY = {"CX", "phase", "cphase", "id", "u1", "u2", "u3"}


def mat1(name, params):
    c, s = math.cos, math.sin
    if name == "h":
        return np.array([[1, 1], [1, -1]], dtype=complex) / math.sqrt(2)
    if name == "x":
        return np.array([[0, 1], [1, 0]], dtype=complex)
    if name == "y":
        return np.array([[0, -1j], [1j, 0]], dtype=complex)
    if name == "z":
        return np.array([[1, 0], [0, -1]], dtype=complex)
    if name == "s":
        return np.diag([1, 1j])
    if name == "sdg":
        return np.diag([1, -1j])
    if name == "sx":  # pow(0.5) @ x
        return 0.5 * np.array([[1 + 1j, 1 - 1j], [1 - 1j, 1 + 1j]])
    if name == "sxdg":
        return 0.5 * np.array([[1 - 1j, 1 + 1j], [1 + 1j, 1 - 1j]])
    if name == "rz":
        (a,) = params
        return np.diag([np.exp(-0.5j * a), np.exp(0.5j * a)])
    if name == "rx":
        (a,) = params
        return np.array([[c(a / 2), -1j * s(a / 2)], [-1j * s(a / 2), c(a / 2)]])
    if name == "ry":
        (a,) = params
        return np.array([[c(a / 2), -s(a / 2)], [s(a / 2), c(a / 2)]], dtype=complex)
    if name == "U":
        t, p, l = params
        return np.array(
            [[c(t / 2), -np.exp(1j * l) * s(t / 2)], [np.exp(1j * p) * s(t / 2), np.exp(1j * (p + l)) * c(t / 2)]]
        )
    raise ValueError(f"no matrix for {name}")


def value(expr):
    if isinstance(expr, ast.FloatLiteral) or isinstance(expr, ast.IntegerLiteral):
        return float(expr.value)
    if isinstance(expr, ast.UnaryExpression) and expr.op.name == "-":
        return -value(expr.expression)
    if isinstance(expr, ast.Identifier) and expr.name in ("pi", "π"):
        return math.pi
    if isinstance(expr, ast.BinaryExpression):
        a, b = value(expr.lhs), value(expr.rhs)
        return {"+": a + b, "-": a - b, "*": a * b, "/": a / b}[expr.op.name]
    raise ValueError(f"unsupported expression {expr!r}")


def qubit_index(q):
    if isinstance(q, ast.Identifier) and q.name.startswith("$"):
        return int(q.name[1:])
    if isinstance(q, ast.IndexedIdentifier):
        return int(q.indices[0][0].value)
    raise ValueError(f"unsupported operand {q!r}")


def check(path):
    text = open(path, encoding="utf-8").read()
    prog = openqasm3.parse(text)
    problems = []
    if not str(prog.version).startswith("3"):
        problems.append(f"version {prog.version}")
    includes = [s.filename for s in prog.statements if isinstance(s, ast.Include)]
    if includes != ["stdgates.inc"]:
        problems.append(f"includes {includes}")
    ops = []
    nq = 0
    nbits = 0
    for st in prog.statements:
        if isinstance(st, ast.QuantumGate):
            name = st.name.name
            if name != "U" and (name not in STDGATES or name in LEGACY):
                problems.append(f"gate {name} is not a current stdgates.inc gate")
            qs = [qubit_index(q) for q in st.qubits]
            nq = max([nq] + [q + 1 for q in qs])
            ops.append(("gate", name, [value(a) for a in st.arguments], qs))
        elif isinstance(st, ast.QuantumPhase):
            ops.append(("gphase", value(st.argument)))
        elif isinstance(st, ast.QuantumMeasurementStatement):
            q = qubit_index(st.measure.qubit)
            bit = int(st.target.indices[0][0].value)
            nq = max(nq, q + 1)
            ops.append(("measure", q, bit))
        elif isinstance(st, ast.ClassicalDeclaration):
            nbits = int(st.type.size.value)
        elif isinstance(st, ast.QubitDeclaration):
            nq = max(nq, int(st.size.value))
    # Simulate on the touched qubits only (untouched ones stay |0>).
    used = sorted({q for op in ops if op[0] == "gate" for q in op[3]} | {op[1] for op in ops if op[0] == "measure"})
    pos = {q: i for i, q in enumerate(used)}
    n = len(used)
    psi = np.zeros(2**n, dtype=complex)
    psi[0] = 1
    psi = psi.reshape([2] * n)  # axis i <-> compact qubit n-1-i (little endian)
    ax = lambda q: n - 1 - pos[q]
    meas = {}
    for op in ops:
        if op[0] == "gphase":
            psi = psi * np.exp(1j * op[1])
        elif op[0] == "measure":
            meas[op[2]] = op[1]
        else:
            _, name, params, qs = op
            if name in ("cx", "cz", "swap"):
                a, b = ax(qs[0]), ax(qs[1])
                if name == "swap":
                    psi = np.swapaxes(psi, a, b)
                else:
                    sl = [slice(None)] * n
                    sl[a] = 1
                    sub = psi[tuple(sl)].copy()
                    bb = b if b < a else b - 1
                    if name == "cx":
                        sub = np.flip(sub, axis=bb)
                    else:
                        idx = [slice(None)] * (n - 1)
                        idx[bb] = 1
                        sub[tuple(idx)] *= -1
                    psi = psi.copy()
                    psi[tuple(sl)] = sub
            else:
                m = mat1(name, params)
                psi = np.moveaxis(np.tensordot(m, psi, axes=([1], [ax(qs[0])])), 0, ax(qs[0]))
    probs = np.abs(psi) ** 2
    bits = []
    for b in range(nbits):
        if b not in meas:
            problems.append(f"bit {b} never measured")
            bits.append(None)
            continue
        a = ax(meas[b])
        p1 = probs.take(1, axis=a).sum()
        bits.append(float(1 - 2 * p1))
    return problems, bits


def main(args):
    files = []
    for a in args:
        if os.path.isdir(a):
            files += sorted(os.path.join(a, f) for f in os.listdir(a) if f.endswith(".qasm"))
        else:
            files.append(a)
    if not files:
        print("no .qasm files given", file=sys.stderr)
        return 1
    out, bad = {}, 0
    for f in files:
        problems, bits = check(f)
        out[f] = {"bits": bits, "problems": problems}
        bad += bool(problems)
    print(json.dumps(out))
    return 1 if bad else 0


if __name__ == "__main__":
    sys.exit(main(sys.argv[1:]))
