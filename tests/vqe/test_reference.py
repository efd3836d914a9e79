"""Exact references in the optimize problem's frame, overlaps and spin/number moments.

Outside references: PySCF CASCI/FCI with its spin penalty and ``fci.spin_square``; NumPy dense
diagonalisation of the tapered Hamiltonian; OpenFermion's ``s_squared_operator`` and
``number_operator`` mapped by its own ``jordan_wigner``/``bravyi_kitaev``.
"""

from __future__ import annotations

import csv
from functools import cache

import numpy as np
import pytest
from fixtures import run_plan
from pyscf import fci, gto, mcscf, scf

from eigensweep.chem import compute_integrals
from eigensweep.collect import collect
from eigensweep.errors import StageFileError
from eigensweep.qubit import map_hamiltonian, reduce_to_sector, reference_bits
from eigensweep.vqe import run_optimize
from eigensweep.vqe.detspace import DetSpace
from eigensweep.vqe.reference import ExactReference, check_qubit_problem, state_moments
from eigensweep.vqe.uccsd import UCCSD

LIH = "Li 0 0 0; H 0 0 1.6"
CH2 = "C 0 0 0.1; H 0 0.99 -0.42; H 0 -0.99 -0.42"
O2 = "O 0 0 0; O 0 0 1.2075"
EXACT = {"name": "exact"}


@cache
def integrals(atoms: str, multiplicity: int = 1, active: tuple | None = None):
    act = None if active is None else {"electrons": active[0], "orbitals": active[1]}
    return compute_integrals(atoms=atoms, basis="sto-3g", multiplicity=multiplicity, active=act)


@cache
def tapering(atoms: str, mapping: str, multiplicity: int = 1, active: tuple | None = None):
    ints = integrals(atoms, multiplicity, active)
    ham = map_hamiltonian(ints.h1e, ints.eri, ints.e_core, mapping)
    return ham, reduce_to_sector(ham, reference_bits(ints.nelec, ints.norb, mapping))


def optimize(ints, tap=None, **kw):
    return run_optimize(
        h1e=ints.h1e,
        eri=ints.eri,
        e_core=ints.e_core,
        norb=ints.norb,
        nelec=ints.nelec,
        ansatz=kw.pop("ansatz", {"name": "uccsd"}),
        optimizer=kw.pop("optimizer", {"name": "lbfgs"}),
        estimator=EXACT,
        tapering=tap,
        exact=ExactReference.from_integrals(ints),
        seed=7,
        **kw,
    )


def pyscf_spin_roots(ints, ss: float, nroots: int):
    solver = fci.addons.fix_spin_(fci.direct_spin1.FCI(), shift=0.5, ss=ss)
    solver.conv_tol = 1e-12
    e, c = solver.kernel(
        ints.h1e, ints.eri, ints.norb, ints.nelec, ecore=ints.e_core, nroots=nroots
    )
    return np.asarray(e), np.array([np.asarray(v).reshape(-1) for v in c])


@pytest.mark.parametrize("mapping", ["jordan_wigner", "bravyi_kitaev", "parity"])
def test_tapered_exact_state_is_the_tapered_ground_state(mapping):
    ints = integrals(LIH)
    _, tap = tapering(LIH, mapping)
    ref = ExactReference.from_integrals(ints)
    psi = ref.qubit_vectors(mapping, tap)[0]
    # reference: NumPy dense diagonalisation of the tapered Hamiltonian (its ground state is
    # the singlet for LiH at 1.6 Angstrom, PySCF CASCI energy)
    vals, vecs = np.linalg.eigh(tap.hamiltonian.sparse_matrix().toarray())
    assert vals[0] == pytest.approx(ints.references["casci"], abs=1e-9)
    assert abs(np.vdot(vecs[:, 0], psi)) ** 2 == pytest.approx(1.0, abs=1e-9)
    # round trip back to the full encoded state (closed form: the tapering is unitary)
    full = ref.qubit_vectors(mapping)[0]
    assert np.allclose(tap.untaper_state(psi), full, atol=1e-12)


def test_check_qubit_problem_accepts_the_mapping_and_rejects_another():
    ints = integrals(LIH)
    ref = ExactReference.from_integrals(ints)
    ham_bk, tap_bk = tapering(LIH, "bravyi_kitaev")
    out = check_qubit_problem(tap_bk.hamiltonian, ref, "bravyi_kitaev", "k", tap_bk)
    # reference: PySCF CASCI energy of the integrals
    assert out["energy_sector_qubit"] == pytest.approx(ints.references["casci"], abs=1e-9)
    with pytest.raises(StageFileError, match="not an eigenstate"):
        check_qubit_problem(ham_bk, ref, "jordan_wigner", "k")


def test_ch2_triplet_tapered_overlap_is_reproducible_and_at_most_one():
    ints = integrals(CH2, 3, (6, 6))
    _, tap = tapering(CH2, "jordan_wigner", 3, (6, 6))
    assert tap.n_qubits >= 8  # above 8 qubits the old overlap came from a random-start solver
    runs = [optimize(ints, tap).overlap_exact for _ in range(3)]
    assert runs[0] == runs[1] == runs[2] and runs[0] <= 1.0 + 1e-12
    # reference: the untapered UCCSD state at the same parameters against PySCF's triplet CASCI
    full = optimize(ints)
    e_ref, c_ref = fci.direct_spin1.FCI().kernel(
        ints.h1e, ints.eri, ints.norb, ints.nelec, ecore=ints.e_core
    )
    state = UCCSD(DetSpace(ints.norb, ints.nelec, ints.h1e, ints.eri, ints.e_core)).state(
        full.params
    )
    assert full.energy_exact == pytest.approx(e_ref, abs=1e-9)
    assert full.overlap_exact == pytest.approx(float(state @ np.ravel(c_ref)) ** 2, abs=1e-9)
    assert runs[0] == pytest.approx(full.overlap_exact, abs=1e-6)
    # reference: PySCF spin_square of the optimized state; a triplet
    assert full.spin_square == pytest.approx(
        fci.spin_square(state, ints.norb, ints.nelec)[0], abs=1e-9
    )
    assert not full.spin_mismatch


def test_o2_singlet_reference_is_the_singlet_space():
    ints = integrals(O2, 1, (8, 6))
    res = optimize(ints)
    # reference: PySCF FCI with spin penalty, two degenerate 1Delta_g roots
    e_ref, c_ref = pyscf_spin_roots(ints, 0.0, 2)
    assert res.energy_exact == pytest.approx(e_ref[0], abs=1e-9)
    state = UCCSD(DetSpace(ints.norb, ints.nelec, ints.h1e, ints.eri, ints.e_core)).state(
        res.params
    )
    assert res.overlap_exact == pytest.approx(float(np.sum((c_ref @ state) ** 2)), abs=1e-6)
    assert res.overlap_exact > 0.5  # the singlet, not the triplet (8e-13 before)


def test_o2_singlet_sector_vectors_span_the_tapered_ground_space():
    ints = integrals(O2, 1, (8, 6))
    _, tap = tapering(O2, "jordan_wigner", 1, (8, 6))
    ref = ExactReference.from_integrals(ints)
    frame = ref.sector_vectors("jordan_wigner", tap)
    # reference: NumPy dense diagonalisation of the tapered Hamiltonian; its lowest level is
    # PySCF's singlet CASCI energy and its eigenspace is what the sector holds of the pair
    vals, vecs = np.linalg.eigh(tap.hamiltonian.sparse_matrix().toarray())
    ground = vecs[:, np.abs(vals - vals[0]) < 1e-8]
    assert vals[0] == pytest.approx(ints.references["casci"], abs=1e-9)
    assert frame.shape[0] == ground.shape[1]
    assert np.allclose(frame.conj() @ frame.T, np.eye(frame.shape[0]), atol=1e-10)
    # same subspace: the projectors agree (closed form: P = sum |v><v| for an orthonormal basis)
    assert np.allclose(frame.T @ frame.conj(), ground @ ground.conj().T, atol=1e-8)
    out = check_qubit_problem(tap.hamiltonian, ref, "jordan_wigner", "k", tap)
    assert out["energy_sector_qubit"] == pytest.approx(vals[0], abs=1e-9)


def openfermion_moments(psi: np.ndarray, norb: int, mapping: str, tap=None):
    import openfermion as of

    from eigensweep.qubit.mapping import _from_qubit_operator  # PauliExpansion from OpenFermion

    n_q = 2 * norb
    transform = {"jordan_wigner": of.jordan_wigner, "bravyi_kitaev": of.bravyi_kitaev}[mapping]
    out = []
    for op in (of.number_operator(n_q), of.s_squared_operator(norb)):
        qop = transform(op) if mapping == "jordan_wigner" else transform(op, n_q)
        if tap is None:
            mat = of.get_sparse_operator(qop, n_q)
        else:
            mat = tap.taper_operator(_from_qubit_operator(qop, n_q)).sparse_matrix()
        out.append(float(np.vdot(psi, mat @ psi).real))
    return out


@pytest.mark.parametrize("mapping", ["jordan_wigner", "bravyi_kitaev"])
def test_moments_of_arbitrary_qubit_states_match_openfermion(mapping):
    ints = integrals(LIH)
    rng = np.random.default_rng(3)
    psi = rng.standard_normal(1 << 12) + 1j * rng.standard_normal(1 << 12)
    psi /= np.linalg.norm(psi)
    n, s2 = state_moments(psi, ints.norb, ints.nelec, mapping=mapping)
    # reference: OpenFermion number and S^2 operators under its own mapping
    assert [n, s2] == pytest.approx(openfermion_moments(psi, ints.norb, mapping), abs=1e-9)
    _, tap = tapering(LIH, mapping)
    phi = rng.standard_normal(1 << tap.n_qubits) + 1j * rng.standard_normal(1 << tap.n_qubits)
    phi /= np.linalg.norm(phi)
    n, s2 = state_moments(phi, ints.norb, ints.nelec, mapping=mapping, tapering=tap)
    assert [n, s2] == pytest.approx(openfermion_moments(phi, ints.norb, mapping, tap), abs=1e-9)


def test_a_wrong_spin_state_is_flagged():
    ints = integrals("H 0 0 0; H 0 0 0.74")
    space = DetSpace(ints.norb, ints.nelec, ints.h1e, ints.eri, ints.e_core)
    ans = UCCSD(space)
    theta = np.zeros(ans.n_params)
    theta[1:3] = (0.6, -0.6)  # alpha and beta singles with opposite angles: a triplet admixture
    res = optimize(ints, initial_params=theta, optimizer={"name": "cobyla", "maxiter": 5})
    state = ans.state(res.params)
    # reference: PySCF spin_square of the returned state
    assert res.spin_square == pytest.approx(fci.spin_square(state, 2, (1, 1))[0], abs=1e-9)
    assert res.spin_square > 0.1 and res.spin_mismatch


def test_restarted_uccsd_below_the_singlet_is_flagged_as_another_spin():
    from eigensweep.collect import _below_exact_cause

    ints = integrals(O2, 1, (8, 6))
    res = optimize(ints, optimizer={"name": "lbfgs", "restarts": 3, "restart_scale": 0.3})
    state = UCCSD(DetSpace(ints.norb, ints.nelec, ints.h1e, ints.eri, ints.e_core)).state(
        res.params
    )
    # reference: PySCF FCI without spin constraint (the triplet) bounds the energy from below;
    # the restarted run lies between it and the singlet, so it has left the singlet
    e_any = fci.direct_spin1.FCI().kernel(ints.h1e, ints.eri, 6, (4, 4), ecore=ints.e_core)[0]
    assert e_any - 1e-9 < res.energy < res.energy_exact - 1e-3
    # reference: PySCF spin_square of the optimized state
    assert res.spin_square == pytest.approx(fci.spin_square(state, 6, (4, 4))[0], abs=1e-9)
    assert res.spin_mismatch and res.spin_square > 0.5
    cause = _below_exact_cause((res.energy - res.energy_exact) * 1000, res.to_store()[1])
    assert cause.startswith("another spin")


def test_spin_flip_tied_state_reports_its_true_spin():
    # issue 20: the tied ansatz ("spin_adapted" before) is not spin-adapted; its <S^2> must be
    # reported as it is, whatever it is
    ints = integrals(O2, 1, (8, 6))
    res = optimize(
        ints,
        ansatz={"name": "uccsd", "spin_flip_tied": True},
        optimizer={"name": "lbfgs", "restarts": 2, "restart_scale": 0.3},
    )
    space = DetSpace(ints.norb, ints.nelec, ints.h1e, ints.eri, ints.e_core)
    state = UCCSD(space, spin_adapted=True).state(res.params)
    # reference: PySCF spin_square of the optimized state; S(S+1) = 0 for the singlet
    s2 = fci.spin_square(state, 6, (4, 4))[0]
    assert res.spin_square == pytest.approx(s2, abs=1e-9)
    assert res.spin_mismatch == (abs(s2) > 1e-3)  # the engine's tolerance, 1e-3


def test_o2_singlet_tapered_sweep_writes_its_summary(tmp_path):
    # issue 20: this sweep once lost its summary (nan overlap), then stopped in the sector check
    # because the first stored 1Delta_g vector is a mixture of two D2h sectors; only the part in
    # the reference's sector is a state of the tapered problem.
    raw = {
        "molecules": [
            {
                "name": "o2",
                "atoms": O2,
                "multiplicity": 1,
                "active": {"electrons": 8, "orbitals": 6},
            }
        ],
        "methods": {"taper": [True], "optimizer": [{"name": "lbfgs", "maxiter": 30}]},
    }
    results = tmp_path / "results"
    cfg, plan = run_plan(raw, results)
    collect(plan.rows, results, cfg["collect"]["accuracy_mha"], plan.exports, study="o2")
    with open(results / "o2" / "summary.csv", newline="") as fh:
        rows = list(csv.DictReader(fh))
    assert len(rows) == 1 and rows[0]["tapered"] == "True"
    # reference: PySCF RHF + CASCI(6 orbitals, 8 electrons) with the spin fixed to a singlet
    # (fix_spin_, ss = 0), computed here from the molecule alone
    mol = gto.M(atom=O2, basis="sto-3g", spin=0, symmetry=True, verbose=0)
    mf = scf.RHF(mol).run()
    cas = mcscf.CASCI(mf, 6, 8)
    cas.fcisolver = fci.addons.fix_spin_(cas.fcisolver, shift=0.5, ss=0.0)
    cas.fcisolver.conv_tol = 1e-12
    e_singlet = cas.kernel()[0]
    assert float(rows[0]["energy_exact_eh"]) == pytest.approx(e_singlet, abs=1e-7)
    # the tapered sector holds one component of the pair; the optimized state's weight in it
    overlap = float(rows[0]["overlap_exact"])
    assert 0.5 < overlap <= 1.0 + 1e-9
