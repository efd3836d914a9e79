"""Hardware-efficient ansatz (Kandala et al., Nature 549, 242 (2017)).

Layout (``rounds = d``): ``x`` gates prepare a computational-basis state ``|p>``, then a
rotation layer, then ``d`` times a CNOT chain ``cx(0,1) cx(1,2) ... cx(n-2,n-1)`` followed by
another rotation layer. At zero parameters every rotation is the identity and the state is
``C^d |p>`` with ``C`` the chain; ``C`` maps basis states linearly over GF(2),
``b_k -> b_0 + ... + b_k (mod 2)`` (the prefix-parity matrix ``L``), so the prepared bits are
``p = (L^-1)^d r`` with ``(L^-1 r)_k = r_k + r_{k-1}``: the ansatz at zero parameters is exactly
the reference ``|r>`` (HF bits in the chosen qubit encoding), as a variational start should
be. A rotation layer is ``ry(theta)`` then ``rz(theta)`` on every qubit (``axes="yz"``,
``2 n (d + 1)`` parameters) or ``ry(theta)`` only (``axes="y"``, real amplitudes,
``n (d + 1)`` parameters). Parameters are ordered layer by layer, qubit by qubit, ``ry`` before ``rz``.

For simulation the ansatz is a :class:`~eigensweep.vqe.pauli_rotation.PauliRotationAnsatz`: ``ry``
and ``rz`` are the rotations ``exp(-i t/2 Y)``, ``exp(-i t/2 Z)``, and each CNOT is written
exactly, up to the global phase ``exp(i pi/4)``, as the three fixed rotations
``exp(-i pi/4 Z_c) exp(-i pi/4 X_t) exp(+i pi/4 Z_c X_t)``. :meth:`circuit` emits the
native ``ry``/``rz``/``cx`` gates instead (``rounds * (n - 1)`` CNOTs).
"""

from __future__ import annotations

from typing import TYPE_CHECKING

import numpy as np

from ..circuit import Circuit, circuit_costs
from .methods import ROTATION_AXES
from .pauli_rotation import PauliGate, PauliRotationAnsatz

if TYPE_CHECKING:
    from ..qubit.pauli import PauliExpansion

__all__ = ["ROTATION_AXES", "HardwareEfficientAnsatz", "prepared_bits"]


def _row(n: int, qubits: dict[int, str]) -> tuple[np.ndarray, np.ndarray]:
    x = np.zeros(n, dtype=bool)
    z = np.zeros(n, dtype=bool)
    for q, letter in qubits.items():
        x[q] = letter in "XY"
        z[q] = letter in "ZY"
    return x, z


def prepared_bits(reference: np.ndarray, rounds: int) -> np.ndarray:
    """Bits ``p`` that ``rounds`` CNOT chains carry to ``reference`` (module docstring)."""
    bits = np.asarray(reference, dtype=np.uint8).reshape(-1).copy()
    for _ in range(int(rounds)):
        bits[1:] ^= bits[:-1].copy()  # inverse of the chain: b_k + b_{k-1}
    return bits


class HardwareEfficientAnsatz(PauliRotationAnsatz):
    """Kandala-style layered ansatz whose zero-parameter state is ``reference`` (module
    docstring)."""

    name = "hardware_efficient"

    def __init__(
        self,
        hamiltonian: PauliExpansion | None,
        reference: np.ndarray,
        rounds: int = 2,
        axes: str = "yz",
        *,
        init_scale: float = 0.1,
        seed: int = 0,
    ) -> None:
        if axes not in ROTATION_AXES:
            raise ValueError(f"axes must be one of {ROTATION_AXES}")
        if rounds < 0:
            raise ValueError("rounds must be >= 0")
        target = np.asarray(reference, dtype=np.uint8).reshape(-1)
        ref = prepared_bits(target, rounds)
        n = ref.size
        letters = [a.upper() for a in axes]
        gates: list[PauliGate] = []
        native: list[tuple[str, tuple[int, ...], int]] = []
        n_params = 0

        def rotation_layer() -> None:
            nonlocal n_params
            for q in range(n):
                for letter in letters:
                    x, z = _row(n, {q: letter})
                    gates.append(PauliGate(x, z, n_params))
                    native.append(("r" + letter.lower(), (q,), n_params))
                    n_params += 1

        rotation_layer()
        for _ in range(int(rounds)):
            for c in range(n - 1):
                t = c + 1
                for qubits, offset in (
                    ({c: "Z"}, np.pi / 2),
                    ({t: "X"}, np.pi / 2),
                    ({c: "Z", t: "X"}, -np.pi / 2),
                ):
                    x, z = _row(n, qubits)
                    gates.append(PauliGate(x, z, -1, 0.0, offset))
                native.append(("cx", (c, t), -1))
            rotation_layer()
        self.rounds = int(rounds)
        self.axes = axes
        self.target_reference = target
        self._native = native
        super().__init__(hamiltonian, ref, gates, n_params, init_scale=init_scale, seed=seed)

    def circuit(self, theta: np.ndarray, mapping: str | None = None) -> Circuit:
        """Native ``x``/``ry``/``rz``/``cx`` circuit."""
        return self.circuit_at_angles(self.angles(theta))

    def circuit_at_angles(self, angles: np.ndarray, mapping: str | None = None) -> Circuit:
        """Native circuit whose rotations take the angles of the parametrized Pauli gates
        (in order; the fixed rotations that spell each CNOT are emitted as ``cx``)."""
        angles = np.asarray(angles, dtype=float).reshape(-1)
        rotation_angles = iter(angles[[g.param >= 0 for g in self.gates]])
        circ = Circuit(self.n_qubits)
        for q in np.nonzero(self.reference)[0]:
            circ.append("x", (int(q),))
        for name, qubits, p in self._native:
            if p < 0:
                circ.append(name, qubits)
            else:
                circ.append(name, qubits, (float(next(rotation_angles)),))
        return circ

    def circuit_costs(self, mapping: str | None = None) -> dict[str, int]:
        return circuit_costs(self.circuit(np.full(self.n_params, 0.1)))

    def meta(self) -> dict:
        """``reference_bits`` is the zero-parameter state (the constructor's ``reference``);
        ``prepared_bits`` the basis state the ``x`` gates prepare."""
        out = super().meta()
        out.update(
            rounds=self.rounds,
            axes=self.axes,
            reference_bits=[int(b) for b in self.target_reference],
            prepared_bits=[int(b) for b in self.reference],
        )
        return out
