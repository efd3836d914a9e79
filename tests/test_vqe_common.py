"""Shared molecule set-up for the tests of :mod:`eigensweep.vqe` (no tests here).

Integrals are built directly with PySCF (RHF/STO-3G, all orbitals active):
``h1e = C^T hcore C``, ``eri = ao2mo.restore(1, ao2mo.kernel(mol, C), norb)``,
``e_core = mol.energy_nuc()``.
"""

from __future__ import annotations

import math
from functools import cache

import numpy as np
from pyscf import ao2mo, gto, scf

from eigensweep.qubit.pauli import PauliExpansion
from eigensweep.vqe.detspace import DetSpace

_ANGLE = math.radians(104.48 / 2.0)
GEOMETRIES = {
    "H2": "H 0 0 0; H 0 0 0.74",
    "LiH": "Li 0 0 0; H 0 0 1.595",
    "BeH2": "Be 0 0 0; H 0 0 1.326; H 0 0 -1.326",
    "H2O": (
        f"O 0 0 0; H 0 {0.9578 * math.sin(_ANGLE)} {0.9578 * math.cos(_ANGLE)}; "
        f"H 0 {-0.9578 * math.sin(_ANGLE)} {0.9578 * math.cos(_ANGLE)}"
    ),
}


@cache
def molecule(name: str, basis: str = "sto-3g") -> dict:
    """Active-space integrals of ``name`` as keyword arguments for ``run_optimize``."""
    mol = gto.M(atom=GEOMETRIES[name], basis=basis, verbose=0)
    mf = scf.RHF(mol)
    mf.conv_tol = 1e-12
    mf.kernel()
    c = mf.mo_coeff
    norb = c.shape[1]
    h1e = c.T @ mf.get_hcore() @ c
    eri = ao2mo.restore(1, ao2mo.kernel(mol, c), norb)
    return {
        "h1e": h1e,
        "eri": eri,
        "e_core": float(mol.energy_nuc()),
        "norb": int(norb),
        "nelec": (int(mol.nelec[0]), int(mol.nelec[1])),
    }


def space_of(name: str) -> DetSpace:
    m = molecule(name)
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
