"""Device round trip through the workflow with an external device: export, a provider's counts
(played here by the synthetic device), import with checks, and reconciliation of only that point.
Energies are compared with PySCF FCI computed here (reference library)."""

from __future__ import annotations

import csv
import json
import shutil
import subprocess
import sys
from pathlib import Path

import pytest
import yaml

pytestmark = pytest.mark.slow

CONFIG = {
    "molecules": [{"name": "h2", "atoms": "H 0 0 0; H 0 0 {r}", "scan": {"r": [0.74, 1.2]}}],
    "methods": {"taper": [True]},
    "export": {
        "select": [{"molecule": "h2", "point": "r=0.74"}],
        "shots": 20000,
        "scale_factors": [1],
    },
    "device": {"kind": "external"},
}


def cli(work: Path, *args: str) -> subprocess.CompletedProcess:
    return subprocess.run(
        [sys.executable, "-m", "eigensweep.cli", *args],
        cwd=work,
        capture_output=True,
        text=True,
        timeout=900,
    )


def test_external_counts_are_checked_imported_and_reconciled(tmp_path):
    from pyscf import fci, gto, scf

    from eigensweep.device import run_synthetic_device, write_results

    (tmp_path / "c.yaml").write_text(yaml.safe_dump(CONFIG))
    first = cli(tmp_path, "run", "--config", "c.yaml", "--cores", "2")
    assert first.returncode == 0, first.stderr[-3000:]
    jobs = [p for p in (tmp_path / "results" / "export").iterdir() if p.is_dir()]
    assert len(jobs) == 1 and (jobs[0] / "manifest.json").is_file()
    assert not (tmp_path / "results" / "reconcile").exists()
    key = jobs[0].name

    # the "provider" answers (synthetic device standing in), then a damaged copy
    answer = run_synthetic_device(jobs[0], seed=5, readout_error=(0.01, 0.02))
    write_results(answer, tmp_path / "returned.json")
    bad = json.loads((tmp_path / "returned.json").read_text())
    cid = next(iter(bad["results"]))
    bitstring = next(iter(bad["results"][cid]["counts"]))
    bad["results"][cid]["counts"][bitstring] = -3
    (tmp_path / "bad.json").write_text(json.dumps(bad))

    refused = cli(tmp_path, "import-counts", "bad.json", "--job", key)
    assert refused.returncode != 0
    assert len(refused.stderr.strip().splitlines()) == 1 and "bad.json" in refused.stderr
    assert not (tmp_path / "results" / "returned").exists() or not any(
        (tmp_path / "results" / "returned").iterdir()
    )

    ok = cli(tmp_path, "import-counts", "returned.json", "--job", key)
    assert ok.returncode == 0, ok.stderr
    assert (tmp_path / "results" / "returned" / f"{key}.json").is_file()

    optimize_before = {
        p: p.stat().st_mtime_ns for p in (tmp_path / "results" / "optimize").glob("*.h5")
    }
    second = cli(tmp_path, "run", "--config", "c.yaml", "--cores", "2")
    assert second.returncode == 0, second.stderr[-3000:]
    assert optimize_before == {
        p: p.stat().st_mtime_ns for p in (tmp_path / "results" / "optimize").glob("*.h5")
    }
    assert len(list((tmp_path / "results" / "reconcile").glob("*.h5"))) == 1
    rows = {
        r["estimate"]: r
        for r in csv.DictReader(open(tmp_path / "results" / "c" / "device_summary.csv"))
    }
    # reference: PySCF FCI computed at test time; readout-mitigated estimate of a 1-qubit job with
    # only readout noise must bracket the exact energy within its 95 % interval or a few mHa
    e_fci = fci.FCI(
        scf.RHF(gto.M(atom="H 0 0 0; H 0 0 0.74", basis="sto-3g", verbose=0)).run()
    ).kernel()[0]
    mit = rows["readout_mitigated"]
    assert float(mit["ci_low_eh"]) - 3e-3 <= e_fci <= float(mit["ci_high_eh"]) + 3e-3
    assert abs(float(rows["raw"]["energy_eh"]) - e_fci) > abs(float(mit["energy_eh"]) - e_fci)

    # the device figures are outputs of the collect rule (the histogram pages as one declared
    # folder): deleted, they are made again by the next run
    plots = tmp_path / "results" / "c" / "plots"
    pages = sorted((plots / "device_histograms").glob(f"device_{key}*.png"))
    assert pages and (plots / f"zne_{key}.png").is_file()
    shutil.rmtree(plots / "device_histograms")
    third = cli(tmp_path, "run", "--config", "c.yaml", "--cores", "2")
    assert third.returncode == 0, third.stderr[-3000:]
    assert sorted((plots / "device_histograms").glob("*.png")) == pages
