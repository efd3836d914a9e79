"""The one noise simulator (eigensweep.qubit.noise) against closed forms and plain NumPy."""

from __future__ import annotations

import math
from functools import reduce
from pathlib import Path

import numpy as np
import pytest

from eigensweep.circuit import Circuit
from eigensweep.qubit.noise import (
    GateNoise,
    NoiseModel,
    depolarizing_channel_,
    readout_distribution,
    relaxation_channel_,
    simulate_distributions,
)

REPO = Path(__file__).resolve().parents[2]

PAULI = [
    np.eye(2),
    np.array([[0, 1], [1, 0]], dtype=complex),
    np.array([[0, -1j], [1j, 0]]),
    np.diag([1.0, -1.0]).astype(complex),
]


def _random_rho(n: int, seed: int) -> np.ndarray:
    rng = np.random.default_rng(seed)
    a = rng.normal(size=(2**n, 2**n)) + 1j * rng.normal(size=(2**n, 2**n))
    rho = a @ a.conj().T
    return rho / np.trace(rho)


def _embed(ops: dict[int, np.ndarray], n: int) -> np.ndarray:
    """Kronecker product with qubit 0 leftmost (most significant bit)."""
    return reduce(np.kron, [ops.get(q, np.eye(2)) for q in range(n)])


def _idle_circuit(prep: list[str], steps: int) -> Circuit:
    """Qubit 0 gets ``prep``; qubit 1 runs ``steps`` rz(0) gates of 100 ns, so qubit 0 idles
    for ``100 * steps`` ns."""
    c = Circuit(2)
    for name in prep:
        c.append(name, (0,))
    for _ in range(steps):
        c.append("rz", (1,), (0.0,))
    return c


def _timed(t1_us: float, t2_us: float) -> NoiseModel:
    return NoiseModel.from_mapping(
        {
            "gates": {"rz": {"duration_ns": 100}, "x": {}, "h": {}, "cx": {}},
            "qubits": {"t1_us": t1_us, "t2_us": t2_us},
        }
    )


def test_bad_noise_values_are_refused_with_the_key():
    with pytest.raises(ValueError, match="t2_us"):
        NoiseModel(t1_us=1.0, t2_us=3.0)
    with pytest.raises(ValueError, match="readout_p01"):
        NoiseModel(readout_p01=0.7)
    with pytest.raises(ValueError, match=r"gates\.cx"):
        NoiseModel.from_mapping({"gates": {"cx": {"error": "big"}}})
    with pytest.raises(ValueError, match="t1_us"):
        simulate_distributions([Circuit(3)], NoiseModel(t1_us=(1.0, 2.0)))


def test_from_mapping_reads_the_target_layout():
    nm = NoiseModel.from_mapping(
        {
            "name": "ignored",
            "gates": {"cx": {"error": 8e-3, "duration_ns": 300}, "sx": {"error": 2e-4}},
            "qubits": {"t1_us": [100, 120], "t2_us": 90, "readout_p01": 0.01},
        }
    )
    assert nm.gate_noise("cx", 2) == GateNoise(8e-3, 300.0)
    # a gate without its own entry takes the listed gate of its arity with the largest error
    assert nm.gate_noise("h", 1) == GateNoise(2e-4, 0.0)
    assert nm.t1_us == (100.0, 120.0) and nm.readout_p10 == 0.0


@pytest.mark.parametrize("steps", [0, 3, 10, 25])
def test_idle_qubit_from_one_decays_as_exp_minus_t_over_t1(steps):
    # Nielsen & Chuang (2000) ch. 8, amplitude damping, from memory: P(1)(t) = exp(-t/T1)
    t1 = 1.0  # microseconds
    p = simulate_distributions([_idle_circuit(["x"], steps)], _timed(t1, 1.5))[0]
    p1 = p[0b10] + p[0b11]  # qubit 0 is the most significant bit
    assert p1 == pytest.approx(math.exp(-steps * 0.1 / t1), abs=1e-12)


@pytest.mark.parametrize("steps", [0, 4, 12])
def test_idle_qubit_from_plus_loses_coherence_as_exp_minus_t_over_t2(steps):
    # Nielsen & Chuang (2000) ch. 8, from memory: <X>(t) = exp(-t/T2) with
    # 1/T2 = 1/(2 T1) + 1/T_phi. The idle time sits between the two h gates: the cx(1, 0)
    # whose control stays |0> is the identity and makes qubit 0 wait for qubit 1.
    t1, t2 = 1.0, 1.2
    c = _idle_circuit(["h"], steps)
    c.append("cx", (1, 0))
    c.append("h", (0,))
    p = simulate_distributions([c], _timed(t1, t2))[0]
    x_mean = (p[0b00] + p[0b01]) - (p[0b10] + p[0b11])  # <X> before the last h
    assert x_mean == pytest.approx(math.exp(-steps * 0.1 / t2), abs=1e-12)


@pytest.mark.parametrize("qubits", [(1,), (0, 2), (2, 1)])
def test_depolarizing_channel_matches_the_pauli_sum(qubits):
    # reference: (1-p) rho + p/(4^k-1) sum_{P != I} P rho P, built here with numpy
    # (Nielsen & Chuang (2000) section 8.3.4, from memory)
    n, p = 3, 0.37
    rho = _random_rho(n, 5)
    k = len(qubits)
    ref = (1 - p) * rho
    for code in range(1, 4**k):
        letters = [(code // 4 ** (k - 1 - j)) % 4 for j in range(k)]
        big = _embed({q: PAULI[a] for q, a in zip(qubits, letters, strict=True)}, n)
        ref = ref + p / (4**k - 1) * big @ rho @ big.conj().T
    out = depolarizing_channel_(rho.reshape(-1).copy(), n, qubits, p).reshape(2**n, 2**n)
    np.testing.assert_allclose(out, ref, atol=1e-14)


def test_relaxation_channel_matches_the_kraus_sums():
    # reference: amplitude damping Kraus operators E0 = [[1,0],[0,sqrt(1-g)]],
    # E1 = [[0,sqrt(g)],[0,0]], then phase damping as (1-q) rho + q Z rho Z with
    # 1 - 2q = dephase (Nielsen & Chuang (2000) sections 8.3.5-8.3.6, from memory)
    n, q, g, dephase = 3, 1, 0.3, 0.8
    rho = _random_rho(n, 7)
    e0 = _embed({q: np.array([[1, 0], [0, math.sqrt(1 - g)]])}, n)
    e1 = _embed({q: np.array([[0, math.sqrt(g)], [0, 0]])}, n)
    z = _embed({q: PAULI[3]}, n)
    ref = e0 @ rho @ e0.T + e1 @ rho @ e1.T
    pz = (1 - dephase) / 2
    ref = (1 - pz) * ref + pz * z @ ref @ z
    out = relaxation_channel_(rho.reshape(-1).copy(), n, q, g, dephase).reshape(2**n, 2**n)
    np.testing.assert_allclose(out, ref, atol=1e-14)


def _gate_unitary(name: str, qubits: tuple[int, ...], params: tuple[float, ...], n: int):
    """Plain-numpy matrices of the few gates used below (OpenQASM 3 meaning)."""
    if name == "cx":
        c, t = qubits
        p0, p1 = np.diag([1.0, 0.0]), np.diag([0.0, 1.0])
        return _embed({c: p0}, n) + _embed({c: p1, t: PAULI[1]}, n)
    if name == "h":
        m = np.array([[1, 1], [1, -1]]) / math.sqrt(2)
    else:  # ry
        a = params[0] / 2
        m = np.array([[math.cos(a), -math.sin(a)], [math.sin(a), math.cos(a)]])
    return _embed({qubits[0]: m}, n)


def test_noisy_circuit_matches_an_independent_density_matrix_run():
    # reference: the same circuit and gate errors, dense numpy matrices and explicit Pauli
    # sums in this test (depolarizing after each gate on its qubits)
    n, p1, p2 = 3, 0.02, 0.07
    c = Circuit(n)
    c.append("h", (0,))
    c.append("cx", (0, 1))
    c.append("ry", (2,), (0.7,))
    c.append("cx", (1, 2))
    c.append("h", (1,))
    rho = np.zeros((2**n, 2**n), dtype=complex)
    rho[0, 0] = 1
    for g in c.gates:
        u = _gate_unitary(g.name, g.qubits, g.params, n)
        rho = u @ rho @ u.conj().T
        k, p = len(g.qubits), (p2 if len(g.qubits) == 2 else p1)
        mixed = (1 - p) * rho
        for code in range(1, 4**k):
            letters = [(code // 4 ** (k - 1 - j)) % 4 for j in range(k)]
            big = _embed({q: PAULI[a] for q, a in zip(g.qubits, letters, strict=True)}, n)
            mixed = mixed + p / (4**k - 1) * big @ rho @ big.conj().T
        rho = mixed
    nm = NoiseModel.from_probabilities(depolarizing_1q=p1, depolarizing_2q=p2)
    out = simulate_distributions([c], nm)[0]
    np.testing.assert_allclose(out, np.diag(rho).real, atol=1e-12)


def test_readout_flips_follow_the_confusion_matrix():
    # common practice: P(read 1 | 0) = p01, P(read 0 | 1) = p10, independently per qubit
    p = np.array([0.0, 0.0, 1.0, 0.0])  # qubit 0 = 1, qubit 1 = 0 ("10")
    out = readout_distribution(p, [0.1, 0.2], [0.3, 0.4])
    expected = {"00": 0.3 * 0.8, "01": 0.3 * 0.2, "10": 0.7 * 0.8, "11": 0.7 * 0.2}
    for bits, value in expected.items():
        assert out[int(bits, 2)] == pytest.approx(value, abs=1e-15)


def test_trajectories_agree_with_the_density_matrix():
    # statistics (common practice): independent trajectory batches scatter around the exact
    # distribution with a standard error std/sqrt(batches)
    c = Circuit(3)
    c.append("h", (0,))
    c.append("cx", (0, 1))
    c.append("rx", (2,), (1.1,))
    c.append("cx", (1, 2))
    c.append("h", (2,))
    nm = NoiseModel.from_mapping(
        {
            "gates": {"cx": {"error": 0.05, "duration_ns": 300}, "h": {"error": 0.01}},
            "qubits": {"t1_us": 1.0, "t2_us": 1.5},
        }
    )
    exact = simulate_distributions([c], nm)[0]
    runs = np.array(
        [
            simulate_distributions(
                [c], nm, method="trajectories", trajectories=500, rng=np.random.default_rng(s)
            )[0]
            for s in range(12)
        ]
    )
    se = runs.std(axis=0, ddof=1) / math.sqrt(len(runs))
    assert np.all(np.abs(runs.mean(axis=0) - exact) <= 4 * se + 2e-3)


def test_shared_prefixes_give_the_same_distributions_as_separate_runs():
    # consistency of the prefix sharing: simulating circuits together or one by one is the
    # same computation (the schedule of a gate depends only on the gates before it)
    nm = _timed(1.0, 1.5)
    base = _idle_circuit(["h"], 3)
    a, b = base.copy(), base.copy()
    a.append("h", (1,))
    b.append("x", (0,))
    together = simulate_distributions([a, b, base], nm)
    apart = np.array([simulate_distributions([x], nm)[0] for x in (a, b, base)])
    np.testing.assert_allclose(together, apart, atol=1e-14)


def test_native_two_qubit_gates_of_the_targets_act_on_both_indices():
    # reference: the statevector simulation of the same circuit (no noise: rho = |psi><psi|)
    from eigensweep.qubit.statevector import simulate

    c = Circuit(3)
    c.append("h", (0,))
    c.append("rxx", (0, 2), (0.7,))
    c.append("h", (1,))
    c.append("cz", (1, 2))
    c.append("ry", (2,), (0.4,))
    probs = simulate_distributions([c], NoiseModel())[0]
    np.testing.assert_allclose(probs, np.abs(simulate(c)) ** 2, atol=1e-12)


def test_example_targets_give_their_noise_model_in_one_call():
    # reference: the example target files read here with plain YAML
    import yaml

    from eigensweep.target import load_target

    for path in sorted(REPO.glob("config/targets/*.yaml")):
        raw = yaml.safe_load(path.read_text())
        nm = NoiseModel.from_mapping(load_target(path).to_dict())
        for name, entry in raw["gates"].items():
            arity = 2 if name in ("cx", "cz", "rxx") else 1
            assert nm.gate_noise(name, arity) == GateNoise(entry["error"], entry["duration_ns"])
        assert list(nm.t1_us) == pytest.approx(raw["qubits"]["t1_us"])
        layout = [3, 1, 0]
        sub = nm.for_qubits(layout)
        assert sub.readout_p10 == tuple(raw["qubits"]["readout_p10"][q] for q in layout)
