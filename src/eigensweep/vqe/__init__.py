"""Variational engine: determinant-space emulation, ansätze, optimizers, estimators.

The ``optimize`` workflow stage calls :func:`run_optimize`.
"""

from .adapt import AdaptAnsatz, AdaptResult, pool_terms, run_adapt
from .ansatz import (
    MAPPINGS,
    Excitation,
    FermionicAnsatz,
    PauliGate,
    PauliRotationAnsatz,
    circuit_from_meta,
    generator_paulis,
    reference_bits,
    rotations_from_meta,
    rotations_to_circuit,
)
from .detspace import DetSpace, ExcitationGate, fci_ground_state, from_qubit_state, to_qubit_state
from .engine import (
    ANSATZ_DEFAULTS,
    ESTIMATOR_DEFAULTS,
    OPTIMIZER_DEFAULTS,
    OptimizeResult,
    run_optimize,
    validate_method,
)
from .estimators import (
    Estimate,
    Estimator,
    MeasurementPlan,
    NoisyEstimator,
    ShotEstimator,
    make_estimator,
    molecular_pauli_sum,
)
from .hardware_efficient import HardwareEfficientAnsatz
from .kupccgsd import KUpCCGSD
from .optimizers import OptimizerResult, minimize
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
    "Estimate",
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
    "fci_ground_state",
    "from_qubit_state",
    "circuit_from_meta",
    "generator_paulis",
    "make_estimator",
    "minimize",
    "molecular_pauli_sum",
    "pool_terms",
    "reference_bits",
    "rotations_from_meta",
    "rotations_to_circuit",
    "run_adapt",
    "run_optimize",
    "to_qubit_state",
    "validate_method",
]
