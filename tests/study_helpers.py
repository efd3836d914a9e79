"""Run a plan's stage jobs in this process (no Snakemake): fast end-to-end checks of collect."""

from __future__ import annotations

from pathlib import Path

from eigensweep.config import validate_config
from eigensweep.plan import build_plan, parent_files


def run_plan(raw: dict, results: Path, source: str = "study"):
    """Validate, plan and run every stage job into ``results``; returns (cfg, plan)."""
    from eigensweep.stages import STAGE_ACTIONS

    cfg = validate_config(raw, source=source)
    plan = build_plan(cfg, results_dir=results)
    for node in plan.nodes.values():  # insertion order is parents first
        out = results / node.stage / f"{node.key}.h5"
        if not out.is_file():
            STAGE_ACTIONS[node.stage](node, parent_files(node, str(results)), str(out))
    return cfg, plan
