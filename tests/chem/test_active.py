"""Active windows that would split degenerate orbitals, active-orbital character along a scan,
and labels of the reference ladder.

References: PySCF RHF orbital energies and irreps (``symm.label_orb_symm``) computed here;
PySCF CASCI; the variational principle (no approximation lies below the exact energy of the
same Hamiltonian), common practice.
"""

from __future__ import annotations

import numpy as np
import pytest
from pyscf import gto, mcscf, scf, symm

from eigensweep.chem import compute_integrals
from eigensweep.errors import ChemistryError

N2_SHORT = "N 0 0 0; N 0 0 0.9"


def pyscf_rhf(atoms: str, group: str = "D2h"):
    mol = gto.M(atom=atoms, basis="sto-3g", symmetry=True, symmetry_subgroup=group, verbose=0)
    mf = scf.RHF(mol)
    mf.conv_tol = 1e-12
    mf.kernel()
    return mol, mf


def test_n2_short_bond_6e6o_split_pi_pair_is_refused():
    mol, mf = pyscf_rhf(N2_SHORT)
    # reference: PySCF RHF; with 4 inactive orbitals the 4th and 5th (0-based 3, 4) are a pi pair
    assert abs(mf.mo_energy[3] - mf.mo_energy[4]) < 1e-8
    with pytest.raises(ChemistryError) as info:
        compute_integrals(atoms=N2_SHORT, basis="sto-3g", active={"electrons": 6, "orbitals": 6})
    msg = str(info.value)
    assert "\n" not in msg and "active:" in msg and "degenerate orbitals 3-4" in msg
    assert "{electrons: 8, orbitals: 7}" in msg and "{electrons: 4, orbitals: 5}" in msg
    # the suggested larger window runs and equals PySCF CASCI with the same window
    res = compute_integrals(atoms=N2_SHORT, basis="sto-3g", active={"electrons": 8, "orbitals": 7})
    e_ref = mcscf.CASCI(mf, 7, 8).run(verbose=0).e_tot
    assert res.references["casci"] == pytest.approx(e_ref, abs=1e-8)


def test_active_character_change_along_a_scan_is_noted():
    # HF at 1.5 Angstrom, (2e, 2o): sigma / sigma*; at 0.9 Angstrom PySCF orders a pi lone
    # pair above the sigma bond, so the same window would hold orbitals of other irreps
    mol, mf = pyscf_rhf("F 0 0 0; H 0 0 0.9", "C2v")
    labels = symm.label_orb_symm(mol, mol.irrep_name, mol.symm_orb, mf.mo_coeff)
    neighbour = [str(x) for x in labels[4:6]]
    same = compute_integrals(
        atoms="F 0 0 0; H 0 0 1.5", basis="sto-3g", active={"electrons": 2, "orbitals": 2}
    )
    assert "active" not in same.reference_notes
    moved = compute_integrals(
        atoms="F 0 0 0; H 0 0 1.5",
        basis="sto-3g",
        active={"electrons": 2, "orbitals": 2},
        neighbour_orbsym=neighbour,
    )
    if sorted(neighbour) == sorted(moved.orbsym):
        pytest.skip("PySCF orders these orbitals alike at both points")
    assert "changed character" in moved.reference_notes["active"]
    kept = compute_integrals(
        atoms="F 0 0 0; H 0 0 1.5",
        basis="sto-3g",
        active={"electrons": 2, "orbitals": 2},
        neighbour_orbsym=list(reversed(same.orbsym)),
    )
    assert "active" not in kept.reference_notes


def test_ladder_rungs_name_their_reference_and_flag_values_below_exact():
    # N2 (6e, 6o) stretched to 3.0 Angstrom: CCSD collapses below the exact CASCI energy
    res = compute_integrals(
        atoms="N 0 0 0; N 0 0 3.0", basis="sto-3g", active={"electrons": 6, "orbitals": 6}
    )
    refs, notes = res.references, res.reference_notes
    for key in ("mp2", "ccsd", "ccsd_t"):
        if np.isfinite(refs[key]):
            assert notes[key].startswith("RHF-based")
            # variational principle: below the exact energy means the rung failed; it is said
            below = refs[key] < refs["casci"] - 1e-6
            assert below == ("below the exact (CASCI) energy" in notes[key])
    assert any(refs[k] < refs["casci"] - 1e-3 for k in ("mp2", "ccsd", "ccsd_t"))
    trip = compute_integrals(atoms="O 0 0 0; O 0 0 1.21", basis="sto-3g", multiplicity=3)
    assert all(trip.reference_notes[k].startswith("ROHF-based") for k in ("mp2", "ccsd", "ccsd_t"))
