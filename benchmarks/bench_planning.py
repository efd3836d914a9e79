"""Planning and dry-run speed for a sweep of about 600 optimize jobs.

Prints: config validation + planning time (in process), and the wall time of a Snakemake dry
run of the same sweep (`eigensweep run --dry-run`), which includes building the DAG of every
stage job. Target (issue: cluster and provenance): well under 30 s for ~600 optimize jobs.

Usage: .venv/bin/python benchmarks/bench_planning.py
"""

from __future__ import annotations

import subprocess
import sys
import tempfile
import time
from pathlib import Path

import yaml

SWEEP = {
    "molecules": [
        {"name": name, "atoms": atoms, "scan": {"r": {"start": 0.6, "stop": 3.0, "num": 10}}}
        for name, atoms in [
            ("h2", "H 0 0 0; H 0 0 {r}"),
            ("lih", "Li 0 0 0; H 0 0 {r}"),
            ("beh2", "Be 0 0 0; H 0 0 {r}; H 0 0 -{r}"),
            ("h4", "H 0 0 0; H 0 0 {r}; H 0 0 4.0; H 0 0 5.0"),
            ("hf", "F 0 0 0; H 0 0 {r}"),
        ]
    ],
    "methods": {
        "mapping": ["jordan_wigner", "bravyi_kitaev", "parity"],
        "taper": [False, True],
        "ansatz": [{"name": "uccsd"}],
        "optimizer": [{"name": "lbfgs"}, {"name": "bfgs"}],
        "estimator": [{"name": "exact"}],
    },
}


def main() -> None:
    from eigensweep.config import validate_config
    from eigensweep.plan import build_plan

    t0 = time.perf_counter()
    cfg = validate_config(SWEEP)
    plan = build_plan(cfg)
    t_plan = time.perf_counter() - t0
    n_opt = len(plan.rows)
    print(f"sweep: {n_opt} optimize jobs, {len(plan.nodes)} stage jobs")
    print(f"validate + plan (in process): {t_plan:.3f} s")
    with tempfile.TemporaryDirectory() as tmp:
        path = Path(tmp) / "sweep.yaml"
        path.write_text(yaml.safe_dump(SWEEP))
        t0 = time.perf_counter()
        out = subprocess.run(
            [
                sys.executable,
                "-m",
                "eigensweep.cli",
                "run",
                "--config",
                str(path),
                "--dry-run",
                "--cores",
                "2",
                "--",
                "--quiet",
                "all",
            ],
            cwd=tmp,
            capture_output=True,
            text=True,
        )
        t_dry = time.perf_counter() - t0
        if out.returncode != 0:
            print(out.stderr[-2000:])
            raise SystemExit("dry run failed")
        t0 = time.perf_counter()
        out = subprocess.run(
            [sys.executable, "-m", "eigensweep.cli", "plan", "--config", str(path)],
            cwd=tmp,
            capture_output=True,
            text=True,
        )
        t_cli = time.perf_counter() - t0
    print(f"eigensweep plan (CLI, new process):       {t_cli:.1f} s")
    print(f"eigensweep run --dry-run (Snakemake DAG): {t_dry:.1f} s   target < 30 s")


if __name__ == "__main__":
    main()
