"""OpenQASM 3 / 2 export, parsing with the reference parser, and exact round trips."""

from __future__ import annotations

import json

import numpy as np
import openqasm3
import pytest
from fixtures import h2_ansatz, h2_problem, random_pauli_expansion

from eigensweep.circuit import Circuit, Gate
from eigensweep.device.compile import circuit_from_rotations, globally_folded_circuit
from eigensweep.device.manifest import build_job, write_job
from eigensweep.device.qasm import (
    QasmReadError,
    from_qasm2,
    from_qasm3,
    to_qasm2,
    to_qasm3,
)
from eigensweep.qubit.statevector import expectation, simulate


def _random_circuit(n, n_gates, rng):
    c = Circuit(n)
    for _ in range(n_gates):
        kind = rng.integers(4)
        q = int(rng.integers(n))
        if kind == 0:
            c.append(str(rng.choice(["x", "y", "z", "h", "s", "sdg", "sx"])), (q,))
        elif kind == 1:
            # awkward angles: many digits, tiny, huge, negative
            t = float(rng.choice([rng.normal(), 1e-17 * rng.normal(), 1e3 * rng.normal()]))
            c.append(str(rng.choice(["rx", "ry", "rz"])), (q,), (t,))
        elif n > 1:
            t = int((q + 1 + rng.integers(n - 1)) % n)
            c.append("cx", (q, t))
    return c


@pytest.fixture(scope="module")
def h2_job_folder(tmp_path_factory):
    ham, _, _ = h2_problem()
    _, _, circ, psi, energy = h2_ansatz()
    job = build_job(circ, ham, shots_total=10000, job_name="h2-qasm", meta={"bond": 0.7414})
    folder = tmp_path_factory.mktemp("h2job")
    write_job(job, folder)
    return folder, ham, psi, energy


@pytest.mark.parametrize("seed", range(5))
def test_qasm3_round_trip_reproduces_statevector(seed):
    # reference: openqasm3 reference parser (open standard); exact angles via repr
    rng = np.random.default_rng(seed)
    circ = _random_circuit(3, 40, rng)
    text = to_qasm3(circ)
    openqasm3.parse(text)
    back = from_qasm3(text)
    assert back.gates == circ.gates  # bit-identical angles
    assert np.max(np.abs(simulate(back) - simulate(circ))) < 1e-12


@pytest.mark.parametrize("seed", range(3))
def test_qasm2_round_trip_and_layout(seed):
    # reference: openqasm3 reference parser reads the backwards-compatible 2.0 syntax
    rng = np.random.default_rng(100 + seed)
    circ = _random_circuit(4, 30, rng)
    text = to_qasm2(circ)
    lines = text.splitlines()
    assert lines[:2] == ["OPENQASM 2.0;", 'include "qelib1.inc";']
    assert "qreg q[4];" in lines and "creg c[4];" in lines
    assert [ln for ln in lines if ln.startswith("measure")] == [
        f"measure q[{k}] -> c[{k}];" for k in range(4)
    ]
    back = from_qasm2(text)
    assert "sx" not in text  # not in the original qelib1.inc; written as h s h
    assert [g for g in back.gates if g.name in ("rx", "ry", "rz")] == [
        g for g in circ.gates if g.name in ("rx", "ry", "rz")
    ]
    assert np.max(np.abs(simulate(back) - simulate(circ))) < 1e-12


def test_qasm3_layout_and_partial_measurement():
    circ = Circuit(3)
    circ.append("h", (0,))
    circ.append("cx", (0, 2))
    text = to_qasm3(circ, n_measure=2, name="demo\nwith newline")
    lines = text.splitlines()
    assert lines[:3] == ["OPENQASM 3.0;", 'include "stdgates.inc";', "// demo with newline"]
    assert "qubit[3] q;" in lines and "bit[2] c;" in lines
    assert lines[-2:] == ["c[0] = measure q[0];", "c[1] = measure q[1];"]
    openqasm3.parse(text)
    with pytest.raises(ValueError):
        to_qasm3(circ, n_measure=4)


def test_export_refuses_non_finite_angle():
    circ = Circuit(1, [Gate("rz", (0,), (float("inf"),))])
    with pytest.raises(ValueError, match="non-finite"):
        to_qasm3(circ)


@pytest.mark.parametrize(
    "text, match",
    [
        ('OPENQASM 3.0;\ninclude "other.inc";\nqubit[1] q;\n', "include"),
        (
            'OPENQASM 3.0;\ninclude "stdgates.inc";\nqubit[2] q;\nbit[2] c;\n'
            "c[1] = measure q[0];\n",
            "bit order",
        ),
        ('OPENQASM 3.0;\ninclude "stdgates.inc";\nqubit[1] q;\nctrl @ x q[0];\n', "."),
        ('OPENQASM 3.0;\ninclude "stdgates.inc";\nqubit[1] q;\nt q[0];\n', "unknown gate"),
        ('OPENQASM 2.0;\ninclude "qelib1.inc";\nqreg q[1];\n', "expected OPENQASM 3"),
        ("OPENQASM 3.0;\nqubit[1] q;\nh q[0]\n", "not valid"),
    ],
)
def test_from_qasm3_rejects_outside_subset(text, match):
    with pytest.raises(QasmReadError, match=match):
        from_qasm3(text)


def test_every_exported_qasm3_parses_with_reference_parser(h2_job_folder):
    # reference: openqasm3 reference parser (open standard)
    folder, *_ = h2_job_folder
    manifest = json.loads((folder / "manifest.json").read_text())
    assert manifest["circuits"]
    for rec in manifest["circuits"]:
        program = openqasm3.parse((folder / rec["qasm3_file"]).read_text())
        assert str(program.version) == "3.0"
        prog2 = openqasm3.parse((folder / rec["qasm2_file"]).read_text())
        assert str(prog2.version) == "2.0"


def test_exported_measurement_circuits_reproduce_energy(h2_job_folder):
    # reference: project expectation(state, ham); energy re-assembled from the exported files
    folder, ham, psi, energy = h2_job_folder
    manifest = json.loads((folder / "manifest.json").read_text())
    e_files = manifest["hamiltonian"]["identity"]
    e_manifest = manifest["hamiltonian"]["identity"]
    for rec in manifest["circuits"]:
        if rec["kind"] != "measure":
            continue
        circ = from_qasm3((folder / rec["qasm3_file"]).read_text())
        probs = np.abs(simulate(circ)) ** 2
        n = circ.n_qubits
        idx = np.arange(2**n)
        ideal = np.zeros(2**n)
        for bits, p in rec["ideal_distribution"].items():
            ideal[int(bits, 2)] = p
        assert np.max(np.abs(ideal - probs)) < 1e-11  # manifest agrees with the file
        if rec["scale_factor"] != 1:
            continue
        for term in rec["pauli_terms"]:
            par = np.zeros(2**n, dtype=int)
            for k, ch in enumerate(term["label"]):
                if ch != "I":
                    assert ch == rec["basis"][k]
                    par ^= (idx >> (n - 1 - k)) & 1
            e_files += term["coeff"] * float(np.sum(probs * (1 - 2 * par)))
            e_manifest += term["coeff"] * float(np.sum(ideal * (1 - 2 * par)))
    assert abs(e_files - expectation(psi, ham)) < 1e-8
    assert abs(e_manifest - energy) < 1e-8


def test_folded_random_hamiltonian_energy_via_qasm():
    # Giurgica-Tiron et al. 2020: folded circuits are the same unitary, exported exactly
    rng = np.random.default_rng(11)
    ham = random_pauli_expansion(3, 7, rng)
    x = np.array([1, 0, 1], bool)
    z = np.array([1, 1, 0], bool)
    circ = circuit_from_rotations([1, 1, 0], [(x, z, 0.37), (z, x, -1.1)])
    folded = globally_folded_circuit(circ, 5)
    back = from_qasm3(to_qasm3(folded))
    assert abs(expectation(simulate(back), ham) - expectation(simulate(circ), ham)) < 1e-12
