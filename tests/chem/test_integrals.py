"""Tests of the stage-1 chemistry library (eigensweep.chem).

Reference values are either computed at test time with PySCF along an independent path
(symmetry off, default initial guess, tighter convergence, PySCF's own CASCI/FCI drivers) or
taken from textbooks; every comparison says which in a comment.
"""

from __future__ import annotations

import functools
import itertools
import json
import math

import numpy as np
import pytest
import scipy.sparse as sp
from pyscf import ao2mo, cc, fci, gto, lib, mcscf, mp, scf

from eigensweep.chem import (
    REFERENCE_KEYS,
    IntegralsResult,
    check_molecule,
    compute_integrals,
    noble_gas_core_orbitals,
    read_xyz,
    solve_sector,
)

H2O = "O 0 0 0; H 0 0.757 0.587; H 0 -0.757 0.587"


@pytest.fixture(autouse=True, scope="module")
def _single_thread():
    """All systems here are tiny: PySCF's OpenMP threads only add overhead."""
    with lib.with_omp_threads(1):
        yield


# name -> (compute_integrals keyword arguments, charge, 2S)
CASES = {
    "h2_bohr": (dict(atoms="H 0 0 0; H 0 0 1.4", basis="sto-3g", unit="bohr"), 0, 0),
    "oh_radical": (dict(atoms="O 0 0 0; H 0 0 0.97", basis="sto-3g", multiplicity=2), 0, 1),
    "h2o_cation": (dict(atoms=H2O, basis="sto-3g", charge=1, multiplicity=2), 1, 1),
    "h4_chain": (dict(atoms="H 0 0 0; H 0 0 2.0; H 0 0 4.0; H 0 0 6.0", basis="sto-3g"), 0, 0),
    "lih_frozen": (dict(atoms="Li 0 0 0; H 0 0 1.6", basis="sto-3g", frozen_core="auto"), 0, 0),
    "h2o_active": (
        dict(atoms=H2O, basis="sto-3g", active={"electrons": 4, "orbitals": 4}),
        0,
        0,
    ),
    "n2_active": (
        dict(atoms="N 0 0 0; N 0 0 1.1", basis="sto-3g", active={"electrons": 6, "orbitals": 6}),
        0,
        0,
    ),
    "o2_triplet": (dict(atoms="O 0 0 0; O 0 0 1.21", basis="sto-3g", multiplicity=3), 0, 2),
    "lih_cation_active": (
        dict(
            atoms="Li 0 0 0; H 0 0 1.6",
            basis="sto-3g",
            charge=1,
            multiplicity=2,
            frozen_core="auto",
            active={"electrons": 1, "orbitals": 4},  # 3 would split the 2p pi pair
        ),
        1,
        1,
    ),
}


@functools.cache
def ours(name: str) -> IntegralsResult:
    """Our result for a named case, computed once per test session."""
    return compute_integrals(label=name, **CASES[name][0])


@functools.cache
def pyscf_direct(name: str) -> dict[str, float]:
    """Independent PySCF energies for a named case: C1 symmetry, default guess, conv_tol 1e-12,
    PySCF's mcscf.CASCI and fci.FCI drivers (reference: PySCF computed at test time)."""
    kw, charge, spin = CASES[name]
    mol = gto.M(
        atom=kw["atoms"],
        basis=kw["basis"],
        charge=charge,
        spin=spin,
        unit=kw.get("unit", "angstrom"),
        verbose=0,
    )
    mf = scf.ROHF(mol) if spin else scf.RHF(mol)
    mf.conv_tol = 1e-12
    mf.kernel()
    assert mf.converged
    res = ours(name)
    mc = mcscf.CASCI(mf, res.norb, res.nelec, ncore=res.n_frozen)
    mc.verbose = 0
    mc.fcisolver.conv_tol = 1e-12
    out = {"hf": mf.e_tot, "casci": mc.kernel()[0], "mf": mf}
    solver = fci.FCI(mf)
    solver.conv_tol = 1e-12
    out["fci"] = solver.kernel()[0]
    return out


def hf_from_integrals(res: IntegralsResult) -> float:
    """Energy of the reference determinant (lowest n_alpha / n_beta active orbitals) from the
    stored h1e, eri (pq|rs) and e_core (Slater-Condon rules)."""
    h, g = res.h1e, res.eri
    na, nb = res.nelec
    e = res.e_core + np.trace(h[:na, :na]) + np.trace(h[:nb, :nb])
    j = np.einsum("iijj->ij", g)
    k = np.einsum("ijji->ij", g)
    for occ_s, occ_t, same in ((na, na, 1), (nb, nb, 1), (na, nb, 0), (nb, na, 0)):
        e += 0.5 * (j[:occ_s, :occ_t].sum() - same * k[:occ_s, :occ_t].sum())
    return float(e)


# ------------------------------------------------------------------------------------------
# 1. H2 / STO-3G at R = 1.4 bohr
# ------------------------------------------------------------------------------------------


def test_h2_textbook_and_pyscf():
    res = ours("h2_bohr")
    ref = pyscf_direct("h2_bohr")
    # reference: Szabo & Ostlund (1996), Modern Quantum Chemistry, H2/STO-3G at R=1.4 bohr,
    # from memory: E(HF) = -1.1167, E(FCI) = -1.1373 hartree.
    assert res.references["hf"] == pytest.approx(-1.1167, abs=1e-3)
    assert res.references["fci"] == pytest.approx(-1.1373, abs=1e-3)
    # reference: PySCF RHF and FCI computed at test time (PySCF gives -1.116714 / -1.137276).
    assert res.references["hf"] == pytest.approx(ref["hf"], abs=1e-8)
    assert res.references["fci"] == pytest.approx(ref["fci"], abs=1e-8)
    assert res.references["casci"] == pytest.approx(ref["fci"], abs=1e-8)
    # two electrons: CCSD is exact, (T) vanishes (reference: PySCF FCI at test time)
    assert res.references["ccsd"] == pytest.approx(ref["fci"], abs=1e-7)
    assert res.references["ccsd_t"] == pytest.approx(ref["fci"], abs=1e-7)
    assert res.point_group == "D2h" and res.orbsym == ["Ag", "B1u"]
    assert (res.norb, res.nelec, res.n_frozen, res.scf_method) == (2, (1, 1), 0, "RHF")
    # reference: nuclear repulsion 1/R in hartree for R = 1.4 bohr (exact)
    assert res.e_nuc == pytest.approx(1 / 1.4, abs=1e-12)
    assert res.e_core == pytest.approx(res.e_nuc, abs=1e-12)


# ------------------------------------------------------------------------------------------
# 2./3. energies rebuilt from our integrals; independent PySCF references for many systems
# ------------------------------------------------------------------------------------------


@pytest.mark.parametrize("name", list(CASES))
def test_references_match_independent_pyscf(name):
    res, ref = ours(name), pyscf_direct(name)
    # reference: PySCF SCF / mcscf.CASCI / fci.FCI computed at test time (C1, own guess)
    assert res.references["hf"] == pytest.approx(ref["hf"], abs=1e-8)
    assert res.references["casci"] == pytest.approx(ref["casci"], abs=1e-8)
    assert res.references["fci"] == pytest.approx(ref["fci"], abs=1e-8)
    assert set(res.references) == set(REFERENCE_KEYS)
    assert all(math.isfinite(v) for v in res.references.values()), res.reference_notes
    # variational ladder: HF >= CASCI >= FCI (exact statements)
    refs = res.references
    assert refs["hf"] >= refs["casci"] - 1e-10 >= refs["fci"] - 2e-10


@pytest.mark.parametrize("name", list(CASES))
def test_integrals_rebuild_hf_and_casci(name):
    res = ours(name)
    kw, charge, spin = CASES[name]
    assert res.h1e.shape == (res.norb, res.norb) and res.eri.shape == (res.norb,) * 4
    assert res.eri.dtype == np.float64 and res.h1e.dtype == np.float64
    # 8-fold permutational symmetry of real (pq|rs) (exact property)
    g = res.eri
    for perm in ((1, 0, 2, 3), (0, 1, 3, 2), (2, 3, 0, 1)):
        np.testing.assert_allclose(g, g.transpose(perm), atol=1e-12)
    np.testing.assert_allclose(res.h1e, res.h1e.T, atol=1e-12)
    assert res.nelec[0] - res.nelec[1] == spin
    # reference: our stored SCF energy, rebuilt from h1e/eri/e_core with Slater-Condon rules
    assert hf_from_integrals(res) == pytest.approx(res.references["hf"], abs=1e-8)
    # reference: PySCF fci.direct_spin1 on our integrals at test time
    solver = fci.direct_spin1.FCI()
    solver.conv_tol = 1e-12
    e, civec = solver.kernel(res.h1e, res.eri, res.norb, res.nelec, ecore=res.e_core)
    assert e == pytest.approx(res.references["casci"], abs=1e-8)
    # exact spin of the requested multiplicity, S(S+1) with S = 2S/2
    s = spin / 2
    assert res.spin_square == pytest.approx(s * (s + 1), abs=1e-6)
    assert solver.spin_square(civec, res.norb, res.nelec)[0] == pytest.approx(s * (s + 1), abs=1e-6)


def test_frozen_core_and_active_space_layout():
    lih, h2o, n2 = ours("lih_frozen"), ours("h2o_active"), ours("n2_active")
    # auto frozen core of LiH: [He] core of Li = 1 orbital (rule documented in geometry.py)
    assert (lih.n_frozen, lih.norb, lih.nelec) == (1, 5, (1, 1))
    # frozen 1s changes the Hamiltonian, so CASCI lies above the full FCI (exact statement)
    assert lih.references["casci"] > lih.references["fci"] + 1e-5
    # two active electrons: CCSD = CASCI (exact for two electrons)
    assert lih.references["ccsd"] == pytest.approx(lih.references["casci"], abs=1e-7)
    # H2O 4e/4o: 10 electrons -> 3 inactive orbitals
    assert (h2o.n_frozen, h2o.norb, h2o.nelec) == (3, 4, (2, 2))
    assert len(h2o.orbsym) == 4 and h2o.point_group == "C2v"
    assert (n2.n_frozen, n2.norb, n2.nelec, n2.point_group) == (4, 6, (3, 3), "D2h")
    # N2 valence 6e/6o: pi_u (B2u, B3u), sigma_g (Ag), pi_g (B2g, B3g), sigma_u (B1u)
    assert sorted(n2.orbsym) == sorted(["B2u", "B3u", "Ag", "B2g", "B3g", "B1u"])
    # e_core = E_nuc + frozen-core energy: for no core it is E_nuc (exact)
    oh = ours("oh_radical")
    assert oh.e_core == pytest.approx(oh.e_nuc, abs=1e-12)
    assert h2o.e_core < h2o.e_nuc  # core electrons lower the constant (exact sign)


def test_correlated_closed_shell_match_pyscf():
    res = ours("h2o_active")
    mf = pyscf_direct("h2o_active")["mf"]
    frozen = list(range(res.n_frozen)) + list(range(res.n_frozen + res.norb, mf.mo_coeff.shape[1]))
    # reference: PySCF MP2 / CCSD / CCSD(T) at test time with the same frozen orbitals
    pt = mp.MP2(mf, frozen=frozen).run(verbose=0)
    mycc = cc.CCSD(mf, frozen=frozen).run(verbose=0, conv_tol=1e-10)
    assert res.references["mp2"] == pytest.approx(pt.e_tot, abs=1e-7)
    assert res.references["ccsd"] == pytest.approx(mycc.e_tot, abs=1e-7)
    assert res.references["ccsd_t"] == pytest.approx(mycc.e_tot + mycc.ccsd_t(), abs=1e-7)
    assert res.reference_notes["ccsd"] == (
        "RHF-based; frozen orbitals: 3 core, 0 virtual (same space as casci)"
    )
    full = compute_integrals(atoms=H2O, basis="sto-3g")
    mf = scf.RHF(gto.M(atom=H2O, basis="sto-3g", verbose=0)).run(conv_tol=1e-12)
    mycc = cc.CCSD(mf).run(verbose=0, conv_tol=1e-10)
    assert full.references["mp2"] == pytest.approx(mp.MP2(mf).run(verbose=0).e_tot, abs=1e-7)
    assert full.references["ccsd_t"] == pytest.approx(mycc.e_tot + mycc.ccsd_t(), abs=1e-7)
    # each correlated rung names its reference determinant (RHF here), nothing else to say
    assert full.reference_notes == {k: "RHF-based" for k in ("mp2", "ccsd", "ccsd_t")}


def _rmp2_spin_orbital(mf: scf.rohf.ROHF) -> float:
    """RMP2 (Knowles, Andrews, Amos, Handy & Pople, CPL 186, 130 (1991)) written out in a
    spin-orbital basis: semicanonical alpha/beta orbitals, singles f_ia^2/(e_i-e_a) plus
    antisymmetrised doubles, no frozen orbitals."""
    mol, c, occ = mf.mol, mf.mo_coeff, mf.mo_occ
    nmo = c.shape[1]
    occs = [occ > 0.5, occ > 1.5]
    dm = np.array([c[:, o] @ c[:, o].T for o in occs])
    vj, vk = scf.hf.get_jk(mol, dm)
    coeff, eps, fock = [], [], []
    for s in (0, 1):
        f = c.T @ (mf.get_hcore() + vj[0] + vj[1] - vk[s]) @ c
        n = int(occs[s].sum())
        u = np.zeros((nmo, nmo))
        e = np.zeros(nmo)
        for blk in (slice(0, n), slice(n, nmo)):
            e[blk], u[blk, blk] = np.linalg.eigh(f[blk, blk])
        coeff.append(c @ u)
        eps.append(e)
        fock.append(u.T @ f @ u)
    # spin-orbital lists: (spin, spatial index)
    so = [(s, p) for s in (0, 1) for p in range(nmo)]
    cso = np.hstack([coeff[0], coeff[1]])
    g = ao2mo.restore(1, ao2mo.full(mol, cso), 2 * nmo)
    spin = np.array([s for s, _ in so])
    g = g * (spin[:, None, None, None] == spin[None, :, None, None])
    g = g * (spin[None, None, :, None] == spin[None, None, None, :])
    phys = g.transpose(0, 2, 1, 3) - g.transpose(0, 2, 3, 1)  # <pq||rs>
    e_so = np.concatenate(eps)
    occ_so = np.concatenate([occs[0], occs[1]])
    o, v = np.where(occ_so)[0], np.where(~occ_so)[0]
    e2 = 0.0
    for s in (0, 1):
        n = int(occs[s].sum())
        e2 += np.sum(fock[s][:n, n:] ** 2 / (eps[s][:n, None] - eps[s][None, n:]))
    d = e_so[o][:, None, None, None] + e_so[o][None, :, None, None]
    d = d - e_so[v][None, None, :, None] - e_so[v][None, None, None, :]
    e2 += 0.25 * np.sum(phys[np.ix_(o, o, v, v)] ** 2 / d)
    return float(mf.e_tot + e2)


def test_correlated_open_shell():
    res = ours("oh_radical")
    mf = pyscf_direct("oh_radical")["mf"]
    # reference: PySCF CCSD on the ROHF object (converted to UHF by PySCF) at test time;
    # CCSD is invariant to our semicanonical rotation.
    mycc = cc.CCSD(mf).run(verbose=0, conv_tol=1e-10)
    assert res.references["ccsd"] == pytest.approx(mycc.e_tot, abs=1e-7)
    # reference: RMP2 (Knowles et al. 1991) re-derived in a spin-orbital basis in this test
    assert res.references["mp2"] == pytest.approx(_rmp2_spin_orbital(mf), abs=1e-8)
    assert "RMP2" in res.reference_notes["mp2"]
    refs = res.references
    assert refs["hf"] > refs["mp2"] and refs["hf"] > refs["ccsd"] > refs["ccsd_t"] - 1e-4


# ------------------------------------------------------------------------------------------
# 4. particle-number and spin sector
# ------------------------------------------------------------------------------------------


def _fock_space_hamiltonian(res: IntegralsResult) -> tuple[sp.csr_matrix, np.ndarray, np.ndarray]:
    """Dense-basis (sparse-stored) second-quantised Hamiltonian over all particle numbers,
    built in this test from h1e and (pq|rs) with a Jordan-Wigner ordering of spin orbitals
    k = 2p + sigma. Returns H, the particle number and 2*Sz of every basis state."""
    n = res.norb
    nso = 2 * n
    dim = 2**nso
    ident, z = sp.identity(2, format="csr"), sp.diags([1.0, -1.0]).tocsr()
    lower = sp.csr_matrix(np.array([[0.0, 1.0], [0.0, 0.0]]))  # |0><1|: removes a particle
    ann = []
    for k in range(nso):
        op = sp.identity(1, format="csr")
        for j in range(nso):
            op = sp.kron(op, z if j < k else (lower if j == k else ident), format="csr")
        ann.append(op)
    cre = [a.T.tocsr() for a in ann]
    ham = res.e_core * sp.identity(dim, format="csr")
    for p, q in itertools.product(range(n), repeat=2):
        for s in (0, 1):
            ham = ham + res.h1e[p, q] * (cre[2 * p + s] @ ann[2 * q + s])
    for p, q, r, t in itertools.product(range(n), repeat=4):
        if abs(res.eri[p, q, r, t]) < 1e-14:
            continue
        for s, u in itertools.product((0, 1), repeat=2):
            term = cre[2 * p + s] @ cre[2 * r + u] @ ann[2 * t + u] @ ann[2 * q + s]
            ham = ham + 0.5 * res.eri[p, q, r, t] * term
    occ = (np.arange(dim)[:, None] >> (nso - 1 - np.arange(nso))[None, :]) & 1
    number = occ.sum(axis=1)
    two_sz = occ[:, 0::2].sum(axis=1) - occ[:, 1::2].sum(axis=1)
    return ham.tocsr(), number, two_sz


def test_sector_energy_not_fock_space_minimum_small_cation():
    res = ours("lih_cation_active")  # LiH+ doublet, 1 active electron in 4 orbitals
    ham, number, two_sz = _fock_space_hamiltonian(res)
    dense = ham.toarray()
    # H conserves N and Sz, so its spectrum is the union of the (N, 2Sz) blocks
    blocks = {}
    for key in set(zip(number.tolist(), two_sz.tolist(), strict=True)):
        sel = (number == key[0]) & (two_sz == key[1])
        blocks[key] = np.linalg.eigvalsh(dense[np.ix_(sel, sel)])[0]
    global_min = np.linalg.eigvalsh(dense)[0]
    assert global_min == pytest.approx(min(blocks.values()), abs=1e-10)
    sector = (sum(res.nelec), res.nelec[0] - res.nelec[1])
    # reference: dense diagonalisation of a Fock-space Hamiltonian built in this test
    assert res.references["casci"] == pytest.approx(blocks[sector], abs=1e-8)
    # the global minimum over particle numbers has more electrons and is much lower
    assert global_min < res.references["casci"] - 0.05
    assert min(blocks, key=blocks.get)[0] > sector[0]


def test_sector_energy_not_fock_space_minimum_h2o_cation():
    res = ours("h2o_cation")
    assert res.nelec == (5, 4) and res.scf_method == "ROHF"
    # reference: PySCF fci.direct_spin1 in every (n_alpha, n_beta) sector at test time
    energies = {}
    for na, nb in itertools.product(range(res.norb + 1), repeat=2):
        if na < nb:  # E(na, nb) = E(nb, na) for a spin-free Hamiltonian
            continue
        if na + nb == 0:
            energies[na, nb] = res.e_core
            continue
        solver = fci.direct_spin1.FCI()
        solver.conv_tol = 1e-12
        energies[na, nb] = solver.kernel(res.h1e, res.eri, res.norb, (na, nb))[0] + res.e_core
    assert res.references["casci"] == pytest.approx(energies[5, 4], abs=1e-8)
    global_min = min(energies.values())
    assert global_min < res.references["casci"] - 0.1
    assert min(energies, key=energies.get) != (5, 4)


def test_triplet_and_spin_fixing():
    res = ours("o2_triplet")
    # reference: exact S(S+1) = 2 for a triplet
    assert res.spin_square == pytest.approx(2.0, abs=1e-6)
    assert res.nelec == (9, 7) and res.scf_method == "ROHF"
    # Ms = 0 sector of the same Hamiltonian: the triplet component has the casci energy
    # (spin-rotation invariance, exact) and the lowest singlet lies above it (O2 ground state
    # is 3Sigma_g-, e.g. Herzberg 1950, from memory).
    e_t, ss_t, _ = solve_sector(res.h1e, res.eri, res.norb, (8, 8), ecore=res.e_core, spin=1)
    e_s, ss_s, _ = solve_sector(res.h1e, res.eri, res.norb, (8, 8), ecore=res.e_core, spin=0)
    assert ss_t == pytest.approx(2.0, abs=1e-6) and ss_s == pytest.approx(0.0, abs=1e-6)
    assert e_t == pytest.approx(res.references["casci"], abs=1e-8)
    assert e_s > e_t + 1e-3
    # reference: PySCF direct_spin1 lowest Ms=0 root at test time is the triplet component
    e0 = fci.direct_spin1.FCI().kernel(res.h1e, res.eri, res.norb, (8, 8))[0] + res.e_core
    assert e0 == pytest.approx(e_t, abs=1e-7)


def test_singlet_requested_where_sector_ground_state_is_triplet():
    # stretched H2 (5 bohr): singlet and triplet nearly degenerate; asking the Ms=0 sector for
    # S=0 and S=1 must give two different states (reference: exact S(S+1) values)
    res = compute_integrals(atoms="H 0 0 0; H 0 0 5.0", basis="sto-3g", unit="bohr")
    e0, ss0, _ = solve_sector(res.h1e, res.eri, 2, (1, 1), spin=0)
    e1, ss1, _ = solve_sector(res.h1e, res.eri, 2, (1, 1), spin=1)
    assert ss0 == pytest.approx(0.0, abs=1e-8) and ss1 == pytest.approx(2.0, abs=1e-8)
    assert e0 < e1  # H2 ground state is the singlet at every R (exact for two electrons)
    assert res.references["casci"] == pytest.approx(e0 + res.e_core, abs=1e-10)


# ------------------------------------------------------------------------------------------
# 5. guess= from a neighbouring point: same solution, smooth curves
# ------------------------------------------------------------------------------------------


@functools.cache
def lih_scan() -> tuple[list[float], list[IntegralsResult]]:
    distances = [1.5 + 0.25 * k for k in range(12)]  # 1.5 .. 4.25 Angstrom, through dissociation
    results, guess = [], None
    for r in distances:
        res = compute_integrals(
            atoms=f"Li 0 0 0; H 0 0 {r}", basis="sto-3g", guess=guess, label=f"lih r={r}"
        )
        results.append(res)
        guess = (res.mo_coeff, res.mo_occ)
    return distances, results


def test_guess_reproduces_scratch_near_equilibrium():
    distances, scan = lih_scan()
    for idx in (0, 1):  # 1.5 and 1.75 Angstrom (equilibrium ~1.55 Angstrom)
        scratch = compute_integrals(atoms=f"Li 0 0 0; H 0 0 {distances[idx]}", basis="sto-3g")
        # reference: the same point computed from PySCF's default guess (this library)
        for key in ("hf", "mp2", "ccsd", "casci", "fci"):
            assert scan[idx].references[key] == pytest.approx(scratch.references[key], abs=1e-8)


def test_scan_with_neighbour_guess_is_smooth():
    distances, scan = lih_scan()
    for key in ("hf", "fci"):
        e = np.array([res.references[key] for res in scan])
        d2 = np.diff(e, 2)
        # reference: smoothness criterion of this test -- a jump to another SCF solution or
        # state shows up as a second difference far above the curvature of one surface
        # (a jump of d between two points adds about d, -2d, d to consecutive entries)
        assert np.max(np.abs(d2)) < 1.5e-2, (key, d2)
        assert np.max(np.abs(np.diff(d2))) < 8e-3, (key, d2)
    # dissociation: energy rises monotonically beyond the minimum (~1.55 Angstrom for LiH)
    e = np.array([res.references["fci"] for res in scan])
    assert np.all(np.diff(e) > 0)


def test_guess_from_wrong_basis_is_config_error():
    from eigensweep.errors import ConfigError

    res = ours("lih_frozen")
    with pytest.raises(ConfigError, match="lih-bad: guess"):
        compute_integrals(
            atoms="Li 0 0 0; H 0 0 1.6",
            basis="6-31g",
            guess=(res.mo_coeff, res.mo_occ),
            label="lih-bad",
        )


# ------------------------------------------------------------------------------------------
# 6. store round trip and misc
# ------------------------------------------------------------------------------------------


@pytest.mark.parametrize("name", ["oh_radical", "n2_active"])
def test_store_round_trip_exact(name):
    res = ours(name)
    arrays, meta = res.to_store()
    meta = json.loads(json.dumps(meta, allow_nan=False))
    back = IntegralsResult.from_store({k: v.copy() for k, v in arrays.items()}, meta)
    for key in ("h1e", "eri", "mo_energy", "mo_occ", "mo_coeff"):
        np.testing.assert_array_equal(getattr(back, key), getattr(res, key))
    for key in ("norb", "nelec", "e_core", "e_nuc", "orbsym", "point_group", "scf_method"):
        assert getattr(back, key) == getattr(res, key)
    assert back.n_frozen == res.n_frozen and back.reference_notes == res.reference_notes
    assert back.references == res.references and back.spin_square == res.spin_square
    np.testing.assert_array_equal(back.exact_vectors, res.exact_vectors)
    # the stored ground space holds PySCF's FCI ground state(s) of the same integrals and has
    # their degeneracy (reference: PySCF FCI computed here; OH's 2Pi is a degenerate pair)
    e_ref, c_ref = fci.direct_spin1.FCI().kernel(res.h1e, res.eri, res.norb, res.nelec, nroots=3)
    degenerate = [c for e, c in zip(e_ref, c_ref, strict=True) if e - e_ref[0] < 1e-8]
    assert res.exact_vectors.shape[0] == len(degenerate)
    for c in degenerate:
        weight = np.sum((res.exact_vectors @ np.ravel(c)) ** 2)
        assert weight == pytest.approx(1.0, abs=1e-8)


def test_store_round_trip_with_skipped_rungs():
    res = compute_integrals(atoms=H2O, basis="sto-3g", fci_max_determinants=100)
    assert math.isnan(res.references["casci"]) and math.isnan(res.references["fci"])
    assert math.isnan(res.spin_square)
    assert res.reference_notes["fci"].startswith("skipped: 441 determinants > ")
    arrays, meta = res.to_store()
    text = json.dumps(meta, allow_nan=False)  # strict JSON: nan stored as null
    back = IntegralsResult.from_store(arrays, json.loads(text))
    assert math.isnan(back.references["fci"]) and math.isnan(back.spin_square)
    assert back.references["hf"] == res.references["hf"]


def test_symmetry_off_gives_c1_and_same_energies():
    res = compute_integrals(atoms=H2O, basis="sto-3g", symmetry=False)
    # reference: the symmetric run of this library (energies do not depend on symmetry use)
    sym = compute_integrals(atoms=H2O, basis="sto-3g")
    assert res.point_group == "C1" and res.orbsym == []
    for key in REFERENCE_KEYS:
        assert res.references[key] == pytest.approx(sym.references[key], abs=1e-8)


def test_read_xyz_round_trip(tmp_path):
    path = tmp_path / "water.xyz"
    path.write_text("3\nwater, Angstrom\nO 0.0 0.0 0.0\nH 0.0 0.757 0.587\nH 0.0 -0.757 0.587\n\n")
    atoms = read_xyz(path)
    assert atoms == "O 0.0 0.0 0.0; H 0.0 0.757 0.587; H 0.0 -0.757 0.587"
    check_molecule(atoms=atoms, basis="sto-3g", charge=0, multiplicity=1)


def test_noble_gas_core_table():
    # reference: noble-gas core shells ([He] 1s, [Ne] 1s2s2p, [Ar] 1s2s2p3s3p) of the
    # periodic table (standard chemistry)
    assert [noble_gas_core_orbitals(z) for z in (1, 2, 3, 10, 11, 18, 19, 36, 37)] == [
        0,
        0,
        1,
        1,
        5,
        5,
        9,
        9,
        18,
    ]


# ------------------------------------------------------------------------------------------
# SCF stability
# ------------------------------------------------------------------------------------------


def test_stability_escapes_wrong_irrep_occupation():
    # N2 started from orbitals with HOMO (sigma_g) and LUMO (pi_g) occupations swapped: the
    # symmetry-adapted SCF converges to an excited solution that only a symmetry-unrestricted
    # Hessian reveals (reference: this library's ground-state run from PySCF's default guess)
    atoms = "N 0 0 0; N 0 0 1.1"
    ground = compute_integrals(atoms=atoms, basis="sto-3g", fci_max_determinants=0)
    occ = ground.mo_occ.copy()
    occ[6], occ[8] = occ[8], occ[6]
    trapped = compute_integrals(
        atoms=atoms,
        basis="sto-3g",
        guess=(ground.mo_coeff, occ),
        stability=False,
        fci_max_determinants=0,
    )
    assert trapped.references["hf"] > ground.references["hf"] + 0.5
    fixed = compute_integrals(
        atoms=atoms, basis="sto-3g", guess=(ground.mo_coeff, occ), fci_max_determinants=0
    )
    assert fixed.references["hf"] == pytest.approx(ground.references["hf"], abs=1e-8)
    assert "lower symmetric solution" in fixed.reference_notes["hf"]
    assert fixed.point_group == "D2h"


def test_symmetry_broken_rhf_is_reported_not_followed():
    # square H4 (1.5 Angstrom sides): the D2h-adapted RHF lies above a symmetry-broken RHF
    # (reference: the symmetry=False run of this library, which follows the instability)
    atoms = "H 0 0 0; H 0 0 1.5; H 1.5 0 0; H 1.5 0 1.5"
    sym = compute_integrals(atoms=atoms, basis="sto-3g")
    c1 = compute_integrals(atoms=atoms, basis="sto-3g", symmetry=False)
    assert sym.point_group == "D2h" and c1.point_group == "C1"
    assert c1.references["hf"] < sym.references["hf"] - 0.05
    assert "symmetry-broken solution lies" in sym.reference_notes["hf"]
    # the exact energy does not depend on the orbitals (full active space, exact statement)
    assert sym.references["fci"] == pytest.approx(c1.references["fci"], abs=1e-8)
    # reference: PySCF RHF at test time, C1, followed by PySCF's internal stability analysis
    mf = scf.RHF(gto.M(atom=atoms, basis="sto-3g", verbose=0)).run(conv_tol=1e-12)
    for _ in range(3):
        mo, stable = mf.stability(return_status=True)[0::2]
        if stable:
            break
        mf = mf.newton().run(mo, mf.mo_occ)
        mf = scf.RHF(mf.mol).run(mf.make_rdm1(), conv_tol=1e-12)
    assert c1.references["hf"] == pytest.approx(mf.e_tot, abs=1e-8)


def test_geometry_module_does_not_import_pyscf():
    # reference: planning code reads XYZ files through eigensweep.chem.geometry without the
    # chemistry stack (checked in a fresh interpreter)
    import subprocess
    import sys

    code = (
        "import sys; from eigensweep.chem.geometry import read_xyz; "
        "import eigensweep.chem; print('pyscf' in sys.modules)"
    )
    out = subprocess.run([sys.executable, "-c", code], capture_output=True, text=True, check=True)
    assert out.stdout.strip() == "False"
