"""Export circuits as OpenQASM 3.0 / 2.0 text and read our own exported OpenQASM 3 back.

Both exporters write one gate per line using the standard gate names (``stdgates.inc`` for
OpenQASM 3, ``qelib1.inc`` for OpenQASM 2). Angles are printed with Python's shortest
round-trip ``repr`` of the float, so parsing the text gives back the identical double and a
re-simulation matches to machine precision.

Classical bit ``c[k]`` receives qubit ``k`` (``c[k] = measure q[k];``) unless a list of
measured qubits is given: a circuit compiled for a device target acts on the device's physical
register and measures ``c[k] = measure q[measured[k]];`` (the manifest's ``measured_qubits``).
In our counts format character ``k`` of a bitstring is ``c[k]`` -- the leftmost character is
bit 0, *not* the highest index as some tools print registers.

``rxx(t) = exp(-i t XX/2)`` is not in ``stdgates.inc`` or ``qelib1.inc``; a file that uses it
defines it first (:data:`RXX_DEFINITION`, the textbook ``h h cx rz cx h h`` identity), and the
device runs it as its native XX-type gate.

:func:`from_qasm3` reads the subset we export (gate calls with literal angles on ``q[k]``,
declarations, ``measure``); it uses the reference parser of the open standard
(``openqasm3.parse``) and is meant for round-trip checks, not as a general importer.
"""

from __future__ import annotations

import math

from eigensweep.circuit import KNOWN_GATES, ROTATIONS, Circuit

__all__ = [
    "to_qasm3",
    "to_qasm2",
    "from_qasm3",
    "from_qasm2",
    "read_qasm3_measured",
    "QasmReadError",
    "RXX_DEFINITION",
]

#: Definition of ``rxx`` written into files that use it (valid OpenQASM 2.0 and 3).
RXX_DEFINITION = "gate rxx(theta) a, b { h a; h b; cx a, b; rz(theta) b; cx a, b; h a; h b; }"


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
        args = f"({_angle(g.params[0])})" if g.name in ROTATIONS else ""
        qubits = ", ".join(f"q[{q}]" for q in g.qubits)
        if qasm2 and g.name == "sx":
            # the original qelib1.inc has no sx; sx = h s h exactly (same global phase)
            lines += [f"h {qubits};", f"s {qubits};", f"h {qubits};"]
            continue
        lines.append(f"{g.name}{args} {qubits};")
    return lines


def _measured(circuit: Circuit, n_measure: int | None, measured) -> list[int]:
    if measured is not None:
        out = [int(q) for q in measured]
        if len(set(out)) != len(out) or any(not 0 <= q < circuit.n_qubits for q in out):
            raise ValueError(
                f"measured qubits {out} must be distinct, in 0..{circuit.n_qubits - 1}"
            )
        return out
    n = circuit.n_qubits if n_measure is None else int(n_measure)
    if not 0 <= n <= circuit.n_qubits:
        raise ValueError(f"n_measure={n_measure} outside 0..{circuit.n_qubits}")
    return list(range(n))


def _definitions(circuit: Circuit) -> list[str]:
    return [RXX_DEFINITION] if any(g.name == "rxx" for g in circuit.gates) else []


def _bit_order_comment(measured: list[int]) -> str:
    if measured == list(range(len(measured))):
        return "// bit order: c[k] = qubit k = character k of a returned bitstring (qubit 0 first)"
    return (
        "// bit order: c[k] = physical qubit measured_qubits[k] = character k of a returned "
        "bitstring; manifest.json maps them to logical qubits"
    )


def _comment(name: str) -> str:
    return " ".join(str(name).split())  # one line, no control characters


def to_qasm3(
    circuit: Circuit,
    n_measure: int | None = None,
    name: str = "eigensweep",
    measured: list[int] | None = None,
) -> str:
    """OpenQASM 3.0 program: header, ``qubit[n] q; bit[m] c;``, gates, ``c[k] = measure q[k];``.

    ``n_measure`` qubits (default: all) are measured, qubit ``k`` into ``c[k]``; with
    ``measured`` (physical qubits of a compiled circuit) ``c[k] = measure q[measured[k]]``.
    ``name`` is written as a comment after the version and include lines.
    """
    meas = _measured(circuit, n_measure, measured)
    lines = [
        "OPENQASM 3.0;",
        'include "stdgates.inc";',
        f"// {_comment(name)}",
        _bit_order_comment(meas),
        *_definitions(circuit),
        f"qubit[{circuit.n_qubits}] q;",
    ]
    if meas:
        lines.append(f"bit[{len(meas)}] c;")
    lines += _gate_lines(circuit)
    lines += [f"c[{k}] = measure q[{q}];" for k, q in enumerate(meas)]
    return "\n".join(lines) + "\n"


def to_qasm2(
    circuit: Circuit,
    n_measure: int | None = None,
    name: str = "eigensweep",
    measured: list[int] | None = None,
) -> str:
    """OpenQASM 2.0 program with ``qreg q[n]; creg c[m];`` and ``measure q[k] -> c[k];``.

    Gates are those of the original ``qelib1.inc``; ``sx`` (not in it) is written as the exact
    identity ``sx = h s h``; ``rxx`` is defined in the file. ``measured`` as in :func:`to_qasm3`.
    """
    meas = _measured(circuit, n_measure, measured)
    lines = [
        "OPENQASM 2.0;",
        'include "qelib1.inc";',
        f"// {_comment(name)}",
        _bit_order_comment(meas),
        *_definitions(circuit),
        f"qreg q[{circuit.n_qubits}];",
    ]
    if meas:
        lines.append(f"creg c[{len(meas)}];")
    lines += _gate_lines(circuit, qasm2=True)
    lines += [f"measure q[{q}] -> c[{k}];" for k, q in enumerate(meas)]
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
    circ, measured = _from_text(text, "3", "stdgates.inc")
    _check_identity_measure(measured)
    return circ


def read_qasm3_measured(text: str) -> tuple[Circuit, list[int]]:
    """Circuit on the file's whole register and ``measured`` (bit ``k`` = qubit ``measured[k]``).

    For circuits compiled for a device target (``c[k] = measure q[p];``). Bits must be
    measured in order ``c[0], c[1], ...``, each once.
    """
    return _from_text(text, "3", "stdgates.inc")


def _check_identity_measure(measured: list[int]) -> None:
    for c, q in enumerate(measured):
        if c != q:
            raise QasmReadError(f"measurement q[{q}] -> c[{c}] breaks the bit order")


def from_qasm2(text: str) -> Circuit:
    """Parse an OpenQASM 2.0 program written by :func:`to_qasm2` into a :class:`Circuit`.

    Uses the same OpenQASM 3 reference parser: the language is backwards compatible with the
    ``qreg``/``creg``/``measure q[k] -> c[k]`` syntax we emit.
    """
    circ, measured = _from_text(text, "2", "qelib1.inc")
    _check_identity_measure(measured)
    return circ


def _from_text(text: str, major: str, include: str) -> tuple[Circuit, list[int]]:
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
    measured: list[int] = []
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
        elif isinstance(st, ast.QuantumGateDefinition):
            if st.name.name != "rxx" or len(st.arguments) != 1 or len(st.qubits) != 2:
                raise QasmReadError(f"unsupported gate definition {st.name.name!r}")
        elif isinstance(st, ast.QuantumMeasurementStatement):
            q = _index(st.measure.qubit, "q")
            c = _index(st.target, "c") if st.target is not None else None
            if c != len(measured):
                raise QasmReadError(
                    f"measurement into c[{c}] breaks the bit order; expected c[{len(measured)}]"
                )
            measured.append(q)
        else:
            raise QasmReadError(f"unsupported statement {type(st).__name__}")
    if circ is None:
        raise QasmReadError("no 'qubit[n] q;' declaration found")
    if len(set(measured)) != len(measured):
        raise QasmReadError("a qubit is measured twice")
    return circ, measured
