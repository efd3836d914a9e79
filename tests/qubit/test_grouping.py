"""Qubit-wise commuting groups (sorted insertion, Crawford et al., Quantum 5, 385 (2021)) and shot
budgets (Wecker, Hastings, Troyer, arXiv:1507.08969)."""

from __future__ import annotations

import math

import numpy as np
import openfermion as of
import pytest
from fixtures import pyscf_molecule

from eigensweep.errors import ConfigError
from eigensweep.qubit import (
    PauliExpansion,
    basis_state,
    map_hamiltonian,
    measurement_basis,
    qwc_groups,
    reference_bits,
    shots_for_precision,
)


def lih(mapping: str = "jordan_wigner") -> PauliExpansion:
    m = pyscf_molecule("lih", with_fci=False)
    return map_hamiltonian(m.h1e, m.eri, m.e_core, mapping)


def qubit_wise_commute(ham: PauliExpansion, i: int, j: int) -> bool:
    both = (ham.x[i] | ham.z[i]) & (ham.x[j] | ham.z[j])
    same = (ham.x[i] == ham.x[j]) & (ham.z[i] == ham.z[j])
    return bool(np.all(~both | same))


# ---------------------------------------------------------------- bad input
def test_bad_input():
    ham = PauliExpansion.from_strings(["ZI", "XX"], [1.0, 0.5])
    with pytest.raises(TypeError, match="PauliExpansion"):
        qwc_groups(ham.to_openfermion())
    with pytest.raises(ConfigError, match="positive"):
        shots_for_precision(ham, target_se=0.0)
    with pytest.raises(TypeError, match="target_se must be a float"):
        shots_for_precision(ham, target_se="1e-3")
    with pytest.raises(ConfigError, match="expected \\(4,\\)"):
        shots_for_precision(ham, state=np.ones(8, complex))
    with pytest.raises(ValueError, match="qubit-wise"):
        measurement_basis(ham, np.array([0, 1]))


# ---------------------------------------------------------------- reference values
def test_groups_are_qubit_wise_commuting_and_cover_terms_once():
    # common practice: the defining properties of a QWC partition
    ham = lih()
    groups = qwc_groups(ham)
    flat = np.concatenate(groups)
    non_identity = np.flatnonzero(~ham.identity_mask)
    assert np.array_equal(np.sort(flat), non_identity)  # each non-identity term exactly once
    for g in groups:
        for a in range(len(g)):
            for b in range(a + 1, len(g)):
                assert qubit_wise_commute(ham, g[a], g[b])
        basis = measurement_basis(ham, g)
        assert len(basis) == ham.n_qubits
    # ../shared/notes (project check values): LiH about 177 groups with sorted insertion
    assert 150 <= len(groups) <= 200


def test_sorted_insertion_order_and_determinism():
    # Crawford et al., Quantum 5, 385 (2021): the heaviest term opens the first group
    ham = lih()
    groups = qwc_groups(ham)
    weights = np.abs(ham.coeffs)
    weights[ham.identity_mask] = -1
    assert groups[0][0] == int(np.argmax(weights))
    again = qwc_groups(lih())
    assert all(np.array_equal(a, b) for a, b in zip(groups, again, strict=True))


def test_small_example_by_hand():
    # common practice, by hand: ZZ and ZI share the Z basis, XX starts a new group
    ham = PauliExpansion.from_strings(["II", "ZZ", "ZI", "XX", "IX"], [9.0, 1.0, 0.5, 0.8, 0.1])
    labels = ham.labels()
    groups = [[labels[i] for i in g] for g in qwc_groups(ham)]
    assert groups == [["ZZ", "ZI"], ["XX", "IX"]]


def test_one_norm_shot_bound_formula():
    # Wecker, Hastings, Troyer (arXiv:1507.08969), from memory: M = (sum_{t != I} |c_t| / eps)^2
    ham = PauliExpansion.from_strings(["II", "ZI", "XY"], [-3.0, 0.4, -0.2])
    out = shots_for_precision(ham, target_se=1e-3)
    assert out["shots_one_norm_bound"] == math.ceil((0.6 / 1e-3) ** 2)
    assert out["shots_variance"] is None and out["n_groups"] == 2


@pytest.mark.parametrize("seed", [0, 1])
def test_variance_shots_never_exceed_one_norm_bound(seed):
    # Cauchy-Schwarz, common practice: sqrt(Var_g) <= sum_{t in g} |c_t|
    ham = lih()
    m = pyscf_molecule("lih", with_fci=False)
    rng = np.random.default_rng(seed)
    states = [basis_state(reference_bits(m.nelec, m.norb, "jordan_wigner"))]
    psi = rng.normal(size=1 << 12) + 1j * rng.normal(size=1 << 12)
    states.append(psi / np.linalg.norm(psi))
    for state in states:
        out = shots_for_precision(ham, target_se=1.6e-3, state=state)
        assert 0 < out["shots_variance"] <= out["shots_one_norm_bound"]
        assert out["shots_per_group"].sum() >= out["shots_variance"]


def test_group_variance_matches_openfermion():
    # reference: OpenFermion get_sparse_operator computed at test time, Var = <H^2> - <H>^2
    ham = lih()
    groups = qwc_groups(ham)
    rng = np.random.default_rng(3)
    psi = rng.normal(size=1 << 12) + 1j * rng.normal(size=1 << 12)
    psi /= np.linalg.norm(psi)
    out = shots_for_precision(ham, state=psi, groups=groups)
    for i in (0, 7, len(groups) - 1):
        mat = of.get_sparse_operator(ham.subset(groups[i]).to_openfermion(), 12)
        v = mat @ psi
        var = np.vdot(v, v).real - np.vdot(psi, v).real ** 2
        assert out["group_std"][i] == pytest.approx(math.sqrt(max(var, 0.0)), abs=1e-12)
