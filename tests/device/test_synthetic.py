"""The seeded synthetic noisy device."""

from __future__ import annotations

import itertools

import numpy as np
import pytest
from fixtures import dense_pauli, two_qubit_problem

from eigensweep.circuit import Circuit
from eigensweep.device.counts import load_results
from eigensweep.device.manifest import build_job, write_job
from eigensweep.device.synthetic import run_synthetic_device, write_results
from eigensweep.qubit.noise import NoiseModel, simulate_distributions
from eigensweep.qubit.statevector import simulate


@pytest.fixture(scope="module")
def two_qubit_job(tmp_path_factory):
    ham, circ, psi, energy, _ = two_qubit_problem()
    job = build_job(circ, ham, shots_total=12000, job_name="2q", meta={})
    folder = tmp_path_factory.mktemp("job2q")
    write_job(job, folder)
    return job, folder


def _dist(counts, n):
    v = np.zeros(2**n)
    for b, c in counts.items():
        v[int(b, 2)] += c
    return v / v.sum()


def test_same_seed_same_counts_and_folder_equals_job(two_qubit_job):
    job, folder = two_qubit_job
    kw = dict(readout_error=(0.02, 0.05), depolarizing_1q=0.01, depolarizing_2q=0.05)
    a = run_synthetic_device(folder, seed=7, **kw)
    b = run_synthetic_device(job, seed=7, **kw)
    c = run_synthetic_device(folder, seed=8, **kw)
    assert a == b
    assert a["results"] != c["results"]
    assert a["job_id"] == job.job_id and a["format"] == "eigensweep-device-results"


def test_noise_free_counts_follow_ideal_distribution(two_qubit_job, tmp_path):
    # common practice: multinomial sampling, TVD of n shots ~ sqrt(k / n)
    job, folder = two_qubit_job
    res = run_synthetic_device(folder, seed=1)
    path = write_results(res, tmp_path / "r.json")
    counts = load_results(path, folder)  # synthetic output passes validation
    for rec in job.records:
        got = _dist(counts[rec.circuit_id], 2)
        ideal = _dist(rec.ideal_distribution, 2)
        assert 0.5 * np.abs(got - ideal).sum() < 4 * np.sqrt(4 / rec.shots)
        assert sum(counts[rec.circuit_id].values()) == rec.shots
    assert counts["cal-0"] == {"00": job.records[-2].shots}
    assert counts["cal-1"] == {"11": job.records[-1].shots}


def test_readout_flips_per_qubit(two_qubit_job):
    # the uncorrelated readout model: each bit flips with its own probability
    _, folder = two_qubit_job
    res = run_synthetic_device(folder, seed=2, readout_error=([0.1, 0.0], [0.0, 0.2]), shots=20000)
    zeros = _dist(res["results"]["cal-0"]["counts"], 2)
    ones = _dist(res["results"]["cal-1"]["counts"], 2)
    assert abs(zeros[0b10] - 0.1) < 0.01 and zeros[0b01] == 0 and zeros[0b11] == 0
    assert abs(ones[0b10] - 0.2) < 0.01 and ones[0b01] == 0 and ones[0b00] == 0


def _density_matrix_probs(circ: Circuit, p1: float, p2: float) -> np.ndarray:
    """Independent density-matrix reference of the depolarizing model (dense, tiny n)."""
    n = circ.n_qubits
    rho = np.zeros((2**n, 2**n), dtype=complex)
    rho[0, 0] = 1
    for g in circ.gates:
        one = Circuit(n, [g])
        u = np.stack(
            [simulate(one, np.eye(2**n)[:, i].astype(complex)) for i in range(2**n)], axis=1
        )
        rho = u @ rho @ u.conj().T
        k = len(g.qubits)
        p = p2 if k == 2 else p1
        acc = np.zeros_like(rho)
        for letters in itertools.product("IXYZ", repeat=k):
            if set(letters) == {"I"}:
                continue
            label = ["I"] * n
            for q, ch in zip(g.qubits, letters, strict=True):
                label[q] = ch
            pm = dense_pauli("".join(label))
            acc += pm @ rho @ pm
        rho = (1 - p) * rho + p / (4**k - 1) * acc
    return np.real(np.diag(rho))


def test_trajectories_and_density_matrix_reproduce_depolarizing_channel():
    # reference: density-matrix evolution of the same channel (Nielsen & Chuang, ch. 8)
    circ = Circuit(2)
    circ.append("h", (0,))
    circ.append("cx", (0, 1))
    circ.append("ry", (1,), (0.4,))
    circ.append("cx", (1, 0))
    p1, p2 = 0.05, 0.2
    nm = NoiseModel.from_probabilities(depolarizing_1q=p1, depolarizing_2q=p2)
    ref = _density_matrix_probs(circ, p1, p2)
    dense = simulate_distributions([circ], nm)[0]
    assert np.max(np.abs(dense - ref)) < 1e-12
    rng = np.random.default_rng(0)
    probs = simulate_distributions([circ], nm, method="trajectories", trajectories=20000, rng=rng)
    assert np.max(np.abs(probs[0] - ref)) < 0.01
    assert np.max(np.abs(ref - np.abs(simulate(circ)) ** 2)) > 0.05  # noise is visible


def test_noise_grows_with_folding(two_qubit_job):
    # Giurgica-Tiron et al. 2020: folded circuits run more gates, hence more noise
    job, folder = two_qubit_job
    res = run_synthetic_device(
        folder, seed=3, depolarizing_1q=0.005, depolarizing_2q=0.05, shots=20000
    )
    # the all-Z group has a dominant bitstring, so depolarization moves it visibly
    tvd = {}
    for r in job.records:
        if r.kind == "measure" and set(r.basis) <= {"Z", "I"}:
            got = _dist(res["results"][r.circuit_id]["counts"], 2)
            tvd[r.scale_factor] = 0.5 * np.abs(got - _dist(r.ideal_distribution, 2)).sum()
    assert tvd[1] < tvd[3] < tvd[5]


def test_most_probable_bitstring_agrees_at_optimum(two_qubit_job):
    # common practice: at the optimum a mildly noisy device keeps the dominant bitstring
    job, folder = two_qubit_job
    res = run_synthetic_device(
        folder, seed=5, readout_error=(0.02, 0.04), depolarizing_1q=0.001, depolarizing_2q=0.01
    )
    for rec in job.records:
        if rec.kind != "measure" or rec.scale_factor != 1:
            continue
        counts = res["results"][rec.circuit_id]["counts"]
        assert max(counts, key=counts.get) == max(
            rec.ideal_distribution, key=rec.ideal_distribution.get
        )


@pytest.mark.parametrize(
    "kw",
    [
        dict(readout_error=(1.5, 0.0)),
        dict(depolarizing_1q=-0.1),
        dict(depolarizing_2q=2.0),
        dict(trajectories=0),
        dict(shots=0),
        dict(readout_error=([0.1, 0.1, 0.1], 0.0)),
    ],
)
def test_bad_noise_parameters(two_qubit_job, kw):
    job, _ = two_qubit_job
    with pytest.raises(ValueError):
        run_synthetic_device(job, seed=0, **kw)


def test_target_noise_is_the_targets_numbers_on_the_measured_qubits():
    # reference: the target YAML file as PyYAML reads it (chain12-demo, invented numbers)
    from pathlib import Path

    import yaml

    from eigensweep.device.synthetic import target_noise
    from eigensweep.target import load_target

    path = Path(__file__).resolve().parents[2] / "config" / "targets" / "chain12-demo.yaml"
    data = yaml.safe_load(path.read_text())
    ham, circ = two_qubit_problem()[:2]
    job = build_job(circ, ham, shots_total=2000, job_name="t", target=load_target(path))
    measured = job.to_manifest()["measured_qubits"]
    noise = target_noise(job)
    for key in ("t1_us", "t2_us", "readout_p01", "readout_p10"):
        assert list(getattr(noise, key)) == [data["qubits"][key][q] for q in measured]
    assert noise.gate_noise("cx", 2).error == data["gates"]["cx"]["error"]
    assert noise.gate_noise("sx", 1).duration_ns == data["gates"]["sx"]["duration_ns"]
