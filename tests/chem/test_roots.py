"""Excited exact roots, dipole integrals and the HF dipole stored by the integrals stage.

References: PySCF computed here on the same molecules (FCI with ``fci.addons.fix_spin_`` and
``fci.spin_square``, ``fci.direct_spin1.make_rdm1`` / ``trans_rdm1`` on PySCF's own FCI
vectors, ``scf.hf.dip_moment``).
"""

from __future__ import annotations

from functools import cache

import numpy as np
import pytest
from pyscf import fci, gto, scf

from eigensweep.chem import compute_integrals
from eigensweep.chem.exact import solve_sector

H2 = "H 0 0 0; H 0 0 0.74"
LIH = "Li 0 0 0; H 0 0 1.6"


@cache
def ours(atoms: str, basis: str, nroots: int = 3):
    return compute_integrals(atoms=atoms, basis=basis, nroots=nroots)


@cache
def pyscf_fci(atoms: str, basis: str, nroots: int = 8):
    """PySCF RHF and a full-space FCI with ``nroots`` roots (no spin restriction)."""
    mol = gto.M(atom=atoms, basis=basis, symmetry=True, verbose=0)
    mf = scf.RHF(mol)
    mf.conv_tol = 1e-12
    mf.kernel()
    solver = fci.direct_spin1.FCI(mol)
    solver.conv_tol = 1e-12
    e, c = solver.kernel(_h1(mf), _eri(mf), mol.nao, mol.nelec, nroots=nroots)
    return mol, mf, np.asarray(e) + mol.energy_nuc(), [np.asarray(v) for v in c]


def _h1(mf):
    c = mf.mo_coeff
    return c.T @ mf.get_hcore() @ c


def _eri(mf):
    from pyscf import ao2mo

    return ao2mo.restore(1, ao2mo.kernel(mf.mol, mf.mo_coeff), mf.mol.nao)


def _spin_filter(mol, e, c, s2_target):
    keep = [
        i
        for i, v in enumerate(c)
        if abs(fci.spin_square(v, mol.nao, mol.nelec)[0] - s2_target) < 1e-6
    ]
    return e[keep], [c[i] for i in keep]


def _ao_dipole(mf, dm_mo):
    """PySCF's own dipole of an MO-basis density (origin 0, atomic units)."""
    c = mf.mo_coeff
    return scf.hf.dip_moment(mf.mol, c @ dm_mo @ c.T, unit="AU", verbose=0)


@pytest.mark.parametrize("atoms,basis", [(H2, "6-31g"), (LIH, "sto-3g")])
def test_spin_fixed_roots_match_pyscf_fci_singlets(atoms, basis):
    res = ours(atoms, basis)
    mol, _, e, c = pyscf_fci(atoms, basis)
    singlets, _ = _spin_filter(mol, e, c, 0.0)
    # reference: PySCF FCI roots, keeping those with <S^2> = 0 (fci.spin_square)
    assert np.allclose(res.exact_roots, singlets[:3], atol=1e-8)
    assert np.allclose(res.exact_roots_spin_square, 0.0, atol=1e-8)
    # reference: PySCF FCI roots of the whole S_z = 0 sector, any spin
    assert np.allclose(res.exact_sz_roots, e[:3], atol=1e-8)
    assert res.references["casci"] == pytest.approx(singlets[0], abs=1e-8)


def test_h2_triplet_lies_between_the_singlets_of_the_sz0_sector():
    res = ours(H2, "6-31g")
    # reference: PySCF fci.spin_square of PySCF's second root (the b 3Sigma_u+ state)
    mol, _, e, c = pyscf_fci(H2, "6-31g")
    assert fci.spin_square(c[1], mol.nao, mol.nelec)[0] == pytest.approx(2.0, abs=1e-6)
    assert res.exact_sz_roots_spin_square[1] == pytest.approx(2.0, abs=1e-8)
    assert res.exact_roots[1] > res.exact_sz_roots[1]


def test_hf_dipole_equals_pyscf_dip_moment():
    res = ours(LIH, "sto-3g")
    mol = gto.M(atom=LIH, basis="sto-3g", symmetry=True, verbose=0)
    mf = scf.RHF(mol).run(conv_tol=1e-12)
    # reference: PySCF scf.hf.dip_moment in atomic units (its default unit is debye), origin 0
    ref = scf.hf.dip_moment(mol, mf.make_rdm1(), unit="AU", verbose=0)
    assert np.allclose(res.dipole_hf, ref, atol=1e-6)
    debye = scf.hf.dip_moment(mol, mf.make_rdm1(), verbose=0)
    from eigensweep.chem.properties import AU_TO_DEBYE

    assert np.allclose(res.dipole_hf * AU_TO_DEBYE, debye, atol=1e-5)


@pytest.mark.parametrize("atoms,basis", [(H2, "6-31g"), (LIH, "sto-3g")])
def test_root_dipoles_and_transition_dipoles_match_pyscf_density_matrices(atoms, basis):
    res = ours(atoms, basis)
    mol, mf, e, c = pyscf_fci(atoms, basis)
    _, singlets = _spin_filter(mol, e, c, 0.0)
    n = mol.nao
    for k in range(3):
        dm = fci.direct_spin1.make_rdm1(singlets[k], n, mol.nelec)
        # reference: PySCF dipole of PySCF's FCI density (scf.hf.dip_moment)
        assert np.allclose(res.exact_roots_dipole[k], _ao_dipole(mf, dm), atol=1e-6)
    for k in (1, 2):
        t = fci.direct_spin1.trans_rdm1(singlets[0], singlets[k], n, mol.nelec)
        with mol.with_common_orig((0, 0, 0)):
            ao = mol.intor_symmetric("int1e_r")
        mo = np.einsum("ui,xuv,vj->xij", mf.mo_coeff, ao, mf.mo_coeff)
        tdm = -np.einsum("xpq,pq->x", mo, t)
        # reference: PySCF trans_rdm1 with PySCF's AO dipole integrals; the sign is arbitrary
        assert np.linalg.norm(res.exact_roots_transition_dipole[k]) == pytest.approx(
            np.linalg.norm(tdm), abs=1e-6
        )
    assert np.allclose(res.exact_roots_transition_dipole[0], 0.0)


def test_solver_roots_and_sector_roots_of_a_dense_sector():
    res = ours(H2, "6-31g")
    sol = solve_sector(res.h1e, res.eri, res.norb, res.nelec, ecore=res.e_core, nroots=20)
    # 6-31G H2 has 4 orbitals: 10 singlets and 6 triplets (M_s = 0) in 16 determinants
    # (common practice: C(4,1)^2 = 16 = 10 spatially symmetric + 6 antisymmetric pairs)
    assert len(sol.roots) == 10 and np.all(np.diff(sol.roots) >= -1e-12)
    assert sol.sector_roots.size == 0
