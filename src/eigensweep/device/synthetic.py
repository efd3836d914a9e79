"""A synthetic noisy device: runs an exported job and returns counts in our results format.

Noise model (all seeded, reproducible):

* **gate noise** -- after every one-qubit gate, with probability ``depolarizing_1q`` a uniformly
  random non-identity Pauli (X, Y or Z) hits its qubit; after every ``cx``, with probability
  ``depolarizing_2q`` one of the 15 non-identity two-qubit Paulis hits its two qubits. Averaged
  over trajectories this is the depolarizing channel ``(1-p) rho + p/(4^k-1) sum_P P rho P``.
  It is simulated with stochastic Pauli trajectories (quantum-trajectory / Monte-Carlo
  wavefunction sampling) instead of density matrices: a batch of statevectors is propagated
  together, each with its own random Pauli insertions, and each trajectory contributes an
  equal share of the shots. Folded circuits have more gates, so the noise grows with the
  folding scale factor as zero-noise extrapolation assumes.
* **readout noise** -- each measured bit flips independently, ``0 -> 1`` with probability
  ``p0to1`` and ``1 -> 0`` with ``p1to0`` (scalars or per-qubit arrays); this is the
  uncorrelated model that per-qubit readout-error inversion corrects.

The trajectories run on eigensweep's one statevector simulator
(:mod:`eigensweep.qubit.statevector`, batched gate kernels) with the project-wide conventions
of :mod:`eigensweep.circuit`: qubit 0 is the most significant bit of the index, and bitstring
character ``k`` is qubit ``k``.
"""

from __future__ import annotations

import json
from collections.abc import Mapping
from pathlib import Path

import numpy as np

from eigensweep.circuit import Circuit
from eigensweep.qubit.statevector import GATE_MATRICES, apply_gate_batch, apply_matrix_1q

__all__ = [
    "simulate_batch",
    "run_synthetic_device",
    "write_results",
]

_PAULI = [None, GATE_MATRICES["x"], GATE_MATRICES["y"], GATE_MATRICES["z"]]


def _apply_random_paulis(
    state: np.ndarray, qubits: tuple[int, ...], hit: np.ndarray, rng: np.random.Generator
) -> np.ndarray:
    """Apply a uniformly random non-identity Pauli on ``qubits`` to the trajectories ``hit``."""
    if hit.size == 0:
        return state
    k = len(qubits)
    which = rng.integers(1, 4**k, size=hit.size)  # 1 .. 4^k - 1, base-4 digit per qubit
    sub = state[hit]
    for j, q in enumerate(qubits):
        letter = (which // 4 ** (k - 1 - j)) % 4
        for code in (1, 2, 3):
            sel = np.flatnonzero(letter == code)
            if sel.size:
                sub[sel] = apply_matrix_1q(sub[sel], q, _PAULI[code])
    state[hit] = sub
    return state


def _error_probabilities(circuit: Circuit, p1: float, p2: float) -> np.ndarray:
    return np.array([p2 if len(g.qubits) == 2 else p1 for g in circuit.gates], dtype=float)


def simulate_batch(
    circuit: Circuit,
    batch: int = 1,
    *,
    depolarizing_1q: float = 0.0,
    depolarizing_2q: float = 0.0,
    rng: np.random.Generator | None = None,
    first_error: np.ndarray | None = None,
) -> np.ndarray:
    """Propagate ``batch`` statevectors from |0...0> through ``circuit`` with Pauli errors.

    After gate ``g`` each trajectory suffers a random non-identity Pauli with that gate's
    probability. With ``first_error`` (one gate index per trajectory) trajectory ``b`` is
    forced to err at gate ``first_error[b]`` and is error-free before it (used to sample
    conditioned on at least one error). Returns a complex array of shape ``(batch, 2**n)``
    (qubit 0 = most significant bit); without noise every row is the exact statevector.
    """
    n = circuit.n_qubits
    probs = _error_probabilities(circuit, depolarizing_1q, depolarizing_2q)
    noisy = bool(np.any(probs > 0))
    if noisy and rng is None:
        raise ValueError("a noisy simulation needs an rng")
    state = np.zeros((batch, 1 << n), dtype=complex)
    state[:, 0] = 1.0
    for i, g in enumerate(circuit.gates):
        state = apply_gate_batch(state, g)
        if not noisy:
            continue
        if first_error is None:
            hit = rng.random(batch) < probs[i] if probs[i] > 0 else np.zeros(batch, bool)
        else:
            hit = first_error == i
            after = first_error < i
            if probs[i] > 0 and after.any():
                hit |= after & (rng.random(batch) < probs[i])
        state = _apply_random_paulis(state, g.qubits, np.flatnonzero(hit), rng)
    return state


def _per_qubit(value, n: int, what: str) -> np.ndarray:
    arr = np.broadcast_to(np.asarray(value, dtype=float), (n,)).copy()
    if np.any(arr < 0) or np.any(arr > 1):
        raise ValueError(f"{what} must lie in [0, 1]")
    return arr


def _apply_readout(
    counts: np.ndarray, n: int, p01: np.ndarray, p10: np.ndarray, rng: np.random.Generator
) -> np.ndarray:
    """Flip bits shot by shot: ``counts`` over basis indices in, flipped counts out."""
    if not (np.any(p01) or np.any(p10)):
        return counts
    idx = np.repeat(np.arange(counts.size), counts)
    shifts = n - 1 - np.arange(n)
    bits = (idx[:, None] >> shifts) & 1
    p_flip = np.where(bits == 0, p01[None, :], p10[None, :])
    bits ^= (rng.random(bits.shape) < p_flip).astype(bits.dtype)
    new_idx = bits @ (1 << shifts)
    return np.bincount(new_idx, minlength=counts.size)


def _sample_circuit(
    circuit: Circuit,
    shots: int,
    rng: np.random.Generator,
    *,
    p1: float,
    p2: float,
    p01: np.ndarray,
    p10: np.ndarray,
    trajectories: int,
) -> dict[str, int]:
    n = circuit.n_qubits
    dim = 2**n
    p_gate = _error_probabilities(circuit, p1, p2)
    # stratified trajectories: the error-free branch is exact with weight P0 = prod(1 - p_g);
    # only the shots that suffer at least one error are spread over sampled error trajectories
    survive = np.concatenate([[1.0], np.cumprod(1.0 - p_gate)])
    p_clean = float(survive[-1])
    clean = np.abs(simulate_batch(circuit, 1)[0]) ** 2
    n_clean = int(rng.binomial(shots, p_clean)) if p_clean < 1 else shots
    counts = rng.multinomial(n_clean, clean / clean.sum()) if n_clean else np.zeros(dim, int)
    n_err = shots - n_clean
    if n_err:
        n_traj = max(1, min(trajectories, n_err))
        first_w = survive[:-1] * p_gate  # P(first error at gate g)
        cdf = np.cumsum(first_w) / first_w.sum()
        first = np.minimum(np.searchsorted(cdf, rng.random(n_traj), side="right"), len(cdf) - 1)
        amps = simulate_batch(
            circuit, n_traj, depolarizing_1q=p1, depolarizing_2q=p2, rng=rng, first_error=first
        )
        probs = np.abs(amps) ** 2
        probs /= probs.sum(axis=1, keepdims=True)
        per_traj = np.full(n_traj, n_err // n_traj, dtype=np.int64)
        per_traj[rng.permutation(n_traj)[: n_err % n_traj]] += 1
        counts = counts + rng.multinomial(per_traj, probs).sum(axis=0)
    counts = _apply_readout(counts, n, p01, p10, rng)
    return {format(int(i), f"0{n}b"): int(counts[i]) for i in np.flatnonzero(counts)}


def _circuits_of(job) -> tuple[dict, list[tuple[dict, Circuit]]]:
    """(manifest dict, [(record, circuit)]) from a DeviceJob or a job folder."""
    from eigensweep.device.manifest import DeviceJob, load_job_circuits

    if isinstance(job, DeviceJob):
        manifest = job.to_manifest()
        return manifest, [(rec, job.circuits[rec["circuit_id"]]) for rec in manifest["circuits"]]
    return load_job_circuits(Path(job))


def run_synthetic_device(
    job,
    *,
    seed: int,
    readout_error=(0.0, 0.0),
    depolarizing_1q: float = 0.0,
    depolarizing_2q: float = 0.0,
    shots: int | None = None,
    trajectories: int = 200,
    device: str | None = None,
) -> dict:
    """Run every circuit of a job (``DeviceJob`` or exported folder) on a seeded noisy model.

    ``readout_error = (p0to1, p1to0)``, each a scalar or a per-qubit array. ``shots`` overrides
    the manifest's per-circuit shots. A folder is read from its exported OpenQASM 3 files (the
    SHA-256 of each is checked against the manifest), so exactly what would be sent is run.
    Returns a dict in the ``eigensweep-device-results`` format (see docs/counts-format.md).
    Each circuit gets its own random stream derived from ``(seed, position)``.
    """
    from eigensweep.device.counts import RESULTS_FORMAT, RESULTS_FORMAT_VERSION

    if not 0 <= depolarizing_1q <= 1 or not 0 <= depolarizing_2q <= 1:
        raise ValueError("depolarizing probabilities must lie in [0, 1]")
    if trajectories < 1:
        raise ValueError("trajectories must be >= 1")
    manifest, items = _circuits_of(job)
    n = int(manifest["n_qubits"])
    p01 = _per_qubit(readout_error[0], n, "readout_error p0to1")
    p10 = _per_qubit(readout_error[1], n, "readout_error p1to0")
    results = {}
    for pos, (rec, circ) in enumerate(items):
        rng = np.random.default_rng(np.random.SeedSequence([int(seed), pos]))
        n_shots = int(rec["shots"] if shots is None else shots)
        if n_shots < 1:
            raise ValueError("shots must be >= 1")
        counts = _sample_circuit(
            circ,
            n_shots,
            rng,
            p1=float(depolarizing_1q),
            p2=float(depolarizing_2q),
            p01=p01,
            p10=p10,
            trajectories=int(trajectories),
        )
        results[rec["circuit_id"]] = {"sha256": rec["sha256"], "counts": counts}
    if device is None:
        device = (
            f"eigensweep synthetic device (seed={seed}, readout p0to1={readout_error[0]!r},"
            f" p1to0={readout_error[1]!r}, depolarizing 1q={depolarizing_1q!r},"
            f" 2q={depolarizing_2q!r}, trajectories={trajectories})"
        )
    return {
        "format": RESULTS_FORMAT,
        "format_version": RESULTS_FORMAT_VERSION,
        "job_id": manifest["job_id"],
        "device": " ".join(str(device).split()),
        "results": results,
    }


def write_results(results: Mapping, path: str | Path) -> Path:
    """Write a results dict as JSON atomically (temporary file + ``os.replace``)."""
    from eigensweep.device.manifest import atomic_write_text

    text = json.dumps(results, indent=1, sort_keys=True) + "\n"
    return atomic_write_text(Path(path), text)
