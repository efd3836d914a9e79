"""Benchmark of compilation for device targets: native two-qubit gates and depth after routing.

Run from the repository root::

    .venv/bin/python benchmarks/bench_targets.py            # H2, LiH (tapered), H2O (tapered)
    .venv/bin/python benchmarks/bench_targets.py --molecules h2 lih

For UCCSD circuits of H2 (4 qubits, untapered), LiH (tapered 12 -> 8 qubits) and H2O
(tapered 14 -> 10 qubits), all STO-3G with symmetry-adapted orbitals and Jordan-Wigner, it
prints the all-to-all CNOT count and depth (the generic target: the ansatz compiler's
circuit, textbook CNOT ladders) and, on each example target in ``config/targets/`` (a
12-qubit line, a 3 x 4 grid, a 12-ion all-to-all device with an ``rxx`` entangler), the
native two-qubit gate count, depth and inserted swaps after SABRE routing (Li, Ding, Xie,
ASPLOS 2019) and after a naive nearest-neighbour swap chain, in one run, with the ratio
naive / SABRE and the compile time. The parameters are those after two L-BFGS iterations
from zero: every symmetry-allowed excitation has a non-zero angle (so it costs gates), the
symmetry-forbidden ones stay at exactly zero as in an optimized circuit.
"""

from __future__ import annotations

import argparse
import time
from pathlib import Path

from _molecules import rhf_integrals

from eigensweep.device.compile import compile_for_target, estimate_cost
from eigensweep.qubit import map_hamiltonian, reduce_to_sector, reference_bits
from eigensweep.target import load_target
from eigensweep.vqe import run_optimize
from eigensweep.vqe.circuits import circuit_from_meta

ROOT = Path(__file__).resolve().parents[1]
GEOMETRIES = {
    "h2": ("H 0 0 0; H 0 0 0.7414", False),
    "lih": ("Li 0 0 0; H 0 0 1.595", True),
    "h2o": ("O 0 0 0.1173; H 0 0.7572 -0.4692; H 0 -0.7572 -0.4692", True),
}
TARGETS = ("chain12-demo", "grid3x4-demo", "ion12-demo")


def uccsd_circuit(name: str):
    """The UCCSD circuit of ``name`` (see the module docstring) and its qubit count."""
    atoms, tapered = GEOMETRIES[name]
    ints, _ = rhf_integrals(atoms, conv_tol=None)
    norb = ints["norb"]
    ham = map_hamiltonian(ints["h1e"], ints["eri"], ints["e_core"], "jordan_wigner")
    bits = reference_bits(ints["nelec"], norb, "jordan_wigner")
    tap = reduce_to_sector(ham, bits) if tapered else None
    res = run_optimize(
        **ints,
        ansatz={"name": "uccsd"},
        optimizer={"name": "lbfgs", "maxiter": 2},
        estimator={"name": "exact"},
        **({"tapering": tap} if tap is not None else {}),
    )
    return circuit_from_meta(res.ansatz_meta, res.params, "jordan_wigner"), tapered


def main() -> None:
    ap = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    ap.add_argument("--molecules", nargs="+", default=list(GEOMETRIES), choices=list(GEOMETRIES))
    args = ap.parse_args()
    targets = {t: load_target(ROOT / "config" / "targets" / f"{t}.yaml") for t in TARGETS}
    head = (
        f"{'molecule':<10} {'qubits':>6} {'target':<14} {'router':<6} {'2q gates':>8} "
        f"{'x all-to-all':>12} {'depth':>6} {'swaps':>6} {'fidelity':>9} {'compile s':>9}"
    )
    rows = []
    for name in args.molecules:
        t0 = time.perf_counter()
        circ, tapered = uccsd_circuit(name)
        label = f"{name}{' (tap.)' if tapered else ''}"
        print(f"{label}: {circ.n_qubits} qubits, circuit built in {time.perf_counter() - t0:.1f} s")
        base = circ.cnot_count
        rows.append(
            f"{label:<10} {circ.n_qubits:>6} {'all-to-all':<14} {'-':<6} {base:>8} "
            f"{1.0:>12.2f} {circ.depth:>6} {0:>6} {'':>9} {'':>9}"
        )
        for tname, target in targets.items():
            for router in ("sabre", "naive"):
                if target.all_to_all and router == "naive":
                    continue
                t0 = time.perf_counter()
                comp = compile_for_target(circ, target, router=router)
                dt = time.perf_counter() - t0
                cost = estimate_cost(comp.circuit, target, comp.measured_qubits)
                n2 = comp.circuit.two_qubit_count
                rows.append(
                    f"{label:<10} {circ.n_qubits:>6} {tname:<14} {router:<6} {n2:>8} "
                    f"{n2 / max(base, 1):>12.2f} {comp.circuit.depth:>6} {comp.swaps:>6} "
                    f"{cost.fidelity:>9.2e} {dt:>9.2f}"
                )
    print()
    print(head)
    print("\n".join(rows))
    print(
        "\n2q gates: native two-qubit gates of the routed, peephole-simplified state "
        "preparation; x all-to-all: ratio to the all-to-all CNOT count; fidelity: the cost "
        "model's estimate (config/README.md), not a prediction"
    )


if __name__ == "__main__":
    main()
