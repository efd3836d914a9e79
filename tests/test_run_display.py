"""The run display: progress from the file system, one line per failed job, closing summary.

Unit checks feed engine lines of the shape Snakemake prints (copied from a real run of this
project's workflow: an ``Error in rule`` block); the end-to-end check runs a sweep in which one
point's SCF cannot converge (test-only fault injection, tests/faults/sitecustomize.py).
"""

from __future__ import annotations

import io
import os
import subprocess
import sys
from pathlib import Path

import pytest
import yaml

from eigensweep.config import validate_config
from eigensweep.display import RunDisplay, point_labels
from eigensweep.plan import build_plan

RAW = {
    "molecules": [
        {"name": "h2", "atoms": "H 0 0 0; H 0 0 {r}", "scan": {"r": [0.74, 1.4]}, "basis": "sto-3g"}
    ],
    "methods": {"taper": [False], "optimizer": [{"name": "lbfgs"}]},
}


def _plan():
    return build_plan(validate_config(RAW, source="t"))


def _touch(results: Path, node) -> None:
    f = results / node.stage / f"{node.key}.h5"
    f.parent.mkdir(parents=True, exist_ok=True)
    f.write_bytes(b"x")


def test_plain_lines_count_files_and_name_the_failed_point(tmp_path):
    plan = _plan()
    nodes = list(plan.nodes.values())
    out = io.StringIO()
    d = RunDisplay(plan, nodes, tmp_path / "results", tmp_path / "logs" / "run.log", out=out)
    assert d.tty is False
    bad = next(n for n in nodes if n.stage == "integrals" and "1.4" in n.params["atoms"])
    log = tmp_path / "logs" / "integrals" / f"{bad.key}.log"
    log.parent.mkdir(parents=True)
    log.write_text("starting\neigensweep integrals: scf: RHF did not converge\n")
    for n in nodes:
        if n.parents.get("integrals") != bad.key and n is not bad:
            _touch(tmp_path / "results", n)
    for line in (
        "[Thu Dec  3 14:18:55 2026]",
        "Error in rule integrals:",
        "    message: None",
        "    jobid: 9",
        f"    output: results/integrals/{bad.key}.h5",
        f"    log: {log} (check log file(s) for error details)",
        "[Thu Dec  3 14:19:24 2026]",
    ):
        d.feed(line)
    d.tick()
    lines = d.finish(1)
    text = out.getvalue()
    failed = [ln for ln in text.splitlines() if "FAILED" in ln]
    assert failed == [
        f"eigensweep: FAILED integrals h2 r=1.4: scf: RHF did not converge (log: {log})"
    ]
    assert "4/8 stage jobs" in text  # plain progress lines, no carriage returns
    assert "\r" not in text
    assert "1 stage job(s) failed, 4 done, 3 not run" in lines[0] and "run.log" in lines[0]
    assert "Error in rule integrals:" in (tmp_path / "logs" / "run.log").read_text()
    assert "Error in rule" not in text  # the engine log is not on the screen


def test_terminal_progress_line_uses_tqdm(tmp_path):
    plan = _plan()
    nodes = list(plan.nodes.values())
    out = io.StringIO()
    d = RunDisplay(plan, nodes, tmp_path / "r", tmp_path / "run.log", out=out, tty=True)
    _touch(tmp_path / "r", nodes[0])
    d.tick()
    assert "1/8 jobs" in out.getvalue() and "integrals 1/2" in out.getvalue()
    d.finish(0)


def test_verbose_shows_the_engine_lines(tmp_path):
    plan = _plan()
    out = io.StringIO()
    d = RunDisplay(plan, [], tmp_path, tmp_path / "run.log", out=out, verbose=True)
    d.feed("Select jobs to execute...")
    d.finish(0)
    assert "Select jobs to execute..." in out.getvalue()


def test_labels_name_molecule_point_and_methods():
    plan = _plan()
    labels = point_labels(plan)
    row = plan.rows[1]
    assert labels[row["key_integrals"]] == "h2 r=1.4"
    assert labels[row["key"]].startswith("h2 r=1.4 jordan_wigner untapered")


@pytest.mark.slow
def test_failing_point_is_named_in_one_line_while_the_rest_completes(tmp_path):
    (tmp_path / "sweep.yaml").write_text(yaml.safe_dump(RAW))
    env = dict(
        os.environ,
        PYTHONPATH=str(Path(__file__).parent / "faults"),
        EIGENSWEEP_TEST_SCF_FAIL_R="1.4",
    )
    proc = subprocess.run(
        [sys.executable, "-m", "eigensweep.cli", "run", "--config", "sweep.yaml", "--cores", "2"],
        cwd=tmp_path,
        env=env,
        capture_output=True,
        text=True,
        timeout=900,
    )
    assert proc.returncode == 1, proc.stderr[-2000:]
    lines = proc.stdout.splitlines()
    failed = [ln for ln in lines if "FAILED" in ln]
    assert len(failed) == 1, proc.stdout
    assert failed[0].startswith("eigensweep: FAILED integrals h2 r=1.4: ")
    assert "did not converge" in failed[0] and "(log: logs/integrals/" in failed[0]
    log = failed[0].rsplit("(log: ", 1)[1].rstrip(")")
    assert (tmp_path / log).is_file()
    # the other point's chain completed
    plan = build_plan(validate_config(RAW, source="t"))
    ok = plan.rows[0]
    for stage in ("integrals", "hamiltonian", "taper"):
        assert (tmp_path / "results" / stage / f"{ok[f'key_{stage}']}.h5").is_file()
    assert (tmp_path / "results" / "optimize" / f"{ok['key']}.h5").is_file()
    assert len(lines) < 20, proc.stdout
    print("\n".join(lines))
