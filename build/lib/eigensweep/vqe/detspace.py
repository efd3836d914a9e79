"""Exact determinant-space emulation of number-conserving fermionic ansätze.

The state is a real CI vector over (alpha string x beta string) determinants in PySCF's string
order (:mod:`pyscf.fci.cistring`), flattened row-major (``index = ia * nb + ib``). The
Hamiltonian is applied with :func:`pyscf.fci.direct_spin1.contract_2e` after absorbing the
one-electron part once.

Excitation gates
----------------
A gate is ``U(phi) = exp(phi * G)`` with the anti-Hermitian generator ``G = T - T^dagger`` and
``T`` a product of spin-orbital creation/annihilation operators that conserves the number of
alpha and of beta electrons (``a^dagger a`` singles, ``a^dagger a^dagger a a`` doubles). ``T``
maps a determinant either to zero or to exactly one determinant (with a sign), and no
determinant is both a source of ``T`` and a source of ``T^dagger``; hence ``G`` pairs up
determinants ``(src, dst)`` with ``G|src> = s|dst>``, ``G|dst> = -s|src>``. On each pair
``G^2 = -1`` (and ``G = 0`` elsewhere) so ``G^3 = -G`` and

    exp(phi G) = 1 + sin(phi) G + (1 - cos(phi)) G^2,

i.e. a plane rotation of every pair. A gate is stored as three flat arrays (``src``, ``dst``,
``sign``) and applied in O(#connected determinants) with numpy fancy indexing.

Sign conventions
----------------
Spin orbitals are interleaved: spin orbital ``2p`` is alpha ``p`` and ``2p + 1`` is beta ``p``
(OpenFermion's ordering). Operator tuples use OpenFermion's ``((index, action), ...)`` form
with ``action = 1`` for creation. Inside one spin string, determinants are taken as
``a^dagger_{p1} a^dagger_{p2} ... |0>`` with ``p1 < p2 < ...``; PySCF's strings use the
reverse order, which differs only by the constant sign ``(-1)^(k(k-1)/2)`` for ``k``
electrons, so all number-conserving matrix elements (and ``contract_2e``) agree. A
determinant ``|A, B>`` is ``A^dagger(alpha string) B^dagger(beta string) |0>`` (all alpha
creators left of all beta creators). The Jordan-Wigner basis state of the same occupation uses
ascending interleaved order; the two differ by the permutation sign
``(-1)^#{(p in A, q in B): q < p}``. :func:`to_qubit_state` applies exactly that signed
permutation, and :meth:`DetSpace.hf_state` carries the sign so that its qubit image is ``+|HF>``.
With these conventions a determinant-space state equals, to round-off, the state obtained by
applying ``expm`` of the Jordan-Wigner-mapped generators to the Jordan-Wigner HF state.

Adjoint gradient (Jones & Gacon, arXiv:2009.02823): for ``E = <psi|H|psi>``,
``psi = U_K ... U_1 psi_0``: one forward sweep, ``lambda = H psi``, then a backward sweep that
un-applies each gate to both ``psi`` and ``lambda``; ``dE/dphi_k = 2 <lambda_k|G_k|psi_k>``.
"""

from __future__ import annotations

from collections.abc import Sequence
from dataclasses import dataclass
from math import comb

import numpy as np
from pyscf import lib
from pyscf.fci import cistring, direct_spin1

# below this CI dimension ``contract_2e`` runs single-threaded: idle OpenMP workers spinning
# next to the optimizer's BLAS threads cost far more than the parallel speed-up
SINGLE_THREAD_DIM = 40000

FermionTerm = tuple[tuple[int, int], ...]


@dataclass(frozen=True)
class ExcitationGate:
    """Index arrays of one excitation generator ``G = T - T^dagger`` on the flat CI vector.

    ``T|src[i]> = sign[i] |dst[i]>``; ``term`` is the OpenFermion-style operator tuple of ``T``.
    """

    term: FermionTerm
    src: np.ndarray
    dst: np.ndarray
    sign: np.ndarray

    @property
    def n_pairs(self) -> int:
        return int(self.src.size)


def _popcount(a: np.ndarray) -> np.ndarray:
    return np.bitwise_count(np.asarray(a, dtype=np.int64)).astype(np.int64)


def _apply_ops_to_strings(
    strings: np.ndarray, ops: Sequence[tuple[int, int]]
) -> tuple[np.ndarray, np.ndarray, np.ndarray]:
    """Apply a product of single-spin operators (rightmost first) to every string.

    Ascending in-string order convention; returns (valid mask, new strings, signs).
    """
    s = strings.astype(np.int64).copy()
    valid = np.ones(s.shape, dtype=bool)
    sign = np.ones(s.shape, dtype=np.int64)
    for orb, action in reversed(ops):
        bit = np.int64(1) << np.int64(orb)
        occ = (s & bit) != 0
        if action == 1:
            valid &= ~occ
        else:
            valid &= occ
        below = _popcount(s & (bit - 1))
        sign *= 1 - 2 * (below & 1)
        s = s ^ bit
    return valid, s, sign


class DetSpace:
    """Determinant space of ``norb`` spatial orbitals with ``nelec = (n_alpha, n_beta)``.

    Holds the string tables, PySCF link indices and (optionally) the Hamiltonian with the
    one-electron part absorbed, and applies excitation gates in place.
    """

    def __init__(
        self,
        norb: int,
        nelec: tuple[int, int],
        h1e: np.ndarray | None = None,
        eri: np.ndarray | None = None,
        e_core: float = 0.0,
    ) -> None:
        self.norb = int(norb)
        self.nelec = (int(nelec[0]), int(nelec[1]))
        na_el, nb_el = self.nelec
        if not (0 <= na_el <= self.norb and 0 <= nb_el <= self.norb):
            raise ValueError(f"nelec {self.nelec} does not fit in {self.norb} orbitals")
        self.strings_a = np.asarray(cistring.make_strings(range(self.norb), na_el), dtype=np.int64)
        self.strings_b = np.asarray(cistring.make_strings(range(self.norb), nb_el), dtype=np.int64)
        self.na = comb(self.norb, na_el)
        self.nb = comb(self.norb, nb_el)
        self.dim = self.na * self.nb
        self.e_core = float(e_core)
        self._link = (
            cistring.gen_linkstr_index_trilidx(range(self.norb), na_el),
            cistring.gen_linkstr_index_trilidx(range(self.norb), nb_el),
        )
        self._h2e: np.ndarray | None = None
        self._gate_cache: dict[FermionTerm, ExcitationGate] = {}
        self._threads: int | None = 1 if self.dim < SINGLE_THREAD_DIM else None
        if h1e is not None:
            if eri is None:
                raise ValueError("eri is required together with h1e")
            self.set_hamiltonian(h1e, eri, e_core)

    # ------------------------------------------------------------------ Hamiltonian
    def set_hamiltonian(self, h1e: np.ndarray, eri: np.ndarray, e_core: float = 0.0) -> None:
        """Absorb the one-electron integrals into the two-electron tensor (done once)."""
        h1e = np.asarray(h1e, dtype=np.float64)
        eri = np.asarray(eri, dtype=np.float64)
        if h1e.shape != (self.norb, self.norb):
            raise ValueError(f"h1e has shape {h1e.shape}, expected {(self.norb, self.norb)}")
        self._h2e = direct_spin1.absorb_h1e(h1e, eri, self.norb, self.nelec, 0.5)
        self.e_core = float(e_core)

    @property
    def has_hamiltonian(self) -> bool:
        return self._h2e is not None

    def apply_h(self, vec: np.ndarray) -> np.ndarray:
        """``H|vec>`` (electronic part, without ``e_core``) for a flat real CI vector."""
        if self._h2e is None:
            raise RuntimeError("no Hamiltonian set on this DetSpace")
        with lib.with_omp_threads(self._threads):
            out = direct_spin1.contract_2e(self._h2e, vec, self.norb, self.nelec, self._link)
        return np.asarray(out).reshape(-1)

    def energy(self, vec: np.ndarray) -> float:
        """``<vec|H|vec> + e_core`` for a normalised real CI vector."""
        return float(vec @ self.apply_h(vec)) + self.e_core

    # ------------------------------------------------------------------ states
    def occupations(self) -> tuple[np.ndarray, np.ndarray]:
        """Alpha and beta occupation strings (int bit masks) in PySCF address order."""
        return self.strings_a, self.strings_b

    def interleave_signs(self) -> np.ndarray:
        """Sign (na, nb) of each determinant relative to the interleaved JW basis state."""
        inv = np.zeros((self.na, self.nb), dtype=np.int64)
        for p in range(self.norb):
            has_p = ((self.strings_a >> p) & 1).astype(np.int64)
            below = _popcount(self.strings_b & ((1 << p) - 1))
            inv += has_p[:, None] * below[None, :]
        return 1 - 2 * (inv & 1)

    def hf_state(self) -> np.ndarray:
        """Flat CI vector of the Hartree-Fock determinant (lowest orbitals occupied).

        Carries the basis sign so that :func:`to_qubit_state` maps it to ``+|HF>`` in JW.
        """
        vec = np.zeros(self.dim)
        # address 0 in PySCF order is the string with the lowest orbitals occupied
        vec[0] = float(self.interleave_signs()[0, 0])
        return vec

    # ------------------------------------------------------------------ gates
    def gate(self, term: FermionTerm) -> ExcitationGate:
        """Index arrays for ``G = T - T^dagger`` with ``T`` the operator product ``term``.

        ``term`` must conserve the alpha and beta electron numbers and must not be
        number-operator-like (a creation and an annihilation on the same spin orbital).
        """
        term = tuple((int(o), int(a)) for o, a in term)
        n_so = 2 * self.norb
        for o, a in term:
            if not 0 <= o < n_so or a not in (0, 1):
                raise ValueError(f"bad operator {(o, a)} for {n_so} spin orbitals")
        cre = {o for o, a in term if a == 1}
        ann = {o for o, a in term if a == 0}
        if cre & ann or len(cre) + len(ann) != len(term):
            raise ValueError(f"term {term} repeats a spin orbital; not an excitation generator")
        for spin in (0, 1):
            nc = sum(1 for o, a in term if o % 2 == spin and a == 1)
            nd = sum(1 for o, a in term if o % 2 == spin and a == 0)
            if nc != nd:
                raise ValueError(f"term {term} does not conserve the spin-{spin} electron count")
        # reorder to (alpha ops)(beta ops): sign of moving alpha operators left past beta ones
        n_swaps = 0
        seen_beta = 0
        for o, _ in term:
            if o % 2 == 1:
                seen_beta += 1
            else:
                n_swaps += seen_beta
        reorder_sign = -1 if n_swaps % 2 else 1
        ops_a = [(o // 2, a) for o, a in term if o % 2 == 0]
        ops_b = [(o // 2, a) for o, a in term if o % 2 == 1]
        va, new_a, sa = _apply_ops_to_strings(self.strings_a, ops_a)
        vb, new_b, sb = _apply_ops_to_strings(self.strings_b, ops_b)
        src_a = np.nonzero(va)[0]
        src_b = np.nonzero(vb)[0]
        dst_a = (
            np.asarray(cistring.strs2addr(self.norb, self.nelec[0], new_a[src_a]), dtype=np.int64)
            if src_a.size
            else src_a
        )
        dst_b = (
            np.asarray(cistring.strs2addr(self.norb, self.nelec[1], new_b[src_b]), dtype=np.int64)
            if src_b.size
            else src_b
        )
        src = (src_a[:, None] * self.nb + src_b[None, :]).reshape(-1)
        dst = (dst_a[:, None] * self.nb + dst_b[None, :]).reshape(-1)
        sign = (reorder_sign * sa[src_a][:, None] * sb[src_b][None, :]).reshape(-1)
        return ExcitationGate(
            term=term,
            src=src.astype(np.intp),
            dst=dst.astype(np.intp),
            sign=sign.astype(np.float64),
        )

    def cached_gate(self, term: FermionTerm) -> ExcitationGate:
        """:meth:`gate` memoised per term on this space (ansätze built on it share arrays)."""
        key = tuple((int(o), int(a)) for o, a in term)
        if key not in self._gate_cache:
            self._gate_cache[key] = self.gate(key)
        return self._gate_cache[key]

    @staticmethod
    def apply_gate(gate: ExcitationGate, phi: float, vec: np.ndarray) -> None:
        """In place: ``vec <- exp(phi G) vec`` (plane rotation of each connected pair)."""
        if gate.src.size == 0:
            return
        c = np.cos(phi)
        s = np.sin(phi)
        a = vec[gate.src]
        b = vec[gate.dst]
        ss = s * gate.sign
        vec[gate.src] = c * a - ss * b
        vec[gate.dst] = c * b + ss * a

    @staticmethod
    def apply_generator(gate: ExcitationGate, vec: np.ndarray) -> np.ndarray:
        """Return ``G vec`` (new array)."""
        out = np.zeros_like(vec)
        out[gate.dst] = gate.sign * vec[gate.src]
        out[gate.src] = -gate.sign * vec[gate.dst]
        return out

    @staticmethod
    def generator_expectation(gate: ExcitationGate, bra: np.ndarray, ket: np.ndarray) -> float:
        """``<bra|G|ket>`` for real vectors."""
        if gate.src.size == 0:
            return 0.0
        return float(gate.sign @ (bra[gate.dst] * ket[gate.src] - bra[gate.src] * ket[gate.dst]))


# ---------------------------------------------------------------------------- circuits
@dataclass
class GateSequence:
    """A product of excitation gates ``U = U_K ... U_1`` (``gates[0]`` applied first).

    Gate ``k`` has angle ``coeffs[k] * theta[params[k]]``.
    """

    space: DetSpace
    gates: list[ExcitationGate]
    params: np.ndarray
    coeffs: np.ndarray
    n_params: int

    def angles(self, theta: np.ndarray) -> np.ndarray:
        theta = np.asarray(theta, dtype=np.float64).reshape(-1)
        if theta.size != self.n_params:
            raise ValueError(f"expected {self.n_params} parameters, got {theta.size}")
        if not self.gates:
            return np.zeros(0)
        return self.coeffs * theta[self.params]

    def state(self, theta: np.ndarray, reference: np.ndarray) -> np.ndarray:
        vec = np.array(reference, dtype=np.float64, copy=True)
        for g, phi in zip(self.gates, self.angles(theta), strict=True):
            DetSpace.apply_gate(g, phi, vec)
        return vec

    def energy(self, theta: np.ndarray, reference: np.ndarray) -> float:
        return self.space.energy(self.state(theta, reference))

    def energy_and_gradient(
        self, theta: np.ndarray, reference: np.ndarray
    ) -> tuple[float, np.ndarray]:
        """Energy and exact gradient by the adjoint method (one forward, one backward sweep)."""
        phis = self.angles(theta)
        psi = self.state(theta, reference)
        lam = self.space.apply_h(psi)
        energy = float(psi @ lam) + self.space.e_core
        dphi = np.zeros(len(self.gates))
        # the gathered amplitudes serve both the gradient term and the un-application of the
        # gate to psi and lambda
        for k in range(len(self.gates) - 1, -1, -1):
            g = self.gates[k]
            if g.src.size == 0:
                continue
            src, dst, sign = g.src, g.dst, g.sign
            ps, pd, ls, ld = psi[src], psi[dst], lam[src], lam[dst]
            # <lam|G|psi> = sum sign * (lam[dst] psi[src] - lam[src] psi[dst])
            dphi[k] = 2.0 * float(sign @ (ld * ps - ls * pd))
            if k:
                c = np.cos(phis[k])
                ss = -np.sin(phis[k]) * sign
                psi[src] = c * ps - ss * pd
                psi[dst] = c * pd + ss * ps
                lam[src] = c * ls - ss * ld
                lam[dst] = c * ld + ss * ls
        grad = np.bincount(self.params, weights=self.coeffs * dphi, minlength=self.n_params)
        return energy, grad


# ---------------------------------------------------------------------------- qubit maps
def _check_civec(civec: np.ndarray, space: DetSpace) -> np.ndarray:
    civec = np.asarray(civec)
    if civec.size != space.dim:
        raise ValueError(f"CI vector has {civec.size} entries, expected {space.dim}")
    return civec.reshape(space.na, space.nb)


def qubit_indices(norb: int, nelec: tuple[int, int]) -> np.ndarray:
    """Flat JW basis index (qubit 0 = most significant bit) of each determinant, (na, nb)."""
    space = DetSpace(norb, nelec)
    n_q = 2 * norb
    ia = np.zeros(space.na, dtype=np.int64)
    ib = np.zeros(space.nb, dtype=np.int64)
    for p in range(norb):
        ia += ((space.strings_a >> p) & 1) << (n_q - 1 - 2 * p)
        ib += ((space.strings_b >> p) & 1) << (n_q - 2 - 2 * p)
    return ia[:, None] + ib[None, :]


def to_qubit_state(civec: np.ndarray, norb: int, nelec: tuple[int, int]) -> np.ndarray:
    """Map a CI vector to the ``2**(2 norb)`` Jordan-Wigner statevector (complex).

    Qubit ``k`` is spin orbital ``k`` (interleaved, even = alpha), qubit 0 is the most
    significant bit (OpenFermion ``get_sparse_operator`` order); each amplitude gets the
    interleaving sign documented in the module docstring.
    """
    space = DetSpace(norb, nelec)
    c = _check_civec(civec, space)
    out = np.zeros(1 << (2 * norb), dtype=np.complex128)
    out[qubit_indices(norb, nelec).reshape(-1)] = (c * space.interleave_signs()).reshape(-1)
    return out


def from_qubit_state(state: np.ndarray, norb: int, nelec: tuple[int, int]) -> np.ndarray:
    """Inverse of :func:`to_qubit_state` restricted to the ``nelec`` sector (flat CI vector)."""
    space = DetSpace(norb, nelec)
    state = np.asarray(state)
    if state.size != 1 << (2 * norb):
        raise ValueError(f"statevector has {state.size} entries, expected {1 << (2 * norb)}")
    amp = state[qubit_indices(norb, nelec).reshape(-1)].reshape(space.na, space.nb)
    return (amp * space.interleave_signs()).reshape(-1)


def fci_ground_state(
    h1e: np.ndarray,
    eri: np.ndarray,
    e_core: float,
    norb: int,
    nelec: tuple[int, int],
) -> tuple[float, np.ndarray]:
    """Exact lowest energy (with ``e_core``) and flat CI vector of the ``nelec`` sector (PySCF)."""
    solver = direct_spin1.FCI()
    solver.conv_tol = 1e-12
    # a small P-space preconditioner: the default (400) spends seconds in dense eigh calls on
    # few-core machines for no gain at these sizes
    solver.pspace_size = 100
    e, c = solver.kernel(
        np.asarray(h1e, dtype=np.float64),
        np.asarray(eri, dtype=np.float64),
        norb,
        nelec,
        ecore=float(e_core),
    )
    return float(e), np.asarray(c).reshape(-1)
