"""Seeds as a sweep axis: one optimize job per seed, ``seeds.csv`` and the error-vs-shots plot."""

from __future__ import annotations

import csv
import statistics

import pytest
from fixtures import run_plan

from eigensweep.collect import collect
from eigensweep.config import validate_config
from eigensweep.errors import ConfigError
from eigensweep.plan import build_plan

RAW = {
    "molecules": [{"name": "h2", "atoms": "H 0 0 0; H 0 0 0.74"}],
    "methods": {
        "taper": [True],
        "optimizer": [{"name": "spsa", "maxiter": 30}, {"name": "adam", "maxiter": 10}],
        "estimator": [{"name": "shots", "shots": 400}],
    },
    "seeds": [4, 5, 6],
}


@pytest.fixture(scope="module")
def seed_study(tmp_path_factory):
    results = tmp_path_factory.mktemp("seeds") / "results"
    cfg, plan = run_plan(RAW, results)
    files = collect(plan.rows, results, cfg["collect"]["accuracy_mha"], plan.exports, study="s")
    return results, plan, files


def _rows(path):
    with open(path, newline="") as fh:
        return list(csv.DictReader(fh))


def test_one_job_per_seed_with_its_own_key():
    plan = build_plan(validate_config(RAW))
    assert sorted(r["seed"] for r in plan.rows) == [4, 4, 5, 5, 6, 6]
    assert len({r["key"] for r in plan.rows}) == 6
    # without seeds the single top-level seed is used and keys do not depend on the new axis
    raw = {k: v for k, v in RAW.items() if k != "seeds"}
    a = build_plan(validate_config({**raw, "seed": 5}))
    b = build_plan(validate_config({**raw, "seeds": [5]}))
    assert [r["key"] for r in a.rows] == [r["key"] for r in b.rows]


def test_repeated_seed_is_refused():
    with pytest.raises(ConfigError, match="seeds"):
        build_plan(validate_config({**RAW, "seeds": [1, 1]}))


def test_seeds_table_aggregates_median_and_spread(seed_study):
    results, _, files = seed_study
    summary = _rows(results / "s" / "summary.csv")
    seeds = _rows(results / "s" / "seeds.csv")
    assert len(seeds) == 2 and {r["n_seeds"] for r in seeds} == {"3"}
    for row in seeds:
        mine = [r for r in summary if r["optimizer"] == row["optimizer"]]
        errs = [float(r["error_mha"]) for r in mine]
        shots = [int(r["shots_total"]) for r in mine]
        # reference: Python's statistics module on the summary rows
        assert float(row["error_median_mha"]) == pytest.approx(statistics.median(errs))
        assert float(row["error_q25_mha"]) <= float(row["error_median_mha"])
        assert float(row["error_median_mha"]) <= float(row["error_q75_mha"])
        assert int(row["shots_total_median"]) == int(statistics.median(shots))
        assert int(row["shots_total_min"]) == min(shots) > 0
        assert row["seeds"] == "4 5 6"
    assert results / "s" / "plots" / "shots_error.png" in files
    assert (results / "s" / "plots" / "h2_convergence.png").is_file()
    assert "seeds.csv" in (results / "s" / "README.md").read_text()
