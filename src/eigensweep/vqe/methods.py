"""Method tables and config checks of the variational engine (light: stdlib + NumPy only).

Config validation runs in every Snakemake process, so this module must stay cheap to import:
it imports nothing but the standard library, NumPy and :mod:`eigensweep.errors` (no SciPy,
PySCF or OpenFermion). It holds

* the defaults of every ansatz, optimizer and estimator (:data:`ANSATZ_DEFAULTS`,
  :data:`OPTIMIZER_DEFAULTS`, :data:`ESTIMATOR_DEFAULTS`),
* :func:`validate_method`, which fills those defaults and checks each option, and
* :func:`check_combination`, which rejects (ansatz, taper, mapping) combinations the optimize
  stage cannot run (table in its docstring).

The fermion-to-qubit mapping is not an ansatz option: it is the sweep axis
``methods.mapping`` and reaches :func:`eigensweep.vqe.run_optimize` as its ``mapping``
argument.
"""

from __future__ import annotations

import math
from typing import Any

import numpy as np

from ..errors import ConfigError

__all__ = [
    "ANSATZ_DEFAULTS",
    "ESTIMATOR_DEFAULTS",
    "FERMIONIC",
    "GRADIENT_METHODS",
    "MAPPINGS",
    "OPTIMIZER_DEFAULTS",
    "POOLS",
    "ROTATION_SETS",
    "check_combination",
    "check_mapping",
    "validate_estimator",
    "validate_method",
    "validate_options",
]

MAPPINGS = ("jordan_wigner", "bravyi_kitaev", "parity")
"""Fermion-to-qubit mappings (values of ``methods.mapping``)."""

POOLS = ("fermionic_sd", "fermionic_gsd", "qubit")
"""ADAPT-VQE operator pools (:mod:`eigensweep.vqe.adapt`)."""

ROTATION_SETS = ("ry_rz", "ry")
"""Rotation layers of the hardware-efficient ansatz (:mod:`eigensweep.vqe.hardware_efficient`)."""

FERMIONIC = ("uccsd", "kupccgsd", "adapt")
"""Ansätze built from fermionic excitations (``adapt`` unless its pool is ``qubit``)."""

ANSATZ_DEFAULTS: dict[str, dict[str, Any]] = {
    "uccsd": {"restarts": 0, "restart_scale": 0.1, "spin_adapted": False},
    "kupccgsd": {
        "restarts": 0,
        "restart_scale": 0.1,
        "k": 1,
        "spin_adapted": False,
        "init_scale": 0.0,
    },
    "hardware_efficient": {
        "restarts": 0,
        "restart_scale": 0.1,
        "layers": 2,
        "rotations": "ry_rz",
        "init_scale": 0.1,
    },
    "adapt": {
        "restarts": 0,
        "restart_scale": 0.1,
        "pool": "fermionic_sd",
        "gradient_tolerance": 1e-3,
        "max_operators": 50,
    },
}

OPTIMIZER_DEFAULTS: dict[str, dict[str, Any]] = {
    "lbfgs": {
        "restarts": 0,
        "restart_scale": 0.1,
        "maxiter": 1000,
        "tol": 1e-8,
        "ftol": 1e-14,
        "maxcor": 20,
    },
    "bfgs": {"restarts": 0, "restart_scale": 0.1, "maxiter": 1000, "tol": 1e-6},
    "cobyla": {"restarts": 0, "restart_scale": 0.1, "maxiter": 2000, "tol": 1e-6, "rhobeg": 0.1},
    "nelder_mead": {
        "restarts": 0,
        "restart_scale": 0.1,
        "maxiter": 5000,
        "tol": 1e-8,
        "initial_step": 0.1,
    },
    "spsa": {
        "restarts": 0,
        "restart_scale": 0.1,
        "maxiter": 300,
        "a": None,
        "c": 0.1,
        "alpha": 0.602,
        "gamma": 0.101,
        "A": None,
        "target_step": 0.1,
        "calibration_samples": 10,
        "average_last": 1,
    },
    "rbf_surrogate": {
        "restarts": 0,
        "restart_scale": 0.1,
        "maxiter": 200,
        "tol": 1e-4,
        "radius": 0.5,
        "n_initial": None,
        "n_candidates": None,
        "weights": [0.3, 0.5, 0.8, 0.95],
        "sigma": 0.2,
        "smoothing": 0.0,
        "success_tolerance": 3,
        "fail_tolerance": None,
    },
}

GRADIENT_METHODS = ("lbfgs", "bfgs")
"""Optimizers that need exact (adjoint) gradients, hence the ``exact`` estimator."""

ESTIMATOR_DEFAULTS: dict[str, dict[str, Any]] = {
    "exact": {},
    "shots": {"shots": 1000, "seed": None, "final_shots": None},
    "noisy": {
        "shots": 1000,
        "seed": None,
        "final_shots": None,
        "readout_error": 0.0,
        "p01": None,
        "p10": None,
        "depolarizing": 0.0,
    },
}

# (kind, lower bound, lower-inclusive, allow None)
_RANGES: dict[str, tuple[str, float, bool, bool]] = {
    "restarts": ("int", 0, True, False),
    "restart_scale": ("float", 0.0, False, False),
    "maxiter": ("int", 1, True, False),
    "tol": ("float", 0.0, True, False),
    "ftol": ("float", 0.0, True, False),
    "maxcor": ("int", 1, True, False),
    "rhobeg": ("float", 0.0, False, False),
    "initial_step": ("float", 0.0, False, False),
    "a": ("float", 0.0, False, True),
    "c": ("float", 0.0, False, False),
    "alpha": ("float", 0.0, False, False),
    "gamma": ("float", 0.0, False, False),
    "A": ("float", 0.0, True, True),
    "target_step": ("float", 0.0, False, False),
    "calibration_samples": ("int", 1, True, False),
    "average_last": ("int", 1, True, False),
    "radius": ("float", 0.0, False, False),
    "n_initial": ("int", 2, True, True),
    "n_candidates": ("int", 1, True, True),
    "sigma": ("float", 0.0, False, False),
    "smoothing": ("float", 0.0, True, False),
    "success_tolerance": ("int", 1, True, False),
    "fail_tolerance": ("int", 1, True, True),
}


# ---------------------------------------------------------------------------- value checks
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


def check_mapping(mapping: Any, key: str = "mapping") -> str:
    """Return ``mapping`` if it is one of :data:`MAPPINGS`, else raise :class:`ConfigError`."""
    if mapping not in MAPPINGS:
        raise ConfigError(f"{key}: unknown value {mapping!r}; allowed: {', '.join(MAPPINGS)}")
    return str(mapping)


# ---------------------------------------------------------------------------- ansatz
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
        if key == "mapping":
            raise ConfigError(
                "ansatz.mapping: not an ansatz option; the mapping is chosen by "
                f"methods.mapping (allowed: {', '.join(MAPPINGS)}); remove it from the ansatz"
            )
        if key not in defaults:
            allowed = ", ".join(["name", *defaults])
            raise ConfigError(f"ansatz.{key}: unknown option for {name!r}; allowed: {allowed}")
        out[key] = value
    for key, value in list(out.items()):
        if key == "spin_adapted":
            out[key] = _check_bool("ansatz", key, value)
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


# ---------------------------------------------------------------------------- optimizer
def validate_options(method: str, options: dict[str, Any] | None) -> dict[str, Any]:
    """Return ``options`` with the defaults of optimizer ``method`` filled in.

    Raises :class:`ConfigError` naming the offending key for an unknown method, an unknown
    option or an out-of-range value.
    """
    if method not in OPTIMIZER_DEFAULTS:
        raise ConfigError(
            f"optimizer.name: unknown optimizer {method!r}; allowed: "
            f"{', '.join(OPTIMIZER_DEFAULTS)}"
        )
    defaults = OPTIMIZER_DEFAULTS[method]
    out = dict(defaults)
    for key, value in (options or {}).items():
        if key not in defaults:
            raise ConfigError(
                f"optimizer.{key}: unknown option for {method!r}; allowed: {', '.join(defaults)}"
            )
        out[key] = value
    for key, value in out.items():
        if key == "weights":
            ok = (
                isinstance(value, list | tuple)
                and len(value) > 0
                and all(isinstance(w, int | float) and 0.0 <= w <= 1.0 for w in value)
            )
            if not ok:
                raise ConfigError(
                    "optimizer.weights: must be a non-empty list of numbers in [0, 1]"
                )
            out[key] = [float(w) for w in value]
            continue
        kind, low, inclusive, allow_none = _RANGES[key]
        if value is None:
            if allow_none:
                continue
            raise ConfigError(f"optimizer.{key}: must be a number, got null")
        if isinstance(value, bool) or not isinstance(value, int | float | np.integer | np.floating):
            raise ConfigError(f"optimizer.{key}: must be a number, got {value!r}")
        if kind == "int" and float(value) != int(value):
            raise ConfigError(f"optimizer.{key}: must be an integer, got {value!r}")
        bad = value < low if inclusive else value <= low
        if bad or not math.isfinite(float(value)):
            rel = ">=" if inclusive else ">"
            raise ConfigError(f"optimizer.{key}: must be {rel} {low}, got {value!r}")
        out[key] = int(value) if kind == "int" else float(value)
    return out


# ---------------------------------------------------------------------------- estimator
def validate_estimator(cfg: dict[str, Any]) -> dict[str, Any]:
    """Return the estimator config (with ``name``) with defaults filled; ConfigError if bad."""
    name = cfg.get("name")
    if name not in ESTIMATOR_DEFAULTS:
        raise ConfigError(
            f"estimator.name: unknown estimator {name!r}; allowed: {', '.join(ESTIMATOR_DEFAULTS)}"
        )
    defaults = ESTIMATOR_DEFAULTS[name]
    out: dict[str, Any] = {"name": name, **defaults}
    for key, value in cfg.items():
        if key == "name":
            continue
        if key not in defaults:
            allowed = ", ".join(["name", *defaults])
            raise ConfigError(f"estimator.{key}: unknown option for {name!r}; allowed: {allowed}")
        out[key] = value
    for key in ("shots", "final_shots"):
        if key in out and out[key] is not None:
            v = out[key]
            if isinstance(v, bool) or not isinstance(v, int | np.integer) or v < 1:
                raise ConfigError(f"estimator.{key}: must be an integer >= 1, got {v!r}")
            out[key] = int(v)
    if "shots" in out and out["shots"] is None:
        raise ConfigError("estimator.shots: must be an integer >= 1, got null")
    if "seed" in out and out["seed"] is not None:
        v = out["seed"]
        if isinstance(v, bool) or not isinstance(v, int | np.integer) or v < 0:
            raise ConfigError(f"estimator.seed: must be an integer >= 0 or null, got {v!r}")
        out["seed"] = int(v)
    for key in ("readout_error", "p01", "p10", "depolarizing"):
        if key in out and out[key] is not None:
            v = out[key]
            if isinstance(v, bool) or not isinstance(v, int | float) or not 0.0 <= v < 0.5:
                raise ConfigError(f"estimator.{key}: must be a probability in [0, 0.5), got {v!r}")
            out[key] = float(v)
    return out


# ---------------------------------------------------------------------------- entry points
def validate_method(kind: str, cfg: dict[str, Any]) -> dict[str, Any]:
    """Return ``cfg`` (a dict with ``name``) with defaults filled for ``kind``.

    ``kind`` is ``"ansatz"``, ``"optimizer"`` or ``"estimator"``. Raises
    :class:`ConfigError` on an unknown name, unknown key or out-of-range value (an ansatz
    ``mapping`` key included: the mapping is the sweep axis ``methods.mapping``).
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


def check_combination(
    ansatz: dict[str, Any],
    taper: bool,
    mapping: str,
    *,
    optimizer: dict[str, Any] | None = None,
    estimator: dict[str, Any] | None = None,
) -> None:
    """Raise :class:`ConfigError` if the optimize stage cannot run this combination.

    ``ansatz`` (and the optional ``optimizer``/``estimator``) are method configs with
    ``name``, validated here with :func:`validate_method`; ``taper`` and ``mapping`` are one
    value of ``methods.taper`` and ``methods.mapping``. What the optimize stage runs:

    =====================================  ==========================  ==========================
    ansatz                                 ``taper: false``            ``taper: true``
    =====================================  ==========================  ==========================
    ``uccsd``, ``kupccgsd``                determinant space, any      tapered statevector, any
                                           mapping (costs in it)       mapping
    ``adapt`` (``fermionic_sd``/``gsd``)   determinant space, any      tapered statevector, any
                                           mapping                     mapping
    ``adapt`` (``pool: qubit``)            JW statevector,             not supported
                                           ``jordan_wigner`` only
    ``hardware_efficient``                 statevector of the mapped   statevector of the
                                           Hamiltonian, any mapping    tapered Hamiltonian
    =====================================  ==========================  ==========================

    Tapered fermionic ansätze are Pauli-rotation circuits on the tapered qubits (Bravyi,
    Gambetta, Mezzacapo, Temme, arXiv:1701.08213); symmetry-forbidden excitations are dropped
    (:mod:`eigensweep.vqe.tapered`). qubit-ADAPT's pool is made of Jordan-Wigner strings
    (Tang et al., PRX Quantum 2, 020310 (2021)) simulated on the untapered JW statevector, so
    it is only defined for that encoding.

    Independent of taper and mapping (checked when ``optimizer``/``estimator`` are given):
    the gradient optimizers ``lbfgs``/``bfgs`` and the ``adapt`` ansatz need the ``exact``
    estimator.
    """
    a_cfg = validate_method("ansatz", ansatz)
    if not isinstance(taper, bool | np.bool_):
        raise ConfigError(f"methods.taper: must be true or false, got {taper!r}")
    check_mapping(mapping, "methods.mapping")
    if a_cfg["name"] == "adapt" and a_cfg["pool"] == "qubit" and (taper or mapping != MAPPINGS[0]):
        raise ConfigError(
            "ansatz.pool: 'qubit' (qubit-ADAPT) runs on the Jordan-Wigner statevector and allows "
            f"only methods.mapping jordan_wigner with methods.taper false, got {mapping!r}, taper "
            f"{str(bool(taper)).lower()}; use pool fermionic_sd or fermionic_gsd"
        )
    e_name = None if estimator is None else validate_method("estimator", estimator)["name"]
    if optimizer is not None:
        o_name = validate_method("optimizer", optimizer)["name"]
        if e_name not in (None, "exact") and o_name in GRADIENT_METHODS:
            raise ConfigError(
                f"optimizer.name: {o_name!r} needs exact gradients; with estimator {e_name!r} "
                "use one of spsa, rbf_surrogate, cobyla, nelder_mead"
            )
    if e_name not in (None, "exact") and a_cfg["name"] == "adapt":
        raise ConfigError("estimator.name: the adapt ansatz needs the exact estimator")
