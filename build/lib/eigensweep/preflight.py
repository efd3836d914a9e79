"""Checks run before any computation: chemistry of every planned geometry point.

Config structure is checked by :mod:`eigensweep.config`; here each integrals node is checked with
:func:`eigensweep.chem.check_molecule` (unknown element or basis, atoms too close, impossible
charge/multiplicity, active space larger than the molecule), so a sweep never starts with a
point that cannot run. Messages name the molecule and point.
"""

from __future__ import annotations

from .plan import Plan, molecule_kwargs


def check_plan_chemistry(plan: Plan) -> None:
    """Raise :class:`~eigensweep.errors.ConfigError` for the first impossible geometry point."""
    from .chem import check_molecule

    where: dict[str, str] = {}
    for row in plan.rows:
        where.setdefault(row["key_integrals"], f"molecule {row['molecule']} point {row['point']}")
    for node in plan.by_stage("integrals"):
        check_molecule(
            **molecule_kwargs(node.params), where=where.get(node.key, f"integrals {node.key}")
        )
