"""Benchmark: UCCSD + L-BFGS from HF to convergence, ours versus a straightforward baseline.

Ours: determinant-space emulation with adjoint gradients (:mod:`eigensweep.vqe`).
Baseline (written here with general libraries only): every UCCSD generator as an OpenFermion
Jordan-Wigner sparse matrix, the state built by successive SciPy ``expm_multiply`` calls on
the ``2**n`` statevector, the energy as ``<psi|H|psi>`` with the sparse JW Hamiltonian, and
gradients by forward finite differences (SciPy's default for L-BFGS-B without a Jacobian,
``n_params + 1`` energies per gradient).

The baseline is run to convergence only for H2 (and LiH with ``--full-baseline``). For the
other cases its time is EXTRAPOLATED, and labelled so: ``t(energy + FD gradient) =
(n_params + 1) * t(energy)`` with ``t(energy)`` measured on a few energies (on 20 qubits: on a
sample of generators and Hamiltonian terms, scaled to all of them), times the number of
evaluations our L-BFGS run needed. Baseline set-up (building the sparse matrices) is reported
separately and not included in the ratio.

Every case runs in its own subprocess; peak memory is that process's peak resident set size
(``resource.getrusage``) and, for our optimisation alone, the peak traced by ``tracemalloc`` in
a second, traced run.

Usage: ``python benchmarks/bench_optimize.py [--cases H2,LiH,BeH2,H2O,N2] [--full-baseline]``
"""

from __future__ import annotations

import argparse
import json
import math
import resource
import subprocess
import sys
import time
import tracemalloc

import numpy as np

CASES = {
    "H2": ("H 0 0 0; H 0 0 0.74", "sto-3g"),
    "LiH": ("Li 0 0 0; H 0 0 1.595", "sto-3g"),
    "BeH2": ("Be 0 0 0; H 0 0 1.326; H 0 0 -1.326", "sto-3g"),
    "H2O": (
        "O 0 0 0; H 0 {y} {z}; H 0 -{y} {z}".format(
            y=0.9578 * math.sin(math.radians(104.48 / 2)),
            z=0.9578 * math.cos(math.radians(104.48 / 2)),
        ),
        "sto-3g",
    ),
    "N2": ("N 0 0 0; N 0 0 1.098", "sto-3g"),  # 10 orbitals, 14 electrons: 20 qubits
}


def integrals(name: str) -> dict:
    from pyscf import ao2mo, gto, scf

    atom, basis = CASES[name]
    mol = gto.M(atom=atom, basis=basis, verbose=0)
    mf = scf.RHF(mol)
    mf.conv_tol = 1e-12
    mf.kernel()
    c = mf.mo_coeff
    norb = c.shape[1]
    return {
        "h1e": c.T @ mf.get_hcore() @ c,
        "eri": ao2mo.restore(1, ao2mo.kernel(mol, c), norb),
        "e_core": float(mol.energy_nuc()),
        "norb": int(norb),
        "nelec": (int(mol.nelec[0]), int(mol.nelec[1])),
    }


def ours(m: dict) -> dict:
    from eigensweep.vqe import UCCSD, DetSpace, minimize

    t0 = time.perf_counter()
    space = DetSpace(m["norb"], m["nelec"], m["h1e"], m["eri"], m["e_core"])
    ansatz = UCCSD(space)
    t_build = time.perf_counter() - t0
    res = minimize(
        ansatz.energy_and_gradient,
        ansatz.initial_params(),
        method="lbfgs",
        options={"maxiter": 2000},
        grad=True,
    )
    wall = time.perf_counter() - t0
    return {
        "wall_s": wall,
        "build_s": t_build,
        "energy": res.fun,
        "n_evaluations": res.n_evaluations,
        "n_params": ansatz.n_params,
        "converged": res.converged,
        "x": res.x,
        "ansatz": ansatz,
    }


def ours_traced_peak(m: dict) -> float:
    tracemalloc.start()
    ours(m)
    _, peak = tracemalloc.get_traced_memory()
    tracemalloc.stop()
    return peak / 2**20


def engine_wall(m: dict) -> float:
    from eigensweep.vqe import run_optimize

    t0 = time.perf_counter()
    run_optimize(
        **m, ansatz={"name": "uccsd"}, optimizer={"name": "lbfgs"}, estimator={"name": "exact"}
    )
    return time.perf_counter() - t0


class Baseline:
    """OpenFermion sparse JW generators + SciPy expm_multiply + finite-difference gradients.

    With ``sample`` only every k-th generator / Hamiltonian term is built (20 qubits), and
    :meth:`timed_energy` scales the measured times to the full sets.
    """

    def __init__(self, m: dict, ansatz, sample: int | None = None) -> None:
        import openfermion as of

        from eigensweep.qubit.mapping import map_hamiltonian

        self.n = 2 * m["norb"]
        ops = ansatz.operator_list()
        chosen = ops if sample is None else ops[:: max(1, len(ops) // sample)][:sample]
        self.scale_gen = len(ops) / len(chosen)
        t0 = time.perf_counter()
        self.gens = []
        for op in chosen:
            fop = of.FermionOperator(tuple(tuple(t) for t in op["term"]), 1.0)
            gen = of.jordan_wigner(fop - of.hermitian_conjugated(fop))
            self.gens.append(of.get_sparse_operator(gen, self.n).tocsr())
        t_gen_setup = (time.perf_counter() - t0) * self.scale_gen
        t0 = time.perf_counter()
        qham = map_hamiltonian(m["h1e"], m["eri"], m["e_core"], "jordan_wigner").to_openfermion()
        items = sorted(qham.terms.items())
        if sample is None:
            self.ham = of.get_sparse_operator(qham, self.n).tocsr()
            self.ham_terms = []
            self.scale_ham = 1.0
        else:
            pick = items[:: max(1, len(items) // sample)][:sample]
            self.ham = None
            self.ham_terms = [
                (of.get_sparse_operator(of.QubitOperator(t, 1.0), self.n).tocsr(), c)
                for t, c in pick
            ]
            self.scale_ham = len(items) / len(pick)
        self.setup_s = t_gen_setup + (time.perf_counter() - t0) * self.scale_ham
        occ = ansatz.occupied_spin_orbitals()
        self.hf = np.zeros(1 << self.n, dtype=complex)
        self.hf[sum(1 << (self.n - 1 - k) for k in occ)] = 1.0

    def _state(self, theta: np.ndarray) -> np.ndarray:
        from scipy.sparse.linalg import expm_multiply

        psi = self.hf
        for g, t in zip(self.gens, theta, strict=False):
            psi = expm_multiply(float(t) * g, psi)
        return psi

    def _expect(self, psi: np.ndarray) -> float:
        if self.ham is not None:
            return float(np.vdot(psi, self.ham @ psi).real)
        return float(sum(c.real * np.vdot(psi, m @ psi).real for m, c in self.ham_terms))

    def energy(self, theta: np.ndarray) -> float:
        """Full energy (only meaningful without sampling)."""
        return self._expect(self._state(theta))

    def timed_energy(self, theta: np.ndarray) -> float:
        """Seconds for one energy, scaled from the sampled generators and terms."""
        t0 = time.perf_counter()
        psi = self._state(theta)
        t_state = time.perf_counter() - t0
        t0 = time.perf_counter()
        self._expect(psi)
        t_ham = time.perf_counter() - t0
        return t_state * self.scale_gen + t_ham * self.scale_ham


def worker(name: str, full_baseline: bool) -> dict:
    from scipy.optimize import minimize as sp_minimize

    from eigensweep.vqe import fci_ground_state

    m = integrals(name)
    e_fci = fci_ground_state(m["h1e"], m["eri"], m["e_core"], m["norb"], m["nelec"])[0]
    run = ours(m)
    out = {
        "case": name,
        "n_qubits": 2 * m["norb"],
        "n_params": run["n_params"],
        "ours_s": run["wall_s"],
        "ours_build_s": run["build_s"],
        "ours_evals": run["n_evaluations"],
        "ours_error_mha": 1e3 * (run["energy"] - e_fci),
        "converged": run["converged"],
        "e_fci": e_fci,
        "engine_s": engine_wall(m),
        "ours_rss_mib": resource.getrusage(resource.RUSAGE_SELF).ru_maxrss / 1024,
        "ours_traced_peak_mib": ours_traced_peak(m),
    }
    ansatz = run["ansatz"]
    big = out["n_qubits"] > 16
    base = Baseline(m, ansatz, sample=10 if big else None)
    out["baseline_setup_s"] = base.setup_s
    d = ansatz.n_params
    rng = np.random.default_rng(0)
    if name == "H2" or (full_baseline and name == "LiH"):
        t0 = time.perf_counter()
        r = sp_minimize(base.energy, np.zeros(d), method="L-BFGS-B", options={"maxiter": 2000})
        out["baseline_s"] = time.perf_counter() - t0
        out["baseline_kind"] = "measured (full run)"
        out["baseline_error_mha"] = 1e3 * (float(r.fun) - e_fci)
    else:
        theta = 0.05 * rng.standard_normal(d)
        if not big:
            # sanity check: the baseline energy equals ours at the same parameters
            out["energy_check"] = abs(base.energy(theta) - ansatz.energy(theta))
        n_energy = 1 if big else 3
        t_energy = sum(base.timed_energy(theta) for _ in range(n_energy)) / n_energy
        if name == "LiH":
            # one measured energy + forward-difference gradient, as a check of the formula
            t0 = time.perf_counter()
            f0 = base.energy(theta)
            for k in range(d):
                tp = theta.copy()
                tp[k] += 1e-7
                base.energy(tp)
            out["baseline_one_eval_grad_s"] = time.perf_counter() - t0
            del f0
        per_eval = (d + 1) * t_energy
        out["baseline_energy_s"] = t_energy
        out["baseline_s"] = per_eval * run["n_evaluations"]
        out["baseline_kind"] = "EXTRAPOLATED: (n_params+1) x t(energy) x our n_evaluations" + (
            " (t(energy) from 10 sampled generators/terms, scaled)" if big else ""
        )
    out["speedup"] = out["baseline_s"] / out["ours_s"]
    out["rss_mib"] = resource.getrusage(resource.RUSAGE_SELF).ru_maxrss / 1024
    return out


def main() -> None:
    ap = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    ap.add_argument("--cases", default="H2,LiH,BeH2,H2O,N2")
    ap.add_argument("--full-baseline", action="store_true", help="run LiH's baseline fully")
    ap.add_argument("--worker", default=None, help=argparse.SUPPRESS)
    args = ap.parse_args()
    if args.worker:
        print(json.dumps(worker(args.worker, args.full_baseline)))
        return
    rows = []
    for name in args.cases.split(","):
        cmd = [sys.executable, __file__, "--worker", name]
        if args.full_baseline:
            cmd.append("--full-baseline")
        proc = subprocess.run(cmd, capture_output=True, text=True, check=False)
        if proc.returncode != 0:
            print(f"{name}: worker failed\n{proc.stderr}", file=sys.stderr)
            continue
        row = json.loads(proc.stdout.strip().splitlines()[-1])
        rows.append(row)
        print(json.dumps(row))
    print()
    head = (
        f"{'case':5} {'qb':>3} {'npar':>5} {'ours s':>8} {'engine s':>8} {'evals':>5} "
        f"{'err mHa':>8} {'baseline s':>12} {'speedup':>9} {'RSS MiB':>8} {'traced MiB':>10}"
    )
    print(head)
    for r in rows:
        print(
            f"{r['case']:5} {r['n_qubits']:>3} {r['n_params']:>5} {r['ours_s']:>8.3f} "
            f"{r['engine_s']:>8.3f} {r['ours_evals']:>5} {r['ours_error_mha']:>8.4f} "
            f"{r['baseline_s']:>12.1f} {r['speedup']:>9.0f} {r['ours_rss_mib']:>8.0f} "
            f"{r['ours_traced_peak_mib']:>10.1f}"
        )
    print()
    for r in rows:
        extra = ""
        if "baseline_one_eval_grad_s" in r:
            extra = f"; one measured energy+FD-gradient: {r['baseline_one_eval_grad_s']:.1f} s"
        print(
            f"{r['case']}: baseline {r['baseline_kind']}; setup {r['baseline_setup_s']:.1f} s"
            f"{' (extrapolated from the sample)' if r['n_qubits'] > 16 else ''}"
            f"{extra}"
        )


if __name__ == "__main__":
    main()
