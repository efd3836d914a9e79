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

Excited roots (``nroots > 1``): the lowest ``nroots`` spin-``S`` eigenstates (degenerate
partners counted one by one, spin-purified the same way), energies ascending, in
:attr:`SectorSolution.roots` / :attr:`SectorSolution.root_vectors`. With ``all_spins`` also
the lowest ``nroots`` eigenstates of the whole ``M_s`` sector, whatever their spin (each still
an ``S^2`` eigenstate), in the ``sector_*`` fields; the ground space stays the spin-``S`` one.
"""

from __future__ import annotations

import math
from dataclasses import dataclass, field

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
        roots: the lowest ``nroots`` eigenvalues asked for (hartree, ``ecore`` included),
            ascending; of spin ``spin`` unless ``all_spins`` was asked.
        root_vectors: ``(nroots, ndet)`` their orthonormal CI vectors.
        root_spin_squares: ``<S^2>`` of each root.
        sector_roots, sector_root_vectors, sector_root_spin_squares: the same for the lowest
            states of the whole ``M_s`` sector, any spin (only with ``all_spins``; else empty).
    """

    energy: float
    spin: float
    spin_square: float
    vectors: np.ndarray
    roots: np.ndarray = field(default_factory=lambda: np.zeros(0))
    root_vectors: np.ndarray = field(default_factory=lambda: np.zeros((0, 0)))
    root_spin_squares: np.ndarray = field(default_factory=lambda: np.zeros(0))
    sector_roots: np.ndarray = field(default_factory=lambda: np.zeros(0))
    sector_root_vectors: np.ndarray = field(default_factory=lambda: np.zeros((0, 0)))
    sector_root_spin_squares: np.ndarray = field(default_factory=lambda: np.zeros(0))

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


def _spin_clusters(
    energies: np.ndarray,
    vectors: np.ndarray,
    norb: int,
    nelec: tuple[int, int],
    target: float | None,
    count: int,
) -> list[tuple[float, np.ndarray, np.ndarray]] | None:
    """Lowest clusters of degenerate eigenpairs holding spin-``target`` states.

    ``energies`` ascending, ``vectors`` ``(k, ndet)`` orthonormal. Inside each cluster ``S^2``
    is diagonalised, so an accidental degeneracy of two spins is separated. Clusters are
    collected until they hold ``count`` states of spin ``target`` (any spin when ``target`` is
    None), or fewer when ``vectors`` span the whole sector. Returns ``[(energy, spin-pure
    vectors, their <S^2>)]`` or None; None also when the last cluster needed may continue past
    the last computed root (partners might be missing).
    """
    k = len(energies)
    start, found, out = 0, 0, []
    while start < k and found < count:
        stop = start + 1
        while stop < k and energies[stop] - energies[start] < DEGENERACY_TOL:
            stop += 1
        block = vectors[start:stop]
        ss_block = np.array([fci.spin_op.contract_ss(v, norb, nelec).reshape(-1) for v in block])
        s2 = block @ ss_block.T
        w, u = np.linalg.eigh(0.5 * (s2 + s2.T))
        keep = np.ones(len(w), bool) if target is None else np.abs(w - target) < SPIN_TOL
        if keep.any():
            if stop == k and k < vectors.shape[1]:
                return None  # the degenerate set may be cut off at the last root
            pure = u[:, keep].T @ block
            q, _ = np.linalg.qr(pure.T)
            out.append((float(np.mean(energies[start:stop])), np.ascontiguousarray(q.T), w[keep]))
            found += int(keep.sum())
        start = stop
    complete = k == vectors.shape[1]  # the whole sector: fewer states may exist
    return out if out and (found >= count or complete) else None


def _spin_resolved(
    energies: np.ndarray, vectors: np.ndarray, norb: int, nelec: tuple[int, int], target: float
) -> tuple[float, np.ndarray] | None:
    """Lowest cluster of degenerate eigenpairs that holds spin-``target`` states
    (:func:`_spin_clusters` with one state): ``(energy, spin-pure vectors)`` or None."""
    found = _spin_clusters(energies, vectors, norb, nelec, target, 1)
    return None if found is None else (found[0][0], found[0][1])


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


def _flat_vectors(vectors, nroots: int) -> np.ndarray:
    return np.array([np.asarray(c).reshape(-1) for c in np.reshape(vectors, (nroots, -1))])


def _davidson(h1e, eri, norb, nelec, ndet, target, count=1):
    """Davidson clusters holding ``count`` spin-``target`` states (any spin for None)."""
    solver = _make_solver()
    for nroots in _DAVIDSON_ROOTS + (count + 2,) * (count + 2 > _DAVIDSON_ROOTS[-1]):
        nroots = min(max(nroots, count + 1), ndet)
        energies, vectors = solver.kernel(h1e, eri, norb, nelec, nroots=nroots)
        energies = np.atleast_1d(np.asarray(energies, dtype=float))
        found = _spin_clusters(energies, _flat_vectors(vectors, nroots), norb, nelec, target, count)
        if found is not None:
            return found
        if nroots == ndet:
            break
    if target is None:
        return None
    # spin penalty: steer the solver to S(S+1), then re-evaluate energies without it
    solver = fci.addons.fix_spin_(_make_solver(), shift=0.5, ss=target)
    nroots = min(max(4, count + 2), ndet)
    _, vectors = solver.kernel(h1e, eri, norb, nelec, nroots=nroots)
    vectors = _flat_vectors(vectors, nroots)
    h2 = fci.direct_spin1.absorb_h1e(h1e, eri, norb, nelec, 0.5)
    hv = np.array([fci.direct_spin1.contract_2e(h2, v, norb, nelec).reshape(-1) for v in vectors])
    w, u = np.linalg.eigh(vectors @ hv.T)
    return _spin_clusters(w, u.T @ vectors, norb, nelec, target, min(count, nroots))


def _roots(clusters, nroots: int) -> tuple[np.ndarray, np.ndarray, np.ndarray]:
    """The first ``nroots`` states of a cluster list as (energies, vectors, <S^2>)."""
    e = [c[0] for c in clusters for _ in range(len(c[1]))][:nroots]
    v = np.concatenate([c[1] for c in clusters])[:nroots]
    s2 = np.concatenate([c[2] for c in clusters])[:nroots]
    return np.asarray(e, dtype=np.float64), _fix_phase(v), np.asarray(s2, dtype=np.float64)


def solve_sector(
    h1e: np.ndarray,
    eri: np.ndarray,
    norb: int,
    nelec: tuple[int, int],
    *,
    ecore: float = 0.0,
    spin: float | None = None,
    nroots: int = 1,
    all_spins: bool = False,
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
        nroots: how many of the lowest states to return in ``roots`` (fewer when the sector
            holds fewer); the ground space is returned either way.
        all_spins: also return the lowest ``nroots`` states of the whole ``M_s`` sector, any
            spin, in the ``sector_*`` fields.

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
    anyspin = None
    if ndet <= DENSE_MAX_DETERMINANTS:
        w, u = _dense(h1e, eri, norb, nelec, ndet)
        roots = _spin_clusters(w, u.T, norb, nelec, target, nroots)
        if all_spins:
            anyspin = _spin_clusters(w, u.T, norb, nelec, None, nroots)
    else:
        roots = _davidson(h1e, eri, norb, nelec, ndet, target, nroots)
        if all_spins:
            anyspin = _davidson(h1e, eri, norb, nelec, ndet, None, nroots)
    ground = roots
    if ground is None or (all_spins and anyspin is None):
        raise ChemistryError(
            f"no eigenstate with S={s:g} found in the (n_alpha, n_beta)={nelec} sector; "
            "check the multiplicity"
        )
    e, vecs = ground[0][0], _fix_phase(ground[0][1])
    ss = float(np.mean([civec_spin_square(v, norb, nelec) for v in vecs]))
    root_e, root_v, root_s2 = _roots(roots, nroots)
    sol = SectorSolution(
        energy=float(e) + float(ecore),
        spin=s,
        spin_square=ss,
        vectors=vecs,
        roots=root_e + float(ecore),
        root_vectors=root_v,
        root_spin_squares=root_s2,
    )
    if anyspin is not None:
        sec_e, sol.sector_root_vectors, sol.sector_root_spin_squares = _roots(anyspin, nroots)
        sol.sector_roots = sec_e + float(ecore)
    return sol


def _fix_phase(vectors: np.ndarray) -> np.ndarray:
    """Largest-magnitude entry of each vector made positive (reproducible files)."""
    out = np.array(vectors, dtype=np.float64)
    for v in out:
        i = int(np.argmax(np.abs(v)))
        if v[i] < 0:
            v *= -1.0
    return out
