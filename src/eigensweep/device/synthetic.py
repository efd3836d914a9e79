"""A synthetic noisy device: runs an exported job and returns counts in our results format.

The noise is that of eigensweep's one noise simulator (:mod:`eigensweep.qubit.noise`, also
behind the optimize stage's ``noisy`` estimator): depolarizing after every gate with its error
rate, amplitude damping and dephasing from T1/T2 over gate and idle times, and asymmetric
readout flips (``p0to1`` = P(read 1 | 0), ``p1to0`` = P(read 0 | 1), the uncorrelated model
that per-qubit readout-error inversion corrects). A job's circuits are simulated together:
its measurement circuits and folded copies share their state-preparation prefix, so a job of
``G`` groups costs about one noisy state preparation per noise-scale factor plus ``G`` basis
changes. Up to :data:`eigensweep.qubit.noise.MAX_DENSITY_QUBITS` qubits the outcome
distributions are exact (density matrix); above, they are averages over ``trajectories``
sampled trajectories. Each circuit's counts are then a multinomial draw of its shots from its
distribution with readout errors, from a random stream derived from ``(seed, position)``.
Folded circuits have more gates, so the noise grows with the folding scale factor as
zero-noise extrapolation assumes.

The older device keys map onto a :class:`~eigensweep.qubit.noise.NoiseModel` with
:meth:`~eigensweep.qubit.noise.NoiseModel.from_probabilities`: ``depolarizing_1q`` and
``depolarizing_2q`` are the error rates of every one- and two-qubit gate, ``readout_error =
(p0to1, p1to0)`` the readout errors (scalars or per qubit); no durations, so no relaxation.
Pass ``noise=`` for the full model; :func:`target_noise` gives a job's own target's (the
reconcile stage uses it for exports compiled for a device target).

Conventions of :mod:`eigensweep.circuit`: qubit 0 is the most significant bit of the index,
and bitstring character ``k`` is qubit ``k``.
"""

from __future__ import annotations

import json
from collections.abc import Mapping
from pathlib import Path

import numpy as np

from eigensweep.circuit import Circuit
from eigensweep.qubit.noise import NoiseModel, readout_distribution, simulate_distributions

__all__ = [
    "run_synthetic_device",
    "target_noise",
    "write_results",
]


def _circuits_of(job) -> tuple[dict, list[tuple[dict, Circuit]]]:
    """(manifest dict, [(record, circuit)]) from a DeviceJob or a job folder."""
    from eigensweep.device.manifest import DeviceJob, load_job_circuits

    if isinstance(job, DeviceJob):
        manifest = job.to_manifest()
        return manifest, [(rec, job.circuits[rec["circuit_id"]]) for rec in manifest["circuits"]]
    return load_job_circuits(Path(job))


def target_noise(manifest) -> NoiseModel:
    """The noise of a job's device target on the job's bit-order register.

    :meth:`NoiseModel.from_mapping` of the manifest's ``target`` (the target's content, as
    the export stored it), restricted to the physical qubits the job measures: qubit ``k`` of
    the job's circuits is physical qubit ``measured_qubits[k]`` (:meth:`NoiseModel.for_qubits`).
    """
    from eigensweep.device.manifest import as_manifest

    m = as_manifest(manifest)
    measured = m.get("measured_qubits") or list(range(int(m["n_qubits"])))
    return NoiseModel.from_mapping(m["target"]).for_qubits(measured)


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
    noise: NoiseModel | None = None,
) -> dict:
    """Run every circuit of a job (``DeviceJob`` or exported folder) on a seeded noisy model.

    ``noise`` is the device's :class:`~eigensweep.qubit.noise.NoiseModel`; without it the
    older keys are used (module docstring): ``readout_error = (p0to1, p1to0)``, each a scalar
    or a per-qubit array, and ``depolarizing_1q``/``depolarizing_2q``. ``shots`` overrides the
    manifest's per-circuit shots; ``trajectories`` is the batch of the trajectory method
    (registers above ``MAX_DENSITY_QUBITS`` qubits). A folder is read from its exported
    OpenQASM 3 files (the SHA-256 of each is checked against the manifest), so exactly what
    would be sent is run. Returns a dict in the ``eigensweep-device-results`` format (see
    docs/counts-format.md).
    """
    from eigensweep.device.counts import RESULTS_FORMAT, RESULTS_FORMAT_VERSION

    if not 0 <= depolarizing_1q <= 1 or not 0 <= depolarizing_2q <= 1:
        raise ValueError("depolarizing probabilities must lie in [0, 1]")
    if trajectories < 1:
        raise ValueError("trajectories must be >= 1")
    if noise is None:
        noise = NoiseModel.from_probabilities(
            depolarizing_1q=float(depolarizing_1q),
            depolarizing_2q=float(depolarizing_2q),
            readout_p01=readout_error[0],
            readout_p10=readout_error[1],
        )
    manifest, items = _circuits_of(job)
    n_shots = [int(rec["shots"] if shots is None else shots) for rec, _ in items]
    if any(k < 1 for k in n_shots):
        raise ValueError("shots must be >= 1")
    probs = simulate_distributions(
        [circ for _, circ in items],
        noise,
        trajectories=int(trajectories),
        rng=np.random.default_rng(np.random.SeedSequence([int(seed), len(items)])),
    )
    probs = readout_distribution(probs, noise.readout_p01, noise.readout_p10)
    n = int(manifest["n_qubits"])
    results = {}
    for pos, ((rec, _), k) in enumerate(zip(items, n_shots, strict=True)):
        rng = np.random.default_rng(np.random.SeedSequence([int(seed), pos]))
        counts = rng.multinomial(k, probs[pos])
        results[rec["circuit_id"]] = {
            "sha256": rec["sha256"],
            "counts": {format(int(i), f"0{n}b"): int(counts[i]) for i in np.flatnonzero(counts)},
        }
    if device is None:
        device = f"eigensweep synthetic device (seed={seed}, {noise!r})"
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
