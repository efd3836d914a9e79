"""The ``optimize`` stage science: build an ansatz, minimise its energy, report the result.

Simulation path by (ansatz, estimator):

* fermionic ansatz (``uccsd``, ``kupccgsd``, ``adapt``) + ``exact``: determinant space
  (:mod:`eigensweep.vqe.detspace`) with adjoint gradients; no qubit Hamiltonian is needed.
* fermionic ansatz + ``shots`` / ``noisy``: the state is still propagated exactly in
  determinant space, mapped to the Jordan-Wigner statevector (:func:`to_qubit_state`) and
  sampled against the untapered JW Hamiltonian built here from the integrals (the
  ``qubit_hamiltonian`` argument is not used for fermionic ansätze, because a tapered or
  differently mapped operator does not act on the JW statevector).
* ``adapt`` with ``pool: qubit`` (qubit-ADAPT): JW qubit statevector with the JW Hamiltonian
  of the integrals (the pool's Pauli rotations do not conserve particle number).
* ``hardware_efficient``: qubit statevector with ``qubit_hamiltonian`` (possibly tapered;
  default: JW Hamiltonian of the integrals) and ``reference_bits`` (default: JW HF bits,
  only allowed when the Hamiltonian has ``2 norb`` qubits).

Gradient-based optimizers (``lbfgs``, ``bfgs``) need the exact estimator; ``adapt`` too
(its operator selection uses exact gradients). ``initial_params`` (a warm start) is ignored by
``adapt``, which always grows its operator list from HF (noted in ``message``). With ``shots``/``noisy`` the optimizer's final
point is re-evaluated with fresh shots (``final_shots``, default ``shots``) and exactly; the
reported ``energy`` is that fresh estimate with its standard error.
"""

from __future__ import annotations

import math
import time
from collections.abc import Callable
from dataclasses import dataclass, fields
from typing import Any

import numpy as np

from ..errors import ConfigError
from ..qubit.pauli import PauliSum
from .adapt import POOLS, run_adapt
from .ansatz import MAPPINGS, FermionicAnsatz, reference_bits
from .detspace import DetSpace, fci_ground_state, to_qubit_state
from .estimators import (
    ESTIMATOR_DEFAULTS,
    Estimate,
    make_estimator,
    molecular_pauli_sum,
    validate_estimator,
)
from .hardware_efficient import ROTATION_SETS, HardwareEfficientAnsatz
from .kupccgsd import KUpCCGSD
from .optimizers import GRADIENT_METHODS, OPTIMIZER_DEFAULTS, minimize, validate_options
from .uccsd import UCCSD

ANSATZ_DEFAULTS: dict[str, dict[str, Any]] = {
    "uccsd": {"spin_adapted": False, "mapping": "jordan_wigner"},
    "kupccgsd": {"k": 1, "spin_adapted": False, "init_scale": 0.0, "mapping": "jordan_wigner"},
    "hardware_efficient": {"layers": 2, "rotations": "ry_rz", "init_scale": 0.1},
    "adapt": {
        "pool": "fermionic_sd",
        "gradient_tolerance": 1e-3,
        "max_operators": 50,
        "mapping": "jordan_wigner",
    },
}

FERMIONIC = ("uccsd", "kupccgsd", "adapt")

__all__ = [
    "ANSATZ_DEFAULTS",
    "ESTIMATOR_DEFAULTS",
    "OPTIMIZER_DEFAULTS",
    "OptimizeResult",
    "run_optimize",
    "validate_method",
]


def _check_bool(kind: str, key: str, v: Any) -> bool:
    if not isinstance(v, bool):
        raise ConfigError(f"{kind}.{key}: must be true or false, got {v!r}")
    return v


def _check_int(kind: str, key: str, v: Any, low: int) -> int:
    if isinstance(v, bool) or not isinstance(v, int | np.integer) or v < low:
        raise ConfigError(f"{kind}.{key}: must be an integer >= {low}, got {v!r}")
    return int(v)


def _check_float(kind: str, key: str, v: Any, low: float, inclusive: bool = True) -> float:
    ok = isinstance(v, int | float | np.integer | np.floating) and not isinstance(v, bool)
    if ok:
        ok = math.isfinite(float(v)) and (v >= low if inclusive else v > low)
    if not ok:
        rel = ">=" if inclusive else ">"
        raise ConfigError(f"{kind}.{key}: must be a number {rel} {low}, got {v!r}")
    return float(v)


def _check_choice(kind: str, key: str, v: Any, allowed: tuple[str, ...]) -> str:
    if v not in allowed:
        raise ConfigError(f"{kind}.{key}: unknown value {v!r}; allowed: {', '.join(allowed)}")
    return str(v)


def _validate_ansatz(cfg: dict[str, Any]) -> dict[str, Any]:
    name = cfg.get("name")
    if name not in ANSATZ_DEFAULTS:
        raise ConfigError(
            f"ansatz.name: unknown ansatz {name!r}; allowed: {', '.join(ANSATZ_DEFAULTS)}"
        )
    defaults = ANSATZ_DEFAULTS[name]
    out: dict[str, Any] = {"name": name, **defaults}
    for key, value in cfg.items():
        if key == "name":
            continue
        if key not in defaults:
            allowed = ", ".join(["name", *defaults])
            raise ConfigError(f"ansatz.{key}: unknown option for {name!r}; allowed: {allowed}")
        out[key] = value
    for key, value in list(out.items()):
        if key == "spin_adapted":
            out[key] = _check_bool("ansatz", key, value)
        elif key == "mapping":
            out[key] = _check_choice("ansatz", key, value, MAPPINGS)
        elif key == "k":
            out[key] = _check_int("ansatz", key, value, 1)
        elif key == "layers":
            out[key] = _check_int("ansatz", key, value, 0)
        elif key == "max_operators":
            out[key] = _check_int("ansatz", key, value, 1)
        elif key == "init_scale":
            out[key] = _check_float("ansatz", key, value, 0.0)
        elif key == "gradient_tolerance":
            out[key] = _check_float("ansatz", key, value, 0.0, inclusive=False)
        elif key == "rotations":
            out[key] = _check_choice("ansatz", key, value, ROTATION_SETS)
        elif key == "pool":
            out[key] = _check_choice("ansatz", key, value, POOLS)
    return out


def validate_method(kind: str, cfg: dict[str, Any]) -> dict[str, Any]:
    """Return ``cfg`` (a dict with ``name``) with defaults filled for ``kind``.

    ``kind`` is ``"ansatz"``, ``"optimizer"`` or ``"estimator"``. Raises
    :class:`ConfigError` on an unknown name, unknown key or out-of-range value.
    """
    if not isinstance(cfg, dict):
        raise ConfigError(f"{kind}: must be a mapping with a 'name' key, got {cfg!r}")
    if kind == "ansatz":
        return _validate_ansatz(cfg)
    if kind == "optimizer":
        name = cfg.get("name")
        opts = {k: v for k, v in cfg.items() if k != "name"}
        return {"name": name, **validate_options(name, opts)}
    if kind == "estimator":
        return validate_estimator(cfg)
    raise ConfigError(f"kind: unknown method kind {kind!r}; allowed: ansatz, optimizer, estimator")


@dataclass
class OptimizeResult:
    """Outcome of :func:`run_optimize` (energies in hartree).

    ``trace_*`` arrays have one entry per objective evaluation. ``overlap_exact`` is
    ``|<psi|ground>|^2`` with the exact ground state of the ``nelec`` sector (PySCF FCI; for
    a qubit-space ansatz on a tapered or non-JW operator: the weight in the operator's lowest
    eigenspace when its eigenvalue equals the FCI energy to 1e-6 Eh, up to 16 qubits), or nan
    when it cannot be formed.
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


def _hf_bits_jw(norb: int, nelec: tuple[int, int]) -> np.ndarray:
    occ = [2 * i for i in range(nelec[0])] + [2 * i + 1 for i in range(nelec[1])]
    return reference_bits(occ, "jordan_wigner", 2 * norb)


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
    initial_params: np.ndarray | None = None,
    seed: int = 0,
    progress: Callable[[int, float], None] | None = None,
) -> OptimizeResult:
    """Minimise the ansatz energy for the active-space integrals (module docstring).

    Args:
        h1e, eri, e_core, norb, nelec: active-space integrals (chemists' ``(pq|rs)``),
            core energy and sizes.
        ansatz, optimizer, estimator: method configs with ``name`` (see the ``*_DEFAULTS``).
        qubit_hamiltonian: qubit operator for ``hardware_efficient`` (may be tapered).
        reference_bits: reference basis state of ``qubit_hamiltonian``'s qubits.
        initial_params: starting parameters (default: the ansatz's ``initial_params()``).
        seed: seed for optimizer, estimator (if it has no own seed) and random inits.
        progress: called as ``progress(evaluation_index, energy)`` after each evaluation.
    """
    t_start = time.perf_counter()
    a_cfg = validate_method("ansatz", ansatz)
    o_cfg = validate_method("optimizer", optimizer)
    e_cfg = validate_method("estimator", estimator)
    norb = int(norb)
    nelec = (int(nelec[0]), int(nelec[1]))
    seed = int(seed)
    name = a_cfg["name"]
    method = o_cfg["name"]
    opt_options = {k: v for k, v in o_cfg.items() if k != "name"}
    sampled = e_cfg["name"] != "exact"
    if sampled and method in GRADIENT_METHODS:
        raise ConfigError(
            f"optimizer.name: {method!r} needs exact gradients; with estimator "
            f"{e_cfg['name']!r} use one of spsa, rbf_surrogate, cobyla, nelder_mead"
        )
    if sampled and name == "adapt":
        raise ConfigError("estimator.name: the adapt ansatz needs the exact estimator")
    h1e = np.asarray(h1e, dtype=float)
    eri = np.asarray(eri, dtype=float)
    if h1e.shape != (norb, norb):
        raise ConfigError(f"h1e: shape {h1e.shape} does not match norb={norb}")

    space = DetSpace(norb, nelec, h1e, eri, e_core)
    e_fci, c_fci = fci_ground_state(h1e, eri, e_core, norb, nelec)

    # ------------------------------------------------------------- build the ansatz
    trace: list[dict] = []
    adapt_res = None
    if name == "adapt":
        qubit_pool = a_cfg["pool"] == "qubit"
        adapt_res = run_adapt(
            space,
            pool=a_cfg["pool"],
            gradient_tolerance=a_cfg["gradient_tolerance"],
            max_operators=a_cfg["max_operators"],
            optimizer=o_cfg,
            seed=seed,
            progress=progress,
            hamiltonian=molecular_pauli_sum(h1e, eri, e_core, norb) if qubit_pool else None,
            reference=_hf_bits_jw(norb, nelec) if qubit_pool else None,
        )
        ans: Any = adapt_res.ansatz
    elif name == "uccsd":
        ans = UCCSD(space, spin_adapted=a_cfg["spin_adapted"])
    elif name == "kupccgsd":
        ans = KUpCCGSD(
            space,
            k=a_cfg["k"],
            spin_adapted=a_cfg["spin_adapted"],
            init_scale=a_cfg["init_scale"],
            seed=seed,
        )
    else:
        ham = qubit_hamiltonian
        if ham is None:
            ham = molecular_pauli_sum(h1e, eri, e_core, norb)
        if reference_bits is None:
            if ham.n_qubits != 2 * norb:
                raise ConfigError(
                    "reference_bits: required for a qubit Hamiltonian on "
                    f"{ham.n_qubits} != 2*norb qubits"
                )
            ref = _hf_bits_jw(norb, nelec)
        else:
            ref = np.asarray(reference_bits, dtype=np.uint8).reshape(-1)
            if ref.size != ham.n_qubits:
                raise ConfigError(
                    f"reference_bits: has {ref.size} bits, the Hamiltonian {ham.n_qubits} qubits"
                )
        ans = HardwareEfficientAnsatz(
            ham,
            ref,
            layers=a_cfg["layers"],
            rotations=a_cfg["rotations"],
            init_scale=a_cfg["init_scale"],
            seed=seed,
        )
    fermionic = isinstance(ans, FermionicAnsatz)
    mapping = a_cfg.get("mapping", "jordan_wigner")
    costs = ans.circuit_costs(mapping) if fermionic else ans.circuit_costs()

    # ------------------------------------------------------------- estimator
    qham = None
    if sampled:
        qham = molecular_pauli_sum(h1e, eri, e_core, norb) if fermionic else ans.hamiltonian
    est = make_estimator(e_cfg, qham, seed=seed, n_cnot=costs["cnot_count"])

    def qubit_state(theta: np.ndarray) -> np.ndarray:
        return ans.qubit_state(theta)

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
        counter = [0]
        if sampled:
            last_shots = [0]

            def objective(theta: np.ndarray) -> float:
                estimate = est.estimate(qubit_state(theta))
                value = estimate.value
                last_shots[0] = estimate.shots
                if progress is not None:
                    progress(counter[0], value)
                counter[0] += 1
                return value

            res = minimize(
                objective,
                x0,
                method=method,
                options=opt_options,
                seed=seed,
                shots=lambda: last_shots[0],
            )
        else:

            def objective_grad(theta: np.ndarray) -> tuple[float, np.ndarray]:
                e, g = ans.energy_and_gradient(theta)
                if progress is not None:
                    progress(counter[0], e)
                counter[0] += 1
                return e, g

            if method in GRADIENT_METHODS:
                res = minimize(
                    objective_grad, x0, method=method, options=opt_options, seed=seed, grad=True
                )
            else:

                def objective_value(theta: np.ndarray) -> float:
                    e = ans.energy(theta)
                    if progress is not None:
                        progress(counter[0], e)
                    counter[0] += 1
                    return e

                res = minimize(objective_value, x0, method=method, options=opt_options, seed=seed)
        params = np.asarray(res.x, dtype=float)
        trace = res.trace
        n_iter = res.n_iterations
        converged = res.converged
        message = res.message

    # ------------------------------------------------------------- final evaluation
    e_exact_params = float(ans.energy(params))
    if sampled:
        final_shots = e_cfg["final_shots"] or e_cfg["shots"]
        final: Estimate = est.estimate(qubit_state(params), shots=final_shots)
        energy, stderr = final.value, final.stderr
    else:
        energy, stderr = e_exact_params, 0.0

    if fermionic:
        overlap = float(np.dot(ans.state(params), c_fci) ** 2)
    elif ans.n_qubits == 2 * norb and (reference_bits is None or name == "adapt"):
        # JW statevector: the FCI vector maps exactly
        psi = ans.state(params)
        gs = to_qubit_state(c_fci, norb, nelec)
        overlap = float(abs(np.vdot(gs, psi)) ** 2)
    else:
        overlap = _qubit_ground_overlap(ans.state(params), ans.hamiltonian, e_fci)

    meta = ans.meta()
    meta["mapping_for_costs"] = mapping if fermionic else "native"
    if adapt_res is not None:
        meta["adapt_history"] = adapt_res.history
    return OptimizeResult(
        energy=float(energy),
        energy_stderr=float(stderr),
        energy_exact_at_params=e_exact_params,
        params=params,
        n_params=int(ans.n_params),
        n_qubits=int(ans.n_qubits),
        cnot_count=int(costs["cnot_count"]),
        depth=int(costs["depth"]),
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
