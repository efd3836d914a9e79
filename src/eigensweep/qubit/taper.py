"""Qubit tapering by Z2 symmetries (Bravyi, Gambetta, Mezzacapo, Temme, arXiv:1701.08213).

A Pauli string ``tau`` that commutes with every term of ``H`` is a Z2 symmetry. In symplectic
form the condition for ``tau = (x_s, z_s)`` is ``x_t . z_s + z_t . x_s = 0 (mod 2)`` for every term
``t``: the symmetries are the null space over GF(2) of the check matrix with rows ``(z_t | x_t)``.

Choice of generators (deterministic):

1. the diagonal symmetries (``x_s = 0``) form the null space of the ``x`` rows alone; a basis is
   put in reduced row-echelon form with pivots taken from the *highest* qubit index down, so
   generator ``i`` is the only one with a ``Z`` on its pivot qubit ``q_i``;
2. symmetries that need ``X``/``Y`` letters complete the basis of the full null space. They are
   reported by :func:`symmetry_null_space` but not tapered by :func:`reduce_to_sector`: their eigenvalue is not
   fixed by a computational-basis reference determinant (the sector would need an extra
   diagonalisation). For molecular Hamiltonians with real orbitals all symmetries found under the
   three mappings are diagonal (electron-number parities per spin and point-group parities), so
   nothing is lost there; a warning is issued if it happens.

Tapering (section VII of the paper): for each diagonal generator ``tau_i`` with pivot ``q_i`` the
Clifford ``U_i = (X_{q_i} + tau_i)/sqrt(2)`` maps ``tau_i`` to ``X_{q_i}``; the ``U_i`` commute,
``U = prod_i U_i`` is Hermitian and unitary. ``U H U`` acts on qubit ``q_i`` only with ``I`` or
``X``; replacing ``X_{q_i}`` by the sector eigenvalue ``s_i`` and deleting the qubit gives the
tapered Hamiltonian. The sector is the eigenvalue of each generator on the reference basis state
``|b>`` (``s_i = (-1)^{b . z_i}``), and the tapered reference is ``b`` with the pivot qubits removed
(``U|b> = |b without q>`` tensor ``|+-> states`` on the pivots).
"""

from __future__ import annotations

import warnings
from dataclasses import dataclass

import numpy as np

from ..errors import ConfigError, StageFileError
from . import gf2
from .pauli import PauliExpansion, pauli_product, symplectic_inner

_I_POWERS = np.array([1.0, 1j, -1.0, -1j])  # i^k, exact

__all__ = [
    "SectorReduction",
    "symmetry_null_space",
    "identity_reduction",
    "reduce_to_sector",
    "diagonal_symmetries",
]


def symmetry_null_space(ham: PauliExpansion) -> PauliExpansion:
    """Independent Z2 symmetry generators of ``ham`` (arXiv:1701.08213, section VII).

    Args:
        ham: the qubit Hamiltonian.

    Returns:
        Pauli sum with coefficients 1: first the diagonal generators in reduced row-echelon form
        (generator ``i`` alone has a ``Z`` on its pivot qubit, pivots taken from the highest
        qubit down), then any generators with ``X``/``Y`` letters needed to span the full group.
    """
    if not isinstance(ham, PauliExpansion):
        raise TypeError(f"symmetry_null_space accepts a PauliExpansion, got {type(ham).__name__}")
    n = ham.n_qubits
    keep = ~ham.identity_mask & (ham.coeffs != 0)
    x, z = ham.x[keep], ham.z[keep]
    # diagonal symmetries: x_t . z_s = 0 for all terms
    diagonal = gf2.null_space(x) if x.shape[0] else np.eye(n, dtype=bool)
    if diagonal.shape[0]:
        diagonal, _ = gf2.rref(diagonal, col_order=np.arange(n - 1, -1, -1))
    # full group: rows (z_t | x_t) acting on (x_s | z_s)
    full = gf2.null_space(np.hstack([z, x])) if x.shape[0] else np.eye(2 * n, dtype=bool)
    gens_x = [np.zeros(n, dtype=bool)] * diagonal.shape[0]
    gens_z = list(diagonal)
    current = np.hstack([np.zeros((diagonal.shape[0], n), dtype=bool), diagonal])
    rank = gf2.rank(current)
    for v in full:
        trial = np.vstack([current, v[None, :]])
        r = gf2.rank(trial)
        if r > rank:
            current, rank = trial, r
            gens_x.append(v[:n])
            gens_z.append(v[n:])
    k = len(gens_z)
    if k == 0:
        return PauliExpansion.zero(n)
    return PauliExpansion(
        np.array(gens_x).reshape(k, n), np.array(gens_z).reshape(k, n), np.ones(k), n
    )


@dataclass(eq=False)
class SectorReduction:
    """A tapered problem and what is needed to taper further operators the same way.

    Attributes:
        generators: the tapered Z2 symmetry generators (coefficients 1), before rotation.
        sector: int8 ``+1/-1`` eigenvalue of each generator on the reference state.
        qubits_removed: qubit (original index) tapered off for each generator.
        hamiltonian: tapered Hamiltonian on ``n_qubits_before - n_generators`` qubits.
        reference_bits: uint8 reference basis state on the remaining qubits (original order).
        n_qubits_before: number of qubits before tapering.
    """

    generators: PauliExpansion
    sector: np.ndarray
    qubits_removed: np.ndarray
    hamiltonian: PauliExpansion
    reference_bits: np.ndarray
    n_qubits_before: int

    @property
    def n_qubits(self) -> int:
        """Number of qubits after tapering."""
        return self.hamiltonian.n_qubits

    @property
    def qubits_kept(self) -> np.ndarray:
        """Original indices of the remaining qubits, in order (tapered qubit ``j`` = entry j)."""
        return np.setdiff1d(np.arange(self.n_qubits_before), self.qubits_removed)

    def taper_operator(self, op: PauliExpansion) -> PauliExpansion:
        """Apply the same Clifford rotation and sector projection to another operator.

        Args:
            op: operator on ``n_qubits_before`` qubits that commutes with every generator (number,
                S_z, a symmetry-preserving excitation generator's Pauli terms, ...).

        Returns:
            The tapered operator on :attr:`n_qubits` qubits.

        Raises:
            ValueError: some term anticommutes with a generator (the operator would leave the
                sector and cannot be tapered).
        """
        if not isinstance(op, PauliExpansion):
            raise TypeError(f"taper_operator accepts a PauliExpansion, got {type(op).__name__}")
        if op.n_qubits != self.n_qubits_before:
            raise ConfigError(
                f"operator acts on {op.n_qubits} qubits, the tapering on {self.n_qubits_before}"
            )
        return _rotate_and_project(op, self.generators, self.qubits_removed, self.sector)

    def taper_state(self, psi: np.ndarray) -> np.ndarray:
        """The tapered image of a statevector on :attr:`n_qubits_before` qubits in the sector.

        Applies the same Clifford ``U = prod_i (tau_i + X_{q_i}) / sqrt(2)`` as
        :meth:`taper_operator` (the factors commute) and projects each removed qubit ``q_i``
        onto the ``X`` eigenstate of eigenvalue ``sector[i]``; for a state inside the sector
        the result has the same norm. Qubit 0 is the most significant bit.
        """
        psi = np.asarray(psi, dtype=np.complex128).reshape(-1)
        n = self.n_qubits_before
        if psi.size != 1 << n:
            raise ConfigError(f"state has {psi.size} amplitudes, the tapering needs {1 << n}")
        idx = np.arange(psi.size, dtype=np.int64)
        for i in range(self.generators.n_terms):
            psi = self._clifford_factor(psi, idx, i)
        t = psi.reshape((2,) * n) if n else psi
        for q, s in sorted(zip(self.qubits_removed, self.sector, strict=True), reverse=True):
            t = (np.take(t, 0, axis=int(q)) + float(s) * np.take(t, 1, axis=int(q))) / np.sqrt(2)
        return np.ascontiguousarray(t).reshape(-1)

    def untaper_state(self, phi: np.ndarray) -> np.ndarray:
        """Inverse of :meth:`taper_state`: the full statevector of a tapered state."""
        phi = np.asarray(phi, dtype=np.complex128).reshape(-1)
        if phi.size != 1 << self.n_qubits:
            raise ConfigError(f"state has {phi.size} amplitudes, the tapering {1 << self.n_qubits}")
        t = phi.reshape((2,) * self.n_qubits) if self.n_qubits else phi
        for q, s in sorted(zip(self.qubits_removed, self.sector, strict=True)):
            t = np.stack([t, float(s) * t], axis=int(q)) / np.sqrt(2)
        psi = np.ascontiguousarray(t).reshape(-1)
        idx = np.arange(psi.size, dtype=np.int64)
        for i in range(self.generators.n_terms):
            psi = self._clifford_factor(psi, idx, i)
        return psi

    def _clifford_factor(self, psi: np.ndarray, idx: np.ndarray, i: int) -> np.ndarray:
        """``(tau_i + X_{q_i}) / sqrt(2)`` on a statevector (``tau_i`` is a Z string)."""
        n = self.n_qubits_before
        parity = np.zeros_like(idx)
        for q in np.flatnonzero(self.generators.z[i]):
            parity ^= (idx >> (n - 1 - int(q))) & 1
        sign = 1.0 - 2.0 * parity
        flip = idx ^ (1 << (n - 1 - int(self.qubits_removed[i])))
        return (sign * psi + psi[flip]) / np.sqrt(2)

    def to_store(self, prefix: str = "taper_") -> dict[str, np.ndarray]:
        """Arrays for a stage file (flat names, ``prefix`` prepended)."""
        if not isinstance(prefix, str):
            raise TypeError(f"prefix must be a str, got {type(prefix).__name__}")
        out = {}
        out.update(self.generators.to_store(f"{prefix}generators_"))
        out.update(self.hamiltonian.to_store(f"{prefix}hamiltonian_"))
        out[f"{prefix}sector"] = self.sector.astype(np.int8)
        out[f"{prefix}qubits_removed"] = self.qubits_removed.astype(np.int64)
        out[f"{prefix}reference_bits"] = self.reference_bits.astype(np.uint8)
        out[f"{prefix}n_qubits_before"] = np.array(self.n_qubits_before, dtype=np.int64)
        return out

    @classmethod
    def from_store(cls, arrays: dict[str, np.ndarray], prefix: str = "taper_") -> SectorReduction:
        """Inverse of :meth:`to_store`.

        Raises:
            StageFileError: arrays missing or inconsistent.
        """
        if not isinstance(arrays, dict):
            raise TypeError(f"arrays must be a dict of numpy arrays, got {type(arrays).__name__}")
        names = ["sector", "qubits_removed", "reference_bits", "n_qubits_before"]
        missing = [f"{prefix}{k}" for k in names if f"{prefix}{k}" not in arrays]
        if missing:
            raise StageFileError(f"stored tapering lacks arrays {missing}; recompute the stage")
        gens = PauliExpansion.from_store(arrays, f"{prefix}generators_")
        ham = PauliExpansion.from_store(arrays, f"{prefix}hamiltonian_")
        result = cls(
            generators=gens,
            sector=np.asarray(arrays[f"{prefix}sector"], dtype=np.int8).reshape(-1),
            qubits_removed=np.asarray(arrays[f"{prefix}qubits_removed"], dtype=np.int64).reshape(
                -1
            ),
            hamiltonian=ham,
            reference_bits=np.asarray(arrays[f"{prefix}reference_bits"], dtype=np.uint8).reshape(
                -1
            ),
            n_qubits_before=int(np.asarray(arrays[f"{prefix}n_qubits_before"])),
        )
        k = gens.n_terms
        if (
            result.sector.size != k
            or result.qubits_removed.size != k
            or gens.n_qubits != result.n_qubits_before
            or ham.n_qubits != result.n_qubits_before - k
            or result.reference_bits.size != ham.n_qubits
        ):
            raise StageFileError("stored tapering has inconsistent shapes; recompute the stage")
        return result


def _rotate_and_project(
    op: PauliExpansion, generators: PauliExpansion, pivots: np.ndarray, sector: np.ndarray
) -> PauliExpansion:
    n = op.n_qubits
    if generators.n_terms == 0:
        return op.combine_like_terms(atol=0.0)
    anti = symplectic_inner(
        op.x[:, None, :], op.z[:, None, :], generators.x[None], generators.z[None]
    )
    bad = np.flatnonzero(anti.any(axis=1) & (op.coeffs != 0))
    if bad.size:
        label = op.subset(bad[:1]).labels()[0]
        raise ValueError(
            f"{bad.size} term(s) anticommute with the symmetry generators (e.g. {label}); "
            "such an operator leaves the symmetry sector and cannot be tapered"
        )
    x, z, coeffs = op.x.copy(), op.z.copy(), op.coeffs.astype(np.complex128)
    for i in range(generators.n_terms):
        q = int(pivots[i])
        tx, tz = generators.x[i], generators.z[i]
        hit = z[:, q].copy()  # terms with Z or Y on q anticommute with X_q: P -> P tau X_q
        if not hit.any():
            continue
        px, pz, e1 = pauli_product(x[hit], z[hit], tx[None, :], tz[None, :])
        xq = np.zeros(n, dtype=bool)
        xq[q] = True
        px, pz, e2 = pauli_product(px, pz, xq[None, :], np.zeros((1, n), dtype=bool))
        x[hit], z[hit] = px, pz
        coeffs[hit] *= _I_POWERS[(e1 + e2) % 4]
    if np.any(np.abs(coeffs.imag) > 1e-12) or np.any(z[:, pivots]):
        raise AssertionError("tapering rotation produced a non-Hermitian or non-X pivot term")
    signs = np.where(x[:, pivots], sector[None, :].astype(float), 1.0).prod(axis=1)
    kept = np.setdiff1d(np.arange(n), pivots)
    return PauliExpansion(
        x[:, kept], z[:, kept], coeffs.real * signs, len(kept)
    ).combine_like_terms(atol=1e-12)


def _check_reference(ham: PauliExpansion, bits: np.ndarray) -> np.ndarray:
    if not isinstance(ham, PauliExpansion):
        raise TypeError(f"the Hamiltonian must be a PauliExpansion, got {type(ham).__name__}")
    if not isinstance(bits, np.ndarray | list | tuple):
        raise TypeError(f"reference_bits must be a numpy array, got {type(bits).__name__}")
    b = np.asarray(bits).reshape(-1)
    if b.size != ham.n_qubits or not np.all((b == 0) | (b == 1)):
        raise ConfigError(
            f"reference_bits must be {ham.n_qubits} values of 0/1, got {b.size} entries"
        )
    return b.astype(np.uint8)


def diagonal_symmetries(
    ham: PauliExpansion, reference_bits: np.ndarray
) -> tuple[PauliExpansion, np.ndarray, np.ndarray]:
    """The diagonal Z2 symmetry generators of ``ham``, their pivot qubits and their sector.

    These are what :func:`reduce_to_sector` removes; the taper stage stores them also when tapering is
    off, so that symmetry verification of device counts reads them instead of recomputing.

    Args:
        ham: qubit Hamiltonian.
        reference_bits: 0/1 computational-basis state fixing the sector.

    Returns:
        ``(generators, pivots, sector)``: coefficient-1 Z strings in reduced row-echelon form
        (:func:`symmetry_null_space`), the pivot (highest) qubit of each, and the int8
        eigenvalue ``(-1)^{b . z_i}`` of each on the reference. Symmetries with ``X``/``Y``
        letters are left out (warning).
    """
    bits = _check_reference(ham, reference_bits)
    gens = symmetry_null_space(ham)
    diagonal = ~gens.x.any(axis=1)
    if not diagonal.all():
        warnings.warn(
            f"{int((~diagonal).sum())} Z2 symmetry generator(s) contain X/Y letters; their sector "
            "is not fixed by the reference determinant and they are not tapered",
            stacklevel=2,
        )
    gens = gens.subset(diagonal)
    k = gens.n_terms
    pivots = np.array([int(np.flatnonzero(gens.z[i])[-1]) for i in range(k)], dtype=np.int64)
    # RREF from the highest qubit: the pivot of generator i is its highest Z and is unique to it
    parity = (gens.z.astype(np.int64) @ bits.astype(np.int64)) & 1
    sector = (1 - 2 * parity).astype(np.int8)
    return gens, pivots, sector


def reduce_to_sector(ham: PauliExpansion, reference_bits: np.ndarray) -> SectorReduction:
    """Taper off one qubit per diagonal Z2 symmetry (arXiv:1701.08213).

    Args:
        ham: qubit Hamiltonian.
        reference_bits: 0/1 computational-basis state (e.g. Hartree–Fock under the same mapping)
            whose symmetry eigenvalues fix the sector.

    Returns:
        :class:`SectorReduction`. Symmetries with ``X``/``Y`` letters are not tapered (warning).

    Example:
        H2/STO-3G, Jordan–Wigner: 3 generators, 4 qubits -> 1.
    """
    bits = _check_reference(ham, reference_bits)
    gens, pivots, sector = diagonal_symmetries(ham, bits)
    tapered = _rotate_and_project(ham, gens, pivots, sector)
    kept = np.setdiff1d(np.arange(ham.n_qubits), pivots)
    return SectorReduction(
        generators=gens,
        sector=sector,
        qubits_removed=pivots,
        hamiltonian=tapered,
        reference_bits=bits[kept].copy(),
        n_qubits_before=ham.n_qubits,
    )


def identity_reduction(ham: PauliExpansion, reference_bits: np.ndarray) -> SectorReduction:
    """Identity tapering stage: no generators, the Hamiltonian and reference passed through.

    Args:
        ham: qubit Hamiltonian.
        reference_bits: 0/1 reference basis state.

    Returns:
        :class:`SectorReduction` with zero generators.
    """
    bits = _check_reference(ham, reference_bits)
    return SectorReduction(
        generators=PauliExpansion.zero(ham.n_qubits),
        sector=np.zeros(0, dtype=np.int8),
        qubits_removed=np.zeros(0, dtype=np.int64),
        hamiltonian=ham.combine_like_terms(atol=0.0),
        reference_bits=bits.copy(),
        n_qubits_before=ham.n_qubits,
    )
