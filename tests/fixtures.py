"""Shared builders for the tests: the one fixtures module (imported as ``fixtures``; pytest's
``pythonpath`` setting in pyproject.toml puts ``tests/`` on the path).

* Molecules straight from PySCF (RHF, STO-3G, all orbitals), independent of eigensweep's own
  integrals stage: :func:`pyscf_molecule` (integrals plus HF/FCI references, for the qubit
  library) and :func:`active_integrals` (keyword arguments for the optimizer engine).
* Small device problems with independently checked energies: :func:`h2_problem`,
  :func:`h2_ansatz`, :func:`two_qubit_problem`, and dense-matrix helpers written here with
  NumPy (not the project's simulator).
* :func:`run_plan`: run a plan's stage jobs in this process (no Snakemake) for fast end-to-end
  checks of collect.

``tests/test_fixtures.py`` checks these builders against outside references.
"""

from __future__ import annotations

import functools
import math
from dataclasses import dataclass
from functools import cache
from pathlib import Path

import numpy as np
import scipy.optimize
from pyscf import ao2mo, fci, gto, scf

from eigensweep.circuit import Circuit
from eigensweep.config import validate_config
from eigensweep.device.compile import circuit_from_rotations
from eigensweep.plan import build_plan, parent_files
from eigensweep.qubit import map_hamiltonian, reduce_to_sector, reference_bits
from eigensweep.qubit.pauli import PauliExpansion
from eigensweep.qubit.statevector import expectation, simulate
from eigensweep.vqe.detspace import DetSpace

# ----------------------------------------------------------------------------- molecules

_HALF_ANGLE = math.radians(104.48) / 2
_R_OH = 0.9578
GEOMETRIES = {  # Angstrom
    "h2": "H 0 0 0; H 0 0 0.74",
    "lih": "Li 0 0 0; H 0 0 1.595",
    "beh2": "Be 0 0 0; H 0 0 1.326; H 0 0 -1.326",
    "h2o": (
        f"O 0 0 0; H 0 {_R_OH * math.sin(_HALF_ANGLE)} {_R_OH * math.cos(_HALF_ANGLE)}; "
        f"H 0 {-_R_OH * math.sin(_HALF_ANGLE)} {_R_OH * math.cos(_HALF_ANGLE)}"
    ),
    "n2": "N 0 0 0; N 0 0 1.098",
}


@dataclass(frozen=True)
class Molecule:
    name: str
    h1e: np.ndarray
    eri: np.ndarray
    e_core: float
    nelec: tuple[int, int]
    norb: int
    e_hf: float
    e_fci: float | None


@cache
def rhf_mo_integrals(atoms: str, basis: str, symmetry: bool = True):
    """PySCF RHF (conv_tol 1e-12) and its MO integrals: ``(mol, mf, h1e, eri)``, eri in 1-fold."""
    mol = gto.M(atom=atoms, basis=basis, symmetry=symmetry, verbose=0)
    mf = scf.RHF(mol)
    mf.conv_tol = 1e-12
    mf.kernel()
    c = mf.mo_coeff
    h1e = c.T @ mf.get_hcore() @ c
    eri = ao2mo.restore(1, ao2mo.kernel(mol, c), c.shape[1])
    return mol, mf, h1e, eri


@functools.cache
def pyscf_molecule(name: str, with_fci: bool = True) -> Molecule:
    """RHF/STO-3G integrals in symmetry-adapted MOs, plus HF and FCI energies from PySCF."""
    mol, mf, h1e, eri = rhf_mo_integrals(GEOMETRIES[name.lower()], "sto-3g")
    assert mf.converged
    norb = h1e.shape[0]
    e_fci = None
    if with_fci:
        # lowest state with these (N_alpha, N_beta), any irrep: the same sector the qubit code
        # restricts to (reference: PySCF FCI computed at test time)
        solver = fci.direct_spin1.FCI()
        solver.conv_tol = 1e-12
        e_fci, _ = solver.kernel(h1e, eri, norb, mol.nelec, ecore=mol.energy_nuc())
    return Molecule(
        name, h1e, eri, float(mol.energy_nuc()), mol.nelec, norb, float(mf.e_tot), e_fci
    )


@cache
def active_integrals(name: str, basis: str = "sto-3g") -> dict:
    """Active-space integrals of ``name`` as keyword arguments for ``run_optimize``."""
    mol, _, h1e, eri = rhf_mo_integrals(GEOMETRIES[name.lower()], basis, symmetry=False)
    norb = h1e.shape[0]
    return {
        "h1e": h1e,
        "eri": eri,
        "e_core": float(mol.energy_nuc()),
        "norb": int(norb),
        "nelec": (int(mol.nelec[0]), int(mol.nelec[1])),
    }


def space_of(name: str) -> DetSpace:
    m = active_integrals(name)
    return DetSpace(m["norb"], m["nelec"], m["h1e"], m["eri"], m["e_core"])


def h2_two_qubit() -> tuple[PauliExpansion, float]:
    """H2/STO-3G in the 4-determinant (N=2, Sz=0) space as a 2-qubit Pauli sum.

    Qubit 0 = occupation of the alpha antibonding orbital, qubit 1 = beta antibonding; |00> is
    HF. Returns (Hamiltonian, exact ground energy from diagonalisation).
    """
    space = space_of("H2")
    mat = np.column_stack([space.apply_h(v) for v in np.eye(4)]) + space.e_core * np.eye(4)
    paulis = {
        "I": np.eye(2),
        "X": np.array([[0, 1], [1, 0]]),
        "Y": np.array([[0, -1j], [1j, 0]]),
        "Z": np.diag([1.0, -1.0]),
    }
    labels, coeffs = [], []
    for a in "IXYZ":
        for b in "IXYZ":
            p = np.kron(paulis[a], paulis[b])
            c = np.trace(p @ mat).real / 4.0
            if abs(c) > 1e-12:
                labels.append(a + b)
                coeffs.append(c)
    return PauliExpansion.from_strings(labels, coeffs), float(np.linalg.eigvalsh(mat)[0])


# ----------------------------------------------------------------------------- tapered problems


@functools.cache
def problem(name: str) -> dict:
    """Integrals and the PySCF FCI energy of ``name`` (symmetry-adapted RHF orbitals)."""
    mol, mf, h1e, eri = rhf_mo_integrals(GEOMETRIES[name.lower()], "sto-3g")
    norb = h1e.shape[0]
    ints = {
        "h1e": h1e,
        "eri": eri,
        "e_core": float(mol.energy_nuc()),
        "norb": int(norb),
        "nelec": (int(mol.nelec[0]), int(mol.nelec[1])),
    }
    # reference: PySCF FCI computed at test time
    e_fci = float(fci.FCI(mf).kernel()[0])
    return {"ints": ints, "e_fci": e_fci}


@functools.cache
def tapering(name: str, mapping: str):
    ints = problem(name)["ints"]
    ham = map_hamiltonian(ints["h1e"], ints["eri"], ints["e_core"], mapping)
    return reduce_to_sector(ham, reference_bits(ints["nelec"], ints["norb"], mapping))


# ----------------------------------------------------------------------------- device problems

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


# ----------------------------------------------------------------------------- plans


def run_plan(raw: dict, results: Path, source: str = "study"):
    """Validate, plan and run every stage job into ``results``; returns (cfg, plan)."""
    from eigensweep.stages import STAGE_ACTIONS

    cfg = validate_config(raw, source=source)
    plan = build_plan(cfg, results_dir=results)
    for node in plan.nodes.values():  # insertion order is parents first
        out = results / node.stage / f"{node.key}.h5"
        if not out.is_file():
            STAGE_ACTIONS[node.stage](node, parent_files(node, str(results)), str(out))
    return cfg, plan
