"""Molecular properties of a state from its one-particle density matrix (NumPy only).

One home for the property formulas used by the integrals stage (HF, exact roots) and the
optimize stage (every optimized state):

* dipole moment ``mu = mu_nuc - mu_core - sum_pq D_pq <p|r|q>`` with the spin-summed active
  1-RDM ``D_pq = <a_q^dagger a_p>`` (PySCF's ``make_rdm1`` convention; real states, so the order
  does not matter), the active-MO dipole integrals ``<p|r|q>``, the frozen-core electronic part
  ``mu_core = 2 sum_i <i|r|i>`` and the nuclear part ``mu_nuc = sum_A Z_A R_A``;
* transition dipole ``<0|mu|k> = -sum_pq T_pq <p|r|q>`` with the transition 1-RDM
  ``T_pq = <0|a_q^dagger a_p|k>`` (nuclear and core parts vanish by orthogonality);
* oscillator strength ``f = (2/3) dE |<0|mu|k>|^2`` in atomic units (length gauge;
  e.g. Hilborn, Am. J. Phys. 50, 982 (1982));
* natural-orbital occupation numbers: eigenvalues of the spin-summed 1-RDM
  (Löwdin, Phys. Rev. 97, 1474 (1955)), descending, between 0 and 2.

Origin and frame: dipole integrals are taken about the coordinate origin of the molecule's
frame (PySCF's standard orientation when point-group symmetry is used, the input frame
otherwise), the same origin PySCF's ``scf.hf.dip_moment`` uses. The dipole of a neutral
molecule does not depend on the origin; that of an ion does. Units: atomic units (e a0);
``AU_TO_DEBYE`` converts.
"""

from __future__ import annotations

import numpy as np

__all__ = [
    "AU_TO_DEBYE",
    "dipole_from_rdm1",
    "natural_occupations",
    "oscillator_strength",
    "transition_dipole",
]

#: 1 e a0 in debye (CODATA 2018: e a0 = 8.4783536e-30 C m, 1 D = 3.33564095e-30 C m).
AU_TO_DEBYE = 2.541746473


def dipole_from_rdm1(
    rdm1: np.ndarray, dipole_active: np.ndarray, dipole_core: np.ndarray, dipole_nuclear: np.ndarray
) -> np.ndarray:
    """Total dipole vector (e a0) of a state with spin-summed active 1-RDM ``rdm1``.

    Args:
        rdm1: (norb, norb) spin-summed active 1-RDM.
        dipole_active: (3, norb, norb) ``<p|r|q>`` in the active MOs (bohr).
        dipole_core: (3,) electronic position sum of the doubly occupied inactive orbitals.
        dipole_nuclear: (3,) ``sum_A Z_A R_A``.

    Returns:
        (3,) ``mu_nuc - mu_core - tr(D r)``.
    """
    el = np.einsum("xpq,pq->x", np.asarray(dipole_active), np.asarray(rdm1))
    return np.asarray(dipole_nuclear, float) - np.asarray(dipole_core, float) - el


def transition_dipole(trdm1: np.ndarray, dipole_active: np.ndarray) -> np.ndarray:
    """Transition dipole vector (e a0) from a spin-summed transition 1-RDM."""
    return -np.einsum("xpq,pq->x", np.asarray(dipole_active), np.asarray(trdm1))


def oscillator_strength(excitation_energy: float, tdm: np.ndarray) -> float:
    """``f = (2/3) dE |<0|mu|k>|^2`` (atomic units: hartree, e a0)."""
    t = np.asarray(tdm, dtype=float)
    return float(2.0 / 3.0 * excitation_energy * (t @ t))


def natural_occupations(rdm1: np.ndarray) -> np.ndarray:
    """Natural-orbital occupation numbers (descending) of a spin-summed 1-RDM."""
    d = np.asarray(rdm1, dtype=float)
    return np.sort(np.linalg.eigvalsh(0.5 * (d + d.T)))[::-1]
