"""Variational engine: determinant-space emulation, ansätze, optimizers, estimators.

The ``optimize`` workflow stage calls :func:`run_optimize`.

Importing the package is light: the method tables and config checks
(:data:`ANSATZ_DEFAULTS`, :data:`OPTIMIZER_DEFAULTS`, :data:`ESTIMATOR_DEFAULTS`,
:func:`validate_method`, :func:`check_combination`) come from :mod:`eigensweep.vqe.methods`,
which needs only NumPy. Everything else is loaded on first access (PEP 562 module
``__getattr__``), so config validation does not pay for SciPy, PySCF or OpenFermion.
"""

from __future__ import annotations

import importlib
from typing import TYPE_CHECKING, Any

from .methods import (
    ANSATZ_DEFAULTS,
    ESTIMATOR_DEFAULTS,
    MAPPINGS,
    OPTIMIZER_DEFAULTS,
    check_combination,
    validate_method,
)

# public name -> submodule that defines it (imported on first access)
_LAZY: dict[str, str] = {
    "AdaptAnsatz": "adapt",
    "AdaptResult": "adapt",
    "pool_excitations": "adapt",
    "run_adapt": "adapt",
    "Excitation": "fermionic",
    "FermionicAnsatz": "fermionic",
    "PauliGate": "pauli_rotation",
    "PauliRotationAnsatz": "pauli_rotation",
    "circuit_from_meta": "circuits",
    "rotations_from_meta": "circuits",
    "DetSpace": "detspace",
    "ExcitationGate": "detspace",
    "fci_ground_state": "detspace",
    "from_qubit_state": "detspace",
    "to_qubit_state": "detspace",
    "OptimizeResult": "engine",
    "run_optimize": "engine",
    "MeasuredEnergy": "estimators",
    "Estimator": "estimators",
    "MeasurementPlan": "estimators",
    "NoisyEstimator": "estimators",
    "ShotEstimator": "estimators",
    "make_estimator": "estimators",
    "HardwareEfficientAnsatz": "hardware_efficient",
    "KUpCCGSD": "kupccgsd",
    "OptimizerResult": "optimizers",
    "minimize": "optimizers",
    "TaperedFermionicAnsatz": "tapered",
    "taper_excitation": "tapered",
    "UCCSD": "uccsd",
}

if TYPE_CHECKING:  # for type checkers and IDEs; at run time these load lazily
    from .adapt import AdaptAnsatz, AdaptResult, pool_excitations, run_adapt
    from .circuits import circuit_from_meta, rotations_from_meta
    from .detspace import (
        DetSpace,
        ExcitationGate,
        fci_ground_state,
        from_qubit_state,
        to_qubit_state,
    )
    from .engine import OptimizeResult, run_optimize
    from .estimators import (
        Estimator,
        MeasuredEnergy,
        MeasurementPlan,
        NoisyEstimator,
        ShotEstimator,
        make_estimator,
    )
    from .fermionic import Excitation, FermionicAnsatz
    from .hardware_efficient import HardwareEfficientAnsatz
    from .kupccgsd import KUpCCGSD
    from .optimizers import OptimizerResult, minimize
    from .pauli_rotation import PauliGate, PauliRotationAnsatz
    from .tapered import TaperedFermionicAnsatz, taper_excitation
    from .uccsd import UCCSD

__all__ = [
    "ANSATZ_DEFAULTS",
    "ESTIMATOR_DEFAULTS",
    "MAPPINGS",
    "OPTIMIZER_DEFAULTS",
    "UCCSD",
    "AdaptAnsatz",
    "AdaptResult",
    "DetSpace",
    "MeasuredEnergy",
    "Estimator",
    "Excitation",
    "ExcitationGate",
    "FermionicAnsatz",
    "HardwareEfficientAnsatz",
    "KUpCCGSD",
    "MeasurementPlan",
    "NoisyEstimator",
    "OptimizeResult",
    "OptimizerResult",
    "PauliGate",
    "PauliRotationAnsatz",
    "ShotEstimator",
    "TaperedFermionicAnsatz",
    "check_combination",
    "circuit_from_meta",
    "fci_ground_state",
    "from_qubit_state",
    "make_estimator",
    "minimize",
    "pool_excitations",
    "rotations_from_meta",
    "run_adapt",
    "run_optimize",
    "taper_excitation",
    "to_qubit_state",
    "validate_method",
]


def __getattr__(name: str) -> Any:
    """Import the submodule defining ``name`` on first access (PEP 562)."""
    module = _LAZY.get(name)
    if module is None:
        raise AttributeError(f"module {__name__!r} has no attribute {name!r}")
    value = getattr(importlib.import_module(f"{__name__}.{module}"), name)
    globals()[name] = value  # later lookups skip __getattr__
    return value


def __dir__() -> list[str]:
    return sorted(set(globals()) | set(_LAZY))
