"""Common machinery of the ansätze: fermionic excitation products and Pauli-rotation circuits.

Every ansatz offers ``n_params``, ``initial_params()``, ``energy(theta)``,
``energy_and_gradient(theta)``, ``state(theta)``, ``operator_list()``,
``pauli_rotations(theta, mapping)``, ``circuit(theta, mapping)`` and
``circuit_costs(mapping)``.

Fermionic ansätze (:class:`FermionicAnsatz`) are products of excitation gates
``exp(phi_k G_k)``, ``G_k = T_k - T_k^dagger``, emulated exactly in determinant space
(:mod:`eigensweep.vqe.detspace`) with adjoint gradients (Jones & Gacon, arXiv:2009.02823).

Qubit mapping of a generator: the mapped ``G`` (Jordan-Wigner, Bravyi-Kitaev or parity, via
OpenFermion) is ``i sum_j c_j P_j`` with real ``c_j``; the strings of one single or double
excitation commute pairwise (checked), so ``exp(phi G) = prod_j exp(-i (-2 phi c_j)/2 P_j)``
exactly: rotation angle ``-2 phi c_j``.

Compilation scheme used for ``circuit`` / ``circuit_costs`` (standard Pauli-exponential
"CNOT staircase"): the reference state is prepared with ``x`` gates; a rotation
``exp(-i a/2 P)`` of weight 1 is a single ``rx``/``ry``/``rz``; of weight ``w > 1`` it is a
basis change on each qubit of the support (``h`` for X, ``rx(pi/2)`` for Y), a CNOT ladder
``cx(q1,q2) cx(q2,q3) ... cx(q_{w-1},q_w)`` over the support in ascending qubit order, ``rz(a)``
on ``q_w``, the reversed ladder and the inverse basis change: ``2(w - 1)`` CNOTs. Depth is
that of the resulting gate list with every gate counted as one time step and ASAP scheduling
(:attr:`eigensweep.circuit.Circuit.depth`); no gate cancellation or reordering is attempted.
"""

from __future__ import annotations

from collections.abc import Sequence
from dataclasses import dataclass
from functools import lru_cache

import numpy as np
import openfermion as of

from ..circuit import Circuit
from ..errors import ConfigError
from ..qubit import statevector as sv
from ..qubit.pauli import PauliSum
from .detspace import DetSpace, ExcitationGate, FermionTerm, GateSequence, to_qubit_state

MAPPINGS = ("jordan_wigner", "bravyi_kitaev", "parity")

PauliRotation = tuple[np.ndarray, np.ndarray, float]


def check_mapping(mapping: str) -> str:
    """Return ``mapping`` if known, else raise :class:`ConfigError`."""
    if mapping not in MAPPINGS:
        raise ConfigError(f"mapping: unknown value {mapping!r}; allowed: {', '.join(MAPPINGS)}")
    return mapping


def map_fermion_operator(op: of.FermionOperator, mapping: str, n_qubits: int) -> of.QubitOperator:
    """Map a FermionOperator to qubits with OpenFermion (parity via ``binary_code_transform``)."""
    check_mapping(mapping)
    if mapping == "jordan_wigner":
        return of.jordan_wigner(op)
    if mapping == "bravyi_kitaev":
        return of.bravyi_kitaev(op, n_qubits)
    return of.binary_code_transform(op, of.parity_code(n_qubits))


def _pauli_rows(term: tuple[tuple[int, str], ...], n_qubits: int) -> tuple[np.ndarray, np.ndarray]:
    x = np.zeros(n_qubits, dtype=bool)
    z = np.zeros(n_qubits, dtype=bool)
    for q, letter in term:
        x[q] = letter in ("X", "Y")
        z[q] = letter in ("Z", "Y")
    return x, z


def pauli_label(x: np.ndarray, z: np.ndarray) -> str:
    """Letter string (character ``k`` = qubit ``k``) of the Pauli string ``(x, z)``."""
    return "".join("IXZY"[int(a) + 2 * int(b)] for a, b in zip(x, z, strict=True))


@lru_cache(maxsize=65536)
def generator_paulis(
    term: FermionTerm, mapping: str, n_qubits: int
) -> tuple[tuple[np.ndarray, np.ndarray, float], ...]:
    """Pauli decomposition ``G = T - T^dagger = i sum_j c_j P_j`` as ``((x, z, c_j), ...)``.

    Raises ``ValueError`` if the strings do not commute (then the product form would be
    inexact). Identity terms (global phases) are dropped.
    """
    fop = of.FermionOperator(term, 1.0)
    gen = fop - of.hermitian_conjugated(fop)
    qop = map_fermion_operator(gen, mapping, n_qubits)
    qop.compress(1e-14)
    out = []
    for pterm, coeff in sorted(qop.terms.items()):
        c = complex(coeff)
        if abs(c.real) > 1e-12:
            raise ValueError(f"mapped generator of {term} is not anti-Hermitian")
        if not pterm:
            continue
        x, z = _pauli_rows(pterm, n_qubits)
        out.append((x, z, float(c.imag)))
    for a in range(len(out)):
        for b in range(a):
            xa, za, _ = out[a]
            xb, zb, _ = out[b]
            if np.logical_xor.reduce((xa & zb) ^ (za & xb)):
                raise ValueError(f"Pauli strings of the mapped generator {term} do not commute")
    return tuple(out)


def _gf2_solve(mat: np.ndarray, rhs: np.ndarray) -> np.ndarray:
    """Solve ``mat @ x = rhs`` over GF(2) for a square invertible 0/1 matrix."""
    a = np.concatenate([mat.astype(np.uint8) % 2, (rhs.astype(np.uint8) % 2)[:, None]], axis=1)
    n = mat.shape[0]
    row = 0
    for col in range(n):
        piv = np.nonzero(a[row:, col])[0]
        if piv.size == 0:
            raise ValueError("singular GF(2) system")
        p = row + piv[0]
        if p != row:
            a[[row, p]] = a[[p, row]]
        for r in range(n):
            if r != row and a[r, col]:
                a[r] ^= a[row]
        row += 1
    return a[:, -1].copy()


@lru_cache(maxsize=256)
def _occupation_sets(mapping: str, n_qubits: int) -> np.ndarray:
    """``M[p, k] = 1`` if the mapped number operator of mode ``p`` contains ``Z_k``."""
    mat = np.zeros((n_qubits, n_qubits), dtype=np.uint8)
    for p in range(n_qubits):
        qop = map_fermion_operator(of.FermionOperator(((p, 1), (p, 0))), mapping, n_qubits)
        zterms = [t for t, c in qop.terms.items() if t and abs(c) > 1e-12]
        if len(zterms) != 1 or any(letter != "Z" for _, letter in zterms[0]):
            raise ValueError(f"number operator of mode {p} is not a single Z string in {mapping}")
        for q, _ in zterms[0]:
            mat[p, q] = 1
    return mat


def reference_bits(occupied: Sequence[int], mapping: str, n_qubits: int) -> np.ndarray:
    """Computational-basis bits (uint8, qubit order) encoding the occupation of ``occupied``.

    For JW the bits are the occupations; for BK and parity the encoding is found from the
    mapped number operators ``n_p = (1 - prod_{k in S_p} Z_k)/2`` by solving
    ``occ_p = sum_{k in S_p} b_k (mod 2)``.
    """
    check_mapping(mapping)
    occ = np.zeros(n_qubits, dtype=np.uint8)
    occ[list(occupied)] = 1
    if mapping == "jordan_wigner":
        return occ
    return _gf2_solve(_occupation_sets(mapping, n_qubits), occ).astype(np.uint8)


def append_pauli_rotation(circ: Circuit, x: np.ndarray, z: np.ndarray, angle: float) -> None:
    """Append ``exp(-i angle/2 P(x, z))`` with the CNOT-staircase scheme (module docstring)."""
    support = [int(q) for q in np.nonzero(x | z)[0]]
    if not support:
        return
    if len(support) == 1:
        q = support[0]
        name = "rz" if not x[q] else ("ry" if z[q] else "rx")
        circ.append(name, (q,), (angle,))
        return
    for q in support:
        if x[q] and z[q]:
            circ.append("rx", (q,), (np.pi / 2,))
        elif x[q]:
            circ.append("h", (q,))
    for a, b in zip(support[:-1], support[1:], strict=True):
        circ.append("cx", (a, b))
    circ.append("rz", (support[-1],), (angle,))
    for a, b in reversed(list(zip(support[:-1], support[1:], strict=True))):
        circ.append("cx", (a, b))
    for q in support:
        if x[q] and z[q]:
            circ.append("rx", (q,), (-np.pi / 2,))
        elif x[q]:
            circ.append("h", (q,))


def rotations_to_circuit(
    ref_bits: np.ndarray, rotations: Sequence[PauliRotation], n_qubits: int
) -> Circuit:
    """Circuit preparing ``prod_k exp(-i angle_k/2 P_k)|ref>`` (first rotation applied first)."""
    circ = Circuit(n_qubits)
    for q in np.nonzero(np.asarray(ref_bits))[0]:
        circ.append("x", (int(q),))
    for x, z, angle in rotations:
        append_pauli_rotation(circ, x, z, float(angle))
    return circ


def costs_of(circ: Circuit) -> dict[str, int]:
    """``{"cnot_count", "depth", "n_qubits"}`` of a compiled circuit."""
    return {"cnot_count": circ.cnot_count, "depth": circ.depth, "n_qubits": circ.n_qubits}


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
        return rotations_to_circuit(ref, rots, self.n_qubits)

    def circuit_costs(self, mapping: str = "jordan_wigner") -> dict[str, int]:
        """CNOT count, depth and qubit count of :meth:`circuit` (at generic, nonzero angles)."""
        return costs_of(self.circuit(np.full(self.n_params, 0.1), mapping))


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
            g = self.gates[k]
            return sv.apply_pauli_rotation(psi, g.x, g.z, angle)
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
            g = self.gates[k]
            return sv.apply_pauli(psi, g.x, g.z)
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
        psi = sv.basis_state(self.reference)
        for k, a in enumerate(self.angles(theta)):
            psi = self._rotate(psi, k, float(a))
        return psi

    qubit_state = state

    def _ham(self) -> PauliSum:
        if self.hamiltonian is None:
            raise RuntimeError("this ansatz was built without a Hamiltonian")
        return self.hamiltonian

    def energy(self, theta: np.ndarray) -> float:
        return sv.expectation(self.state(theta), self._ham())

    def energy_and_gradient(self, theta: np.ndarray) -> tuple[float, np.ndarray]:
        """Energy and exact gradient (adjoint sweep)."""
        ham = self._ham()
        angles = self.angles(theta)
        psi = self.state(theta)
        lam = sv.apply_pauli_sum(psi, ham)
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
        return rotations_to_circuit(ref, rots, self.n_qubits)

    def circuit_costs(self, mapping: str | None = None) -> dict[str, int]:
        return costs_of(self.circuit(np.full(self.n_params, 0.1)))


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
    return rotations_to_circuit(ref, rots, ref.size)
