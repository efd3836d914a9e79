"""The config schema is the one spec, and configs are read as bounded plain data.

References: the JSON Schema 2020-12 meta-schema (checked by the `jsonschema` library), the YAML
1.1 resolver rules as implemented by PyYAML, SHA-256 from Python's `hashlib`; message shape
and size caps are common practice for command-line tools.
"""

from __future__ import annotations

import hashlib
import json
import os
import subprocess
import sys
from pathlib import Path

import jsonschema
import pytest

from eigensweep.config import (
    complete_method,
    load_config,
    load_schema,
    method_defaults,
    method_names,
    parse_yaml,
    validate_config,
)
from eigensweep.errors import ConfigError
from eigensweep.plan import STAGE_VERSIONS, stage_key

GOOD = 'molecules:\n  - name: h2\n    atoms: "H 0 0 0; H 0 0 {r}"\n    scan: {r: [0.74]}\n'
KINDS = ("ansatz", "optimizer", "estimator")


def _write(tmp_path: Path, text: str, name: str = "c.yaml") -> Path:
    path = tmp_path / name
    path.write_text(text)
    return path


# ---------------------------------------------------------------------------- the schema
def test_schema_is_valid_json_schema():
    # reference: the JSON Schema 2020-12 meta-schema, via the jsonschema library
    jsonschema.Draft202012Validator.check_schema(load_schema())


@pytest.mark.parametrize("kind", KINDS)
def test_every_method_has_a_closed_subschema_with_typed_defaulted_options(kind):
    root = load_schema()["$defs"]
    names = list(root[f"{kind}_options"])
    # the three places that list the names agree (name enum, subschemas, if/then dispatch)
    assert root[kind]["properties"]["name"]["enum"] == names
    dispatched = [b["if"]["properties"]["name"]["const"] for b in root[kind]["allOf"]]
    assert dispatched == names
    for b in root[kind]["allOf"]:
        assert b["then"]["$ref"].endswith(
            f"/{kind}_options/" + b["if"]["properties"]["name"]["const"]
        )
    for name, sub in root[f"{kind}_options"].items():
        assert sub["additionalProperties"] is False, name
        assert sub["properties"]["name"]["const"] == name
        for opt, spec in sub["properties"].items():
            assert spec.get("description"), f"{kind}.{name}.{opt}"
            if opt != "name":
                assert "type" in spec and "default" in spec, f"{kind}.{name}.{opt}"
                # the default itself passes the option's schema
                jsonschema.Draft202012Validator(spec).validate(spec["default"])


def test_defaults_come_from_the_schema():
    sub = load_schema()["$defs"]["optimizer_options"]["spsa"]["properties"]
    out = method_defaults("optimizer", "spsa")
    assert out == {"name": "spsa", **{k: v["default"] for k, v in sub.items() if k != "name"}}
    assert set(method_names("estimator")) == {"exact", "shots", "noisy"}


# ---------------------------------------------------------------------------- values
@pytest.mark.parametrize(
    "raw, fragment",
    [
        ({"seed": 3.0}, "seed: expected an integer"),
        ({"seed": True}, "seed: expected an integer"),
        (
            {
                "molecules": [
                    {
                        "name": "a",
                        "atoms": "H 0 0 {r}",
                        "scan": {"r": {"start": 1, "stop": 2, "num": 3.0}},
                    }
                ]
            },
            "scan.r.num: expected an integer",
        ),
        (
            {"molecules": [{"name": "a", "atoms": "H 0 0 {r}", "scan": {"r": [float("nan")]}}]},
            "scan.r[0]: expected a finite number",
        ),
        (
            {"molecules": [{"name": "a", "atoms": "H 0 0 {r}", "scan": {"r": [float("inf")]}}]},
            "finite",
        ),
        ({"molecules": [{"name": "h2\n", "atoms": "H 0 0 0"}]}, "molecules[0].name"),
        ({"molecules": [{"name": "x" * 300, "atoms": "H 0 0 0"}]}, "longer than 64"),
        (
            {"methods": {"optimizer": [{"name": "cobyla", "maxiter": 100.0}]}},
            "optimizer[0].maxiter",
        ),
        ({"methods": {"optimizer": [{"name": "cobyla", "tol": "1e-6"}]}}, "write 1.0e-6"),
        ({"methods": {"optimizer": [{"name": "spsa", "c": 0}]}}, "optimizer[0].c: must be > 0"),
        ({"methods": {"ansatz": [{"name": "uccsd", "restarts": 2}]}}, "optimizer option"),
        (
            {"methods": {"ansatz": [{"name": "uccsd", "restart_scale": 0.2}]}},
            "ansatz[0].restart_scale",
        ),
        ({"methods": {"ansatz": [{"name": "uccsd", "mapping": "parity"}]}}, "methods.mapping"),
        (
            {"methods": {"estimator": [{"name": "noisy", "p01": 0.5}]}},
            "estimator[0].p01: must be < 0.5",
        ),
    ],
)
def test_bad_values_give_one_line_naming_the_key(raw, fragment):
    cfg = {"molecules": [{"name": "h2", "atoms": "H 0 0 0; H 0 0 0.74"}], **raw}
    with pytest.raises(ConfigError) as err:
        validate_config(cfg, source="c.yaml")
    msg = str(err.value)
    assert fragment in msg and "\n" not in msg and msg.startswith("c.yaml: ")


def test_long_values_are_shortened_in_messages():
    # common practice: no value longer than about 60 characters in a message
    cfg = {"molecules": [{"name": "h2", "atoms": "H 0 0 0"}], "seed": "9" * 100_000}
    with pytest.raises(ConfigError) as err:
        validate_config(cfg)
    assert len(str(err.value)) < 200


def test_integer_written_for_a_real_option_gives_the_same_entry():
    # 1 and 1.0 are the same real number, so they must give the same cache key
    a = complete_method("optimizer", {"name": "cobyla", "rhobeg": 1})
    b = complete_method("optimizer", {"name": "cobyla", "rhobeg": 1.0})
    assert a == b and isinstance(a["rhobeg"], float)
    assert json.dumps(a, sort_keys=True) == json.dumps(b, sort_keys=True)


def test_stage_key_is_sha256_of_the_completed_entry():
    # reference: the key as defined in DESIGN.md, computed here with hashlib; the removed ansatz
    # options are not part of the completed entry, hence not of the key
    ansatz = complete_method("ansatz", {"name": "uccsd"})
    assert ansatz == {"name": "uccsd", "spin_flip_tied": False}
    params = {"ansatz": ansatz, "optimizer": method_defaults("optimizer", "lbfgs"), "seed": 7}
    parents = {"taper": "0" * 16, "integrals": "1" * 16}
    blob = json.dumps(
        {
            "stage": "optimize",
            "version": STAGE_VERSIONS["optimize"],
            "params": params,
            "parents": parents,
        },
        sort_keys=True,
        separators=(",", ":"),
    )
    assert stage_key("optimize", params, parents) == hashlib.sha256(blob.encode()).hexdigest()[:16]


# ---------------------------------------------------------------------------- YAML as data
def test_alias_bomb_is_refused_fast():
    # a "billion laughs" document: 9 levels of 9 aliases, about 4e8 values once expanded
    lines = ['a0: &a0 ["x"]']
    for i in range(1, 10):
        lines.append(f"a{i}: &a{i} [" + ", ".join([f"*a{i - 1}"] * 9) + "]")
    lines.append("molecules: *a9")
    text = "\n".join(lines) + "\n"
    assert len(text) < 600
    with pytest.raises(ConfigError, match="expands to more than") as err:
        parse_yaml(text, "bomb.yaml")  # stops after 10^6 values instead of expanding all
    assert len(str(err.value)) < 200


@pytest.mark.parametrize(
    "text, fragment",
    [
        ("__use_yte__: true\n" + GOOD, "templating is not supported"),
        (GOOD + 'seed: ?__import__("os").getpid()\n', "template expression"),
        (GOOD + "seed: 1\nseed: 2\n", "appears twice"),
        (GOOD + "1: x\n", "not text"),
        ("molecules: !!python/object/apply:os.system ['true']\n", "YAML syntax error"),
        ("[" * 5000 + "]" * 5000, "nesting depth"),
    ],
)
def test_yaml_is_read_as_plain_data(tmp_path, text, fragment):
    with pytest.raises(ConfigError) as err:
        load_config(_write(tmp_path, text))
    msg = str(err.value)
    assert fragment in msg, msg
    assert "\n" not in msg and len(msg) < 300


def test_reads_are_bounded_and_regular_files_only(tmp_path):
    big = _write(tmp_path, GOOD + "#" * 3_000_000 + "\n", "big.yaml")
    with pytest.raises(ConfigError, match="byte limit"):
        load_config(big)
    with pytest.raises(ConfigError, match="regular file"):
        load_config(tmp_path)
    with pytest.raises(ConfigError, match="regular file"):
        load_config("/dev/zero")
    fifo = tmp_path / "pipe.yaml"
    os.mkfifo(fifo)
    with pytest.raises(ConfigError, match="regular file"):
        load_config(fifo)  # would block forever if opened for reading
    (tmp_path / "bin.yaml").write_bytes(b"\xff\xfe\x00bad")
    with pytest.raises(ConfigError, match="not UTF-8"):
        load_config(tmp_path / "bin.yaml")


def test_xyz_errors_do_not_quote_the_file(tmp_path):
    from eigensweep.chem.geometry import read_xyz

    secret = "root:$6$abcdefgh:19000:0:99999:7:::"
    path = _write(tmp_path, f"{secret}\n\n", "secret.xyz")
    with pytest.raises(ConfigError) as err:
        read_xyz(path)
    assert "abcdefgh" not in str(err.value)
    path = _write(tmp_path, f"1\nc\n{secret} 0 0 0\n", "secret2.xyz")
    with pytest.raises(ConfigError) as err:
        read_xyz(path)
    assert "abcdefgh" not in str(err.value)


# ---------------------------------------------------------------------------- routes in
@pytest.mark.slow
def test_snakemake_route_reads_the_sweep_with_our_loader(tmp_path):
    # `snakemake --config sweep=FILE`: Snakemake never parses the file, so a templated value
    # is refused by eigensweep's loader before anything is evaluated
    root = Path(__file__).resolve().parents[1]
    marker = tmp_path / "EVALUATED"
    evil = _write(
        tmp_path,
        "__use_yte__: true\n"
        + GOOD
        + f'seed: ?__import__("pathlib").Path("{marker}").touch() or 1\n',
        "evil.yaml",
    )
    cmd = [sys.executable, "-m", "snakemake", "-s", str(root / "Snakefile"), "-n", "--cores", "1"]
    proc = subprocess.run(
        cmd + ["--config", f"sweep={evil}"], cwd=tmp_path, capture_output=True, text=True
    )
    assert proc.returncode != 0 and "templating is not supported" in proc.stderr
    assert not marker.exists()
    from eigensweep.cli import main

    assert main(["run", "--dry-run", "--config", str(evil)]) != 0
    assert not marker.exists()


# ---------------------------------------------------------------------------- geometry input
def _integrals_keys(atoms: str) -> list[str]:
    from eigensweep.plan import build_plan

    cfg = validate_config({"molecules": [{"name": "m", "atoms": atoms}]})
    return [n.key for n in build_plan(cfg).by_stage("integrals")]


def test_cosmetic_geometry_spellings_share_one_key():
    # 0.74 and 0.740 are the same number and h the same element as H (common practice)
    ref = _integrals_keys("H 0 0 0; H 0 0 0.74")
    for spelling in ("h 0 0 0; H 0 0 0.740", "H 0 0 -0.0;H 0.0 0 7.4e-1", "H 0 0 0\nH 0 0 0.74"):
        assert _integrals_keys(spelling) == ref, spelling
    assert _integrals_keys("H 0 0 0; H 0 0 0.75") != ref


def test_absurd_coordinates_are_refused():
    with pytest.raises(ConfigError, match="larger than"):
        _integrals_keys("H 0 0 0; H 0 0 1e300")


def test_min_distance_matches_scipy_pdist_and_scales():
    import numpy as np
    from scipy.spatial.distance import pdist, squareform

    from eigensweep.chem.geometry import min_distance

    rng = np.random.default_rng(1)
    for n_atoms in (2, 60, 200):  # all pairs up to 64 atoms, a k-d tree above
        xyz = rng.uniform(-5, 5, size=(n_atoms, 3))
        d, i, j = min_distance([("H", tuple(p)) for p in xyz])
        # reference: SciPy's brute-force pair distances
        full = squareform(pdist(xyz))
        np.fill_diagonal(full, np.inf)
        assert d == pytest.approx(full.min(), abs=1e-12)
        assert full[i - 1, j - 1] == pytest.approx(full.min(), abs=1e-12) and i < j
    big = [("H", tuple(p)) for p in rng.uniform(-300, 300, size=(150_000, 3))]
    assert min_distance(big)[0] > 0  # the pure-Python pair loop took hours here


# ---------------------------------------------------------------------------- renamed options
@pytest.mark.parametrize(
    "kind, entry, new",
    [
        ("ansatz", {"name": "hardware_efficient", "layers": 1}, "rounds"),
        ("ansatz", {"name": "hardware_efficient", "rotations": "ry_rz"}, "axes: yz"),
        ("ansatz", {"name": "adapt", "pool": "fermionic_sd"}, "'singles_doubles'"),
        ("ansatz", {"name": "adapt", "pool": "fermionic_gsd"}, "'generalised_singles_doubles'"),
        ("optimizer", {"name": "spsa", "target_step": 0.2}, "first_step"),
        ("optimizer", {"name": "spsa", "calibration_samples": 5}, "gain_estimates"),
        ("optimizer", {"name": "spsa", "average_last": 5}, "iterate_average"),
        ("optimizer", {"name": "rbf_surrogate", "success_tolerance": 2}, "widen_after"),
        ("optimizer", {"name": "rbf_surrogate", "fail_tolerance": 2}, "narrow_after"),
    ],
)
def test_old_option_names_are_refused_naming_the_replacement(kind, entry, new):
    # each old name is an error (never accepted silently) whose one line names the new name
    with pytest.raises(ConfigError) as err:
        complete_method(kind, entry)
    msg = str(err.value)
    assert new in msg and "renamed" in msg and "\n" not in msg
    cfg = {
        "molecules": [{"name": "h2", "atoms": "H 0 0 0; H 0 0 0.74"}],
        "methods": {kind: [entry]},
    }
    with pytest.raises(ConfigError, match="renamed"):
        validate_config(cfg)


# ---------------------------------------------------------------------------- size gate
BIG = 'molecules:\n  - name: lih\n    atoms: "Li 0 0 0; H 0 0 1.6"\n    basis: cc-pvtz\n'


def test_size_estimate_counts_qubits_like_pyscf():
    # reference: PySCF's number of basis functions (spherical cc-pVTZ), computed here
    from pyscf import gto

    from eigensweep.plan import build_plan
    from eigensweep.resources import optimize_size

    nao = gto.M(atom="Li 0 0 0; H 0 0 1.6", basis="cc-pvtz", verbose=0).nao
    plan = build_plan(validate_config(parse_yaml(BIG, "big.yaml")))
    size = optimize_size(plan.nodes[plan.rows[0]["key"]], plan)
    assert size["n_qubits"] == 2 * nao
    assert size["simulator"] == "determinant space"


@pytest.mark.parametrize("command", ["plan", "run"])
def test_problems_above_the_limits_are_refused_unless_forced(
    tmp_path, monkeypatch, capsys, command
):
    from eigensweep.cli import main

    monkeypatch.chdir(tmp_path)
    _write(tmp_path, BIG, "big.yaml")
    assert main([command, "--config", "big.yaml"]) == 2
    err = capsys.readouterr().err.strip()
    assert "88 qubits, above limits.qubits (64)" in err and "--force" in err and "\n" not in err
    assert not (tmp_path / "results").exists() and not (tmp_path / ".snakemake").exists()
    # raised limits let it through to the next check (plan only: nothing is computed)
    _write(tmp_path, BIG + "limits: {qubits: 100}\n", "big.yaml")
    if command == "plan":
        assert main(["plan", "--config", "big.yaml"]) == 0
        assert "determinant space" in capsys.readouterr().out


def test_stage_job_limit(tmp_path, monkeypatch, capsys):
    from eigensweep.cli import main

    monkeypatch.chdir(tmp_path)
    _write(tmp_path, GOOD + "limits: {stage_jobs: 3}\n", "c.yaml")
    assert main(["plan", "--config", "c.yaml"]) == 2
    assert "4 stage jobs, above limits.stage_jobs (3)" in capsys.readouterr().err
    assert main(["plan", "--config", "c.yaml", "--force"]) == 0


def test_huge_molecules_are_refused_in_one_line(tmp_path, monkeypatch, capsys):
    # 2,000 hydrogen atoms: C(2000, 1000)^2 determinants (about 10^1200) must not overflow
    from eigensweep.cli import main

    monkeypatch.chdir(tmp_path)
    lines = [f"H 0 0 {1.0 * i}" for i in range(2000)]
    (tmp_path / "chain.xyz").write_text(f"{len(lines)}\nchain\n" + "\n".join(lines) + "\n")
    _write(tmp_path, "molecules:\n  - name: chain\n    xyz: chain.xyz\n", "c.yaml")
    assert main(["plan", "--config", "c.yaml"]) == 2
    err = capsys.readouterr().err.strip()
    assert "4000 qubits, above limits.qubits" in err and "\n" not in err
    assert main(["plan", "--config", "c.yaml", "--force"]) == 0
    assert "inf" in capsys.readouterr().out
