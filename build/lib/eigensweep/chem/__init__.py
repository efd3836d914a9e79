"""Chemistry for stage 1 (``integrals``): SCF, active-space integrals and reference energies.

Public API (module-level functions in the PySCF style):

* :func:`compute_integrals` - one molecule at one geometry -> :class:`IntegralsResult`;
* :func:`check_molecule` - fast pre-flight validation (no SCF), one-line ``ConfigError``;
* :func:`read_xyz` - XYZ file -> Cartesian atom string;
* :func:`solve_sector` - exact ground state in a fixed (n_alpha, n_beta, S) sector.

The names from :mod:`eigensweep.chem.integrals` are loaded on first use, so that importing
:mod:`eigensweep.chem.geometry` (e.g. to read an XYZ file while planning) does not import PySCF.
"""

from __future__ import annotations

import importlib
from typing import TYPE_CHECKING, Any

from eigensweep.chem.geometry import noble_gas_core_orbitals, read_xyz

if TYPE_CHECKING:
    from eigensweep.chem.integrals import (
        REFERENCE_KEYS,
        IntegralsResult,
        check_molecule,
        compute_integrals,
        n_determinants,
        solve_sector,
    )

__all__ = [
    "REFERENCE_KEYS",
    "IntegralsResult",
    "check_molecule",
    "compute_integrals",
    "n_determinants",
    "noble_gas_core_orbitals",
    "read_xyz",
    "solve_sector",
]

_LAZY = {
    "REFERENCE_KEYS",
    "IntegralsResult",
    "check_molecule",
    "compute_integrals",
    "n_determinants",
    "solve_sector",
}


def __getattr__(name: str) -> Any:
    if name in _LAZY:
        value = getattr(importlib.import_module("eigensweep.chem.integrals"), name)
        globals()[name] = value
        return value
    raise AttributeError(f"module 'eigensweep.chem' has no attribute {name!r}")


def __dir__() -> list[str]:
    return sorted(set(globals()) | _LAZY)
