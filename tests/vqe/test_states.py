"""Properties of optimized states and the excited-state methods (``methods.states``).

References: PySCF computed here (FCI roots with ``fci.spin_square``, FCI densities and
transition densities from ``fci.direct_spin1.make_rdm1`` / ``trans_rdm1``, dipoles from
``scf.hf.dip_moment`` on PySCF's own AO dipole integrals).
"""

from __future__ import annotations

from functools import cache

import numpy as np
import pytest
from fixtures import rhf_mo_integrals, run_plan
from pyscf import fci, gto, scf

from eigensweep.stages import load_integrals
from eigensweep.store import read_stage

LIH = "Li 0 0 0; H 0 0 {r}"
H2 = "H 0 0 0; H 0 0 {r}"


@cache
def pyscf_fci(atoms: str, basis: str, nroots: int = 8):
    """PySCF RHF + full-space FCI roots (no spin restriction) and AO->MO dipole integrals."""
    mol, mf, h1, eri = rhf_mo_integrals(atoms, basis)
    solver = fci.direct_spin1.FCI(mol)
    solver.conv_tol = 1e-12
    e, v = solver.kernel(h1, eri, mol.nao, mol.nelec, nroots=nroots)
    return mol, mf, np.asarray(e) + mol.energy_nuc(), [np.asarray(x) for x in v]


def pyscf_dipole(mf, dm_mo):
    """PySCF's dipole (atomic units, origin 0) of an MO-basis 1-RDM."""
    c = mf.mo_coeff
    return scf.hf.dip_moment(mf.mol, c @ dm_mo @ c.T, unit="AU", verbose=0)


def _config(atoms, basis, rs, states=None, nroots=1, ansatz=None, optimizer=None):
    methods = {"ansatz": [ansatz or {"name": "uccsd"}]}
    if optimizer is not None:
        methods["optimizer"] = [optimizer]
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


def _singlets(atoms: str, basis: str, n: int = 3):
    """PySCF FCI roots with <S^2> = 0 (fci.spin_square), lowest first, and their vectors."""
    mol, mf, e, c = pyscf_fci(atoms, basis)
    keep = [i for i, v in enumerate(c) if abs(fci.spin_square(v, mol.nao, mol.nelec)[0]) < 1e-6]
    return e[keep][:n], [c[i] for i in keep][:n]


@cache
def _states_run(
    atoms: str, basis: str, rs: tuple, states: str, tmp: str, ansatz=None, optimizer=None
):
    from pathlib import Path

    from eigensweep.collect import state_rows

    ansatz = json_load(ansatz) if ansatz else None
    optimizer = json_load(optimizer) if optimizer else None
    cfg = _config(
        atoms, basis, list(rs), [json_load(states)], nroots=3, ansatz=ansatz, optimizer=optimizer
    )
    _, plan = run_plan(cfg, Path(tmp))
    return state_rows(plan.rows, Path(tmp))


def json_load(text: str):
    import json

    return json.loads(text)


@pytest.fixture(scope="module")
def workdir(tmp_path_factory):
    return str(tmp_path_factory.mktemp("states"))


@pytest.mark.parametrize(
    "atoms,basis,rs", [(H2, "6-31g", (0.74, 1.2)), (LIH, "sto-3g", (1.6,))], ids=["h2", "lih"]
)
def test_vqd_lowest_three_singlets_match_pyscf_fci_roots(atoms, basis, rs, workdir):
    rows = _states_run(atoms, basis, rs, '{"name": "vqd"}', workdir + f"/{basis}")
    for r0 in rs:
        mine = sorted((r for r in rows if r["point"] == f"r={r0}"), key=lambda r: r["state"])
        ref, _ = _singlets(atoms.format(r=r0), basis)
        assert len(mine) == 3
        for r, e in zip(mine, ref, strict=True):
            # reference: PySCF FCI roots of <S^2> = 0; chemical accuracy 1.6 mHa
            assert abs(r["energy_eh"] - e) * 1000 < 1.6, (r0, r["state"])
            assert r["energy_eh"] > e - 1e-8  # variational: never below its root
            assert r["energy_exact_eh"] == pytest.approx(e, abs=1e-8)
            assert r["s2"] == pytest.approx(0.0, abs=1e-4) and not r["below_exact"]


@pytest.mark.parametrize(
    "atoms,basis,rs", [(H2, "6-31g", (0.74, 1.2)), (LIH, "sto-3g", (1.6,))], ids=["h2", "lih"]
)
def test_ssvqe_lowest_three_singlets_match_pyscf_fci_roots(atoms, basis, rs, workdir):
    # SSVQE needs one unitary that carries three initial states to three eigenstates: k-UpCCGSD
    # with k = 3 does (measured: H2 exact, LiH 0.03, 0.09, 0.14 mHa); UCCSD does not (H2 4.6 mHa)
    ansatz = '{"name": "kupccgsd", "k": 3}'
    rows = _states_run(atoms, basis, rs, '{"name": "ssvqe"}', workdir + f"/ss-{basis}", ansatz)
    for r0 in rs:
        mine = sorted((r for r in rows if r["point"] == f"r={r0}"), key=lambda r: r["state"])
        ref, _ = _singlets(atoms.format(r=r0), basis)
        assert len(mine) == 3
        for r, e in zip(mine, ref, strict=True):
            # reference: PySCF FCI roots of <S^2> = 0; chemical accuracy 1.6 mHa
            assert abs(r["energy_eh"] - e) * 1000 < 1.6, (r0, r["state"])
            assert r["energy_eh"] > e - 1e-8
            assert r["s2"] == pytest.approx(0.0, abs=1e-4)


@pytest.mark.slow  # two LiH points x (ground + 2 states) x 3 starts: about two minutes here
@pytest.mark.parametrize(
    "states,ansatz,optimizer",
    [
        # at 2.0 A one VQD start stalls 9.5 mHa above the second singlet (a local minimum of
        # the deflated objective, measured); the best of three starts reaches 0.06 mHa
        ('{"name": "vqd"}', None, '{"name": "lbfgs", "restarts": 2}'),
        ('{"name": "ssvqe"}', '{"name": "kupccgsd", "k": 3}', None),
    ],
    ids=["vqd", "ssvqe"],
)
def test_lih_short_scan_lowest_three_singlets_match_pyscf_fci_roots(
    states, ansatz, optimizer, workdir
):
    rs = (1.6, 2.0)
    tag = workdir + "/lih-scan-" + json_load(states)["name"]
    rows = _states_run(LIH, "sto-3g", rs, states, tag, ansatz, optimizer)
    for r0 in rs:
        mine = sorted(
            (r for r in rows if float(r["point"].split("=")[1]) == r0), key=lambda r: r["state"]
        )
        ref, _ = _singlets(LIH.format(r=r0), "sto-3g")
        assert len(mine) == 3
        for r, e in zip(mine, ref, strict=True):
            # reference: PySCF FCI roots of <S^2> = 0; chemical accuracy 1.6 mHa
            assert abs(r["energy_eh"] - e) * 1000 < 1.6, (r0, r["state"])
            assert r["energy_eh"] > e - 1e-8  # variational: never below its root


def test_h2_oscillator_strengths_match_pyscf_fci_transition_dipoles(workdir):
    rows = _states_run(H2, "6-31g", (0.74, 1.2), '{"name": "vqd"}', workdir + "/6-31g")
    for r0 in (0.74, 1.2):
        mol, mf, _, _ = pyscf_fci(H2.format(r=r0), "6-31g")
        e, c = _singlets(H2.format(r=r0), "6-31g")
        with mol.with_common_orig((0, 0, 0)):
            ao = mol.intor_symmetric("int1e_r")
        mo = np.einsum("ui,xuv,vj->xij", mf.mo_coeff, ao, mf.mo_coeff)
        mine = sorted((r for r in rows if r["point"] == f"r={r0}"), key=lambda r: r["state"])
        for k in (1, 2):
            t = fci.direct_spin1.trans_rdm1(c[0], c[k], mol.nao, mol.nelec)
            tdm = -np.einsum("xpq,pq->x", mo, t)
            f_ref = 2.0 / 3.0 * (e[k] - e[0]) * float(tdm @ tdm)
            # reference: PySCF FCI transition density with PySCF's AO dipole integrals
            assert mine[k]["oscillator_strength"] == pytest.approx(f_ref, abs=1e-6)
            assert mine[k]["oscillator_strength_exact"] == pytest.approx(f_ref, abs=1e-8)
        # the sigma_g -> sigma_u singlet is bright (f about 0.6 at 0.74 A), the next dark
        # (it has the ground state's symmetry; common practice: parity selection rule)
        assert mine[1]["oscillator_strength"] > 0.3 and mine[2]["oscillator_strength"] < 1e-6


def test_qeom_excitation_energies_against_fci(workdir):
    rows = _states_run(H2, "6-31g", (0.74,), '{"name": "qeom"}', workdir + "/qeom")
    ref, _ = _singlets(H2.format(r=0.74), "6-31g")
    mine = sorted(rows, key=lambda r: r["state"])
    assert mine[0]["energy_eh"] == pytest.approx(ref[0], abs=1e-8)
    for k in (1, 2):
        de, de_ref = mine[k]["energy_eh"] - mine[0]["energy_eh"], ref[k] - ref[0]
        # reference: PySCF FCI singlet roots. qEOM (singles + doubles, Ollitrault et al. 2020)
        # is not exact here: measured 8.2 and 4.0 mHa above the FCI excitation energies
        assert 0 < (de - de_ref) * 1000 < 10.0


def test_stretched_h2_default_finds_singlets_all_sz_reports_the_triplet(workdir):
    atoms = H2.format(r=2.0)
    mol, _, e, c = pyscf_fci(atoms, "6-31g")
    s2 = [fci.spin_square(v, mol.nao, mol.nelec)[0] for v in c]
    # reference: PySCF FCI in S_z = 0: the second root is the b 3Sigma_u+ triplet, below the
    # lowest excited singlet
    assert s2[1] == pytest.approx(2.0, abs=1e-6) and abs(s2[2]) < 1e-6
    rows = _states_run(H2, "6-31g", (2.0,), '{"name": "vqd"}', workdir + "/stretched")
    mine = sorted(rows, key=lambda r: r["state"])
    assert all(abs(r["s2"]) < 1e-6 for r in mine)
    assert "lower states of another spin" in mine[1]["notes"]
    rows = _states_run(H2, "6-31g", (2.0,), '{"name": "vqd", "spin": "all"}', workdir + "/sz")
    mine = sorted(rows, key=lambda r: r["state"])
    assert mine[1]["s2"] == pytest.approx(2.0, abs=1e-6)
    assert abs(mine[1]["energy_eh"] - e[1]) * 1000 < 1.6 and mine[1]["energy_eh"] > e[1] - 1e-8
