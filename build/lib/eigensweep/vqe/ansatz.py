"""Common machinery of the ansätze: fermionic excitation products and Pauli-rotation circuits.

Every ansatz offers ``n_params``, ``initial_params()``, ``energy(theta)``,
``energy_and_gradient(theta)``, ``state(theta)``, ``operator_list()``,
``pauli_rotations(theta, mapping)``, ``circuit(theta, mapping)`` and
``circuit_costs(mapping)``.

Fermionic ansätze (:class:`FermionicAnsatz`) are products of excitation gates
``exp(phi_k G_k)``, ``G_k = T_k - T_k^dagger``, emulated exactly in determinant space
(:mod:`eigensweep.vqe.detspace`) with adjoint gradients (Jones & Gacon, arXiv:2009.02823).

Qubit mapping of a generator: the mapped ``G`` (Jordan-Wigner, Bravyi-Kitaev or parity,
computed here without OpenFermion, :func:`generator_paulis`) is ``i sum_j c_j P_j`` with real
``c_j``; the strings of one single or double
excitation commute pairwise (checked), so ``exp(phi G) = prod_j exp(-i (-2 phi c_j)/2 P_j)``
exactly: rotation angle ``-2 phi c_j``.

``circuit`` / ``circuit_costs`` compile with eigensweep's one Pauli-rotation compiler,
:func:`eigensweep.circuit.circuit_from_rotations` (scheme and references there), which the
exported device circuits use too.
"""

from __future__ import annotations

from collections.abc import Sequence
from dataclasses import dataclass
from functools import lru_cache
from typing import TYPE_CHECKING

import numpy as np

from ..circuit import Circuit, PauliRotation, circuit_costs, circuit_from_rotations
from .detspace import (
    DetSpace,
    ExcitationGate,
    FermionTerm,
    GateSequence,
    qubit_indices,
    to_qubit_state,
)
from .methods import MAPPINGS, check_mapping

if TYPE_CHECKING:
    from ..qubit.pauli import PauliSum

__all__ = [
    "MAPPINGS",
    "Excitation",
    "FermionicAnsatz",
    "PauliGate",
    "PauliRotationAnsatz",
    "check_mapping",
    "circuit_from_meta",
    "encoded_qubit_state",
    "encoding_matrices",
    "generator_paulis",
    "pauli_label",
    "reference_bits",
    "rotations_from_meta",
]


_STATEVECTOR = None


def _sv():
    """:mod:`eigensweep.qubit.statevector`, imported on first use (keeps this module light)."""
    global _STATEVECTOR
    if _STATEVECTOR is None:
        from ..qubit import statevector

        _STATEVECTOR = statevector
    return _STATEVECTOR


def pauli_label(x: np.ndarray, z: np.ndarray) -> str:
    """Letter string (character ``k`` = qubit ``k``) of the Pauli string ``(x, z)``."""
    return "".join("IXZY"[int(a) + 2 * int(b)] for a, b in zip(x, z, strict=True))


# ---------------------------------------------------------------------------- mapped generators
def _gf2_inverse(mat: np.ndarray) -> np.ndarray:
    """Inverse of a square invertible 0/1 matrix over GF(2) (Gauss-Jordan)."""
    n = mat.shape[0]
    aug = np.concatenate([mat.astype(bool), np.eye(n, dtype=bool)], axis=1)
    for col in range(n):
        piv = np.flatnonzero(aug[col:, col])
        if piv.size == 0:
            raise ValueError("singular GF(2) matrix")
        p = col + int(piv[0])
        if p != col:
            aug[[col, p]] = aug[[p, col]]
        rows = np.flatnonzero(aug[:, col])
        rows = rows[rows != col]
        aug[rows] ^= aug[col]
    return aug[:, n:].astype(np.uint8)


@lru_cache(maxsize=64)
def encoding_matrices(mapping: str, n_qubits: int) -> tuple[np.ndarray, np.ndarray] | None:
    """``(A, A^{-T})`` of the linear encoding ``b = A n (mod 2)``; ``None`` for Jordan-Wigner.

    ``A`` is :func:`eigensweep.qubit.mapping.encoding_matrix` (the single definition of the
    Bravyi-Kitaev and parity encodings in eigensweep, imported only for those two).
    """
    check_mapping(mapping)
    if mapping == "jordan_wigner":
        return None
    from ..qubit.mapping import encoding_matrix

    a = np.asarray(encoding_matrix(int(n_qubits), mapping), dtype=np.uint8) & 1
    return a, _gf2_inverse(a).T.copy()


def _jw_ladder(orbital: int, creation: bool) -> list[tuple[int, int, complex]]:
    """JW image of ``a^dagger_p`` / ``a_p`` as ``[(xmask, zmask, c)]`` meaning ``c X^x Z^z``.

    ``a_p = Z_0 ... Z_{p-1} (X_p + i Y_p)/2`` and ``Y = i X Z`` give
    ``a_p = (X_p Z_{<p} - X_p Z_{<=p})/2`` and ``a^dagger_p = (X_p Z_{<p} + X_p Z_{<=p})/2``.
    Bit ``k`` of a mask is qubit ``k``.
    """
    below = (1 << orbital) - 1
    bit = 1 << orbital
    return [(bit, below, 0.5), (bit, below | bit, 0.5 if creation else -0.5)]


def _times(
    left: dict[tuple[int, int], complex], right: list[tuple[int, int, complex]]
) -> dict[tuple[int, int], complex]:
    """Product of two operators in the unphased form ``sum c X^x Z^z``.

    ``X^x1 Z^z1 X^x2 Z^z2 = (-1)^{|z1 & x2|} X^{x1 ^ x2} Z^{z1 ^ z2}``.
    """
    out: dict[tuple[int, int], complex] = {}
    for (x1, z1), c1 in left.items():
        for x2, z2, c2 in right:
            key = (x1 ^ x2, z1 ^ z2)
            sign = -1.0 if (z1 & x2).bit_count() & 1 else 1.0
            out[key] = out.get(key, 0.0) + sign * c1 * c2
    return out


@lru_cache(maxsize=65536)
def generator_paulis(
    term: FermionTerm, mapping: str, n_qubits: int
) -> tuple[tuple[np.ndarray, np.ndarray, float], ...]:
    """Pauli decomposition ``G = T - T^dagger = i sum_j c_j P_j`` as ``((x, z, c_j), ...)``.

    ``T`` (operator tuple ``((orbital, 1 = creation), ...)``, leftmost operator first) is
    multiplied out in the Jordan-Wigner form (:func:`_jw_ladder`); for Bravyi-Kitaev and parity
    every string is carried through the encoding's CNOT network,
    ``X^x Z^z -> X^{A x} Z^{A^{-T} z}`` (:func:`encoding_matrices`, Seeley, Richard, Love,
    J. Chem. Phys. 137, 224109 (2012)). Strings are returned in the order of their sparse
    ``((qubit, letter), ...)`` keys, identity terms (global phases) are dropped, and the tests
    compare the result with OpenFermion's transforms.

    Raises ``ValueError`` if the image is not anti-Hermitian or its strings do not commute
    (then the product form ``prod_j exp(phi c_j i P_j)`` would be inexact).
    """
    check_mapping(mapping)
    n = int(n_qubits)
    op: dict[tuple[int, int], complex] = {(0, 0): 1.0}
    for orbital, action in term:
        if not 0 <= int(orbital) < n:
            raise ValueError(f"spin orbital {orbital} of {term} outside {n} qubits")
        op = _times(op, _jw_ladder(int(orbital), bool(action)))
    gen: dict[tuple[int, int], complex] = {}
    for (x, z), c in op.items():
        # (c X^x Z^z)^dagger = conj(c) Z^z X^x = conj(c) (-1)^{|x & z|} X^x Z^z
        adj = np.conj(c) * (-1.0 if (x & z).bit_count() & 1 else 1.0)
        gen[(x, z)] = gen.get((x, z), 0.0) + c - adj
    mats = encoding_matrices(mapping, n)
    rows = []
    for (xm, zm), c in gen.items():
        if abs(c) < 1e-14 or (xm == 0 and zm == 0):
            continue
        x = np.array([(xm >> k) & 1 for k in range(n)], dtype=bool)
        z = np.array([(zm >> k) & 1 for k in range(n)], dtype=bool)
        if mats is not None:
            a, a_inv_t = mats
            x = ((a.astype(np.int64) @ x) & 1).astype(bool)
            z = ((a_inv_t.astype(np.int64) @ z) & 1).astype(bool)
        # X^x Z^z = (-i)^{|x & z|} P(x, z) with the Hermitian P = i^{x.z} X^x Z^z
        coeff = complex(c) * (-1j) ** int(np.count_nonzero(x & z))
        # G = i sum c_j P_j
        cj = coeff / 1j
        if abs(cj.imag) > 1e-12:
            raise ValueError(f"mapped generator of {term} is not anti-Hermitian")
        key = tuple((int(q), "IXZY"[int(x[q]) + 2 * int(z[q])]) for q in np.flatnonzero(x | z))
        rows.append((key, x, z, float(cj.real)))
    rows.sort(key=lambda r: r[0])
    out = tuple((x, z, c) for _, x, z, c in rows)
    for a_i in range(len(out)):
        for b_i in range(a_i):
            xa, za, _ = out[a_i]
            xb, zb, _ = out[b_i]
            if np.logical_xor.reduce((xa & zb) ^ (za & xb)):
                raise ValueError(f"Pauli strings of the mapped generator {term} do not commute")
    return out


def reference_bits(occupied: Sequence[int], mapping: str, n_qubits: int) -> np.ndarray:
    """Computational-basis bits (uint8, qubit order) encoding the occupation of ``occupied``.

    For JW the bits are the occupations; for BK and parity ``b = A n (mod 2)`` with the
    encoding matrix ``A`` (:func:`encoding_matrices`).
    """
    check_mapping(mapping)
    occ = np.zeros(n_qubits, dtype=np.uint8)
    occ[list(occupied)] = 1
    mats = encoding_matrices(mapping, n_qubits)
    if mats is None:
        return occ
    return ((mats[0].astype(np.int64) @ occ.astype(np.int64)) & 1).astype(np.uint8)


def encoded_qubit_state(
    civec: np.ndarray, norb: int, nelec: tuple[int, int], mapping: str
) -> np.ndarray:
    """Statevector of a CI vector in the qubit encoding of ``mapping``.

    The Jordan-Wigner image (:func:`eigensweep.vqe.detspace.to_qubit_state`) is moved to the
    linear encoding by the CNOT network ``U|n> = |A n>``: ``psi_enc[A n] = psi_JW[n]``. This is
    the frame in which the mapped Hamiltonian, :func:`reference_bits` and
    :func:`generator_paulis` are written.
    """
    psi = to_qubit_state(civec, norb, nelec)
    n = 2 * int(norb)
    mats = encoding_matrices(mapping, n)
    if mats is None:
        return psi
    idx = qubit_indices(norb, nelec).reshape(-1)
    shifts = np.arange(n - 1, -1, -1, dtype=np.int64)  # qubit k is bit n - 1 - k
    occ = (idx[:, None] >> shifts[None, :]) & 1
    bits = (occ @ mats[0].T.astype(np.int64)) & 1
    new = bits @ (np.int64(1) << shifts)
    out = np.zeros_like(psi)
    out[new] = psi[idx]
    return out


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

    def qubit_state(self, theta: np.ndarray) -> np.ndarray:
        """Jordan-Wigner statevector (``2**n_qubits``) of the ansatz state."""
        return to_qubit_state(self.state(theta), self.space.norb, self.space.nelec)

    def energy(self, theta: np.ndarray) -> float:
        """``<psi(theta)|H|psi(theta)> + e_core`` (hartree)."""
        return self._sequence.energy(theta, self._reference)

    def energy_and_gradient(self, theta: np.ndarray) -> tuple[float, np.ndarray]:
        """Energy and its exact gradient (adjoint method)."""
        return self._sequence.energy_and_gradient(theta, self._reference)

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
        check_mapping(mapping)
        n = self.n_qubits
        phis = self._sequence.angles(theta)
        rotations: list[PauliRotation] = []
        for e, phi in zip(self.excitations, phis, strict=True):
            for x, z, c in generator_paulis(e.term, mapping, n):
                rotations.append((x.copy(), z.copy(), float(-2.0 * phi * c)))
        ref = reference_bits(self.occupied_spin_orbitals(), mapping, n)
        return ref, rotations

    def circuit(self, theta: np.ndarray, mapping: str = "jordan_wigner") -> Circuit:
        """Compiled circuit (scheme in the module docstring)."""
        ref, rots = self.pauli_rotations(theta, mapping)
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


# ---------------------------------------------------------------------------- qubit space
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
    values of a :class:`~eigensweep.qubit.pauli.PauliSum` (possibly tapered). The gradient is
    the adjoint one (Jones & Gacon, arXiv:2009.02823): with ``dU_k/da_k = -i/2 P_k U_k``,
    ``dE/da_k = Im <lambda_k|P_k|psi_k>``.
    """

    name = "pauli_rotations"

    def __init__(
        self,
        hamiltonian: PauliSum | None,
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
        self._single: list[tuple[int, str]] = []
        for g in self.gates:
            support = np.flatnonzero(g.x | g.z)
            if support.size == 1:
                q = int(support[0])
                self._single.append((q, "Y" if g.x[q] and g.z[q] else ("X" if g.x[q] else "Z")))
            else:
                self._single.append((-1, ""))
        self._tables: list[tuple[np.ndarray, np.ndarray, complex] | None] | None = None

    # bytes of precomputed multi-qubit Pauli tables allowed per ansatz
    TABLE_BUDGET = 256 * 2**20

    def _build_tables(self) -> list[tuple[np.ndarray, np.ndarray, complex] | None]:
        """``P_k psi = phase_k * sign_k * psi[perm_k]`` for the multi-qubit strings, if the
        tables fit in :attr:`TABLE_BUDGET` (one sign vector per gate, one index vector per
        distinct X part); otherwise ``None`` entries (generic kernel)."""
        n = self._n_qubits
        dim = 1 << n
        multi = [k for k, (q, _) in enumerate(self._single) if q < 0]
        weights = 1 << (n - 1 - np.arange(n, dtype=np.int64))  # qubit 0 = most significant bit
        xms = {int(weights @ self.gates[k].x) for k in multi}
        if 8 * dim * (len(multi) + len(xms)) > self.TABLE_BUDGET:
            return [None] * len(self.gates)
        idx = np.arange(dim, dtype=np.int64)
        perms = {xm: idx ^ xm for xm in xms}
        tables: list[tuple[np.ndarray, np.ndarray, complex] | None] = [None] * len(self.gates)
        for k in multi:
            g = self.gates[k]
            perm = perms[int(weights @ g.x)]
            zm = int(weights @ g.z)
            sign = 1.0 - 2.0 * (np.bitwise_count(perm & zm) & 1)
            phase = (1j) ** int(np.count_nonzero(g.x & g.z))
            tables[k] = (perm, sign, complex(phase))
        return tables

    def _table(self, k: int) -> tuple[np.ndarray, np.ndarray, complex] | None:
        if self._tables is None:
            self._tables = self._build_tables()
        return self._tables[k]

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
        """``exp(-i angle/2 P_k) psi``; single-qubit strings on a reshaped view."""
        q, letter = self._single[k]
        if q < 0:
            table = self._table(k)
            if table is None:
                g = self.gates[k]
                return _sv().apply_pauli_rotation(psi, g.x, g.z, angle)
            perm, sign, phase = table
            flipped = psi[perm]
            flipped *= sign
            out = np.cos(angle / 2.0) * psi
            out += (-1j * np.sin(angle / 2.0) * phase) * flipped
            return out
        v = psi.reshape(1 << q, 2, -1)
        c, s = np.cos(angle / 2.0), np.sin(angle / 2.0)
        out = np.empty_like(v)
        a, b = v[:, 0, :], v[:, 1, :]
        if letter == "Z":
            out[:, 0, :] = (c - 1j * s) * a
            out[:, 1, :] = (c + 1j * s) * b
        elif letter == "X":
            out[:, 0, :] = c * a - 1j * s * b
            out[:, 1, :] = c * b - 1j * s * a
        else:  # Y
            out[:, 0, :] = c * a - s * b
            out[:, 1, :] = c * b + s * a
        return out.reshape(-1)

    def _pauli(self, psi: np.ndarray, k: int) -> np.ndarray:
        """``P_k psi``."""
        q, letter = self._single[k]
        if q < 0:
            table = self._table(k)
            if table is None:
                g = self.gates[k]
                return _sv().apply_pauli(psi, g.x, g.z)
            perm, sign, phase = table
            out = psi[perm]
            out *= sign
            out *= phase
            return out
        v = psi.reshape(1 << q, 2, -1)
        out = np.empty_like(v)
        if letter == "Z":
            out[:, 0, :] = v[:, 0, :]
            out[:, 1, :] = -v[:, 1, :]
        elif letter == "X":
            out[:, 0, :] = v[:, 1, :]
            out[:, 1, :] = v[:, 0, :]
        else:
            out[:, 0, :] = -1j * v[:, 1, :]
            out[:, 1, :] = 1j * v[:, 0, :]
        return out.reshape(-1)

    def state(self, theta: np.ndarray) -> np.ndarray:
        """Complex statevector (qubit 0 = most significant bit)."""
        psi = _sv().basis_state(self.reference)
        for k, a in enumerate(self.angles(theta)):
            psi = self._rotate(psi, k, float(a))
        return psi

    qubit_state = state

    def _ham(self) -> PauliSum:
        if self.hamiltonian is None:
            raise RuntimeError("this ansatz was built without a Hamiltonian")
        return self.hamiltonian

    def energy(self, theta: np.ndarray) -> float:
        return _sv().expectation(self.state(theta), self._ham())

    def energy_and_gradient(self, theta: np.ndarray) -> tuple[float, np.ndarray]:
        """Energy and exact gradient (adjoint sweep)."""
        ham = self._ham()
        angles = self.angles(theta)
        psi = self.state(theta)
        lam = _sv().apply_pauli_sum(psi, ham)
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
        rots = [
            (g.x.copy(), g.z.copy(), float(a))
            for g, a in zip(self.gates, self.angles(theta), strict=True)
        ]
        return self.reference.copy(), rots

    def circuit(self, theta: np.ndarray, mapping: str | None = None) -> Circuit:
        ref, rots = self.pauli_rotations(theta)
        return circuit_from_rotations(ref, rots)

    def circuit_costs(self, mapping: str | None = None) -> dict[str, int]:
        return circuit_costs(self.circuit(np.full(self.n_params, 0.1)))


def rotations_from_meta(
    meta: dict, params: np.ndarray, mapping: str = "jordan_wigner"
) -> tuple[np.ndarray, list[PauliRotation]]:
    """Reference bits and Pauli rotations of a stored ansatz (``OptimizeResult.ansatz_meta``).

    Needs no integrals: fermionic operators are mapped with ``mapping``; stored Pauli
    rotations are used as they are (``mapping`` ignored).
    """
    theta = np.asarray(params, dtype=float).reshape(-1)
    ops = meta["operators"]
    if "reference_bits" in meta:
        ref = np.asarray(meta["reference_bits"], dtype=np.uint8)
        n = ref.size
    else:
        n = 2 * int(meta["norb"])
        ref = reference_bits(meta["reference_occupied_spin_orbitals"], mapping, n)
    rots: list[PauliRotation] = []
    for op in ops:
        p = int(op["param"])
        if op["kind"] == "fermion":
            phi = float(op["coeff"]) * theta[p]
            term = tuple((int(o), int(a)) for o, a in op["term"])
            for x, z, c in generator_paulis(term, check_mapping(mapping), n):
                rots.append((x.copy(), z.copy(), float(-2.0 * phi * c)))
        else:
            label = op["label"]
            x = np.array([ch in "XY" for ch in label])
            z = np.array([ch in "ZY" for ch in label])
            angle = float(op["offset"]) + (float(op["coeff"]) * theta[p] if p >= 0 else 0.0)
            rots.append((x, z, angle))
    return ref, rots


def circuit_from_meta(meta: dict, params: np.ndarray, mapping: str = "jordan_wigner") -> Circuit:
    """Circuit of a stored ansatz: native gates for ``hardware_efficient``, otherwise the
    Pauli-rotation compilation of :func:`rotations_from_meta` (module docstring)."""
    if meta.get("name") == "hardware_efficient":
        from .hardware_efficient import HardwareEfficientAnsatz

        hea = HardwareEfficientAnsatz(
            None,
            np.asarray(meta["reference_bits"], dtype=np.uint8),
            layers=int(meta["layers"]),
            rotations=str(meta["rotations"]),
        )
        return hea.circuit(params)
    ref, rots = rotations_from_meta(meta, params, mapping)
    return circuit_from_rotations(ref, rots)
