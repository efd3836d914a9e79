"""PauliExpansion: bad input, round trips, then reference values (OpenFermion at test time)."""

from __future__ import annotations

import numpy as np
import openfermion as of
import pytest

from eigensweep.errors import ConfigError, StageFileError
from eigensweep.qubit import PauliExpansion
from eigensweep.qubit.pauli import pauli_product, symplectic_inner


def random_sum(rng: np.random.Generator, n: int, n_terms: int) -> PauliExpansion:
    labels = ["".join(rng.choice(list("IXYZ"), n)) for _ in range(n_terms)]
    return PauliExpansion.from_strings(labels, rng.normal(size=n_terms))


# ---------------------------------------------------------------- bad input
def test_from_openfermion_rejects_wrong_type():
    with pytest.raises(TypeError, match="QubitOperator"):
        PauliExpansion.from_openfermion(of.FermionOperator("1^ 0"), 2)


def test_from_openfermion_rejects_non_hermitian():
    # common practice: a Hermitian operator has real Pauli coefficients
    with pytest.raises(ValueError, match="not Hermitian"):
        PauliExpansion.from_openfermion(of.QubitOperator("X0 Y1", 1e-6j), 2)


def test_from_openfermion_drops_tiny_imaginary_parts():
    p = PauliExpansion.from_openfermion(of.QubitOperator("Z0", 0.5 + 1e-14j), 1)
    assert p.coeffs.dtype == np.float64 and p.coeffs[0] == 0.5


def test_from_openfermion_rejects_qubit_out_of_range():
    with pytest.raises(ConfigError, match="n_qubits is 2"):
        PauliExpansion.from_openfermion(of.QubitOperator("Z3"), 2)


def test_constructor_and_labels_bad_input():
    with pytest.raises(TypeError, match="n_qubits must be an int"):
        PauliExpansion(np.zeros((1, 2)), np.zeros((1, 2)), np.ones(1), 2.0)
    with pytest.raises(TypeError, match="list or tuple of str"):
        PauliExpansion.from_strings("XZ", [1.0])
    with pytest.raises(ConfigError, match="only the letters"):
        PauliExpansion.from_strings(["XQ"], [1.0])
    with pytest.raises(ValueError, match="real"):
        PauliExpansion(np.zeros((1, 1)), np.zeros((1, 1)), np.array([1j]), 1)


def test_from_store_reports_missing_arrays():
    with pytest.raises(StageFileError, match="lacks arrays"):
        PauliExpansion.from_store({"h_x": np.zeros((1, 1))}, "h_")


# ---------------------------------------------------------------- round trips
def test_openfermion_round_trip():
    # reference: OpenFermion computed at test time (operator equality with its own tolerance)
    op = of.QubitOperator("X0 Z2 Y3", 0.25) + of.QubitOperator("", -1.5) + of.QubitOperator("Z1", 2)
    p = PauliExpansion.from_openfermion(op, 4)
    assert p.n_terms == 3
    assert p.to_openfermion() == op
    assert set(p.labels()) == {"XIZY", "IIII", "IZII"}
    assert PauliExpansion.from_openfermion(p.to_openfermion(), 4).allclose(p, atol=0)


def test_store_round_trip():
    p = random_sum(np.random.default_rng(3), 5, 12)
    arrays = p.to_store("ham_")
    assert set(arrays) == {"ham_x", "ham_z", "ham_coeffs", "ham_n_qubits"}
    assert arrays["ham_x"].dtype == np.uint8
    q = PauliExpansion.from_store(arrays, "ham_")
    assert np.array_equal(q.x, p.x) and np.array_equal(q.z, p.z)
    assert np.array_equal(q.coeffs, p.coeffs) and q.n_qubits == 5


def test_zero_operator_round_trips():
    z = PauliExpansion.zero(3)
    assert z.n_terms == 0 and z.labels() == [] and z.one_norm == 0.0
    assert PauliExpansion.from_store(z.to_store("z_"), "z_").n_terms == 0
    assert z.sparse_matrix().nnz == 0


# ---------------------------------------------------------------- algebra and reference values
def test_simplify_merges_and_orders_canonically():
    p = PauliExpansion.from_strings(["ZI", "IX", "ZI", "II", "XX"], [1.0, 2.0, -1.0, 0.5, 1e-14])
    q = p.combine_like_terms(atol=1e-12)
    assert q.labels() == ["II", "IX"]
    assert q.coeffs.tolist() == [0.5, 2.0]
    assert p.combine_like_terms(atol=0.0).labels() == ["II", "IX", "XX"]


def test_norms_and_identity():
    p = PauliExpansion.from_strings(["II", "ZI", "XY"], [-2.0, 0.5, -0.25])
    assert p.identity_coeff == -2.0
    assert p.one_norm == pytest.approx(2.75)
    assert p.one_norm_nonidentity == pytest.approx(0.75)


def test_to_sparse_matches_openfermion_including_odd_y_terms():
    # reference: OpenFermion get_sparse_operator computed at test time
    rng = np.random.default_rng(11)
    for n in (1, 3, 6):
        p = random_sum(rng, n, 40)
        ref = of.get_sparse_operator(p.to_openfermion(), n).toarray()
        assert np.abs(p.sparse_matrix().toarray() - ref).max() < 1e-13


def test_pauli_product_matches_openfermion():
    # reference: OpenFermion QubitOperator multiplication computed at test time
    rng = np.random.default_rng(5)
    a, b = random_sum(rng, 4, 20), random_sum(rng, 4, 20)
    for i in range(a.n_terms):
        for j in range(0, b.n_terms, 3):
            x3, z3, e = pauli_product(a.x[i], a.z[i], b.x[j], b.z[j])
            prod = PauliExpansion(x3[None], z3[None], np.ones(1), 4).to_openfermion()
            pa = a.subset([i]) * (1.0 / a.coeffs[i])
            pb = b.subset([j]) * (1.0 / b.coeffs[j])
            ref = pa.to_openfermion() * pb.to_openfermion()
            assert ref == prod * (1j**e)
            anti = symplectic_inner(a.x[i], a.z[i], b.x[j], b.z[j])
            commutator = (
                pa.to_openfermion() * pb.to_openfermion()
                - pb.to_openfermion() * pa.to_openfermion()
            )
            assert (commutator == of.QubitOperator()) != bool(anti)


def test_diagonal_at_matches_sparse_diagonal():
    # reference: OpenFermion get_sparse_operator computed at test time
    p = PauliExpansion.from_strings(["ZIZ", "IZI", "III", "XZI"], [0.3, -0.7, 1.1, 5.0])
    ref = of.get_sparse_operator(p.to_openfermion(), 3).diagonal().real
    assert np.allclose(p.diagonal_at(np.arange(8)), ref, atol=1e-14)


def test_compile_cache_follows_content():
    p = PauliExpansion.from_strings(["XI", "YI", "IZ"], [1.0, 2.0, 3.0])
    g1 = p.compile()
    assert p.compile() is g1 and g1.n_groups == 2
    p.coeffs = p.coeffs * 2.0  # arrays replaced: the cache must not be reused
    assert p.compile() is not g1
