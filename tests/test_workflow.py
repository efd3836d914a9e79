"""End to end through Snakemake on a tiny sweep in a temporary folder.

Checks the caching contract of the design: the first run writes every stage file; a rerun runs
nothing; changing only the optimizer reruns only optimize (and collect) and leaves the integrals
files byte-identical. Energies are checked against PySCF FCI computed here (reference library).
"""

from __future__ import annotations

import csv
import subprocess
import sys
from pathlib import Path

import pytest
import yaml

pytestmark = pytest.mark.slow

CONFIG = {
    "molecules": [
        {
            "name": "h2",
            "atoms": "H 0 0 0; H 0 0 {r}",
            "scan": {"r": [0.74, 1.0]},
            "basis": "sto-3g",
        },
    ],
    "methods": {"taper": [False], "optimizer": [{"name": "lbfgs"}]},
}


def run_cli(workdir: Path, *args: str) -> subprocess.CompletedProcess:
    return subprocess.run(
        [sys.executable, "-m", "eigensweep.cli", *args],
        cwd=workdir,
        capture_output=True,
        text=True,
        timeout=900,
    )


def snapshot(workdir: Path) -> dict[str, tuple[float, bytes]]:
    return {
        str(p.relative_to(workdir)): (p.stat().st_mtime_ns, p.read_bytes())
        for p in sorted((workdir / "results").rglob("*.h5"))
    }


@pytest.fixture(scope="module")
def sweep(tmp_path_factory):
    work = tmp_path_factory.mktemp("sweep")
    (work / "sweep.yaml").write_text(yaml.safe_dump(CONFIG))
    first = run_cli(work, "run", "--config", "sweep.yaml", "--cores", "2")
    assert first.returncode == 0, first.stderr[-3000:]
    return work, first


def test_first_run_writes_every_stage(sweep):
    work, _ = sweep
    for stage, n in (("integrals", 2), ("hamiltonian", 2), ("taper", 2), ("optimize", 2)):
        assert len(list((work / "results" / stage).glob("*.h5"))) == n, stage
    rows = list(csv.DictReader(open(work / "results" / "sweep" / "summary.csv")))
    assert len(rows) == 2
    assert (work / "results" / "sweep" / "plots" / "h2_energy.png").stat().st_size > 1000


def test_every_study_file_is_a_declared_output(sweep):
    # reference: Snakemake's own records: it keeps metadata (.snakemake/metadata/<base64 of the
    # path>) for every declared output it produced; a table or plot written but not declared has
    # none (then an archive or `snakemake --delete-all-output` would not know of it)
    import base64

    work, _ = sweep
    recorded = {
        base64.urlsafe_b64decode(p.name).decode()
        for p in (work / ".snakemake" / "metadata").iterdir()
        if p.is_file()
    }
    written = {
        str(p.relative_to(work)) for p in (work / "results" / "sweep").rglob("*") if p.is_file()
    }
    undeclared = {
        f for f in written if f not in recorded and not any(f.startswith(d + "/") for d in recorded)
    }
    assert written and not undeclared, sorted(undeclared)


def test_energies_against_pyscf_fci(sweep):
    # reference: PySCF RHF + FCI computed at test time
    from pyscf import fci, gto, scf

    work, _ = sweep
    rows = {
        float(r["scan_r_angstrom"]): r
        for r in csv.DictReader(open(work / "results" / "sweep" / "summary.csv"))
    }
    for r, row in rows.items():
        mol = gto.M(atom=f"H 0 0 0; H 0 0 {r}", basis="sto-3g", verbose=0)
        mf = scf.RHF(mol).run()
        e_fci = fci.FCI(mf).kernel()[0]
        assert abs(float(row["energy_hf_eh"]) - mf.e_tot) < 1e-8
        assert abs(float(row["energy_exact_eh"]) - e_fci) < 1e-8
        e = float(row["energy_eh"])
        assert e >= e_fci - 1e-9, "VQE energy below FCI breaks the variational principle"
        assert e - e_fci < 1.6e-3


def test_rerun_executes_nothing(sweep):
    work, _ = sweep
    before = snapshot(work)
    dry = run_cli(work, "run", "--config", "sweep.yaml", "--cores", "2", "--dry-run")
    assert dry.returncode == 0, dry.stderr[-2000:]
    assert "Nothing to be done" in dry.stdout + dry.stderr
    again = run_cli(work, "run", "--config", "sweep.yaml", "--cores", "2")
    assert again.returncode == 0
    assert snapshot(work) == before


def test_changing_optimizer_reruns_only_optimize(sweep):
    work, _ = sweep
    before = snapshot(work)
    first_study = {
        p: p.read_bytes() for p in (work / "results" / "sweep").rglob("*") if p.is_file()
    }
    cfg = dict(CONFIG, methods={"taper": [False], "optimizer": [{"name": "bfgs"}]})
    (work / "sweep2.yaml").write_text(yaml.safe_dump(cfg))
    out = run_cli(work, "run", "--config", "sweep2.yaml", "--cores", "2")
    assert out.returncode == 0, out.stderr[-3000:]
    # a second study in the same folder writes its own tables and leaves the first one's alone
    assert (work / "results" / "sweep2" / "summary.csv").is_file()
    assert {
        p: p.read_bytes() for p in (work / "results" / "sweep").rglob("*") if p.is_file()
    } == first_study
    after = snapshot(work)
    for name, value in before.items():
        assert after[name] == value, f"{name} was rewritten"
    new = set(after) - set(before)
    assert new and all(n.startswith("results/optimize/") for n in new)
    assert len(new) == 2


def test_archive_verifies_and_detects_one_changed_byte(sweep, tmp_path):
    import tarfile

    work, _ = sweep
    out = run_cli(work, "archive", "--config", "sweep.yaml", "--output", str(tmp_path / "a.tar.gz"))
    assert out.returncode == 0, out.stderr[-2000:]
    ok = run_cli(work, "verify", str(tmp_path / "a.tar.gz"))
    assert ok.returncode == 0, ok.stderr[-2000:]
    assert "archive verified" in ok.stdout
    with tarfile.open(tmp_path / "a.tar.gz") as tar:
        names = tar.getnames()
        assert any(n.endswith("ro-crate-metadata.json") for n in names)
        assert any(n.endswith("environment.lock") for n in names)
        tar.extractall(tmp_path / "x", filter="data")
    victim = sorted((tmp_path / "x").rglob("results/integrals/*.h5"))[0]
    data = bytearray(victim.read_bytes())
    data[len(data) // 2] ^= 0x01
    victim.write_bytes(bytes(data))
    with tarfile.open(tmp_path / "b.tar.gz", "w:gz") as tar:
        tar.add(tmp_path / "x" / "eigensweep-archive", arcname="eigensweep-archive")
    bad = run_cli(work, "verify", str(tmp_path / "b.tar.gz"))
    assert bad.returncode != 0
    assert victim.name in bad.stderr and "SHA-256" in bad.stderr
