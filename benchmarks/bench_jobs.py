"""Mean CPU seconds per stage job of the default sweep, per stage, against a bare interpreter.

The default sweep (`config/config.yaml`) runs stage by stage in a fresh folder:
`eigensweep run -- --until <stage>` for each stage in chain order, so each step computes
exactly that stage's jobs (its parents are cached by the step before). The CPU time of a step is
that of the whole process tree (`resource.getrusage(RUSAGE_CHILDREN)`, every waited-for
descendant: the CLI, Snakemake and whatever runs the jobs). A final run with nothing to do
measures the fixed cost of one invocation (CLI, plan, pre-flight, DAG); it is subtracted from
each step, so a stage's figure is the marginal cost of its jobs:

    per job = (CPU of the step - CPU of the no-op run) / jobs of that stage

The ratio is per job / CPU of `python -c "import numpy, h5py"` (median, measured in the same
run), so figures from a busy machine remain comparable.

Usage: .venv/bin/python benchmarks/bench_jobs.py [--cores 2] [--json FILE]
"""

from __future__ import annotations

import argparse
import json
import os
import shutil
import statistics
import sys
import tempfile
from pathlib import Path

sys.path.insert(0, str(Path(__file__).resolve().parent))
from bench_sweep import bare_cpu, timed  # noqa: E402

CHAIN = ("integrals", "hamiltonian", "taper", "optimize", "export", "reconcile", "collect")


def main() -> None:
    ap = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    ap.add_argument("--cores", type=int, default=2)
    ap.add_argument("--json", type=Path, help="also write the figures as JSON")
    args = ap.parse_args()
    import eigensweep

    repo = Path(eigensweep.__file__).resolve().parents[2]
    print(f"package: {repo / 'src' / 'eigensweep'}")
    work = Path(tempfile.mkdtemp(prefix="bench-jobs-"))
    shutil.copy(repo / "config" / "config.yaml", work / "c.yaml")
    base = [sys.executable, "-m", "eigensweep.cli", "run", "--config", "c.yaml"]
    base += ["--cores", str(args.cores)]
    env = dict(os.environ)
    bare = [bare_cpu()]
    steps = []
    for stage in CHAIN:
        before = {p for p in (work / "results").glob("*/*") if p.suffix in (".h5", ".csv")}
        cpu, wall = timed([*base, "--", "--until", stage], cwd=work, env=env)
        after = {p for p in (work / "results").glob("*/*") if p.suffix in (".h5", ".csv")}
        new = [p for p in after - before if p.parent.name == stage or stage == "collect"]
        n_jobs = 1 if stage == "collect" else len(new)
        steps.append({"stage": stage, "jobs": n_jobs, "cpu_s": cpu, "wall_s": wall})
    noop = statistics.median(timed(base, cwd=work, env=env)[0] for _ in range(2))
    bare.append(bare_cpu())
    bare_s = statistics.median(bare)
    shutil.rmtree(work)
    print(f"bare interpreter (python -c 'import numpy, h5py'): {bare_s:.3f} s CPU")
    print(f"one invocation with nothing to run (subtracted): {noop:.2f} s CPU")
    print(f"{'stage':<12} {'jobs':>5} {'step CPU s':>10} {'CPU s/job':>9} {'ratio to bare':>13}")
    total = 0.0
    for s in steps:
        s["cpu_per_job_s"] = max(s["cpu_s"] - noop, 0.0) / max(s["jobs"], 1)
        s["ratio_to_bare"] = s["cpu_per_job_s"] / bare_s
        total += s["cpu_s"] - noop
        print(
            f"{s['stage']:<12} {s['jobs']:>5} {s['cpu_s']:>10.1f} {s['cpu_per_job_s']:>9.3f} "
            f"{s['ratio_to_bare']:>13.2f}"
        )
    n = sum(s["jobs"] for s in steps)
    print(f"all stage jobs: {n} jobs, {total:.1f} s CPU, {total / n:.3f} s per job")
    if args.json:
        doc = {"bare_cpu_s": bare_s, "noop_cpu_s": noop, "steps": steps}
        args.json.write_text(json.dumps(doc, indent=1) + "\n")


if __name__ == "__main__":
    main()
