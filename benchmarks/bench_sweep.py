"""CPU cost of whole sweeps through `eigensweep run`, against a bare interpreter.

Cases: a 20-point H2 STO-3G bond scan (UCCSD, L-BFGS, tapered, 81 stage jobs) and the default
sweep (`config/config.yaml`). Each runs `python -m eigensweep.cli run` in a fresh temporary
folder; its CPU time is that of the whole process tree (user + system of every waited-for
descendant, `resource.getrusage(RUSAGE_CHILDREN)` before and after). The baseline is
`python -c "import numpy, h5py"` measured in the same run (median of a few), so figures taken
on a busy machine stay comparable: the ratio is CPU per point / CPU of the bare interpreter.

Usage:
    .venv/bin/python benchmarks/bench_sweep.py [--cases h2scan,default] [--cores 2]
        [--keep DIR] [--json FILE]

`--keep DIR` leaves each case's folder in DIR/<case> (to compare stage files between two
versions: the datasets must be bit-identical). To measure another checkout with the same
environment, put its `src` first on PYTHONPATH (the script prints which package it ran).
"""

from __future__ import annotations

import argparse
import json
import os
import resource
import shutil
import statistics
import subprocess
import sys
import tempfile
import time
from pathlib import Path

import yaml

H2_SCAN = {
    "study": "h2scan",
    "molecules": [
        {
            "name": "h2",
            "atoms": "H 0 0 0; H 0 0 {r}",
            "scan": {"r": {"start": 0.5, "stop": 2.4, "num": 20}},
            "basis": "sto-3g",
        }
    ],
    "methods": {"optimizer": [{"name": "lbfgs"}]},
}


def children_cpu() -> float:
    ru = resource.getrusage(resource.RUSAGE_CHILDREN)
    return ru.ru_utime + ru.ru_stime


def timed(cmd: list[str], cwd: Path | None = None, env: dict | None = None) -> tuple[float, float]:
    """(CPU seconds of the process tree, wall seconds) of one command; fails loudly."""
    c0, t0 = children_cpu(), time.perf_counter()
    out = subprocess.run(cmd, cwd=cwd, env=env, capture_output=True, text=True)
    wall = time.perf_counter() - t0
    cpu = children_cpu() - c0
    if out.returncode != 0:
        sys.exit(f"bench_sweep: {' '.join(cmd[:6])} failed:\n{out.stderr[-3000:]}")
    return cpu, wall


def bare_cpu(n: int = 5) -> float:
    return statistics.median(
        timed([sys.executable, "-c", "import numpy, h5py"])[0] for _ in range(n)
    )


def case_config(name: str, repo: Path) -> tuple[dict, int]:
    """(config, number of points) of a case."""
    if name == "h2scan":
        return H2_SCAN, H2_SCAN["molecules"][0]["scan"]["r"]["num"]
    if name == "default":
        cfg = yaml.safe_load((repo / "config" / "config.yaml").read_text())
        n = 0
        for mol in cfg["molecules"]:
            scan = mol["scan"]["r"]
            n += scan["num"] if isinstance(scan, dict) else len(scan)
        return cfg, n
    sys.exit(f"bench_sweep: unknown case {name}; use h2scan or default")


def run_case(name: str, cores: int, keep: Path | None) -> dict:
    import eigensweep

    repo = Path(eigensweep.__file__).resolve().parents[2]
    cfg, n_points = case_config(name, repo)
    work = Path(tempfile.mkdtemp(prefix=f"bench-sweep-{name}-"))
    (work / "c.yaml").write_text(yaml.safe_dump(cfg))
    env = dict(os.environ)
    cmd = [sys.executable, "-m", "eigensweep.cli", "run", "--config", "c.yaml"]
    cpu, wall = timed([*cmd, "--cores", str(cores)], cwd=work, env=env)
    n_files = len(list((work / "results").glob("*/*.h5")))
    if keep is not None:
        dest = keep / name
        shutil.rmtree(dest, ignore_errors=True)
        shutil.move(str(work), dest)
    else:
        shutil.rmtree(work)
    return {"case": name, "points": n_points, "stage_files": n_files, "cpu_s": cpu, "wall_s": wall}


def main() -> None:
    ap = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    ap.add_argument("--cases", default="h2scan,default")
    ap.add_argument("--cores", type=int, default=2)
    ap.add_argument("--keep", type=Path, help="keep each case's folder in KEEP/<case>")
    ap.add_argument("--json", type=Path, help="also write the figures as JSON")
    args = ap.parse_args()
    import eigensweep

    print(f"package: {Path(eigensweep.__file__).resolve().parent}")
    if args.keep:
        args.keep.mkdir(parents=True, exist_ok=True)
    bare_before = bare_cpu()
    rows = [run_case(c, args.cores, args.keep) for c in args.cases.split(",")]
    bare = statistics.median([bare_before, bare_cpu()])
    print(f"bare interpreter (python -c 'import numpy, h5py'): {bare:.3f} s CPU")
    print(
        f"{'case':<9} {'points':>6} {'files':>6} {'CPU s':>8} {'wall s':>7} "
        f"{'CPU s/point':>11} {'ratio to bare':>13}"
    )
    for r in rows:
        r["cpu_per_point_s"] = r["cpu_s"] / r["points"]
        r["ratio_to_bare"] = r["cpu_per_point_s"] / bare
        print(
            f"{r['case']:<9} {r['points']:>6} {r['stage_files']:>6} {r['cpu_s']:>8.1f} "
            f"{r['wall_s']:>7.1f} {r['cpu_per_point_s']:>11.2f} {r['ratio_to_bare']:>13.1f}"
        )
    if args.json:
        args.json.write_text(json.dumps({"bare_cpu_s": bare, "cases": rows}, indent=1) + "\n")


if __name__ == "__main__":
    main()
