"""Two study folders sharing one stage store, end to end through `eigensweep run --store`.

Study a scans H2 at r = 0.74, 1.0 Angstrom, study b at r = 1.0, 1.4: the second run must run only
the stage jobs of b's plan that a's plan does not hold, and both summaries must equal the same
sweeps run without a store (in this process, into plain results folders; wall_s is a timing and
differs between any two runs). The archive of b carries the store's files in and verifies.
"""

from __future__ import annotations

import csv
import json
import subprocess
import sys
import tarfile
from pathlib import Path

import pytest
import yaml
from fixtures import run_plan

from eigensweep.collect import collect

pytestmark = pytest.mark.slow


def sweep(points):
    return {
        "molecules": [
            {
                "name": "h2",
                "atoms": "H 0 0 0; H 0 0 {r}",
                "scan": {"r": points},
                "basis": "sto-3g",
            }
        ],
        "methods": {"taper": [False], "optimizer": [{"name": "lbfgs"}]},
    }


STUDIES = {"a": sweep([0.74, 1.0]), "b": sweep([1.0, 1.4])}


def cli(workdir: Path, *args: str) -> subprocess.CompletedProcess:
    out = subprocess.run(
        [sys.executable, "-m", "eigensweep.cli", *args],
        cwd=workdir,
        capture_output=True,
        text=True,
        timeout=900,
    )
    assert out.returncode == 0, out.stdout[-2000:] + out.stderr[-2000:]
    return out


def jobs(workdir: Path, store: Path) -> dict[str, str]:
    plan = json.loads(
        cli(workdir, "plan", "--config", "sweep.yaml", "--store", str(store), "--json").stdout
    )
    return {j["key"]: j["status"] for j in plan["jobs"]}


def ran_jobs(workdir: Path) -> set[str]:
    """Keys of the stage jobs Snakemake ran in this folder (each writes logs/<stage>/<key>.log)."""
    return {p.stem for p in (workdir / "logs").glob("*/*.log") if p.parent.name != "collect"}


def summary(results: Path) -> list[dict]:
    rows = list(csv.DictReader(open(results / "sweep" / "summary.csv")))
    for r in rows:
        r.pop("wall_s")  # a timing, different in any two runs
    return rows


@pytest.fixture(scope="module")
def shared(tmp_path_factory):
    root = tmp_path_factory.mktemp("shared")
    store = root / "store"
    status, ran = {}, {}
    for name, cfg in STUDIES.items():
        (root / name).mkdir()
        (root / name / "sweep.yaml").write_text(yaml.safe_dump(cfg))
        status[name] = jobs(root / name, store)
        cli(root / name, "run", "--config", "sweep.yaml", "--store", str(store), "--cores", "2")
        ran[name] = ran_jobs(root / name)
    return root, store, status, ran


def test_second_study_runs_only_what_the_first_did_not(shared):
    root, store, status, ran = shared
    a, b = status["a"], status["b"]
    assert set(a.values()) == {"pending"} and ran["a"] == set(a)
    shared_keys = set(a) & set(b)
    assert shared_keys, "the two sweeps overlap at r = 1.0"
    assert {k for k, s in b.items() if s == "stored"} == shared_keys  # plan counts the store
    assert ran["b"] == set(b) - set(a)  # only the jobs a did not run
    print(
        f"shared-store: study a ran {len(ran['a'])} stage jobs; study b has {len(b)}, "
        f"{len(shared_keys)} taken from the store, ran {len(ran['b'])}"
    )
    # one file per key in the store, and every study file is a link into it
    for name in STUDIES:
        for f in (root / name / "results").glob("*/*.h5"):
            assert f.is_symlink() and Path(f.resolve()).parent.parent == store.resolve()
    assert len(list(store.glob("*/*.h5"))) == len(set(a) | set(b))


def test_summaries_equal_runs_without_a_store(shared, tmp_path):
    root, _, _, _ = shared
    for name, raw in STUDIES.items():
        plain = tmp_path / name / "results"
        cfg, plan = run_plan(raw, plain, source=f"{name}/sweep.yaml")
        collect(plan.rows, plain, cfg["collect"]["accuracy_mha"], plan.exports, study="sweep")
        assert summary(root / name / "results") == summary(plain), name


def test_archive_of_a_store_study_carries_the_files_and_verifies(shared):
    root, _, status, _ = shared
    work = root / "b"
    cli(work, "archive", "--config", "sweep.yaml", "--output", "b.tar.gz")
    with tarfile.open(work / "b.tar.gz") as tar:
        h5 = [m for m in tar.getmembers() if m.name.endswith(".h5")]
    assert len(h5) == len(status["b"]) and all(m.isfile() for m in h5)
    assert "archive verified" in cli(work, "verify", "b.tar.gz").stdout


def test_store_list_and_dry_prune_see_both_studies(shared):
    root, store, status, _ = shared
    out = cli(root / "a", "store", "list").stdout  # the store from results/store.json
    assert "used by 2 study folder(s)" in out
    out = cli(root / "a", "store", "prune", "--store", str(store)).stdout
    assert "would remove 0 stage job(s)" in out
