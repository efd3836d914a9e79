"""Checks run before any computation: chemistry of every planned geometry point.

Config structure is checked by :mod:`eigensweep.config`; here each integrals node is checked with
:func:`eigensweep.chem.check_molecule` (unknown element or basis, atoms too close, impossible
charge/multiplicity, active space larger than the molecule), so a sweep never starts with a
point that cannot run. Messages name the molecule and point.
"""

from __future__ import annotations

import json
from pathlib import Path

from .plan import Plan, molecule_kwargs


def check_plan_chemistry(plan: Plan, results: Path | None = None) -> None:
    """Raise :class:`~eigensweep.errors.ConfigError` for the first impossible geometry point.

    What PySCF is needed for (basis, electron count, active space) depends on the composition
    only, so it is checked once per composition; every point's geometry is checked (a scan of
    15,000 points takes seconds, not minutes). With ``results``, a point whose integrals stage
    file is already there is not checked again (it was computed, so its chemistry passed; its
    key is the hash of the same molecule input): a rerun of a finished sweep loads no PySCF.
    """
    from .stage_table import stage_path

    where: dict[str, str] = {}
    for row in plan.rows:
        where.setdefault(row["key_integrals"], f"molecule {row['molecule']} point {row['point']}")
    checked: set[str] = set()
    for node in plan.by_stage("integrals"):
        if results is not None and stage_path("integrals", node.key, results).exists():
            continue
        from .chem import check_molecule  # PySCF: only when a point is to be checked
        from .chem.geometry import check_geometry

        kw = molecule_kwargs(node.params)
        at = where.get(node.key, f"integrals {node.key}")
        symbols = [sym for sym, _ in check_geometry(kw["atoms"], kw["unit"], at)]
        composition = json.dumps({**kw, "atoms": symbols}, sort_keys=True, default=str)
        if composition not in checked:
            check_molecule(**kw, where=at)
            checked.add(composition)
