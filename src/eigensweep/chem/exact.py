"""The exact sector solver: lowest eigenstate(s) with fixed particle numbers and total spin.

This is eigensweep's one meaning of "exact": the lowest eigenvalue of the active-space (or
full-space) Hamiltonian with the requested ``(n_alpha, n_beta)`` *and* total spin ``S``. The
integrals stage computes it once (CASCI and FCI rungs) and stores the energy and its ground
space; the optimize stage reads them (energy, overlaps), and the summary and reconcile read the
same stored energy.

Method: determinant-based direct CI (Knowles & Handy, Chem. Phys. Lett. 111, 315 (1984)), as
implemented in PySCF ``fci.direct_spin1``. The ``M_s = (n_alpha - n_beta)/2`` sector also holds
states of every ``S >= |M_s|``, so the spin is enforced:

* up to :data:`DENSE_MAX_DETERMINANTS` determinants the Hamiltonian is built densely and fully
  diagonalised (deterministic, every irrep seen);
* above, Davidson (PySCF's deterministic lowest-diagonal start) for 2, 4, 12, 24 roots until a
  state of spin ``S`` is found whose degenerate partners are all inside the computed roots; if
  none is found, a spin penalty (PySCF ``fix_spin_``) steers the solver and the energies are
  re-evaluated without it.

Degenerate ground spaces (e.g. the two components of O2's 1Δg, or of any state with a
degenerate orbital occupation) are kept whole: every state within :data:`DEGENERACY_TOL` of the
lowest spin-``S`` energy is returned, spin-purified by diagonalising ``S^2`` inside each
cluster of degenerate eigenvalues, as an orthonormal set. Overlaps are then taken with the
projector onto that space, so they are basis-independent and never above 1.
"""

from __future__ import annotations

import math
from dataclasses import dataclass

import numpy as np
from pyscf import fci

from eigensweep.errors import ChemistryError, ConfigError

__all__ = [
    "DEGENERACY_TOL",
    "SectorSolution",
    "civec_spin_square",
    "n_determinants",
    "solve_sector",
]

#: FCI/CASCI Davidson energy threshold (hartree).
CI_CONV_TOL = 1e-11
#: Accepted deviation of <S^2> from S(S+1) for an exact eigenstate.
SPIN_TOL = 1e-4
#: Eigenvalues closer than this (hartree) belong to one degenerate ground space.
DEGENERACY_TOL = 1e-7
#: Up to this many determinants the sector Hamiltonian is diagonalised densely.
DENSE_MAX_DETERMINANTS = 1200
_DAVIDSON_ROOTS = (2, 4, 12, 24)


@dataclass(eq=False)
class SectorSolution:
    """Lowest eigenstate(s) of one ``(n_alpha, n_beta, S)`` sector.

    Attributes:
        energy: lowest eigenvalue with total spin ``spin`` (hartree, ``ecore`` included).
        spin: the total spin ``S`` imposed.
        spin_square: ``<S^2>`` of the ground space (``S(S+1)`` to :data:`SPIN_TOL`).
        vectors: ``(k, n_alpha_strings * n_beta_strings)`` orthonormal flat CI vectors (PySCF
            string order) spanning the degenerate ground space, ``k >= 1``.
    """

    energy: float
    spin: float
    spin_square: float
    vectors: np.ndarray

    @property
    def degeneracy(self) -> int:
        """Dimension of the ground space."""
        return int(self.vectors.shape[0])

    def __iter__(self):  # ``energy, spin_square, vector = solve_sector(...)`` keeps working
        return iter((self.energy, self.spin_square, self.vectors[0]))

    def __getitem__(self, i: int):
        return tuple(self)[i]


def n_determinants(norb: int, nelec: tuple[int, int]) -> int:
    """Number of determinants with ``nelec = (n_alpha, n_beta)`` in ``norb`` spatial orbitals."""
    return math.comb(norb, nelec[0]) * math.comb(norb, nelec[1])


def civec_spin_square(civec: np.ndarray, norb: int, nelec: tuple[int, int]) -> float:
    """``<c|S^2|c> / <c|c>`` of a flat CI vector (PySCF ``fci.spin_op.contract_ss``)."""
    c = np.asarray(civec, dtype=np.float64).reshape(-1)
    norm = float(c @ c)
    if norm == 0.0:
        return math.nan
    return float(c @ fci.spin_op.contract_ss(c, norb, nelec).reshape(-1)) / norm


def _check_spin(nelec: tuple[int, int], spin: float | None) -> float:
    s = abs(nelec[0] - nelec[1]) / 2 if spin is None else float(spin)
    if s < abs(nelec[0] - nelec[1]) / 2 or (2 * s) % 1 or (2 * s - nelec[0] + nelec[1]) % 2:
        raise ConfigError(
            f"solve_sector: spin: S={s:g} does not exist in the (n_alpha, n_beta)={nelec} "
            "sector; S must be >= |n_alpha-n_beta|/2 in integer steps"
        )
    return s


def _spin_resolved(
    energies: np.ndarray, vectors: np.ndarray, norb: int, nelec: tuple[int, int], target: float
) -> tuple[float, np.ndarray] | None:
    """Lowest cluster of degenerate eigenpairs that holds spin-``target`` states.

    ``energies`` ascending, ``vectors`` ``(k, ndet)`` orthonormal. Inside each cluster ``S^2``
    is diagonalised, so an accidental degeneracy of two spins is separated. Returns
    ``(energy, spin-pure vectors)`` or None; None also when the cluster may continue past the
    last computed root (its partners might be missing).
    """
    k = len(energies)
    start = 0
    while start < k:
        stop = start + 1
        while stop < k and energies[stop] - energies[start] < DEGENERACY_TOL:
            stop += 1
        block = vectors[start:stop]
        ss_block = np.array([fci.spin_op.contract_ss(v, norb, nelec).reshape(-1) for v in block])
        s2 = block @ ss_block.T
        w, u = np.linalg.eigh(0.5 * (s2 + s2.T))
        keep = np.abs(w - target) < SPIN_TOL
        if keep.any():
            if stop == k and k < vectors.shape[1]:
                return None  # the degenerate set may be cut off at the last root
            pure = u[:, keep].T @ block
            q, _ = np.linalg.qr(pure.T)
            return float(np.mean(energies[start:stop])), np.ascontiguousarray(q.T)
        start = stop
    return None


def _dense(h1e, eri, norb, nelec, ndet):
    """All eigenpairs of the sector Hamiltonian (PySCF ``pspace`` builds it in string order
    when asked for every determinant)."""
    addr, ham = fci.direct_spin1.pspace(h1e, eri, norb, nelec, np=ndet)
    if not np.array_equal(addr, np.arange(ndet)):
        raise AssertionError("pspace did not return the full space in string order")
    return np.linalg.eigh(ham)


def _make_solver() -> fci.direct_spin1.FCISolver:
    solver = fci.direct_spin1.FCI()
    solver.verbose = 0
    solver.conv_tol = CI_CONV_TOL
    solver.max_cycle = 400
    solver.max_space = 24
    return solver


def _davidson(h1e, eri, norb, nelec, ndet, target):
    solver = _make_solver()
    for nroots in _DAVIDSON_ROOTS:
        nroots = min(nroots, ndet)
        energies, vectors = solver.kernel(h1e, eri, norb, nelec, nroots=nroots)
        energies = np.atleast_1d(np.asarray(energies, dtype=float))
        vectors = np.array([np.asarray(c).reshape(-1) for c in np.reshape(vectors, (nroots, -1))])
        found = _spin_resolved(energies, vectors, norb, nelec, target)
        if found is not None:
            return found
        if nroots == ndet:
            break
    # spin penalty: steer the solver to S(S+1), then re-evaluate energies without it
    solver = fci.addons.fix_spin_(_make_solver(), shift=0.5, ss=target)
    nroots = min(4, ndet)
    _, vectors = solver.kernel(h1e, eri, norb, nelec, nroots=nroots)
    vectors = np.array([np.asarray(c).reshape(-1) for c in np.reshape(vectors, (nroots, -1))])
    h2 = fci.direct_spin1.absorb_h1e(h1e, eri, norb, nelec, 0.5)
    hv = np.array([fci.direct_spin1.contract_2e(h2, v, norb, nelec).reshape(-1) for v in vectors])
    w, u = np.linalg.eigh(vectors @ hv.T)
    return _spin_resolved(w, u.T @ vectors, norb, nelec, target) or (None, None)


def solve_sector(
    h1e: np.ndarray,
    eri: np.ndarray,
    norb: int,
    nelec: tuple[int, int],
    *,
    ecore: float = 0.0,
    spin: float | None = None,
) -> SectorSolution:
    """Lowest eigenstate(s) of the Hamiltonian with fixed ``(n_alpha, n_beta)`` and total spin.

    See the module docstring for the method (dense or Davidson, spin-purified degenerate
    ground space).

    Args:
        h1e: (norb, norb) one-electron integrals.
        eri: two-electron integrals (pq|rs), full or packed.
        norb: spatial orbitals.
        nelec: (n_alpha, n_beta).
        ecore: constant added to the energy.
        spin: target S; default |Ms| = |n_alpha - n_beta| / 2 (the high-spin component).

    Returns:
        :class:`SectorSolution`; it also unpacks as ``(energy, <S^2>, first vector)``.

    Raises:
        ConfigError: ``spin`` impossible for ``nelec``.
        ChemistryError: no eigenstate with that spin was found.

    Example:
        H2/STO-3G at 0.74 Å, ``nelec=(1, 1)``: energy -1.137284 Eh with ``ecore`` (PySCF FCI),
        ``spin_square`` 0, one vector.
    """
    nelec = (int(nelec[0]), int(nelec[1]))
    s = _check_spin(nelec, spin)
    target = s * (s + 1)
    ndet = n_determinants(norb, nelec)
    h1e = np.asarray(h1e, dtype=np.float64)
    eri = np.asarray(eri, dtype=np.float64)
    if ndet <= DENSE_MAX_DETERMINANTS:
        w, u = _dense(h1e, eri, norb, nelec, ndet)
        found = _spin_resolved(w, u.T, norb, nelec, target)
        e, vecs = found if found is not None else (None, None)
    else:
        e, vecs = _davidson(h1e, eri, norb, nelec, ndet, target)
    if e is None:
        raise ChemistryError(
            f"no eigenstate with S={s:g} found in the (n_alpha, n_beta)={nelec} sector; "
            "check the multiplicity"
        )
    vecs = _fix_phase(vecs)
    ss = float(np.mean([civec_spin_square(v, norb, nelec) for v in vecs]))
    return SectorSolution(energy=float(e) + float(ecore), spin=s, spin_square=ss, vectors=vecs)


def _fix_phase(vectors: np.ndarray) -> np.ndarray:
    """Largest-magnitude entry of each vector made positive (reproducible files)."""
    out = np.array(vectors, dtype=np.float64)
    for v in out:
        i = int(np.argmax(np.abs(v)))
        if v[i] < 0:
            v *= -1.0
    return out
