"""Compare two runs of the same sweep, and a sweep's circuit costs with its exported jobs.

1. Energies: rows of two ``summary.csv`` files (for example the default sweep run on two
   commits) are matched by molecule, point and methods (mapping, tapered, ansatz, optimizer,
   estimator; seed when both have it), and every energy column present in both (with or
   without the ``_eh`` unit suffix of newer tables) is compared; the largest absolute
   difference per column is printed, and the script fails above ``--tol`` (default 1e-9 Eh).
2. Circuit costs (``--results DIR``, the newer run's ``results/``): for every exported point
   the CNOT count and depth of the optimized circuit in ``summary.csv`` must equal the
   ``state_preparation`` of the export manifest (the job summary shows the same numbers).

Usage::

    python benchmarks/compare_sweeps.py OLD/summary.csv NEW/summary.csv [--results NEW_RESULTS] [--allow-new]
"""

from __future__ import annotations

import argparse
import csv
import json
import math
import sys
from pathlib import Path

MATCH = ("molecule", "point", "mapping", "tapered", "ansatz", "optimizer", "estimator")
ENERGIES = (
    "energy",
    "energy_hf",
    "energy_mp2",
    "energy_ccsd",
    "energy_ccsd_t",
    "energy_exact",
    "energy_fci",
)


def _rows(path: Path) -> list[dict]:
    with open(path, newline="") as fh:
        return list(csv.DictReader(fh))


def _value(row: dict, name: str) -> float | None:
    for col in (name, f"{name}_eh"):
        if row.get(col) not in (None, ""):
            return float(row[col])
    return None


def _key(row: dict, match: tuple[str, ...]) -> tuple:
    return tuple(row.get(k, "") for k in match)


def compare_energies(old: list[dict], new: list[dict], tol: float, allow_new: bool = False) -> bool:
    match = MATCH + (("seed",) if all("seed" in r for r in old + new) else ())
    old_by = {_key(r, match): r for r in old}
    new_by = {_key(r, match): r for r in new}
    common = sorted(set(old_by) & set(new_by))
    print(f"rows: old {len(old)}, new {len(new)}, matched {len(common)}")
    ok = len(common) == len(old) and (allow_new or len(common) == len(new))
    if len(common) != len(old) or len(common) != len(new):
        print("  unmatched old:", sorted(set(old_by) - set(new_by))[:5])
        print("  unmatched new:", sorted(set(new_by) - set(old_by))[:5])
    for name in ENERGIES:
        diffs = []
        for k in common:
            a, b = _value(old_by[k], name), _value(new_by[k], name)
            if a is None or b is None or (math.isnan(a) and math.isnan(b)):
                continue
            diffs.append((abs(a - b), k))
        if not diffs:
            continue
        worst, where = max(diffs)
        flag = "ok" if worst <= tol else "DIFFERS"
        print(f"  {name:<14} {len(diffs):>3} rows  max |diff| {worst:.3e} Eh  {flag}  {where[:2]}")
        ok = ok and worst <= tol
    return ok


def compare_costs(rows: list[dict], results: Path) -> bool:
    ok, n = True, 0
    for manifest in sorted(results.glob("export/*/**/manifest.json")):
        doc = json.loads(manifest.read_text())
        prep = doc["state_preparation"]
        key_optimize = doc["meta"]["optimize_key"]
        match = [r for r in rows if key_optimize and r.get("key") == key_optimize]
        if not match:
            print(f"  {manifest}: no summary row with key {key_optimize}")
            ok = False
            continue
        row = match[0]
        same = int(row["cnot_count"]) == prep["cnot_count"] and int(row["depth"]) == prep["depth"]
        n += 1
        print(
            f"  {row['molecule']} {row['point']} tapered={row['tapered']}: summary CNOT "
            f"{row['cnot_count']} depth {row['depth']}; export CNOT {prep['cnot_count']} depth "
            f"{prep['depth']}  {'ok' if same else 'DIFFERS'}"
        )
        ok = ok and same
    print(f"exported points compared: {n}")
    return ok and n > 0


def main(argv: list[str] | None = None) -> int:
    ap = argparse.ArgumentParser(description=__doc__.split("\n")[0])
    ap.add_argument("old", type=Path)
    ap.add_argument("new", type=Path)
    ap.add_argument("--tol", type=float, default=1e-9)
    ap.add_argument(
        "--allow-new",
        action="store_true",
        help="rows only the new sweep has (methods added since) are listed but not a failure",
    )
    ap.add_argument("--results", type=Path, help="the newer run's results/ folder")
    args = ap.parse_args(argv)
    new = _rows(args.new)
    ok = compare_energies(_rows(args.old), new, args.tol, args.allow_new)
    if args.results:
        ok = compare_costs(new, args.results) and ok
    print("all equal" if ok else "DIFFERENCES FOUND")
    return 0 if ok else 1


if __name__ == "__main__":
    sys.exit(main())
