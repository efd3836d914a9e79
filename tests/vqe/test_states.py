"""Properties of optimized states and the excited-state methods (``methods.states``).

References: PySCF computed here (FCI roots with ``fci.spin_square``, FCI densities and
transition densities from ``fci.direct_spin1.make_rdm1`` / ``trans_rdm1``, dipoles from
``scf.hf.dip_moment`` on PySCF's own AO dipole integrals).
"""

from __future__ import annotations

from functools import cache

import numpy as np
import pytest
from fixtures import run_plan
from pyscf import ao2mo, fci, gto, scf

from eigensweep.stages import load_integrals
from eigensweep.store import read_stage

LIH = "Li 0 0 0; H 0 0 {r}"
H2 = "H 0 0 0; H 0 0 {r}"


@cache
def pyscf_fci(atoms: str, basis: str, nroots: int = 8):
    """PySCF RHF + full-space FCI roots (no spin restriction) and AO->MO dipole integrals."""
    mol = gto.M(atom=atoms, basis=basis, symmetry=True, verbose=0)
    mf = scf.RHF(mol)
    mf.conv_tol = 1e-12
    mf.kernel()
    c = mf.mo_coeff
    h1 = c.T @ mf.get_hcore() @ c
    eri = ao2mo.restore(1, ao2mo.kernel(mol, c), mol.nao)
    solver = fci.direct_spin1.FCI(mol)
    solver.conv_tol = 1e-12
    e, v = solver.kernel(h1, eri, mol.nao, mol.nelec, nroots=nroots)
    return mol, mf, np.asarray(e) + mol.energy_nuc(), [np.asarray(x) for x in v]


def pyscf_dipole(mf, dm_mo):
    """PySCF's dipole (atomic units, origin 0) of an MO-basis 1-RDM."""
    c = mf.mo_coeff
    return scf.hf.dip_moment(mf.mol, c @ dm_mo @ c.T, unit="AU", verbose=0)


def _config(atoms, basis, rs, states=None, nroots=1, ansatz=None):
    methods = {"ansatz": [ansatz or {"name": "uccsd"}]}
    if states is not None:
        methods["states"] = states
    return {
        "molecules": [{"name": "m", "atoms": atoms, "basis": basis, "scan": {"r": rs}}],
        "methods": methods,
        "references": {"nroots": nroots},
    }


def test_lih_uccsd_ground_dipole_matches_pyscf_fci_dipole(tmp_path):
    _, plan = run_plan(_config(LIH, "sto-3g", [1.6]), tmp_path)
    opt = read_stage(tmp_path / "optimize" / f"{plan.rows[0]['key']}.h5", stage="optimize")
    mol, mf, e, c = pyscf_fci("Li 0 0 0; H 0 0 1.6", "sto-3g")
    ref = pyscf_dipole(mf, fci.direct_spin1.make_rdm1(c[0], mol.nao, mol.nelec))
    # reference: PySCF FCI density of the lowest root (a singlet), PySCF dip_moment in a.u.
    assert np.allclose(opt.arrays["dipole"], ref, atol=1e-3)
    assert abs(np.linalg.norm(ref)) > 1.5  # LiH is strongly polar (about 2 a.u.; from memory)
    occ = opt.arrays["natural_occupations"]
    # natural occupations of a 4-electron singlet sum to 4 and lie in [0, 2] (common practice)
    assert occ.sum() == pytest.approx(4.0, abs=1e-8) and occ.max() <= 2 + 1e-10
    ints = load_integrals(tmp_path / "integrals" / f"{plan.rows[0]['key_integrals']}.h5")
    # reference: PySCF scf.hf.dip_moment of the RHF density
    assert np.allclose(
        ints.dipole_hf, scf.hf.dip_moment(mol, mf.make_rdm1(), unit="AU", verbose=0), atol=1e-6
    )


@pytest.mark.parametrize("taper", [False, True])
def test_active_space_dipole_on_statevector_and_det_space_matches_pyscf_casci(tmp_path, taper):
    from pyscf import mcscf

    cfg = _config(LIH, "sto-3g", [1.6])
    cfg["molecules"][0]["active"] = {"electrons": 2, "orbitals": 2}
    cfg["methods"]["taper"] = [taper]
    _, plan = run_plan(cfg, tmp_path)
    opt = read_stage(tmp_path / "optimize" / f"{plan.rows[0]['key']}.h5", stage="optimize")
    mol = gto.M(atom="Li 0 0 0; H 0 0 1.6", basis="sto-3g", symmetry=True, verbose=0)
    mf = scf.RHF(mol).run(conv_tol=1e-12)
    mc = mcscf.CASCI(mf, 2, 2)
    mc.verbose = 0
    mc.kernel()
    # reference: PySCF CASCI density (frozen core included), PySCF dip_moment in a.u.
    ref = scf.hf.dip_moment(mol, mc.make_rdm1(), unit="AU", verbose=0)
    assert np.allclose(opt.arrays["dipole"], ref, atol=1e-3)
    assert opt.meta["n_qubits"] < 4 if taper else opt.meta["n_qubits"] == 4
