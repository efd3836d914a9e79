"""Chemistry for stage 1 (``integrals``): SCF, active-space integrals and reference energies.

Public API (module-level functions in the PySCF style):

* :func:`compute_integrals` - one molecule at one geometry -> :class:`IntegralsResult`;
* :func:`check_molecule` - fast pre-flight validation (no SCF), one-line ``ConfigError``;
* :func:`read_xyz` - XYZ file -> Cartesian atom string;
* :func:`solve_sector` - the one exact solver: lowest state(s) with fixed (n_alpha, n_beta, S).

Modules by concern: :mod:`~eigensweep.chem.space` (pre-flight, orbital partition),
:mod:`~eigensweep.chem.scf` (RHF/ROHF, stability), :mod:`~eigensweep.chem.ladder` (MP2, CC,
full-space FCI), :mod:`~eigensweep.chem.exact` (the exact sector solver),
:mod:`~eigensweep.chem.result` (:class:`IntegralsResult` and its stage-file form) and
:mod:`~eigensweep.chem.integrals` (the driver :func:`compute_integrals`).

The names below are loaded from their modules on first use, so that importing
:mod:`eigensweep.chem.geometry` (e.g. to read an XYZ file while planning) does not import PySCF.
"""

from __future__ import annotations

import importlib
from typing import TYPE_CHECKING, Any

from eigensweep.chem.geometry import noble_gas_core_orbitals, read_xyz

if TYPE_CHECKING:
    from eigensweep.chem.exact import n_determinants, solve_sector
    from eigensweep.chem.integrals import compute_integrals
    from eigensweep.chem.result import REFERENCE_KEYS, IntegralsResult
    from eigensweep.chem.space import check_molecule

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

#: name -> module it is loaded from on first use (reading a stage file needs no PySCF)
_LAZY = {
    "REFERENCE_KEYS": "result",
    "IntegralsResult": "result",
    "check_molecule": "space",
    "compute_integrals": "integrals",
    "n_determinants": "exact",
    "solve_sector": "exact",
}


def __getattr__(name: str) -> Any:
    if name in _LAZY:
        value = getattr(importlib.import_module(f"eigensweep.chem.{_LAZY[name]}"), name)
        globals()[name] = value
        return value
    raise AttributeError(f"module 'eigensweep.chem' has no attribute {name!r}")


def __dir__() -> list[str]:
    return sorted(set(globals()) | _LAZY)
