"""A non-editable install from a built wheel finds its schema and workflow and runs a sweep.

The wheel is built from this repository, installed (without dependencies) into a fresh
virtual environment whose dependencies are borrowed from the test's own environment through a
path entry, and `eigensweep run` is started from a folder outside the repository. Reference:
the H2 energy is compared with PySCF FCI computed in the test.
"""

from __future__ import annotations

import csv
import os
import shutil
import subprocess
import sys
import sysconfig
from pathlib import Path

import pytest

ROOT = Path(__file__).resolve().parents[1]

TINY = """\
molecules:
  - name: h2
    atoms: "H 0 0 0; H 0 0 0.74"
methods:
  ansatz: [{name: uccsd}]
  optimizer: [{name: lbfgs}]
"""


def _run(cmd: list[str], **kw) -> subprocess.CompletedProcess:
    proc = subprocess.run(cmd, capture_output=True, text=True, **kw)
    assert proc.returncode == 0, f"{cmd[:4]} failed:\n{proc.stdout[-3000:]}\n{proc.stderr[-3000:]}"
    return proc


@pytest.mark.slow
def test_sweep_from_a_built_wheel(tmp_path):
    # build from a clean copy: setuptools' in-tree build/ folder would keep stale files
    src = tmp_path / "src"
    junk = (".git", ".venv*", "build", "dist", "*.egg-info", "results", "logs", ".snakemake")
    shutil.copytree(ROOT, src, ignore=shutil.ignore_patterns(*junk, "__pycache__", ".*_cache"))
    wheels = tmp_path / "wheels"
    _run([sys.executable, "-m", "pip", "wheel", "--no-deps", "-q", "-w", str(wheels), str(src)])
    (wheel,) = wheels.glob("eigensweep-*.whl")

    venv = tmp_path / "venv"
    _run([sys.executable, "-m", "venv", "--without-pip", str(venv)])
    py = venv / "bin" / "python"
    site = Path(
        _run(
            [str(py), "-c", "import sysconfig; print(sysconfig.get_path('purelib'))"]
        ).stdout.strip()
    )
    # dependencies from this environment, as a plain path entry: the editable install's own
    # .pth file there is not processed, so only the wheel's eigensweep is importable
    (site / "borrowed-deps.pth").write_text(sysconfig.get_path("purelib") + "\n")
    _run(
        [sys.executable, "-m", "pip", "--python", str(py), "install", "-q", "--no-deps", str(wheel)]
    )

    env = {k: v for k, v in os.environ.items() if not k.startswith("PYTHON")}
    env.update(PYTHONNOUSERSITE="1", OMP_NUM_THREADS="1")
    work = tmp_path / "work"
    work.mkdir()
    where = _run(
        [
            str(py),
            "-c",
            "import eigensweep, eigensweep.paths as p; print(eigensweep.__file__); print(p.repo_root())",
        ],
        cwd=work,
        env=env,
    ).stdout.split()
    assert Path(where[0]).is_relative_to(site), where
    assert Path(where[1]) == venv / "share" / "eigensweep", where

    (work / "tiny.yaml").write_text(TINY)
    _run(
        [str(venv / "bin" / "eigensweep"), "run", "--config", "tiny.yaml", "--cores", "1"],
        cwd=work,
        env=env,
    )
    rows = list(csv.DictReader((work / "results" / "tiny" / "summary.csv").open()))
    assert len(rows) == 1

    # reference: PySCF FCI for H2/STO-3G at 0.74 Angstrom, computed here
    from pyscf import fci, gto, scf

    mol = gto.M(atom="H 0 0 0; H 0 0 0.74", basis="sto-3g", verbose=0)
    e_fci = fci.FCI(scf.RHF(mol).run()).kernel()[0]
    assert abs(float(rows[0]["energy_eh"]) - e_fci) < 1e-6
