"""The optimize stage's reported circuit costs are those of the exported device circuit.

One compiler (:func:`eigensweep.circuit.circuit_from_rotations`) builds both; the CNOT counts
are checked against the textbook CNOT-ladder cost ``2(w - 1)`` of a weight-``w`` Pauli rotation
(Nielsen & Chuang (2000), section 4.7.3; Whitfield, Biamonte, Aspuru-Guzik, Mol. Phys. 109,
735 (2011)) applied to OpenFermion's Jordan-Wigner image of each excitation generator.
"""

from __future__ import annotations

import json

import numpy as np
import pytest
from fixtures import active_integrals

from eigensweep.device import build_job, state_circuit
from eigensweep.qubit import identity_reduction, map_hamiltonian, reduce_to_sector, reference_bits
from eigensweep.vqe import run_optimize

EXACT = {"optimizer": {"name": "lbfgs"}, "estimator": {"name": "exact"}}


def _optimized(name: str, tapered: bool):
    ints = active_integrals(name)
    ham = map_hamiltonian(ints["h1e"], ints["eri"], ints["e_core"], "jordan_wigner")
    bits = reference_bits(ints["nelec"], ints["norb"], "jordan_wigner")
    tap = reduce_to_sector(ham, bits) if tapered else identity_reduction(ham, bits)
    res = run_optimize(**ints, ansatz={"name": "uccsd"}, **EXACT, tapering=tap)
    return res, tap


def _textbook_cnots_jw(meta: dict, params: np.ndarray) -> int:
    """sum over non-zero excitations of sum over JW strings of 2(w - 1), from OpenFermion."""
    import openfermion as of

    total = 0
    for op in meta["operators"]:
        if abs(op["coeff"] * params[op["param"]]) <= 1e-12:
            continue  # an identity gate: no hardware circuit spends gates on it
        term = tuple((int(o), int(a)) for o, a in op["term"])
        gen = of.FermionOperator(term) - of.hermitian_conjugated(of.FermionOperator(term))
        for pauli, coeff in of.jordan_wigner(gen).terms.items():
            if pauli and abs(coeff) > 1e-12:
                total += 2 * (len(pauli) - 1)
    return total


@pytest.mark.parametrize("name", ["H2", "LiH"])
def test_untapered_costs_equal_export_and_textbook_count(name):
    res, tap = _optimized(name, tapered=False)
    meta = json.loads(json.dumps(res.ansatz_meta))  # as stored in the stage file
    circ, energy = state_circuit(
        meta, res.params, "jordan_wigner", tap.hamiltonian, res.energy_exact_at_params
    )
    assert abs(energy - res.energy) < 1e-8
    assert (res.cnot_count, res.depth) == (circ.cnot_count, circ.depth)
    # reference: textbook CNOT ladder on OpenFermion's JW strings (module docstring)
    assert res.cnot_count == _textbook_cnots_jw(meta, res.params)
    if name == "H2":
        # one double excitation, 8 strings of weight 4 (singles stay at zero by symmetry)
        assert res.cnot_count == 8 * 6
    job = build_job(circ, tap.hamiltonian, shots_total=4000, scale_factors=(1,), job_name="t")
    assert job.state_preparation["cnot_count"] == res.cnot_count
    assert job.state_preparation["depth"] == res.depth
    assert f"{res.cnot_count} CNOTs, depth {res.depth}" in job.summary


def test_tapered_costs_equal_export_and_textbook_count():
    res, tap = _optimized("LiH", tapered=True)
    meta = json.loads(json.dumps(res.ansatz_meta))
    circ, _ = state_circuit(
        meta, res.params, "jordan_wigner", tap.hamiltonian, res.energy_exact_at_params
    )
    assert (res.cnot_count, res.depth, res.n_qubits) == (circ.cnot_count, circ.depth, 8)
    # reference: 2(w - 1) per stored (tapered) rotation with a non-zero angle (textbook)
    want = 0
    for op in meta["operators"]:
        angle = op["coeff"] * res.params[op["param"]] + op["offset"]
        if abs(angle) > 1e-12:
            want += 2 * (sum(ch != "I" for ch in op["label"]) - 1)
    assert res.cnot_count == want
