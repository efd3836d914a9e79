"""Compilation of Pauli rotations, measurement basis changes and unitary folding."""

from __future__ import annotations

import numpy as np
import pytest
from fixtures import dense_pauli, dense_rotation, random_pauli_expansion

from eigensweep.circuit import Circuit, Gate, inverse_gate
from eigensweep.device.compile import (
    base_of_global_fold,
    circuit_from_rotations,
    folded_measurement_circuit,
    globally_folded_circuit,
    group_basis,
    measurement_circuit,
    split_folded_measurement,
)
from eigensweep.qubit.noise import NoiseModel, simulate_distributions
from eigensweep.qubit.statevector import (
    apply_pauli_rotation,
    basis_state,
    expectation,
    simulate,
)

ALLOWED = {"x", "h", "s", "sdg", "rx", "ry", "rz", "cx"}


def _random_rotations(n, k, rng, force_y=True):
    rots = []
    for i in range(k):
        x = rng.random(n) < 0.5
        z = rng.random(n) < 0.5
        if force_y and i == 0:
            x[0] = z[0] = True  # make sure Y appears
        if not (x | z).any():
            z[rng.integers(n)] = True  # identity rotations are a global phase, tested apart
        rots.append((x, z, float(rng.uniform(-np.pi, np.pi))))
    return rots


@pytest.mark.parametrize("seed", range(6))
def test_compiled_rotations_equal_product_of_pauli_rotations(seed):
    # reference: dense matrices exp(-i t/2 P) = cos(t/2) - i sin(t/2) P, and the project's
    # apply_pauli_rotation; exact including global phase
    rng = np.random.default_rng(seed)
    n = 2 + seed % 3
    ref = rng.integers(0, 2, size=n)
    rots = _random_rotations(n, 6, rng)
    circ = circuit_from_rotations(ref, rots)
    assert {g.name for g in circ.gates} <= ALLOWED
    psi = basis_state(ref)
    dense = basis_state(ref)
    for x, z, t in rots:
        psi = apply_pauli_rotation(psi, x, z, t)
        dense = dense_rotation(x, z, t) @ dense
    out = simulate(circ)
    assert np.max(np.abs(out - psi)) < 1e-12
    assert np.max(np.abs(out - dense)) < 1e-12
    # the density-matrix kernels (U on rows, conj(U) on columns) without noise
    probs = simulate_distributions([circ], NoiseModel())[0]
    assert np.max(np.abs(probs - np.abs(out) ** 2)) < 1e-12


@pytest.mark.parametrize("letter", ["X", "Y", "Z"])
def test_single_qubit_rotation_conjugation(letter):
    # reference: exp(-i t/2 Y) = ry(t) and exp(-i t/2 X) = rx(t) (textbook identities)
    t = 0.7317
    x, z = {"X": ([1], [0]), "Y": ([1], [1]), "Z": ([0], [1])}[letter]
    circ = circuit_from_rotations([0], [(x, z, t)])
    direct = Circuit(1)
    direct.append({"X": "rx", "Y": "ry", "Z": "rz"}[letter], (0,), (t,))
    assert np.max(np.abs(simulate(circ) - simulate(direct))) < 1e-12
    assert [g.name for g in circ.gates] == [direct.gates[0].name]  # one gate, no basis change


@pytest.mark.parametrize("weight", range(1, 7))
def test_pauli_rotation_costs_textbook_cnot_ladder(weight):
    # reference: the CNOT-ladder circuit for exp(-i t/2 P) of a weight-w Pauli string uses
    # 2(w - 1) CNOTs (Nielsen & Chuang (2000), section 4.7.3; Whitfield, Biamonte,
    # Aspuru-Guzik, Mol. Phys. 109, 735 (2011)); its depth is 2(w - 1) + 1 (ladder, rz,
    # ladder) plus one layer on each side when the first ladder CNOT waits for a basis change
    # (X or Y on one of the two lowest support qubits; closed form for this scheme); the
    # unitary is checked against SciPy's expm.
    import scipy.linalg

    rng = np.random.default_rng(weight)
    n = 7
    support = np.sort(rng.choice(n, size=weight, replace=False))
    letters = rng.integers(1, 4, size=weight)  # 1 = X, 2 = Z, 3 = Y
    x = np.zeros(n, dtype=bool)
    z = np.zeros(n, dtype=bool)
    x[support] = letters != 2
    z[support] = letters != 1
    t = 0.413
    circ = circuit_from_rotations(np.zeros(n, dtype=int), [(x, z, t)])
    assert circ.cnot_count == 2 * (weight - 1)
    basis_change = weight > 1 and bool(x[support[0]] or x[support[1]])
    assert circ.depth == 2 * (weight - 1) + 1 + (2 if basis_change else 0)
    label = "".join("IXZY"[int(a) + 2 * int(b)] for a, b in zip(x, z, strict=True))
    want = scipy.linalg.expm(-0.5j * t * dense_pauli(label))[:, 0]
    assert np.max(np.abs(simulate(circ) - want)) < 1e-12


def test_zero_angle_rotations_are_left_out():
    # common practice: exp(-i 0 P) is the identity, so a compiler adds no gates for it
    x, z = np.array([1, 1, 0]), np.array([0, 1, 1])
    circ = circuit_from_rotations([1, 0, 0], [(x, z, 0.0), (x, z, 1e-14)])
    assert [g.name for g in circ.gates] == ["x"]
    kept = circuit_from_rotations([1, 0, 0], [(x, z, 0.0)], drop_below=-1.0)
    assert kept.cnot_count == 4  # weight 3: 2(w - 1) (Nielsen & Chuang, section 4.7.3)


def test_identity_rotation_is_skipped_and_reference_is_prepared():
    circ = circuit_from_rotations([1, 0, 1], [([0, 0, 0], [0, 0, 0], 0.3)])
    assert [g.name for g in circ.gates] == ["x", "x"]
    assert np.argmax(np.abs(simulate(circ))) == 0b101


def test_bad_rotation_inputs():
    with pytest.raises(ValueError):
        circuit_from_rotations([0, 2], [])
    with pytest.raises(ValueError):
        circuit_from_rotations([0, 1], [([1], [0], 0.1)])
    with pytest.raises(ValueError):
        circuit_from_rotations([0, 1], [([1, 0], [0, 0], float("nan"))])


@pytest.mark.parametrize("seed", range(4))
def test_measurement_circuit_gives_pauli_expectations(seed):
    # reference: <psi|P|psi> from dense matrices vs parity of bits after the basis change
    rng = np.random.default_rng(10 + seed)
    n = 3
    base = circuit_from_rotations(rng.integers(0, 2, n), _random_rotations(n, 4, rng))
    psi = simulate(base)
    basis = "".join(rng.choice(list("IXYZ"), size=n))
    meas = measurement_circuit(base, basis)
    assert {g.name for g in meas.gates[len(base.gates) :]} <= {"h", "sdg"}
    probs = np.abs(simulate(meas)) ** 2
    idx = np.arange(2**n)
    # every label whose letters are the basis letter or I is measured by this circuit
    for mask in range(1, 2**n):
        label = "".join(basis[k] if (mask >> (n - 1 - k)) & 1 else "I" for k in range(n))
        if set(label) == {"I"}:
            continue
        sup = [(mask >> (n - 1 - k)) & 1 and basis[k] != "I" for k in range(n)]
        parity = np.zeros(2**n, dtype=int)
        for k in range(n):
            if sup[k]:
                parity ^= (idx >> (n - 1 - k)) & 1
        measured = float(np.sum(probs * (1 - 2 * parity)))
        exact = float(np.real(np.vdot(psi, dense_pauli(label) @ psi)))
        assert abs(measured - exact) < 1e-12


def test_group_basis_merges_and_rejects_non_qwc():
    assert group_basis(["XIZ", "XYI", "IIZ"]) == "XYZ"
    with pytest.raises(ValueError, match="qubit-wise"):
        group_basis(["XI", "ZI"])


@pytest.mark.parametrize("scale", [1, 3, 5, 7])
def test_fold_preserves_state_and_scales_gate_count(scale):
    # Giurgica-Tiron et al. 2020: folding G (G^dagger G)^k implements G with (2k+1)x the gates
    rng = np.random.default_rng(scale)
    circ = circuit_from_rotations([1, 0, 1], _random_rotations(3, 4, rng))
    folded = globally_folded_circuit(circ, scale)
    assert len(folded.gates) == scale * len(circ.gates)
    assert folded.cnot_count == scale * circ.cnot_count
    assert folded.gates[: len(circ.gates)] == circ.gates  # invariant: starts with G
    assert np.max(np.abs(simulate(folded) - simulate(circ))) < 1e-12
    assert base_of_global_fold(folded, scale).gates == circ.gates


@pytest.mark.parametrize("scale", [1, 3, 5])
def test_state_folding_then_basis_change_measures_the_pauli_terms(scale):
    # reference: <psi|P|psi> from dense matrices; folding only the state preparation
    # (Giurgica-Tiron et al. 2020: G (G^dagger G)^k = G) leaves every parity unchanged
    rng = np.random.default_rng(20 + scale)
    n, basis = 3, "XYZ"
    state = circuit_from_rotations([1, 0, 1], _random_rotations(n, 4, rng))
    change = Circuit(n, measurement_circuit(Circuit(n), basis).gates)
    circ = folded_measurement_circuit(state, change, scale)
    assert len(circ.gates) == scale * len(state.gates) + len(change.gates)
    probs = np.abs(simulate(circ)) ** 2
    psi = simulate(state)
    idx = np.arange(2**n)
    parity = ((idx >> 2) ^ (idx >> 1) ^ idx) & 1
    exact = float(np.real(np.vdot(psi, dense_pauli(basis) @ psi)))
    assert abs(float(np.sum(probs * (1 - 2 * parity))) - exact) < 1e-12
    back_state, back_change = split_folded_measurement(circ, scale, len(change.gates))
    assert back_state.gates == state.gates and back_change.gates == change.gates
    with pytest.raises(ValueError, match="not a global fold"):
        split_folded_measurement(circ, scale + 2, len(change.gates))


def test_fold_unfold_identity_and_inverse():
    # common practice: G^dagger G = identity, so the folded copies cancel exactly
    rng = np.random.default_rng(5)
    circ = circuit_from_rotations([0, 1, 1, 0], _random_rotations(4, 5, rng))
    both = circ.copy()
    both.extend(circ.inverse())
    psi0 = basis_state([1, 0, 1, 1])
    assert np.max(np.abs(simulate(both, psi0) - psi0)) < 1e-12
    with pytest.raises(ValueError):
        base_of_global_fold(circ, 3)


def test_fold_handles_every_known_gate_including_sx():
    circ = Circuit(2)
    for name in ("x", "y", "z", "h", "s", "sdg", "sx"):
        circ.append(name, (0,))
    for name in ("rx", "ry", "rz"):
        circ.append(name, (1,), (0.4,))
    circ.append("cx", (1, 0))
    folded = globally_folded_circuit(circ, 3)
    assert np.max(np.abs(simulate(folded) - simulate(circ))) < 1e-12
    # sx has a two-gate inverse: count is 3 * len + 1 extra per fold
    assert len(folded.gates) == 3 * len(circ.gates) + 1
    assert base_of_global_fold(folded, 3).gates == circ.gates
    assert inverse_gate(Gate("sdg", (0,))) == [Gate("s", (0,))]


@pytest.mark.parametrize("bad", [0, 2, -1, 4, 1.5, True])
def test_fold_rejects_even_or_nonpositive_scale(bad):
    with pytest.raises(ValueError, match="odd positive"):
        globally_folded_circuit(Circuit(1), bad)


def test_circuit_append_validates():
    c = Circuit(2)
    for args in (("cx", (0, 0)), ("h", (2,)), ("rz", (0,), ()), ("h", (0, 1)), ("h", (0,), (1,))):
        with pytest.raises(ValueError):
            c.append(*args)


def test_random_hamiltonian_energy_from_measurement_circuits():
    # reference: project expectation(); energies re-assembled from per-group parities
    rng = np.random.default_rng(7)
    ham = random_pauli_expansion(3, 8, rng)
    circ = circuit_from_rotations([1, 0, 0], _random_rotations(3, 4, rng))
    psi = simulate(circ)
    total = 0.0
    for lab, c in zip(ham.labels(), ham.coeffs, strict=True):
        probs = np.abs(simulate(measurement_circuit(circ, lab))) ** 2
        idx = np.arange(8)
        par = np.zeros(8, dtype=int)
        for k, ch in enumerate(lab):
            if ch != "I":
                par ^= (idx >> (2 - k)) & 1
        total += c * float(np.sum(probs * (1 - 2 * par)))
    assert abs(total - expectation(psi, ham)) < 1e-12
