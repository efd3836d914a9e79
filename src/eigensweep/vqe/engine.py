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

Gradient-based optimizers (``lbfgs``, ``bfgs``) need the exact estimator; ``adapt`` too
(its operator selection uses exact gradients). ``initial_params`` (a warm start) is ignored by
``adapt``, which always grows its operator list from HF (noted in ``message``). With
``shots``/``noisy`` the optimizer's final point is re-evaluated with fresh shots
(``final_shots``, default ``shots``) and exactly; the reported ``energy`` is that fresh
estimate with its standard error.
"""

from __future__ import annotations

import math
import time
from collections.abc import Callable
from dataclasses import dataclass, fields
from typing import TYPE_CHECKING, Any

import numpy as np

from ..errors import ConfigError
from ..qubit.mapping import encode_state
from ..qubit.mapping import reference_bits as mapped_reference_bits
from .circuits import circuit_from_meta
from .detspace import DetSpace, fci_ground_state, to_qubit_state
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
from .optimizers import minimize
from .uccsd import UCCSD

if TYPE_CHECKING:
    from ..qubit.pauli import PauliSum
    from ..qubit.taper import TaperResult
    from .estimators import Estimate

__all__ = [
    "ANSATZ_DEFAULTS",
    "ESTIMATOR_DEFAULTS",
    "OPTIMIZER_DEFAULTS",
    "OptimizeResult",
    "check_combination",
    "run_optimize",
    "validate_method",
]


@dataclass
class OptimizeResult:
    """Outcome of :func:`run_optimize` (energies in hartree).

    ``trace_*`` arrays have one entry per objective evaluation. ``overlap_exact`` is
    ``|<psi|ground>|^2`` with the exact ground state of the ``nelec`` sector (PySCF FCI, written
    in the mapping's encoding for untapered statevectors; for a tapered problem or a
    user-given operator: the weight in the operator's lowest eigenspace when its eigenvalue
    equals the determinant-space FCI energy to 1e-6 Eh, up to 16 qubits), or nan when it cannot
    be formed. ``n_qubits``, ``cnot_count`` and ``depth`` are those of the circuit that is run
    (tapered qubits for a tapered problem), compiled at the optimized parameters exactly as the
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

    _ARRAYS = ("params", "trace_energy", "trace_grad_norm", "trace_shots")

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
                kw[f.name] = np.asarray(arrays[f.name])
            else:
                v = meta[f.name]
                if f.name in (
                    "energy",
                    "energy_stderr",
                    "energy_exact_at_params",
                    "wall_s",
                    "overlap_exact",
                    "energy_exact",
                ):
                    v = math.nan if v is None else float(v)
                kw[f.name] = v
        return cls(**kw)


def _qubit_ground_overlap(
    psi: np.ndarray, ham: PauliSum, e_fci: float, max_qubits: int = 16
) -> float:
    """Weight of ``psi`` in the lowest eigenspace of a (possibly tapered or non-JW) qubit
    operator, if that eigenvalue is the sector FCI energy (1e-6 Eh); nan otherwise or above
    ``max_qubits`` qubits."""
    if ham.n_qubits > max_qubits:
        return math.nan
    mat = ham.to_sparse()
    dim = mat.shape[0]
    if dim <= 256:
        vals, vecs = np.linalg.eigh(mat.toarray())
        vals, vecs = vals[:4], vecs[:, :4]
    else:
        from scipy.sparse.linalg import eigsh

        vals, vecs = eigsh(mat, k=4, which="SA", tol=1e-12)
        order = np.argsort(vals)
        vals, vecs = vals[order], vecs[:, order]
    if abs(vals[0] - e_fci) > 1e-6:
        return math.nan
    ground = vecs[:, np.abs(vals - vals[0]) < 1e-8]
    return float(np.sum(np.abs(ground.conj().T @ psi) ** 2))


def _mapped_hamiltonian(
    h1e: np.ndarray, eri: np.ndarray, e_core: float, norb: int, mapping: str
) -> PauliSum:
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
    tapering: TaperResult,
    qubit_hamiltonian: PauliSum | None,
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
    tapering: TaperResult,
    space: DetSpace,
    mapping: str,
    c_fci: np.ndarray,
    e_fci: float,
) -> None:
    """ConfigError unless ``tapering`` was built under ``mapping``.

    Tapered fermionic ansatz: at a fixed test point it must give the determinant-space energy
    of the same excitations (under a wrong mapping they become other strings; a tapered
    qubit-space ansatz does not depend on the mapping). Untapered (up to
    :data:`_FRAME_CHECK_MAX_QUBITS` qubits): the FCI vector written in ``mapping``'s encoding
    must have the FCI energy under ``tapering.hamiltonian`` (the operator that shots sample,
    hardware-efficient circuits run on and overlaps are taken in).
    """
    if tapering.generators.n_terms > 0:
        det = FermionicAnsatz(space, ans.excitations, ans.n_params_untapered)
        theta = 0.1 * np.sin(1.0 + np.arange(ans.n_params))
        e_tap, e_det = ans.energy(theta), det.energy(ans.untapered_params(theta))
    elif tapering.n_qubits_before <= _FRAME_CHECK_MAX_QUBITS:
        from ..qubit.statevector import expectation

        psi = encode_state(to_qubit_state(c_fci, space.norb, space.nelec), mapping)
        e_tap, e_det = expectation(psi, tapering.hamiltonian), e_fci
    else:
        return
    if abs(e_tap - e_det) > 1e-7:
        raise ConfigError(
            f"mapping: the taper stage's Hamiltonian is not in the {mapping!r} encoding (a test "
            f"state gives {e_tap:.8f} Eh there and {e_det:.8f} Eh exactly); pass the mapping of "
            "the hamiltonian stage"
        )


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
    qubit_hamiltonian: PauliSum | None = None,
    reference_bits: np.ndarray | None = None,
    mapping: str = "jordan_wigner",
    tapering: TaperResult | None = None,
    initial_params: np.ndarray | None = None,
    seed: int = 0,
    progress: Callable[[int, float], None] | None = None,
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
        tapering: the taper stage's :class:`~eigensweep.qubit.TaperResult` of the Hamiltonian
            under ``mapping`` (``no_taper`` results, with zero generators, mean untapered).
        initial_params: starting parameters (default: the ansatz's ``initial_params()``; for
            a tapered fermionic ansatz only the kept parameters).
        seed: seed for optimizer, estimator (if it has no own seed) and random inits.
        progress: called as ``progress(evaluation_index, energy)`` after each evaluation.
    """
    t_start = time.perf_counter()
    a_cfg = validate_method("ansatz", ansatz)
    o_cfg = validate_method("optimizer", optimizer)
    e_cfg = validate_method("estimator", estimator)
    mapping = check_mapping(mapping, "mapping")
    tapered = tapering is not None and tapering.generators.n_terms > 0
    check_combination(a_cfg, tapered, mapping, optimizer=o_cfg, estimator=e_cfg)
    norb = int(norb)
    nelec = (int(nelec[0]), int(nelec[1]))
    seed = int(seed)
    name = a_cfg["name"]
    method = o_cfg["name"]
    opt_options = {k: v for k, v in o_cfg.items() if k not in ("name", "restarts", "restart_scale")}
    restarts = int(o_cfg.get("restarts", 0))
    restart_scale = float(o_cfg.get("restart_scale", 0.1))
    sampled = e_cfg["name"] != "exact"
    h1e = np.asarray(h1e, dtype=float)
    eri = np.asarray(eri, dtype=float)
    if h1e.shape != (norb, norb):
        raise ConfigError(f"h1e: shape {h1e.shape} does not match norb={norb}")

    space = DetSpace(norb, nelec, h1e, eri, e_core)
    if tapering is not None:
        _check_tapering(tapering, qubit_hamiltonian, space, mapping)
    e_fci, c_fci = fci_ground_state(h1e, eri, e_core, norb, nelec)

    # ------------------------------------------------------------- build the ansatz
    trace: list[dict] = []
    adapt_res = None
    jw_statevector = False  # qubit-space ansatz on the untapered JW (or mapped) encoding
    if name == "adapt":
        from .adapt import run_adapt

        qubit_pool = a_cfg["pool"] == "qubit"
        jw_statevector = qubit_pool
        adapt_res = run_adapt(
            space,
            pool=a_cfg["pool"],
            gradient_tolerance=a_cfg["gradient_tolerance"],
            max_operators=a_cfg["max_operators"],
            optimizer=o_cfg,
            seed=seed,
            progress=progress,
            hamiltonian=_mapped_hamiltonian(h1e, eri, e_core, norb, mapping)
            if qubit_pool
            else None,
            reference=mapped_reference_bits(nelec, norb, mapping) if qubit_pool else None,
            tapering=tapering if tapered else None,
            mapping=mapping,
        )
        ans: Any = adapt_res.ansatz
    elif name in ("uccsd", "kupccgsd"):
        if name == "uccsd":
            ans = UCCSD(space, spin_adapted=a_cfg["spin_adapted"])
        else:
            ans = KUpCCGSD(
                space,
                k=a_cfg["k"],
                spin_adapted=a_cfg["spin_adapted"],
                init_scale=a_cfg["init_scale"],
                seed=seed,
            )
        if tapered:
            from .tapered import TaperedFermionicAnsatz

            ans = TaperedFermionicAnsatz.from_ansatz(ans, mapping, tapering)
    else:
        from .hardware_efficient import HardwareEfficientAnsatz

        if tapering is not None:
            ham = tapering.hamiltonian
            ref = np.asarray(tapering.reference_bits, dtype=np.uint8).reshape(-1)
            jw_statevector = not tapered
        else:
            ham = qubit_hamiltonian
            if ham is None:
                ham = _mapped_hamiltonian(h1e, eri, e_core, norb, mapping)
            if reference_bits is None:
                if ham.n_qubits != 2 * norb:
                    raise ConfigError(
                        "reference_bits: required for a qubit Hamiltonian on "
                        f"{ham.n_qubits} != 2*norb qubits"
                    )
                ref = mapped_reference_bits(nelec, norb, mapping)
                jw_statevector = True
            else:
                ref = np.asarray(reference_bits, dtype=np.uint8).reshape(-1)
                if ref.size != ham.n_qubits:
                    raise ConfigError(
                        f"reference_bits: has {ref.size} bits, the Hamiltonian {ham.n_qubits} qubits"
                    )
        ans = HardwareEfficientAnsatz(
            ham,
            ref,
            rounds=a_cfg["rounds"],
            axes=a_cfg["axes"],
            init_scale=a_cfg["init_scale"],
            seed=seed,
        )
    det_space = isinstance(ans, FermionicAnsatz)
    # circuits built from mapped excitations (det-space or tapered), not native qubit gates
    fermionic_circuit = name in ("uccsd", "kupccgsd") or (name == "adapt" and not jw_statevector)
    if tapering is not None and (fermionic_circuit or not tapered):
        _check_mapping_frame(ans, tapering, space, mapping, c_fci, e_fci)
    costs = ans.circuit_costs(mapping) if det_space else ans.circuit_costs()

    # ------------------------------------------------------------- estimator
    if det_space:

        def qubit_state(theta: np.ndarray) -> np.ndarray:
            return encode_state(to_qubit_state(ans.state(theta), norb, nelec), mapping)

    else:

        def qubit_state(theta: np.ndarray) -> np.ndarray:
            return ans.state(theta)

    est = None
    if sampled:
        from .estimators import make_estimator

        if not det_space:
            qham = ans.hamiltonian
        elif tapering is not None:
            qham = tapering.hamiltonian
        elif qubit_hamiltonian is not None and qubit_hamiltonian.n_qubits == 2 * norb:
            qham = qubit_hamiltonian
        else:
            qham = _mapped_hamiltonian(h1e, eri, e_core, norb, mapping)
        est = make_estimator(e_cfg, qham, seed=seed, n_cnot=costs["cnot_count"])

    # ------------------------------------------------------------- optimize
    if adapt_res is not None:
        params = adapt_res.params
        trace = adapt_res.trace
        n_iter = adapt_res.n_iterations
        converged = adapt_res.converged
        message = adapt_res.message
        if initial_params is not None:
            message += "; initial_params ignored (ADAPT grows its ansatz from HF)"
    else:
        x0 = ans.initial_params() if initial_params is None else initial_params
        x0 = np.asarray(x0, dtype=float).reshape(-1)
        if x0.size != ans.n_params:
            raise ConfigError(
                f"initial_params: has {x0.size} values, the ansatz {ans.n_params} parameters"
            )
        # random restarts: extra starts x0 + restart_scale * N(0, 1), seeded by seed + r; the
        # best run wins (lowest exact energy, or lowest fresh-shot estimate with shots)
        counter = [0]
        last_shots = [0]

        def objective(theta: np.ndarray) -> float:
            estimate = est.estimate(qubit_state(theta))
            last_shots[0] = estimate.shots
            if progress is not None:
                progress(counter[0], estimate.value)
            counter[0] += 1
            return estimate.value

        def objective_grad(theta: np.ndarray) -> tuple[float, np.ndarray]:
            e, g = ans.energy_and_gradient(theta)
            if progress is not None:
                progress(counter[0], e)
            counter[0] += 1
            return e, g

        def objective_value(theta: np.ndarray) -> float:
            e = ans.energy(theta)
            if progress is not None:
                progress(counter[0], e)
            counter[0] += 1
            return e

        def run_once(start: np.ndarray, run_seed: int):
            if est is not None:
                return minimize(
                    objective,
                    start,
                    method=method,
                    options=opt_options,
                    seed=run_seed,
                    shots=lambda: last_shots[0],
                )
            if method in GRADIENT_METHODS:
                return minimize(
                    objective_grad,
                    start,
                    method=method,
                    options=opt_options,
                    seed=run_seed,
                    grad=True,
                )
            return minimize(
                objective_value, start, method=method, options=opt_options, seed=run_seed
            )

        best = None
        all_trace: list[dict] = []
        for r in range(restarts + 1):
            start = x0
            if r:
                start = x0 + restart_scale * np.random.default_rng(seed + r).standard_normal(
                    x0.size
                )
            res = run_once(start, seed + r)
            x_end = np.asarray(res.x, dtype=float)
            if est is not None and restarts:
                score = est.estimate(qubit_state(x_end)).value
            else:
                score = float(ans.energy(x_end))
            all_trace += list(res.trace)
            if best is None or score < best[0]:
                best = (score, res)
        res = best[1]
        params = np.asarray(res.x, dtype=float)
        trace = all_trace
        n_iter = res.n_iterations
        converged = res.converged
        message = res.message + (f"; best of {restarts + 1} starts" if restarts else "")

    # ------------------------------------------------------------- final evaluation
    e_exact_params = float(ans.energy(params))
    if est is not None:
        final_shots = e_cfg["final_shots"] or e_cfg["shots"]
        final: Estimate = est.estimate(qubit_state(params), shots=final_shots)
        energy, stderr = final.value, final.stderr
    else:
        energy, stderr = e_exact_params, 0.0

    if det_space:
        overlap = float(np.dot(ans.state(params), c_fci) ** 2)
    elif jw_statevector and ans.n_qubits == 2 * norb:
        # untapered statevector in the mapping's encoding: the FCI vector maps exactly
        enc = "jordan_wigner" if name == "adapt" else mapping
        gs = encode_state(to_qubit_state(c_fci, norb, nelec), enc)
        overlap = float(abs(np.vdot(gs, ans.state(params))) ** 2)
    else:
        # tapered or user-given operator: its lowest eigenspace, if that is the FCI energy
        overlap = _qubit_ground_overlap(ans.state(params), ans.hamiltonian, e_fci)

    meta = ans.meta()
    meta["mapping_for_costs"] = mapping if fermionic_circuit else "native"
    # reported costs: the circuit at the optimum exactly as the export stage compiles it
    final_circuit = circuit_from_meta(meta, params, mapping)
    if adapt_res is not None:
        meta["adapt_history"] = adapt_res.history
    return OptimizeResult(
        energy=float(energy),
        energy_stderr=float(stderr),
        energy_exact_at_params=e_exact_params,
        params=params,
        n_params=int(ans.n_params),
        n_qubits=int(ans.n_qubits),
        cnot_count=int(final_circuit.cnot_count),
        depth=int(final_circuit.depth),
        trace_energy=np.array([t["energy"] for t in trace], dtype=float),
        trace_grad_norm=np.array([t["grad_norm"] for t in trace], dtype=float),
        trace_shots=np.array([t["shots"] for t in trace], dtype=np.int64),
        n_evaluations=len(trace),
        n_iterations=int(n_iter),
        converged=bool(converged),
        message=str(message),
        wall_s=time.perf_counter() - t_start,
        overlap_exact=overlap,
        energy_exact=float(e_fci),
        ansatz_meta=meta,
    )
