"""Benchmark: optimization under shot noise, median over seeds (not part of ``make test``).

Part ``h2``: H2/STO-3G (0.74 Å, RHF with point-group symmetry, Jordan-Wigner), UCCSD, tapered and
untapered, 1000 shots per energy evaluation (and per shifted circuit of a gradient), every
shot-capable optimizer, ``--seeds`` seeds (default 10). Prints the median over seeds of the
reported energy's error ``|E - E_FCI|`` (final fresh estimate, ``--final-shots``, default
1000), of the
state's own error ``E_exact(theta) - E_FCI`` and the median total shots of the job.

Part ``lih``: LiH/STO-3G (1.595 Å, symmetry orbitals, Jordan-Wigner, tapered to 8 qubits),
UCCSD (34 parameters after tapering), ``--lih-seeds`` seeds (default 5), the shot-based
optimizers with their defaults, printed as one table: the median over seeds of the shots
needed for a state error ``E_exact(theta) - E_FCI`` under 1.6 mHa, and the median (min, max)
state error at the end. adam (10000 shots per shifted circuit) and shot_adaptive_descent
trace every gradient step at the current parameters with the exact energy there (a simulator
diagnostic): one run per seed with ``max_shots`` = the largest of ``--budgets``, stopped once
the error stayed under 1.6 mHa for ``--window`` steps; the shots needed are those spent when
that final run under 1.6 mHa began. SPSA traces only its perturbed points: it runs with every
budget of ``--budgets`` (default 1e6, 1e7, 1e8), about 500 iterations each with ``budget /
1022`` shots per estimate (``spsa_1000_shots``: 1000 shots, ``maxiter`` = what the budget
buys), and the shots needed are the smallest budget whose median is under 1.6 mHa. CPU
seconds per seed are printed (``time.process_time``).

The reference is PySCF FCI computed here. Usage:
``python benchmarks/bench_shots.py [--parts h2,lih] [--seeds 10] [--lih-seeds 5]
[--budgets 1e6,1e7,1e8] [--window 10] [--optimizers spsa,adam] [--final-shots 1000]``; the
figures and commands of the last measurement are in DEVELOPERS.md ("Shot budgets on LiH")
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
from eigensweep.vqe.estimators import MeasurementPlan, ShotBudgetExhausted

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
    "adam": {"name": "adam"},
    "adam_lr_0.02": {"name": "adam", "lr": 0.02},  # the former default
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


#: SPSA iterations in the LiH table: its error at a budget is limited both by the noise of each
#: estimate and by its number of iterations, and about 500 iterations did best at every budget
#: measured (config/README.md), so each budget buys SPSA ``budget / (2 x 500)`` shots per estimate
SPSA_ITERATIONS = 500
#: shots per shifted circuit of adam in the LiH table (``gradient_shots`` = estimator shots)
ADAM_SHOTS = 10000


def spsa_maxiter(budget: int, cost: int, gain_estimates: int = 10) -> int:
    """The iterations a budget buys: two estimates per iteration after the calibration's
    ``2 gain_estimates`` and the final point's and fresh final estimate's (``cost`` shots each
    after the estimator's allocation)."""
    return max((budget - (2 * gain_estimates + 2) * cost) // (2 * cost), 10)


def lih_optimizers(budget: int, cost) -> dict[str, tuple[dict, int]]:
    """name -> (optimizer with ``max_shots = budget``, shots per energy or shifted circuit).

    SPSA runs with the schema defaults (Spall 1998 calibration, see config/README.md) and
    ``budget / (2 SPSA_ITERATIONS)`` shots per estimate (and, for comparison, 1000 shots per
    estimate, the estimator's default); its gain schedule depends on its length, so its
    ``maxiter`` is what the budget buys (:func:`spsa_maxiter`; ``cost(shots)`` = shots after
    the estimator's allocation). adam (also with the former default ``lr`` 0.02) and
    shot_adaptive_descent run with their defaults.
    """
    opts = {}
    per = max(budget // (2 * SPSA_ITERATIONS + 2 * 10 + 2), 1000)
    for label, shots in (("spsa", per), ("spsa_1000_shots", 1000)):
        maxiter = spsa_maxiter(budget, cost(shots))
        opts[label] = ({"name": "spsa", "maxiter": maxiter, "max_shots": budget}, shots)
    adam = {"name": "adam", "maxiter": 100000, "max_shots": budget}
    opts["adam"] = (adam, ADAM_SHOTS)
    opts["adam_lr_0.02"] = ({**adam, "lr": 0.02}, ADAM_SHOTS)  # the former default
    opts["shot_adaptive_descent"] = (
        {"name": "shot_adaptive_descent", "maxiter": 100000, "max_shots": budget},
        1000,
    )
    return opts


#: optimizers whose every trace record is a gradient step at the current parameters, so the
#: traced exact energy is the state error of the current iterate
ITERATE_TRACED = ("adam", "adam_lr_0.02", "shot_adaptive_descent")


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
    plan = MeasurementPlan(tap.hamiltonian)

    def cost(shots: int) -> int:
        return int(plan.allocate(shots).sum())

    cap = max(budgets)
    rows = []
    for label in lih_optimizers(cap, cost):
        if only and label not in only:
            continue
        t0 = time.process_time()
        if label in ITERATE_TRACED:  # one run per seed up to the cap, stopped at the target
            opt, shots = lih_optimizers(cap, cost)[label]
            res = []
            for s in range(n_seeds):
                with stop_at_target(e_fci, window) as streak:
                    r = run(ints, tap, opt, shots, s)
                reached = streak[0] >= window
                res.append((r, shots_to_target(r, e_fci, window) if reached else math.inf))
            need = _median_shots([n for _, n in res])
            final = [r for r, _ in res]
        else:  # iterate not traced: every budget; the smallest one whose median is under it
            need = "not reached"
            for budget in sorted(budgets):
                opt, shots = lih_optimizers(budget, cost)[label]
                final = [run(ints, tap, opt, shots, s) for s in range(n_seeds)]
                errs = [(r.energy_exact_at_params - e_fci) * 1e3 for r in final]
                print(
                    f"  {label} budget {budget:.0e} ({shots} shots per estimate, maxiter "
                    f"{opt['maxiter']}): state error median {np.median(errs):.2f} mHa "
                    f"(min {np.min(errs):.2f}, max {np.max(errs):.2f})",
                    flush=True,
                )
                if np.median(errs) < TARGET_MHA and need == "not reached":
                    need = f"<= {budget:.0e}"
        errs = [(r.energy_exact_at_params - e_fci) * 1e3 for r in final]
        rows.append(
            f"{label:22} {need:>14} {np.median(errs):13.2f} {np.min(errs):7.2f} "
            f"{np.max(errs):7.2f} {np.median([r.shots_total for r in final]):12.3g} "
            f"{(time.process_time() - t0) / n_seeds:7.0f}"
        )
        print(rows[-1], flush=True)
    print(
        f"\nLiH/STO-3G tapered ({tap.n_qubits} qubits), UCCSD, "
        f"{n_seeds} seeds, budget cap {cap:.0e} shots; E_FCI = {e_fci:.6f} Eh (PySCF)"
    )
    print(
        f"shots to {TARGET_MHA} mHa: median over seeds of the shots when the exact error of "
        f"the current parameters entered its final run of >= {window} steps under "
        f"{TARGET_MHA} mHa (adam, shot_adaptive_descent; run stopped there), or the smallest "
        f"budget of {','.join(f'{b:.0e}' for b in sorted(budgets))} whose median state error "
        "is under it (spsa); errors = E_exact(theta) - E_FCI at the end (mHa)"
    )
    print(
        f"shots per estimate: spsa budget / {2 * SPSA_ITERATIONS + 22} (about "
        f"{SPSA_ITERATIONS} iterations), spsa_1000_shots 1000, adam {ADAM_SHOTS} per shifted "
        "circuit, shot_adaptive_descent its own (from min_shots 100); CPU s per seed (all "
        "budgets)"
    )
    print("optimizer              shots to 1.6  median err     min     max  shots spent   CPU s")
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
