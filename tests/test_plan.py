"""Planner: Merkle keys and scan expansion (pure functions, no Snakemake, no chemistry)."""

from __future__ import annotations

import copy
import json
import subprocess
import sys

import pytest

from eigensweep.config import validate_config
from eigensweep.errors import ConfigError
from eigensweep.plan import build_plan, scan_points, stage_key


def keys_by_stage(plan):
    out = {}
    for n in plan.nodes.values():
        out.setdefault(n.stage, set()).add(n.key)
    return out


def test_key_independent_of_dict_order(tiny_raw):
    a = build_plan(validate_config(tiny_raw))
    reordered = {
        "methods": tiny_raw["methods"],
        "molecules": [dict(reversed(list(m.items()))) for m in tiny_raw["molecules"]],
    }
    b = build_plan(validate_config(reordered))
    assert set(a.nodes) == set(b.nodes)


def test_key_independent_of_written_defaults(tiny_raw):
    a = build_plan(validate_config(tiny_raw))
    explicit = copy.deepcopy(tiny_raw)
    for m in explicit["molecules"]:
        m.update(
            charge=0,
            multiplicity=1,
            unit="angstrom",
            symmetry=True,
            frozen_core="none",
            active=None,
        )
    explicit["methods"].update(
        mapping=["jordan_wigner"], ansatz=[{"name": "uccsd"}], estimator=[{"name": "exact"}]
    )
    explicit["seed"] = 0
    b = build_plan(validate_config(explicit))
    assert set(a.nodes) == set(b.nodes)


def test_key_independent_of_process():
    # Same key in a fresh interpreter (hash randomisation must not leak into keys).
    params = {"b": [1, 2.5], "a": {"y": None, "x": "s"}}
    here = stage_key("optimize", params, {"taper": "0" * 16})
    code = (
        "import json,sys; from eigensweep.plan import stage_key; "
        "print(stage_key('optimize', json.loads(sys.argv[1]), {'taper': '0'*16}))"
    )
    out = subprocess.run(
        [sys.executable, "-c", code, json.dumps(params)],
        capture_output=True,
        text=True,
        check=True,
        env={"PYTHONHASHSEED": "123"},
    )
    assert out.stdout.strip() == here


def test_changing_optimizer_changes_only_optimize_keys(tiny_raw):
    a = keys_by_stage(build_plan(validate_config(tiny_raw)))
    tiny_raw["methods"]["optimizer"] = [{"name": "bfgs"}]
    b = keys_by_stage(build_plan(validate_config(tiny_raw)))
    for stage in ("integrals", "hamiltonian", "taper"):
        assert a[stage] == b[stage]
    assert a["optimize"].isdisjoint(b["optimize"])


def test_changing_basis_changes_every_key_of_that_molecule_only(tiny_raw):
    pa = build_plan(validate_config(tiny_raw))
    tiny_raw["molecules"][1]["basis"] = "6-31g"
    pb = build_plan(validate_config(tiny_raw))
    for stage in ("integrals", "hamiltonian", "taper", "optimize"):
        rows_a = {r["molecule"]: r for r in pa.rows}
        rows_b = {r["molecule"]: r for r in pb.rows}
        col = "key" if stage == "optimize" else f"key_{stage}"
        assert rows_a["lih"][col] != rows_b["lih"][col]
        assert [r[col] for r in pa.rows if r["molecule"] == "h2"] == [
            r[col] for r in pb.rows if r["molecule"] == "h2"
        ]


def test_product_of_methods_and_points(tiny_raw):
    tiny_raw["methods"]["taper"] = [False, True]
    tiny_raw["methods"]["optimizer"] = [{"name": "lbfgs"}, {"name": "bfgs"}]
    plan = build_plan(validate_config(tiny_raw))
    assert len(plan.rows) == 3 * 2 * 2  # 3 points x taper x optimizer
    assert len(plan.by_stage("integrals")) == 3
    assert len(plan.by_stage("hamiltonian")) == 3  # shared by both taper choices


def test_scan_grid_and_zip():
    mol = {
        "scan": {"r": {"start": 1.0, "stop": 2.0, "num": 3}, "a": [90, 100, 110]},
        "scan_mode": "zip",
    }
    pts = scan_points(mol, "m")
    assert pts == [{"r": 1.0, "a": 90.0}, {"r": 1.5, "a": 100.0}, {"r": 2.0, "a": 110.0}]
    mol["scan_mode"] = "product"
    assert len(scan_points(mol, "m")) == 9
    mol["scan"]["a"] = [90, 100]
    mol["scan_mode"] = "zip"
    with pytest.raises(ConfigError, match="equally long"):
        scan_points(mol, "m")


def test_neighbour_start_chains_points(tiny_raw):
    tiny_raw["molecules"][0]["neighbour_start"] = True
    plan = build_plan(validate_config(tiny_raw))
    ints = [plan.nodes[r["key_integrals"]] for r in plan.rows if r["molecule"] == "h2"]
    assert "guess" not in ints[0].parents
    assert ints[1].parents["guess"] == ints[0].key


@pytest.mark.parametrize(
    "mutate, fragment",
    [
        (lambda c: c["molecules"][0].update(atoms="H 0 0 0; H 0 0 {d}"), "has no values"),
        (lambda c: c["molecules"][0].update(atoms="H 0 0 0; H 0 0 0.74"), "does not appear"),
        (lambda c: c["molecules"][0].update(xyz="x.xyz"), "exactly one of"),
    ],
)
def test_placeholder_errors(tiny_raw, mutate, fragment):
    mutate(tiny_raw)
    with pytest.raises(ConfigError, match=fragment) as ei:
        build_plan(validate_config(tiny_raw))
    assert "\n" not in str(ei.value) and "molecules[0] (h2)" in str(ei.value)


def test_warm_start_chains_optimize_jobs_along_the_scan(tiny_raw):
    tiny_raw["methods"]["warm_start"] = True
    plan = build_plan(validate_config(tiny_raw))
    h2 = [plan.nodes[r["key"]] for r in plan.rows if r["molecule"] == "h2"]
    assert "warm" not in h2[0].parents
    assert h2[1].parents["warm"] == h2[0].key


def test_resource_requests_grow_with_problem_size():
    from eigensweep.resources import stage_resources

    cfg = validate_config(
        {
            "molecules": [
                {"name": "h2", "atoms": "H 0 0 0; H 0 0 0.74"},
                {"name": "n2", "atoms": "N 0 0 0; N 0 0 1.1", "basis": "6-31g"},
            ]
        }
    )
    plan = build_plan(cfg)
    opt = {r["molecule"]: plan.nodes[r["key"]] for r in plan.rows}
    small, big = stage_resources(opt["h2"], plan), stage_resources(opt["n2"], plan)
    assert big["mem_mb"] > small["mem_mb"] and big["runtime"] > small["runtime"]


def test_export_selection_matching_nothing_is_an_error():
    # issue 18: a selection that matches no optimize job used to be accepted silently
    cfg = validate_config(
        {
            "molecules": [{"name": "h2", "atoms": "H 0 0 0; H 0 0 0.74"}],
            "export": {"select": [{"molecule": "h2"}, {"molecule": "lih"}]},
        },
        source="test",
    )
    with pytest.raises(ConfigError, match=r"export.select\[1\].*matches no optimize job") as ei:
        build_plan(cfg)
    assert "\n" not in str(ei.value)
