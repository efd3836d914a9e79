"""Fermionic ansätze: products of excitation gates on the Hartree-Fock determinant.

A fermionic ansatz (:class:`FermionicAnsatz`; UCCSD, k-UpCCGSD and fermionic ADAPT build on it)
is a product of excitation gates ``exp(phi_k G_k)``, ``G_k = T_k - T_k^dagger``, emulated exactly
in determinant space (:mod:`eigensweep.vqe.detspace`) with adjoint gradients (Jones & Gacon,
arXiv:2009.02823).

Every ansatz offers ``n_params``, ``initial_params()``, ``energy(theta)``,
``energy_and_gradient(theta)``, ``state(theta)``, ``operator_list()``, ``meta()``,
``pauli_rotations(theta, mapping)``, ``circuit(theta, mapping)`` and
``circuit_costs(mapping)`` (qubit-space ansätze: :mod:`eigensweep.vqe.pauli_rotation`).

Qubit form of a generator: the mapped ``G`` (Jordan-Wigner, Bravyi-Kitaev or parity,
:func:`eigensweep.qubit.mapping.generator_paulis`) is ``i sum_j c_j P_j`` with real ``c_j``; the
strings of one single or double excitation commute pairwise (checked), so
``exp(phi G) = prod_j exp(-i (-2 phi c_j)/2 P_j)`` exactly: rotation angle ``-2 phi c_j``.
``circuit`` / ``circuit_costs`` compile these rotations with eigensweep's one Pauli-rotation
compiler, :func:`eigensweep.circuit.circuit_from_rotations`, which the exported device
circuits use too.
"""

from __future__ import annotations

from collections.abc import Callable, Sequence
from dataclasses import dataclass

import numpy as np

from ..circuit import Circuit, PauliRotation, circuit_costs, circuit_from_rotations
from ..qubit.mapping import check_mapping, encode_occupations, generator_paulis
from .detspace import DetSpace, ExcitationGate, FermionTerm, GateSequence, to_qubit_state
from .parameter_shift import EXCITATION_RULE, ShiftUnit

__all__ = [
    "Excitation",
    "FermionicAnsatz",
    "canonical_term",
    "occ_virt",
    "sd_excitation_terms",
    "spin_flip",
    "tie_spin_complements",
]


@dataclass(frozen=True)
class Excitation:
    """One gate ``exp(coeff * theta[param] * (T - T^dagger))`` with ``T`` the operator ``term``."""

    term: FermionTerm
    param: int
    coeff: float = 1.0


def canonical_term(term: FermionTerm) -> tuple[FermionTerm, int]:
    """Creators ascending, then annihilators descending; return (sorted term, sign).

    ``T_term = sign * T_sorted`` as operators (the operators act on distinct spin orbitals,
    so every transposition anticommutes).
    """
    cre = sorted(o for o, a in term if a == 1)
    ann = sorted((o for o, a in term if a == 0), reverse=True)
    target = [(o, 1) for o in cre] + [(o, 0) for o in ann]
    rank = {op: i for i, op in enumerate(target)}
    idx = [rank[(int(o), int(a))] for o, a in term]
    inversions = sum(1 for i in range(len(idx)) for j in range(i + 1, len(idx)) if idx[i] > idx[j])
    return tuple(target), (-1 if inversions % 2 else 1)


def spin_flip(term: FermionTerm) -> FermionTerm:
    """Exchange alpha and beta (spin orbital ``2p <-> 2p + 1``) in every operator."""
    return tuple((o ^ 1, a) for o, a in term)


def tie_spin_complements(terms: Sequence[FermionTerm]) -> tuple[list[Excitation], int]:
    """Give spin-complementary excitations (alpha <-> beta exchanged) one shared parameter.

    The orbit generator is ``T_c + flip(T_c)`` (``c`` the canonical form of the first member
    met); the spin flip of a spin-conserving excitation moves an even number of beta
    operators, so no extra sign arises and each gate's coefficient is the sign relating its
    listed operator order to the orbit's. Returns (excitations, number of parameters);
    parameters are numbered in order of first appearance.
    """
    params: dict[FermionTerm, int] = {}
    out = []
    for t in terms:
        c, s = canonical_term(t)
        fc, fs = canonical_term(spin_flip(c))
        if fc in params and fc != c:
            # T_flip(c) = fs T_fc  =>  flip(T_fc) = fs T_c = fs * s * T_t
            out.append(Excitation(t, params[fc], float(fs * s)))
        else:
            if c not in params:
                params[c] = len(params)
            out.append(Excitation(t, params[c], float(s)))
    return out, len(params)


class FermionicAnsatz:
    """Product of excitation gates on the Hartree-Fock determinant, emulated in det space.

    ``excitations[0]`` is applied first. Parameter ``theta[e.param]`` multiplied by
    ``e.coeff`` is the angle of excitation ``e``.
    """

    name = "fermionic"

    def __init__(self, space: DetSpace, excitations: Sequence[Excitation], n_params: int) -> None:
        self.space = space
        self.excitations = list(excitations)
        self._n_params = int(n_params)
        for e in self.excitations:
            if not 0 <= e.param < self._n_params:
                raise ValueError(f"excitation parameter index {e.param} out of range")
        self._sequence = GateSequence(
            space=space,
            gates=[self._gate(e.term) for e in self.excitations],
            params=np.array([e.param for e in self.excitations], dtype=np.intp),
            coeffs=np.array([e.coeff for e in self.excitations], dtype=np.float64),
            n_params=self._n_params,
        )
        self._reference = space.hf_state()

    def _gate(self, term: FermionTerm) -> ExcitationGate:
        return self.space.cached_gate(term)

    # ------------------------------------------------------------------ sizes
    @property
    def n_params(self) -> int:
        return self._n_params

    @property
    def n_qubits(self) -> int:
        return 2 * self.space.norb

    @property
    def norb(self) -> int:
        return self.space.norb

    @property
    def nelec(self) -> tuple[int, int]:
        return self.space.nelec

    def occupied_spin_orbitals(self) -> list[int]:
        """Spin orbitals occupied in the HF reference (interleaved numbering)."""
        na, nb = self.space.nelec
        return sorted([2 * i for i in range(na)] + [2 * i + 1 for i in range(nb)])

    def initial_params(self) -> np.ndarray:
        """Zeros: the Hartree-Fock state."""
        return np.zeros(self.n_params)

    # ------------------------------------------------------------------ emulation
    def state(self, theta: np.ndarray) -> np.ndarray:
        """Flat real CI vector (PySCF string order) of the ansatz state."""
        return self._sequence.state(theta, self._reference)

    def angles(self, theta: np.ndarray) -> np.ndarray:
        """Excitation angles ``phi_k = coeff_k theta[param_k]``, one per gate."""
        return self._sequence.angles(theta)

    def state_at_angles(self, angles: np.ndarray) -> np.ndarray:
        """CI vector with excitation ``k`` at angle ``angles[k]`` (parameter shifts)."""
        return self._sequence.state_at_angles(angles, self._reference)

    def state_energy(self, psi: np.ndarray) -> float:
        """Exact energy of a CI vector of this determinant space (``e_core`` included)."""
        return self.space.energy(psi)

    def shift_units(self) -> list[ShiftUnit]:
        """One four-term unit per excitation, variable = its angle ``phi``
        (:mod:`eigensweep.vqe.parameter_shift`)."""
        return [
            ShiftUnit((k,), (1.0,), int(e.param), float(e.coeff), EXCITATION_RULE)
            for k, e in enumerate(self.excitations)
            if e.coeff != 0.0
        ]

    def qubit_state(self, theta: np.ndarray) -> np.ndarray:
        """Jordan-Wigner statevector (``2**n_qubits``) of the ansatz state."""
        return to_qubit_state(self.state(theta), self.space.norb, self.space.nelec)

    def energy(self, theta: np.ndarray) -> float:
        """``<psi(theta)|H|psi(theta)> + e_core`` (hartree)."""
        return self._sequence.energy(theta, self._reference)

    def energy_and_gradient(self, theta: np.ndarray) -> tuple[float, np.ndarray]:
        """Energy and its exact gradient (adjoint method)."""
        return self._sequence.energy_and_gradient(theta, self._reference)

    def expectation_and_gradient(
        self,
        theta: np.ndarray,
        apply: Callable[[np.ndarray], np.ndarray],
        reference: np.ndarray | None = None,
    ) -> tuple[float, np.ndarray]:
        """``<psi|A|psi> + e_core`` and its adjoint gradient for a real symmetric operator
        ``A`` (``apply``: ``psi -> A psi``), the gates acting on ``reference`` (default HF):
        the penalised objectives of the excited-state methods (:mod:`eigensweep.vqe.excited`)."""
        ref = self._reference if reference is None else reference
        return self._sequence.energy_and_gradient(theta, ref, apply)

    def state_from(self, theta: np.ndarray, reference: np.ndarray) -> np.ndarray:
        """The ansatz's gates at ``theta`` applied to another CI vector ``reference``."""
        return self._sequence.state(theta, reference)

    # ------------------------------------------------------------------ description
    def operator_list(self) -> list[dict]:
        """Generators in application order: ``T`` as ``[[spin_orbital, 1 = creation], ...]``
        (``G = T - T^dagger``), parameter index and coefficient; JSON-able."""
        return [
            {
                "kind": "fermion",
                "term": [[int(o), int(a)] for o, a in e.term],
                "param": int(e.param),
                "coeff": float(e.coeff),
            }
            for e in self.excitations
        ]

    def meta(self) -> dict:
        """JSON-able description for stage files and export."""
        return {
            "name": self.name,
            "n_params": self.n_params,
            "n_qubits": self.n_qubits,
            "norb": self.space.norb,
            "nelec": list(self.space.nelec),
            "reference_occupied_spin_orbitals": self.occupied_spin_orbitals(),
            "operators": self.operator_list(),
        }

    def pauli_rotations(
        self, theta: np.ndarray, mapping: str = "jordan_wigner"
    ) -> tuple[np.ndarray, list[PauliRotation]]:
        """Reference bits and Pauli rotations with state ``= prod_k exp(-i a_k/2 P_k)|ref>``."""
        return self._rotations_at(self._sequence.angles(theta), mapping)

    def _rotations_at(
        self, phis: np.ndarray, mapping: str
    ) -> tuple[np.ndarray, list[PauliRotation]]:
        check_mapping(mapping)
        n = self.n_qubits
        rotations: list[PauliRotation] = []
        for e, phi in zip(self.excitations, np.asarray(phis, dtype=float), strict=True):
            for x, z, c in generator_paulis(e.term, mapping, n):
                rotations.append((x.copy(), z.copy(), float(-2.0 * phi * c)))
        occ = np.zeros(n, dtype=np.uint8)
        occ[self.occupied_spin_orbitals()] = 1
        return encode_occupations(occ, mapping), rotations

    def circuit(self, theta: np.ndarray, mapping: str = "jordan_wigner") -> Circuit:
        """Compiled circuit (scheme in the module docstring)."""
        return self.circuit_at_angles(self._sequence.angles(theta), mapping)

    def circuit_at_angles(self, phis: np.ndarray, mapping: str = "jordan_wigner") -> Circuit:
        """Compiled circuit with excitation ``k`` at angle ``phis[k]`` (the circuit of
        :meth:`state_at_angles` in the qubit encoding ``mapping``)."""
        ref, rots = self._rotations_at(phis, mapping)
        return circuit_from_rotations(ref, rots)

    def circuit_costs(self, mapping: str = "jordan_wigner") -> dict[str, int]:
        """CNOT count, depth and qubit count of :meth:`circuit` (at generic, nonzero angles)."""
        return circuit_costs(self.circuit(np.full(self.n_params, 0.1), mapping))


def occ_virt(nelec: tuple[int, int], norb: int) -> tuple[list[list[int]], list[list[int]]]:
    """Occupied and virtual spin orbitals per spin (``[alpha, beta]``) of the HF reference."""
    occ = [[2 * i + s for i in range(nelec[s])] for s in (0, 1)]
    virt = [[2 * a + s for a in range(nelec[s], norb)] for s in (0, 1)]
    return occ, virt


def sd_excitation_terms(
    norb: int, nelec: tuple[int, int]
) -> tuple[list[FermionTerm], list[FermionTerm]]:
    """Spin-conserving occupied->virtual (doubles, singles) terms of the HF reference.

    Doubles: alpha-alpha, then beta-beta (``a^+_a a^+_b a_j a_i`` with ``i < j``, ``a < b``),
    then alpha-beta (``a^+_{a alpha} a^+_{b beta} a_{j beta} a_{i alpha}``). Singles: alpha
    then beta (``a^+_a a_i``).
    """
    occ, virt = occ_virt(nelec, norb)
    doubles: list[FermionTerm] = []
    for s in (0, 1):
        o, v = occ[s], virt[s]
        for ii, i in enumerate(o):
            for j in o[ii + 1 :]:
                for aa, a in enumerate(v):
                    for b in v[aa + 1 :]:
                        doubles.append(((a, 1), (b, 1), (j, 0), (i, 0)))
    for i in occ[0]:
        for a in virt[0]:
            for j in occ[1]:
                for b in virt[1]:
                    doubles.append(((a, 1), (b, 1), (j, 0), (i, 0)))
    singles: list[FermionTerm] = []
    for s in (0, 1):
        for i in occ[s]:
            for a in virt[s]:
                singles.append(((a, 1), (i, 0)))
    return doubles, singles
