"""Command-line traps of issue 18 around configs, show and archive: each fails on the old main."""

from __future__ import annotations

import pytest

from eigensweep.cli import main
from eigensweep.errors import EigensweepError


@pytest.mark.parametrize("command", ["plan", "run", "archive"])
def test_no_silent_fallback_to_the_demo_config(tmp_path, monkeypatch, capsys, command):
    # outside a sweep folder the old main planned the repository's demo sweep
    monkeypatch.chdir(tmp_path)
    assert main([command]) == 2
    err = capsys.readouterr().err.strip()
    assert "config/config.yaml" in err and "--config" in err and "\n" not in err
    assert not (tmp_path / "results").exists()


def test_show_on_a_text_file_says_it_is_not_a_stage_file(tmp_path, capsys):
    readme = tmp_path / "README.md"
    readme.write_text("# notes\n")
    assert main(["show", str(readme)]) == 2
    err = capsys.readouterr().err.strip()
    assert "not an eigensweep stage file" in err and "delete" not in err


def test_archive_author_needs_a_valid_orcid():
    # ORCID iDs are 16 digits in four groups, the last may be X (orcid.org; from memory)
    from rocrate.rocrate import ROCrate

    from eigensweep.archive import _person

    with pytest.raises(EigensweepError, match="is not an ORCID"):
        _person(ROCrate(), "A. Person <1234>")
    p = _person(ROCrate(), "A. Person <https://orcid.org/0000-0002-1825-009X>")
    assert p.id == "https://orcid.org/0000-0002-1825-009X" and p["name"] == "A. Person"


EXTERNAL = {
    "molecules": [{"name": "h2", "atoms": "H 0 0 0; H 0 0 0.74"}],
    "methods": {"taper": [True], "optimizer": [{"name": "lbfgs"}]},
    "export": {"select": [{"molecule": "h2"}]},
    "device": {"kind": "external"},
}


@pytest.fixture(scope="module")
def exported(tmp_path_factory):
    """An exported job for an external device, computed in-process (no Snakemake)."""
    import os
    from pathlib import Path

    import yaml

    from eigensweep.config import load_config
    from eigensweep.plan import build_plan, parent_files
    from eigensweep.stage_table import stage_path
    from eigensweep.stages import STAGE_ACTIONS

    work = tmp_path_factory.mktemp("external")
    cwd = Path.cwd()
    os.chdir(work)
    try:
        (work / "sweep.yaml").write_text(yaml.safe_dump(EXTERNAL))
        plan = build_plan(load_config(work / "sweep.yaml"))
        for node in plan.nodes.values():
            STAGE_ACTIONS[node.stage](
                node, parent_files(node), str(stage_path(node.stage, node.key))
            )
    finally:
        os.chdir(cwd)
    return work, plan.exports[0]["key_export"]


def test_plan_lists_jobs_awaiting_counts(exported, monkeypatch, capsys):
    work, key = exported
    monkeypatch.chdir(work)
    assert main(["plan", "--config", "sweep.yaml"]) == 0
    out = capsys.readouterr().out
    assert "1 device job(s) await returned counts" in out and f"results/export/{key}/" in out


def test_counts_template_round_trip(exported, monkeypatch, capsys):
    # the skeleton follows the published results schema (checked with the jsonschema library)
    # and, once counts are filled in, imports against the job's manifest
    import json

    import jsonschema

    from eigensweep.device import RESULTS_SCHEMA

    work, key = exported
    monkeypatch.chdir(work)
    assert main(["counts-template", key, "--output", "answer.json"]) == 0
    data = json.loads((work / "answer.json").read_text())
    jsonschema.validate(data, RESULTS_SCHEMA)
    manifest = json.loads((work / "results" / "export" / key / "manifest.json").read_text())
    assert data["job_id"] == manifest["job_id"]
    assert {c: r["sha256"] for c, r in data["results"].items()} == {
        r["circuit_id"]: r["sha256"] for r in manifest["circuits"]
    }
    # unfilled: refused (every circuit needs at least one shot)
    assert main(["import-counts", "answer.json", "--job", key]) == 2
    n = manifest["n_qubits"]
    for entry in data["results"].values():
        entry["counts"] = {"0" * n: 10}
    data["device"] = "test"
    (work / "answer.json").write_text(json.dumps(data))
    assert main(["import-counts", "answer.json", "--job", key]) == 0
    assert (work / "results" / "returned" / f"{key}.json").is_file()
    assert main(["counts-template", key, "--output", "answer.json"]) == 2  # never overwrites
    capsys.readouterr()


def test_debug_is_accepted_after_the_subcommand(tmp_path, monkeypatch):
    monkeypatch.chdir(tmp_path)
    (tmp_path / "bad.yaml").write_text("seed: -1\nmolecules: []\n")
    with pytest.raises(EigensweepError):
        main(["plan", "--config", "bad.yaml", "--debug"])


def test_help_documents_exit_codes(capsys):
    with pytest.raises(SystemExit):
        main(["--help"])
    out = capsys.readouterr().out
    for code in ("0 ", "1 ", "2 ", "130", "141"):
        assert f"  {code}" in out


def test_closed_pipe_ends_without_traceback(tmp_path):
    # POSIX: writing to a pipe whose reader exited raises EPIPE (BrokenPipeError in Python);
    # 1500 points print more than a pipe buffer (64 kB on Linux) holds
    import subprocess
    import sys

    (tmp_path / "s.yaml").write_text(
        'molecules: [{name: h2, atoms: "H 0 0 0; H 0 0 {r}", '
        "scan: {r: {start: 0.5, stop: 2.5, num: 1500}}}]\nmethods: {taper: [false]}\n"
    )
    proc = subprocess.run(
        f"{sys.executable} -m eigensweep.cli plan --config s.yaml -v | head -c 10",
        shell=True,
        cwd=tmp_path,
        capture_output=True,
        text=True,
        timeout=300,
    )
    assert proc.stdout == "plan for s"
    assert "Traceback" not in proc.stderr and "BrokenPipe" not in proc.stderr


def test_device_job_names_its_problem(exported):
    # issue 18: a returned folder named by a hash could not be identified; the manifest and job
    # summary now state geometry, basis, charge, multiplicity and methods (as configured above)
    import json

    work, key = exported
    folder = work / "results" / "export" / key
    problem = json.loads((folder / "manifest.json").read_text())["meta"]["problem"]
    assert problem["atoms"] == "H 0 0 0; H 0 0 0.74" and problem["basis"] == "sto-3g"
    assert problem["charge"] == 0 and problem["multiplicity"] == 1
    assert problem["optimizer"]["name"] == "lbfgs" and problem["ansatz"]["name"] == "uccsd"
    text = (folder / "job-summary.md").read_text()
    assert "`H 0 0 0; H 0 0 0.74`" in text and "basis sto-3g" in text and "lbfgs" in text
