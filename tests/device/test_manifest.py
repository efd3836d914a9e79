"""Device-job building: circuits, shot allocation, manifest fields, atomic writes."""

from __future__ import annotations

import hashlib
import json
import math

import numpy as np
import pytest
from fixtures import h2_ansatz, h2_problem

from eigensweep.device.manifest import (
    BIT_ORDER,
    allocate_shots,
    build_job,
    load_job_circuits,
    load_manifest,
    write_job,
)
from eigensweep.errors import StageFileError
from eigensweep.qubit.pauli import PauliExpansion


@pytest.fixture(scope="module")
def h2_job():
    ham, _, _ = h2_problem()
    _, _, circ, _, _ = h2_ansatz()
    return build_job(circ, ham, shots_total=20000, job_name="h2", meta={"r": 0.7414}), ham, circ


def test_records_have_documented_fields(h2_job):
    job, ham, circ = h2_job
    m = job.to_manifest()
    assert m["format"] == "eigensweep-device-job" and m["format_version"] == 3
    assert m["bit_order"] == BIT_ORDER == "qubit k = character k of the bitstring"
    assert m["meta"] == {"r": 0.7414}
    kinds = [r["kind"] for r in m["circuits"]]
    assert kinds.count("calibration") == 2
    n_groups = len(m["groups"])
    assert kinds.count("measure") == 3 * n_groups
    for r in m["circuits"]:
        assert r["bit_order"] == BIT_ORDER and r["n_qubits"] == 4
        assert r["sha256"] == hashlib.sha256(job.qasm3[r["circuit_id"]].encode()).hexdigest()
        assert r["qasm3_file"] == f"{r['circuit_id']}.qasm"
        assert r["qasm2_file"] == f"{r['circuit_id']}.qasm2"
        assert abs(sum(r["ideal_distribution"].values()) - 1) < 1e-9
        assert min(r["ideal_distribution"].values()) >= 1e-12
        assert all(len(b) == 4 and set(b) <= {"0", "1"} for b in r["ideal_distribution"])
    cal = {r["prepared"]: r for r in m["circuits"] if r["kind"] == "calibration"}
    assert set(cal) == {"0000", "1111"}
    assert job.circuits[cal["0000"]["circuit_id"]].gates == []
    assert [g.name for g in job.circuits[cal["1111"]["circuit_id"]].gates] == ["x"] * 4
    # every non-identity term measured exactly once per scale factor
    labels = ham.labels()
    for s in (1, 3, 5):
        seen = sorted(
            t["index"] for r in m["circuits"] if r["scale_factor"] == s for t in r["pauli_terms"]
        )
        assert seen == [i for i, lab in enumerate(labels) if lab != "IIII"]
    assert abs(m["hamiltonian"]["identity"] - ham.identity_coeff) < 1e-14


def test_folded_records_scale_the_state_preparation_only(h2_job):
    # Giurgica-Tiron et al. 2020 (arXiv:2005.10921): folding G -> G (G^dagger G)^k multiplies
    # the folded part's gate count by the odd factor and keeps the unitary; here G is the
    # state preparation and the group's basis change (its last basis_change_gates gates)
    # follows unfolded, so every circuit of a job starts with the same state preparation
    from eigensweep.qubit.statevector import simulate

    job, _, circ = h2_job
    by_group = {}
    for r in job.records:
        if r.kind == "measure":
            by_group.setdefault(r.group, {})[r.scale_factor] = r
    n_state = len(circ.gates)
    for recs in by_group.values():
        for s in (1, 3, 5):
            tail = recs[s].basis_change_gates
            assert recs[s].n_gates == s * n_state + tail
            assert recs[s].cnot_count == s * circ.cnot_count
            assert recs[s].ideal_distribution == recs[1].ideal_distribution
            gates = job.circuits[recs[s].circuit_id].gates
            assert gates[:n_state] == circ.gates  # the state preparation first
            assert gates[len(gates) - tail :] == job.circuits[recs[1].circuit_id].gates[n_state:]
            # same state as the unfolded circuit (statevector to 1e-10, a unitary identity)
            psi_s = simulate(job.circuits[recs[s].circuit_id])
            psi_1 = simulate(job.circuits[recs[1].circuit_id])
            assert abs(abs(np.vdot(psi_1, psi_s)) - 1.0) < 1e-10


def test_job_id_is_hash_of_sorted_circuit_hashes(h2_job):
    job, ham, circ = h2_job
    want = hashlib.sha256("\n".join(sorted(r.sha256 for r in job.records)).encode()).hexdigest()
    assert job.job_id == want
    again = build_job(circ, ham, shots_total=20000, job_name="h2", meta={"r": 0.7414})
    assert again.job_id == job.job_id  # deterministic


def test_shots_total_and_proportional_allocation(h2_job):
    # common practice: shots proportional to the group 1-norm minimise the 1-norm bound
    job, _, _ = h2_job
    assert job.shots_total == 20000
    cal = [r.shots for r in job.records if r.kind == "calibration"]
    assert cal == [1000, 1000]
    weights = {g["group"]: g["weight"] for g in job.groups}
    meas = [r for r in job.records if r.kind == "measure" and r.shots > 100]
    ratios = [r.shots / weights[r.group] for r in meas]
    assert max(ratios) / min(ratios) < 1.01
    assert all(r.shots >= 100 for r in job.records)


def test_allocate_shots_minimum_and_rounding():
    assert allocate_shots(1000, [1, 1, 2], 10) == [250, 250, 500]
    out = allocate_shots(1000, [1000, 1, 1], 100)
    assert out == [800, 100, 100]
    assert sum(allocate_shots(997, [0.3, 0.3, 0.4], 1)) == 997
    assert allocate_shots(50, [1, 1], 100) == [100, 100]
    assert allocate_shots(10, [0, 0], 1) == [5, 5]


def test_summary_has_counts_estimate_and_warning(h2_job):
    job, ham, _ = h2_job
    s = job.summary
    assert "costs money" in s and "rough estimates" in s
    assert f"total shots: {job.shots_total}" in s
    for r in job.records:
        assert f"| {r.circuit_id} | {r.kind} |" in s
    one_norm = sum(abs(c) for lab, c in zip(ham.labels(), ham.coeffs, strict=True) if lab != "IIII")
    needed = math.ceil((one_norm / 1.6e-3) ** 2)  # 1-norm bound: N = (||c||_1 / eps)^2
    assert job.shots_needed["scale_1_only"] == needed
    assert str(needed) in s
    # Richardson over (1, 3, 5): gamma = (15/8, -5/4, 3/8), 3 * sum gamma^2 = 15.65625
    assert job.shots_needed["zne_richardson"] == math.ceil(needed * 15.65625)


def test_write_job_files_and_reload(h2_job, tmp_path):
    job, _, _ = h2_job
    path = write_job(job, tmp_path / "job")
    folder = path.parent
    names = {p.name for p in folder.iterdir()}
    assert {"manifest.json", "job-summary.md"} <= names
    for r in job.records:
        assert (folder / r.qasm3_file).read_text() == job.qasm3[r.circuit_id]
        assert (folder / r.qasm2_file).read_text() == job.qasm2[r.circuit_id]
    assert not [n for n in names if n.endswith(".tmp")]
    m = load_manifest(folder)
    assert m == json.loads(json.dumps(job.to_manifest()))
    _, items = load_job_circuits(folder)
    assert [c.gates for _, c in items] == [job.circuits[r.circuit_id].gates for r in job.records]


def test_every_exported_file_is_hashed_in_the_manifest(h2_job, tmp_path):
    # issue 20: only the OpenQASM 3 files were hashed, though the README says every file is
    import hashlib

    job, _, _ = h2_job
    folder = write_job(job, tmp_path / "job").parent
    m = load_manifest(folder)
    on_disk = {p.name for p in folder.iterdir()} - {"manifest.json"}
    assert set(m["files"]) == on_disk  # the manifest cannot hash itself
    for name, digest in m["files"].items():
        # reference: hashlib over the bytes on disk (common practice: sha256sum)
        assert hashlib.sha256((folder / name).read_bytes()).hexdigest() == digest
    for rec in m["circuits"]:
        assert rec["qasm2_sha256"] == m["files"][rec["qasm2_file"]]
        assert rec["sha256"] == m["files"][rec["qasm3_file"]]


@pytest.mark.parametrize("which", ["qasm2", "summary"])
def test_load_job_circuits_detects_an_edited_qasm2_or_summary(h2_job, tmp_path, which):
    job, _, _ = h2_job
    write_job(job, tmp_path)
    f = tmp_path / (job.records[0].qasm2_file if which == "qasm2" else "job-summary.md")
    f.write_text(f.read_text() + "// edited\n")
    with pytest.raises(StageFileError, match="SHA-256"):
        load_job_circuits(tmp_path)
    f.unlink()
    with pytest.raises(StageFileError, match="missing"):
        load_job_circuits(tmp_path)


def test_two_scale_factors_have_one_extrapolation_label(h2_job):
    _, ham, circ = h2_job
    job = build_job(circ, ham, shots_total=5000, job_name="x", scale_factors=(1, 3))
    assert set(job.shots_needed) == {"scale_1_only", "zne_linear"}
    # closed form: through l = 1, 3 the extrapolation weights are 3/2 and -1/2, so the
    # variance factor with shots split equally is 2 * (9/4 + 1/4) = 5
    assert job.shots_needed["zne_linear"] == math.ceil(job.shots_needed["scale_1_only"] * 5.0)
    assert "Richardson x" not in job.summary and "straight line" in job.summary


def test_load_job_circuits_detects_edited_file(h2_job, tmp_path):
    job, _, _ = h2_job
    write_job(job, tmp_path)
    f = tmp_path / job.records[0].qasm3_file
    f.write_text(f.read_text().replace("rz(", "rz(0.0+"))
    with pytest.raises(StageFileError, match="SHA-256"):
        load_job_circuits(tmp_path)


@pytest.mark.parametrize(
    "content, match",
    [
        (None, "not found"),
        ("{", "not readable JSON"),
        ('{"format": "x"}', "not an"),
        ('{"format": "eigensweep-device-job", "format_version": 9}', "format_version"),
    ],
)
def test_load_manifest_refuses_bad_files(tmp_path, content, match):
    if content is not None:
        (tmp_path / "manifest.json").write_text(content)
    with pytest.raises(StageFileError, match=match) as err:
        load_manifest(tmp_path)
    assert "\n" not in str(err.value)


def test_build_job_rejects_bad_input(h2_job):
    _, ham, circ = h2_job
    kw = dict(shots_total=1000, job_name="x")
    with pytest.raises(ValueError, match="odd"):
        build_job(circ, ham, scale_factors=(1, 2), **kw)
    with pytest.raises(ValueError, match="JSON"):
        build_job(circ, ham, meta={"a": object()}, **kw)
    with pytest.raises(ValueError, match="qubits"):
        build_job(circ, PauliExpansion.from_strings(["ZZ"], [1.0]), **kw)
    with pytest.raises(ValueError, match="exactly once"):
        build_job(circ, ham, groups=[[1]], **kw)
    with pytest.raises(ValueError, match="qubit-wise"):
        labels = ham.labels()
        xi = next(i for i, lab in enumerate(labels) if "X" in lab)
        rest = [i for i, lab in enumerate(labels) if lab != "IIII" and i != xi]
        build_job(circ, ham, groups=[[xi, rest[0]], rest[1:]], **kw)


def test_build_job_without_calibration_and_single_scale(h2_job):
    _, ham, circ = h2_job
    job = build_job(
        circ,
        ham,
        shots_total=5000,
        job_name="x",
        scale_factors=(1,),
        calibration=False,
        min_shots=1,
    )
    assert all(r.kind == "measure" and r.scale_factor == 1 for r in job.records)
    assert job.shots_total == 5000
    assert np.isclose(sum(g["weight"] for g in job.groups), sum(abs(t["coeff"]) for t in job.terms))


def test_logical_distributions_read_each_logical_bit_at_its_position():
    # reference: the definition in docs/counts-format.md (logical qubit j = character
    # logical_bit_positions[j] of the returned bitstring), applied bitstring by bitstring
    from eigensweep.device.manifest import logical_distributions

    rng = np.random.default_rng(4)
    probs = rng.random((2, 8))
    pos = [2, 0, 1]
    want = np.zeros_like(probs)
    for i in range(8):
        bits = format(i, "03b")
        j = int("".join(bits[p] for p in pos), 2)
        want[:, j] += probs[:, i]
    assert np.array_equal(logical_distributions(probs, pos), want)
