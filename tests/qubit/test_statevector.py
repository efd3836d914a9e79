"""Statevector kernels against explicit matrices (OpenFermion / SciPy / NumPy at test time)."""

from __future__ import annotations

import functools

import numpy as np
import openfermion as of
import pytest
import scipy.linalg

from eigensweep.circuit import Circuit, Gate
from eigensweep.errors import ConfigError
from eigensweep.qubit import (
    PauliExpansion,
    apply_gate,
    apply_pauli,
    apply_pauli_expansion,
    apply_pauli_rotation,
    basis_state,
    expectation,
    simulate,
)
from eigensweep.qubit.statevector import _apply_groups_large

_I2 = np.eye(2)
_X = np.array([[0, 1], [1, 0]], dtype=complex)
_Y = np.array([[0, -1j], [1j, 0]])
_Z = np.diag([1.0, -1.0]).astype(complex)
_H = np.array([[1, 1], [1, -1]]) / np.sqrt(2)
_P0 = np.diag([1.0, 0.0])
_P1 = np.diag([0.0, 1.0])


def random_sum(rng: np.random.Generator, n: int, n_terms: int) -> PauliExpansion:
    labels = ["".join(rng.choice(list("IXYZ"), n)) for _ in range(n_terms)]
    return PauliExpansion.from_strings(labels, rng.normal(size=n_terms))


def random_state(rng: np.random.Generator, n: int) -> np.ndarray:
    psi = rng.normal(size=1 << n) + 1j * rng.normal(size=1 << n)
    return psi / np.linalg.norm(psi)


def kron_all(mats) -> np.ndarray:
    # qubit 0 is the most significant bit: it is the leftmost Kronecker factor
    return functools.reduce(np.kron, mats)


def one_qubit_full(mat: np.ndarray, q: int, n: int) -> np.ndarray:
    return kron_all([mat if k == q else _I2 for k in range(n)])


def cx_full(c: int, t: int, n: int) -> np.ndarray:
    a = kron_all([_P0 if k == c else _I2 for k in range(n)])
    b = kron_all([_P1 if k == c else (_X if k == t else _I2) for k in range(n)])
    return a + b


# ---------------------------------------------------------------- bad input
def test_bad_input():
    psi = basis_state(np.array([0, 1]))
    with pytest.raises(TypeError, match="PauliExpansion"):
        apply_pauli_expansion(psi, of.QubitOperator("Z0"))
    with pytest.raises(TypeError, match="numpy.ndarray"):
        apply_pauli_expansion(list(psi), PauliExpansion.from_strings(["ZI"], [1.0]))
    with pytest.raises(ConfigError, match="2 qubits but the operator acts on 3"):
        apply_pauli_expansion(psi, PauliExpansion.from_strings(["ZII"], [1.0]))
    with pytest.raises(ConfigError, match="length 2\\*\\*n"):
        apply_pauli(np.ones(3, complex), [1, 0], [0, 0])
    with pytest.raises(TypeError, match="Gate"):
        apply_gate(psi, ("x", (0,)), 2)
    with pytest.raises(ConfigError, match="outside"):
        apply_gate(psi, Gate("x", (2,)), 2)
    with pytest.raises(TypeError, match="Circuit"):
        simulate([Gate("x", (0,))])
    with pytest.raises(ConfigError, match="0/1"):
        basis_state(np.array([0, 2]))


# ---------------------------------------------------------------- reference values
def test_basis_state_order_matches_openfermion():
    # reference: OpenFermion jw_configuration_state computed at test time (qubit 0 = MSB)
    bits = np.array([1, 0, 1, 1, 0])
    ref = of.jw_configuration_state([0, 2, 3], 5)
    assert np.allclose(basis_state(bits), ref)


@pytest.mark.parametrize("n", [6, 7, 8])
def test_apply_pauli_expansion_matches_sparse(n):
    # reference: OpenFermion get_sparse_operator computed at test time
    rng = np.random.default_rng(n)
    ham = random_sum(rng, n, 60)
    mat = of.get_sparse_operator(ham.to_openfermion(), n)
    for _ in range(3):
        psi = random_state(rng, n)
        assert np.abs(apply_pauli_expansion(psi, ham) - mat @ psi).max() < 1e-12
        assert expectation(psi, ham) == pytest.approx(np.vdot(psi, mat @ psi).real, abs=1e-12)


@pytest.mark.parametrize("n", [4, 7, 9])
def test_large_problem_kernel_matches_sparse_matrix(n):
    # the memory-lean loop used above 2**24 (group, state) pairs, exercised on small sizes;
    # reference: OpenFermion get_sparse_operator computed at test time
    rng = np.random.default_rng(100 + n)
    real_part = random_sum(rng, n, 50)
    # keep only even-Y terms for a real Hamiltonian, then add a few odd-Y (complex) ones
    even = np.count_nonzero(real_part.x & real_part.z, axis=1) % 2 == 0
    for ham in (real_part.subset(even), real_part):
        mat = of.get_sparse_operator(ham.to_openfermion(), n)
        psi = random_state(rng, n)
        out = _apply_groups_large(ham.compile(), psi)
        assert np.abs(out - mat @ psi).max() < 1e-12


def test_apply_pauli_each_term():
    # reference: explicit Kronecker products of Pauli matrices (NumPy at test time)
    rng = np.random.default_rng(2)
    letters = {"I": _I2, "X": _X, "Y": _Y, "Z": _Z}
    psi = random_state(rng, 4)
    for label in ("XYZI", "YYII", "ZZZZ", "IIIY", "IIII"):
        p = PauliExpansion.from_strings([label], [1.0])
        full = kron_all([letters[c] for c in label])
        assert np.allclose(apply_pauli(psi, p.x[0], p.z[0]), full @ psi, atol=1e-14)


def test_apply_pauli_rotation_matches_expm():
    # reference: SciPy expm of the explicit matrix computed at test time
    rng = np.random.default_rng(4)
    n = 5
    psi = random_state(rng, n)
    for label, angle in (("XYZIZ", 0.37), ("YIIIX", -1.9), ("IZIZI", 2.5)):
        p = PauliExpansion.from_strings([label], [1.0])
        mat = of.get_sparse_operator(p.to_openfermion(), n).toarray()
        ref = scipy.linalg.expm(-0.5j * angle * mat) @ psi
        assert np.allclose(apply_pauli_rotation(psi, p.x[0], p.z[0], angle), ref, atol=1e-13)


def test_rotate_batch_matches_expm():
    # reference: SciPy expm of each string's OpenFermion matrix computed at test time, one
    # batch row per angle (single-qubit X, Y, Z strings take the reshaped-view kernel)
    from eigensweep.qubit.statevector import PauliStrings

    rng = np.random.default_rng(7)
    n = 4
    labels = ["XYZI", "IIYI", "ZIII", "IIIX", "YZZX"]
    strings = [PauliExpansion.from_strings([lab], [1.0]) for lab in labels]
    kernels = PauliStrings([(p.x[0], p.z[0]) for p in strings], n)
    psis = np.array([random_state(rng, n) for _ in range(3)])
    for k, p in enumerate(strings):
        angles = rng.uniform(-3, 3, size=3)
        mat = of.get_sparse_operator(p.to_openfermion(), n).toarray()
        ref = np.array(
            [scipy.linalg.expm(-0.5j * a * mat) @ v for a, v in zip(angles, psis, strict=True)]
        )
        assert np.allclose(kernels.rotate_batch(psis, k, angles), ref, atol=1e-13)


def test_simulate_matches_kronecker_products():
    # reference: explicit Kronecker products (NumPy at test time), OpenQASM 3 stdgates meaning
    n = 4
    circ = Circuit(n)
    circ.append("h", [0])
    circ.append("cx", [0, 2])
    circ.append("ry", [1], [0.7])
    circ.append("cx", [3, 1])
    circ.append("rz", [2], [-1.3])
    circ.append("rx", [3], [0.4])
    circ.append("s", [1])
    circ.append("sdg", [0])
    circ.append("sx", [2])
    circ.append("y", [3])
    circ.append("z", [0])
    circ.append("x", [1])
    mats = {
        "h": _H,
        "s": np.diag([1, 1j]),
        "sdg": np.diag([1, -1j]),
        "sx": scipy.linalg.sqrtm(_X),
        "x": _X,
        "y": _Y,
        "z": _Z,
    }
    full = np.eye(1 << n, dtype=complex)
    for g in circ.gates:
        if g.name == "cx":
            m = cx_full(g.qubits[0], g.qubits[1], n)
        elif g.name in ("rx", "ry", "rz"):
            pauli = {"rx": _X, "ry": _Y, "rz": _Z}[g.name]
            m = one_qubit_full(scipy.linalg.expm(-0.5j * g.params[0] * pauli), g.qubits[0], n)
        else:
            m = one_qubit_full(mats[g.name], g.qubits[0], n)
        full = m @ full
    start = random_state(np.random.default_rng(9), n)
    assert np.allclose(simulate(circ), full[:, 0], atol=1e-13)
    assert np.allclose(simulate(circ, start), full @ start, atol=1e-13)
    assert np.allclose(start, random_state(np.random.default_rng(9), n))  # input untouched


def test_cx_on_basis_states():
    # common practice: CNOT flips the target when the control is 1
    psi = basis_state(np.array([1, 0, 0]))
    out = apply_gate(psi, Gate("cx", (0, 2)), 3)
    assert np.allclose(out, basis_state(np.array([1, 0, 1])))
    out = apply_gate(basis_state(np.array([0, 1, 1])), Gate("cx", (2, 0)), 3)
    assert np.allclose(out, basis_state(np.array([1, 1, 1])))
