"""Fermion-to-qubit mappings of molecular Hamiltonians: Jordan–Wigner, Bravyi–Kitaev, parity.

- Jordan–Wigner (P. Jordan and E. Wigner, Z. Phys. 47, 631 (1928)): qubit ``k`` stores the
  occupation of spin orbital ``k``; done by OpenFermion's ``jordan_wigner``.
- Bravyi–Kitaev (S. Bravyi and A. Kitaev, Ann. Phys. 298, 210 (2002); in the form of J. T.
  Seeley, M. J. Richard, P. J. Love, J. Chem. Phys. 137, 224109 (2012)): qubit ``k`` stores the
  parity of a Fenwick-tree set of occupations; done by OpenFermion's ``bravyi_kitaev``.
- Parity (Seeley, Richard, Love 2012, section on the parity basis): qubit ``k`` stores
  ``n_0 + ... + n_k (mod 2)``.

All three are *linear* encodings ``b = A n (mod 2)`` of the occupation vector ``n``. The map
``|n> -> |A n>`` is a CNOT network ``U``, and a Jordan–Wigner string ``X^x Z^z`` becomes
``U X^x Z^z U^dag = X^{A x} Z^{A^{-T} z}``. The parity Hamiltonian is built that way from the
Jordan–Wigner one (:func:`encode_linear`); the tests check it against OpenFermion's
``binary_code_transform`` with ``parity_code``, and check the same construction with the
Bravyi–Kitaev matrix against OpenFermion's ``bravyi_kitaev``. The matrices also give the
Hartree–Fock reference bits (:func:`reference_bits`, :func:`encode_occupations`), statevectors in
the encoding (:func:`encode_state`) and the ansätze's excitation generators as Pauli strings
(:func:`generator_paulis`, without OpenFermion). This module is the one home of the encodings in
eigensweep; its GF(2) algebra is :mod:`eigensweep.qubit.gf2`.

Orbital order is OpenFermion's interleaved one: spin orbital ``2p`` is alpha and ``2p + 1`` beta of
spatial orbital ``p``.
"""

from __future__ import annotations

from collections.abc import Sequence
from functools import lru_cache
from typing import TYPE_CHECKING

import numpy as np

from ..errors import ConfigError
from . import gf2
from .pauli import PauliExpansion

if TYPE_CHECKING:  # OpenFermion takes seconds to import: only functions that need it load it
    from openfermion import FermionOperator, InteractionOperator

__all__ = [
    "MAPPINGS",
    "interaction_operator",
    "map_hamiltonian",
    "map_fermion_operator",
    "number_operator",
    "spin_square_operator",
    "sz_operator",
    "reference_bits",
    "check_mapping",
    "encode_linear",
    "encode_occupations",
    "encode_state",
    "encoding_matrices",
    "encoding_matrix",
    "generator_paulis",
]

MAPPINGS = ("jordan_wigner", "bravyi_kitaev", "parity")
_DROP_TOL = 1e-12


def check_mapping(mapping: str) -> str:
    """Return ``mapping`` if it is one of :data:`MAPPINGS`; ``TypeError``/``ConfigError`` else."""
    if not isinstance(mapping, str):
        raise TypeError(f"mapping must be a str, got {type(mapping).__name__}")
    if mapping not in MAPPINGS:
        raise ConfigError(f"unknown mapping {mapping!r}; choose one of {', '.join(MAPPINGS)}")
    return mapping


def _check_n_qubits(n_qubits: int) -> int:
    if isinstance(n_qubits, bool) or not isinstance(n_qubits, int | np.integer):
        raise TypeError(f"n_qubits must be an int, got {type(n_qubits).__name__}")
    if n_qubits < 1:
        raise ConfigError(f"n_qubits must be >= 1, got {n_qubits}")
    return int(n_qubits)


def interaction_operator(h1e: np.ndarray, eri: np.ndarray, e_core: float) -> InteractionOperator:
    """Spin-orbital Hamiltonian from spatial-orbital integrals.

    ``H = e_core + sum_{pq,s} h_pq a+_{ps} a_{qs}
    + 1/2 sum_{pqrs,st} (pq|rs) a+_{ps} a+_{rt} a_{st} a_{qs}`` with chemists' notation
    ``(pq|rs)`` and interleaved spin orbitals (``2p`` alpha, ``2p + 1`` beta).

    Args:
        h1e: real ``(norb, norb)`` one-electron integrals in the orbital basis.
        eri: real ``(norb, norb, norb, norb)`` two-electron integrals ``(pq|rs)`` (full,
            unpacked: ``pyscf.ao2mo.restore(1, ..., norb)``).
        e_core: constant energy (nuclear repulsion plus frozen-core energy), hartree.

    Returns:
        OpenFermion ``InteractionOperator`` on ``2 * norb`` spin orbitals.
    """
    from openfermion import InteractionOperator

    if not isinstance(h1e, np.ndarray) or not isinstance(eri, np.ndarray):
        raise TypeError(
            f"h1e and eri must be numpy.ndarray, got {type(h1e).__name__} and {type(eri).__name__}"
        )
    if isinstance(e_core, bool) or not isinstance(e_core, int | float | np.integer | np.floating):
        raise TypeError(f"e_core must be a real number, got {type(e_core).__name__}")
    norb = h1e.shape[0] if h1e.ndim == 2 else -1
    if h1e.shape != (norb, norb) or eri.shape != (norb,) * 4 or norb < 1:
        raise ConfigError(
            f"integral shapes {h1e.shape} and {eri.shape} do not match: "
            "need (norb, norb) and (norb, norb, norb, norb)"
        )
    for name, arr in (("h1e", h1e), ("eri", eri)):
        if np.iscomplexobj(arr) and np.max(np.abs(arr.imag)) > _DROP_TOL:
            raise ConfigError(f"{name} has complex entries; only real orbitals are supported")
    h1 = np.asarray(h1e.real if np.iscomplexobj(h1e) else h1e, dtype=np.float64)
    g2 = np.asarray(eri.real if np.iscomplexobj(eri) else eri, dtype=np.float64)
    n = 2 * norb
    one = np.zeros((n, n))
    two = np.zeros((n, n, n, n))
    for s in range(2):
        one[s::2, s::2] = h1
    # (pq|rs) a+_{p s} a+_{r t} a_{s t} a_{q s}: InteractionOperator index order [p, r, s, q]
    g = 0.5 * g2.transpose(0, 2, 3, 1)
    for s in range(2):
        for t in range(2):
            two[s::2, t::2, t::2, s::2] = g
    return InteractionOperator(float(e_core), one, two)


def encoding_matrix(n_qubits: int, mapping: str) -> np.ndarray:
    """Binary matrix ``A`` of the linear encoding ``b = A n (mod 2)`` of occupations ``n``.

    Jordan–Wigner: identity. Parity: lower triangle of ones, ``b_k = n_0 + ... + n_k``.
    Bravyi–Kitaev (Seeley, Richard, Love 2012, Fenwick-tree form valid for any ``n``):
    ``b_k = sum n_j`` over ``j`` from ``(k + 1) - lowbit(k + 1)`` to ``k``.

    Args:
        n_qubits: number of spin orbitals (= qubits).
        mapping: one of :data:`MAPPINGS`.

    Returns:
        uint8 array ``(n_qubits, n_qubits)``.
    """
    n = _check_n_qubits(n_qubits)
    check_mapping(mapping)
    if mapping == "jordan_wigner":
        return np.eye(n, dtype=np.uint8)
    if mapping == "parity":
        return np.tril(np.ones((n, n), dtype=np.uint8))
    a = np.zeros((n, n), dtype=np.uint8)
    for k in range(n):
        lowbit = (k + 1) & -(k + 1)
        a[k, k + 1 - lowbit : k + 1] = 1
    return a


@lru_cache(maxsize=64)
def encoding_matrices(n_qubits: int, mapping: str) -> tuple[np.ndarray, np.ndarray]:
    """``(A, A^{-T})`` of the linear encoding ``b = A n (mod 2)`` (read-only uint8 arrays).

    ``A`` (:func:`encoding_matrix`) moves occupations and ``X`` parts of Pauli strings
    (``x -> A x``), ``A^{-T}`` moves ``Z`` parts (``z -> A^{-T} z``); Jordan–Wigner gives two
    identities.
    """
    a = encoding_matrix(n_qubits, mapping)
    a_inv_t = gf2.inverse(a).T.copy()
    a.setflags(write=False)
    a_inv_t.setflags(write=False)
    return a, a_inv_t


def encode_linear(jw: PauliExpansion, matrix: np.ndarray) -> PauliExpansion:
    """Re-express a Jordan–Wigner Pauli sum in the linear encoding ``b = A n (mod 2)``.

    ``U X^x Z^z U^dag = X^{A x} Z^{A^{-T} z}`` for the CNOT network ``U|n> = |A n>``; with the
    Hermitian form ``P(x, z) = i^{x.z} X^x Z^z`` each coefficient picks up the sign
    ``i^{x.z - x'.z'}`` (``x.z`` and ``x'.z'`` have equal parity, so it is real).

    Args:
        jw: operator in the Jordan–Wigner (occupation-number) encoding.
        matrix: invertible binary ``(n, n)`` encoding matrix, e.g. :func:`encoding_matrix`.

    Returns:
        The same operator in the new encoding (canonical order).
    """
    if not isinstance(jw, PauliExpansion):
        raise TypeError(f"encode_linear accepts a PauliExpansion, got {type(jw).__name__}")
    a = np.asarray(matrix, dtype=np.int64) & 1
    n = jw.n_qubits
    if a.shape != (n, n):
        raise ConfigError(f"encoding matrix shape {a.shape} does not match {n} qubits")
    a_inv_t = gf2.inverse(a).T.astype(np.int64)
    x_new = (jw.x.astype(np.int64) @ a.T) & 1
    z_new = (jw.z.astype(np.int64) @ a_inv_t.T) & 1
    ny_old = np.count_nonzero(jw.x & jw.z, axis=1)
    ny_new = np.count_nonzero(x_new & z_new, axis=1)
    diff = ny_old - ny_new
    if np.any(diff % 2):
        raise AssertionError("encode_linear: Y-count parity changed (matrix not invertible?)")
    sign = np.where(diff % 4 == 0, 1.0, -1.0)
    return PauliExpansion(
        x_new.astype(bool), z_new.astype(bool), jw.coeffs * sign, n
    ).combine_like_terms(atol=0.0)


def _from_qubit_operator(op, n_qubits: int) -> PauliExpansion:
    return PauliExpansion.from_openfermion(op, n_qubits).combine_like_terms(atol=_DROP_TOL)


def map_fermion_operator(op: FermionOperator, n_qubits: int, mapping: str) -> PauliExpansion:
    """Map a Hermitian fermionic operator (number, S_z, ``i (T - T^dag)``, ...) to qubits.

    Args:
        op: OpenFermion ``FermionOperator`` or ``InteractionOperator``; must be Hermitian (for an
            anti-Hermitian excitation generator ``A = T - T^dag`` pass ``1j * A``).
        n_qubits: number of spin orbitals (the Bravyi–Kitaev and parity strings depend on it).
        mapping: one of :data:`MAPPINGS`.

    Returns:
        The qubit operator with terms ``|c| <= 1e-12`` dropped.

    Raises:
        TypeError: ``op`` is neither a ``FermionOperator`` nor an ``InteractionOperator``.
        ConfigError: unknown mapping or an index ``>= n_qubits``.
        ValueError: the image has complex coefficients (``op`` not Hermitian).
    """
    import openfermion
    from openfermion import FermionOperator, InteractionOperator

    if not isinstance(op, FermionOperator | InteractionOperator):
        raise TypeError(
            "map_fermion_operator accepts openfermion.FermionOperator or InteractionOperator, "
            f"got {type(op).__name__}"
        )
    n = _check_n_qubits(n_qubits)
    check_mapping(mapping)
    if isinstance(op, FermionOperator):
        used = openfermion.count_qubits(op)
    else:
        used = op.n_qubits
    if used > n:
        raise ConfigError(f"operator acts on {used} spin orbitals but n_qubits is {n}")
    if mapping == "bravyi_kitaev":
        if isinstance(op, InteractionOperator) and op.n_qubits != n:
            op = openfermion.get_fermion_operator(op)
        return _from_qubit_operator(openfermion.bravyi_kitaev(op, n_qubits=n), n)
    jw = _from_qubit_operator(openfermion.jordan_wigner(op), n)
    if mapping == "jordan_wigner":
        return jw
    return encode_linear(jw, encoding_matrix(n, "parity")).combine_like_terms(atol=_DROP_TOL)


def map_hamiltonian(
    h1e: np.ndarray, eri: np.ndarray, e_core: float, mapping: str
) -> PauliExpansion:
    """Qubit Hamiltonian of a molecule from its orbital integrals.

    Args:
        h1e: ``(norb, norb)`` one-electron integrals.
        eri: ``(norb,)*4`` chemists' two-electron integrals ``(pq|rs)``.
        e_core: constant energy (hartree), becomes the identity coefficient.
        mapping: ``"jordan_wigner"``, ``"bravyi_kitaev"`` or ``"parity"``.

    Returns:
        Pauli sum on ``2 * norb`` qubits, terms with ``|c| <= 1e-12`` dropped, canonical order.

    Example:
        H2/STO-3G at 0.74 Å gives 15 Jordan–Wigner terms (identity included).
    """
    check_mapping(mapping)
    io = interaction_operator(h1e, eri, e_core)
    return map_fermion_operator(io, io.n_qubits, mapping)


def number_operator(n_qubits: int, mapping: str) -> PauliExpansion:
    """Total electron number ``N = sum_k a+_k a_k`` under ``mapping`` (diagonal: Z strings).

    Args:
        n_qubits: number of spin orbitals.
        mapping: one of :data:`MAPPINGS`.

    Returns:
        The mapped operator.
    """
    from openfermion import FermionOperator

    n = _check_n_qubits(n_qubits)
    op = FermionOperator()
    for k in range(n):
        op += FermionOperator(((k, 1), (k, 0)))
    return map_fermion_operator(op, n, mapping)


def sz_operator(n_qubits: int, mapping: str) -> PauliExpansion:
    """``S_z = 1/2 sum_p (n_{2p} - n_{2p+1})`` (interleaved alpha/beta) under ``mapping``.

    Args:
        n_qubits: number of spin orbitals (even).
        mapping: one of :data:`MAPPINGS`.

    Returns:
        The mapped operator.
    """
    from openfermion import FermionOperator

    n = _check_n_qubits(n_qubits)
    if n % 2:
        raise ConfigError(f"S_z needs an even number of spin orbitals, got {n}")
    op = FermionOperator()
    for k in range(n):
        op += FermionOperator(((k, 1), (k, 0)), 0.5 if k % 2 == 0 else -0.5)
    return map_fermion_operator(op, n, mapping)


def spin_square_operator(n_qubits: int, mapping: str) -> PauliExpansion:
    """Total spin ``S^2 = S_- S_+ + S_z (S_z + 1)`` (interleaved alpha/beta) under ``mapping``.

    ``S_+ = sum_p a^+_{2p} a_{2p+1}``, ``S_- = S_+^dagger`` and ``S_z`` as in
    :func:`sz_operator` (Helgaker, Jorgensen, Olsen, Molecular Electronic-Structure Theory
    (2000), section 2.4 - from memory). It conserves ``N_alpha`` and ``N_beta`` and every
    orbital's occupation, so it commutes with the Z2 symmetries of a molecular Hamiltonian and
    can be tapered like ``N`` and ``S_z``.

    Args:
        n_qubits: number of spin orbitals (even).
        mapping: one of :data:`MAPPINGS`.

    Returns:
        The mapped operator (terms ``|c| <= 1e-12`` dropped).
    """
    from openfermion import FermionOperator, normal_ordered

    n = _check_n_qubits(n_qubits)
    if n % 2:
        raise ConfigError(f"S^2 needs an even number of spin orbitals, got {n}")
    s_plus = FermionOperator()
    s_z = FermionOperator()
    for p in range(n // 2):
        s_plus += FermionOperator(((2 * p, 1), (2 * p + 1, 0)))
        s_z += FermionOperator(((2 * p, 1), (2 * p, 0)), 0.5)
        s_z += FermionOperator(((2 * p + 1, 1), (2 * p + 1, 0)), -0.5)
    s_minus = FermionOperator()
    for p in range(n // 2):
        s_minus += FermionOperator(((2 * p + 1, 1), (2 * p, 0)))
    op = normal_ordered(s_minus * s_plus + s_z * s_z + s_z)
    return map_fermion_operator(op, n, mapping)


def reference_bits(nelec: tuple[int, int], norb: int, mapping: str) -> np.ndarray:
    """Computational-basis bits of the Hartree–Fock determinant under ``mapping``.

    The lowest ``n_alpha`` alpha and ``n_beta`` beta spatial orbitals are occupied; occupations
    ``n`` (interleaved) are encoded as ``b = A n (mod 2)`` (:func:`encoding_matrix`).

    Args:
        nelec: ``(n_alpha, n_beta)``.
        norb: number of spatial orbitals.
        mapping: one of :data:`MAPPINGS`.

    Returns:
        uint8 array of length ``2 * norb``; entry ``k`` is qubit ``k``.

    Example:
        >>> reference_bits((1, 1), 2, "jordan_wigner")
        array([1, 1, 0, 0], dtype=uint8)
    """
    if not isinstance(nelec, tuple | list) or len(nelec) != 2:
        raise TypeError(f"nelec must be a tuple (n_alpha, n_beta), got {type(nelec).__name__}")
    if isinstance(norb, bool) or not isinstance(norb, int | np.integer):
        raise TypeError(f"norb must be an int, got {type(norb).__name__}")
    na, nb = (int(v) for v in nelec)
    if norb < 1 or not (0 <= na <= norb and 0 <= nb <= norb):
        raise ConfigError(f"nelec {tuple(nelec)} does not fit in {norb} spatial orbitals")
    occ = np.zeros(2 * norb, dtype=np.uint8)
    occ[0 : 2 * na : 2] = 1
    occ[1 : 2 * nb : 2] = 1
    return encode_occupations(occ, mapping)


def encode_occupations(occupations: Sequence[int] | np.ndarray, mapping: str) -> np.ndarray:
    """Qubit bits ``b = A n (mod 2)`` of the spin-orbital occupations ``n`` under ``mapping``.

    Args:
        occupations: 0/1 per spin orbital (interleaved order), one entry per qubit.
        mapping: one of :data:`MAPPINGS`.

    Returns:
        uint8 array; entry ``k`` is qubit ``k``.

    Example:
        >>> encode_occupations([1, 1, 0, 0], "parity")
        array([1, 0, 0, 0], dtype=uint8)
    """
    occ = np.asarray(occupations, dtype=np.int64).reshape(-1)
    if occ.size == 0 or np.any((occ != 0) & (occ != 1)):
        raise ConfigError("occupations must be a non-empty sequence of 0/1 values")
    a = encoding_matrices(int(occ.size), mapping)[0].astype(np.int64)
    return ((a @ occ) & 1).astype(np.uint8)


def encode_state(psi_jw: np.ndarray, mapping: str) -> np.ndarray:
    """A Jordan–Wigner statevector written in the linear encoding of ``mapping``.

    The CNOT network ``U|n> = |A n>`` moves amplitude ``psi_JW[n]`` to basis state ``A n``; this
    is the frame of :func:`map_hamiltonian`, :func:`reference_bits` and
    :func:`generator_paulis`. Only nonzero amplitudes are moved (a fixed-N state touches a
    small part of the register).

    Args:
        psi_jw: statevector of length ``2**n`` (qubit 0 = most significant bit).
        mapping: one of :data:`MAPPINGS`.

    Returns:
        A new complex128 statevector.
    """
    psi = np.asarray(psi_jw, dtype=np.complex128).reshape(-1)
    n = psi.size.bit_length() - 1
    if psi.size != 1 << n or n < 1:
        raise ConfigError(f"statevector length {psi.size} is not a power of two >= 2")
    if check_mapping(mapping) == "jordan_wigner":
        return psi.copy()
    idx = np.flatnonzero(psi)
    shifts = np.arange(n - 1, -1, -1, dtype=np.int64)  # qubit k is bit n - 1 - k
    occ = (idx[:, None] >> shifts[None, :]) & 1
    bits = (occ @ encoding_matrices(n, mapping)[0].T.astype(np.int64)) & 1
    out = np.zeros_like(psi)
    out[bits @ (np.int64(1) << shifts)] = psi[idx]
    return out


# ---------------------------------------------------------------------------- generators
FermionTerm = tuple[tuple[int, int], ...]
"""A product of ladder operators ``((spin_orbital, 1 = creation / 0 = annihilation), ...)``."""


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

    The ansätze's excitation generators, mapped without OpenFermion (fast, cached): ``T``
    (leftmost operator first) is multiplied out in the Jordan–Wigner form (:func:`_jw_ladder`);
    for Bravyi–Kitaev and parity every string is carried through the encoding's CNOT network,
    ``X^x Z^z -> X^{A x} Z^{A^{-T} z}`` (:func:`encoding_matrices`, Seeley, Richard, Love,
    J. Chem. Phys. 137, 224109 (2012)). Strings are returned in the order of their sparse
    ``((qubit, letter), ...)`` keys, identity terms (global phases) are dropped; the tests
    compare the result with OpenFermion's transforms.

    Raises:
        ValueError: the image is not anti-Hermitian or its strings do not commute (then the
            product form ``prod_j exp(phi c_j i P_j)`` would be inexact).
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
    a, a_inv_t = (m.astype(np.int64) for m in encoding_matrices(n, mapping))
    rows = []
    for (xm, zm), c in gen.items():
        if abs(c) < 1e-14 or (xm == 0 and zm == 0):
            continue
        x = np.array([(xm >> k) & 1 for k in range(n)], dtype=bool)
        z = np.array([(zm >> k) & 1 for k in range(n)], dtype=bool)
        if mapping != "jordan_wigner":
            x = ((a @ x) & 1).astype(bool)
            z = ((a_inv_t @ z) & 1).astype(bool)
        # X^x Z^z = (-i)^{|x & z|} P(x, z) with the Hermitian P = i^{x.z} X^x Z^z
        coeff = complex(c) * (-1j) ** int(np.count_nonzero(x & z))
        cj = coeff / 1j  # G = i sum c_j P_j
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
