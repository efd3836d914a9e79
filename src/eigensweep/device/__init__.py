"""Device library: export VQE circuits for real hardware and reconcile the returned counts.

Stages: :func:`build_job` / :func:`write_job` (export: measurement + calibration circuits as
OpenQASM 3/2, manifest, summary), :func:`load_results` / :func:`import_results` (validate a
returned-counts file against the manifest), :func:`reconcile` (energies with readout
mitigation, symmetry verification and zero-noise extrapolation, bootstrap intervals), and
:func:`run_synthetic_device` (a seeded noisy stand-in for a device). File formats are specified
in ``docs/counts-format.md``.
"""

from eigensweep.device.compile import (
    base_of_global_fold,
    circuit_from_rotations,
    globally_folded_circuit,
    group_basis,
    measurement_circuit,
    state_circuit,
)
from eigensweep.device.counts import (
    RESULTS_FORMAT,
    RESULTS_FORMAT_VERSION,
    RESULTS_SCHEMA,
    import_results,
    load_results,
    normalise_results,
    validate_results,
)
from eigensweep.device.manifest import (
    BIT_ORDER,
    JOB_FORMAT,
    JOB_FORMAT_VERSION,
    CircuitRecord,
    DeviceJob,
    allocate_shots,
    build_job,
    check_job_files,
    load_job_circuits,
    load_manifest,
    write_job,
)
from eigensweep.device.qasm import QasmReadError, from_qasm2, from_qasm3, to_qasm2, to_qasm3
from eigensweep.device.reconcile import (
    BootstrapEnergy,
    CircuitDiagnostics,
    ReconcileResult,
    plot_histograms,
    reconcile,
)
from eigensweep.device.synthetic import run_synthetic_device, target_noise, write_results

__all__ = [
    "BIT_ORDER",
    "JOB_FORMAT",
    "JOB_FORMAT_VERSION",
    "RESULTS_FORMAT",
    "RESULTS_FORMAT_VERSION",
    "RESULTS_SCHEMA",
    "CircuitDiagnostics",
    "CircuitRecord",
    "DeviceJob",
    "BootstrapEnergy",
    "QasmReadError",
    "ReconcileResult",
    "allocate_shots",
    "build_job",
    "circuit_from_rotations",
    "globally_folded_circuit",
    "from_qasm2",
    "from_qasm3",
    "group_basis",
    "import_results",
    "load_job_circuits",
    "check_job_files",
    "load_manifest",
    "load_results",
    "measurement_circuit",
    "normalise_results",
    "plot_histograms",
    "reconcile",
    "run_synthetic_device",
    "target_noise",
    "state_circuit",
    "to_qasm2",
    "to_qasm3",
    "base_of_global_fold",
    "validate_results",
    "write_job",
    "write_results",
]
