"""Benchmark: optimization under shot noise, median over seeds (not part of ``make test``).

Part ``h2``: H2/STO-3G (0.74 Å, RHF with point-group symmetry, Jordan-Wigner), UCCSD, tapered and
untapered, 1000 shots per energy evaluation (and per shifted circuit of a gradient), every
shot-capable optimizer, ``--seeds`` seeds (default 10). Prints the median over seeds of the
reported energy's error ``|E - E_FCI|`` (final fresh estimate, ``final_shots`` = 1000), of the
state's own error ``E_exact(theta) - E_FCI`` and the median total shots of the job.

Part ``lih``: LiH/STO-3G (1.595 Å, symmetry orbitals, Jordan-Wigner, tapered to 8 qubits),
UCCSD (34 parameters after tapering), 1000 shots per estimate, ``--lih-seeds`` seeds (default
5), the shot-based optimizers adam, shot_adaptive_descent and spsa, printed as one table: the
median over seeds of the shots needed for a state error ``E_exact(theta) - E_FCI`` under
1.6 mHa, and the median (min, max) state error at the end. adam and shot_adaptive_descent trace
every gradient step at the current parameters with the exact energy there (a simulator
diagnostic): one run per seed with ``max_shots`` = the largest of ``--budgets``, stopped once
the error stayed under 1.6 mHa for ``--window`` steps; the shots needed are those spent when
that final run under 1.6 mHa began. SPSA traces only its perturbed points: it runs with each
budget of ``--budgets`` (default 1e6, 1e7, 1e8; ``maxiter`` = what the budget buys) and the
shots needed are the smallest budget whose median reaches 1.6 mHa.

The reference is PySCF FCI computed here. Usage:
``python benchmarks/bench_shots.py [--parts h2,lih] [--seeds 10] [--lih-seeds 5]
[--budgets 1e6,1e7,1e8] [--window 10] [--optimizers spsa,adam]``
"""

from __future__ import annotations

import argparse
import contextlib
import math
import time

import numpy as np
from _molecules import rhf_integrals
from pyscf import fci

from eigensweep.qubit import map_hamiltonian, reduce_to_sector, reference_bits
from eigensweep.vqe import engine, run_optimize
from eigensweep.vqe.estimators import ShotBudgetExhausted

GEOMETRY = {"H2": "H 0 0 0; H 0 0 0.74", "LiH": "Li 0 0 0; H 0 0 1.595"}


def problem(name: str) -> tuple[dict, float, object]:
    ints, mf = rhf_integrals(GEOMETRY[name])
    e_fci = float(fci.FCI(mf).kernel()[0])
    ham = map_hamiltonian(ints["h1e"], ints["eri"], ints["e_core"], "jordan_wigner")
    tap = reduce_to_sector(ham, reference_bits(ints["nelec"], ints["norb"], "jordan_wigner"))
    return ints, e_fci, tap


def run(ints, tap, optimizer: dict, shots: int, seed: int, final_shots: int | None = None):
    return run_optimize(
        **ints,
        ansatz={"name": "uccsd"},
        optimizer=optimizer,
        estimator={"name": "shots", "shots": shots, "final_shots": final_shots},
        mapping="jordan_wigner",
        tapering=tap,
        seed=seed,
    )


H2_OPTIMIZERS = {
    "spsa": {"name": "spsa", "maxiter": 300},
    "spsa_blocking": {"name": "spsa", "maxiter": 300, "blocking": True, "resamplings": 2},
    "adam": {"name": "adam", "maxiter": 100, "lr": 0.05},
    "shot_adaptive_descent": {"name": "shot_adaptive_descent", "maxiter": 100},
    "cobyla": {"name": "cobyla", "maxiter": 200},
}


def part_h2(n_seeds: int, only: list[str] | None, final_shots: int) -> None:
    ints, e_fci, tap = problem("H2")
    print(f"H2/STO-3G, E_FCI = {e_fci:.6f} Eh; 0.5 % of it = {abs(e_fci) * 5:.1f} mHa")
    print(f"1000 shots per evaluation, final estimate with {final_shots} fresh shots")
    print("tapered  optimizer              |E-E_FCI| median  state err median  shots median  s/run")
    for tapered in (False, True):
        for label, opt in H2_OPTIMIZERS.items():
            if only and label not in only:
                continue
            t0 = time.perf_counter()
            tp = tap if tapered else None
            res = [run(ints, tp, opt, 1000, s, final_shots) for s in range(n_seeds)]
            wall = (time.perf_counter() - t0) / n_seeds
            err = np.median([abs(r.energy - e_fci) for r in res]) * 1e3
            state = np.median([r.energy_exact_at_params - e_fci for r in res]) * 1e3
            shots = np.median([r.shots_total for r in res])
            print(
                f"{tapered!s:8} {label:22} {err:9.2f} mHa {state:13.3f} mHa {shots:13.3g} {wall:6.1f}"
            )


TARGET_MHA = 1.6


def lih_optimizers(budget: int) -> dict[str, tuple[dict, int]]:
    """name -> (optimizer with ``max_shots = budget``, shots per energy or shifted circuit).

    SPSA runs with the schema defaults (Spall 1998 calibration, see config/README.md) and with
    the former default ``first_step`` 0.003 for comparison; its gain
    schedule depends on its length, so its ``maxiter`` is what the budget buys (two
    evaluations per iteration, about 1150 shots each after the estimator's rounding per group).
    """
    return {
        "spsa": ({"name": "spsa", "maxiter": max(budget // 2400, 10), "max_shots": budget}, 1000),
        # the former default first step, for comparison (config/README.md)
        "spsa_first_step_0.003": (
            {
                "name": "spsa",
                "maxiter": max(budget // 2400, 10),
                "max_shots": budget,
                "first_step": 0.003,
            },
            1000,
        ),
        "adam": ({"name": "adam", "maxiter": 100000, "lr": 0.01, "max_shots": budget}, 1000),
        "shot_adaptive_descent": (
            {"name": "shot_adaptive_descent", "maxiter": 100000, "max_shots": budget},
            1000,
        ),
    }


#: optimizers whose every trace record is a gradient step at the current parameters, so the
#: traced exact energy is the state error of the current iterate
ITERATE_TRACED = ("adam", "shot_adaptive_descent")


@contextlib.contextmanager
def stop_at_target(e_fci: float, window: int):
    """Stop a run (as a spent budget does) once the exact-energy error of the traced points
    stayed under ``TARGET_MHA`` for ``window`` consecutive records (benchmark-only hook on the
    engine's trace monitor; the traced exact energy is a simulator diagnostic)."""
    original = engine._Objective.monitor
    streak = [0]

    def monitor(self, theta):
        rec = original(self, theta)
        streak[0] = streak[0] + 1 if (rec["energy_exact"] - e_fci) * 1e3 < TARGET_MHA else 0
        if streak[0] >= window:
            raise ShotBudgetExhausted(f"target {TARGET_MHA} mHa held for {window} steps")
        return rec

    engine._Objective.monitor = monitor
    try:
        yield streak
    finally:
        engine._Objective.monitor = original


def shots_to_target(res, e_fci: float, window: int) -> float:
    """Shots spent when the traced error entered its final streak under the target (inf if
    the run did not end in one of at least ``window`` records)."""
    err = (np.asarray(res.trace_energy_exact) - e_fci) * 1e3
    above = np.flatnonzero(~(err < TARGET_MHA))
    start = above[-1] + 1 if above.size else 0
    streak = err.size - start
    if streak < window and res.stop_reason != "shot_budget":
        return math.inf
    if streak == 0:
        return math.inf
    return float(res.trace_shots_cumulative[start])


def _median_shots(values: list[float]) -> str:
    med = float(np.median(values))
    return f"{med:.3g}" if math.isfinite(med) else "not reached"


def part_lih(n_seeds: int, budgets: list[int], only: list[str] | None, window: int) -> None:
    ints, e_fci, tap = problem("LiH")
    cap = max(budgets)
    rows = []
    for label in lih_optimizers(cap):
        if only and label not in only:
            continue
        t0 = time.perf_counter()
        if label in ITERATE_TRACED:  # one run per seed up to the cap, stopped at the target
            opt, shots = lih_optimizers(cap)[label]
            res = []
            for s in range(n_seeds):
                with stop_at_target(e_fci, window) as streak:
                    r = run(ints, tap, opt, shots, s)
                reached = streak[0] >= window
                res.append((r, shots_to_target(r, e_fci, window) if reached else math.inf))
            need = _median_shots([n for _, n in res])
            final = [r for r, _ in res]
        else:  # iterate not traced: budgets, the smallest one whose median reaches the target
            need = "not reached"
            for budget in sorted(budgets):
                opt, shots = lih_optimizers(budget)[label]
                final = [run(ints, tap, opt, shots, s) for s in range(n_seeds)]
                med = np.median([r.energy_exact_at_params - e_fci for r in final]) * 1e3
                print(
                    f"  {label} budget {budget:.0e}: median state error {med:.2f} mHa", flush=True
                )
                if med < TARGET_MHA:
                    need = f"<= {budget:.0e}"
                    break
        errs = [(r.energy_exact_at_params - e_fci) * 1e3 for r in final]
        rows.append(
            f"{label:22} {need:>14} {np.median(errs):13.2f} {np.min(errs):7.2f} "
            f"{np.max(errs):7.2f} {np.median([r.shots_total for r in final]):12.3g} "
            f"{(time.perf_counter() - t0) / n_seeds:7.0f}"
        )
        print(rows[-1], flush=True)
    print(
        f"\nLiH/STO-3G tapered ({tap.n_qubits} qubits), UCCSD, 1000 shots per estimate, "
        f"{n_seeds} seeds, budget cap {cap:.0e} shots; E_FCI = {e_fci:.6f} Eh (PySCF)"
    )
    print(
        f"shots to {TARGET_MHA} mHa: median over seeds of the shots when the exact error of "
        f"the current parameters entered its final run of >= {window} steps under "
        f"{TARGET_MHA} mHa (adam, shot_adaptive_descent; run stopped there), or the smallest "
        f"budget of {','.join(f'{b:.0e}' for b in sorted(budgets))} whose median state error "
        "is under it (spsa); errors = E_exact(theta) - E_FCI at the end (mHa)"
    )
    print("optimizer              shots to 1.6  median err     min     max  shots spent   s/run")
    for row in rows:
        print(row)


def main() -> None:
    ap = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    ap.add_argument("--parts", default="h2,lih")
    ap.add_argument("--seeds", type=int, default=10)
    ap.add_argument("--lih-seeds", type=int, default=5)
    ap.add_argument("--budgets", default="1e6,1e7,1e8", help="max_shots values, comma list")
    ap.add_argument("--optimizers", default="", help="comma list of optimizer labels")
    ap.add_argument("--window", type=int, default=10, help="steps under 1.6 mHa that stop a run")
    ap.add_argument("--final-shots", type=int, default=1000, help="H2 final estimate shots")
    a = ap.parse_args()
    parts = a.parts.split(",")
    if "h2" in parts:
        part_h2(a.seeds, [o for o in a.optimizers.split(",") if o] or None, a.final_shots)
    if "lih" in parts:
        budgets = [int(float(b)) for b in a.budgets.split(",")]
        part_lih(a.lih_seeds, budgets, [o for o in a.optimizers.split(",") if o] or None, a.window)


if __name__ == "__main__":
    main()
