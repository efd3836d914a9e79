"""A minimal gate-list circuit representation shared by ansätze, simulators and exporters.

Conventions (used everywhere in eigensweep):
- qubit ``k`` is spin orbital ``k`` after mapping (OpenFermion's interleaved order: even =
  alpha, odd = beta);
- in a statevector, qubit 0 is the most significant bit of the basis-state index (the order
  OpenFermion's ``get_sparse_operator`` uses);
- in a bitstring (counts files, manifests) character ``k`` is the value measured on qubit ``k``.

Gate names are those of the OpenQASM 3 standard library (``stdgates.inc``): ``x``, ``y``, ``z``,
``h``, ``s``, ``sdg``, ``sx``, ``rx``, ``ry``, ``rz``, ``cx``. Rotation angles are in radians with
the usual convention ``rz(t) = exp(-i t Z / 2)``.
"""

from __future__ import annotations

from dataclasses import dataclass, field

ONE_QUBIT = {"x", "y", "z", "h", "s", "sdg", "sx"}
ONE_QUBIT_ROTATIONS = {"rx", "ry", "rz"}
TWO_QUBIT = {"cx"}
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
        n_params = 1 if name in ONE_QUBIT_ROTATIONS else 0
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
    def depth(self) -> int:
        """Circuit depth counting every gate as one layer step (ASAP scheduling)."""
        level = [0] * self.n_qubits
        for g in self.gates:
            d = max(level[q] for q in g.qubits) + 1
            for q in g.qubits:
                level[q] = d
        return max(level, default=0)


_SELF_INVERSE = {"x", "y", "z", "h", "cx"}


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
    if gate.name in ONE_QUBIT_ROTATIONS:
        return [Gate(gate.name, gate.qubits, (-gate.params[0],))]
    if gate.name == "sx":
        return [Gate("sx", gate.qubits), Gate("x", gate.qubits)]
    raise ValueError(f"no inverse known for gate {gate.name!r}")
