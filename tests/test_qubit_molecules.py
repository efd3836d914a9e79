"""Molecular integrals and classical references for the qubit-library tests (computed once).

Other ``test_qubit_*`` modules import :func:`molecule` from here (pytest puts ``tests/`` on the
path). Integrals come straight from PySCF (RHF, STO-3G, symmetry-adapted orbitals, no frozen
core), independent of eigensweep's own integrals stage.
"""

from __future__ import annotations

import functools
import math
from dataclasses import dataclass

import numpy as np
import pytest
from pyscf import ao2mo, fci, gto, scf

_HALF_ANGLE = math.radians(104.48) / 2
_R_OH = 0.9578
GEOMETRIES = {  # Angstrom
    "h2": "H 0 0 0; H 0 0 0.74",
    "lih": "Li 0 0 0; H 0 0 1.595",
    "beh2": "Be 0 0 0; H 0 0 1.326; H 0 0 -1.326",
    "h2o": (
        f"O 0 0 0; H 0 {_R_OH * math.sin(_HALF_ANGLE)} {_R_OH * math.cos(_HALF_ANGLE)}; "
        f"H 0 {-_R_OH * math.sin(_HALF_ANGLE)} {_R_OH * math.cos(_HALF_ANGLE)}"
    ),
    "n2": "N 0 0 0; N 0 0 1.098",
}


@dataclass(frozen=True)
class Molecule:
    name: str
    h1e: np.ndarray
    eri: np.ndarray
    e_core: float
    nelec: tuple[int, int]
    norb: int
    e_hf: float
    e_fci: float | None


@functools.cache
def molecule(name: str, with_fci: bool = True) -> Molecule:
    """RHF/STO-3G integrals in symmetry-adapted MOs, plus HF and FCI energies from PySCF."""
    mol = gto.M(atom=GEOMETRIES[name], basis="sto-3g", symmetry=True, verbose=0)
    mf = scf.RHF(mol)
    mf.conv_tol = 1e-12
    mf.kernel()
    assert mf.converged
    c = mf.mo_coeff
    norb = c.shape[1]
    h1e = c.T @ mf.get_hcore() @ c
    eri = ao2mo.restore(1, ao2mo.kernel(mol, c), norb)
    e_fci = None
    if with_fci:
        # lowest state with these (N_alpha, N_beta), any irrep: the same sector the qubit code
        # restricts to (reference: PySCF FCI computed at test time)
        solver = fci.direct_spin1.FCI()
        solver.conv_tol = 1e-12
        e_fci, _ = solver.kernel(h1e, eri, norb, mol.nelec, ecore=mol.energy_nuc())
    return Molecule(
        name, h1e, eri, float(mol.energy_nuc()), mol.nelec, norb, float(mf.e_tot), e_fci
    )


def test_h2_reference_values_match_handbook():
    # Szabo & Ostlund (1996), from memory via ../shared/notes: FCI about -1.1373 Eh near 0.74 Å
    m = molecule("h2")
    assert m.e_fci == pytest.approx(-1.1373, abs=2e-4)
    assert m.e_hf == pytest.approx(-1.1167, abs=2e-4)


def test_integrals_are_real_symmetric():
    # common practice: real orbitals give 8-fold symmetric (pq|rs)
    m = molecule("lih")
    assert np.allclose(m.h1e, m.h1e.T, atol=1e-12)
    assert np.allclose(m.eri, m.eri.transpose(1, 0, 2, 3), atol=1e-12)
    assert np.allclose(m.eri, m.eri.transpose(2, 3, 0, 1), atol=1e-12)
