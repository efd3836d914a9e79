"""Device target files (eigensweep.target): bad input first, then the examples and the plan axis."""

from __future__ import annotations

from pathlib import Path

import pytest
import yaml

from eigensweep.config import validate_config
from eigensweep.errors import ConfigError
from eigensweep.plan import build_plan
from eigensweep.target import GENERIC, generic_target, load_target

TARGETS = Path(__file__).resolve().parents[1] / "config" / "targets"
EXAMPLES = sorted(TARGETS.glob("*.yaml"))


def _good() -> dict:
    return yaml.safe_load((TARGETS / "chain12-demo.yaml").read_text())


def _write(tmp_path: Path, data: dict, name: str = "t.yaml") -> Path:
    path = tmp_path / name
    path.write_text(yaml.safe_dump(data, sort_keys=False))
    return path


@pytest.mark.parametrize(
    ("edit", "key"),
    [
        (lambda d: d.pop("n_qubits"), "n_qubits"),
        (lambda d: d.update(name="a b"), "name"),
        (lambda d: d.update(name="generic"), "name"),
        (lambda d: d.update(coupling=[[0, 12]]), "coupling[0]"),
        (lambda d: d.update(coupling=[[3, 3]]), "coupling[0]"),
        (lambda d: d.update(native_gates=["rz", "sx", "cx", "cz"]), "native_gates"),
        (lambda d: d.update(native_gates=["sx", "x", "cx"]), "native_gates"),
        (lambda d: d["gates"].pop("sx"), "gates.sx"),
        (lambda d: d["gates"].update(h={"error": 0, "duration_ns": 1}), "gates.h"),
        (lambda d: d["gates"]["cx"].update(error=2.0), "gates.cx.error"),
        (lambda d: d["qubits"].update(t1_us=[100.0] * 5), "qubits.t1_us"),
        (lambda d: d["qubits"].update(t1_us=10.0, t2_us=25.0), "qubits.t2_us"),
        (lambda d: d["qubits"].update(readout_p01=0.7), "qubits.readout_p01"),
        (lambda d: d.update(colour="blue"), "colour"),
    ],
)
def test_bad_target_is_one_line_naming_file_and_key(tmp_path, edit, key):
    data = _good()
    edit(data)
    path = _write(tmp_path, data)
    with pytest.raises(ConfigError) as err:
        load_target(path)
    msg = str(err.value)
    assert "\n" not in msg and str(path) in msg and key in msg, msg


def test_t2_bound_is_twice_t1():
    # T2 <= 2 T1 (pure dephasing rate >= 0; Nielsen & Chuang ch. 8, from memory)
    data = _good()
    data["qubits"].update(t1_us=50.0, t2_us=100.0)  # exactly at the bound: accepted
    from eigensweep.target import target_from_dict

    assert target_from_dict(data, "test").t2_us[0] == 100.0


def test_missing_file_is_one_line(tmp_path):
    with pytest.raises(ConfigError, match="target file not found"):
        load_target(tmp_path / "nope.yaml")


@pytest.mark.parametrize("path", EXAMPLES, ids=lambda p: p.stem)
def test_examples_load_and_are_marked_invented(path):
    t = load_target(path)
    assert "invented" in t.source and "not a real device" in t.source
    assert len(t.t1_us) == t.n_qubits
    assert all(t2 <= 2 * t1 for t1, t2 in zip(t.t1_us, t.t2_us, strict=True))
    for gate in t.native_gates:
        assert t.gate_error(gate) >= 0 and t.gate_duration_ns(gate) >= 0


def test_example_graphs_are_the_documented_shapes():
    # graph facts of a line, a 3 x 4 grid and a complete graph (common practice)
    chain = load_target(TARGETS / "chain12-demo.yaml")
    assert len(chain.edges()) == 11 and chain.distances[0, 11] == 11
    assert chain.neighbours(5) == {4, 6} and chain.coupled(3, 4) and not chain.coupled(3, 5)
    grid = load_target(TARGETS / "grid3x4-demo.yaml")
    # a rows x cols grid has rows (cols - 1) + cols (rows - 1) edges; diameter (rows-1)+(cols-1)
    assert len(grid.edges()) == 3 * 3 + 4 * 2 and grid.distances.max() == 5
    assert grid.entangler == "cz"
    ion = load_target(TARGETS / "ion12-demo.yaml")
    assert ion.all_to_all and len(ion.edges()) == 12 * 11 // 2 and ion.entangler == "rxx"
    assert generic_target(4).all_to_all and generic_target(4).entangler == "cx"


def test_content_hash_ignores_comments_and_layout(tmp_path):
    a = load_target(TARGETS / "chain12-demo.yaml")
    b = load_target(_write(tmp_path, _good()))  # same data, re-dumped without comments
    assert a.sha256 == b.sha256


# ----------------------------------------------------------------------------- planning axis


def _cfg(targets: list[str]) -> dict:
    return validate_config(
        {
            "molecules": [{"name": "h2", "atoms": "H 0 0 0; H 0 0 0.74"}],
            "export": {"select": [{"molecule": "h2"}], "targets": targets},
        },
        source="test",
    )


def test_default_target_is_generic():
    cfg = _cfg([GENERIC])
    plan = build_plan(cfg)
    assert [ex["target"] for ex in plan.exports] == [GENERIC]
    assert validate_config({"molecules": [{"name": "h", "atoms": "H 0 0 0; H 0 0 0.7"}]})["export"][
        "targets"
    ] == [GENERIC]


def test_targets_are_a_planning_axis_and_editing_one_reruns_only_its_export(tmp_path):
    chain = _write(tmp_path, _good(), "chain.yaml")
    grid = tmp_path / "grid.yaml"
    grid.write_text((TARGETS / "grid3x4-demo.yaml").read_text())
    before = build_plan(_cfg([GENERIC, str(chain), str(grid)]))
    keys = {ex["target"]: ex["key_export"] for ex in before.exports}
    assert set(keys) == {GENERIC, "chain12-demo", "grid3x4-demo"}
    assert len(set(keys.values())) == 3
    edited = _good()
    edited["gates"]["cx"]["error"] = 9.0e-3
    _write(tmp_path, edited, "chain.yaml")
    after = build_plan(_cfg([GENERIC, str(chain), str(grid)]))
    new = {ex["target"]: ex["key_export"] for ex in after.exports}
    assert new["chain12-demo"] != keys["chain12-demo"]
    assert new[GENERIC] == keys[GENERIC] and new["grid3x4-demo"] == keys["grid3x4-demo"]
    assert {n.key for n in after.by_stage("optimize")} == {
        n.key for n in before.by_stage("optimize")
    }


def test_bad_target_in_config_names_the_entry(tmp_path):
    data = _good()
    data["qubits"]["t1_us"] = -1.0
    path = _write(tmp_path, data)
    with pytest.raises(ConfigError) as err:
        build_plan(_cfg([str(path)]))
    assert str(err.value).startswith("export.targets[0]: ") and "qubits.t1_us" in str(err.value)


def test_two_targets_with_one_name_are_refused(tmp_path):
    a = _write(tmp_path, _good(), "a.yaml")
    b = _write(tmp_path, _good(), "b.yaml")
    with pytest.raises(ConfigError, match=r"export.targets\[1\].*chain12-demo"):
        build_plan(_cfg([str(a), str(b)]))


def _noisy_cfg(target, export_targets: list[str]) -> dict:
    est = {"name": "noisy", "shots": 500, "target": target}
    return validate_config(
        {
            "molecules": [{"name": "h2", "atoms": "H 0 0 0; H 0 0 0.74"}],
            "methods": {"estimator": [est], "optimizer": [{"name": "spsa", "maxiter": 5}]},
            "export": {"select": [{"molecule": "h2"}], "targets": export_targets},
        },
        source="test",
    )


def test_estimator_target_is_planned_by_content_and_named_in_labels(tmp_path):
    # the cache-key rule of export.targets (issue 17) for the noisy estimator's target: the
    # optimize key follows the file's content (the YAML as PyYAML reads it), not its path
    a = _write(tmp_path, _good(), "a.yaml")
    b = tmp_path / "b.yaml"
    b.write_text((TARGETS / "chain12-demo.yaml").read_text())  # same data, with comments
    plan_a = build_plan(_noisy_cfg(str(a), [GENERIC]))
    plan_b = build_plan(_noisy_cfg(str(b), [GENERIC]))
    (opt_a,) = plan_a.by_stage("optimize")
    (opt_b,) = plan_b.by_stage("optimize")
    assert opt_a.key == opt_b.key
    assert opt_a.params["estimator"]["target"]["gates"]["cx"] == _good()["gates"]["cx"]
    assert plan_a.rows[0]["estimator"] == "noisy(shots=500,target=chain12-demo)"
    edited = _good()
    edited["qubits"]["readout_p01"] = 0.02
    _write(tmp_path, edited, "a.yaml")
    assert build_plan(_noisy_cfg(str(a), [GENERIC])).by_stage("optimize")[0].key != opt_a.key
    missing = tmp_path / "nope.yaml"
    with pytest.raises(ConfigError, match="methods.estimator target: .*nope.yaml"):
        build_plan(_noisy_cfg(str(missing), [GENERIC]))


def test_synthetic_device_of_a_target_export_takes_the_target_noise(tmp_path):
    # issue 17: the synthetic device answers a target's export with that target's noise; the
    # device keys are the generic target's only
    chain = _write(tmp_path, _good(), "chain.yaml")
    plan = build_plan(_noisy_cfg(None, [GENERIC, str(chain)]))
    rec = {ex["target"]: plan.node(ex["key_reconcile"]).params for ex in plan.exports}
    assert rec["chain12-demo"]["noise"] == "target" and "readout_error" not in rec["chain12-demo"]
    assert rec[GENERIC]["readout_error"] == [0.02, 0.04] and "noise" not in rec[GENERIC]


def test_select_entry_targets_restrict_its_exports(tmp_path):
    # config/README.md: a select entry's targets export its rows for those targets only
    chain = _write(tmp_path, _good(), "chain.yaml")
    raw = {
        "molecules": [{"name": "h2", "atoms": "H 0 0 0; H 0 0 0.74"}],
        "export": {
            "select": [{"molecule": "h2", "targets": ["chain12-demo"]}],
            "targets": [GENERIC, str(chain)],
        },
    }
    plan = build_plan(validate_config(raw, source="test"))
    assert [ex["target"] for ex in plan.exports] == ["chain12-demo"]
    raw["export"]["select"][0]["targets"] = ["grid3x4-demo"]
    with pytest.raises(ConfigError, match=r"export.select\[0\].targets: 'grid3x4-demo'"):
        build_plan(validate_config(raw, source="test"))
