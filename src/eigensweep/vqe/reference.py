"""The exact reference in the optimize problem's frame, and what a state's quantum numbers are.

The exact reference is the one computed by the integrals stage
(:func:`eigensweep.chem.exact.solve_sector`: lowest energy with the requested ``N`` and total
spin ``S``, its degenerate ground space as CI vectors). Here it is only *carried* to the frame
the ansatz lives in, never recomputed:

* determinant space: the CI vectors themselves;
* the qubit encoding of ``mapping``: :func:`~eigensweep.qubit.mapping.encode_state`;
* a tapered problem: the encoded vectors tapered with the taper stage's own Clifford and sector
  (:meth:`~eigensweep.qubit.SectorReduction.taper_state`, Bravyi et al. 2017, arXiv:1701.08213),
  then an orthonormal basis of their span (:meth:`ExactReference.sector_vectors`): a
  degenerate ground space may lie partly in other Z2 sectors (O2 1Delta_g).

The overlap of a state with the reference is its weight in the ground space,
``sum_i |<v_i|psi>|^2`` over the orthonormal ground-space vectors: deterministic, independent
of how a degenerate space is spanned, and at most 1.

:func:`state_moments` gives ``<N>`` and ``<S^2>`` (and :func:`state_rdm1` the spin-summed
1-RDM, for dipoles and natural occupations) of any optimized state: a determinant-space
CI vector directly, a qubit state after undoing tapering and the encoding (``S^2`` conserves
``N_alpha`` and ``N_beta``, so each ``(N_alpha, N_beta)`` block contributes separately; PySCF
``fci.spin_op.contract_ss`` applies ``S^2`` in a block).
"""

from __future__ import annotations

import math
from dataclasses import dataclass
from typing import TYPE_CHECKING

import numpy as np

from ..chem.exact import DEGENERACY_TOL, civec_spin_square, solve_sector

if TYPE_CHECKING:
    from ..qubit.pauli import PauliExpansion
    from ..qubit.taper import SectorReduction

__all__ = [
    "ExactReference",
    "MOMENTS_MAX_QUBITS",
    "SECTOR_CHECK_MAX_QUBITS",
    "check_qubit_problem",
    "state_civec",
    "state_moments",
    "state_rdm1",
]

#: Largest user-given operator diagonalised densely for an overlap.
OPERATOR_OVERLAP_MAX_QUBITS = 10

#: Above this many (untapered) qubits ``<N>`` and ``<S^2>`` of a qubit state are not computed.
MOMENTS_MAX_QUBITS = 20


@dataclass(eq=False)
class ExactReference:
    """The exact sector energy and ground space of one set of active-space integrals.

    Attributes:
        energy: total energy (hartree); nan when unknown (CASCI skipped).
        vectors: ``(k, n_determinants)`` orthonormal flat CI vectors of the ``nelec`` sector
            (PySCF string order); ``(0, 0)`` when unknown.
        norb, nelec: the sector.
    """

    energy: float
    vectors: np.ndarray
    norb: int
    nelec: tuple[int, int]

    @classmethod
    def solve(
        cls, h1e: np.ndarray, eri: np.ndarray, e_core: float, norb: int, nelec: tuple[int, int]
    ) -> ExactReference:
        """Compute it with the one exact solver (for callers without an integrals stage file)."""
        sol = solve_sector(h1e, eri, int(norb), nelec, ecore=float(e_core))
        return cls(sol.energy, sol.vectors, int(norb), (int(nelec[0]), int(nelec[1])))

    @classmethod
    def from_integrals(cls, ints) -> ExactReference:
        """The reference stored in an :class:`~eigensweep.chem.IntegralsResult`."""
        return cls(
            float(ints.references["casci"]),
            np.asarray(ints.exact_vectors),
            int(ints.norb),
            (int(ints.nelec[0]), int(ints.nelec[1])),
        )

    @property
    def known(self) -> bool:
        """Whether the energy and the ground space are available."""
        return self.vectors.size > 0 and math.isfinite(self.energy)

    def qubit_vectors(self, mapping: str, tapering: SectorReduction | None = None) -> np.ndarray:
        """Ground-space vectors as statevectors of ``mapping`` (tapered when ``tapering`` has
        generators); shape ``(k, 2**n_qubits)``."""
        from ..qubit.mapping import encode_state
        from .detspace import to_qubit_state

        out = []
        for v in self.vectors:
            psi = encode_state(to_qubit_state(v, self.norb, self.nelec), mapping)
            if tapering is not None and tapering.generators.n_terms > 0:
                psi = tapering.taper_state(psi)
            out.append(psi)
        return np.array(out)

    def sector_vectors(self, mapping: str, tapering: SectorReduction | None = None) -> np.ndarray:
        """Orthonormal basis of the ground space's part in the problem's symmetry sector.

        Untapered, these are :meth:`qubit_vectors`. Tapering keeps one Z2 sector (chosen from
        the reference determinant), and a degenerate ground space may span several sectors:
        the O2 1Delta_g pair has one component of each of two D2h symmetries, and a vector of
        the stored basis is in general a combination of both. ``H`` commutes with the
        symmetries, so the ground space is invariant under the sector projector ``P`` and
        ``P G`` is the projector onto the ground states inside the sector; its range is
        spanned by the tapered vectors, whose Gram matrix has eigenvalues 0 or 1 only. The
        basis returned is the singular vectors of weight above one half (deterministic SVD).

        Returns:
            ``(k', 2**n_qubits)``; ``k' = 0`` when the sector holds no exact ground state.
        """
        frame = self.qubit_vectors(mapping, tapering)
        if tapering is None or tapering.generators.n_terms == 0 or frame.shape[0] == 0:
            return frame
        _, s, vh = np.linalg.svd(frame, full_matrices=False)
        return vh[s**2 > 0.5]

    def overlap(self, state: np.ndarray, frame: np.ndarray | None = None) -> float:
        """Weight of ``state`` in the ground space: ``sum_i |<v_i|state>|^2``.

        Args:
            state: a flat CI vector (``frame`` None) or a statevector.
            frame: orthonormal ground-space vectors in the state's frame
                (:meth:`sector_vectors`).
        """
        if not self.known:
            return math.nan
        basis = self.vectors if frame is None else frame
        amp = basis.conj() @ np.asarray(state).reshape(-1)
        return float(np.sum(np.abs(amp) ** 2))

    def operator_overlap(self, state: np.ndarray, ham: PauliExpansion) -> float:
        """Overlap for a user-given qubit operator whose frame is unknown.

        The operator is diagonalised densely (deterministic; up to
        :data:`OPERATOR_OVERLAP_MAX_QUBITS` qubits); when its lowest eigenvalue equals the exact
        energy (1e-6 Eh) the state's weight in that eigenspace is returned, else nan.
        """
        if not math.isfinite(self.energy) or ham.n_qubits > OPERATOR_OVERLAP_MAX_QUBITS:
            return math.nan
        vals, vecs = np.linalg.eigh(ham.sparse_matrix().toarray())
        if abs(vals[0] - self.energy) > 1e-6:
            return math.nan
        ground = vecs[:, np.abs(vals - vals[0]) < DEGENERACY_TOL]
        return float(np.sum(np.abs(ground.conj().T @ np.asarray(state).reshape(-1)) ** 2))


def state_moments(
    state: np.ndarray,
    norb: int,
    nelec: tuple[int, int],
    *,
    mapping: str | None = None,
    tapering: SectorReduction | None = None,
) -> tuple[float, float]:
    """``(<N>, <S^2>)`` of a normalised state.

    Args:
        state: flat CI vector of the ``nelec`` sector (``mapping`` None) or a statevector in
            ``mapping``'s encoding, tapered by ``tapering`` when it has generators.
        norb, nelec: active space (``nelec`` is only used for a CI vector).
        mapping: the encoding of a statevector.
        tapering: the tapering of a tapered statevector.

    Returns:
        ``(nan, nan)`` above :data:`MOMENTS_MAX_QUBITS` qubits.
    """
    norb = int(norb)
    if mapping is None:
        return float(sum(nelec)), civec_spin_square(state, norb, nelec)
    if 2 * norb > MOMENTS_MAX_QUBITS:
        return math.nan, math.nan
    psi = np.asarray(state, dtype=np.complex128).reshape(-1)
    if tapering is not None and tapering.generators.n_terms > 0:
        psi = tapering.untaper_state(psi)
    return _encoded_moments(psi, norb, mapping)


def _encoded_blocks(psi: np.ndarray, norb: int, mapping: str):
    """``((n_alpha, n_beta), CI block)`` of a statevector in ``mapping``'s encoding, for every
    block with weight (PySCF string order, complex)."""
    from ..qubit.mapping import encoding_matrix
    from .detspace import DetSpace, qubit_indices

    n_q = 2 * norb
    a = encoding_matrix(n_q, mapping).astype(np.int64)
    shifts = np.arange(n_q - 1, -1, -1, dtype=np.int64)  # qubit k is bit n - 1 - k
    for na in range(norb + 1):
        for nb in range(norb + 1):
            idx = qubit_indices(norb, (na, nb)).reshape(-1)
            occ = (idx[:, None] >> shifts[None, :]) & 1
            enc = ((occ @ a.T) & 1) @ (np.int64(1) << shifts)
            space = DetSpace(norb, (na, nb))
            block = psi[enc] * space.interleave_signs().reshape(-1)
            if float(np.vdot(block, block).real) >= 1e-14:
                yield (na, nb), block


def state_civec(
    state: np.ndarray,
    norb: int,
    nelec: tuple[int, int],
    mapping: str,
    tapering: SectorReduction | None = None,
) -> np.ndarray:
    """The ``nelec`` block of a (tapered) statevector in ``mapping``'s encoding as a real flat
    CI vector (PySCF string order): tapering undone, the global phase of the largest
    amplitude removed (number-conserving real ansätze give real CI vectors up to that phase).

    Raises:
        ValueError: the block is not real after removing the phase (then the state is no
            real CI vector and the determinant-space tools do not apply).
    """
    psi = np.asarray(state, dtype=np.complex128).reshape(-1)
    if tapering is not None and tapering.generators.n_terms > 0:
        psi = tapering.untaper_state(psi)
    want = (int(nelec[0]), int(nelec[1]))
    for ne, block in _encoded_blocks(psi, int(norb), mapping):
        if ne != want:
            continue
        big = block[int(np.argmax(np.abs(block)))]
        block = block * (abs(big) / big)
        if float(np.linalg.norm(block.imag)) > 1e-8 * max(1.0, float(np.linalg.norm(block))):
            raise ValueError("the state's CI vector is not real up to a global phase")
        return np.ascontiguousarray(block.real)
    from .detspace import DetSpace

    return np.zeros(DetSpace(int(norb), want).dim)


def _encoded_moments(psi: np.ndarray, norb: int, mapping: str) -> tuple[float, float]:
    """``<N>``, ``<S^2>`` of a statevector in ``mapping``'s encoding, block by block."""
    from pyscf.fci import spin_op

    n_mean = s2 = 0.0
    for (na, nb), block in _encoded_blocks(psi, norb, mapping):
        n_mean += (na + nb) * float(np.vdot(block, block).real)
        if na + nb == 0:
            continue
        for part in (block.real, block.imag):
            if np.any(part):
                s2 += float(part @ spin_op.contract_ss(part, norb, (na, nb)).reshape(-1))
    return n_mean, s2


def state_rdm1(
    state: np.ndarray,
    norb: int,
    nelec: tuple[int, int],
    *,
    mapping: str | None = None,
    tapering: SectorReduction | None = None,
) -> np.ndarray:
    """Spin-summed 1-RDM ``D_pq = <a_q^+ a_p>`` (PySCF ``fci.direct_spin1.make_rdm1``) of a
    normalised state: a CI vector of ``nelec`` or a (tapered) statevector in ``mapping``'s
    encoding (every particle-number block contributes); symmetrised (real part).

    Returns:
        (norb, norb); all nan above :data:`MOMENTS_MAX_QUBITS` qubits.
    """
    from pyscf.fci import direct_spin1

    norb = int(norb)
    if mapping is None:
        blocks = [((int(nelec[0]), int(nelec[1])), np.asarray(state).reshape(-1))]
    elif 2 * norb > MOMENTS_MAX_QUBITS:
        return np.full((norb, norb), math.nan)
    else:
        psi = np.asarray(state, dtype=np.complex128).reshape(-1)
        if tapering is not None and tapering.generators.n_terms > 0:
            psi = tapering.untaper_state(psi)
        blocks = list(_encoded_blocks(psi, norb, mapping))
    out = np.zeros((norb, norb))
    for ne, block in blocks:
        if sum(ne) == 0:
            continue
        for part in (np.real(block), np.imag(block)):
            if np.any(part):
                out += direct_spin1.make_rdm1(np.ascontiguousarray(part, float), norb, ne)
    return 0.5 * (out + out.T)


#: Largest qubit count for which the hamiltonian and taper stages check the exact state.
SECTOR_CHECK_MAX_QUBITS = 20
#: Largest residual ``||H psi - E psi||`` (hartree) accepted for the exact state.
SECTOR_CHECK_TOL = 1e-6


def check_qubit_problem(
    ham: PauliExpansion,
    exact: ExactReference,
    mapping: str,
    key: str,
    tapering: SectorReduction | None = None,
) -> dict:
    """Check that the exact state, carried into the qubit problem, is an eigenstate there.

    The exact ground space (stored by the integrals stage) is written in ``mapping``'s
    encoding and tapered with ``tapering``; every ground state inside the tapered sector
    (:meth:`ExactReference.sector_vectors`, normalised) must satisfy ``H psi = E_exact psi``
    with the qubit Hamiltonian ``ham``. A residual above :data:`SECTOR_CHECK_TOL` means the
    mapping or the tapering lost the state (wrong sector, wrong encoding): that is an error,
    and so is a sector that holds none of the ground states.

    Returns:
        ``{"energy_sector_qubit": <psi|H|psi>, "sector_check": note}``; skipped (None and a
        reason) above :data:`SECTOR_CHECK_MAX_QUBITS` qubits or without a stored exact state.

    Raises:
        StageFileError: the residual is too large, or the sector holds no ground state.
    """
    from ..errors import StageFileError
    from ..qubit.statevector import apply_pauli_expansion

    if ham.n_qubits > SECTOR_CHECK_MAX_QUBITS or not exact.known:
        return {
            "energy_sector_qubit": None,
            "sector_check": "skipped (too large or no exact reference)",
        }
    frame = exact.sector_vectors(mapping, tapering)
    size = exact.qubit_vectors(mapping, tapering).shape[1]
    if size != 1 << ham.n_qubits:
        raise StageFileError(
            f"{key}: the exact state has {size} amplitudes but the {mapping} qubit problem "
            f"{ham.n_qubits} qubits; the tapering does not belong to this Hamiltonian"
        )
    if frame.shape[0] == 0:
        raise StageFileError(
            f"{key}: the symmetry sector chosen from the reference determinant holds no exact "
            f"ground state (the ground state has another point-group or spin-parity symmetry); "
            f"set taper: [false] for this molecule"
        )
    energy, residual = math.nan, 0.0
    for psi in frame:  # every ground state in the sector: H psi = E psi
        h_psi = apply_pauli_expansion(psi, ham)
        e = float(np.vdot(psi, h_psi).real)
        energy = e if not math.isfinite(energy) else min(energy, e)
        residual = max(residual, float(np.linalg.norm(h_psi - exact.energy * psi)))
        if residual > SECTOR_CHECK_TOL or abs(e - exact.energy) > SECTOR_CHECK_TOL:
            raise StageFileError(
                f"{key}: the exact state is not an eigenstate of the {mapping} qubit "
                f"Hamiltonian (energy {e:.10f} Eh vs exact {exact.energy:.10f} Eh, residual "
                f"{residual:.2e}); the mapping or tapering lost the state, please report this"
            )
    n_in = frame.shape[0]
    return {
        "energy_sector_qubit": energy,
        "sector_check": (
            f"the exact state is an eigenstate here (residual {residual:.1e} Eh; "
            f"{n_in} of {exact.vectors.shape[0]} ground states in this sector)"
        ),
    }
