"""Export circuits as OpenQASM 3.0 / 2.0 text and read our own exported OpenQASM 3 back.

Both exporters write one gate per line using the standard gate names (``stdgates.inc`` for
OpenQASM 3, ``qelib1.inc`` for OpenQASM 2). Angles are printed with Python's shortest
round-trip ``repr`` of the float, so parsing the text gives back the identical double and a
re-simulation matches to machine precision.

Classical bit ``c[k]`` receives qubit ``k`` (``c[k] = measure q[k];``). In our counts format
character ``k`` of a bitstring is ``c[k]``, i.e. qubit ``k`` -- the leftmost character is
qubit 0, *not* the highest index as some tools print registers.

:func:`from_qasm3` reads the subset we export (gate calls with literal angles on ``q[k]``,
declarations, ``measure``); it uses the reference parser of the open standard
(``openqasm3.parse``) and is meant for round-trip checks, not as a general importer.
"""

from __future__ import annotations

import math

from eigensweep.circuit import KNOWN_GATES, ONE_QUBIT_ROTATIONS, Circuit

__all__ = ["to_qasm3", "to_qasm2", "from_qasm3", "from_qasm2", "QasmReadError"]


class QasmReadError(ValueError):
    """The OpenQASM text uses something outside the subset eigensweep exports."""


def _angle(value: float) -> str:
    v = float(value)
    if not math.isfinite(v):
        raise ValueError(f"cannot export non-finite angle {value!r}")
    return repr(v)


def _gate_lines(circuit: Circuit, qasm2: bool = False) -> list[str]:
    lines = []
    for g in circuit.gates:
        if g.name not in KNOWN_GATES:
            raise ValueError(f"cannot export unknown gate {g.name!r}")
        args = f"({_angle(g.params[0])})" if g.name in ONE_QUBIT_ROTATIONS else ""
        qubits = ", ".join(f"q[{q}]" for q in g.qubits)
        if qasm2 and g.name == "sx":
            # the original qelib1.inc has no sx; sx = h s h exactly (same global phase)
            lines += [f"h {qubits};", f"s {qubits};", f"h {qubits};"]
            continue
        lines.append(f"{g.name}{args} {qubits};")
    return lines


def _n_measure(circuit: Circuit, n_measure: int | None) -> int:
    n = circuit.n_qubits if n_measure is None else int(n_measure)
    if not 0 <= n <= circuit.n_qubits:
        raise ValueError(f"n_measure={n_measure} outside 0..{circuit.n_qubits}")
    return n


def _comment(name: str) -> str:
    return " ".join(str(name).split())  # one line, no control characters


def to_qasm3(circuit: Circuit, n_measure: int | None = None, name: str = "eigensweep") -> str:
    """OpenQASM 3.0 program: header, ``qubit[n] q; bit[m] c;``, gates, ``c[k] = measure q[k];``.

    ``n_measure`` qubits (default: all) are measured, qubit ``k`` into ``c[k]``. ``name`` is
    written as a comment after the version and include lines.
    """
    m = _n_measure(circuit, n_measure)
    lines = [
        "OPENQASM 3.0;",
        'include "stdgates.inc";',
        f"// {_comment(name)}",
        "// bit order: c[k] = qubit k = character k of a returned bitstring (qubit 0 first)",
        f"qubit[{circuit.n_qubits}] q;",
    ]
    if m:
        lines.append(f"bit[{m}] c;")
    lines += _gate_lines(circuit)
    lines += [f"c[{k}] = measure q[{k}];" for k in range(m)]
    return "\n".join(lines) + "\n"


def to_qasm2(circuit: Circuit, n_measure: int | None = None, name: str = "eigensweep") -> str:
    """OpenQASM 2.0 program with ``qreg q[n]; creg c[m];`` and ``measure q[k] -> c[k];``.

    Gates are those of the original ``qelib1.inc``; ``sx`` (not in it) is written as the exact
    identity ``sx = h s h``.
    """
    m = _n_measure(circuit, n_measure)
    lines = [
        "OPENQASM 2.0;",
        'include "qelib1.inc";',
        f"// {_comment(name)}",
        "// bit order: c[k] = qubit k = character k of a returned bitstring (qubit 0 first)",
        f"qreg q[{circuit.n_qubits}];",
    ]
    if m:
        lines.append(f"creg c[{m}];")
    lines += _gate_lines(circuit, qasm2=True)
    lines += [f"measure q[{k}] -> c[{k}];" for k in range(m)]
    return "\n".join(lines) + "\n"


# ----------------------------------------------------------------------------- reading


def _eval_angle(expr) -> float:
    from openqasm3 import ast

    if isinstance(expr, ast.FloatLiteral | ast.IntegerLiteral):
        return float(expr.value)
    if isinstance(expr, ast.UnaryExpression) and expr.op.name == "-":
        return -_eval_angle(expr.expression)
    if isinstance(expr, ast.Identifier) and expr.name in ("pi", "π"):
        return math.pi
    if isinstance(expr, ast.BinaryExpression) and expr.op.name in ("*", "/", "+", "-"):
        a, b = _eval_angle(expr.lhs), _eval_angle(expr.rhs)
        return {"*": a * b, "/": a / b, "+": a + b, "-": a - b}[expr.op.name]
    raise QasmReadError(f"unsupported angle expression {type(expr).__name__}")


def _index(operand, register: str) -> int:
    from openqasm3 import ast

    if not isinstance(operand, ast.IndexedIdentifier) or operand.name.name != register:
        raise QasmReadError(f"expected an indexed {register}[k] operand")
    if len(operand.indices) != 1 or len(operand.indices[0]) != 1:
        raise QasmReadError("expected a single index")
    idx = operand.indices[0][0]
    if not isinstance(idx, ast.IntegerLiteral):
        raise QasmReadError("expected an integer literal index")
    return int(idx.value)


def from_qasm3(text: str) -> Circuit:
    """Parse an OpenQASM 3 program of the exported subset into a :class:`Circuit`.

    Measurements must be ``c[k] = measure q[k];`` (qubit ``k`` into bit ``k``); gates must be
    standard-library names known to :mod:`eigensweep.circuit` with literal angles.
    Raises :class:`QasmReadError` for anything else.
    """
    return _from_text(text, "3", "stdgates.inc")


def from_qasm2(text: str) -> Circuit:
    """Parse an OpenQASM 2.0 program written by :func:`to_qasm2` into a :class:`Circuit`.

    Uses the same OpenQASM 3 reference parser: the language is backwards compatible with the
    ``qreg``/``creg``/``measure q[k] -> c[k]`` syntax we emit.
    """
    return _from_text(text, "2", "qelib1.inc")


def _from_text(text: str, major: str, include: str) -> Circuit:
    import openqasm3
    from openqasm3 import ast

    try:
        program = openqasm3.parse(text)
    except Exception as err:  # the reference parser raises its own error types
        msg = " ".join(str(err).split())
        raise QasmReadError(f"not valid OpenQASM: {msg}") from None
    if str(program.version).split(".")[0] != major:
        raise QasmReadError(f"expected OPENQASM {major}, got version {program.version}")
    circ: Circuit | None = None
    for st in program.statements:
        if isinstance(st, ast.Include):
            if st.filename != include:
                raise QasmReadError(f"unsupported include {st.filename!r}")
        elif isinstance(st, ast.QubitDeclaration):
            if circ is not None or st.qubit.name != "q" or st.size is None:
                raise QasmReadError("expected exactly one quantum register q")
            circ = Circuit(int(st.size.value))
        elif isinstance(st, ast.ClassicalDeclaration):
            if st.identifier.name != "c" or st.init_expression is not None:
                raise QasmReadError("expected one classical register c")
        elif isinstance(st, ast.QuantumGate):
            if circ is None:
                raise QasmReadError("gate before the qubit declaration")
            if st.modifiers:
                raise QasmReadError("gate modifiers are not supported")
            name = st.name.name
            params = [_eval_angle(a) for a in st.arguments]
            qubits = [_index(o, "q") for o in st.qubits]
            try:
                circ.append(name, qubits, params)
            except ValueError as err:
                raise QasmReadError(str(err)) from None
        elif isinstance(st, ast.QuantumMeasurementStatement):
            q = _index(st.measure.qubit, "q")
            c = _index(st.target, "c") if st.target is not None else None
            if c != q:
                raise QasmReadError(f"measurement q[{q}] -> c[{c}] breaks the bit order")
        else:
            raise QasmReadError(f"unsupported statement {type(st).__name__}")
    if circ is None:
        raise QasmReadError("no 'qubit[n] q;' declaration found")
    return circ
