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

i.e. a plane rotation of every pair.

Factored gates
--------------
Written as ``T = sign * T_alpha T_beta`` (alpha operators moved left of beta ones), ``T``
acts on the CI matrix ``C[ia, ib]`` through one map of alpha strings and one of beta strings
(``T_alpha|src_a[i]> = sign_a[i] |dst_a[i]>``, likewise beta): the pairs of an alpha-beta
double are the outer product of the two maps, ``(src_a[i], src_b[j]) <-> (dst_a[i],
dst_b[j])``, and an alpha-only (beta-only) gate rotates whole rows (columns). A gate stores
only references to its string maps, which are memoised per :class:`DetSpace` and shared by all
gates with the same one-spin part (the 1,296 alpha-beta doubles of a (12e,12o) UCCSD use 36
alpha and 36 beta maps), so gate memory grows with the number of strings, not with
determinants x excitations (the previous engine stored every ``(src, dst, sign)`` pair:
128 million pairs, 3.3 GB at (12e,12o)). :class:`GateSequence` packs the maps once into flat
arrays and the compiled kernels of :mod:`eigensweep.vqe.detkernels` apply a whole sequence
(forward) or the fused gradient-and-un-apply backward sweep in one call, in blocks of
consecutive gates that share their rows (alpha-beta doubles with the same alpha part,
alpha-only or beta-only runs) so that each part of the CI matrix is loaded into cache once per
block rather than once per gate, with threads over rows (``OMP_NUM_THREADS``, one thread
below ``SINGLE_THREAD_DIM`` determinants; gradients do not depend on the thread count).
Memory per problem: :mod:`eigensweep.vqe.detsize` (size gate and cluster requests).

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

from collections.abc import Callable, Iterator, Sequence
from contextlib import contextmanager
from dataclasses import dataclass
from math import comb

import numba
import numpy as np
from pyscf import lib
from pyscf.fci import cistring, direct_spin1

from ..errors import ConfigError
from . import detkernels
from .detsize import detspace_memory_mb, n_determinants, physical_memory_mb

# below this CI dimension ``contract_2e`` runs single-threaded: idle OpenMP workers spinning
# next to the optimizer's BLAS threads cost far more than the parallel speed-up
SINGLE_THREAD_DIM = 40000

FermionTerm = tuple[tuple[int, int], ...]


SpinMap = tuple[np.ndarray, np.ndarray, np.ndarray]
_EMPTY_MAP: SpinMap = (
    np.zeros(0, dtype=np.int64),
    np.zeros(0, dtype=np.int64),
    np.zeros(0, dtype=np.float64),
)


@dataclass(frozen=True)
class ExcitationGate:
    """One excitation generator ``G = T - T^dagger`` in factored form on the CI matrix.

    ``T = sign * T_alpha T_beta`` with ``T_alpha|src_a[i]> = sign_a[i] |dst_a[i]>`` on the
    alpha strings (``alpha = None``: no alpha operators) and likewise ``beta``;
    ``T|A, B> = sign * sign_a * sign_b |A', B'>``. ``kind`` is 0 (both spins), 1 (alpha
    only), 2 (beta only), 3 (no operator: the identity gate, never produced by
    :meth:`DetSpace.gate`). ``term`` is the OpenFermion-style operator tuple of ``T``.
    String maps are shared between all gates of a :class:`DetSpace` that use them.
    """

    term: FermionTerm
    alpha: SpinMap | None
    beta: SpinMap | None
    sign: float
    n_pairs: int

    @property
    def kind(self) -> int:
        if self.alpha is not None and self.beta is not None:
            return 0
        if self.alpha is not None:
            return 1
        return 2 if self.beta is not None else 3

    def maps(self) -> tuple[SpinMap, SpinMap]:
        """(alpha map, beta map), empty arrays where a spin has no operator."""
        return (self.alpha or _EMPTY_MAP, self.beta or _EMPTY_MAP)


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


def check_fits(norb: int, nelec: tuple[int, int]) -> None:
    """Size gate: refuse a space whose emulation cannot fit in this machine's memory.

    Uses :func:`eigensweep.vqe.detsize.detspace_memory_mb` (without the exact reference).
    """
    need = detspace_memory_mb(norb, nelec, exact_reference=False)
    have = physical_memory_mb()
    if have is not None and need > have:
        raise ConfigError(
            f"active space: {n_determinants(norb, nelec):,} determinants ({2 * norb} qubits) "
            f"need about {need / 1024:.1f} GB for determinant-space emulation, more than this "
            f"machine's {have / 1024:.1f} GB; choose a smaller molecules[].active or a larger node"
        )


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
        check_fits(self.norb, self.nelec)
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
        self._map_cache: dict[tuple, SpinMap] = {}
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
        self._h1e_eri = (h1e, eri)
        self.e_core = float(e_core)

    def hamiltonian_diagonal(self) -> np.ndarray:
        """Diagonal of ``H`` (electronic part) over the determinants (PySCF ``make_hdiag``)."""
        if self._h2e is None:
            raise RuntimeError("no Hamiltonian set on this DetSpace")
        h1e, eri = self._h1e_eri
        return np.asarray(direct_spin1.make_hdiag(h1e, eri, self.norb, self.nelec)).reshape(-1)

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
    def spin_map(self, spin: int, ops: tuple[tuple[int, int], ...]) -> SpinMap:
        """String map ``(src, dst, sign)`` of a product of one-spin operators (memoised).

        ``ops`` are ``(spatial orbital, action)`` pairs, rightmost applied first, on the
        strings of ``spin`` (0 alpha, 1 beta) in the ascending in-string convention.
        """
        key = (int(spin), tuple((int(o), int(a)) for o, a in ops))
        if key not in self._map_cache:
            strings = self.strings_a if spin == 0 else self.strings_b
            valid, new, sgn = _apply_ops_to_strings(strings, key[1])
            src = np.nonzero(valid)[0].astype(np.int64)
            dst = (
                np.asarray(cistring.strs2addr(self.norb, self.nelec[spin], new[src]), np.int64)
                if src.size
                else src.copy()
            )
            self._map_cache[key] = (src, dst, sgn[src].astype(np.float64))
        return self._map_cache[key]

    def gate(self, term: FermionTerm) -> ExcitationGate:
        """Factored form of ``G = T - T^dagger`` with ``T`` the operator product ``term``.

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
        if cre & ann or len(cre) + len(ann) != len(term) or not term:
            raise ValueError(f"term {term} repeats a spin orbital; not an excitation generator")
        for spin in (0, 1):
            nc = sum(1 for o, a in term if o % 2 == spin and a == 1)
            nd = sum(1 for o, a in term if o % 2 == spin and a == 0)
            if nc != nd:
                raise ValueError(f"term {term} does not conserve the spin-{spin} electron count")
        # reorder to (alpha ops)(beta ops): sign of moving alpha operators left past beta ones;
        # the beta operators (an even number) then pass the alpha creators of |A, B> freely
        n_swaps = 0
        seen_beta = 0
        for o, _ in term:
            if o % 2 == 1:
                seen_beta += 1
            else:
                n_swaps += seen_beta
        ops_a = tuple((o // 2, a) for o, a in term if o % 2 == 0)
        ops_b = tuple((o // 2, a) for o, a in term if o % 2 == 1)
        alpha = self.spin_map(0, ops_a) if ops_a else None
        beta = self.spin_map(1, ops_b) if ops_b else None
        n_a = alpha[0].size if alpha is not None else self.na
        n_b = beta[0].size if beta is not None else self.nb
        return ExcitationGate(
            term=term,
            alpha=alpha,
            beta=beta,
            sign=-1.0 if n_swaps % 2 else 1.0,
            n_pairs=int(n_a * n_b),
        )

    def cached_gate(self, term: FermionTerm) -> ExcitationGate:
        """:meth:`gate` memoised per term on this space (ansätze built on it share maps)."""
        key = tuple((int(o), int(a)) for o, a in term)
        if key not in self._gate_cache:
            self._gate_cache[key] = self.gate(key)
        return self._gate_cache[key]

    def map_bytes(self) -> int:
        """Bytes held by the memoised string maps of this space (all gates built so far)."""
        return sum(a.nbytes for m in self._map_cache.values() for a in m)

    def _matrix(self, vec: np.ndarray) -> np.ndarray:
        if vec.size != self.dim or not vec.flags.c_contiguous or vec.dtype != np.float64:
            raise ValueError(f"expected a contiguous float64 CI vector of {self.dim} entries")
        return vec.reshape(self.na, self.nb)

    def apply_gate(self, gate: ExcitationGate, phi: float, vec: np.ndarray) -> None:
        """In place: ``vec <- exp(phi G) vec`` (plane rotation of each connected pair)."""
        if gate.kind == 3 or gate.n_pairs == 0:
            return
        a_map, b_map = gate.maps()
        with self.threads():
            detkernels.rotate(
                self._matrix(vec), gate.kind, a_map, b_map, np.cos(phi), np.sin(phi) * gate.sign
            )

    def apply_s2(self, vec: np.ndarray) -> np.ndarray:
        """``S^2|vec>`` for a flat real CI vector (PySCF ``fci.spin_op.contract_ss``),
        single-threaded below :data:`SINGLE_THREAD_DIM` like :meth:`apply_h` (OpenMP start-up
        dominated the small sectors by 40x on a shared machine)."""
        from pyscf.fci import spin_op

        with lib.with_omp_threads(self._threads):
            out = spin_op.contract_ss(vec, self.norb, self.nelec)
        return np.asarray(out).reshape(-1)

    def apply_excitation(
        self, gate: ExcitationGate, vec: np.ndarray, adjoint: bool = False
    ) -> np.ndarray:
        """``T|vec>`` (or ``T^dagger|vec>``) for the excitation operator ``T`` of ``gate``
        (not the generator ``T - T^dagger``); a new flat CI vector."""
        mat = np.asarray(vec, dtype=np.float64).reshape(self.na, self.nb)
        out = np.zeros_like(mat)
        if gate.kind == 3 or gate.n_pairs == 0:
            return out.reshape(-1)
        ident_a = (np.arange(self.na), np.arange(self.na), np.ones(self.na))
        ident_b = (np.arange(self.nb), np.arange(self.nb), np.ones(self.nb))
        sa, da, ga = gate.alpha if gate.alpha is not None else ident_a
        sb, db, gb = gate.beta if gate.beta is not None else ident_b
        if adjoint:
            sa, da, sb, db = da, sa, db, sb
        out[np.ix_(da, db)] = gate.sign * ga[:, None] * gb[None, :] * mat[np.ix_(sa, sb)]
        return out.reshape(-1)

    def generator_expectation(
        self, gate: ExcitationGate, bra: np.ndarray, ket: np.ndarray
    ) -> float:
        """``<bra|G|ket>`` for real CI vectors."""
        if gate.kind == 3 or gate.n_pairs == 0:
            return 0.0
        a_map, b_map = gate.maps()
        bra = np.ascontiguousarray(bra, dtype=np.float64)
        ket = np.ascontiguousarray(ket, dtype=np.float64)
        with self.threads():
            val = detkernels.expect(self._matrix(bra), self._matrix(ket), gate.kind, a_map, b_map)
        return gate.sign * val

    @contextmanager
    def threads(self) -> Iterator[None]:
        """Thread count of the gate kernels: as PySCF's (``OMP_NUM_THREADS``), 1 if small."""
        n = (
            1
            if self._threads == 1
            else max(1, min(lib.num_threads(), numba.config.NUMBA_NUM_THREADS))
        )
        old = numba.get_num_threads()
        numba.set_num_threads(n)
        try:
            yield
        finally:
            numba.set_num_threads(old)


# ---------------------------------------------------------------------------- circuits
@dataclass
class GateSequence:
    """A product of excitation gates ``U = U_K ... U_1`` (``gates[0]`` applied first).

    Gate ``k`` has angle ``coeffs[k] * theta[params[k]]``. The string maps of all gates are
    packed once into flat arrays (each distinct map once) for the compiled kernels of
    :mod:`.detkernels`, which apply the whole sequence in one call.
    """

    space: DetSpace
    gates: list[ExcitationGate]
    params: np.ndarray
    coeffs: np.ndarray
    n_params: int

    def __post_init__(self) -> None:
        self.params = np.asarray(self.params, dtype=np.intp).reshape(-1)
        self.coeffs = np.asarray(self.coeffs, dtype=np.float64).reshape(-1)
        index: dict[int, int] = {}
        maps: list[SpinMap] = []

        def map_id(m: SpinMap | None) -> int:
            if m is None:
                return -1
            if id(m[0]) not in index:
                index[id(m[0])] = len(maps)
                maps.append(m)
            return index[id(m[0])]

        self._g_a = np.array([map_id(g.alpha) for g in self.gates], dtype=np.int64)
        self._g_b = np.array([map_id(g.beta) for g in self.gates], dtype=np.int64)
        self._g_sign = np.array([g.sign for g in self.gates], dtype=np.float64)
        sizes = [m[0].size for m in maps]
        self._m_off = np.concatenate([[0], np.cumsum(sizes, dtype=np.int64)]).astype(np.int64)
        # 32-bit string addresses and 8-bit signs: the maps of a block stay in cache
        if maps:
            self._m_src = np.concatenate([m[0] for m in maps]).astype(np.int32)
            self._m_dst = np.concatenate([m[1] for m in maps]).astype(np.int32)
            self._m_sign = np.concatenate([m[2] for m in maps]).astype(np.int8)
        else:
            self._m_src = np.zeros(0, dtype=np.int32)
            self._m_dst = np.zeros(0, dtype=np.int32)
            self._m_sign = np.zeros(0, dtype=np.int8)
        kinds = np.array([3 if g.n_pairs == 0 else g.kind for g in self.gates], dtype=np.int64)
        self._blocks = detkernels.sequence_blocks(kinds, self._g_a)

    def _packed(self) -> tuple[np.ndarray, ...]:
        return (self._blocks, self._g_a, self._g_b, self._g_sign)

    def _maps(self) -> tuple[np.ndarray, ...]:
        return (self._m_off, self._m_src, self._m_dst, self._m_sign)

    @property
    def n_pairs(self) -> int:
        """Determinant pairs rotated by one application of the whole sequence."""
        return int(sum(g.n_pairs for g in self.gates))

    def nbytes(self) -> int:
        """Bytes of the packed gate data (string maps and per-gate tables)."""
        return int(sum(a.nbytes for a in (*self._packed(), *self._maps())))

    def angles(self, theta: np.ndarray) -> np.ndarray:
        theta = np.asarray(theta, dtype=np.float64).reshape(-1)
        if theta.size != self.n_params:
            raise ValueError(f"expected {self.n_params} parameters, got {theta.size}")
        if not self.gates:
            return np.zeros(0)
        return self.coeffs * theta[self.params]

    def state(self, theta: np.ndarray, reference: np.ndarray) -> np.ndarray:
        return self.state_at_angles(self.angles(theta), reference)

    def state_at_angles(self, phis: np.ndarray, reference: np.ndarray) -> np.ndarray:
        """``U_K(phi_K) ... U_1(phi_1) reference`` for per-gate angles ``phis``."""
        vec = np.array(reference, dtype=np.float64, copy=True).reshape(-1)
        phis = np.ascontiguousarray(phis, dtype=np.float64).reshape(-1)
        if phis.size != len(self.gates):
            raise ValueError(f"expected {len(self.gates)} gate angles, got {phis.size}")
        if self.gates:
            with self.space.threads():
                detkernels.apply_sequence(
                    self.space._matrix(vec), *self._packed(), phis, *self._maps()
                )
        return vec

    def energy(self, theta: np.ndarray, reference: np.ndarray) -> float:
        return self.space.energy(self.state(theta, reference))

    def energy_and_gradient(
        self,
        theta: np.ndarray,
        reference: np.ndarray,
        apply: Callable[[np.ndarray], np.ndarray] | None = None,
    ) -> tuple[float, np.ndarray]:
        """Energy and exact gradient by the adjoint method (one forward, one backward sweep).

        ``apply`` replaces ``H`` by another real symmetric operator ``A`` (``psi -> A psi``,
        e.g. a penalised Hamiltonian): the value is then ``<psi|A|psi> + e_core``.
        """
        phis = self.angles(theta)
        psi = self.state(theta, reference)
        lam = self.space.apply_h(psi) if apply is None else np.ascontiguousarray(apply(psi))
        energy = float(psi @ lam) + self.space.e_core
        if not self.gates:
            return energy, np.zeros(self.n_params)
        with self.space.threads():
            dphi = detkernels.adjoint_sweep(
                self.space._matrix(psi),
                self.space._matrix(lam),
                *self._packed(),
                phis,
                *self._maps(),
            )
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
