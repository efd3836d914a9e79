"""Lowest eigenvalues of qubit operators inside a particle-number / S_z sector (a diagnostic).

This is *not* eigensweep's exact reference: that is the lowest state with the requested N and
total spin S, computed once by the integrals stage (:func:`eigensweep.chem.exact.solve_sector`)
and carried to qubit frames by :mod:`eigensweep.vqe.reference`. The functions here diagonalise
a qubit operator (mapped or tapered) in an (N, S_z) sector, which holds every S >= |S_z|; tests
and benchmarks use them to check mappings and tapering spectra against PySCF.

The full qubit space of a molecular Hamiltonian holds every electron number, and its lowest
eigenvalue need not be the neutral-molecule energy (an ion or a high-spin state can be lower; for
H2, LiH, BeH2 and H2O in STO-3G near equilibrium it happens to coincide).
Under Jordan–Wigner, Bravyi–Kitaev and parity the number operator ``N`` and ``S_z`` map to sums of
``Z`` strings (the encodings are linear, see :mod:`eigensweep.qubit.mapping`), so they are diagonal
in the computational basis: the sector is a set of basis states, and the Hamiltonian restricted to
it is an exact sub-block. That block is built directly from the x-mask groups (no full matrix)
and diagonalised with ``scipy.sparse.linalg.eigsh`` (dense ``eigh`` for small blocks).

Tapered Hamiltonians: ``N`` and ``S_z`` commute with the Z2 generators, so
:meth:`SectorReduction.taper_operator` gives their tapered forms, again ``Z`` strings; the sector is
then restricted exactly as above. The tapering itself fixes only parities (N_alpha and N_beta mod
2 and point-group parities), so without ``n_electrons``/``sz`` a tapered spectrum can still
contain states with ``N +- 2`` electrons. Symmetry sectors beyond N and S_z (total spin ``S^2``,
the point-group irrep in the untapered case) are *not* restricted: the result is the lowest
eigenvalue over all states with the requested ``N`` and ``S_z``, which for the molecules in the
tests is the FCI ground state of the same sector.
"""

from __future__ import annotations

import numpy as np
import scipy.linalg
import scipy.sparse
import scipy.sparse.linalg

from ..errors import ConfigError
from .mapping import MAPPINGS, number_operator, sz_operator
from .pauli import PauliExpansion
from .taper import SectorReduction

__all__ = ["sector_ground_energy", "sector_basis_states", "sector_block"]

_DENSE_LIMIT = 256
_SECTOR_TOL = 1e-6


def sector_basis_states(
    n_qubits: int,
    *,
    n_electrons: int | None = None,
    sz: float | None = None,
    mapping: str | None = None,
    taper: SectorReduction | None = None,
) -> np.ndarray:
    """Basis-state indices (qubit 0 = most significant bit) with the given ``N`` and ``S_z``.

    Args:
        n_qubits: qubits of the (possibly tapered) Hamiltonian.
        n_electrons: electron number, or None for any.
        sz: ``S_z = (N_alpha - N_beta)/2``, or None for any.
        mapping: mapping used (needed when ``n_electrons`` or ``sz`` is given).
        taper: the tapering applied to the Hamiltonian, if any.

    Returns:
        Sorted int64 array of indices.
    """
    dim = 1 << n_qubits
    states = np.arange(dim, dtype=np.int64)
    if n_electrons is None and sz is None:
        return states
    if mapping is None:
        raise ConfigError("restricting to an electron-number or S_z sector needs the mapping name")
    if mapping not in MAPPINGS:
        raise ConfigError(f"unknown mapping {mapping!r}; choose one of {', '.join(MAPPINGS)}")
    n_full = taper.n_qubits_before if taper is not None else n_qubits
    keep = np.ones(dim, dtype=bool)
    for value, build in ((n_electrons, number_operator), (sz, sz_operator)):
        if value is None:
            continue
        op = build(n_full, mapping)
        if taper is not None:
            op = taper.taper_operator(op)
        if not op.is_diagonal():
            raise ConfigError("the sector operator is not diagonal in this basis; cannot restrict")
        diag = op.diagonal_at(states)
        keep &= np.abs(diag - float(value)) < _SECTOR_TOL
    return states[keep]


def sector_block(ham: PauliExpansion, states: np.ndarray) -> scipy.sparse.csr_matrix:
    """Exact sub-block ``<b|H|c>`` for ``b, c`` in ``states`` (states closed under H assumed).

    Entries leading outside ``states`` are dropped, so the block is exact only when the sector
    is invariant under ``ham`` (true for N and S_z of a molecular Hamiltonian).

    Args:
        ham: the operator.
        states: sorted basis-state indices.

    Returns:
        CSR matrix ``(len(states), len(states))``; float64 when real, else complex128.
    """
    grp = ham.compile()
    dim = 1 << ham.n_qubits
    if states.size == dim:  # whole space: the row-major builder is faster
        return grp.to_csr()
    pos = np.full(dim, -1, dtype=np.int64)
    pos[states] = np.arange(states.size)
    rows, cols, vals = [], [], []
    for g in range(grp.n_groups):
        target = pos[states ^ grp.masks[g]]
        inside = target >= 0
        if not inside.any():
            continue
        v = grp.diagonal_at(g, states[inside])
        rows.append(np.flatnonzero(inside))
        cols.append(target[inside])
        vals.append(v)
    k = states.size
    if not rows:
        return scipy.sparse.csr_matrix((k, k))
    data = np.concatenate(vals)
    if np.all(data.imag == 0):
        data = data.real
    return scipy.sparse.csr_matrix(
        (data, (np.concatenate(rows), np.concatenate(cols))), shape=(k, k)
    )


def sector_ground_energy(
    ham: PauliExpansion,
    *,
    n_electrons: int | None = None,
    sz: float | None = None,
    mapping: str | None = None,
    taper: SectorReduction | None = None,
    k: int = 1,
) -> float | np.ndarray:
    """Lowest eigenvalue(s) of ``ham`` restricted to an electron-number / S_z sector.

    Args:
        ham: qubit Hamiltonian (tapered or not).
        n_electrons: electron number of the sector; None leaves N free.
        sz: ``S_z`` of the sector (e.g. 0 for a closed-shell singlet); None leaves it free.
        mapping: mapping that produced ``ham``; required when ``n_electrons`` or ``sz`` is given.
        taper: the :class:`SectorReduction` whose ``hamiltonian`` is ``ham`` (None if untapered).
        k: number of lowest eigenvalues wanted.

    Returns:
        The lowest eigenvalue (float) when ``k == 1``, else the ``k`` lowest, ascending.

    Raises:
        ConfigError: no basis state has the requested quantum numbers, ``k`` too large, the
            mapping is missing or unknown, or ``taper`` does not match ``ham``.

    Example:
        H2/STO-3G at 0.74 Å, any mapping, ``n_electrons=2, sz=0``: -1.137270 Eh (PySCF FCI).
    """
    if not isinstance(ham, PauliExpansion):
        raise TypeError(f"sector_ground_energy accepts a PauliExpansion, got {type(ham).__name__}")
    if taper is not None and not isinstance(taper, SectorReduction):
        raise TypeError(f"taper must be a SectorReduction or None, got {type(taper).__name__}")
    if isinstance(k, bool) or not isinstance(k, int | np.integer) or k < 1:
        raise ConfigError(f"k must be a positive int, got {k!r}")
    if taper is not None and taper.n_qubits != ham.n_qubits:
        raise ConfigError(
            f"the tapering leaves {taper.n_qubits} qubits but the Hamiltonian has {ham.n_qubits}"
        )
    if ham.n_qubits > 26:
        raise ConfigError(f"{ham.n_qubits} qubits is too many for an exact sector diagonalisation")
    states = sector_basis_states(
        ham.n_qubits, n_electrons=n_electrons, sz=sz, mapping=mapping, taper=taper
    )
    if states.size == 0:
        raise ConfigError(
            f"no basis state has n_electrons={n_electrons}, sz={sz} for this Hamiltonian"
        )
    if k > states.size:
        raise ConfigError(f"k={k} exceeds the sector dimension {states.size}")
    block = sector_block(ham, states)
    if states.size <= _DENSE_LIMIT or k >= states.size - 1:
        values = scipy.linalg.eigvalsh(block.toarray(), subset_by_index=[0, k - 1])
    else:
        v0 = np.random.default_rng(7).standard_normal(states.size)
        values = scipy.sparse.linalg.eigsh(
            block, k=k, which="SA", v0=v0, return_eigenvectors=False, tol=0.0
        )
        values = np.sort(values)
    return float(values[0]) if k == 1 else np.asarray(values, dtype=float)
