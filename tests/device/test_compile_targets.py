"""Compilation for device targets (eigensweep.device.compile): natives, routing, manifests.

Outside references: gate matrices written here with NumPy from their textbook definitions
(Nielsen & Chuang, ch. 4, from memory), the OpenQASM 3 reference parser (``openqasm3``) for
reading the exported files, and an independent statevector simulation written in this file.
"""

from __future__ import annotations

import functools
import math
from pathlib import Path

import numpy as np
import openqasm3
import pytest
from openqasm3 import ast

from eigensweep.circuit import Circuit, circuit_from_rotations
from eigensweep.device.compile import (
    _two_qubit_native,
    compile_for_target,
    one_qubit_native,
    peephole,
)
from eigensweep.device.manifest import build_job, write_job
from eigensweep.device.reconcile import reconcile
from eigensweep.qubit.pauli import PauliExpansion
from eigensweep.target import load_target

TARGETS = Path(__file__).resolve().parents[2] / "config" / "targets"

# ----------------------------------------------------------------------------- matrices
# textbook definitions (Nielsen & Chuang, ch. 4, from memory); qubit 0 = most significant bit
I2 = np.eye(2, dtype=complex)
X = np.array([[0, 1], [1, 0]], dtype=complex)
Y = np.array([[0, -1j], [1j, 0]], dtype=complex)
Z = np.diag([1.0, -1.0]).astype(complex)
H = np.array([[1, 1], [1, -1]], dtype=complex) / math.sqrt(2)
S = np.diag([1, 1j])
SX = 0.5 * np.array([[1 + 1j, 1 - 1j], [1 - 1j, 1 + 1j]])
P0, P1 = np.diag([1.0, 0.0]), np.diag([0.0, 1.0])


def rot(pauli: np.ndarray, t: float) -> np.ndarray:
    return math.cos(t / 2) * np.eye(len(pauli)) - 1j * math.sin(t / 2) * pauli


def one(name: str, params=()) -> np.ndarray:
    table = {"x": X, "y": Y, "z": Z, "h": H, "s": S, "sdg": S.conj().T, "sx": SX}
    if name in table:
        return table[name]
    return rot({"rx": X, "ry": Y, "rz": Z}[name], params[0])


def two(name: str, params=()) -> np.ndarray:
    """Two-qubit matrix, first operand = more significant qubit."""
    if name == "cx":
        return np.kron(P0, I2) + np.kron(P1, X)
    if name == "cz":
        return np.diag([1, 1, 1, -1]).astype(complex)
    if name == "rxx":
        return rot(np.kron(X, X), params[0])
    raise KeyError(name)


def gate_list_unitary(gates, n: int) -> np.ndarray:
    """Unitary of an eigensweep gate list on n <= 3 qubits by Kronecker products."""
    u = np.eye(2**n, dtype=complex)
    for g in gates:
        u = embed(g.name, g.qubits, g.params, n) @ u
    return u


def embed(name, qubits, params, n) -> np.ndarray:
    if len(qubits) == 1:
        mats = [one(name, params) if k == qubits[0] else I2 for k in range(n)]
        out = mats[0]
        for m in mats[1:]:
            out = np.kron(out, m)
        return out
    # two-qubit: permute to (a, b, rest) via a dense permutation of basis states
    a, b = qubits
    full = np.kron(two(name, params), np.eye(2 ** (n - 2)))
    order = [a, b] + [k for k in range(n) if k not in (a, b)]
    perm = np.zeros((2**n, 2**n))
    for idx in range(2**n):
        bits = [(idx >> (n - 1 - k)) & 1 for k in range(n)]
        new = sum(bits[q] << (n - 1 - pos) for pos, q in enumerate(order))
        perm[new, idx] = 1
    return perm.T @ full @ perm


def equal_up_to_phase(u: np.ndarray, v: np.ndarray, tol: float = 1e-10) -> bool:
    k = np.unravel_index(np.argmax(np.abs(v)), v.shape)
    phase = u[k] / v[k]
    return abs(abs(phase) - 1) < tol and np.allclose(u, phase * v, atol=tol)


# ----------------------------------------------------------------------------- natives


@pytest.mark.parametrize("entangler", ["cx", "cz", "rxx"])
@pytest.mark.parametrize("pair", [(0, 1), (1, 0), (0, 2), (2, 1)])
def test_cx_and_swap_in_native_gates_equal_the_textbook_unitaries(entangler, pair):
    a, b = pair
    cx = embed("cx", (a, b), (), 3)
    assert equal_up_to_phase(gate_list_unitary(_two_qubit_native("cx", a, b, entangler), 3), cx)
    # SWAP: |q_a q_b> -> |q_b q_a> (Nielsen & Chuang, ex. 4.? , from memory)
    swap = np.zeros((8, 8))
    for idx in range(8):
        bits = [(idx >> (2 - k)) & 1 for k in range(3)]
        bits[a], bits[b] = bits[b], bits[a]
        swap[sum(bt << (2 - k) for k, bt in enumerate(bits)), idx] = 1
    got = gate_list_unitary(_two_qubit_native("swap", a, b, entangler), 3)
    assert equal_up_to_phase(got, swap)
    names = {g.name for g in _two_qubit_native("swap", a, b, entangler) if len(g.qubits) == 2}
    assert names == {entangler}


@pytest.mark.parametrize("basis", ["sx", "ry", "rx"])
def test_one_qubit_resynthesis_equals_random_unitaries(basis):
    rng = np.random.default_rng(3)
    allowed = {"sx": {"rz", "sx", "x"}, "ry": {"rz", "ry"}, "rx": {"rz", "rx"}}[basis]
    cases = [
        np.linalg.qr(rng.normal(size=(2, 2)) + 1j * rng.normal(size=(2, 2)))[0] for _ in range(50)
    ]
    cases += [H, X, Y, Z, S, SX, H @ S, rot(Y, math.pi / 2), rot(Z, 0.3)]
    for m in cases:
        gates = one_qubit_native(m, 0, basis)
        assert {g.name for g in gates} <= allowed
        assert (
            equal_up_to_phase(gate_list_unitary(gates, 1), m)
            if gates
            else equal_up_to_phase(np.eye(2), m)
        )


@pytest.mark.parametrize("name", ["chain12-demo", "grid3x4-demo", "ion12-demo"])
def test_compiled_circuit_equals_the_original_unitary_up_to_phase_and_permutation(name):
    target = load_target(TARGETS / f"{name}.yaml")
    rng = np.random.default_rng(11)
    n = 3
    circ = Circuit(n)
    for _ in range(40):
        if rng.random() < 0.4:
            a, b = (int(v) for v in rng.choice(n, 2, replace=False))
            circ.append("cx", (a, b))
        else:
            g = str(rng.choice(["h", "s", "sdg", "sx", "x", "rz", "ry", "rx"]))
            circ.append(g, (int(rng.integers(n)),), (float(rng.normal()),) if g[0] == "r" else ())
    comp = compile_for_target(circ, target)
    assert {g.name for g in comp.circuit.gates} <= set(target.native_gates)
    # restrict to the region (3 of 12 physical qubits) and compare unitaries
    index = {p: k for k, p in enumerate(comp.measured_qubits)}
    local = [
        type(g)(g.name, tuple(index[q] for q in g.qubits), g.params) for g in comp.circuit.gates
    ]
    u = gate_list_unitary(local, n)
    want = gate_list_unitary(circ.gates, n)

    # logical j starts at bit index[layout[j]] and ends at index[final_permutation[j]]
    def perm(places):
        p = np.zeros((2**n, 2**n))
        for idx in range(2**n):
            bits = [(idx >> (n - 1 - j)) & 1 for j in range(n)]
            p[sum(bt << (n - 1 - index[places[j]]) for j, bt in enumerate(bits)), idx] = 1
        return p

    assert equal_up_to_phase(perm(comp.final_permutation).T @ u @ perm(comp.layout), want)


def test_peephole_cancels_inverse_pairs_and_merges_rz():
    # rz(a) rz(b) = rz(a + b) and cx cx = I (common practice)
    gates = circuit_from_rotations([0, 0], []).gates
    c = Circuit(2)
    c.append("rz", (0,), (0.2,))
    c.append("rz", (0,), (0.3,))
    c.append("cx", (0, 1))
    c.append("h", (1,))
    c.append("h", (1,))
    c.append("cx", (0, 1))
    out = peephole(gates + c.gates, 2, "sx")
    assert [(g.name, g.qubits) for g in out] == [("rz", (0,))]
    assert abs(out[0].params[0] - 0.5) < 1e-12


# ----------------------------------------------------------------------------- exported jobs


def _problem(n: int = 6, seed: int = 5):
    """A circuit with rotations on far-apart qubits and a random Hamiltonian on n qubits."""
    rng = np.random.default_rng(seed)
    rotations = []
    for _ in range(6):
        support = rng.choice(n, int(rng.integers(2, 5)), replace=False)
        x = np.zeros(n, bool)
        z = np.zeros(n, bool)
        for q in support:
            letter = rng.integers(1, 4)
            x[q] = letter in (1, 2)
            z[q] = letter in (2, 3)
        rotations.append((x, z, float(rng.normal())))
    circ = circuit_from_rotations([1, 1, 1, 0, 0, 0][:n], rotations)
    labels = ["".join(rng.choice(list("IXYZ"), n)) for _ in range(12)] + ["I" * n]
    coeffs = rng.normal(size=len(labels))
    ham = PauliExpansion.from_strings(labels, coeffs).combine_like_terms()
    return circ, ham


def _angle(expr) -> float:
    if isinstance(expr, ast.UnaryExpression):
        return -_angle(expr.expression)
    return float(expr.value)


@functools.cache
def simulate_file(text: str) -> tuple[np.ndarray, list[int], list[tuple[str, tuple]]]:
    """Independent simulation of an exported OpenQASM 3 file (parsed by the reference parser).

    Returns (probabilities over the full register, measured qubits in bit order, 2q gates).
    """
    program = openqasm3.parse(text)
    n = None
    measured: list[int] = []
    two_qubit: list[tuple[str, tuple]] = []
    state = None
    for st in program.statements:
        if isinstance(st, ast.QubitDeclaration):
            n = int(st.size.value)
            state = np.zeros((2,) * n, dtype=complex)
            state[(0,) * n] = 1
        elif isinstance(st, ast.QuantumGate):
            qs = tuple(int(o.indices[0][0].value) for o in st.qubits)
            params = [_angle(a) for a in st.arguments]
            m = one(st.name.name, params) if len(qs) == 1 else two(st.name.name, params)
            if len(qs) == 2:
                two_qubit.append((st.name.name, qs))
                m = m.reshape(2, 2, 2, 2)
                state = np.moveaxis(
                    np.tensordot(m, state, axes=([2, 3], list(qs))), [0, 1], list(qs)
                )
            else:
                state = np.moveaxis(np.tensordot(m, state, axes=([1], [qs[0]])), 0, qs[0])
        elif isinstance(st, ast.QuantumMeasurementStatement):
            assert int(st.target.indices[0][0].value) == len(measured)
            measured.append(int(st.measure.qubit.indices[0][0].value))
    return np.abs(state.reshape(-1)) ** 2, measured, two_qubit


def _logical_distribution(probs, n_phys, measured, positions) -> dict[str, float]:
    out: dict[str, float] = {}
    for idx in np.flatnonzero(probs > 1e-15):
        bits = format(int(idx), f"0{n_phys}b")
        unmeasured = [bits[p] for p in range(n_phys) if p not in measured]
        assert set(unmeasured) <= {"0"} or probs[idx] < 1e-12  # ancillas stay in |0>
        returned = "".join(bits[p] for p in measured)
        logical = "".join(returned[k] for k in positions)
        out[logical] = out.get(logical, 0.0) + float(probs[idx])
    return out


@pytest.fixture(scope="module", params=["chain12-demo", "grid3x4-demo", "ion12-demo"])
def exported(request, tmp_path_factory):
    target = load_target(TARGETS / f"{request.param}.yaml")
    circ, ham = _problem()
    job = build_job(circ, ham, shots_total=20000, job_name="t", target=target, scale_factors=(1, 3))
    folder = tmp_path_factory.mktemp(request.param)
    write_job(job, folder)
    return target, job, folder, circ, ham


def test_every_two_qubit_gate_acts_on_a_coupled_pair(exported):
    target, job, folder, _, _ = exported
    files = sorted(folder.glob("*.qasm"))
    assert len(files) == len(job.records)
    for f in files:
        _, _, pairs = simulate_file(f.read_text())
        for name, (a, b) in pairs:
            assert name == target.entangler
            if target.name == "chain12-demo":
                assert abs(a - b) == 1, (f.name, a, b)  # a line couples k and k +- 1 only
            assert target.coupled(a, b), (f.name, a, b)


def test_routed_files_unpermuted_reproduce_the_ideal_distributions(exported):
    target, job, folder, _, _ = exported
    m = job.to_manifest()
    assert m["target"]["name"] == target.name and len(m["layout"]) == 6
    assert sorted(m["final_permutation"]) == m["measured_qubits"] == sorted(m["layout"])
    for rec in m["circuits"]:
        probs, measured, _ = simulate_file((folder / rec["qasm3_file"]).read_text())
        assert measured == m["measured_qubits"]
        got = _logical_distribution(probs, target.n_qubits, measured, m["logical_bit_positions"])
        want = rec["ideal_distribution"]
        for bits in set(got) | set(want):
            assert abs(got.get(bits, 0.0) - want.get(bits, 0.0)) < 1e-10, (rec["circuit_id"], bits)


def test_reconcile_maps_physical_bitstrings_back_to_logical_qubits(exported):
    # counts proportional to the independent simulation, in physical bit order, must give the
    # energy of the logical state (OpenFermion's sparse operator as the outside reference)
    import openfermion as of

    target, job, folder, circ, ham = exported
    m = job.to_manifest()
    counts = {}
    for rec in m["circuits"]:
        probs, measured, _ = simulate_file((folder / rec["qasm3_file"]).read_text())
        returned: dict[str, int] = {}
        for idx in np.flatnonzero(probs > 1e-15):
            bits = format(int(idx), f"0{target.n_qubits}b")
            key = "".join(bits[p] for p in measured)
            returned[key] = returned.get(key, 0) + int(round(probs[idx] * 1e9))
        counts[rec["circuit_id"]] = returned
    res = reconcile(m, counts, ham, bootstrap=10, seed=1)
    qop = of.QubitOperator()
    for lab, c in zip(ham.labels(), ham.coeffs, strict=True):
        qop += of.QubitOperator(" ".join(f"{p}{k}" for k, p in enumerate(lab) if p != "I"), c)
    from eigensweep.device.qasm import to_qasm3

    # the logical (unrouted) circuit, simulated here; qubit 0 = most significant, as OpenFermion
    program = openqasm3.parse(to_qasm3(circ))
    state = np.zeros((2,) * 6, dtype=complex)
    state[(0,) * 6] = 1
    for st in program.statements:
        if isinstance(st, ast.QuantumGate):
            qs = tuple(int(o.indices[0][0].value) for o in st.qubits)
            params = [_angle(a) for a in st.arguments]
            if len(qs) == 1:
                state = np.moveaxis(
                    np.tensordot(one(st.name.name, params), state, ([1], [qs[0]])), 0, qs[0]
                )
            else:
                mm = two(st.name.name, params).reshape(2, 2, 2, 2)
                state = np.moveaxis(np.tensordot(mm, state, ([2, 3], list(qs))), [0, 1], list(qs))
    psi = state.reshape(-1)
    mat = of.get_sparse_operator(qop, 6).toarray()
    e_ref = float(np.real(np.vdot(psi, mat @ psi)))
    assert abs(res.raw.value - e_ref) < 1e-6


# ----------------------------------------------------------------------------- whole sweep


def test_sweep_with_targets_reports_costs_and_reconciles(tmp_path, capsys, monkeypatch):
    # H2 / STO-3G UCCSD on the generic and the chain target; the routed job reconciles to the
    # same noise-free energy within the bootstrap interval (PySCF FCI as the outside anchor)
    from fixtures import run_plan
    from pyscf import fci, gto, scf

    from eigensweep.collect import collect
    from eigensweep.store import read_stage

    raw = {
        "molecules": [{"name": "h2", "atoms": "H 0 0 0; H 0 0 0.7414"}],
        "methods": {"taper": [False]},
        "export": {
            "select": [{"molecule": "h2"}],
            "targets": ["generic", str(TARGETS / "chain12-demo.yaml")],
            "shots": 40000,
            "scale_factors": [1],
        },
        "device": {"readout_error": [0.0, 0.0], "depolarizing_1q": 0.0, "depolarizing_2q": 0.0},
    }
    import yaml

    from eigensweep.cli import main

    monkeypatch.chdir(tmp_path)
    (tmp_path / "c.yaml").write_text(yaml.safe_dump(raw))
    results = tmp_path / "results"
    cfg, plan = run_plan(raw, results)
    capsys.readouterr()
    assert main(["plan", "--config", "c.yaml"]) == 0
    shown = capsys.readouterr().out
    assert "device cost per exported point and target" in shown
    lines = {ln.split()[2]: ln.split() for ln in shown.splitlines() if ln.startswith("h2 ")}
    assert set(lines) >= {"generic", "chain12-demo"}
    # H2 UCCSD: one double excitation, 8 JW strings of weight 4 -> 48 CNOTs all-to-all
    # (textbook ladder 2(w - 1) each; singles vanish by symmetry)
    assert lines["generic"][3] == "48"
    assert sorted(ex["target"] for ex in plan.exports) == ["chain12-demo", "generic"]
    mol = gto.M(atom="H 0 0 0; H 0 0 0.7414", basis="sto-3g", verbose=0)
    e_fci = fci.FCI(scf.RHF(mol).run()).kernel()[0]
    for ex in plan.exports:
        m = read_stage(results / "export" / f"{ex['key_export']}.h5").meta["manifest"]
        assert m["target"]["name"] == ex["target"] and "fidelity" in m["cost"]
    collect(plan.rows, results, exports=plan.exports, study="t")
    header = (results / "t" / "summary.csv").read_text().splitlines()[0].split(",")
    for metric in ("two_qubit_count", "depth", "duration_us", "fidelity", "shots", "shots_noisy"):
        assert f"target_chain12_demo_{metric}" in header and f"target_generic_{metric}" in header
    import csv

    with open(results / "t" / "device_summary.csv") as fh:
        raw_rows = {r["target"]: r for r in csv.DictReader(fh) if r["estimate"] == "raw"}
    assert set(raw_rows) == {"chain12-demo", "generic"}
    # generic export, noise-free device keys: the sampled energy brackets FCI; the chain's
    # export is answered with the chain12-demo target's own noise (issue 17), far above it
    lo, hi = float(raw_rows["generic"]["ci_low_eh"]), float(raw_rows["generic"]["ci_high_eh"])
    assert lo - 1e-3 < e_fci < hi + 1e-3, (lo, hi, e_fci)
    assert float(raw_rows["chain12-demo"]["ci_low_eh"]) > e_fci + 0.05


def test_cost_estimate_follows_the_documented_closed_form():
    # sx on q0, then cx(0, 1): critical path 35 + 300 ns; q1 waits 35 ns, q0 never waits;
    # idle factor exp(-t/T1 - t (1/T2 - 1/(2 T1))) (amplitude damping plus pure dephasing,
    # Nielsen & Chuang ch. 8, from memory)
    from eigensweep.device.compile import estimate_cost

    t = load_target(TARGETS / "chain12-demo.yaml")
    c = Circuit(12)
    c.append("sx", (0,))
    c.append("cx", (0, 1))
    cost = estimate_cost(c, t)
    assert cost.duration_ns == t.gate_duration_ns("sx") + t.gate_duration_ns("cx")
    gate_f = (1 - t.gate_error("sx")) * (1 - t.gate_error("cx"))
    idle = t.gate_duration_ns("sx") / 1000.0
    t1, t2 = t.t1_us[1], t.t2_us[1]
    idle_f = math.exp(-idle / t1 - idle * max(0.0, 1 / t2 - 1 / (2 * t1)))
    # readout: probability of reading the right bit, averaged over 0 and 1 (assignment
    # fidelity, common practice), for both measured qubits
    read_f = math.prod(1 - (t.readout_p01[q] + t.readout_p10[q]) / 2 for q in (0, 1))
    assert abs(cost.idle_fidelity - idle_f) < 1e-12 and abs(cost.readout_fidelity - read_f) < 1e-12
    assert abs(cost.fidelity - gate_f * idle_f * read_f) < 1e-12
    assert cost.two_qubit_count == 1 and cost.depth == 2
