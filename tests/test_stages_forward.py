"""Data flows forward through hamiltonian -> taper -> export -> reconcile (run in-process).

A tiny H2 sweep (STO-3G, one point, tapering off and on, one exported point per tapering,
answered by the synthetic device) is run through the stage actions without Snakemake. Checks:
the taper file carries the Z2 generators and sector also when tapering is off (3 generators for
H2: 4 -> 1 qubits, Bravyi, Gambetta, Mezzacapo, Temme, arXiv:1701.08213) with sector values
checked against OpenFermion's sparse operators; reconcile verifies symmetries from that file
without running the tapering again; and summary costs equal the exported job's.
"""

from __future__ import annotations

import csv
import os
from pathlib import Path

import numpy as np
import pytest
import yaml

from eigensweep.collect import collect
from eigensweep.config import load_config
from eigensweep.plan import build_plan, parent_files
from eigensweep.stage_table import stage_path
from eigensweep.stages import STAGE_ACTIONS, load_diagonal_symmetries
from eigensweep.store import read_stage

CONFIG = {
    "molecules": [{"name": "h2", "atoms": "H 0 0 0; H 0 0 {r}", "scan": {"r": [0.74]}}],
    "methods": {"taper": [False, True], "optimizer": [{"name": "lbfgs"}]},
    "export": {"select": [{"molecule": "h2", "point": "r=0.74"}], "shots": 8000},
}


@pytest.fixture(scope="module")
def sweep(tmp_path_factory):
    """Plan and results folder of the tiny sweep; taper and reconcile stay uncomputed."""
    import importlib

    import eigensweep.qubit as qubit_package

    taper_module = importlib.import_module("eigensweep.qubit.taper")
    names = ("reduce_to_sector", "symmetry_null_space", "diagonal_symmetries")
    real = {(m, k): getattr(m, k) for m in (qubit_package, taper_module) for k in names}

    def refuse(*args, **kwargs):
        raise AssertionError("reconcile re-ran the tapering")

    work = tmp_path_factory.mktemp("forward")
    cwd = Path.cwd()
    os.chdir(work)
    try:
        (work / "c.yaml").write_text(yaml.safe_dump(CONFIG))
        cfg = load_config(work / "c.yaml")
        plan = build_plan(cfg, base_dir=".")
        for node in plan.nodes.values():  # parents first
            if node.stage == "reconcile":  # must read the stored symmetries, never taper again
                for m, k in real:
                    setattr(m, k, refuse)
            try:
                out = str(stage_path(node.stage, node.key))
                STAGE_ACTIONS[node.stage](node, parent_files(node), out)
            finally:
                for (m, k), f in real.items():
                    setattr(m, k, f)
        collect(plan.rows, "results", cfg["collect"]["accuracy_mha"], plan.exports)
        yield work, plan
    finally:
        os.chdir(cwd)


def _files(work: Path, plan, stage: str) -> list:
    return [
        read_stage(work / stage_path(n.stage, n.key), stage=stage) for n in plan.by_stage(stage)
    ]


def test_taper_file_carries_z2_symmetries_when_tapering_is_off(sweep):
    import openfermion as of

    work, plan = sweep
    for sd in _files(work, plan, "taper"):
        gens, sector = load_diagonal_symmetries(sd)
        # H2 / STO-3G, Jordan-Wigner: 3 independent Z2 symmetries, 4 -> 1 qubits
        # (Bravyi et al. 2017, arXiv:1701.08213)
        assert gens.n_terms == 3 and gens.n_qubits == 4
        ham_sd = read_stage(
            work / stage_path("hamiltonian", sd.parents["hamiltonian"]), stage="hamiltonian"
        )
        ref = np.asarray(ham_sd.arrays["reference_bits"])
        hf = np.zeros(16)
        hf[int("".join(map(str, ref)), 2)] = 1.0
        for i, s in enumerate(sector):
            # reference: OpenFermion's sparse operator of each generator on the HF state
            mat = of.get_sparse_operator(gens.subset([i]).to_openfermion(), 4)
            assert (hf @ (mat @ hf)).real == pytest.approx(float(s), abs=1e-12)
        assert sd.meta["n_z2_symmetries"] == 3


def test_taper_file_carries_the_tapered_number_and_spin_operators(sweep):
    from eigensweep.qubit import PauliExpansion
    from eigensweep.qubit.statevector import basis_state, expectation

    work, plan = sweep
    for sd in _files(work, plan, "taper"):
        ref = np.asarray(sd.arrays["taper/reference_bits"])
        number = PauliExpansion.from_store(sd.arrays, "number/")
        spin_z = PauliExpansion.from_store(sd.arrays, "spin_z/")
        # the HF reference of H2 has N = 2 and S_z = 0 (closed shell, Szabo & Ostlund)
        assert expectation(basis_state(ref), number) == pytest.approx(2.0, abs=1e-12)
        assert expectation(basis_state(ref), spin_z) == pytest.approx(0.0, abs=1e-12)


def test_reconcile_verifies_the_untapered_job_with_stored_symmetries(sweep):
    work, plan = sweep
    rec = {sd.meta["job_id"]: sd for sd in _files(work, plan, "reconcile")}
    assert len(rec) == 2
    verified = [sd for sd in rec.values() if sd.meta["estimates"]["symmetry_verified"]]
    # only the untapered job has symmetries left on its qubits (common practice)
    assert len(verified) == 1 and verified[0].meta["n_qubits"] == 4


def test_summary_costs_equal_the_exported_jobs(sweep):
    work, plan = sweep
    rows = {r["key"]: r for r in csv.DictReader((work / "results" / "main" / "summary.csv").open())}
    exports = _files(work, plan, "export")
    assert len(exports) == 2
    for sd in exports:
        row = rows[sd.parents["optimize"]]
        prep = sd.meta["manifest"]["state_preparation"]
        assert (int(row["cnot_count"]), int(row["depth"])) == (prep["cnot_count"], prep["depth"])
        assert (sd.meta["cnot_count"], sd.meta["depth"]) == (prep["cnot_count"], prep["depth"])
    # the untapered H2 state: one double excitation, 8 JW strings of weight 4, 2(w - 1) CNOTs
    # each (Nielsen & Chuang (2000), section 4.7.3); the tapered one: one 1-qubit rotation
    assert sorted(int(rows[sd.parents["optimize"]]["cnot_count"]) for sd in exports) == [0, 48]
