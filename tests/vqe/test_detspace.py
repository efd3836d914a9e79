"""Determinant-space emulation agrees with OpenFermion's Jordan-Wigner statevectors."""

from __future__ import annotations

import numpy as np
import openfermion as of
import pytest
from fixtures import active_integrals, space_of
from scipy.sparse.linalg import expm_multiply

from eigensweep.circuit import circuit_from_rotations
from eigensweep.qubit import statevector as sv
from eigensweep.qubit.mapping import (
    encode_occupations,
    encode_state,
    generator_paulis,
    map_hamiltonian,
)
from eigensweep.vqe import (
    UCCSD,
    KUpCCGSD,
    from_qubit_state,
    pool_excitations,
    to_qubit_state,
)


def _jw_reference(ansatz, theta):
    """Apply expm of each sparse JW generator to the JW HF state, in the ansatz's order."""
    # reference: OpenFermion + SciPy expm computed at test time
    n = ansatz.n_qubits
    psi = np.zeros(1 << n, dtype=complex)
    psi[sum(1 << (n - 1 - k) for k in ansatz.occupied_spin_orbitals())] = 1.0
    for op, phi in zip(ansatz.operator_list(), ansatz._sequence.angles(theta), strict=True):
        fop = of.FermionOperator(tuple(tuple(t) for t in op["term"]), 1.0)
        gen = of.get_sparse_operator(of.jordan_wigner(fop - of.hermitian_conjugated(fop)), n)
        psi = expm_multiply(phi * gen, psi)
    return psi


@pytest.mark.parametrize("name", ["H2", "LiH"])
def test_uccsd_state_equals_openfermion_jw_state(name):
    ansatz = UCCSD(space_of(name))
    rng = np.random.default_rng(3)
    for _ in range(2):
        theta = 0.3 * rng.standard_normal(ansatz.n_params)
        ours = ansatz.qubit_state(theta)
        ref = _jw_reference(ansatz, theta)
        assert np.max(np.abs(ours - ref)) < 1e-10


def test_generalized_and_spin_adapted_states_equal_openfermion():
    rng = np.random.default_rng(5)
    for ansatz in (
        KUpCCGSD(space_of("LiH"), k=1),
        UCCSD(space_of("LiH"), spin_adapted=True),
    ):
        theta = 0.2 * rng.standard_normal(ansatz.n_params)
        assert np.max(np.abs(ansatz.qubit_state(theta) - _jw_reference(ansatz, theta))) < 1e-10


def test_hf_state_maps_to_plus_hf_and_energy_matches_pyscf():
    space = space_of("LiH")
    q = to_qubit_state(space.hf_state(), space.norb, space.nelec)
    idx = int(np.flatnonzero(q)[0])
    assert q[idx] == 1.0 and bin(idx).count("1") == 4
    # project check values (computed with PySCF): RHF energy of LiH/STO-3G at 1.595 A
    from pyscf import gto, scf

    mol = gto.M(atom="Li 0 0 0; H 0 0 1.595", basis="sto-3g", verbose=0)
    e_hf = scf.RHF(mol).run(conv_tol=1e-12).e_tot
    assert abs(space.energy(space.hf_state()) - e_hf) < 1e-8


@pytest.mark.parametrize("name", ["H2", "LiH"])
def test_random_ci_vector_energy_equals_jw_hamiltonian(name):
    m = active_integrals(name)
    space = space_of(name)
    rng = np.random.default_rng(0)
    c = rng.standard_normal(space.dim)
    c /= np.linalg.norm(c)
    q = to_qubit_state(c, space.norb, space.nelec)
    # reference: OpenFermion JW operator of the same integrals, computed at test time
    ham = map_hamiltonian(m["h1e"], m["eri"], m["e_core"], "jordan_wigner")
    assert abs(space.energy(c) - sv.expectation(q, ham)) < 1e-10
    assert np.allclose(from_qubit_state(q, space.norb, space.nelec), c)


@pytest.mark.parametrize("mapping", ["jordan_wigner", "bravyi_kitaev", "parity"])
def test_pauli_rotations_reproduce_state_energy(mapping):
    m = active_integrals("LiH")
    ansatz = UCCSD(space_of("LiH"))
    theta = 0.1 * np.random.default_rng(1).standard_normal(ansatz.n_params)
    ref, rots = ansatz.pauli_rotations(theta, mapping)
    psi = sv.basis_state(ref)
    for x, z, angle in rots:
        psi = sv.apply_pauli_rotation(psi, x, z, angle)
    if mapping == "jordan_wigner":
        assert np.max(np.abs(psi - ansatz.qubit_state(theta))) < 1e-10
    # reference: OpenFermion mapping of the integrals' Hamiltonian, computed at test time
    n = 2 * m["norb"]
    if mapping == "parity":
        op = map_hamiltonian(m["h1e"], m["eri"], m["e_core"], "jordan_wigner").to_openfermion()
        fer = of.reverse_jordan_wigner(op, n)
        qop = of.binary_code_transform(fer, of.parity_code(n))
        from eigensweep.qubit.pauli import PauliExpansion

        qop.compress(1e-12)
        ham = PauliExpansion.from_openfermion(qop, n)
    else:
        ham = map_hamiltonian(m["h1e"], m["eri"], m["e_core"], mapping)
    assert abs(sv.expectation(psi, ham) - ansatz.energy(theta)) < 1e-9


def test_reference_bits_bk_and_parity():
    # common practice: parity encoding stores prefix parities
    assert list(encode_occupations([1, 1, 0, 0], "parity")) == [1, 0, 0, 0]
    assert list(encode_occupations([1, 1, 0, 0], "jordan_wigner")) == [1, 1, 0, 0]
    # BK of |1100>: qubit 1 stores n0 + n1 = 0, qubit 3 stores the total parity = 0
    assert list(encode_occupations([1, 1, 0, 0], "bravyi_kitaev")) == [1, 0, 0, 0]


def test_compiled_circuit_matches_rotations_and_costs():
    ansatz = UCCSD(space_of("H2"))
    theta = np.array([0.11, -0.07, 0.2])
    ref, rots = ansatz.pauli_rotations(theta)
    circ = circuit_from_rotations(ref, rots)
    psi = sv.simulate(circ)
    target = ansatz.qubit_state(theta)
    overlap = abs(np.vdot(target, psi))
    assert abs(overlap - 1.0) < 1e-10
    expected_cnots = sum(2 * (int((x | z).sum()) - 1) for x, z, _ in rots if (x | z).sum() > 1)
    costs = ansatz.circuit_costs()
    assert costs["cnot_count"] == expected_cnots == circ.cnot_count
    assert costs["n_qubits"] == 4 and costs["depth"] == circ.depth > 0


def test_generator_paulis_commute_and_are_real():
    paulis = generator_paulis(((6, 1), (5, 1), (1, 0), (0, 0)), "jordan_wigner", 8)
    assert len(paulis) == 8
    assert all(abs(abs(c) - 0.125) < 1e-12 for _, _, c in paulis)


def _openfermion_generator(term, mapping, n):
    fop = of.FermionOperator(term, 1.0)
    gen = fop - of.hermitian_conjugated(fop)
    if mapping == "jordan_wigner":
        qop = of.jordan_wigner(gen)
    elif mapping == "bravyi_kitaev":
        qop = of.bravyi_kitaev(gen, n)
    else:
        qop = of.binary_code_transform(gen, of.parity_code(n))
    qop.compress(1e-14)
    return [(key, complex(c).imag) for key, c in sorted(qop.terms.items()) if key]


@pytest.mark.parametrize("mapping", ["jordan_wigner", "bravyi_kitaev", "parity"])
def test_generator_paulis_equal_openfermion(mapping):
    # reference: OpenFermion jordan_wigner / bravyi_kitaev / binary_code_transform(parity_code),
    # computed at test time; 10 spin orbitals (not a power of two) and an open shell
    norb, nelec = 5, (3, 2)
    n = 2 * norb
    for term in pool_excitations("generalised_singles_doubles", norb, nelec)[::3]:
        ours = [
            (tuple((int(q), "IXZY"[int(x[q]) + 2 * int(z[q])]) for q in np.flatnonzero(x | z)), c)
            for x, z, c in generator_paulis(term, mapping, n)
        ]
        ref = _openfermion_generator(term, mapping, n)
        assert [k for k, _ in ours] == [k for k, _ in ref]
        assert np.allclose([c for _, c in ours], [c for _, c in ref], atol=1e-14)


@pytest.mark.parametrize("mapping", ["bravyi_kitaev", "parity"])
def test_encoded_state_energy_and_reference_bits(mapping):
    from eigensweep.qubit import map_hamiltonian
    from eigensweep.qubit import reference_bits as qubit_reference_bits

    m = active_integrals("LiH")
    ansatz = UCCSD(space_of("LiH"))
    theta = 0.1 * np.random.default_rng(4).standard_normal(ansatz.n_params)
    psi = encode_state(to_qubit_state(ansatz.state(theta), m["norb"], m["nelec"]), mapping)
    # reference: OpenFermion-mapped Hamiltonian (eigensweep.qubit.map_hamiltonian) at test time
    ham = map_hamiltonian(m["h1e"], m["eri"], m["e_core"], mapping)
    assert abs(sv.expectation(psi, ham) - ansatz.energy(theta)) < 1e-9
    ref = ansatz.pauli_rotations(theta, mapping)[0]
    assert np.array_equal(ref, qubit_reference_bits(m["nelec"], m["norb"], mapping))
    hf = encode_state(to_qubit_state(space_of("LiH").hf_state(), m["norb"], m["nelec"]), mapping)
    assert abs(abs(np.vdot(sv.basis_state(ref), hf)) - 1.0) < 1e-12


def test_circuit_from_stored_meta_reproduces_state():
    import json

    from eigensweep.vqe import circuit_from_meta, run_optimize

    m = active_integrals("H2")
    res = run_optimize(
        **m, ansatz={"name": "uccsd"}, optimizer={"name": "lbfgs"}, estimator={"name": "exact"}
    )
    meta = json.loads(json.dumps(res.ansatz_meta))
    circ = circuit_from_meta(meta, res.params)
    ansatz = UCCSD(space_of("H2"))
    assert abs(abs(np.vdot(sv.simulate(circ), ansatz.qubit_state(res.params))) - 1) < 1e-10
    assert circ.cnot_count == res.cnot_count and circ.depth == res.depth
    hea = run_optimize(
        **m,
        ansatz={"name": "hardware_efficient", "rounds": 1},
        optimizer={"name": "lbfgs", "maxiter": 5},
        estimator={"name": "exact"},
    )
    meta = json.loads(json.dumps(hea.ansatz_meta))
    circ = circuit_from_meta(meta, hea.params)
    assert circ.cnot_count == hea.cnot_count == 3
    ham = map_hamiltonian(m["h1e"], m["eri"], m["e_core"], "jordan_wigner")
    assert abs(sv.expectation(sv.simulate(circ), ham) - hea.energy_exact_at_params) < 1e-10


def test_open_shell_sector_state_equals_openfermion():
    from eigensweep.vqe import DetSpace

    m = active_integrals("LiH")
    space = DetSpace(m["norb"], (2, 1), m["h1e"], m["eri"], m["e_core"])
    ansatz = UCCSD(space)
    theta = 0.3 * np.random.default_rng(9).standard_normal(ansatz.n_params)
    assert np.max(np.abs(ansatz.qubit_state(theta) - _jw_reference(ansatz, theta))) < 1e-10
    ham = map_hamiltonian(m["h1e"], m["eri"], m["e_core"], "jordan_wigner")
    assert abs(sv.expectation(ansatz.qubit_state(theta), ham) - ansatz.energy(theta)) < 1e-10
