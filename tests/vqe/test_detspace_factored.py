"""Factored determinant-space gates: shared string maps, threads, size gate, memory estimate."""

from __future__ import annotations

import math

import numpy as np
import openfermion as of
import pytest
from fixtures import active_integrals
from scipy.sparse.linalg import expm_multiply

from eigensweep.errors import ConfigError
from eigensweep.vqe import UCCSD, DetSpace, Excitation, FermionicAnsatz, detsize, from_qubit_state
from eigensweep.vqe.fermionic import sd_excitation_terms


def _space(name: str, nelec=None, threaded: bool = False) -> DetSpace:
    m = active_integrals(name)
    space = DetSpace(m["norb"], nelec or m["nelec"], m["h1e"], m["eri"], m["e_core"])
    if threaded:
        space._threads = None  # force the multi-threaded kernels on a small space
    return space


def _jw_generators(ansatz) -> list:
    """OpenFermion sparse Jordan-Wigner matrices of the ansatz generators, in order."""
    n = ansatz.n_qubits
    out = []
    for op in ansatz.operator_list():
        fop = of.FermionOperator(tuple(tuple(t) for t in op["term"]), 1.0)
        out.append(of.get_sparse_operator(of.jordan_wigner(fop - of.hermitian_conjugated(fop)), n))
    return out


def _jw_state(ansatz, theta, gens) -> np.ndarray:
    """Ansatz state from the sparse generators with SciPy expm_multiply on the JW HF state."""
    n = ansatz.n_qubits
    psi = np.zeros(1 << n, dtype=complex)
    psi[sum(1 << (n - 1 - k) for k in ansatz.occupied_spin_orbitals())] = 1.0
    for gen, phi in zip(gens, ansatz._sequence.angles(theta), strict=True):
        psi = expm_multiply(phi * gen, psi)
    return psi


def _mixed_ansatz(space: DetSpace) -> FermionicAnsatz:
    """Every fourth UCCSD excitation (alpha-alpha, beta-beta, alpha-beta doubles, singles),
    with one parameter shared by two gates (coefficient -0.5)."""
    doubles, singles = sd_excitation_terms(space.norb, space.nelec)
    terms = (doubles + singles)[::4]
    exc = [Excitation(t, k) for k, t in enumerate(terms)] + [Excitation(terms[0], 1, -0.5)]
    return FermionicAnsatz(space, exc, len(terms))


def _pyscf_energy(m: dict, space: DetSpace, psi: np.ndarray) -> float:
    """PySCF direct_spin1.energy of the CI vector of a JW statevector (plus the core energy)."""
    from pyscf.fci import direct_spin1

    civec = from_qubit_state(psi, space.norb, space.nelec).real.reshape(space.na, space.nb)
    return (
        float(direct_spin1.energy(m["h1e"], m["eri"], civec, space.norb, space.nelec)) + m["e_core"]
    )


@pytest.mark.parametrize("threaded", [False, True])
def test_gradient_equals_finite_difference_of_openfermion_energy(threaded):
    # reference: OpenFermion JW generators with SciPy expm_multiply for the state, PySCF
    # direct_spin1.energy for its energy, computed at test time; central finite differences
    # (common practice); open-shell (2, 1) LiH sector
    m = active_integrals("LiH")
    space = _space("LiH", (2, 1), threaded)
    ansatz = _mixed_ansatz(space)
    assert {g.kind for g in ansatz._sequence.gates} == {0, 1, 2}
    gens = _jw_generators(ansatz)
    theta = 0.3 * np.random.default_rng(11).standard_normal(ansatz.n_params)

    def ref_energy(x: np.ndarray) -> float:
        return _pyscf_energy(m, space, _jw_state(ansatz, x, gens))

    energy, grad = ansatz.energy_and_gradient(theta)
    assert abs(energy - ref_energy(theta)) < 1e-10
    h = 1e-5
    for k in range(ansatz.n_params):
        step = np.zeros_like(theta)
        step[k] = h
        fd = (ref_energy(theta + step) - ref_energy(theta - step)) / (2 * h)
        assert abs(grad[k] - fd) < 1e-7


@pytest.mark.parametrize("threaded", [False, True])
def test_blocked_uccsd_sweeps_equal_openfermion_and_finite_differences(threaded):
    # reference: OpenFermion JW generators with SciPy expm_multiply for the state, PySCF
    # direct_spin1.energy for its energy, computed at test time; central finite differences
    # (common practice). Full UCCSD on the open-shell (2, 1) LiH sector: the sequence is cut
    # into multi-gate blocks of all three kinds (alpha-beta doubles sharing an alpha single,
    # alpha-only runs, beta-only runs)
    m = active_integrals("LiH")
    space = _space("LiH", (2, 1), threaded)
    ansatz = UCCSD(space)
    blocks = ansatz._sequence._blocks
    for kind in (0, 1, 2):
        sizes = blocks[blocks[:, 0] == kind, 2] - blocks[blocks[:, 0] == kind, 1]
        assert sizes.max() > 1
    assert blocks[:, 2].max() == len(ansatz._sequence.gates)
    gens = _jw_generators(ansatz)
    theta = 0.3 * np.random.default_rng(3).standard_normal(ansatz.n_params)

    def ref_energy(x: np.ndarray) -> float:
        return _pyscf_energy(m, space, _jw_state(ansatz, x, gens))

    assert np.max(np.abs(ansatz.qubit_state(theta) - _jw_state(ansatz, theta, gens))) < 1e-10
    energy, grad = ansatz.energy_and_gradient(theta)
    assert abs(energy - ref_energy(theta)) < 1e-10
    h = 1e-5
    for k in range(ansatz.n_params):
        step = np.zeros_like(theta)
        step[k] = h
        fd = (ref_energy(theta + step) - ref_energy(theta - step)) / (2 * h)
        assert abs(grad[k] - fd) < 1e-7


def test_threaded_kernels_reproduce_openfermion_states():
    # reference: OpenFermion JW generators + SciPy expm_multiply (alpha-only, beta-only and
    # alpha-beta gates), closed shell
    space = _space("LiH", threaded=True)
    ansatz = _mixed_ansatz(space)
    theta = 0.3 * np.random.default_rng(5).standard_normal(ansatz.n_params)
    psi = _jw_state(ansatz, theta, _jw_generators(ansatz))
    assert np.max(np.abs(ansatz.qubit_state(theta) - psi)) < 1e-10


def test_string_maps_are_shared_and_grow_with_strings():
    space = _space("H2O")
    ansatz = UCCSD(space)
    no, nv = 5, 2  # H2O/STO-3G: 5 doubly occupied and 2 virtual spatial orbitals
    # closed forms (combinatorics): one alpha map per alpha single and per alpha-alpha double
    # (the alpha parts of the alpha-beta doubles are the alpha singles), the same for beta
    per_spin = no * nv + math.comb(no, 2) * math.comb(nv, 2)
    assert len(space._map_cache) == 2 * per_spin
    # each map has at most C(norb, n_spin) entries: the memory of all gates is bounded by
    # (number of maps) x (number of strings), not by determinants x excitations
    n_strings = math.comb(7, 5)
    assert all(m[0].size <= n_strings for m in space._map_cache.values())
    pairs = ansatz._sequence.n_pairs
    assert ansatz._sequence.nbytes() < 24 * pairs


def test_size_gate_refuses_a_space_beyond_memory(monkeypatch):
    monkeypatch.setattr("eigensweep.vqe.detspace.physical_memory_mb", lambda: 1000)
    with pytest.raises(ConfigError, match="molecules\\[\\].active") as err:
        DetSpace(16, (8, 8))
    assert "\n" not in str(err.value)
    DetSpace(4, (2, 2))  # a small space still fits into 1000 MB


def test_memory_estimate_counts_determinants_like_pyscf():
    from pyscf.fci import cistring

    # reference: PySCF cistring.num_strings computed at test time
    for norb, nelec in ((12, (6, 6)), (14, (7, 7)), (10, (5, 4))):
        dets = cistring.num_strings(norb, nelec[0]) * cistring.num_strings(norb, nelec[1])
        assert detsize.n_determinants(norb, nelec) == dets
