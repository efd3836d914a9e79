"""Circuits of stored ansätze: the optimized state as Pauli rotations and as a gate list.

:func:`rotations_from_meta` and :func:`circuit_from_meta` rebuild an ansatz's circuit from the
``ansatz_meta`` and parameters an optimize stage file stores (no integrals needed). The optimize
stage reports the CNOT count and depth of :func:`circuit_from_meta` at its optimum, and the
export stage writes that same circuit (:func:`eigensweep.device.compile.state_circuit`); both
compile with :func:`eigensweep.circuit.circuit_from_rotations`.
"""

from __future__ import annotations

import numpy as np

from ..circuit import Circuit, PauliRotation, circuit_from_rotations
from ..qubit.mapping import check_mapping, encode_occupations, generator_paulis
from .hardware_efficient import HardwareEfficientAnsatz

__all__ = ["circuit_from_meta", "rotations_from_meta"]


def rotations_from_meta(
    meta: dict, params: np.ndarray, mapping: str = "jordan_wigner"
) -> tuple[np.ndarray, list[PauliRotation]]:
    """Reference bits and Pauli rotations of a stored ansatz (``OptimizeResult.ansatz_meta``).

    Needs no integrals: fermionic operators are mapped with ``mapping``; stored Pauli
    rotations are used as they are (``mapping`` ignored).
    """
    theta = np.asarray(params, dtype=float).reshape(-1)
    ops = meta["operators"]
    if "reference_bits" in meta:
        ref = np.asarray(meta["reference_bits"], dtype=np.uint8)
        n = ref.size
    else:
        n = 2 * int(meta["norb"])
        occ = np.zeros(n, dtype=np.uint8)
        occ[list(meta["reference_occupied_spin_orbitals"])] = 1
        ref = encode_occupations(occ, check_mapping(mapping))
    rots: list[PauliRotation] = []
    for op in ops:
        p = int(op["param"])
        if op["kind"] == "fermion":
            phi = float(op["coeff"]) * theta[p]
            term = tuple((int(o), int(a)) for o, a in op["term"])
            for x, z, c in generator_paulis(term, check_mapping(mapping), n):
                rots.append((x.copy(), z.copy(), float(-2.0 * phi * c)))
        else:
            label = op["label"]
            x = np.array([ch in "XY" for ch in label])
            z = np.array([ch in "ZY" for ch in label])
            angle = float(op["offset"]) + (float(op["coeff"]) * theta[p] if p >= 0 else 0.0)
            rots.append((x, z, angle))
    return ref, rots


def circuit_from_meta(meta: dict, params: np.ndarray, mapping: str = "jordan_wigner") -> Circuit:
    """Circuit of a stored ansatz: native gates for ``hardware_efficient``, otherwise the
    Pauli-rotation compilation of :func:`rotations_from_meta` (module docstring)."""
    if meta.get("name") == "hardware_efficient":
        hea = HardwareEfficientAnsatz(
            None,
            np.asarray(meta["reference_bits"], dtype=np.uint8),
            rounds=int(meta["rounds"]),
            axes=str(meta["axes"]),
        )
        return hea.circuit(params)
    ref, rots = rotations_from_meta(meta, params, mapping)
    return circuit_from_rotations(ref, rots)
