"""Job groups for clusters: point chains, batches sized to a target run time, and the scheduler
jobs `eigensweep plan --profile slurm` announces. The references are the plan's own graph
(parents by key) and Snakemake's documented group rules (resources of jobs that run one after
another: largest memory, summed runtime; Snakemake docs, "Job grouping", from memory)."""

from __future__ import annotations

import math

import yaml

from eigensweep import cli
from eigensweep.config import validate_config
from eigensweep.plan import build_plan
from eigensweep.resources import batch_plan, point_components, stage_resources


def _plan(points, neighbour_start=False):
    raw = {
        "molecules": [
            {
                "name": "h2",
                "atoms": "H 0 0 0; H 0 0 {r}",
                "scan": {"r": points},
                "neighbour_start": neighbour_start,
            }
        ],
        "methods": {"optimizer": [{"name": "lbfgs"}, {"name": "bfgs"}]},
    }
    return build_plan(validate_config(raw, source="test"))


def test_one_component_per_point_chain():
    plan = _plan([0.6, 0.8, 1.0, 1.2])
    comps = point_components(plan)
    assert len(comps) == 4
    assert sorted(len(c) for c in comps) == [5, 5, 5, 5]  # integrals, ham, taper, 2 optimize
    for comp in comps:  # closed under parents: a chain never spans two batches
        for key in comp:
            assert set(plan.nodes[key].parents.values()) <= set(comp)


def test_neighbour_start_chains_the_scan_into_one_component():
    assert len(point_components(_plan([0.6, 0.8, 1.0], neighbour_start=True))) == 1


def test_batches_follow_the_target_and_snakemakes_group_rules():
    plan = _plan([0.6, 0.7, 0.8, 0.9, 1.0, 1.2, 1.4, 1.6, 1.8, 2.0])
    small = batch_plan(plan, target_minutes=1.5)
    large = batch_plan(plan, target_minutes=30)
    assert len(large["batches"]) == 1 and large["batches"][0]["jobs"] == 50
    assert len(small["batches"]) == math.ceil(10 / small["per_batch"]) > 1
    assert sum(b["jobs"] for b in small["batches"]) == 50
    for b in small["batches"]:
        assert b["expected_min"] <= 1.5 + 1e-9
    req = [stage_resources(n, plan) for n in plan.nodes.values()]
    # one core: every job in its own layer -> largest memory, summed runtime
    assert large["batches"][0]["mem_mb"] == max(r["mem_mb"] for r in req)
    assert large["batches"][0]["runtime_min"] == sum(r["runtime"] for r in req)
    # two cores: two jobs side by side per layer -> memory of two, about half the runtime
    wide = batch_plan(plan, target_minutes=30, cores=2)["batches"][0]
    assert wide["threads"] == 2 and wide["mem_mb"] == 2 * max(r["mem_mb"] for r in req)
    assert wide["runtime_min"] < large["batches"][0]["runtime_min"]
    # only pending stage jobs are batched
    two = {k for c in point_components(plan)[:2] for k in c}
    assert batch_plan(plan, 30, pending=two)["batches"][0]["jobs"] == 10


def test_plan_with_slurm_profile_states_scheduler_jobs(tmp_path, monkeypatch, capsys):
    raw = {
        "molecules": [{"name": "h2", "atoms": "H 0 0 0; H 0 0 {r}", "scan": {"r": [0.7, 0.9]}}],
    }
    (tmp_path / "c.yaml").write_text(yaml.safe_dump(raw))
    monkeypatch.chdir(tmp_path)
    assert cli.main(["plan", "--config", "c.yaml", "--profile", "slurm", "--cores", "2"]) == 0
    out = capsys.readouterr().out
    line = next(x for x in out.splitlines() if x.startswith("scheduler jobs"))
    assert "1 for 8 stage jobs" in line and "target 30 min" in line
    assert "request: MB" in out and "est. minutes" in out
