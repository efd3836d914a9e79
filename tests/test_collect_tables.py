"""Study tables: missing values, honest flags, units in column names, README of the columns."""

from __future__ import annotations

import csv
import math
from pathlib import Path

import pytest
from fixtures import run_plan

from eigensweep.collect import (
    DEVICE_COLUMNS,
    KCAL_MOL_PER_HARTREE,
    SUMMARY_COLUMNS,
    collect,
    summary_rows,
)
from eigensweep.store import read_stage, write_stage

RAW = {
    "molecules": [
        {"name": "h2", "atoms": "H 0 0 0; H 0 0 {r}", "scan": {"r": [0.74, 1.5]}},
    ],
    "methods": {
        "taper": [False],
        "optimizer": [{"name": "cobyla", "maxiter": 40}],
        "estimator": [{"name": "shots", "shots": 500}],
    },
    "seed": 3,
}


@pytest.fixture(scope="module")
def shot_study(tmp_path_factory):
    results = tmp_path_factory.mktemp("tables") / "results"
    cfg, plan = run_plan(RAW, results)
    files = collect(plan.rows, results, cfg["collect"]["accuracy_mha"], plan.exports, study="t")
    return results, plan, files


def _rows(path: Path) -> list[dict]:
    with open(path, newline="") as fh:
        return list(csv.DictReader(fh))


def test_nan_overlap_does_not_lose_the_summary(shot_study, tmp_path):
    # issue: an optimize file storing overlap_exact as null (JSON for nan) made collect raise
    # TypeError and no summary was written. Rewrite one stage file that way and collect again.
    results, plan, _ = shot_study
    row = plan.rows[0]
    sd = read_stage(results / "optimize" / f"{row['key']}.h5")
    meta = dict(sd.meta, overlap_exact=None, energy_stderr=None)
    copy = tmp_path / "results"
    for stage in ("integrals", "hamiltonian", "taper", "optimize"):
        (copy / stage).mkdir(parents=True)
        for f in (results / stage).glob("*.h5"):
            (copy / stage / f.name).write_bytes(f.read_bytes())
    write_stage(
        copy / "optimize" / f"{row['key']}.h5",
        stage="optimize",
        key=row["key"],
        params=sd.params,
        parents=sd.parents,
        arrays=sd.arrays,
        meta=meta,
    )
    collect(plan.rows, copy, 1.6, [], study="t")
    rows = _rows(copy / "t" / "summary.csv")
    assert len(rows) == len(plan.rows)
    assert rows[0]["overlap_exact"] == "" and "overlap_exact" in rows[0]["notes"]
    assert rows[0]["energy_eh"] != "" and rows[1]["overlap_exact"] != ""


def test_shot_noise_below_exact_is_not_flagged(shot_study):
    # reference: PySCF FCI computed here; "below exact" means more than 3 standard errors plus
    # 1e-6 Eh below it (common practice for a statistical estimate)
    from pyscf import fci, gto, scf

    results, _, _ = shot_study
    for r in _rows(results / "t" / "summary.csv"):
        mol = gto.M(atom=f"H 0 0 0; H 0 0 {r['scan_r_angstrom']}", basis="sto-3g", verbose=0)
        e_fci = fci.FCI(scf.RHF(mol).run()).kernel()[0]
        e, se = float(r["energy_eh"]), float(r["energy_stderr_eh"])
        assert abs(float(r["energy_exact_eh"]) - e_fci) < 1e-8
        assert se > 0
        assert r["below_exact"] == str(e < e_fci - 3 * se - 1e-6)
        # the exact value at the optimized parameters is variational (no shot noise)
        assert float(r["energy_exact_at_params_eh"]) >= e_fci - 1e-9
        assert float(r["error_kcal_mol"]) == pytest.approx(
            (e - e_fci) * KCAL_MOL_PER_HARTREE, abs=1e-6
        )  # CODATA 2018: 627.5094740631 kcal/mol per hartree


def test_shots_and_iterations_are_reported(shot_study):
    # reference: the configured 500 shots per energy evaluation (common practice: budget = shots
    # per evaluation x evaluations), plus the final fresh estimate (final_shots = shots)
    results, _, _ = shot_study
    for r in _rows(results / "t" / "summary.csv"):
        assert int(r["shots_total"]) == 500 * (int(r["evaluations"]) + 1)
        assert int(r["n_iterations"]) >= 1 and r["stop_reason"]
        assert r["seed"] == "3" and r["active_electrons"] == "2" and r["active_orbitals"] == "2"
        assert r["n_frozen"] == "0"


def test_columns_units_digits_line_endings(shot_study):
    results, _, _ = shot_study
    raw = (results / "t" / "summary.csv").read_bytes()
    assert b"\r\n" not in raw
    header = raw.split(b"\n")[0].decode().split(",")
    for name in header:
        if name.startswith(("energy_", "ci_")):
            assert name.endswith("_eh"), name
        if name.startswith("error_"):
            assert name.endswith(("_mha", "_kcal_mol")), name
    assert "scan_r_angstrom" in header
    for r in _rows(results / "t" / "summary.csv"):
        for col in ("energy_eh", "energy_hf_eh", "error_mha"):
            digits = r[col].lstrip("-").replace(".", "").split("e")[0].lstrip("0")
            assert len(digits) <= 10, (col, r[col])


def test_readme_lists_every_column(shot_study):
    results, _, _ = shot_study
    text = (results / "t" / "README.md").read_text()
    for col in SUMMARY_COLUMNS + DEVICE_COLUMNS:
        assert f"`{col.name}`" in text
    header = _rows(results / "t" / "summary.csv")[0].keys()
    assert all(f"`{h}`" in text or h.startswith("scan_") for h in header)


def test_missing_reference_rung_has_a_reason(shot_study):
    results, plan, _ = shot_study
    rows = summary_rows(plan.rows, results)
    for r in rows:
        for col in ("energy_mp2_eh", "energy_ccsd_eh", "energy_fci_eh"):
            if not math.isfinite(r[col]):
                assert col.split("_")[1] in r["notes"]


def test_results_loader_units_and_types(shot_study):
    # reference: the CSV read back by Python's csv module (independent reader)
    from eigensweep import results as loader

    results, _, _ = shot_study
    df = loader.load("t", results=results)
    rows = _rows(results / "t" / "summary.csv")
    assert len(df) == len(rows)
    assert df.attrs["units"]["energy_eh"] == "Eh" and df.attrs["units"]["error_mha"] == "mHa"
    assert df.attrs["units"]["scan_r_angstrom"] == "Å"
    assert df["converged"].dtype == "boolean" and df["tapered"].dtype == "boolean"
    for i, r in enumerate(rows):
        assert float(df["energy_eh"][i]) == float(r["energy_eh"])
    assert df["overlap_exact"].notna().all()
    with pytest.raises(Exception, match="missing; run the study"):
        loader.load("nope", results=results)
