"""Benchmark: optimization under shot noise, median over seeds (not part of ``make test``).

Part ``h2``: H2/STO-3G (0.74 Å, RHF with point-group symmetry, Jordan-Wigner), UCCSD, tapered and
untapered, 1000 shots per energy evaluation (and per shifted circuit of a gradient), every
shot-capable optimizer, ``--seeds`` seeds (default 10). Prints the median over seeds of the
reported energy's error ``|E - E_FCI|`` (final fresh estimate, ``final_shots`` = 1000), of the
state's own error ``E_exact(theta) - E_FCI`` and the median total shots of the job.

Part ``lih``: LiH/STO-3G (1.595 Å, symmetry orbitals, Jordan-Wigner, tapered to 8 qubits),
UCCSD (34 parameters after tapering), every optimizer with budgets ``max_shots`` in
``--budgets`` (default 1e6, 1e7, 1e8) and ``--lih-seeds`` seeds (default 5). It prints the median
over seeds of the state error, for each budget in ``--budgets``: the shots an optimizer needs
for 1.6 mHa are read off as the smallest budget that reaches it.

The reference is PySCF FCI computed here. Usage:
``python benchmarks/bench_shots.py [--parts h2,lih] [--seeds 10] [--lih-seeds 5]
[--budgets 1e6,1e7,1e8] [--optimizers spsa,adam]``
"""

from __future__ import annotations

import argparse
import time

import numpy as np
from pyscf import ao2mo, fci, gto, scf

from eigensweep.qubit import map_hamiltonian, reduce_to_sector, reference_bits
from eigensweep.vqe import run_optimize

GEOMETRY = {"H2": "H 0 0 0; H 0 0 0.74", "LiH": "Li 0 0 0; H 0 0 1.595"}


def problem(name: str) -> tuple[dict, float, object]:
    mol = gto.M(atom=GEOMETRY[name], basis="sto-3g", symmetry=True, verbose=0)
    mf = scf.RHF(mol)
    mf.conv_tol = 1e-12
    mf.kernel()
    c = mf.mo_coeff
    norb = c.shape[1]
    ints = {
        "h1e": c.T @ mf.get_hcore() @ c,
        "eri": ao2mo.restore(1, ao2mo.kernel(mol, c), norb),
        "e_core": float(mol.energy_nuc()),
        "norb": int(norb),
        "nelec": (int(mol.nelec[0]), int(mol.nelec[1])),
    }
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


def lih_optimizers(budget: int) -> dict[str, tuple[dict, int]]:
    """name -> (optimizer with ``max_shots = budget``, shots per energy or shifted circuit).

    SPSA's gain schedule depends on its length, so its ``maxiter`` is what the budget buys
    (two evaluations per iteration, three with blocking; ``A`` = 0.1 maxiter as Spall 1998
    prescribes).
    """
    spsa_iter = max(budget // (2 * 1000), 10)
    # UCCSD amplitudes of LiH are 1e-3..1e-1 rad: the first step is set to 0.01 rad (Spall
    # 1998: a from the smallest desired change in early iterations)
    spsa = {"name": "spsa", "first_step": 0.01, "max_shots": budget}
    return {
        "spsa": ({**spsa, "maxiter": spsa_iter}, 1000),
        "spsa_blocking": (
            {**spsa, "maxiter": max(spsa_iter * 2 // 3, 10), "blocking": True},
            1000,
        ),
        "adam": ({"name": "adam", "maxiter": 100000, "lr": 0.01, "max_shots": budget}, 1000),
        "shot_adaptive_descent": (
            {"name": "shot_adaptive_descent", "maxiter": 100000, "max_shots": budget},
            1000,
        ),
        "cobyla": ({"name": "cobyla", "maxiter": 100000, "max_shots": budget}, 10000),
    }


def part_lih(n_seeds: int, budgets: list[int], only: list[str] | None) -> None:
    ints, e_fci, tap = problem("LiH")
    print(f"LiH/STO-3G tapered ({tap.n_qubits} qubits), E_FCI = {e_fci:.6f} Eh")
    print("median over seeds of the state error E_exact(theta) - E_FCI at the end of each budget")
    print("optimizer              shots/est  " + "  ".join(f"{b:>10.0e}" for b in budgets))
    names = list(lih_optimizers(budgets[0]))
    for label in names:
        if only and label not in only:
            continue
        cells = []
        for budget in budgets:
            opt, shots = lih_optimizers(budget)[label]
            t0 = time.perf_counter()
            res = [run(ints, tap, opt, shots, s) for s in range(n_seeds)]
            wall = (time.perf_counter() - t0) / n_seeds
            err = np.median([r.energy_exact_at_params - e_fci for r in res]) * 1e3
            spent = np.median([r.shots_total for r in res])
            cells.append(f"{err:7.2f} mHa")
            print(
                f"  {label} budget {budget:.0e}: median state error {err:.3f} mHa, reported "
                f"|E-E_FCI| {np.median([abs(r.energy - e_fci) for r in res]) * 1e3:.2f} mHa, "
                f"shots {spent:.3g}, stop {sorted({r.stop_reason for r in res})}, {wall:.0f} s/run",
                flush=True,
            )
        print(f"{label:22} {shots:9d}  " + "  ".join(cells), flush=True)


def main() -> None:
    ap = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    ap.add_argument("--parts", default="h2,lih")
    ap.add_argument("--seeds", type=int, default=10)
    ap.add_argument("--lih-seeds", type=int, default=5)
    ap.add_argument("--budgets", default="1e6,1e7,1e8", help="max_shots values, comma list")
    ap.add_argument("--optimizers", default="", help="comma list of optimizer labels")
    ap.add_argument("--final-shots", type=int, default=1000, help="H2 final estimate shots")
    a = ap.parse_args()
    parts = a.parts.split(",")
    if "h2" in parts:
        part_h2(a.seeds, [o for o in a.optimizers.split(",") if o] or None, a.final_shots)
    if "lih" in parts:
        budgets = [int(float(b)) for b in a.budgets.split(",")]
        part_lih(a.lih_seeds, budgets, [o for o in a.optimizers.split(",") if o] or None)


if __name__ == "__main__":
    main()
