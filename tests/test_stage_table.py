"""The stage table is the one list of stages: planner, store, rules and CLI agree with it."""

from __future__ import annotations

import hashlib
import json
import re
from pathlib import Path

import pytest

from eigensweep import stage_table as st
from eigensweep.cli import build_parser
from eigensweep.config import load_config
from eigensweep.plan import build_plan, parent_files

ROOT = Path(__file__).resolve().parents[1]


def test_key_is_sha256_of_canonical_identity():
    # reference: SHA-256 of sorted-key compact JSON computed here with the standard library
    # (the key definition in DESIGN.md), independent of stage_table.canonical_json
    params = {"mapping": "parity", "b": [1, 2.5]}
    blob = json.dumps(
        {"stage": "hamiltonian", "version": 2, "params": params, "parents": {"integrals": "a"}},
        sort_keys=True,
        separators=(",", ":"),
    )
    assert (
        st.stage_key("hamiltonian", params, {"integrals": "a"})
        == (hashlib.sha256(blob.encode()).hexdigest()[:16])
    )


def test_unknown_stage_and_role_are_refused():
    with pytest.raises(KeyError, match="unknown stage 'collect'"):
        st.spec("collect")
    with pytest.raises(KeyError, match="no parent role 'warm'"):
        st.parent_paths("hamiltonian", {"warm": "0" * 16})


def test_parent_paths_follow_roles():
    # the layout documented in README.md / DEVELOPERS.md (results/<stage>/<key>.h5)
    got = st.parent_paths(
        "reconcile", {"export": "e" * 16, "counts": "e" * 16, "taper": "t" * 16}, "res"
    )
    assert got == {
        "export": f"res/export/{'e' * 16}.h5",
        "counts": f"res/returned/{'e' * 16}.json",
        "taper": f"res/taper/{'t' * 16}.h5",
    }


def test_every_stage_has_rule_and_action():
    # the workflow's layout rule (one rule file per stage whose `run:` block calls the library
    # in the engine's process, issue 22)
    from eigensweep.stages import STAGE_ACTIONS

    snakefile = (ROOT / "Snakefile").read_text()
    for s in st.STAGES:
        rule = ROOT / "workflow" / "rules" / f"{s.name}.smk"
        assert rule.is_file(), s.name
        assert f'include: "workflow/rules/{s.name}.smk"' in snakefile
        text = rule.read_text()
        assert f'"results/{s.name}/{{key}}.h5"' in text
        assert ("directory(" in text) == ("jobs" in s.outputs), s.name
        assert f'stage_job("{s.name}", input, output, params, log, get_store())' in text, s.name
        assert "script:" not in text and "shell:" not in text, s.name
        assert STAGE_ACTIONS[s.name].__name__ == s.action


def test_default_plan_uses_only_table_roles():
    cfg = load_config(ROOT / "config" / "config.yaml")
    plan = build_plan(cfg, base_dir=ROOT)
    for node in plan.nodes.values():
        assert set(node.parents) <= set(st.spec(node.stage).parents)
        for role, path in parent_files(node).items():
            source = st.spec(node.stage).parents[role]
            assert re.fullmatch(rf"results/{source}/[0-9a-f]{{16}}\.(h5|json)", path)


def test_cli_stage_choices_come_from_table():
    ap = build_parser()
    sub = next(a for a in ap._actions if a.dest == "command")
    verify = sub.choices["verify"]
    stage_opt = next(a for a in verify._actions if a.dest == "stage")
    assert list(stage_opt.choices)[: len(st.STAGE_NAMES)] == list(st.STAGE_NAMES)


def test_store_does_not_import_planner():
    # design rule of issue 11: the store depends on the stage table, not on the planner
    text = (ROOT / "src" / "eigensweep" / "store.py").read_text()
    assert "from .plan" not in text and "eigensweep.plan" not in text
