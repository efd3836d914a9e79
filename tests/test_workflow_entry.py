"""The `run:` entry of stage jobs: per-job logs, one-line failures, and a light Snakefile parse.

References: Snakemake's own dry run (`python -X importtime` lists every module it imports) and
the project's stage table; no science here."""

from __future__ import annotations

import subprocess
import sys
import threading
from pathlib import Path
from types import SimpleNamespace

import pytest
import yaml

from eigensweep import workflow_entry
from eigensweep.paths import repo_root


class _Named(dict):
    """Snakemake's named input/output lists, reduced to what `stage_job` reads."""

    def __getitem__(self, k):
        return list(self.values())[k] if isinstance(k, int) else dict.__getitem__(self, k)


def test_failing_stage_job_raises_one_line_and_logs_it(tmp_path):
    node = {"stage": "taper", "key": "0" * 16, "params": {"taper": True}, "parents": {}}
    log = tmp_path / "logs" / "taper" / f"{'0' * 16}.log"
    missing = tmp_path / "results" / "hamiltonian" / f"{'1' * 16}.h5"
    with pytest.raises(workflow_entry.StageJobError) as err:
        workflow_entry.stage_job(
            "taper",
            _Named(hamiltonian=str(missing), integrals=str(missing)),
            [str(tmp_path / "out.h5")],
            SimpleNamespace(node=node),
            [str(log)],
        )
    line = str(err.value)
    assert "\n" not in line and line.startswith("eigensweep taper 0000000000000000:")
    assert line in log.read_text()
    assert not (tmp_path / "out.h5").exists()


def test_job_threads_write_to_their_own_logs(tmp_path):
    # two job threads print at once; each line lands in its own job's log only
    def job(name):
        with workflow_entry.job_log(tmp_path / f"{name}.log"):
            for i in range(200):
                print(f"{name} {i}")
                print(f"{name} err {i}", file=sys.stderr)

    threads = [threading.Thread(target=job, args=(n,)) for n in ("a", "b")]
    for t in threads:
        t.start()
    for t in threads:
        t.join()
    for name, other in (("a", "b"), ("b", "a")):
        text = (tmp_path / f"{name}.log").read_text()
        assert text.count(f"{name} ") == 400 and f"{other} " not in text


def test_snakefile_parse_imports_no_chemistry(tmp_path):
    # the parse of every Snakemake run (and of every cluster job) stays light (issue 11/22)
    cfg = {"molecules": [{"name": "h2", "atoms": "H 0 0 0; H 0 0 {r}", "scan": {"r": [0.7]}}]}
    (tmp_path / "c.yaml").write_text(yaml.safe_dump(cfg))
    out = subprocess.run(
        [sys.executable, "-X", "importtime", "-m", "snakemake", "-n", "--cores", "1"]
        + [
            "--snakefile",
            str(repo_root() / "Snakefile"),
            "--config",
            f"sweep={tmp_path / 'c.yaml'}",
        ],
        cwd=tmp_path,
        capture_output=True,
        text=True,
        timeout=600,
    )
    assert out.returncode == 0, out.stderr[-2000:]
    imported = {line.rsplit("|", 1)[-1].strip() for line in out.stderr.splitlines() if "|" in line}
    assert "eigensweep.plan" in imported  # the parse did happen
    for heavy in ("pyscf", "openfermion", "scipy", "matplotlib"):
        assert heavy not in imported, heavy


def test_rules_have_no_scripts_folder():
    assert not (Path(repo_root()) / "workflow" / "scripts").exists()
