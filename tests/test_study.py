"""Studies: sub-sweeps with exclusions and zipped axes, skipped combinations, one folder per study."""

from __future__ import annotations

import csv
import json
import subprocess
import sys

import pytest
import yaml
from fixtures import run_plan

from eigensweep.collect import collect
from eigensweep.config import validate_config
from eigensweep.errors import ConfigError
from eigensweep.plan import build_plan

H2 = {"name": "h2", "atoms": "H 0 0 0; H 0 0 {r}", "scan": {"r": [0.74, 1.2]}}
LIH = {"name": "lih", "atoms": "Li 0 0 0; H 0 0 1.6"}

STUDY = {
    "study": "methods",
    "molecules": [H2, LIH],
    "sweeps": [
        {
            "name": "gradient",
            "molecules": ["h2"],
            "methods": {
                "ansatz": [{"name": "uccsd"}, {"name": "kupccgsd"}],
                "optimizer": [{"name": "lbfgs"}, {"name": "bfgs"}],
            },
            "exclude": [{"ansatz": "kupccgsd", "optimizer": "bfgs"}],
        },
        {
            "name": "sampled",
            "molecules": ["h2"],
            "methods": {
                # lbfgs with shots is unsupported: skipped with one line, not fatal
                "optimizer": [{"name": "cobyla", "maxiter": 40}, {"name": "lbfgs"}],
                "estimator": [{"name": "shots", "shots": 400}],
            },
        },
    ],
}


def _labels(plan, sweep):
    return sorted(
        {(r["ansatz"], r["optimizer"], r["estimator"]) for r in plan.rows if r["sweep"] == sweep}
    )


def test_sub_sweeps_exclusions_and_skips():
    plan = build_plan(validate_config(STUDY))
    assert plan.study == "methods"
    assert _labels(plan, "gradient") == [
        ("kupccgsd", "lbfgs", "exact"),
        ("uccsd", "bfgs", "exact"),
        ("uccsd", "lbfgs", "exact"),
    ]
    assert _labels(plan, "sampled") == [("uccsd", "cobyla(maxiter=40)", "shots(shots=400)")]
    assert len(plan.skipped) == 1 and "lbfgs" in plan.skipped[0] and "sampled" in plan.skipped[0]
    assert {r["molecule"] for r in plan.rows} == {"h2"}  # lih is in no sweep's molecules


def test_stage_keys_do_not_depend_on_the_sweep():
    # the same combination in two sweeps (or as a plain top-level methods block) is one stage job
    one = build_plan(
        validate_config({"molecules": [H2], "methods": {"optimizer": [{"name": "bfgs"}]}})
    )
    two = build_plan(validate_config(STUDY))
    assert set(one.nodes) <= set(two.nodes)
    assert {r["sweep"] for r in one.rows} == {"main"}


def test_zipped_axes_pair_index_wise():
    raw = {
        "molecules": [H2],
        "sweeps": [
            {
                "name": "pairs",
                "methods": {
                    "optimizer": [{"name": "lbfgs"}, {"name": "cobyla"}],
                    "estimator": [{"name": "exact"}, {"name": "shots", "shots": 100}],
                },
                "zip": ["optimizer", "estimator"],
            }
        ],
    }
    plan = build_plan(validate_config(raw))
    assert _labels(plan, "pairs") == [
        ("uccsd", "cobyla", "shots(shots=100)"),
        ("uccsd", "lbfgs", "exact"),
    ]
    assert plan.skipped == []


@pytest.mark.parametrize(
    "mutate, fragment",
    [
        (lambda c: c.update(strict=True), "strict: true"),
        (
            lambda c: c["sweeps"][0].update(molecules=["h2", "n2"]),
            "'n2' is not a top-level molecule",
        ),
        (lambda c: c["sweeps"][1].update(name="gradient"), "name is used twice"),
        (lambda c: c["sweeps"][0].update(zip=["ansatz", "taper"]), "equally long"),
        (
            lambda c: c["sweeps"][1]["methods"].update(optimizer=[{"name": "lbfgs"}]),
            "no method combination is left",
        ),
        (
            lambda c: c["sweeps"][0].update(exclude=[{"ansatz": "uccsd", "colour": 1}]),
            "exclude[0].colour: unknown key",
        ),
    ],
)
def test_bad_studies_are_one_line_errors(mutate, fragment):
    raw = json.loads(json.dumps(STUDY))
    mutate(raw)
    with pytest.raises(ConfigError) as err:
        build_plan(validate_config(raw, source="s.yaml"))
    assert fragment in str(err.value) and "\n" not in str(err.value)


def test_plan_command_lists_skipped_and_json(tmp_path):
    (tmp_path / "s.yaml").write_text(yaml.safe_dump(STUDY))
    run = lambda *a: subprocess.run(  # noqa: E731
        [sys.executable, "-m", "eigensweep.cli", "plan", "--config", "s.yaml", *a],
        cwd=tmp_path,
        capture_output=True,
        text=True,
        timeout=300,
    )
    text = run()
    assert text.returncode == 0, text.stderr
    assert "sweep sampled: skipped" in text.stdout and "results/methods/" in text.stdout
    doc = json.loads(run("--json").stdout)
    assert doc["study"] == "methods" and len(doc["skipped"]) == 1
    assert {j["status"] for j in doc["jobs"]} == {"pending"}
    assert {r["sweep"] for r in doc["rows"]} == {"gradient", "sampled"}


def test_one_summary_per_study_and_studies_do_not_overwrite(tmp_path):
    # reference: PySCF FCI computed here for the energies of both sub-sweeps
    from pyscf import fci, gto, scf

    results = tmp_path / "results"
    cfg, plan = run_plan(STUDY, results)
    collect(plan.rows, results, 1.6, plan.exports, study=plan.study)
    rows = list(csv.DictReader(open(results / "methods" / "summary.csv")))
    assert {r["sweep"] for r in rows} == {"gradient", "sampled"} and len(rows) == len(plan.rows)
    for r in rows:
        mol = gto.M(atom=f"H 0 0 0; H 0 0 {r['scan_r_angstrom']}", basis="sto-3g", verbose=0)
        e_fci = fci.FCI(scf.RHF(mol).run()).kernel()[0]
        assert float(r["energy_exact_at_params_eh"]) >= e_fci - 1e-9  # variational principle
        if r["sweep"] == "gradient":
            assert float(r["energy_eh"]) - e_fci < 1.6e-3
    before = {p: p.read_bytes() for p in (results / "methods").rglob("*") if p.is_file()}

    other = {"molecules": [H2], "methods": {"optimizer": [{"name": "bfgs"}]}}
    cfg2, plan2 = run_plan(other, results, source="other.yaml")
    plan2 = build_plan(cfg2, config_path="other.yaml")
    collect(plan2.rows, results, 1.6, plan2.exports, study=plan2.study)
    assert (results / "other" / "summary.csv").is_file()
    after = {p: p.read_bytes() for p in (results / "methods").rglob("*") if p.is_file()}
    assert after == before
