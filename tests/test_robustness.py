"""Robustness end to end: SIGKILL/SIGTERM of `eigensweep run` mid-sweep (no orphaned Snakemake,
resume), damaged stage files rebuilt alone, touched files rerun nothing, concurrent sweeps
sharing stages, a deleted `.snakemake` while running, bit-identical reruns. The references here are the project's own uninterrupted
runs (the property under test is equality), plus PySCF FCI for the energies in test_workflow."""

from __future__ import annotations

import csv
import os
import shutil
import signal
import subprocess
import sys
import time
from pathlib import Path

import numpy as np
import pytest
import yaml

from eigensweep.paths import repo_root
from eigensweep.store import read_stage

pytestmark = pytest.mark.slow

CONFIG = {
    "molecules": [{"name": "h2", "atoms": "H 0 0 0; H 0 0 {r}", "scan": {"r": [0.6, 1.4]}}],
    "methods": {"optimizer": [{"name": "lbfgs"}]},
}
TIMING = {"wall_s"}


def start(workdir: Path, *args: str, **kw) -> subprocess.Popen:
    return subprocess.Popen(
        [sys.executable, "-m", "eigensweep.cli", *args],
        cwd=workdir,
        stdout=subprocess.PIPE,
        stderr=subprocess.STDOUT,
        text=True,
        **kw,
    )


def wait_for(pattern: str, workdir: Path, timeout: float = 600) -> None:
    deadline = time.time() + timeout
    while time.time() < deadline and not list((workdir / "results").glob(pattern)):
        time.sleep(0.05)
    assert list((workdir / "results").glob(pattern)), f"no {pattern} within {timeout} s"


def children(pid: int) -> list[int]:
    """Process ids of every descendant of ``pid`` (from /proc; Linux)."""
    kids: dict[int, list[int]] = {}
    for stat in Path("/proc").glob("[0-9]*/stat"):
        try:
            fields = stat.read_text().rsplit(")", 1)[1].split()
        except OSError:
            continue
        kids.setdefault(int(fields[1]), []).append(int(stat.parent.name))
    out, todo = [], [pid]
    while todo:
        for c in kids.get(todo.pop(), []):
            out.append(c)
            todo.append(c)
    return out


def alive(pid: int) -> bool:
    try:
        state = Path(f"/proc/{pid}/stat").read_text().rsplit(")", 1)[1].split()[0]
    except OSError:
        return False
    return state != "Z"


def signal_if_alive(pid: int, sig: int) -> None:
    """Send ``sig`` to ``pid`` unless it has ended (a short-lived child, such as a solver run
    of Snakemake's scheduler, may end and be reaped between listing and signalling)."""
    try:
        os.kill(pid, sig)
    except ProcessLookupError:
        pass


def wait_gone(pids: list[int], timeout: float = 60) -> list[int]:
    deadline = time.time() + timeout
    while time.time() < deadline and any(alive(p) for p in pids):
        time.sleep(0.1)
    return [p for p in pids if alive(p)]


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


def test_sigkill_midway_then_resume_is_bit_identical(reference_run, tmp_path):
    (tmp_path / "c.yaml").write_text(yaml.safe_dump(CONFIG))
    proc = subprocess.Popen(
        [sys.executable, "-m", "eigensweep.cli", "run", "--config", "c.yaml", "--cores", "1"],
        cwd=tmp_path,
        stdout=subprocess.DEVNULL,
        stderr=subprocess.DEVNULL,
        start_new_session=True,
    )
    wait_for("hamiltonian/*.h5", tmp_path)
    kids = children(proc.pid)
    assert kids, "eigensweep run started no Snakemake"
    os.killpg(proc.pid, signal.SIGKILL)
    proc.wait()
    assert not wait_gone(kids), "an orphaned Snakemake outlived the killed eigensweep run"
    done = list((tmp_path / "results").glob("*/*.h5"))
    assert done, "the sweep was killed before it wrote anything"
    assert len(list((tmp_path / "results").glob("optimize/*.h5"))) < 2, (
        "the sweep finished before the kill"
    )
    for f in done:
        read_stage(f)  # every stage file present is complete and verified
    out = cli(tmp_path, "run", "--config", "c.yaml", "--cores", "2")
    assert out.returncode == 0, out.stderr[-3000:]
    assert not list((tmp_path / "results").glob("*/.*.tmp"))
    assert summary(tmp_path) == summary(reference_run)
    # a rerun in another folder, part of it after a kill: every stage file bit-identical
    assert stage_contents(tmp_path) == stage_contents(reference_run)


def test_damaged_stage_file_is_recomputed_not_reused(reference_run, tmp_path):
    tmp_path = tmp_path / "w"  # a finished sweep: a copy of the reference run's folder
    shutil.copytree(reference_run, tmp_path, symlinks=True)
    victim = sorted((tmp_path / "results" / "integrals").glob("*.h5"))[0]
    data = victim.read_bytes()
    victim.write_bytes(data[: len(data) // 3])
    plan = cli(tmp_path, "plan", "--config", "c.yaml")
    assert "damaged" in plan.stdout
    others = {f: f.stat().st_mtime_ns for f in (tmp_path / "results").glob("*/*.h5") if f != victim}
    out = cli(tmp_path, "run", "--config", "c.yaml", "--cores", "2")
    assert out.returncode == 0, out.stderr[-3000:]
    assert "damaged stage file(s) moved" in out.stdout
    read_stage(victim)
    # the damaged file reruns alone: every other stage file is untouched (content keys)
    assert {f: f.stat().st_mtime_ns for f in others} == others
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
        len(list((tmp_path / "results" / "integrals").glob("*.h5"))) == 2
    )  # shared, computed once
    assert len(list((tmp_path / "results" / "optimize").glob("*.h5"))) == 4


def test_sigterm_of_the_parent_stops_snakemake_then_resume(reference_run, tmp_path):
    (tmp_path / "c.yaml").write_text(yaml.safe_dump(CONFIG))
    proc = start(tmp_path, "run", "--config", "c.yaml", "--cores", "1", start_new_session=True)
    wait_for("hamiltonian/*.h5", tmp_path)
    kids = children(proc.pid)
    assert kids, "eigensweep run started no Snakemake"
    proc.send_signal(signal.SIGTERM)
    out = proc.communicate(timeout=600)[0]
    assert proc.returncode == 130, out[-3000:]
    assert "rerun to resume" in out
    assert not wait_gone(kids), "Snakemake outlived eigensweep run after SIGTERM"
    assert not (tmp_path / ".snakemake" / "locks").is_dir() or not list(
        (tmp_path / ".snakemake" / "locks").iterdir()
    ), "Snakemake's lock was left behind after a graceful stop"
    out = cli(tmp_path, "run", "--config", "c.yaml", "--cores", "2")
    assert out.returncode == 0, out.stderr[-3000:]
    assert summary(tmp_path) == summary(reference_run)


def test_sigkill_of_the_parent_alone_leaves_no_snakemake(reference_run, tmp_path):
    (tmp_path / "c.yaml").write_text(yaml.safe_dump(CONFIG))
    proc = start(tmp_path, "run", "--config", "c.yaml", "--cores", "1")
    wait_for("hamiltonian/*.h5", tmp_path)
    kids = children(proc.pid)
    assert kids, "eigensweep run started no Snakemake"
    proc.kill()  # SIGKILL of the eigensweep process only, not of its process group
    proc.communicate()
    assert not wait_gone(kids), "an orphaned Snakemake outlived the killed eigensweep run"
    # the next run resumes (Snakemake's stale lock of the killed run is removed under ours)
    out = cli(tmp_path, "run", "--config", "c.yaml", "--cores", "2")
    assert out.returncode == 0, out.stderr[-3000:]
    assert summary(tmp_path) == summary(reference_run)


def test_touched_stage_files_rerun_nothing(reference_run, tmp_path):
    # a restore from backup: every stage file newer than its children and the tables
    work = tmp_path / "w"
    shutil.copytree(reference_run, work, symlinks=True)
    stage_files = sorted((work / "results").glob("*/*.h5"))
    future = time.time() + 3600
    for f in stage_files:
        os.utime(f, (future, future))
    before = {f: f.stat().st_mtime_ns for f in (work / "results").rglob("*") if f.is_file()}
    out = cli(work, "run", "--config", "c.yaml", "--cores", "2")
    assert out.returncode == 0, out.stderr[-3000:]
    assert "0 stage jobs run" in out.stdout + out.stderr  # the run display's closing line
    after = {f: f.stat().st_mtime_ns for f in (work / "results").rglob("*") if f.is_file()}
    assert after == before


def test_deleted_snakemake_folder_cannot_start_a_second_run(reference_run, tmp_path):
    (tmp_path / "c.yaml").write_text(yaml.safe_dump(CONFIG))
    first = start(tmp_path, "run", "--config", "c.yaml", "--cores", "1")
    wait_for("integrals/*.h5", tmp_path)
    # freeze the first sweep's Snakemake mid-run (it keeps its locks), so the checks below
    # happen while it is running however slow the machine is
    engines = children(first.pid)
    for pid in engines:
        signal_if_alive(pid, signal.SIGSTOP)
    try:
        shutil.rmtree(tmp_path / ".snakemake")  # what users are told they may delete
        # a plain snakemake in the same folder refuses in one line
        plain = subprocess.run(
            [sys.executable, "-m", "snakemake", "--snakefile", str(repo_root() / "Snakefile")]
            + ["--config", f"sweep={tmp_path / 'c.yaml'}", "--cores", "1"],
            cwd=tmp_path,
            capture_output=True,
            text=True,
            timeout=600,
        )
        assert plain.returncode != 0, "plain snakemake ran beside the first sweep"
        refusal = [x for x in plain.stderr.splitlines() if "another sweep is running" in x]
        assert len(refusal) == 1, plain.stderr[-2000:]
        # a second eigensweep run waits for the first
        second = start(tmp_path, "run", "--config", "c.yaml", "--cores", "1")
        head = []
        while not any("waiting for it to finish" in x for x in head):
            line = second.stdout.readline()
            assert line, "the second run ended without waiting: " + "".join(head)
            head.append(line)
    finally:
        for pid in engines:
            signal_if_alive(pid, signal.SIGCONT)
    outs = [first.communicate(timeout=900)[0], "".join(head) + second.communicate(timeout=900)[0]]
    assert [first.returncode, second.returncode] == [0, 0], outs
    assert "8 cached, 0 to run" in outs[1]  # it found the first sweep's work done
    for f in (tmp_path / "results").glob("*/*.h5"):
        read_stage(f)
    assert summary(tmp_path) == summary(reference_run)
