"""Stage files are trusted only for what they prove, end to end through `eigensweep run`.

Issue 19: a stage file copied from another point with its key attribute edited used to be
accepted, so the r = 0.6 row of summary.csv carried r = 1.4's energies. The reference is the
same sweep run without the forgery (the property under test is equality) plus PySCF RHF
computed here for the affected point.
"""

from __future__ import annotations

import csv
import subprocess
import sys
from pathlib import Path

import h5py
import pytest
import yaml

from eigensweep.config import load_config
from eigensweep.plan import build_plan

pytestmark = pytest.mark.slow

CONFIG = {
    "molecules": [{"name": "h2", "atoms": "H 0 0 0; H 0 0 {r}", "scan": {"r": [0.6, 1.4]}}],
    "methods": {"taper": [False], "optimizer": [{"name": "lbfgs"}]},
}


def _cli(work: Path, *args: str) -> subprocess.CompletedProcess:
    return subprocess.run(
        [sys.executable, "-m", "eigensweep.cli", *args],
        cwd=work,
        capture_output=True,
        text=True,
        timeout=900,
    )


def _energies(work: Path) -> dict[str, tuple[str, str]]:
    rows = csv.DictReader(open(work / "results" / "c" / "summary.csv"))
    return {r["point"]: (r["energy_hf_eh"], r["energy_eh"]) for r in rows}


def test_forged_key_is_refused_and_recomputed(tmp_path):
    (tmp_path / "c.yaml").write_text(yaml.safe_dump(CONFIG))
    first = _cli(tmp_path, "run", "--config", "c.yaml", "--cores", "2")
    assert first.returncode == 0, first.stderr[-3000:]
    good = _energies(tmp_path)
    plan = build_plan(load_config(tmp_path / "c.yaml"), base_dir=tmp_path)
    keys = {r["point"]: r["key_integrals"] for r in plan.rows}
    src = tmp_path / "results" / "integrals" / f"{keys['r=1.4']}.h5"
    dst = tmp_path / "results" / "integrals" / f"{keys['r=0.6']}.h5"
    dst.write_bytes(src.read_bytes())
    with h5py.File(dst, "a") as f:
        f.attrs["key"] = keys["r=0.6"]
    status = _cli(tmp_path, "plan", "--config", "c.yaml")
    assert status.returncode == 0 and "damaged" in status.stdout
    again = _cli(tmp_path, "run", "--config", "c.yaml", "--cores", "2")
    assert again.returncode == 0, again.stderr[-3000:]
    assert "damaged stage file(s) moved" in again.stdout
    assert _energies(tmp_path) == good
    # reference: PySCF RHF at r = 0.6 Angstrom, STO-3G, computed here
    from pyscf import gto, scf

    e_hf = scf.RHF(gto.M(atom="H 0 0 0; H 0 0 0.6", basis="sto-3g", verbose=0)).kernel()
    assert abs(float(good["r=0.6"][0]) - e_hf) < 1e-8
