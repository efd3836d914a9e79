"""Benchmark: the reconcile job of one LiH STO-3G tapered point on the synthetic device.

The job: LiH at 1.595 Angstrom, STO-3G, Jordan-Wigner, Z2-tapered to 8 qubits (symmetry-adapted
orbitals), UCCSD optimized exactly; the export job of its circuit (one measurement circuit per
qubit-wise commuting group at noise-scale factors 1, 3, 5, plus the two readout-calibration
circuits, ``--shots`` in total); the synthetic device answers it with the device config's
default noise (readout ``[0.02, 0.04]``, depolarizing 0.001 per one-qubit and 0.01 per
two-qubit gate) and the counts are reconciled (bootstrap 1000). Timed: the device run and the
reconciliation, in a fresh subprocess each.

With ``--baseline-src DIR`` (the root of another checkout, e.g. the commit before the one
noise simulator: ``git worktree add /tmp/es-base 93796e8``) the same worker runs on that
checkout's code in the same run (it builds its own job from the same circuit and
Hamiltonian), with ``--baseline-timeout`` seconds of wall time before it is stopped and
reported as unfinished. The table shows wall and CPU seconds, the raw energy and its standard
error for both.

Usage::

    python benchmarks/bench_noise.py [--shots 16000] [--scale-factors 1,3,5]
        [--baseline-src /tmp/es-base] [--baseline-timeout 600] [--json out.json]
"""

from __future__ import annotations

import argparse
import json
import os
import resource
import subprocess
import sys
import tempfile
import time
from pathlib import Path

import numpy as np

DEVICE_NOISE = {"readout_error": (0.02, 0.04), "depolarizing_1q": 0.001, "depolarizing_2q": 0.01}


def _problem(folder: Path) -> dict:
    """Build the tapered LiH point with the current code; store circuit and Hamiltonian."""
    from _molecules import rhf_integrals

    from eigensweep.qubit import map_hamiltonian, reduce_to_sector, reference_bits
    from eigensweep.vqe import circuit_from_meta, run_optimize

    ints, _ = rhf_integrals("Li 0 0 0; H 0 0 1.595")
    norb = ints["norb"]
    mapping = "jordan_wigner"
    ham = map_hamiltonian(ints["h1e"], ints["eri"], ints["e_core"], mapping)
    tap = reduce_to_sector(ham, reference_bits(ints["nelec"], norb, mapping))
    res = run_optimize(
        **ints,
        ansatz={"name": "uccsd"},
        optimizer={"name": "lbfgs"},
        estimator={"name": "exact"},
        mapping=mapping,
        tapering=tap,
        qubit_hamiltonian=tap.hamiltonian,
    )
    circ = circuit_from_meta(res.ansatz_meta, res.params, mapping)
    t = tap.hamiltonian
    np.savez(folder / "ham.npz", x=t.x, z=t.z, coeffs=t.coeffs, n_qubits=t.n_qubits)
    gates = [[g.name, list(g.qubits), list(g.params)] for g in circ.gates]
    (folder / "circuit.json").write_text(json.dumps({"n_qubits": circ.n_qubits, "gates": gates}))
    return {
        "n_qubits": circ.n_qubits,
        "n_gates": len(circ.gates),
        "cnot_count": circ.cnot_count,
        "energy": float(res.energy),
    }


def _worker(folder: Path, shots: int, scales: tuple[int, ...]) -> dict:
    """Device run + reconcile of the stored point with whatever eigensweep is importable."""
    from eigensweep.circuit import Circuit
    from eigensweep.device.manifest import build_job
    from eigensweep.device.reconcile import reconcile
    from eigensweep.device.synthetic import run_synthetic_device
    from eigensweep.qubit.pauli import PauliExpansion

    h = np.load(folder / "ham.npz")
    ham = PauliExpansion(h["x"], h["z"], h["coeffs"], int(h["n_qubits"]))
    spec = json.loads((folder / "circuit.json").read_text())
    circ = Circuit(int(spec["n_qubits"]))
    for name, qubits, params in spec["gates"]:
        circ.append(name, tuple(qubits), tuple(params))
    job = build_job(
        circ, ham, shots_total=shots, scale_factors=scales, job_name="bench-lih", meta={}
    )
    cpu0, t0 = time.process_time(), time.perf_counter()
    counts = run_synthetic_device(job, seed=1, **DEVICE_NOISE)
    t_device = time.perf_counter() - t0
    res = reconcile(job.to_manifest(), counts, ham, bootstrap=1000, seed=0)
    wall = time.perf_counter() - t0
    return {
        "circuits": len(job.to_manifest()["circuits"]),
        "device_s": t_device,
        "reconcile_s": wall - t_device,
        "wall_s": wall,
        "cpu_s": time.process_time() - cpu0,
        "raw": float(res.raw.value),
        "raw_stderr": float(res.raw.stderr),
        "peak_mb": resource.getrusage(resource.RUSAGE_SELF).ru_maxrss / 1024,
    }


def _run_child(
    folder: Path, shots: int, scales: str, src: str | None, timeout: float | None
) -> dict:
    env = dict(os.environ, OMP_NUM_THREADS="1", OPENBLAS_NUM_THREADS="1", MKL_NUM_THREADS="1")
    if src:
        env["PYTHONPATH"] = str(Path(src) / "src") + os.pathsep + env.get("PYTHONPATH", "")
    args = [sys.executable, __file__, "--worker", str(folder), "--shots", str(shots)]
    args += ["--scale-factors", scales]
    try:
        proc = subprocess.run(
            args, env=env, capture_output=True, text=True, check=False, timeout=timeout
        )
    except subprocess.TimeoutExpired:
        return {"unfinished": f"still running after {timeout:.0f} s of wall time (stopped)"}
    if proc.returncode != 0:
        tail = proc.stderr.strip().splitlines()
        return {"error": tail[-1] if tail else "failed"}
    return json.loads(proc.stdout.strip().splitlines()[-1])


def _line(label: str, row: dict) -> str:
    if "wall_s" not in row:
        return f"{label:<10} {row.get('unfinished') or row.get('error')}"
    return (
        f"{label:<10} {row['circuits']:>8} {row['device_s']:>9.2f} {row['reconcile_s']:>11.2f}"
        f" {row['wall_s']:>7.2f} {row['cpu_s']:>7.2f} {row['raw']:>13.6f} {row['raw_stderr']:>9.6f}"
    )


def main() -> None:
    ap = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    ap.add_argument("--shots", type=int, default=16000)
    ap.add_argument("--scale-factors", default="1,3,5", help="noise-scale factors of the job")
    ap.add_argument("--baseline-src", default=None)
    ap.add_argument("--baseline-timeout", type=float, default=600.0)
    ap.add_argument("--json", default=None)
    ap.add_argument("--worker", default=None, help=argparse.SUPPRESS)
    args = ap.parse_args()
    if args.worker:
        scales = tuple(int(k) for k in args.scale_factors.split(","))
        print(json.dumps(_worker(Path(args.worker), args.shots, scales)))
        return
    with tempfile.TemporaryDirectory() as tmp:
        folder = Path(tmp)
        point = _problem(folder)
        current = _run_child(folder, args.shots, args.scale_factors, None, None)
        baseline = None
        if args.baseline_src:
            baseline = _run_child(
                folder, args.shots, args.scale_factors, args.baseline_src, args.baseline_timeout
            )
    print(
        f"LiH STO-3G tapered: {point['n_qubits']} qubits, {point['n_gates']} gates"
        f" ({point['cnot_count']} CNOTs) per state circuit, exact energy {point['energy']:.6f} Eh,"
        f" {args.shots} shots, noise-scale factors {args.scale_factors}"
    )
    print(
        f"{'code':<10} {'circuits':>8} {'device_s':>9} {'reconcile_s':>11} {'wall_s':>7}"
        f" {'cpu_s':>7} {'raw_Eh':>13} {'stderr':>9}"
    )
    print(_line("current", current))
    if baseline is not None:
        print(_line("baseline", baseline))
        if "wall_s" in baseline and "wall_s" in current:
            print(f"speed-up (wall): {baseline['wall_s'] / current['wall_s']:.1f}x")
    if args.json:
        out = {"point": point, "shots": args.shots, "current": current, "baseline": baseline}
        Path(args.json).write_text(json.dumps(out, indent=1) + "\n")


if __name__ == "__main__":
    main()
