"""Benchmark: the determinant-space engine (UCCSD energy + adjoint gradient) against one sigma vector.

For each case it reports qubits, determinants, UCCSD parameters, the determinant pairs the gates
rotate per sweep, build time (string tables, Hamiltonian and all gates), the time of one energy
+ gradient, the time of one PySCF ``direct_spin1.contract_2e`` sigma vector measured in the same
process on the same space (the practical floor of a Hamiltonian-based energy), their ratio, the
resident memory after the build and the peak resident memory of the process.

Every case runs in a fresh subprocess (peak memory is that process's ``ru_maxrss``). With
``--baseline-src DIR`` (the ``src`` folder's parent of another eigensweep checkout, e.g. the
commit before the factored engine: ``git worktree add /tmp/es-old 0b03830``) the same worker
also runs on that checkout's engine in the same run, and the table adds its figures, the
speed-up and memory ratios, and the largest energy and gradient differences at the same
parameters. The baseline is skipped (with the reason) when its pair arrays alone would exceed
``--baseline-max-gb`` (24 bytes per rotated pair, the layout of that engine).

``--optimize CASE`` runs UCCSD + L-BFGS (the workflow defaults) from Hartree-Fock to
convergence in a subprocess and reports evaluations, wall time, peak memory and, with
``--fci``, the error against PySCF FCI of the same active space. ``--checkpoint FILE`` saves
the best parameters, evaluation count and wall time every ``--checkpoint-every`` evaluations
and resumes from them when rerun (for runs longer than one sitting or a cluster time limit).

Cases: LiH (1.595 Angstrom) and H2O (equilibrium geometry) in STO-3G with all orbitals,
hydrogen chains (STO-3G, 1.0 Angstrom spacing, all orbitals) and N2/6-31G at 1.098 Angstrom
with (ne, no) active spaces from PySCF CASCI (lowest orbitals frozen).

Usage::

    python benchmarks/bench_engine.py [--cases lih,h2o,h8,h10,n2_10,n2_12,n2_14] [--threads 1]
        [--baseline-src /tmp/es-old] [--optimize n2_14 --fci [--checkpoint ck.json]] [--json out.json]
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

CASES = {
    "lih": ("molecule", "Li 0 0 0; H 0 0 1.595"),
    "h2o": ("molecule", "O 0 0 0.1173; H 0 0.7572 -0.4692; H 0 -0.7572 -0.4692"),
    "h8": ("h_chain", 8),
    "h10": ("h_chain", 10),
    "n2_10": ("n2", 10),
    "n2_12": ("n2", 12),
    "n2_14": ("n2", 14),
}
DEFAULT_CASES = "lih,h2o,h8,h10,n2_10,n2_12,n2_14"


def integrals(case: str) -> dict:
    """Active-space integrals of a case with PySCF (RHF, CASCI effective integrals)."""
    from pyscf import ao2mo, gto, mcscf, scf

    kind, n = CASES[case]
    if kind in ("h_chain", "molecule"):
        atom = "; ".join(f"H 0 0 {1.0 * k:.3f}" for k in range(n)) if kind == "h_chain" else n
        mol = gto.M(atom=atom, basis="sto-3g", verbose=0)
        ncas, nelecas = mol.nao_nr(), mol.nelectron
    else:
        mol = gto.M(atom="N 0 0 0; N 0 0 1.098", basis="6-31g", verbose=0)
        ncas, nelecas = n, n
    mf = scf.RHF(mol)
    mf.conv_tol = 1e-11
    mf.kernel()
    cas = mcscf.CASCI(mf, ncas, nelecas)
    h1e, e_core = cas.get_h1eff()
    eri = ao2mo.restore(1, cas.get_h2eff(), ncas)
    na = nelecas // 2
    return {
        "h1e": np.asarray(h1e),
        "eri": np.asarray(eri),
        "e_core": float(e_core),
        "norb": int(ncas),
        "nelec": (na, nelecas - na),
        "e_hf": float(mf.e_tot),
    }


def _rss_mb() -> float:
    with open("/proc/self/status") as fh:
        for line in fh:
            if line.startswith("VmRSS:"):
                return int(line.split()[1]) / 1024
    return float("nan")


def _best_time(fun, repeat: int) -> tuple[float, float]:
    """Best wall time and best CPU time (all threads) of ``repeat`` calls.

    On a shared machine the CPU time of a one-thread run is the steadier figure.
    """
    best, best_cpu = float("inf"), float("inf")
    for _ in range(repeat):
        t0, c0 = time.perf_counter(), time.process_time()
        fun()
        best = min(best, time.perf_counter() - t0)
        best_cpu = min(best_cpu, time.process_time() - c0)
    return best, best_cpu


def worker(case: str, repeat: int, out: str) -> dict:
    """One case in this process: build, time energy + gradient and one sigma vector."""
    from eigensweep.vqe import UCCSD, DetSpace

    m = integrals(case)
    rss0 = _rss_mb()
    t0 = time.perf_counter()
    space = DetSpace(m["norb"], m["nelec"], m["h1e"], m["eri"], m["e_core"])
    ansatz = UCCSD(space)
    t_build = time.perf_counter() - t0
    rss_build = _rss_mb()
    theta = 0.05 * np.random.default_rng(7).standard_normal(ansatz.n_params)
    energy, grad = ansatz.energy_and_gradient(theta)  # warm-up (and kernel compilation)
    t_eg, cpu_eg = _best_time(lambda: ansatz.energy_and_gradient(theta), repeat)
    vec = ansatz.state(theta)
    t_sigma, cpu_sigma = _best_time(lambda: space.apply_h(vec), repeat)
    np.savez(out, energy=energy, grad=grad)
    seq = ansatz._sequence
    n_pairs = int(sum(g.n_pairs for g in seq.gates))
    return {
        "case": case,
        "n_qubits": 2 * m["norb"],
        "n_determinants": int(space.dim),
        "n_params": int(ansatz.n_params),
        "n_pairs": n_pairs,
        "build_s": t_build,
        "energy_gradient_s": t_eg,
        "sigma_s": t_sigma,
        "ratio_to_sigma": t_eg / t_sigma,
        "energy_gradient_cpu_s": cpu_eg,
        "sigma_cpu_s": cpu_sigma,
        "cpu_ratio_to_sigma": cpu_eg / cpu_sigma,
        "rss_build_mb": rss_build - rss0,
        "peak_rss_mb": resource.getrusage(resource.RUSAGE_SELF).ru_maxrss / 1024,
        "energy": float(energy),
    }


def optimize_worker(case: str, fci: bool, checkpoint: str | None = None, every: int = 5) -> dict:
    """UCCSD + L-BFGS (workflow defaults) from HF to convergence; optional PySCF FCI check.

    With ``checkpoint`` the lowest-energy parameters met so far, the evaluation count and the
    elapsed wall time are written there atomically every ``every`` evaluations, and a rerun
    with the same file starts from them (a warm restart: L-BFGS's curvature memory is not
    kept, so the evaluation count of a resumed run is not that of an uninterrupted one).
    """
    from eigensweep.store import atomic_write_text
    from eigensweep.vqe import UCCSD, DetSpace, minimize
    from eigensweep.vqe.methods import OPTIMIZER_DEFAULTS

    m = integrals(case)
    t0 = time.perf_counter()
    space = DetSpace(m["norb"], m["nelec"], m["h1e"], m["eri"], m["e_core"])
    ansatz = UCCSD(space)
    options = {
        k: v
        for k, v in OPTIMIZER_DEFAULTS["lbfgs"].items()
        if k not in ("restarts", "restart_scale")
    }
    x0 = ansatz.initial_params()
    state = {"case": case, "evaluations": 0, "wall_s": 0.0, "energy": None, "theta": None}
    if checkpoint and Path(checkpoint).is_file():
        saved = json.loads(Path(checkpoint).read_text())
        if saved.get("case") != case or len(saved.get("theta") or []) != x0.size:
            sys.exit(
                f"--checkpoint {checkpoint}: written for another case; remove it or pass another"
            )
        state.update(saved)
        x0 = np.asarray(saved["theta"], dtype=float)
    resumed_from = int(state["evaluations"])
    wall_before = float(state["wall_s"])

    def fun(x: np.ndarray) -> tuple[float, np.ndarray]:
        e, g = ansatz.energy_and_gradient(x)
        state["evaluations"] += 1
        state["wall_s"] = wall_before + time.perf_counter() - t0
        if state["energy"] is None or e < state["energy"]:
            state["energy"], state["theta"] = float(e), [float(v) for v in x]
        if checkpoint and state["evaluations"] % every == 0:
            atomic_write_text(checkpoint, json.dumps(state))
        return e, g

    res = minimize(fun, x0, method="lbfgs", options=options, grad=True)
    if checkpoint:
        atomic_write_text(checkpoint, json.dumps(state))
    wall = time.perf_counter() - t0
    out = {
        "case": case,
        "n_qubits": 2 * m["norb"],
        "n_determinants": int(space.dim),
        "n_params": int(ansatz.n_params),
        "energy": float(res.fun),
        "energy_hf": m["e_hf"],
        "evaluations": int(res.n_evaluations) + resumed_from,
        "resumed_from_evaluation": resumed_from,
        "converged": bool(res.converged),
        "message": res.message,
        "wall_s": wall + wall_before,
        "peak_rss_mb": resource.getrusage(resource.RUSAGE_SELF).ru_maxrss / 1024,
    }
    if fci:
        from eigensweep.vqe import fci_ground_state

        t1 = time.perf_counter()
        e_fci, _ = fci_ground_state(m["h1e"], m["eri"], m["e_core"], m["norb"], m["nelec"])
        out.update(
            energy_fci=e_fci,
            error_mha=1000 * (res.fun - e_fci),
            fci_s=time.perf_counter() - t1,
            peak_rss_with_fci_mb=resource.getrusage(resource.RUSAGE_SELF).ru_maxrss / 1024,
        )
    return out


def _spawn(args: list[str], threads: int, src: str | None = None) -> dict:
    env = dict(os.environ, OMP_NUM_THREADS=str(threads), OPENBLAS_NUM_THREADS=str(threads))
    if src is not None:
        env["PYTHONPATH"] = str(Path(src) / "src") + os.pathsep + env.get("PYTHONPATH", "")
    proc = subprocess.run(
        [sys.executable, __file__, *args], env=env, capture_output=True, text=True, check=False
    )
    if proc.returncode != 0:
        return {"error": proc.stderr.strip().splitlines()[-1] if proc.stderr.strip() else "failed"}
    return json.loads(proc.stdout.strip().splitlines()[-1])


def _fmt(v, spec: str) -> str:
    return "-" if v is None else format(v, spec)


def main() -> None:
    ap = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    ap.add_argument("--cases", default=DEFAULT_CASES)
    ap.add_argument("--threads", type=int, default=1)
    ap.add_argument("--repeat", type=int, default=3)
    ap.add_argument("--baseline-src", default=None)
    ap.add_argument("--baseline-max-gb", type=float, default=8.0)
    ap.add_argument("--optimize", default=None)
    ap.add_argument("--fci", action="store_true")
    ap.add_argument("--checkpoint", default=None, help="JSON file: save and resume --optimize")
    ap.add_argument("--checkpoint-every", type=int, default=5)
    ap.add_argument("--json", default=None)
    ap.add_argument("--worker", default=None, help=argparse.SUPPRESS)
    ap.add_argument("--optimize-worker", default=None, help=argparse.SUPPRESS)
    ap.add_argument("--out", default=None, help=argparse.SUPPRESS)
    args = ap.parse_args()
    if args.worker:
        print(json.dumps(worker(args.worker, args.repeat, args.out)))
        return
    if args.optimize_worker:
        print(
            json.dumps(
                optimize_worker(
                    args.optimize_worker, args.fci, args.checkpoint, args.checkpoint_every
                )
            )
        )
        return

    rows = []
    tmp = tempfile.mkdtemp(prefix="bench_engine_")
    cases = [c for c in args.cases.split(",") if c] if not args.optimize else []
    for case in cases:
        if case not in CASES:
            sys.exit(f"--cases: unknown case {case!r}; known: {', '.join(CASES)}")
        cur_out = os.path.join(tmp, f"{case}_current.npz")
        cur = _spawn(
            ["--worker", case, "--repeat", str(args.repeat), "--out", cur_out], args.threads
        )
        row = {"current": cur}
        if args.baseline_src and "error" not in cur:
            need_gb = 24 * cur["n_pairs"] / 2**30
            if need_gb > args.baseline_max_gb:
                row["baseline"] = {
                    "skipped": f"pair arrays would need {need_gb:.1f} GB > --baseline-max-gb"
                }
            else:
                base_out = os.path.join(tmp, f"{case}_baseline.npz")
                base = _spawn(
                    ["--worker", case, "--repeat", str(args.repeat), "--out", base_out],
                    args.threads,
                    src=args.baseline_src,
                )
                if "error" not in base:
                    a, b = np.load(cur_out), np.load(base_out)
                    base["max_energy_diff"] = float(abs(a["energy"] - b["energy"]))
                    base["max_gradient_diff"] = float(np.max(np.abs(a["grad"] - b["grad"])))
                    base["speedup"] = base["energy_gradient_s"] / cur["energy_gradient_s"]
                    base["cpu_speedup"] = (
                        base["energy_gradient_cpu_s"] / cur["energy_gradient_cpu_s"]
                    )
                    base["memory_ratio"] = base["peak_rss_mb"] / cur["peak_rss_mb"]
                row["baseline"] = base
        rows.append(row)
        print(json.dumps(row), flush=True)

    print(f"\nthreads={args.threads}, best of {args.repeat}; times in s, memory in MB")
    head = (
        f"{'case':7} {'qubits':>6} {'dets':>10} {'params':>6} {'pairs(M)':>9} {'build':>7} "
        f"{'E+grad':>8} {'sigma':>7} {'ratio':>6} {'cpuE+g':>8} {'cpuSig':>7} {'cpuRat':>6} "
        f"{'RSSbuild':>8} {'peakRSS':>8}"
    )
    print(head)
    for row in rows:
        c = row["current"]
        if "error" in c:
            print(f"{'?':7} error: {c['error']}")
            continue
        print(
            f"{c['case']:7} {c['n_qubits']:6d} {c['n_determinants']:10d} {c['n_params']:6d} "
            f"{c['n_pairs'] / 1e6:9.1f} {c['build_s']:7.2f} {c['energy_gradient_s']:8.3f} "
            f"{c['sigma_s']:7.3f} {c['ratio_to_sigma']:6.2f} {c['energy_gradient_cpu_s']:8.3f} "
            f"{c['sigma_cpu_s']:7.3f} {c['cpu_ratio_to_sigma']:6.2f} {c['rss_build_mb']:8.0f} "
            f"{c['peak_rss_mb']:8.0f}"
        )
    if args.baseline_src:
        print(f"\nbaseline engine from {args.baseline_src} (same run, same threads)")
        print(
            f"{'case':7} {'build':>7} {'E+grad':>8} {'sigma':>7} {'ratio':>6} {'RSSbuild':>8} "
            f"{'peakRSS':>8} {'speedup':>8} {'cpu x':>6} {'mem x':>6} {'|dE|':>8} {'|dgrad|':>8}"
        )
        for row in rows:
            b, c = row.get("baseline", {}), row["current"]
            if "skipped" in b or "error" in b:
                print(f"{c.get('case', '?'):7} {b.get('skipped') or b.get('error')}")
                continue
            print(
                f"{c['case']:7} {b['build_s']:7.2f} {b['energy_gradient_s']:8.3f} "
                f"{b['sigma_s']:7.3f} {b['ratio_to_sigma']:6.2f} {b['rss_build_mb']:8.0f} "
                f"{b['peak_rss_mb']:8.0f} {b['speedup']:8.1f} {b['cpu_speedup']:6.1f} "
                f"{b['memory_ratio']:6.1f} "
                f"{b['max_energy_diff']:8.1e} {b['max_gradient_diff']:8.1e}"
            )
    if args.optimize:
        extra = ["--fci"] if args.fci else []
        if args.checkpoint:
            extra += ["--checkpoint", str(Path(args.checkpoint).resolve())]
            extra += ["--checkpoint-every", str(args.checkpoint_every)]
        opt = _spawn(["--optimize-worker", args.optimize, *extra], args.threads)
        rows.append({"optimize": opt})
        print(f"\nUCCSD + L-BFGS from HF, threads={args.threads}")
        print(json.dumps(opt, indent=1))
    if args.json:
        Path(args.json).write_text(json.dumps(rows, indent=1))


if __name__ == "__main__":
    main()
