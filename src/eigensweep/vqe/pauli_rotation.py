"""Qubit-space ansätze: products of Pauli rotations on a computational-basis reference.

:class:`PauliRotationAnsatz` is the state ``prod_k exp(-i a_k/2 P_k)|ref>`` simulated on the
statevector (:mod:`eigensweep.qubit.statevector`) with adjoint gradients (Jones & Gacon,
arXiv:2009.02823); the hardware-efficient ansatz, qubit-ADAPT and fermionic ansätze carried
through Z2 tapering are built on it. ``circuit`` compiles with
:func:`eigensweep.circuit.circuit_from_rotations`, the compiler the device export uses.
"""

from __future__ import annotations

from collections.abc import Callable, Sequence
from dataclasses import dataclass
from typing import TYPE_CHECKING

import numpy as np

from ..circuit import Circuit, PauliRotation, circuit_costs, circuit_from_rotations
from ..qubit import statevector as sv
from .parameter_shift import PAULI_RULE, ShiftUnit

if TYPE_CHECKING:
    from ..qubit.pauli import PauliExpansion

__all__ = ["PauliGate", "PauliRotationAnsatz", "pauli_label"]


def pauli_label(x: np.ndarray, z: np.ndarray) -> str:
    """Letter string (character ``k`` = qubit ``k``) of the Pauli string ``(x, z)``."""
    return "".join("IXZY"[int(a) + 2 * int(b)] for a, b in zip(x, z, strict=True))


@dataclass(frozen=True)
class PauliGate:
    """``exp(-i a/2 P(x, z))`` with ``a = coeff * theta[param] + offset`` (``param = -1``: fixed)."""

    x: np.ndarray
    z: np.ndarray
    param: int
    coeff: float = 1.0
    offset: float = 0.0


class PauliRotationAnsatz:
    """Product of Pauli rotations on a computational-basis reference, on statevectors.

    State ``prod_k exp(-i a_k/2 P_k)|ref>`` (``gates[0]`` first); energies are expectation
    values of a :class:`~eigensweep.qubit.pauli.PauliExpansion` (possibly tapered). The gradient is
    the adjoint one (Jones & Gacon, arXiv:2009.02823): with ``dU_k/da_k = -i/2 P_k U_k``,
    ``dE/da_k = Im <lambda_k|P_k|psi_k>``.
    """

    name = "pauli_rotations"

    def __init__(
        self,
        hamiltonian: PauliExpansion | None,
        reference: np.ndarray,
        gates: Sequence[PauliGate],
        n_params: int,
        *,
        init_scale: float = 0.0,
        seed: int = 0,
    ) -> None:
        self.reference = np.asarray(reference, dtype=np.uint8).reshape(-1)
        self._n_qubits = int(self.reference.size)
        if hamiltonian is not None and hamiltonian.n_qubits != self._n_qubits:
            raise ValueError(
                f"Hamiltonian acts on {hamiltonian.n_qubits} qubits, reference has {self._n_qubits}"
            )
        self.hamiltonian = hamiltonian
        self.gates = list(gates)
        self._n_params = int(n_params)
        for g in self.gates:
            if g.param >= self._n_params:
                raise ValueError(f"gate parameter index {g.param} out of range")
        self._params = np.array([max(g.param, 0) for g in self.gates], dtype=np.intp)
        self._coeffs = np.array([g.coeff if g.param >= 0 else 0.0 for g in self.gates])
        self._offsets = np.array([g.offset for g in self.gates], dtype=float)
        self.init_scale = float(init_scale)
        self.seed = int(seed)
        self._kernels = sv.PauliStrings([(g.x, g.z) for g in self.gates], self._n_qubits)

    @property
    def n_params(self) -> int:
        return self._n_params

    @property
    def n_qubits(self) -> int:
        return self._n_qubits

    def initial_params(self) -> np.ndarray:
        """``init_scale * N(0, 1)`` from ``seed`` (zeros when ``init_scale == 0``)."""
        if self.init_scale == 0.0:
            return np.zeros(self.n_params)
        return self.init_scale * np.random.default_rng(self.seed).standard_normal(self.n_params)

    def angles(self, theta: np.ndarray) -> np.ndarray:
        theta = np.asarray(theta, dtype=float).reshape(-1)
        if theta.size != self.n_params:
            raise ValueError(f"expected {self.n_params} parameters, got {theta.size}")
        if not self.gates:
            return np.zeros(0)
        safe = theta[self._params] if theta.size else np.zeros(len(self.gates))
        return self._coeffs * safe + self._offsets

    def _rotate(self, psi: np.ndarray, k: int, angle: float) -> np.ndarray:
        """``exp(-i angle/2 P_k) psi``."""
        return self._kernels.rotate(psi, k, angle)

    def _pauli(self, psi: np.ndarray, k: int) -> np.ndarray:
        """``P_k psi``."""
        return self._kernels.apply(psi, k)

    def state(self, theta: np.ndarray) -> np.ndarray:
        """Complex statevector (qubit 0 = most significant bit)."""
        return self.state_at_angles(self.angles(theta))

    def state_at_angles(self, angles: np.ndarray, start: np.ndarray | None = None) -> np.ndarray:
        """Statevector with gate ``k`` at rotation angle ``angles[k]`` (parameter shifts),
        the gates acting on ``start`` (default the reference basis state)."""
        if start is None:
            psi = sv.basis_state(self.reference)
        else:
            psi = np.array(start, dtype=np.complex128).reshape(-1)
            if psi.size != 1 << self._n_qubits:
                raise ValueError(f"start has {psi.size} amplitudes, expected {1 << self._n_qubits}")
        for k, a in enumerate(np.asarray(angles, dtype=float)):
            psi = self._rotate(psi, k, float(a))
        return psi

    def state_from(self, theta: np.ndarray, start: np.ndarray) -> np.ndarray:
        """The ansatz's gates at ``theta`` applied to another statevector ``start``."""
        return self.state_at_angles(self.angles(theta), start)

    def states_at_angles(self, angles: np.ndarray) -> np.ndarray:
        """Statevectors ``(B, 2**n)`` of a batch of per-gate angle rows ``(B, n_gates)``: row
        ``b`` equals :meth:`state_at_angles` ``(angles[b])`` bit for bit
        (:meth:`~eigensweep.qubit.statevector.PauliStrings.rotate_batch`)."""
        angles = np.asarray(angles, dtype=float).reshape(-1, len(self.gates))
        psi = np.broadcast_to(sv.basis_state(self.reference), (angles.shape[0], 1 << self.n_qubits))
        psi = np.ascontiguousarray(psi)
        for k in range(len(self.gates)):
            psi = self._kernels.rotate_batch(psi, k, angles[:, k])
        return psi

    def state_energy(self, psi: np.ndarray) -> float:
        """Exact ``<psi|H|psi>`` of a state of this ansatz's qubits."""
        return sv.expectation(psi, self._ham())

    def shift_units(self) -> list[ShiftUnit]:
        """One two-term unit per parametrized rotation, variable = its angle
        (:mod:`eigensweep.vqe.parameter_shift`)."""
        return [
            ShiftUnit((k,), (1.0,), int(g.param), float(g.coeff), PAULI_RULE)
            for k, g in enumerate(self.gates)
            if g.param >= 0 and g.coeff != 0.0
        ]

    qubit_state = state

    def _ham(self) -> PauliExpansion:
        if self.hamiltonian is None:
            raise RuntimeError("this ansatz was built without a Hamiltonian")
        return self.hamiltonian

    def energy(self, theta: np.ndarray) -> float:
        return sv.expectation(self.state(theta), self._ham())

    def energy_and_gradient(self, theta: np.ndarray) -> tuple[float, np.ndarray]:
        """Energy and exact gradient (adjoint sweep)."""
        ham = self._ham()
        return self.expectation_and_gradient(theta, lambda psi: sv.apply_pauli_expansion(psi, ham))

    def expectation_and_gradient(
        self,
        theta: np.ndarray,
        apply: Callable[[np.ndarray], np.ndarray],
        start: np.ndarray | None = None,
    ) -> tuple[float, np.ndarray]:
        """``<psi|A|psi>`` and its adjoint gradient for a Hermitian operator ``A``
        (``apply``: ``psi -> A psi``), the gates acting on ``start`` (default the reference):
        the energy, and the penalised objectives of :mod:`eigensweep.vqe.excited`."""
        angles = self.angles(theta)
        psi = self.state_at_angles(angles, start)
        lam = apply(psi)
        energy = float(np.vdot(psi, lam).real)
        da = np.zeros(len(self.gates))
        for k in range(len(self.gates) - 1, -1, -1):
            g = self.gates[k]
            if g.param >= 0:
                da[k] = float(np.vdot(lam, self._pauli(psi, k)).imag)
            if k:
                psi = self._rotate(psi, k, float(-angles[k]))
                lam = self._rotate(lam, k, float(-angles[k]))
        grad = np.bincount(self._params, weights=self._coeffs * da, minlength=self.n_params)
        return energy, grad

    def operator_list(self) -> list[dict]:
        """Rotations in application order: Pauli label, parameter (-1 fixed), coeff, offset."""
        return [
            {
                "kind": "pauli",
                "label": pauli_label(g.x, g.z),
                "param": int(g.param),
                "coeff": float(g.coeff),
                "offset": float(g.offset),
            }
            for g in self.gates
        ]

    def meta(self) -> dict:
        return {
            "name": self.name,
            "n_params": self.n_params,
            "n_qubits": self.n_qubits,
            "reference_bits": [int(b) for b in self.reference],
            "operators": self.operator_list(),
        }

    def pauli_rotations(
        self, theta: np.ndarray, mapping: str | None = None
    ) -> tuple[np.ndarray, list[PauliRotation]]:
        """Reference bits and rotations (already in qubit space; ``mapping`` is ignored)."""
        return self.reference.copy(), self._rotations_at(self.angles(theta))

    def _rotations_at(self, angles: np.ndarray) -> list[PauliRotation]:
        return [
            (g.x.copy(), g.z.copy(), float(a))
            for g, a in zip(self.gates, np.asarray(angles, dtype=float), strict=True)
        ]

    def circuit(self, theta: np.ndarray, mapping: str | None = None) -> Circuit:
        return self.circuit_at_angles(self.angles(theta))

    def circuit_at_angles(self, angles: np.ndarray, mapping: str | None = None) -> Circuit:
        """Compiled circuit with gate ``k`` at angle ``angles[k]`` (the circuit of
        :meth:`state_at_angles`, measured by the ``noisy`` estimator's parameter shifts)."""
        return circuit_from_rotations(self.reference, self._rotations_at(angles))

    def circuit_costs(self, mapping: str | None = None) -> dict[str, int]:
        return circuit_costs(self.circuit(np.full(self.n_params, 0.1)))
