"""The one exact sector solver (:mod:`eigensweep.chem.exact`) against PySCF computed here.

Reference throughout: PySCF ``fci.direct_spin1`` with and without its spin penalty
(``fci.addons.fix_spin_``) and ``fci.spin_square``, run in the test on the same integrals.
"""

from __future__ import annotations

from functools import cache

import numpy as np
import pytest
from pyscf import ao2mo, fci, gto, mcscf, scf

from eigensweep.chem import exact
from eigensweep.chem.exact import solve_sector
from eigensweep.errors import ConfigError


@cache
def casci_integrals(atoms: str, spin: int, ncas: int, nelecas: tuple[int, int]):
    """PySCF CASCI effective Hamiltonian of an RHF/ROHF STO-3G reference."""
    mol = gto.M(atom=atoms, basis="sto-3g", spin=spin, verbose=0)
    mf = (scf.ROHF if spin else scf.RHF)(mol)
    mf.conv_tol = 1e-12
    mf.kernel()
    mc = mcscf.CASCI(mf, ncas, nelecas)
    h1e, ecore = mc.get_h1eff()
    eri = ao2mo.restore(1, mc.get_h2eff(), ncas)
    return h1e, eri, float(ecore)


O2 = "O 0 0 0; O 0 0 1.2075"


def pyscf_spin_roots(h1e, eri, norb, nelec, ecore, ss, nroots):
    solver = fci.addons.fix_spin_(fci.direct_spin1.FCI(), shift=0.5, ss=ss)
    solver.conv_tol = 1e-12
    e, c = solver.kernel(h1e, eri, norb, nelec, ecore=ecore, nroots=nroots)
    return np.asarray(e), [np.asarray(v).reshape(-1) for v in c]


def test_impossible_spin_is_a_config_error():
    h1e, eri, ecore = casci_integrals(O2, 0, 6, (4, 4))
    with pytest.raises(ConfigError, match="spin"):
        solve_sector(h1e, eri, 6, (4, 4), spin=0.5)


def test_o2_singlet_is_the_degenerate_delta_pair_not_the_triplet():
    h1e, eri, ecore = casci_integrals(O2, 0, 6, (4, 4))
    sol = solve_sector(h1e, eri, 6, (4, 4), ecore=ecore, spin=0)
    # reference: PySCF FCI with its spin penalty; the two lowest singlets (1Delta_g pair)
    e_ref, c_ref = pyscf_spin_roots(h1e, eri, 6, (4, 4), ecore, 0, 3)
    assert sol.energy == pytest.approx(e_ref[0], abs=1e-9)
    assert abs(e_ref[1] - e_ref[0]) < 1e-8 < abs(e_ref[2] - e_ref[0])
    assert sol.degeneracy == 2
    # reference: PySCF spin_square of each returned vector
    for v in sol.vectors:
        assert fci.spin_square(v, 6, (4, 4))[0] == pytest.approx(0.0, abs=1e-8)
    assert np.allclose(sol.vectors @ sol.vectors.T, np.eye(2), atol=1e-10)
    # the same projector as PySCF's two roots
    p_ours = sol.vectors.T @ sol.vectors
    p_ref = np.array(c_ref[:2]).T @ np.array(c_ref[:2])
    assert np.allclose(p_ours, p_ref, atol=1e-6)
    # reference: plain PySCF FCI finds the lower triplet in the same (4, 4) sector
    e_plain = fci.direct_spin1.FCI().kernel(h1e, eri, 6, (4, 4), ecore=ecore)[0]
    assert e_plain < sol.energy - 0.01


def test_davidson_path_equals_dense_path(monkeypatch):
    h1e, eri, ecore = casci_integrals(O2, 0, 6, (4, 4))
    dense = solve_sector(h1e, eri, 6, (4, 4), ecore=ecore, spin=0)
    monkeypatch.setattr(exact, "DENSE_MAX_DETERMINANTS", 0)
    dav = solve_sector(h1e, eri, 6, (4, 4), ecore=ecore, spin=0)
    assert dav.energy == pytest.approx(dense.energy, abs=1e-9)
    assert dav.degeneracy == dense.degeneracy == 2
    proj = dense.vectors @ dav.vectors.T
    assert np.allclose(proj @ proj.T, np.eye(2), atol=1e-6)


def test_triplet_high_spin_component_matches_pyscf():
    h1e, eri, ecore = casci_integrals(O2, 2, 6, (5, 3))
    sol = solve_sector(h1e, eri, 6, (5, 3), ecore=ecore)
    # reference: PySCF FCI (the (5, 3) sector's lowest state is the triplet) and spin_square
    e_ref, c_ref = fci.direct_spin1.FCI().kernel(h1e, eri, 6, (5, 3), ecore=ecore)
    assert sol.energy == pytest.approx(e_ref, abs=1e-9)
    assert sol.spin_square == pytest.approx(fci.spin_square(c_ref, 6, (5, 3))[0], abs=1e-8)
    assert abs(abs(sol.vectors[0] @ np.asarray(c_ref).reshape(-1)) - 1.0) < 1e-8


def test_repeated_solves_are_bit_identical():
    h1e, eri, ecore = casci_integrals(O2, 0, 6, (4, 4))
    a = solve_sector(h1e, eri, 6, (4, 4), ecore=ecore, spin=0)
    b = solve_sector(h1e, eri, 6, (4, 4), ecore=ecore, spin=0)
    assert a.energy == b.energy and np.array_equal(a.vectors, b.vectors)  # common practice
