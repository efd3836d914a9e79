"""A minimal gate-list circuit representation shared by ansätze, simulators and exporters.

Conventions (used everywhere in eigensweep):
- qubit ``k`` is spin orbital ``k`` after mapping (OpenFermion's interleaved order: even =
  alpha, odd = beta);
- in a statevector, qubit 0 is the most significant bit of the basis-state index (the order
  OpenFermion's ``get_sparse_operator`` uses);
- in a bitstring (counts files, manifests) character ``k`` is the value measured on qubit ``k``.

Gate names are those of the OpenQASM 3 standard library (``stdgates.inc``): ``x``, ``y``, ``z``,
``h``, ``s``, ``sdg``, ``sx``, ``rx``, ``ry``, ``rz``, ``cx``, ``cz``; plus the XX rotation
``rxx(t) = exp(-i t X X / 2)`` (not in ``stdgates.inc``; exported files define it), the native
entangler of XX-type devices. Rotation angles are in radians with the usual convention
``rz(t) = exp(-i t Z / 2)``. The ansatz compiler below emits only ``cx`` as two-qubit gate;
``cz`` and ``rxx`` come from the device compiler (:mod:`eigensweep.device.compile`).

This module also holds eigensweep's one Pauli-rotation compiler (:func:`circuit_from_rotations`):
the optimize stage's reported circuit costs and the exported device circuits are both built by
it, so the two always agree. Scheme (the textbook "CNOT staircase" for a Pauli exponential,
Nielsen & Chuang, *Quantum Computation and Quantum Information* (2000), section 4.7.3;
Whitfield, Biamonte, Aspuru-Guzik, Mol. Phys. 109, 735 (2011)): the reference state is
prepared with ``x`` gates; a rotation ``exp(-i a/2 P)`` of weight 1 is one ``rx``/``ry``/``rz``;
of weight ``w > 1`` it is a basis change on each qubit of the support (``h`` for X,
``rx(pi/2)`` for Y, since ``rx(-pi/2) Z rx(pi/2) = Y``), a CNOT ladder
``cx(q1,q2) cx(q2,q3) ... cx(q_{w-1},q_w)`` over the support in ascending qubit order,
``rz(a)`` on ``q_w``, the reversed ladder and the inverse basis change: ``2(w - 1)`` CNOTs.
Rotations with ``|a| <= drop_below`` are identities and are left out (symmetry-forbidden
excitations stay at exactly zero); the empty Pauli string is a global phase and is left out
too. Depth is :attr:`Circuit.depth` (every gate one time step, ASAP scheduling); no gate
cancellation or reordering is attempted.
"""

from __future__ import annotations

import math
from collections.abc import Iterable, Sequence
from dataclasses import dataclass, field

import numpy as np

ONE_QUBIT = {"x", "y", "z", "h", "s", "sdg", "sx"}
ONE_QUBIT_ROTATIONS = {"rx", "ry", "rz"}
TWO_QUBIT = {"cx", "cz", "rxx"}
TWO_QUBIT_ROTATIONS = {"rxx"}
#: Gates that take one angle.
ROTATIONS = ONE_QUBIT_ROTATIONS | TWO_QUBIT_ROTATIONS
KNOWN_GATES = ONE_QUBIT | ONE_QUBIT_ROTATIONS | TWO_QUBIT


@dataclass(frozen=True)
class Gate:
    """One gate: ``name`` from :data:`KNOWN_GATES`, target ``qubits`` (control first for ``cx``),
    and ``params`` (one angle in radians for rotations, empty otherwise)."""

    name: str
    qubits: tuple[int, ...]
    params: tuple[float, ...] = ()


@dataclass
class Circuit:
    """An ordered list of gates on ``n_qubits`` qubits (applied first to last)."""

    n_qubits: int
    gates: list[Gate] = field(default_factory=list)

    def append(self, name: str, qubits: tuple[int, ...] | list[int], params=()) -> None:
        """Append one gate after checking its name, arity, qubit range and parameter count."""
        if name not in KNOWN_GATES:
            raise ValueError(f"unknown gate {name!r}; known: {sorted(KNOWN_GATES)}")
        qs = tuple(int(q) for q in qubits)
        ps = tuple(float(p) for p in params)
        arity = 2 if name in TWO_QUBIT else 1
        if len(qs) != arity:
            raise ValueError(f"gate {name!r} acts on {arity} qubit(s), got {qs}")
        if len(set(qs)) != len(qs):
            raise ValueError(f"gate {name!r} needs distinct qubits, got {qs}")
        if any(q < 0 or q >= self.n_qubits for q in qs):
            raise ValueError(f"gate {name!r} on qubits {qs} outside 0..{self.n_qubits - 1}")
        n_params = 1 if name in ROTATIONS else 0
        if len(ps) != n_params:
            raise ValueError(f"gate {name!r} takes {n_params} angle(s), got {ps}")
        self.gates.append(Gate(name, qs, ps))

    def extend(self, other: Circuit) -> None:
        self.gates.extend(other.gates)

    def copy(self) -> Circuit:
        """A new circuit with the same gates (gates are immutable, so this is a full copy)."""
        return Circuit(self.n_qubits, list(self.gates))

    def __len__(self) -> int:
        return len(self.gates)

    def inverse(self) -> Circuit:
        """The exact inverse circuit: gates reversed and each one inverted (no global phase)."""
        out = Circuit(self.n_qubits)
        for g in reversed(self.gates):
            out.gates.extend(inverse_gate(g))
        return out

    @property
    def cnot_count(self) -> int:
        return sum(1 for g in self.gates if g.name == "cx")

    @property
    def two_qubit_count(self) -> int:
        """Number of two-qubit gates of any kind (``cx``, ``cz``, ``rxx``)."""
        return sum(1 for g in self.gates if len(g.qubits) == 2)

    @property
    def depth(self) -> int:
        """Circuit depth counting every gate as one layer step (ASAP scheduling)."""
        level = [0] * self.n_qubits
        for g in self.gates:
            d = max(level[q] for q in g.qubits) + 1
            for q in g.qubits:
                level[q] = d
        return max(level, default=0)


_SELF_INVERSE = {"x", "y", "z", "h", "cx", "cz"}


def inverse_gate(gate: Gate) -> list[Gate]:
    """Gates whose product is exactly ``gate``'s inverse (including the global phase).

    Every gate has a one-gate inverse except ``sx``, whose inverse ``sx^3 = x . sx`` is
    returned as two gates because ``stdgates.inc`` has no ``sxdg``.
    """
    if gate.name in _SELF_INVERSE:
        return [gate]
    if gate.name == "s":
        return [Gate("sdg", gate.qubits)]
    if gate.name == "sdg":
        return [Gate("s", gate.qubits)]
    if gate.name in ROTATIONS:
        return [Gate(gate.name, gate.qubits, (-gate.params[0],))]
    if gate.name == "sx":
        return [Gate("sx", gate.qubits), Gate("x", gate.qubits)]
    raise ValueError(f"no inverse known for gate {gate.name!r}")


#: Rotations with ``|angle|`` at or below this are identities and are not compiled.
ZERO_ANGLE = 1e-12

PauliRotation = tuple[np.ndarray, np.ndarray, float]
"""``(x_row, z_row, angle)``: the rotation ``exp(-i angle/2 P(x, z))`` (``x & z`` = Y)."""


def _bool_row(row, n: int, what: str) -> np.ndarray:
    arr = np.asarray(row).astype(bool).reshape(-1)
    if arr.shape != (n,):
        raise ValueError(f"{what} has {arr.size} entries, expected {n} (one per qubit)")
    return arr


def append_pauli_rotation(circ: Circuit, x: np.ndarray, z: np.ndarray, angle: float) -> None:
    """Append ``exp(-i angle/2 P(x, z))`` with the CNOT-staircase scheme (module docstring)."""
    support = [int(q) for q in np.flatnonzero(x | z)]
    if not support:
        return  # exp(-i angle/2 I) is a global phase: nothing to apply
    if len(support) == 1:
        q = support[0]
        name = "rz" if not x[q] else ("ry" if z[q] else "rx")
        circ.append(name, (q,), (angle,))
        return
    for q in support:
        if x[q] and z[q]:
            circ.append("rx", (q,), (math.pi / 2,))
        elif x[q]:
            circ.append("h", (q,))
    ladder = list(zip(support[:-1], support[1:], strict=True))
    for c, t in ladder:
        circ.append("cx", (c, t))
    circ.append("rz", (support[-1],), (angle,))
    for c, t in reversed(ladder):
        circ.append("cx", (c, t))
    for q in support:
        if x[q] and z[q]:
            circ.append("rx", (q,), (-math.pi / 2,))
        elif x[q]:
            circ.append("h", (q,))


def circuit_from_rotations(
    reference_bits: Sequence[int] | np.ndarray,
    rotations: Iterable[PauliRotation],
    *,
    drop_below: float = ZERO_ANGLE,
) -> Circuit:
    """Circuit preparing ``prod_k exp(-i angle_k/2 P_k) |reference>`` (first rotation first).

    Args:
        reference_bits: ``reference_bits[k]`` is the value of qubit ``k`` (0 or 1).
        rotations: ``(x_row, z_row, angle)`` triples (symplectic rows, ``x & z`` = Y).
        drop_below: rotations with ``|angle| <= drop_below`` are identities and are left out
            (pass ``-1`` to keep every rotation, e.g. to count the gates at generic angles).

    Returns:
        The circuit; it reproduces the state exactly, global phase included, except for the
        phase ``exp(-i angle/2)`` of identity rotations (empty Pauli strings), which are left
        out.

    Example:
        >>> circ = circuit_from_rotations([1, 1, 0, 0], [([1, 1, 1, 1], [1, 0, 0, 0], 0.2)])
        >>> circ.cnot_count, circ.depth
        (6, 10)
    """
    bits = np.asarray(reference_bits).astype(np.int64).reshape(-1)
    if np.any((bits != 0) & (bits != 1)):
        raise ValueError("reference_bits must contain only 0 and 1")
    n = int(bits.size)
    circ = Circuit(n)
    for q in np.flatnonzero(bits):
        circ.append("x", (int(q),))
    for i, (x_row, z_row, angle) in enumerate(rotations):
        x = _bool_row(x_row, n, f"rotation {i} x row")
        z = _bool_row(z_row, n, f"rotation {i} z row")
        if not np.isfinite(angle):
            raise ValueError(f"rotation {i} has a non-finite angle {angle!r}")
        if abs(float(angle)) <= drop_below:
            continue
        append_pauli_rotation(circ, x, z, float(angle))
    return circ


def circuit_costs(circ: Circuit) -> dict[str, int]:
    """``{"cnot_count", "depth", "n_qubits"}`` of a compiled circuit."""
    return {"cnot_count": circ.cnot_count, "depth": circ.depth, "n_qubits": circ.n_qubits}
