"""Shared builders for the device tests (small problems with independently checked energies).

Imported by the other ``test_device_*`` files; its own tests check the builders against outside
references (PySCF FCI, OpenFermion sparse operators).
"""

from __future__ import annotations

import functools

import numpy as np
import scipy.optimize

from eigensweep.circuit import Circuit
from eigensweep.device.compile import circuit_from_rotations
from eigensweep.qubit.pauli import PauliExpansion
from eigensweep.qubit.statevector import expectation, simulate

_PAULI = {
    "I": np.eye(2, dtype=complex),
    "X": np.array([[0, 1], [1, 0]], dtype=complex),
    "Y": np.array([[0, -1j], [1j, 0]], dtype=complex),
    "Z": np.array([[1, 0], [0, -1]], dtype=complex),
}


def dense_pauli(label: str) -> np.ndarray:
    """Dense matrix of a Pauli label; qubit 0 is the leftmost Kronecker factor (MSB)."""
    m = np.ones((1, 1), dtype=complex)
    for ch in label:
        m = np.kron(m, _PAULI[ch])
    return m


def dense_rotation(x, z, angle) -> np.ndarray:
    """exp(-i angle/2 P) = cos(angle/2) I - i sin(angle/2) P (P^2 = I)."""
    label = "".join("IXZY"[int(a) + 2 * int(b)] for a, b in zip(x, z, strict=True))
    p = dense_pauli(label)
    return np.cos(angle / 2) * np.eye(p.shape[0]) - 1j * np.sin(angle / 2) * p


def dense_hamiltonian(ham: PauliExpansion) -> np.ndarray:
    return sum(c * dense_pauli(lab) for lab, c in zip(ham.labels(), ham.coeffs, strict=True))


@functools.lru_cache(maxsize=1)
def h2_problem():
    """H2 / STO-3G at 0.7414 Angstrom, Jordan-Wigner on 4 qubits (interleaved spin orbitals).

    Returns (ham, e_fci, n_electrons). Integrals from PySCF, operator algebra from OpenFermion
    (reference: PySCF + OpenFermion, the standard chemistry-to-qubit route).
    """
    import openfermion as of
    from pyscf import ao2mo, fci, gto, scf

    mol = gto.M(atom="H 0 0 0; H 0 0 0.7414", basis="sto-3g", verbose=0)
    mf = scf.RHF(mol).run()
    c = mf.mo_coeff
    h1 = c.T @ mf.get_hcore() @ c
    eri = ao2mo.restore(1, ao2mo.full(mol, c), c.shape[1])  # chemist (pq|rs)
    two = np.asarray(eri.transpose(0, 2, 3, 1), order="C")
    one_so, two_so = of.chem.molecular_data.spinorb_from_spatial(h1, two)
    op = of.InteractionOperator(mol.energy_nuc(), one_so, 0.5 * two_so)
    qop = of.jordan_wigner(of.get_fermion_operator(op))
    ham = PauliExpansion.from_openfermion(qop, 4)
    e_fci = fci.FCI(mf).kernel()[0]
    return ham, float(e_fci), 2


@functools.lru_cache(maxsize=1)
def h2_ansatz():
    """Reference |1100> and one double-excitation Pauli rotation exp(-i t/2 X X X Y), optimized.

    Returns (reference_bits, rotations, circuit, state, energy).
    """
    ham, _, _ = h2_problem()
    ref = np.array([1, 1, 0, 0], dtype=np.uint8)
    x = np.array([1, 1, 1, 1], dtype=bool)
    z = np.array([0, 0, 0, 1], dtype=bool)

    def energy(t):
        return expectation(simulate(circuit_from_rotations(ref, [(x, z, float(t))])), ham)

    opt = scipy.optimize.minimize_scalar(
        energy, bounds=(-np.pi, np.pi), method="bounded", options={"xatol": 1e-10}
    )
    rotations = [(x, z, float(opt.x))]
    circ = circuit_from_rotations(ref, rotations)
    psi = simulate(circ)
    return ref, rotations, circ, psi, float(expectation(psi, ham))


TWO_QUBIT_LABELS = ["II", "ZI", "IZ", "ZZ", "XX", "YY", "XI"]
TWO_QUBIT_COEFFS = [-0.5, 0.45, 0.35, 0.12, 0.18, 0.18, 0.07]


def hea_circuit(params) -> Circuit:
    """ry on each qubit, cx(0, 1), ry on each qubit (hardware-efficient, real amplitudes)."""
    c = Circuit(2)
    c.append("ry", (0,), (params[0],))
    c.append("ry", (1,), (params[1],))
    c.append("cx", (0, 1))
    c.append("ry", (0,), (params[2],))
    c.append("ry", (1,), (params[3],))
    return c


@functools.lru_cache(maxsize=1)
def two_qubit_problem():
    """A 2-qubit real Hamiltonian and the HEA circuit at its optimum (scipy BFGS).

    Returns (ham, circuit, state, energy, exact ground energy).
    """
    ham = PauliExpansion.from_strings(TWO_QUBIT_LABELS, TWO_QUBIT_COEFFS)

    def energy(p):
        return expectation(simulate(hea_circuit(p)), ham)

    best = min(
        (
            scipy.optimize.minimize(energy, x0, method="BFGS")
            for x0 in ([0.1, 0.2, 0.3, 0.4], [3.0, 3.0, 0.1, 0.1])
        ),
        key=lambda r: r.fun,
    )
    circ = hea_circuit(best.x)
    psi = simulate(circ)
    exact = float(np.linalg.eigvalsh(dense_hamiltonian(ham))[0])
    return ham, circ, psi, float(expectation(psi, ham)), exact


def random_pauli_expansion(n: int, n_terms: int, rng: np.random.Generator) -> PauliExpansion:
    labels = ["I" * n] + ["".join(rng.choice(list("IXYZ"), size=n)) for _ in range(n_terms)]
    return PauliExpansion.from_strings(labels, rng.normal(size=len(labels)))


# ----------------------------------------------------------------------------- checks


def test_h2_hamiltonian_ground_energy_matches_pyscf_fci():
    # reference: PySCF FCI on the same integrals; H2/STO-3G at 0.7414 A is about -1.1373 Ha
    ham, e_fci, _ = h2_problem()
    ground = np.linalg.eigvalsh(dense_hamiltonian(ham))[0]
    assert abs(ground - e_fci) < 1e-8
    assert abs(e_fci - (-1.1373)) < 1e-3


def test_h2_ansatz_reaches_fci():
    # common practice: one double excitation is exact for H2 in a minimal basis
    _, e_fci, _ = h2_problem()
    *_, energy = h2_ansatz()
    assert abs(energy - e_fci) < 1e-8


def test_dense_helpers_match_openfermion_sparse_operator():
    # reference: OpenFermion get_sparse_operator (qubit 0 = most significant bit)
    import openfermion as of

    rng = np.random.default_rng(3)
    ham = random_pauli_expansion(3, 6, rng)
    ref = of.get_sparse_operator(ham.to_openfermion(), n_qubits=3).toarray()
    assert np.allclose(dense_hamiltonian(ham), ref, atol=1e-12)


def test_two_qubit_problem_is_near_ground_state():
    # common practice: the ry-cx-ry ansatz covers real two-qubit states well enough here
    _, _, psi, energy, exact = two_qubit_problem()
    assert energy - exact < 1e-3
    assert np.max(np.abs(psi) ** 2) > 0.6  # a clearly dominant bitstring
