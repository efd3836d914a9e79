"""Build and write a device job: measurement circuits, calibration circuits and a manifest.

A job holds, for one optimized circuit and one qubit Hamiltonian,

* one measurement circuit per qubit-wise-commuting (QWC) group and per odd noise-scale factor
  (global unitary folding, Giurgica-Tiron et al., IEEE QCE 2020, arXiv:2005.10921, of the
  state preparation, followed by the group's basis change unfolded), and
* two readout-calibration circuits (prepare all zeros / all ones and measure), which give
  every qubit's 2x2 confusion matrix under the uncorrelated (per-qubit) readout-error model.

Shots are split across measurement circuits in proportion to the group weight
``w_g = sum_{i in g} |c_i|`` (equally across scale factors), with a minimum per circuit. With
``N_g`` shots for group ``g`` the variance of the energy estimate obeys the 1-norm bound
``Var(E) <= sum_g w_g^2 / N_g``; with the proportional split this is ``(sum_g w_g)^2 / N``,
so ``N = (||c||_1 / eps)^2`` shots reach a standard error ``eps``.

The manifest (``manifest.json``) and the returned-results format are specified in
``docs/counts-format.md``.
"""

from __future__ import annotations

import hashlib
import json
import math
from collections.abc import Mapping, Sequence
from dataclasses import dataclass, field
from pathlib import Path

import numpy as np

from eigensweep.circuit import Circuit
from eigensweep.device.compile import (
    CompiledCircuit,
    basis_change_on_physical,
    compile_for_target,
    folded_measurement_circuit,
    globally_folded_circuit,
    group_basis,
    measurement_circuit,
    native_gates_of,
)
from eigensweep.device.qasm import to_qasm2, to_qasm3
from eigensweep.errors import StageFileError
from eigensweep.store import atomic_write_text

__all__ = [
    "JOB_FORMAT",
    "JOB_FORMAT_VERSION",
    "BIT_ORDER",
    "DeviceJob",
    "CircuitRecord",
    "build_job",
    "write_job",
    "load_manifest",
    "load_job_circuits",
    "check_job_files",
    "pauli_labels",
    "default_groups",
    "allocate_shots",
    "as_manifest",
    "bit_order_circuit",
    "logical_counts",
    "logical_distributions",
    "atomic_write_text",
]

JOB_FORMAT = "eigensweep-device-job"
#: 2: compiled for a target (target, layout, final_permutation); 3: only the state preparation
#: is folded, the basis change follows (records carry ``basis_change_gates``).
JOB_FORMAT_VERSION = 3
#: Manifest versions this eigensweep reads (reconcile needs counts, terms and bit order only,
#: which version 3 left as they were).
READABLE_JOB_FORMAT_VERSIONS = (2, 3)
#: The folding rule, as the manifest states it.
FOLDING_RULE = (
    "global unitary folding of the state preparation G (G^dagger G)^((s-1)/2), then the "
    "group's basis change (its last basis_change_gates gates, not folded), arXiv:2005.10921"
)
#: The job's human-readable summary, beside the circuits in the job folder.
SUMMARY_FILE = "job-summary.md"
BIT_ORDER = "qubit k = character k of the bitstring"
#: Bit order of a job compiled for a device target (physical register, routed).
PHYSICAL_BIT_ORDER = (
    "character k of the bitstring = physical qubit measured_qubits[k]; logical qubit j = "
    "character logical_bit_positions[j] (the physical qubit final_permutation[j])"
)
DEFAULT_TARGET_SE = 1.6e-3  # hartree ("chemical accuracy")
IDEAL_CUTOFF = 1e-12

COST_WARNING = (
    "**Warning:** time on a real quantum device costs money and queue time. The shot numbers "
    "here come from a worst-case 1-norm bound and ignore readout and gate noise, drift and "
    "mitigation overheads beyond the factors shown: treat them as rough estimates and check "
    "the price with your provider before submitting."
)


# ----------------------------------------------------------------------------- helpers


def sha256_text(text: str) -> str:
    return hashlib.sha256(text.encode("utf-8")).hexdigest()


def pauli_labels(ham) -> list[str]:
    """Labels of a PauliExpansion-like object (``x``, ``z`` bool arrays): char ``k`` = qubit ``k``."""
    x = np.asarray(ham.x, dtype=bool).reshape(-1, int(ham.n_qubits))
    z = np.asarray(ham.z, dtype=bool).reshape(-1, int(ham.n_qubits))
    table = np.array(["I", "X", "Z", "Y"])  # index x + 2 z
    return ["".join(row) for row in table[x.astype(int) + 2 * z.astype(int)]]


def _real_coeffs(ham) -> np.ndarray:
    c = np.asarray(ham.coeffs)
    if np.iscomplexobj(c):
        if np.max(np.abs(c.imag), initial=0.0) > 1e-10:
            raise ValueError("Hamiltonian coefficients must be real (Hermitian Pauli sum)")
        c = c.real
    return c.astype(float).reshape(-1)


def _greedy_qwc(labels: Sequence[str], coeffs: np.ndarray, terms: Sequence[int]) -> list:
    """Greedy QWC grouping by decreasing |c| (used only if the grouping module is absent)."""
    groups: list[tuple[list[str], list[int]]] = []
    for i in sorted(terms, key=lambda t: (-abs(coeffs[t]), t)):
        lab = labels[i]
        for basis, members in groups:
            if all(b == "I" or ch == "I" or b == ch for b, ch in zip(basis, lab, strict=True)):
                for k, ch in enumerate(lab):
                    if ch != "I":
                        basis[k] = ch
                members.append(i)
                break
        else:
            groups.append((list(lab), [i]))
    return [np.array(sorted(members), dtype=int) for _, members in groups]


def default_groups(ham) -> list[np.ndarray]:
    """QWC groups of the non-identity terms from :func:`eigensweep.qubit.grouping.qwc_groups`.

    Falls back to a greedy largest-coefficient-first grouping while that module is not
    installed.
    """
    try:
        from eigensweep.qubit.grouping import qwc_groups
    except ImportError:
        labels = pauli_labels(ham)
        terms = [i for i, lab in enumerate(labels) if set(lab) != {"I"}]
        return _greedy_qwc(labels, _real_coeffs(ham), terms)
    return [np.asarray(g, dtype=int).reshape(-1) for g in qwc_groups(ham)]


def allocate_shots(total: int, weights: Sequence[float], minimum: int) -> list[int]:
    """Integer shots proportional to ``weights`` with at least ``minimum`` each.

    Circuits whose proportional share falls below the minimum are raised to it and the rest
    is re-split among the others; largest-remainder rounding keeps the sum equal to ``total``
    (unless ``total < minimum * len(weights)``, when every circuit gets ``minimum``).
    """
    w = np.maximum(np.asarray(weights, dtype=float), 0.0)
    n = w.size
    if n == 0:
        return []
    if total <= minimum * n:
        return [int(minimum)] * n
    fixed = np.zeros(n, dtype=bool)
    while True:
        free = total - minimum * fixed.sum()
        wsum = w[~fixed].sum()
        share = np.where(fixed, float(minimum), 0.0)
        if wsum <= 0:
            share[~fixed] = free / max(1, (~fixed).sum())
        else:
            share[~fixed] = free * w[~fixed] / wsum
        low = (~fixed) & (share < minimum)
        if not low.any():
            break
        fixed |= low
    base = np.floor(share).astype(int)
    rest = int(total - base.sum())
    order = np.argsort(-(share - base), kind="stable")
    base[order[:rest]] += 1
    return [int(b) for b in base]


def _extrapolation_variance_factors(scales: Sequence[int]) -> tuple[float, float]:
    """Variance inflation of the zero-noise estimate when N shots are split equally.

    Returns (Richardson, linear least squares) factors relative to spending all N shots on
    scale 1: ``m * sum_j gamma_j^2`` with ``gamma_j = prod_{k != j} l_k / (l_k - l_j)``, and
    ``m * [(A^T A)^{-1}]_{00}`` for the straight-line fit.
    """
    lam = np.asarray(scales, dtype=float)
    m = lam.size
    if m < 2:
        return 1.0, 1.0
    gam = np.array(
        [np.prod([lam[k] / (lam[k] - lam[j]) for k in range(m) if k != j]) for j in range(m)]
    )
    a = np.stack([np.ones(m), lam], axis=1)
    lin = float(np.linalg.inv(a.T @ a)[0, 0])
    return float(m * np.sum(gam**2)), float(m * lin)


# ----------------------------------------------------------------------------- job


@dataclass
class CircuitRecord:
    """One circuit of a job, as listed in ``manifest.json`` (field names are the JSON keys)."""

    circuit_id: str
    kind: str  # "measure" | "calibration"
    group: int | None
    scale_factor: int
    n_qubits: int
    basis: str
    pauli_terms: list[dict]
    shots: int
    sha256: str
    qasm3_file: str
    qasm2_file: str
    ideal_distribution: dict[str, float]
    cnot_count: int
    depth: int
    n_gates: int
    prepared: str | None = None
    bit_order: str = BIT_ORDER
    qasm2_sha256: str = ""
    two_qubit_count: int = 0
    basis_change_gates: int | None = None

    def to_dict(self) -> dict:
        return {
            "circuit_id": self.circuit_id,
            "kind": self.kind,
            "group": self.group,
            "scale_factor": self.scale_factor,
            "n_qubits": self.n_qubits,
            "bit_order": self.bit_order,
            "basis": self.basis,
            "prepared": self.prepared,
            "pauli_terms": self.pauli_terms,
            "shots": self.shots,
            "sha256": self.sha256,
            "qasm3_file": self.qasm3_file,
            "qasm2_file": self.qasm2_file,
            "qasm2_sha256": self.qasm2_sha256,
            "cnot_count": self.cnot_count,
            "two_qubit_count": self.two_qubit_count,
            "depth": self.depth,
            "n_gates": self.n_gates,
            "basis_change_gates": self.basis_change_gates,
            "ideal_distribution": self.ideal_distribution,
        }


@dataclass
class DeviceJob:
    """A complete device job: circuits, their OpenQASM texts, manifest fields and summary."""

    job_name: str
    job_id: str
    n_qubits: int
    identity: float
    terms: list[dict]
    groups: list[dict]
    scale_factors: tuple[int, ...]
    shots_total_requested: int
    target_standard_error: float
    shots_needed: dict[str, int]
    meta: dict
    records: list[CircuitRecord]
    state_preparation: dict[str, int]
    circuits: dict[str, Circuit] = field(repr=False)
    qasm3: dict[str, str] = field(repr=False)
    qasm2: dict[str, str] = field(repr=False)
    compiled: CompiledCircuit | None = field(default=None, repr=False)
    target: dict = field(default_factory=dict, repr=False)
    cost: dict = field(default_factory=dict, repr=False)
    summary: str = field(default="", repr=False)

    @property
    def shots_total(self) -> int:
        return int(sum(r.shots for r in self.records))

    def to_manifest(self) -> dict:
        """The ``manifest.json`` content (a plain JSON-serialisable dict)."""
        comp = self.compiled
        ident = list(range(self.n_qubits))
        layout = comp.layout if comp else ident
        final = comp.final_permutation if comp else ident
        measured = comp.measured_qubits if comp else ident
        routed = measured != ident or final != ident
        return {
            "format": JOB_FORMAT,
            "format_version": JOB_FORMAT_VERSION,
            "job_id": self.job_id,
            "job_name": self.job_name,
            "n_qubits": self.n_qubits,
            "bit_order": PHYSICAL_BIT_ORDER if routed else BIT_ORDER,
            "measurement": "c[k] = measure q[measured_qubits[k]] for every bit k",
            "target": self.target,
            "n_physical_qubits": int(self.target.get("n_qubits", self.n_qubits)),
            "layout": list(layout),
            "final_permutation": list(final),
            "measured_qubits": list(measured),
            "logical_bit_positions": [measured.index(p) for p in final],
            "routing_swaps": comp.swaps if comp else 0,
            "cost": self.cost,
            "hamiltonian": {
                "identity": self.identity,
                "terms": self.terms,
                "one_norm": float(sum(abs(t["coeff"]) for t in self.terms)),
            },
            "groups": self.groups,
            "scale_factors": list(self.scale_factors),
            "folding": FOLDING_RULE,
            "shots_total_requested": self.shots_total_requested,
            "shots_total": self.shots_total,
            "target_standard_error": self.target_standard_error,
            "shots_needed": self.shots_needed,
            "meta": self.meta,
            "state_preparation": dict(self.state_preparation),
            "circuits": [r.to_dict() for r in self.records],
            "files": self.file_hashes(),
        }

    def file_texts(self) -> dict[str, str]:
        """Every file of the job folder except ``manifest.json``: name -> text."""
        out = {}
        for r in self.records:
            out[r.qasm3_file] = self.qasm3[r.circuit_id]
            out[r.qasm2_file] = self.qasm2[r.circuit_id]
        out[SUMMARY_FILE] = self.summary
        return out

    def file_hashes(self) -> dict[str, str]:
        """SHA-256 of every file :func:`write_job` writes besides the manifest itself."""
        return {name: sha256_text(text) for name, text in sorted(self.file_texts().items())}


def _id_width(n: int) -> int:
    return max(2, len(str(max(n - 1, 0))))


def build_job(
    circuit: Circuit,
    ham,
    *,
    shots_total: int,
    scale_factors: Sequence[int] = (1, 3, 5),
    calibration: bool = True,
    job_name: str,
    meta: Mapping | None = None,
    groups: Sequence[Sequence[int]] | None = None,
    min_shots: int = 100,
    calibration_fraction: float = 0.1,
    target_se: float = DEFAULT_TARGET_SE,
    target=None,
) -> DeviceJob:
    """Build the measurement and calibration circuits for ``circuit`` and Hamiltonian ``ham``.

    ``ham`` is a PauliExpansion (``x``, ``z``, ``coeffs``, ``n_qubits``); ``groups`` (term indices,
    identity excluded) default to :func:`default_groups`. A fraction ``calibration_fraction``
    of ``shots_total`` goes to the two calibration circuits; the rest is split over groups in
    proportion to ``sum |c|`` and equally over ``scale_factors`` (odd, positive, distinct).

    ``target`` (an :class:`eigensweep.target.Target`; ``None`` = the generic all-to-all one)
    compiles the state circuit once (:func:`~eigensweep.device.compile.compile_for_target`:
    routing, natives, peephole); the state preparation is folded (folding adds no swaps:
    ``G^dagger`` undoes them, so one final permutation holds for every circuit) and each
    group's basis change follows on the final physical positions
    (:func:`~eigensweep.device.compile.folded_measurement_circuit`), so all circuits of one
    job share the folded state preparation as a prefix. The OpenQASM files act on the
    physical register; :attr:`DeviceJob.circuits` hold the same circuits relabelled to bit
    order (qubit ``k`` = physical ``measured_qubits[k]``), which is what a device returns.
    Ideal distributions are over logical bitstrings (character ``j`` = logical qubit ``j``).
    """
    n = int(circuit.n_qubits)
    scales, meta = _checked_job_inputs(
        n, ham, shots_total, min_shots, calibration_fraction, scale_factors, meta
    )
    labels, coeffs = pauli_labels(ham), _real_coeffs(ham)
    identity, terms = _identity_and_terms(labels, coeffs)
    group_idx = _checked_groups(ham, groups, terms)
    group_info = _group_info(group_idx, labels, coeffs, n)
    cal_shots, meas_shots = _split_shots(
        shots_total, calibration, calibration_fraction, min_shots, group_info, scales
    )
    from eigensweep.target import generic_target

    target = generic_target(n) if target is None else target
    compiled = compile_for_target(circuit, target)
    out = _JobCircuits(n, job_name, target, compiled)
    _add_measurement_circuits(out, circuit, group_info, labels, coeffs, scales, meas_shots)
    if calibration:
        _add_calibration_circuits(out, cal_shots)
    records = out.records
    job_id = hashlib.sha256("\n".join(sorted(r.sha256 for r in records)).encode()).hexdigest()
    one_norm, shots_needed, f_lin, f_rich = _shots_needed(terms, target_se, scales)
    cost = _job_cost(circuit, ham, group_idx, group_info, compiled, target, target_se)
    job = DeviceJob(
        job_name=str(job_name),
        job_id=job_id,
        n_qubits=n,
        identity=identity,
        terms=terms,
        groups=group_info,
        scale_factors=scales,
        shots_total_requested=int(shots_total),
        target_standard_error=float(target_se),
        shots_needed=shots_needed,
        meta=meta,
        records=records,
        state_preparation={
            "cnot_count": circuit.cnot_count,
            "depth": circuit.depth,
            "n_gates": len(circuit.gates),
        },
        circuits=out.circuits,
        qasm3=out.qasm3,
        qasm2=out.qasm2,
        compiled=compiled,
        target=target.to_dict(),
        cost=cost,
    )
    job.summary = _summary(job, one_norm, f_lin, f_rich)
    return job


def _checked_job_inputs(
    n: int, ham, shots_total, min_shots, calibration_fraction, scale_factors, meta
) -> tuple[tuple[int, ...], dict]:
    """The scale factors as a tuple and ``meta`` as a dict, after the checks of :func:`build_job`."""
    if int(ham.n_qubits) != n:
        raise ValueError(f"Hamiltonian acts on {ham.n_qubits} qubits, circuit on {n}")
    if shots_total < 1 or min_shots < 1:
        raise ValueError("shots_total and min_shots must be positive")
    if not 0 <= calibration_fraction < 1:
        raise ValueError("calibration_fraction must lie in [0, 1)")
    scales = tuple(int(s) for s in scale_factors)
    if not scales or len(set(scales)) != len(scales):
        raise ValueError(f"scale_factors must be distinct odd positive integers, got {scales}")
    for s in scales:
        globally_folded_circuit(Circuit(n), s)  # validates oddness / positivity
    meta = dict(meta or {})
    try:
        json.dumps(meta, allow_nan=False)
    except (TypeError, ValueError) as err:
        raise ValueError(f"meta must be JSON-serialisable: {err}") from None
    return scales, meta


def _identity_and_terms(labels: Sequence[str], coeffs: np.ndarray) -> tuple[float, list[dict]]:
    """The identity coefficient and the manifest's other terms (``index``, ``label``, ``coeff``)."""
    identity_idx = {i for i, lab in enumerate(labels) if set(lab) == {"I"}}
    identity = float(sum(coeffs[i] for i in identity_idx))
    terms = [
        {"index": i, "label": labels[i], "coeff": float(coeffs[i])}
        for i in range(len(labels))
        if i not in identity_idx
    ]
    return identity, terms


def _checked_groups(ham, groups, terms: list[dict]) -> list[np.ndarray]:
    """Non-empty groups (default :func:`default_groups`) covering every term exactly once."""
    group_idx = [np.asarray(g, dtype=int).reshape(-1) for g in (groups or default_groups(ham))]
    group_idx = [g for g in group_idx if g.size]
    seen = np.concatenate(group_idx) if group_idx else np.array([], dtype=int)
    if sorted(seen.tolist()) != sorted(t["index"] for t in terms):
        raise ValueError("groups must contain every non-identity term index exactly once")
    return group_idx


def _group_info(group_idx, labels, coeffs: np.ndarray, n: int) -> list[dict]:
    """The manifest's ``groups``: index, measured basis (raises if not QWC), terms, weight."""
    info = []
    for g, idx in enumerate(group_idx):
        basis = group_basis([labels[i] for i in idx], n)
        weight = float(np.sum(np.abs(coeffs[idx])))
        info.append({"group": g, "basis": basis, "terms": [int(i) for i in idx], "weight": weight})
    return info


def _split_shots(
    shots_total, calibration, calibration_fraction, min_shots, group_info, scales
) -> tuple[list[int], list[int]]:
    """Calibration shots (two circuits) and measurement shots (group-major, then scale)."""
    n_cal = 2 if calibration else 0
    cal_budget = int(round(calibration_fraction * shots_total)) if calibration else 0
    cal_shots = allocate_shots(cal_budget, [1.0] * n_cal, min_shots) if n_cal else []
    weights = [gi["weight"] for gi in group_info for _ in scales]
    meas_shots = allocate_shots(max(shots_total - sum(cal_shots), 0), weights, min_shots)
    return cal_shots, meas_shots


class _JobCircuits:
    """The circuits of a job being built: records, bit-order circuits and OpenQASM texts."""

    def __init__(self, n: int, job_name: str, target, compiled: CompiledCircuit) -> None:
        self.n, self.job_name, self.target, self.compiled = n, job_name, target, compiled
        self.measured = compiled.measured_qubits
        ident = list(range(n))
        routed = self.measured != ident or compiled.final_permutation != ident
        self.bit_order = PHYSICAL_BIT_ORDER if routed else BIT_ORDER
        self.records: list[CircuitRecord] = []
        self.circuits: dict[str, Circuit] = {}
        self.qasm3: dict[str, str] = {}
        self.qasm2: dict[str, str] = {}

    def add(self, circ: Circuit, **fields) -> None:
        """Export ``circ`` (physical register) and record it with the given record fields."""
        cid = fields["circuit_id"]
        label = f"eigensweep circuit {cid} of job {self.job_name} for target {self.target.name}"
        text3 = to_qasm3(circ, name=label, measured=self.measured)
        text2 = to_qasm2(circ, name=label, measured=self.measured)
        self.circuits[cid] = bit_order_circuit(circ, self.measured)
        self.qasm3[cid], self.qasm2[cid] = text3, text2
        self.records.append(
            CircuitRecord(
                n_qubits=self.n,
                sha256=sha256_text(text3),
                qasm3_file=f"{cid}.qasm",
                qasm2_file=f"{cid}.qasm2",
                qasm2_sha256=sha256_text(text2),
                cnot_count=circ.cnot_count,
                two_qubit_count=circ.two_qubit_count,
                depth=circ.depth,
                n_gates=len(circ.gates),
                bit_order=self.bit_order,
                **fields,
            )
        )


def _ideal_distribution(state: np.ndarray, n: int, basis: str) -> dict[str, float]:
    """Noise-free outcome probabilities of the prepared ``state`` measured in ``basis``
    (logical bits); only the basis change is simulated, the state is prepared once per job."""
    from eigensweep.qubit.statevector import probabilities_to_distribution, simulate

    probs = np.abs(simulate(measurement_circuit(Circuit(n), basis), initial=state)) ** 2
    return probabilities_to_distribution(probs / probs.sum(), n, IDEAL_CUTOFF)


def _add_measurement_circuits(
    out: _JobCircuits, circuit, group_info, labels, coeffs, scales, meas_shots
) -> None:
    """One circuit per group and scale factor: the folded state preparation, then the basis
    change (:func:`~eigensweep.device.compile.folded_measurement_circuit`)."""
    from eigensweep.qubit.statevector import simulate

    w = _id_width(len(group_info))
    shots = iter(meas_shots)
    state = simulate(circuit)
    for gi in group_info:
        change = basis_change_on_physical(out.compiled, gi["basis"], out.target)
        ideal = _ideal_distribution(state, circuit.n_qubits, gi["basis"])
        pterms = [
            {"index": int(i), "label": labels[i], "coeff": float(coeffs[i])} for i in gi["terms"]
        ]
        for s in scales:
            out.add(
                folded_measurement_circuit(out.compiled.circuit, change, s),
                circuit_id=f"g{gi['group']:0{w}d}-fold{s}",
                kind="measure",
                group=gi["group"],
                scale_factor=s,
                basis=gi["basis"],
                pauli_terms=pterms,
                shots=int(next(shots)),
                ideal_distribution=ideal,
                basis_change_gates=len(change.gates),
            )


def _add_calibration_circuits(out: _JobCircuits, cal_shots: Sequence[int]) -> None:
    """``cal-0`` (measure all zeros) and ``cal-1`` (``x`` on every measured qubit, native)."""
    n = out.n
    for bit, shots in zip("01", cal_shots, strict=True):
        circ = Circuit(out.compiled.circuit.n_qubits)
        if bit == "1":
            for q in out.measured:
                circ.append("x", (q,))
        out.add(
            native_gates_of(circ, out.target),
            circuit_id=f"cal-{bit}",
            kind="calibration",
            group=None,
            scale_factor=1,
            basis="Z" * n,
            pauli_terms=[],
            shots=int(shots),
            ideal_distribution={bit * n: 1.0},
            prepared=bit * n,
        )


def _shots_needed(
    terms: list[dict], target_se: float, scales: tuple[int, ...]
) -> tuple[float, dict[str, int], float, float]:
    """1-norm, shots the 1-norm bound needs per estimate, and the extrapolation factors."""
    one_norm = float(sum(abs(t["coeff"]) for t in terms))
    base_needed = math.ceil((one_norm / target_se) ** 2) if one_norm > 0 else 0
    f_rich, f_lin = _extrapolation_variance_factors(scales)
    shots_needed = {
        "scale_1_only": int(base_needed),
        "zne_linear": int(math.ceil(base_needed * f_lin)),
    }
    if len(scales) > 2:  # through two points Richardson is the straight line: one label
        shots_needed["zne_richardson"] = int(math.ceil(base_needed * f_rich))
    return one_norm, shots_needed, f_lin, f_rich


COST_MODEL = (
    "estimate, not a guarantee: ASAP schedule of the native state preparation, duration = "
    "critical path of gate durations, fidelity = prod(1 - gate error) x prod over used qubits "
    "exp(-t_idle/T1 - t_idle/T_phi) x prod over measured qubits (1 - (p01 + p10)/2); shots "
    "from the group variances at the ideal state, "
    "noisy shots divided by fidelity^2"
)


def _job_cost(circuit, ham, group_idx, group_info, compiled, target, target_se) -> dict:
    """Cost before spending: native counts, duration, fidelity and shots (all estimates).

    Shots for ``target_se``: the group variances ``Var_g`` at the circuit's ideal state
    (:func:`eigensweep.qubit.grouping.shots_for_precision`, optimal allocation ``N = (sum_g
    sigma_g)^2 / eps^2``), also written per group as ``groups[].std_ideal``; a noisy device
    shrinks the signal by about the fidelity ``F``, so rescaling it back multiplies the
    shots by ``1 / F^2`` (``shots_for_target_noisy``; a rule of thumb).
    """
    from eigensweep.device.compile import estimate_cost
    from eigensweep.qubit.grouping import shots_for_precision
    from eigensweep.qubit.statevector import simulate

    est = estimate_cost(compiled.circuit, target, compiled.measured_qubits)
    shots = None
    try:
        res = shots_for_precision(ham, target_se, state=simulate(circuit), groups=group_idx)
    except TypeError:  # not a PauliExpansion: no variance estimate
        res = None
    if res is not None and res["group_std"] is not None:
        for gi, std in zip(group_info, res["group_std"], strict=True):
            gi["std_ideal"] = float(std)
        shots = int(res["shots_variance"])
    fid = est.fidelity
    return {
        "target": target.name,
        **est.to_dict(),
        "swaps": int(compiled.swaps),
        "target_standard_error": float(target_se),
        "shots_for_target": shots,
        "shots_for_target_noisy": (
            int(math.ceil(shots / fid**2)) if shots is not None and fid > 1e-12 else None
        ),
        "model": COST_MODEL,
    }


def bit_order_circuit(circuit: Circuit, measured: Sequence[int]) -> Circuit:
    """``circuit`` on the physical register relabelled so that qubit ``k`` is ``measured[k]``.

    This is the circuit whose statevector (qubit 0 = most significant bit) gives returned
    bitstrings directly. Raises ``ValueError`` if a gate acts on an unmeasured qubit.
    """
    from eigensweep.circuit import Gate

    index = {int(p): k for k, p in enumerate(measured)}
    out = Circuit(len(index))
    for g in circuit.gates:
        try:
            qs = tuple(index[q] for q in g.qubits)
        except KeyError:
            raise ValueError(f"gate {g.name} acts on unmeasured qubits {g.qubits}") from None
        out.gates.append(Gate(g.name, qs, g.params))
    return out


def _problem_lines(problem: Mapping | None) -> list[str]:
    """Summary lines naming the molecule problem and methods a job belongs to (when given)."""
    if not problem:
        return []
    methods = ", ".join(
        f"{k} {json.dumps(problem[k], sort_keys=True)}"
        for k in ("ansatz", "optimizer", "estimator")
        if problem.get(k) is not None
    )
    return [
        f"- geometry ({problem.get('unit')}): `{problem.get('atoms')}`",
        f"- basis {problem.get('basis')}, charge {problem.get('charge')}, multiplicity "
        f"{problem.get('multiplicity')}, frozen core {problem.get('frozen_core')}, active space "
        f"{json.dumps(problem.get('active'))}",
        f"- methods: {methods}",
    ]


def _summary(job: DeviceJob, one_norm: float, f_lin: float, f_rich: float) -> str:
    meas = [r for r in job.records if r.kind == "measure"]
    s1 = [r for r in meas if r.scale_factor == min(job.scale_factors)]
    var_bound = 0.0
    for gi in job.groups:
        n_g = sum(r.shots for r in s1 if r.group == gi["group"])
        var_bound += gi["weight"] ** 2 / max(n_g, 1)
    se_bound = math.sqrt(var_bound)
    lines = [
        f"# Device job `{job.job_name}`",
        "",
        f"- job id: `{job.job_id}`",
        *_problem_lines(job.meta.get("problem")),
        f"- qubits: {job.n_qubits}; bit order: {BIT_ORDER} (qubit 0 first)",
        f"- circuits: {len(job.records)} ({len(meas)} measurement, "
        f"{len(job.records) - len(meas)} readout calibration)",
        f"- Pauli terms: {len(job.terms)} in {len(job.groups)} qubit-wise-commuting groups; "
        f"identity offset {job.identity:.10g} Ha; 1-norm of the other coefficients "
        f"{one_norm:.6g} Ha",
        f"- state preparation (the optimized circuit, before basis change and folding): "
        f"{job.state_preparation['cnot_count']} CNOTs, depth {job.state_preparation['depth']}, "
        f"{job.state_preparation['n_gates']} gates",
        *_cost_lines(job),
        f"- noise-scale factors (global folding): {', '.join(map(str, job.scale_factors))}",
        f"- total shots: {job.shots_total} (requested {job.shots_total_requested})",
        "",
        "## Circuits",
        "",
        "| circuit | kind | group | basis | scale | terms | two-qubit gates | depth | gates | shots |",
        "|---|---|---|---|---|---|---|---|---|---|",
    ]
    for r in job.records:
        grp = "" if r.group is None else str(r.group)
        lines.append(
            f"| {r.circuit_id} | {r.kind} | {grp} | {r.basis} | {r.scale_factor} | "
            f"{len(r.pauli_terms)} | {r.two_qubit_count} | {r.depth} | {r.n_gates} | {r.shots} |"
        )
    eps = job.target_standard_error
    lines += [
        "",
        "## Shot estimates (1-norm bound)",
        "",
        f"- standard-error bound of the scale-1 energy with these shots: {se_bound * 1e3:.3g} mHa",
        f"- shots needed for a standard error of {eps * 1e3:.3g} mHa from the bound "
        f"N = (||c||_1 / eps)^2: {job.shots_needed['scale_1_only']} at scale 1 only",
        _zne_shots_line(job, f_lin, f_rich),
        "",
        COST_WARNING,
        "",
    ]
    return "\n".join(lines)


def _cost_lines(job: DeviceJob) -> list[str]:
    """Job-summary lines of the target and the cost estimate (:func:`_job_cost`)."""
    c = job.cost
    if not c:
        return []
    comp = job.compiled
    shots = c["shots_for_target"]
    noisy = c["shots_for_target_noisy"]
    eps = c["target_standard_error"] * 1e3
    return [
        f"- target: `{c['target']}` ({job.target.get('source', '')}; {job.target.get('date', '')})",
        f"- layout (logical -> physical): {comp.layout if comp else []}; final permutation: "
        f"{comp.final_permutation if comp else []}; routing swaps: {c['swaps']}",
        f"- **estimated** cost of the state preparation on this target (native gates): "
        f"{c['two_qubit_count']} two-qubit gates, depth {c['depth']}, duration "
        f"{c['duration_ns'] / 1000.0:.4g} us, circuit fidelity {c['fidelity']:.3g} (gates "
        f"{c['gate_fidelity']:.3g} x idle decay {c['idle_fidelity']:.3g} x readout "
        f"{c['readout_fidelity']:.3g})",
        f"- shots for a {eps:.3g} mHa standard error from the group variances at the ideal "
        f"state: {shots if shots is not None else 'n/a'}; with the signal shrunk by the "
        f"estimated fidelity (x 1/F^2): {noisy if noisy is not None else 'n/a'}",
        "- these are estimates from a simple model (no crosstalk, leakage, coherent errors or "
        "drift), not guarantees: a real device can be much worse",
    ]


def _zne_shots_line(job: DeviceJob, f_lin: float, f_rich: float) -> str:
    m = len(job.scale_factors)
    head = f"- with zero-noise extrapolation over {m} scales (shots split equally): "
    if m < 2:
        return head + "not possible (one scale factor)"
    if "zne_richardson" not in job.shots_needed:
        return head + (
            f"linear fit x{f_lin:.3g} -> {job.shots_needed['zne_linear']} (with two scales "
            "the Richardson polynomial is this straight line)"
        )
    return head + (
        f"linear fit x{f_lin:.3g} -> {job.shots_needed['zne_linear']}, "
        f"Richardson x{f_rich:.3g} -> {job.shots_needed['zne_richardson']}"
    )


def write_job(job: DeviceJob, folder: str | Path) -> Path:
    """Write ``<id>.qasm``, ``<id>.qasm2``, ``job-summary.md`` and ``manifest.json`` atomically.

    The manifest is written last, so a folder with a manifest always has all its circuits;
    its ``files`` entry holds the SHA-256 of every other file (:meth:`DeviceJob.file_hashes`).
    Returns the manifest path.
    """
    folder = Path(folder)
    folder.mkdir(parents=True, exist_ok=True)
    for name, text in job.file_texts().items():
        atomic_write_text(folder / name, text)
    text = json.dumps(job.to_manifest(), indent=1, allow_nan=False) + "\n"
    return atomic_write_text(folder / "manifest.json", text)


def as_manifest(job) -> dict:
    """The manifest dict of a :class:`DeviceJob`, a manifest dict, or a job folder / file."""
    if isinstance(job, DeviceJob):
        return job.to_manifest()
    if isinstance(job, Mapping):
        return dict(job)
    return load_manifest(job)


_MANIFEST_KEYS = (
    "job_id",
    "n_qubits",
    "bit_order",
    "hamiltonian",
    "circuits",
    "scale_factors",
    "target",
    "layout",
    "final_permutation",
    "measured_qubits",
    "logical_bit_positions",
)
_RECORD_KEYS = ("circuit_id", "kind", "scale_factor", "pauli_terms", "shots", "sha256")


def load_manifest(path: str | Path) -> dict:
    """Read and check ``manifest.json`` (a job folder or the file itself)."""
    path = Path(path)
    if path.is_dir():
        path = path / "manifest.json"
    hint = "re-export the device job with write_job"
    try:
        data = json.loads(path.read_text(encoding="utf-8"))
    except FileNotFoundError:
        raise StageFileError(f"{path}: manifest not found; {hint}") from None
    except (OSError, UnicodeDecodeError, json.JSONDecodeError) as err:
        msg = " ".join(str(err).split())
        raise StageFileError(f"{path}: manifest is not readable JSON ({msg}); {hint}") from None
    if not isinstance(data, dict) or data.get("format") != JOB_FORMAT:
        raise StageFileError(f"{path}: not an {JOB_FORMAT} manifest; {hint}")
    if data.get("format_version") not in READABLE_JOB_FORMAT_VERSIONS:
        readable = " and ".join(map(str, READABLE_JOB_FORMAT_VERSIONS))
        raise StageFileError(
            f"{path}: manifest format_version {data.get('format_version')!r} is not supported "
            f"(this eigensweep reads {readable}); {hint}"
        )
    missing = [k for k in _MANIFEST_KEYS if k not in data]
    if missing or not isinstance(data["circuits"], list):
        raise StageFileError(f"{path}: manifest lacks {missing or ['circuits']}; {hint}")
    for rec in data["circuits"]:
        if not isinstance(rec, dict) or any(k not in rec for k in _RECORD_KEYS):
            raise StageFileError(f"{path}: a circuit record lacks required fields; {hint}")
    return data


def check_job_files(folder: str | Path, manifest: Mapping | None = None) -> list[str]:
    """Check every file the manifest's ``files`` entry lists against its SHA-256.

    Returns:
        The checked file names (none for a manifest written before ``files`` existed).

    Raises:
        StageFileError: a listed file is missing, is not a regular file, or was changed.
    """
    folder = Path(folder)
    folder = folder if folder.is_dir() else folder.parent
    manifest = load_manifest(folder) if manifest is None else manifest
    files = manifest.get("files") or {}
    for name, digest in files.items():
        f = folder / name
        if Path(name).name != name or not f.is_file() or f.is_symlink():
            raise StageFileError(f"{f}: job file missing; re-export the device job")
        if hashlib.sha256(f.read_bytes()).hexdigest() != digest:
            raise StageFileError(
                f"{f}: SHA-256 differs from manifest.json (file edited?); re-export the job"
            )
    return sorted(files)


def load_job_circuits(folder: str | Path) -> tuple[dict, list[tuple[dict, Circuit]]]:
    """Manifest and parsed OpenQASM 3 circuits of a job folder, checking every file's SHA-256.

    Circuits come in bit order (:func:`bit_order_circuit`: qubit ``k`` = physical qubit
    ``measured_qubits[k]``), on as many qubits as a returned bitstring has characters.
    """
    from eigensweep.device.qasm import QasmReadError, read_qasm3_measured

    folder = Path(folder)
    manifest = load_manifest(folder)
    folder = folder if folder.is_dir() else folder.parent
    check_job_files(folder, manifest)
    items = []
    for rec in manifest["circuits"]:
        f = folder / rec.get("qasm3_file", f"{rec['circuit_id']}.qasm")
        try:
            text = f.read_text(encoding="utf-8")
        except OSError:
            raise StageFileError(f"{f}: circuit file missing; re-export the device job") from None
        if sha256_text(text) != rec["sha256"]:
            raise StageFileError(
                f"{f}: SHA-256 differs from manifest.json (file edited?); re-export the job"
            )
        try:
            circ, measured = read_qasm3_measured(text)
            want = manifest.get("measured_qubits", list(range(int(manifest["n_qubits"]))))
            if measured != list(want):
                raise QasmReadError(f"measures qubits {measured}, manifest says {want}")
            items.append((rec, bit_order_circuit(circ, measured)))
        except (QasmReadError, ValueError) as err:
            raise StageFileError(f"{f}: cannot read circuit ({err}); re-export the job") from None
    return manifest, items


def logical_counts(counts: Mapping[str, int], manifest: Mapping) -> dict[str, int]:
    """Returned counts (physical bit order) as counts over logical bitstrings.

    Character ``j`` of the result is logical qubit ``j``, read from character
    ``logical_bit_positions[j]`` of the returned bitstring (the physical qubit
    ``final_permutation[j]``). The identity for jobs of the generic target.
    """
    pos = manifest.get("logical_bit_positions")
    if not pos or list(pos) == list(range(len(pos))):
        return dict(counts)
    out: dict[str, int] = {}
    for bits, c in counts.items():
        key = "".join(bits[p] for p in pos)
        out[key] = out.get(key, 0) + int(c)
    return out


def logical_distributions(probs: np.ndarray, positions: Sequence[int]) -> np.ndarray:
    """Outcome distributions (last axis ``2**n``, physical bit order) over logical bitstrings.

    The array form of :func:`logical_counts`: logical qubit ``j`` is bit ``positions[j]``
    (``logical_bit_positions``) of the physical outcome; qubit 0 is the most significant bit.
    """
    p = np.asarray(probs, dtype=float)
    n = len(positions)
    if list(positions) == list(range(n)):
        return p
    lead = p.shape[:-1]
    cube = p.reshape(*lead, *(2,) * n)
    axes = list(range(len(lead))) + [len(lead) + int(k) for k in positions]
    return np.ascontiguousarray(np.transpose(cube, axes)).reshape(*lead, 1 << n)
