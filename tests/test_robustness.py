"""Robustness end to end: SIGKILL mid-sweep and resume, damaged stage files, concurrent sweeps
sharing stages, bit-identical reruns. The references here are the project's own uninterrupted
runs (the property under test is equality), plus PySCF FCI for the energies in test_workflow."""

from __future__ import annotations

import csv
import os
import signal
import subprocess
import sys
import time
from pathlib import Path

import numpy as np
import pytest
import yaml

from eigensweep.store import read_stage

pytestmark = pytest.mark.slow

CONFIG = {
    "molecules": [
        {"name": "h2", "atoms": "H 0 0 0; H 0 0 {r}", "scan": {"r": [0.6, 0.8, 1.0, 1.4]}}
    ],
    "methods": {"optimizer": [{"name": "lbfgs"}]},
}
TIMING = {"wall_s"}


def cli(workdir: Path, *args: str, **kw) -> subprocess.CompletedProcess:
    return subprocess.run(
        [sys.executable, "-m", "eigensweep.cli", *args],
        cwd=workdir,
        capture_output=True,
        text=True,
        timeout=900,
        **kw,
    )


def summary(workdir: Path) -> list[dict]:
    rows = list(csv.DictReader(open(workdir / "results" / "c" / "summary.csv")))
    return [{k: v for k, v in r.items() if k not in TIMING} for r in rows]


def stage_contents(workdir: Path) -> dict[str, tuple]:
    out = {}
    for f in sorted((workdir / "results").glob("*/*.h5")):
        sd = read_stage(f)
        meta = {k: v for k, v in sd.meta.items() if k not in TIMING}
        out[str(f.relative_to(workdir))] = (
            {k: np.asarray(v).tobytes() for k, v in sd.arrays.items()},
            yaml.safe_dump(meta, sort_keys=True),
        )
    return out


@pytest.fixture(scope="module")
def reference_run(tmp_path_factory):
    work = tmp_path_factory.mktemp("reference")
    (work / "c.yaml").write_text(yaml.safe_dump(CONFIG))
    out = cli(work, "run", "--config", "c.yaml", "--cores", "2")
    assert out.returncode == 0, out.stderr[-3000:]
    return work


def test_bit_identical_rerun_in_another_folder(reference_run, tmp_path):
    (tmp_path / "c.yaml").write_text(yaml.safe_dump(CONFIG))
    out = cli(tmp_path, "run", "--config", "c.yaml", "--cores", "2")
    assert out.returncode == 0, out.stderr[-3000:]
    assert stage_contents(tmp_path) == stage_contents(reference_run)


def test_sigkill_midway_then_resume(reference_run, tmp_path):
    (tmp_path / "c.yaml").write_text(yaml.safe_dump(CONFIG))
    proc = subprocess.Popen(
        [sys.executable, "-m", "eigensweep.cli", "run", "--config", "c.yaml", "--cores", "1"],
        cwd=tmp_path,
        stdout=subprocess.DEVNULL,
        stderr=subprocess.DEVNULL,
        start_new_session=True,
    )
    deadline = time.time() + 600
    while time.time() < deadline and not list((tmp_path / "results" / "hamiltonian").glob("*.h5")):
        time.sleep(0.2)
    os.killpg(proc.pid, signal.SIGKILL)
    proc.wait()
    done = list((tmp_path / "results").glob("*/*.h5"))
    assert done, "the sweep was killed before it wrote anything"
    assert len(list((tmp_path / "results").glob("optimize/*.h5"))) < 4, (
        "the sweep finished before the kill"
    )
    for f in done:
        read_stage(f)  # every stage file present is complete and verified
    out = cli(tmp_path, "run", "--config", "c.yaml", "--cores", "2")
    assert out.returncode == 0, out.stderr[-3000:]
    assert not list((tmp_path / "results").glob("*/.*.tmp"))
    assert summary(tmp_path) == summary(reference_run)


def test_damaged_stage_file_is_recomputed_not_reused(reference_run, tmp_path):
    (tmp_path / "c.yaml").write_text(yaml.safe_dump(CONFIG))
    assert cli(tmp_path, "run", "--config", "c.yaml", "--cores", "2").returncode == 0
    victim = sorted((tmp_path / "results" / "integrals").glob("*.h5"))[0]
    data = victim.read_bytes()
    victim.write_bytes(data[: len(data) // 3])
    plan = cli(tmp_path, "plan", "--config", "c.yaml")
    assert "damaged" in plan.stdout
    out = cli(tmp_path, "run", "--config", "c.yaml", "--cores", "2")
    assert out.returncode == 0, out.stderr[-3000:]
    assert "damaged stage file(s) moved" in out.stdout
    read_stage(victim)
    assert list((tmp_path / "results" / ".damaged").rglob(victim.name))  # evidence kept
    assert summary(tmp_path) == summary(reference_run)


def test_two_sweeps_sharing_stages_at_once(tmp_path):
    # Same molecule points (shared integrals/hamiltonian/taper), different optimizers.
    a = dict(CONFIG, methods={"optimizer": [{"name": "lbfgs"}]})
    b = dict(CONFIG, methods={"optimizer": [{"name": "bfgs"}]})
    (tmp_path / "a.yaml").write_text(yaml.safe_dump(a))
    (tmp_path / "b.yaml").write_text(yaml.safe_dump(b))
    procs = [
        subprocess.Popen(
            [sys.executable, "-m", "eigensweep.cli", "run", "--config", name, "--cores", "1"],
            cwd=tmp_path,
            stdout=subprocess.PIPE,
            stderr=subprocess.STDOUT,
            text=True,
        )
        for name in ("a.yaml", "b.yaml")
    ]
    outs = [p.communicate(timeout=900)[0] for p in procs]
    assert [p.returncode for p in procs] == [0, 0], outs
    assert any("waiting for it to finish" in o for o in outs)
    for f in (tmp_path / "results").glob("*/*.h5"):
        read_stage(f)
    assert (
        len(list((tmp_path / "results" / "integrals").glob("*.h5"))) == 4
    )  # shared, computed once
    assert len(list((tmp_path / "results" / "optimize").glob("*.h5"))) == 8
