"""The ``optimize`` stage science: build an ansatz, minimise its energy, report the result.

Simulation path by (ansatz, tapering, estimator); ``mapping`` is the fermion-to-qubit mapping
of ``qubit_hamiltonian`` / ``tapering`` (the sweep axis ``methods.mapping``):

* fermionic ansatz (``uccsd``, ``kupccgsd``, ``adapt`` with a fermionic pool), untapered
  (``tapering`` is ``None`` or has no generators) + ``exact``: determinant space
  (:mod:`eigensweep.vqe.detspace`) with adjoint gradients; no qubit Hamiltonian is needed.
  Circuit costs are those of the Pauli-rotation circuit under ``mapping``.
* the same + ``shots`` / ``noisy``: the state is propagated exactly in determinant space,
  written as the statevector of ``mapping``'s encoding (:func:`~eigensweep.qubit.mapping.encode_state`) and
  sampled against the mapped Hamiltonian (``tapering.hamiltonian`` or ``qubit_hamiltonian``
  when given, else built from the integrals).
* fermionic ansatz, tapered (``tapering`` with at least one Z2 generator; Bravyi, Gambetta,
  Mezzacapo, Temme, arXiv:1701.08213): the excitations become Pauli rotations on the tapered
  qubits (:class:`~eigensweep.vqe.tapered.TaperedFermionicAnsatz`; symmetry-forbidden
  excitations dropped, which is exact from the Hartree-Fock start), simulated on the tapered
  statevector with ``tapering.hamiltonian``, reference ``tapering.reference_bits`` and adjoint
  gradients; ``shots``/``noisy`` sample the tapered Hamiltonian. ADAPT with a fermionic pool
  selects and optimizes on the tapered statevector too.
* ``adapt`` with ``pool: qubit`` (qubit-ADAPT): JW qubit statevector with the JW Hamiltonian
  of the integrals (the pool's Pauli rotations do not conserve particle number); only
  ``mapping="jordan_wigner"`` without tapering (:func:`~eigensweep.vqe.methods.check_combination`).
* ``hardware_efficient``: qubit statevector with ``tapering.hamiltonian`` and
  ``tapering.reference_bits`` when ``tapering`` is given, else ``qubit_hamiltonian`` and
  ``reference_bits`` (default: the Hamiltonian of the integrals under ``mapping`` and its
  Hartree-Fock bits, only allowed when the Hamiltonian has ``2 norb`` qubits).

The quasi-Newton optimizers (``lbfgs``, ``bfgs``) need the exact estimator; ``adapt`` too
(its operator selection uses exact gradients). ``adam`` and ``shot_adaptive_descent`` take
adjoint gradients with exact energies and parameter-shift gradients with shots
(:mod:`eigensweep.vqe.parameter_shift`: each shifted circuit is one estimate of the
estimator, same grouping and allocation as an energy).

Shot accounting: the estimator's :class:`~eigensweep.vqe.estimators.ShotLedger` counts every
shot of the job (``energy``, ``calibration``, ``gradient``, ``selection`` of restarts,
``final``): ``shots_total`` and ``shots_by_purpose`` of the result; the trace records the
cumulative count (``trace_shots_cumulative``) and the exact energy at each traced point
(``trace_energy_exact``, a simulator diagnostic that no optimizer reads). The optimizer option
``max_shots`` is the job's budget: the final estimate's shots are set aside first, and no
estimate is made that would pass the rest (``stop_reason`` ``shot_budget``). ``initial_params`` (a warm start) is ignored by
``adapt``, which always grows its operator list from HF (noted in ``message``). With
``shots``/``noisy`` the optimizer's final point is re-evaluated with fresh shots
(``final_shots``, default ``shots``) and exactly; the reported ``energy`` is that fresh
estimate with its standard error.
"""

from __future__ import annotations

import math
import time
from collections.abc import Callable
from dataclasses import dataclass, field, fields
from typing import TYPE_CHECKING, Any

import numpy as np

from ..errors import ConfigError
from ..qubit.mapping import encode_state
from ..qubit.mapping import reference_bits as mapped_reference_bits
from .circuits import circuit_from_meta
from .detspace import DetSpace, to_qubit_state
from .estimators import ShotBudgetExhausted
from .fermionic import FermionicAnsatz
from .kupccgsd import KUpCCGSD
from .methods import (
    ANSATZ_DEFAULTS,
    ESTIMATOR_DEFAULTS,
    GRADIENT_METHODS,
    OPTIMIZER_DEFAULTS,
    check_combination,
    check_mapping,
    validate_method,
)
from .optimizers import STOCHASTIC_GRADIENT_METHODS, minimize
from .parameter_shift import GradientEstimate, curvature_factor, parameter_shift_gradient
from .reference import ExactReference, state_moments, state_rdm1
from .uccsd import UCCSD

if TYPE_CHECKING:
    from ..qubit.pauli import PauliExpansion
    from ..qubit.taper import SectorReduction
    from .estimators import MeasuredEnergy

__all__ = [
    "ANSATZ_DEFAULTS",
    "ESTIMATOR_DEFAULTS",
    "OPTIMIZER_DEFAULTS",
    "ExactReference",
    "OptimizeResult",
    "SPIN_MISMATCH_TOL",
    "check_combination",
    "run_optimize",
    "validate_method",
]


@dataclass
class OptimizeResult:
    """Outcome of :func:`run_optimize` (energies in hartree).

    ``trace_*`` arrays have one entry per objective evaluation or gradient step
    (``trace_energy`` nan for a gradient step that measured no energy; ``trace_energy_exact``
    the exact energy at the traced point; ``trace_shots_cumulative`` the job's shots so far).
    ``shots_total`` counts every shot of the job including the final estimate;
    ``shots_by_purpose`` splits it (module docstring). ``energy_exact`` is the exact
    reference of the integrals (lowest energy with the requested N and total spin S,
    :func:`eigensweep.chem.exact.solve_sector`), ``overlap_exact`` the state's weight in its
    (possibly degenerate) ground space, carried to the ansatz's frame (determinant space,
    the mapping's encoding, or tapered): :mod:`eigensweep.vqe.reference`; nan when the
    reference is unknown or the problem is a user-given operator. ``n_electrons`` and
    ``spin_square`` are ``<N>`` and ``<S^2>`` of the optimized state; ``spin_mismatch`` is true
    when ``<S^2>`` differs from ``S(S+1)`` of the reference by more than
    :data:`SPIN_MISMATCH_TOL` or ``<N>`` from the electron count by as much. ``rdm1`` is the
    state's spin-summed active 1-RDM (:func:`~eigensweep.vqe.reference.state_rdm1`; nan when
    no frame is known), ``natural_occupations`` its eigenvalues (descending) and ``dipole`` the
    total dipole vector (e a0, :func:`eigensweep.chem.properties.dipole_from_rdm1`; nan without
    dipole integrals).
    ``converged`` is true only when the optimizer's own criterion was met; ``stop_reason``
    says why it stopped (:func:`_stop_reason`).
    ``n_qubits``, ``cnot_count`` and ``depth`` are those of the circuit that is run (tapered
    qubits for a tapered problem), compiled at the optimized parameters exactly as the
    export stage writes it (:func:`~eigensweep.vqe.circuits.circuit_from_meta`; rotations left at
    zero angle are left out).
    """

    energy: float
    energy_stderr: float
    energy_exact_at_params: float
    params: np.ndarray
    n_params: int
    n_qubits: int
    cnot_count: int
    depth: int
    trace_energy: np.ndarray
    trace_grad_norm: np.ndarray
    trace_shots: np.ndarray
    n_evaluations: int
    n_iterations: int
    converged: bool
    message: str
    wall_s: float
    overlap_exact: float
    energy_exact: float
    ansatz_meta: dict
    n_electrons: float = math.nan
    spin_square: float = math.nan
    spin_square_target: float = math.nan
    spin_mismatch: bool = False
    stop_reason: str = ""
    shots_total: int = 0
    shots_by_purpose: dict = field(default_factory=dict)
    trace_energy_exact: np.ndarray = field(default_factory=lambda: np.zeros(0))
    trace_shots_cumulative: np.ndarray = field(default_factory=lambda: np.zeros(0, dtype=np.int64))
    rdm1: np.ndarray = field(default_factory=lambda: np.zeros((0, 0)))
    natural_occupations: np.ndarray = field(default_factory=lambda: np.zeros(0))
    dipole: np.ndarray = field(default_factory=lambda: np.full(3, np.nan))

    _ARRAYS = (
        "params",
        "trace_energy",
        "trace_grad_norm",
        "trace_shots",
        "trace_energy_exact",
        "trace_shots_cumulative",
        "rdm1",
        "natural_occupations",
        "dipole",
    )

    def to_store(self) -> tuple[dict[str, np.ndarray], dict]:
        """Split into (arrays, JSON-able metadata) for a stage file."""
        arrays = {k: np.asarray(getattr(self, k)) for k in self._ARRAYS}
        meta: dict[str, Any] = {}
        for f in fields(self):
            if f.name in self._ARRAYS:
                continue
            v = getattr(self, f.name)
            if isinstance(v, float) and not math.isfinite(v):
                v = None if math.isnan(v) else ("inf" if v > 0 else "-inf")
            meta[f.name] = v
        return arrays, meta

    @classmethod
    def from_store(cls, arrays: dict[str, np.ndarray], meta: dict) -> OptimizeResult:
        """Inverse of :meth:`to_store`."""
        kw: dict[str, Any] = {}
        for f in fields(cls):
            if f.name in cls._ARRAYS:
                if f.name in arrays:
                    kw[f.name] = np.asarray(arrays[f.name])
            elif f.name in meta:
                v = meta[f.name]
                if f.type in ("float", float):
                    v = math.nan if v is None else float(v)
                kw[f.name] = v
        return cls(**kw)


def _mapped_hamiltonian(
    h1e: np.ndarray, eri: np.ndarray, e_core: float, norb: int, mapping: str
) -> PauliExpansion:
    """The qubit Hamiltonian of the integrals under ``mapping`` (OpenFermion, imported there)."""
    from ..qubit.mapping import map_hamiltonian

    return map_hamiltonian(h1e, eri, float(e_core), mapping)


def _basis_index(bits: np.ndarray) -> int:
    """Statevector index of a basis state (qubit 0 = most significant bit)."""
    out = 0
    for b in np.asarray(bits).reshape(-1):
        out = (out << 1) | int(b)
    return out


def _check_tapering(
    tapering: SectorReduction,
    qubit_hamiltonian: PauliExpansion | None,
    space: DetSpace,
    mapping: str,
) -> None:
    """ConfigError unless ``tapering`` belongs to these integrals (and ``qubit_hamiltonian``)."""
    n = 2 * space.norb
    if int(tapering.n_qubits_before) != n:
        raise ConfigError(
            f"tapering: built for {tapering.n_qubits_before} qubits, the integrals need {n} "
            f"(2 x {space.norb} orbitals)"
        )
    ham = tapering.hamiltonian
    if qubit_hamiltonian is not None and not (
        qubit_hamiltonian.n_qubits == ham.n_qubits and qubit_hamiltonian.allclose(ham, atol=1e-10)
    ):
        raise ConfigError(
            "qubit_hamiltonian: differs from tapering.hamiltonian; pass the tapered Hamiltonian "
            "of the same taper stage (or leave qubit_hamiltonian out)"
        )
    e_ref = float(ham.diagonal_at(np.array([_basis_index(tapering.reference_bits)]))[0])
    e_hf = space.energy(space.hf_state())
    if abs(e_ref - e_hf) > 1e-6:
        raise ConfigError(
            f"tapering: its reference state has energy {e_ref:.8f} Eh but the Hartree-Fock "
            f"determinant of the integrals {e_hf:.8f} Eh; was it built from these integrals "
            f"with mapping {mapping!r}?"
        )


_FRAME_CHECK_MAX_QUBITS = 16


def _check_mapping_frame(
    ans: Any,
    tapering: SectorReduction,
    space: DetSpace,
    mapping: str,
    exact: ExactReference,
) -> None:
    """ConfigError unless ``tapering`` was built under ``mapping``.

    Tapered fermionic ansatz: at a fixed test point it must give the determinant-space energy
    of the same excitations (under a wrong mapping they become other strings; a tapered
    qubit-space ansatz does not depend on the mapping). Untapered (up to
    :data:`_FRAME_CHECK_MAX_QUBITS` qubits): the exact vector written in ``mapping``'s encoding
    must have the exact energy under ``tapering.hamiltonian`` (the operator that shots sample,
    hardware-efficient circuits run on and overlaps are taken in).
    """
    if tapering.generators.n_terms > 0:
        det = FermionicAnsatz(space, ans.excitations, ans.n_params_untapered)
        theta = 0.1 * np.sin(1.0 + np.arange(ans.n_params))
        e_tap, e_det = ans.energy(theta), det.energy(ans.untapered_params(theta))
    elif tapering.n_qubits_before <= _FRAME_CHECK_MAX_QUBITS and exact.known:
        from ..qubit.statevector import expectation

        psi = encode_state(to_qubit_state(exact.vectors[0], space.norb, space.nelec), mapping)
        e_tap, e_det = expectation(psi, tapering.hamiltonian), exact.energy
    else:
        return
    if abs(e_tap - e_det) > 1e-7:
        raise ConfigError(
            f"mapping: the taper stage's Hamiltonian is not in the {mapping!r} encoding (a test "
            f"state gives {e_tap:.8f} Eh there and {e_det:.8f} Eh exactly); pass the mapping of "
            "the hamiltonian stage"
        )


#: ``spin_mismatch`` when ``|<S^2> - S(S+1)|`` (or ``|<N> - N|``) exceeds this.
SPIN_MISMATCH_TOL = 1e-3


@dataclass
class _Methods:
    """Validated method configs of one optimize job."""

    ansatz: dict
    optimizer: dict
    estimator: dict
    mapping: str
    tapered: bool

    @property
    def sampled(self) -> bool:
        return self.estimator["name"] != "exact"


@dataclass
class _Problem:
    """Active-space integrals of one job and their determinant space."""

    h1e: np.ndarray
    eri: np.ndarray
    e_core: float
    space: DetSpace

    def mapped_hamiltonian(self, mapping: str) -> PauliExpansion:
        return _mapped_hamiltonian(self.h1e, self.eri, self.e_core, self.space.norb, mapping)


@dataclass
class _Built:
    """The ansatz of one job and how its states are represented."""

    ansatz: Any
    adapt: Any = None  # AdaptResult when the ansatz was grown by ADAPT
    jw_statevector: bool = False  # qubit-space state in the untapered (mapped) encoding

    @property
    def det_space(self) -> bool:
        return isinstance(self.ansatz, FermionicAnsatz)


@dataclass
class _Run:
    """What the optimizer loop returns."""

    params: np.ndarray
    trace: list[dict]
    n_iterations: int
    converged: bool
    message: str
    stop_reason: str = ""
    budget_exhausted: bool = False


#: Words of optimizer messages that mean an iteration or evaluation budget ran out.
_BUDGET_WORDS = ("budget", "schedule", "limit", "maximum number", "max_iter", "maxiter")


def _stop_reason(converged: bool, moved: bool, message: str, budget: bool = False) -> str:
    """``converged`` (the optimizer's own criterion was met), ``never_moved`` (a
    derivative-free run returned its start; ``shot_budget`` first: ``max_shots`` reached),
    ``max_iterations`` (its iteration budget ran out) or ``stopped`` (anything else; see the
    message)."""
    if budget:
        return "shot_budget"
    if not moved:
        return "never_moved"
    if converged:
        return "converged"
    if any(w in message.lower() for w in _BUDGET_WORDS):
        return "max_iterations"
    return "stopped"


def _resolve_methods(
    ansatz: dict, optimizer: dict, estimator: dict, mapping: str, tapering: SectorReduction | None
) -> _Methods:
    a_cfg = validate_method("ansatz", ansatz)
    o_cfg = validate_method("optimizer", optimizer)
    e_cfg = validate_method("estimator", estimator)
    mapping = check_mapping(mapping, "mapping")
    tapered = tapering is not None and tapering.generators.n_terms > 0
    check_combination(a_cfg, tapered, mapping, optimizer=o_cfg, estimator=e_cfg)
    return _Methods(a_cfg, o_cfg, e_cfg, mapping, tapered)


def _build_adapt(
    m: _Methods, prob: _Problem, tapering: SectorReduction | None, seed: int, progress
) -> _Built:
    from .adapt import run_adapt

    space = prob.space
    a_cfg, norb, nelec = m.ansatz, space.norb, space.nelec
    z_stripped_generator_strings = a_cfg["pool"] == "qubit"
    res = run_adapt(
        space,
        pool=a_cfg["pool"],
        gradient_tolerance=a_cfg["gradient_tolerance"],
        max_operators=a_cfg["max_operators"],
        optimizer=m.optimizer,
        seed=seed,
        progress=progress,
        hamiltonian=prob.mapped_hamiltonian(m.mapping) if z_stripped_generator_strings else None,
        reference=mapped_reference_bits(nelec, norb, m.mapping)
        if z_stripped_generator_strings
        else None,
        tapering=tapering if m.tapered else None,
        mapping=m.mapping,
    )
    return _Built(res.ansatz, adapt=res, jw_statevector=z_stripped_generator_strings)


def _build_fermionic(m: _Methods, space: DetSpace, tapering: SectorReduction | None, seed: int):
    a_cfg = m.ansatz
    if a_cfg["name"] == "uccsd":
        ans: Any = UCCSD(space, spin_adapted=a_cfg["spin_flip_tied"])
    else:
        ans = KUpCCGSD(
            space,
            k=a_cfg["k"],
            spin_adapted=a_cfg["spin_flip_tied"],
            init_scale=a_cfg["init_scale"],
            seed=seed,
        )
    if m.tapered:
        from .tapered import TaperedFermionicAnsatz

        ans = TaperedFermionicAnsatz.from_ansatz(ans, m.mapping, tapering)
    return _Built(ans)


def _build_hardware_efficient(
    m: _Methods,
    prob: _Problem,
    tapering: SectorReduction | None,
    qubit_hamiltonian: PauliExpansion | None,
    reference_bits: np.ndarray | None,
    seed: int,
) -> _Built:
    from .hardware_efficient import HardwareEfficientAnsatz

    norb, nelec = prob.space.norb, prob.space.nelec
    jw_statevector = False
    if tapering is not None:
        ham = tapering.hamiltonian
        ref = np.asarray(tapering.reference_bits, dtype=np.uint8).reshape(-1)
        jw_statevector = not m.tapered
    else:
        ham = qubit_hamiltonian
        if ham is None:
            ham = prob.mapped_hamiltonian(m.mapping)
        if reference_bits is None:
            if ham.n_qubits != 2 * norb:
                raise ConfigError(
                    "reference_bits: required for a qubit Hamiltonian on "
                    f"{ham.n_qubits} != 2*norb qubits"
                )
            ref = mapped_reference_bits(nelec, norb, m.mapping)
            jw_statevector = True
        else:
            ref = np.asarray(reference_bits, dtype=np.uint8).reshape(-1)
            if ref.size != ham.n_qubits:
                raise ConfigError(
                    f"reference_bits: has {ref.size} bits, the Hamiltonian {ham.n_qubits} qubits"
                )
    a_cfg = m.ansatz
    ans = HardwareEfficientAnsatz(
        ham,
        ref,
        rounds=a_cfg["rounds"],
        axes=a_cfg["axes"],
        init_scale=a_cfg["init_scale"],
        seed=seed,
    )
    return _Built(ans, jw_statevector=jw_statevector)


def _fermionic_circuit(m: _Methods, built: _Built) -> bool:
    """Whether the circuit is built from mapped excitations (not native qubit gates)."""
    name = m.ansatz["name"]
    return name in ("uccsd", "kupccgsd") or (name == "adapt" and not built.jw_statevector)


def _to_qubit_fn(built: _Built, space: DetSpace, mapping: str) -> Callable:
    """ansatz state -> the statevector that shots sample."""
    if built.det_space:
        return lambda psi: encode_state(to_qubit_state(psi, space.norb, space.nelec), mapping)
    return lambda psi: psi


def _measured_operator(est: Any, ans: Any, prob: _Problem, m: _Methods) -> PauliExpansion:
    """The qubit operator the job measures (mapped from the integrals for an exact
    determinant-space job)."""
    if est is not None:
        return est.ham
    if getattr(ans, "hamiltonian", None) is not None:
        return ans.hamiltonian
    return prob.mapped_hamiltonian(m.mapping)


def _set_budget(est: Any, m: _Methods) -> None:
    """The job's ``max_shots`` less the final estimate's shots, set aside first."""
    max_shots = m.optimizer.get("max_shots")
    if max_shots is None:
        return
    final = est.cost(m.estimator["final_shots"] or m.estimator["shots"])
    if final > max_shots:
        raise ConfigError(
            f"optimizer.max_shots: {max_shots} is below the {final} shots of the final "
            "estimate; raise max_shots or lower estimator.final_shots"
        )
    est.ledger.budget = int(max_shots) - final


def _measures_circuits(m: _Methods) -> bool:
    """The ``noisy`` estimator measures the state's circuit, not its statevector."""
    return m.estimator["name"] == "noisy"


def _qubit_state_fn(built: _Built, space: DetSpace, m: _Methods) -> Callable:
    """theta -> what the estimator samples: the statevector, or for the ``noisy`` estimator
    the circuit compiled at theta (as the export stage compiles it)."""
    ans, mapping = built.ansatz, m.mapping
    if _measures_circuits(m):
        if built.det_space:
            return lambda theta: ans.circuit(theta, mapping)
        return ans.circuit
    if built.det_space:
        return lambda theta: encode_state(
            to_qubit_state(ans.state(theta), space.norb, space.nelec), mapping
        )
    return ans.state


def _make_sampler(
    m: _Methods,
    built: _Built,
    prob: _Problem,
    tapering: SectorReduction | None,
    qubit_hamiltonian: PauliExpansion | None,
    seed: int,
):
    """The shot/noise estimator on the Hamiltonian the state lives in (None for exact)."""
    if not m.sampled:
        return None
    from .estimators import make_estimator

    norb = prob.space.norb
    if not built.det_space:
        qham = built.ansatz.hamiltonian
    elif tapering is not None:
        qham = tapering.hamiltonian
    elif qubit_hamiltonian is not None and qubit_hamiltonian.n_qubits == 2 * norb:
        qham = qubit_hamiltonian
    else:
        qham = prob.mapped_hamiltonian(m.mapping)
    return make_estimator(m.estimator, qham, seed=seed)


class _Objective:
    """Counts evaluations and reports progress for the kinds of objective."""

    def __init__(
        self, ans: Any, est: Any, qubit_state: Callable, progress, to_qubit: Callable
    ) -> None:
        self.ans, self.est, self.qubit_state, self.progress = ans, est, qubit_state, progress
        self.to_qubit = to_qubit  # ansatz state -> the statevector the estimator samples
        #: per-gate angles -> what parameter-shift energies measure (state, or circuit)
        self.at_angles: Callable = ans.state_at_angles
        #: batch of per-gate angle rows -> statevectors (None: one state at a time)
        self.states_at_angles: Callable | None = getattr(ans, "states_at_angles", None)
        self.count = 0
        self.last_shots = 0
        self.purpose = "energy"
        #: (theta, state) of the last sampled point when the sampled statevector is the
        #: ansatz's own state, so the trace monitor's exact energy there needs no second run
        self._last: tuple[np.ndarray, np.ndarray] | None = None
        #: () -> non-identity 1-norm of the measured qubit operator (set by run_optimize)
        self.operator_norm: Callable[[], float] = lambda: 1.0

    def _report(self, e: float) -> None:
        if self.progress is not None:
            self.progress(self.count, e)
        self.count += 1

    def set_phase(self, name: str) -> None:
        self.purpose = name

    def sampled(self, theta: np.ndarray) -> float:
        psi = self.qubit_state(theta)
        if self.qubit_state == self.ans.state:
            self._last = (np.array(theta, dtype=float, copy=True), psi)
        estimate = self.est.estimate(psi, purpose=self.purpose)
        self.last_shots = estimate.shots
        self._report(estimate.value)
        return estimate.value

    def with_gradient(self, theta: np.ndarray) -> tuple[float, np.ndarray]:
        e, g = self.ans.energy_and_gradient(theta)
        self._report(e)
        return e, g

    def value(self, theta: np.ndarray) -> float:
        e = self.ans.energy(theta)
        self._report(e)
        return e

    def gradient(
        self, theta: np.ndarray, shots: np.ndarray | int | None
    ) -> tuple[float, GradientEstimate]:
        """Adjoint gradient with exact energies; parameter-shift gradient from shots (``shots``
        per shifted circuit, None = the estimator's), energy not measured (nan)."""
        if self.est is None:
            e, g = self.with_gradient(theta)
            return e, GradientEstimate(np.asarray(g, float), np.zeros(len(g)), 0, 0)
        est = self.est
        n = est.shots if shots is None else shots

        def energy(psi: np.ndarray, n_shots: int) -> tuple[float, float, int]:
            r = est.estimate(self.to_qubit(psi), shots=n_shots, purpose="gradient")
            return r.value, r.stderr, r.shots

        ans = self.ans
        units = ans.shift_units()
        per = np.broadcast_to(np.asarray(n, dtype=np.int64), (ans.n_params,))
        cost = sum(u.rule.n_terms * est.cost(int(per[u.param])) for u in units)
        if cost > est.ledger.remaining:  # never start a gradient that cannot be finished
            raise ShotBudgetExhausted(
                f"shot budget of {est.ledger.budget} reached ({est.ledger.total} spent, the "
                f"next gradient needs {cost})"
            )
        grad = parameter_shift_gradient(
            units,
            ans.angles(theta),
            ans.n_params,
            self.at_angles,
            energy,
            n,
            states_at_angles=self.states_at_angles,
        )
        self._report(math.nan)
        return math.nan, grad

    def monitor(self, theta: np.ndarray) -> dict:
        """Trace fields: exact energy at the point (diagnostic) and the job's shots so far."""
        total = self.est.ledger.total if self.est is not None else 0
        last = self._last
        if last is not None and np.array_equal(last[0], theta):
            e = self.ans.state_energy(last[1])  # = ans.energy(theta), state already computed
        else:
            e = self.ans.energy(theta)
        return {"energy_exact": float(e), "shots_cumulative": int(total)}


def _start_point(ans: Any, initial_params: np.ndarray | None) -> np.ndarray:
    x0 = ans.initial_params() if initial_params is None else initial_params
    x0 = np.asarray(x0, dtype=float).reshape(-1)
    if x0.size != ans.n_params:
        raise ConfigError(
            f"initial_params: has {x0.size} values, the ansatz {ans.n_params} parameters"
        )
    return x0


def _minimize_once(obj: _Objective, start: np.ndarray, method: str, options: dict, seed: int):
    monitor = obj.monitor if obj.est is not None else None  # exact runs trace exact energies
    kw: dict[str, Any] = {"options": options, "seed": seed, "monitor": monitor}
    if method in STOCHASTIC_GRADIENT_METHODS:
        lipschitz = None
        if method == "shot_adaptive_descent" and options.get("lipschitz") is None:
            # 1-norm bound times the largest per-parameter frequency^2
            factor = curvature_factor(obj.ans.shift_units(), obj.ans.n_params)
            lipschitz = obj.operator_norm() * factor
        return minimize(
            obj.value, start, method=method, gradient=obj.gradient, lipschitz=lipschitz, **kw
        )
    if obj.est is not None:
        return minimize(
            obj.sampled,
            start,
            method=method,
            shots=lambda: obj.last_shots,
            phase=obj.set_phase,
            **kw,
        )
    if method in GRADIENT_METHODS:
        return minimize(obj.with_gradient, start, method=method, grad=True, **kw)
    return minimize(obj.value, start, method=method, **kw)


def _optimize_with_restarts(o_cfg: dict, obj: _Objective, x0: np.ndarray, seed: int) -> _Run:
    """Optimizer from ``x0`` plus ``restarts`` seeded random starts ``x0 + scale * N(0, 1)``
    (seed ``seed + r``); the best run wins (lowest exact energy, or lowest fresh-shot
    estimate with shots)."""
    method = o_cfg["name"]
    skip = ("name", "restarts", "restart_scale", "max_shots")
    options = {k: v for k, v in o_cfg.items() if k not in skip}
    restarts = int(o_cfg.get("restarts", 0))
    scale = float(o_cfg.get("restart_scale", 0.1))
    best = None
    trace: list[dict] = []
    out_of_shots = False
    for r in range(restarts + 1):
        start = x0
        if r:
            start = x0 + scale * np.random.default_rng(seed + r).standard_normal(x0.size)
        res = _minimize_once(obj, start, method, options, seed + r)
        out_of_shots = out_of_shots or res.budget_exhausted
        x_end = np.asarray(res.x, dtype=float)
        score = math.inf if best is not None else -math.inf
        if obj.est is not None and restarts:
            try:
                score = obj.est.estimate(obj.qubit_state(x_end), purpose="selection").value
            except ShotBudgetExhausted:
                out_of_shots = True
        elif obj.est is None:
            score = float(obj.ans.energy(x_end))
        trace += list(res.trace)
        if best is None or score < best[0]:
            best = (score, res, start)
        if out_of_shots:
            break
    _, res, start = best
    params = np.asarray(res.x, dtype=float)
    message = res.message + (f"; best of {restarts + 1} starts" if restarts else "")
    converged = bool(res.converged)
    moved = not (
        params.size and np.array_equal(params, np.asarray(start)) and method not in GRADIENT_METHODS
    )
    if not moved:  # a derivative-free run that returns its start has not optimized anything
        converged = False
        message += "; the parameters never moved from their start"
    if out_of_shots and not res.budget_exhausted:
        message += "; the shot budget ended the restarts"
    reason = _stop_reason(converged, moved, message, out_of_shots)
    return _Run(params, trace, int(res.n_iterations), converged, message, reason, out_of_shots)


def _adapt_run(built: _Built, initial_params: np.ndarray | None) -> _Run:
    res = built.adapt
    message = res.message
    if initial_params is not None:
        message += "; initial_params ignored (ADAPT grows its ansatz from HF)"
    reason = _stop_reason(bool(res.converged), True, message)
    return _Run(res.params, res.trace, res.n_iterations, res.converged, message, reason)


def _final_energy(
    m: _Methods, built: _Built, est: Any, qubit_state: Callable, params: np.ndarray
) -> tuple[float, float, float]:
    """``(energy, stderr, exact energy at params)``; with shots a fresh estimate."""
    e_exact_params = float(built.ansatz.energy(params))
    if est is None:
        return e_exact_params, 0.0, e_exact_params
    final_shots = m.estimator["final_shots"] or m.estimator["shots"]
    final: MeasuredEnergy = est.estimate(
        qubit_state(params), shots=final_shots, purpose="final", reserved=True
    )
    return final.value, final.stderr, e_exact_params


def _state_report(
    m: _Methods,
    built: _Built,
    space: DetSpace,
    exact: ExactReference,
    tapering: SectorReduction | None,
    params: np.ndarray,
) -> dict:
    """Overlap with the exact ground space and ``<N>``, ``<S^2>`` of the optimized state."""
    ans, norb, nelec = built.ansatz, space.norb, space.nelec
    psi = ans.state(params)
    target_s = abs(nelec[0] - nelec[1]) / 2
    out = {"spin_square_target": target_s * (target_s + 1)}
    if built.det_space:
        out["overlap_exact"] = exact.overlap(psi)
        n_mean, s2 = state_moments(psi, norb, nelec)
        out["rdm1"] = state_rdm1(psi, norb, nelec)
    else:
        enc = "jordan_wigner" if m.ansatz["name"] == "adapt" else m.mapping
        if built.jw_statevector and ans.n_qubits == 2 * norb:
            frame_taper = None
        elif m.tapered and ans.n_qubits == tapering.n_qubits:
            frame_taper = tapering
        else:  # a user-given operator: no known frame, so no <N>, <S^2>
            return {**out, "overlap_exact": exact.operator_overlap(psi, ans.hamiltonian)}
        frame = exact.sector_vectors(enc, frame_taper) if exact.known else None
        out["overlap_exact"] = exact.overlap(psi, frame) if exact.known else math.nan
        n_mean, s2 = state_moments(psi, norb, nelec, mapping=enc, tapering=frame_taper)
        out["rdm1"] = state_rdm1(psi, norb, nelec, mapping=enc, tapering=frame_taper)
    out["n_electrons"], out["spin_square"] = n_mean, s2
    out["spin_mismatch"] = bool(
        math.isfinite(s2)
        and (
            abs(s2 - out["spin_square_target"]) > SPIN_MISMATCH_TOL
            or abs(n_mean - sum(nelec)) > SPIN_MISMATCH_TOL
        )
    )
    return out


def _properties(rdm1: np.ndarray | None, dipole_parts) -> dict:
    """Natural occupations and dipole of a state's 1-RDM (nan where it is not formed)."""
    from ..chem.properties import dipole_from_rdm1, natural_occupations

    if rdm1 is None or not np.all(np.isfinite(rdm1)):
        return {}
    out: dict[str, Any] = {"natural_occupations": natural_occupations(rdm1)}
    if dipole_parts is not None:
        out["dipole"] = dipole_from_rdm1(rdm1, *dipole_parts)
    return out


def run_optimize(
    *,
    h1e: np.ndarray,
    eri: np.ndarray,
    e_core: float,
    norb: int,
    nelec: tuple[int, int],
    ansatz: dict,
    optimizer: dict,
    estimator: dict,
    qubit_hamiltonian: PauliExpansion | None = None,
    reference_bits: np.ndarray | None = None,
    mapping: str = "jordan_wigner",
    tapering: SectorReduction | None = None,
    initial_params: np.ndarray | None = None,
    seed: int = 0,
    progress: Callable[[int, float], None] | None = None,
    exact: ExactReference | None = None,
    dipole_parts: tuple[np.ndarray, np.ndarray, np.ndarray] | None = None,
) -> OptimizeResult:
    """Minimise the ansatz energy for the active-space integrals (module docstring).

    Args:
        h1e, eri, e_core, norb, nelec: active-space integrals (chemists' ``(pq|rs)``),
            core energy and sizes.
        ansatz, optimizer, estimator: method configs with ``name`` (see the ``*_DEFAULTS``).
        qubit_hamiltonian: the qubit operator of the problem under ``mapping`` (may be
            tapered); with ``tapering`` it must equal ``tapering.hamiltonian``.
        reference_bits: reference basis state of ``qubit_hamiltonian``'s qubits (ignored when
            ``tapering`` is given: ``tapering.reference_bits`` is used).
        mapping: fermion-to-qubit mapping (``jordan_wigner``, ``bravyi_kitaev``, ``parity``) of
            the problem: circuit costs, sampled Hamiltonians and tapering use it.
        tapering: the taper stage's :class:`~eigensweep.qubit.SectorReduction` of the Hamiltonian
            under ``mapping`` (``identity_reduction`` results, with zero generators, mean untapered).
        initial_params: starting parameters (default: the ansatz's ``initial_params()``; for
            a tapered fermionic ansatz only the kept parameters).
        seed: seed for optimizer, estimator (if it has no own seed) and random inits.
        progress: called as ``progress(evaluation_index, energy)`` after each evaluation.
        exact: the exact reference stored by the integrals stage; None computes it with
            :func:`eigensweep.chem.exact.solve_sector` (the same solver).
        dipole_parts: ``(dipole_active, dipole_core, dipole_nuclear)`` stored by the integrals
            stage, for the state's dipole moment.
    """
    t_start = time.perf_counter()
    m = _resolve_methods(ansatz, optimizer, estimator, mapping, tapering)
    norb = int(norb)
    nelec = (int(nelec[0]), int(nelec[1]))
    seed = int(seed)
    h1e = np.asarray(h1e, dtype=float)
    eri = np.asarray(eri, dtype=float)
    if h1e.shape != (norb, norb):
        raise ConfigError(f"h1e: shape {h1e.shape} does not match norb={norb}")
    space = DetSpace(norb, nelec, h1e, eri, e_core)
    prob = _Problem(h1e, eri, float(e_core), space)
    if tapering is not None:
        _check_tapering(tapering, qubit_hamiltonian, space, m.mapping)
    if exact is None:
        exact = ExactReference.solve(h1e, eri, e_core, norb, nelec)

    name = m.ansatz["name"]
    if name == "adapt":
        built = _build_adapt(m, prob, tapering, seed, progress)
    elif name in ("uccsd", "kupccgsd"):
        built = _build_fermionic(m, space, tapering, seed)
    else:
        built = _build_hardware_efficient(
            m, prob, tapering, qubit_hamiltonian, reference_bits, seed
        )
    ans = built.ansatz
    fermionic_circuit = _fermionic_circuit(m, built)
    if tapering is not None and (fermionic_circuit or not m.tapered):
        _check_mapping_frame(ans, tapering, space, m.mapping, exact)

    qubit_state = _qubit_state_fn(built, space, m)
    to_qubit = _to_qubit_fn(built, space, m.mapping)
    est = _make_sampler(m, built, prob, tapering, qubit_hamiltonian, seed)
    if est is not None:
        _set_budget(est, m)
    if built.adapt is not None:
        run = _adapt_run(built, initial_params)
    else:
        obj = _Objective(ans, est, qubit_state, progress, to_qubit)
        if _measures_circuits(m):
            mapping = m.mapping
            obj.to_qubit = lambda circuit: circuit
            obj.at_angles = lambda angles: ans.circuit_at_angles(angles, mapping)
            obj.states_at_angles = None
        obj.operator_norm = lambda: _measured_operator(est, ans, prob, m).one_norm_nonidentity
        run = _optimize_with_restarts(m.optimizer, obj, _start_point(ans, initial_params), seed)
    energy, stderr, e_exact_params = _final_energy(m, built, est, qubit_state, run.params)
    report = _state_report(m, built, space, exact, tapering, run.params)
    report.update(_properties(report.get("rdm1"), dipole_parts))

    meta = ans.meta()
    meta["mapping_for_costs"] = m.mapping if fermionic_circuit else "native"
    # reported costs: the circuit at the optimum exactly as the export stage compiles it
    final_circuit = circuit_from_meta(meta, run.params, m.mapping)
    if built.adapt is not None:
        meta["adapt_history"] = built.adapt.history
    return OptimizeResult(
        energy=float(energy),
        energy_stderr=float(stderr),
        energy_exact_at_params=e_exact_params,
        params=run.params,
        n_params=int(ans.n_params),
        n_qubits=int(ans.n_qubits),
        cnot_count=int(final_circuit.cnot_count),
        depth=int(final_circuit.depth),
        trace_energy=np.array([t["energy"] for t in run.trace], dtype=float),
        trace_grad_norm=np.array([t["grad_norm"] for t in run.trace], dtype=float),
        trace_shots=np.array([t["shots"] for t in run.trace], dtype=np.int64),
        trace_energy_exact=np.array(
            [t.get("energy_exact", t["energy"] if est is None else math.nan) for t in run.trace],
            dtype=float,
        ),
        trace_shots_cumulative=np.array(
            [t.get("shots_cumulative", 0) for t in run.trace], dtype=np.int64
        ),
        shots_total=int(est.ledger.total) if est is not None else 0,
        shots_by_purpose=dict(est.ledger.by_purpose) if est is not None else {},
        n_evaluations=len(run.trace),
        n_iterations=int(run.n_iterations),
        converged=bool(run.converged),
        message=str(run.message),
        stop_reason=run.stop_reason,
        wall_s=time.perf_counter() - t_start,
        energy_exact=float(exact.energy),
        ansatz_meta=meta,
        **report,
    )


def run_states(
    *,
    h1e: np.ndarray,
    eri: np.ndarray,
    e_core: float,
    norb: int,
    nelec: tuple[int, int],
    ansatz: dict,
    optimizer: dict,
    states: dict,
    ground_params: np.ndarray,
    seed: int = 0,
    dipole_parts: tuple[np.ndarray, np.ndarray, np.ndarray] | None = None,
    mapping: str = "jordan_wigner",
    tapering: SectorReduction | None = None,
    operators: dict[str, PauliExpansion] | None = None,
) -> list[dict]:
    """Excited states of one job (:mod:`eigensweep.vqe.excited`) with their properties.

    The frame is chosen as :func:`run_optimize` chooses it for the ground state: determinant
    space for an untapered problem, the tapered statevector when ``tapering`` has generators.

    Args:
        h1e, eri, e_core, norb, nelec: active-space integrals.
        ansatz, optimizer: the job's method configs (a fermionic ansatz).
        states: the completed ``methods.states`` entry (``vqd``, ``ssvqe`` or ``qeom``).
        ground_params: optimized parameters of the ground-state job (VQD's state 0, qEOM's
            ground state); on a tapered problem those of the tapered ansatz.
        seed: seed of the VQD starting points.
        dipole_parts: ``(dipole_active, dipole_core, dipole_nuclear)`` of the integrals.
        mapping: the problem's mapping (the taper stage's).
        tapering: the taper stage's reduction.
        operators: ``{"number": N, "spin_square": S^2}`` in the tapered frame, as the taper
            stage stored them (needed when ``tapering`` has generators).

    Returns:
        One dict per state (state 0 first): ``energy``, ``spin_square``, ``n_electrons``,
        ``dipole`` (3,), ``transition_dipole`` (3,) from state 0 (VQD/SSVQE: PySCF
        ``trans_rdm1`` of the two CI vectors; qEOM: its commutator amplitude),
        ``natural_occupations``, ``evaluations``, ``params``.
    """
    from pyscf import lib

    from .detspace import SINGLE_THREAD_DIM
    from .excited import DetFrame, QubitFrame

    m = _resolve_methods(ansatz, optimizer, {"name": "exact"}, mapping, tapering)
    nelec = (int(nelec[0]), int(nelec[1]))
    space = DetSpace(int(norb), nelec, np.asarray(h1e, float), np.asarray(eri, float), e_core)
    if m.tapered:
        if operators is None or not {"number", "spin_square"} <= set(operators):
            raise ConfigError("operators: a tapered problem needs the stored number and S^2")
        frame: Any = QubitFrame(
            space,
            tapering.hamiltonian,
            operators["spin_square"],
            operators["number"],
            m.mapping,
            tapering,
        )
    else:
        frame = DetFrame(space)
    built = _build_fermionic(m, space, tapering, int(seed))
    # small sectors run single-threaded, as DetSpace.apply_h does (OpenMP start-up dominates)
    with lib.with_omp_threads(1 if space.dim < SINGLE_THREAD_DIM else None):
        found = _find_states(m, built, frame, states, ground_params, seed, dipole_parts)
        return [_state_properties(frame, found, k, dipole_parts) for k in range(len(found))]


def _find_states(
    m: _Methods, built: _Built, frame, states: dict, ground_params, seed, dipole_parts
):
    """The states of the method (:mod:`eigensweep.vqe.excited`), vectors in ``frame``."""
    from .excited import qeom, ssvqe, vqd

    name, n = states["name"], int(states["n_states"])
    mu = 0.0 if states["spin"] == "all" else float(states.get("spin_penalty", 0.0))
    g = np.asarray(ground_params, dtype=float)
    if name in ("vqd", "ssvqe"):
        common = {
            "weights": states["weights"],
            "mu": mu,
            "seed": int(seed),
            "start_scale": states["start_scale"],
            "frame": frame,
        }
        if name == "vqd":
            return vqd(built.ansatz, n, g, m.optimizer, **common)
        return ssvqe(built.ansatz, n, m.optimizer, **common)
    if name == "qeom":
        found = qeom(
            frame.space,
            frame.civec(built.ansatz.state(g)),
            n,
            spin_filter=states["spin"] != "all",
            dipole_active=None if dipole_parts is None else dipole_parts[0],
            allowed=frame.allows,
        )
        for st in found:  # back into the frame: <S^2> and <N> from the frame's operators
            vec = frame.carry(st.vector)
            if vec is None:  # the allowed excitations keep the sector: a bug if it happens
                raise RuntimeError("a qEOM state left the problem's symmetry sector")
            st.vector = vec
            st.spin_square = frame.spin_square(st.vector)
            st.n_electrons = frame.n_electrons(st.vector)
        return found
    raise ConfigError(f"states.name: {name!r} is not an excited-state method")


def _state_properties(frame, found: list, k: int, dipole_parts) -> dict:
    """Energy, ``<S^2>``, ``<N>``, dipole, transition dipole from state 0 and natural
    occupations of state ``k`` (1-RDMs of the CI vectors)."""
    from pyscf.fci import direct_spin1

    from ..chem.properties import transition_dipole

    space, st = frame.space, found[k]
    civec = frame.civec(st.vector)
    props = _properties(state_rdm1(civec, space.norb, space.nelec), dipole_parts)
    tdm = np.zeros(3)
    if k and st.transition_dipole is not None:
        tdm = np.asarray(st.transition_dipole, float)
    elif k and dipole_parts is not None:
        t = direct_spin1.trans_rdm1(frame.civec(found[0].vector), civec, space.norb, space.nelec)
        tdm = transition_dipole(t, dipole_parts[0])
    return {
        "energy": float(st.energy),
        "spin_square": float(st.spin_square),
        "n_electrons": float(st.n_electrons),
        "dipole": np.asarray(props.get("dipole", np.full(3, np.nan)), float),
        "transition_dipole": tdm,
        "natural_occupations": props.get("natural_occupations", np.zeros(0)),
        "evaluations": int(st.evaluations),
        "params": np.asarray(st.params, float),
    }
