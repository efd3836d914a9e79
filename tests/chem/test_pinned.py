"""Pinned numbers: eigensweep's integrals stage against energies written down once.

The values were computed with PySCF 2.14.0 on 2026-12-04 through PySCF's own drivers alone
(``gto.M``, ``scf.RHF`` with ``conv_tol = 1e-12``, ``fci.FCI(mf).kernel()``), not through
eigensweep. Other tests compare with PySCF at test time; these catch a change of the numbers
themselves (a PySCF upgrade, a basis-set file, a unit or geometry slip) at 1e-8 Eh. If a PySCF
upgrade moves them, recompute them the same way and say so in the commit.
"""

from __future__ import annotations

import pytest

from eigensweep.chem import compute_integrals

#: (atoms, unit, basis) -> (RHF total energy, FCI total energy, nuclear repulsion), hartree
PINNED = {
    "h2_sto3g_1.4bohr": (
        ("H 0 0 0; H 0 0 1.4", "bohr", "sto-3g"),
        (-1.116714325062551, -1.1372759436170439, 0.7142857142857143),
    ),
    "h2_631g_0.74": (
        ("H 0 0 0; H 0 0 0.74", "angstrom", "6-31g"),
        (-1.1267553171969642, -1.1516725449612368, 0.7151043390810812),
    ),
    "lih_sto3g_1.595": (
        ("Li 0 0 0; H 0 0 1.595", "angstrom", "sto-3g"),
        (-7.8620238601271195, -7.882401932290214, 0.995317638094044),
    ),
    "h2o_sto3g": (
        ("O 0 0 0; H 0 0.757 0.587; H 0 -0.757 0.587", "angstrom", "sto-3g"),
        (-74.96306312972918, -75.01264711899171, 9.188258417746113),
    ),
}


@pytest.mark.parametrize("case", sorted(PINNED))
def test_hf_fci_and_nuclear_repulsion_equal_pinned_pyscf_values(case):
    # reference: PySCF 2.14.0 values pinned above (computed with PySCF's own drivers)
    (atoms, unit, basis), (e_hf, e_fci, e_nuc) = PINNED[case]
    res = compute_integrals(atoms=atoms, basis=basis, unit=unit)
    assert res.e_nuc == pytest.approx(e_nuc, abs=1e-10)
    assert res.references["hf"] == pytest.approx(e_hf, abs=1e-8)
    assert res.references["fci"] == pytest.approx(e_fci, abs=1e-8)


def test_h2_minimal_basis_matches_the_textbook():
    # Szabo & Ostlund, Modern Quantum Chemistry (1996), H2/STO-3G at R = 1.4 bohr: E(HF) about
    # -1.1167 Eh, correlation energy about -0.0206 Eh (from memory; four digits printed there)
    (atoms, unit, basis), _ = PINNED["h2_sto3g_1.4bohr"]
    res = compute_integrals(atoms=atoms, basis=basis, unit=unit)
    assert res.references["hf"] == pytest.approx(-1.1167, abs=1e-4)
    assert res.references["fci"] - res.references["hf"] == pytest.approx(-0.0206, abs=1e-4)
