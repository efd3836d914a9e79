"""Method names, defaults and entry checks of the variational engine, read from the schema.

The config schema (:mod:`eigensweep.config`) is the one specification of every ansatz,
optimizer and estimator option; this light module (no SciPy, PySCF or OpenFermion) gives the
engine its views of it:

* :data:`ANSATZ_DEFAULTS`, :data:`OPTIMIZER_DEFAULTS`, :data:`ESTIMATOR_DEFAULTS`: name ->
  options with defaults (``name`` not included), :data:`MAPPINGS`, :data:`POOLS`,
  :data:`ROTATION_AXES`, all read from the schema;
* :func:`validate_method` / :func:`validate_options` / :func:`validate_estimator`: fill the
  defaults of one entry and check it against the schema;
* :func:`check_combination`: the (ansatz, taper, mapping, optimizer, estimator) rules.

The fermion-to-qubit mapping is not an ansatz option: it is the sweep axis
``methods.mapping`` and reaches :func:`eigensweep.vqe.run_optimize` as its ``mapping``
argument.
"""

from __future__ import annotations

from typing import Any

from ..config import (
    GRADIENT_METHODS,
    check_combination,
    complete_method,
    load_schema,
    method_defaults,
    method_names,
)
from ..errors import ConfigError

__all__ = [
    "ANSATZ_DEFAULTS",
    "ESTIMATOR_DEFAULTS",
    "FERMIONIC",
    "GRADIENT_METHODS",
    "MAPPINGS",
    "OPTIMIZER_DEFAULTS",
    "POOLS",
    "ROTATION_AXES",
    "check_combination",
    "check_mapping",
    "validate_estimator",
    "validate_method",
    "validate_options",
]

FERMIONIC = ("uccsd", "kupccgsd", "adapt")
"""Ansätze built from fermionic excitations (``adapt`` unless its pool is ``qubit``)."""


def _table(kind: str) -> dict[str, dict[str, Any]]:
    return {
        name: {k: v for k, v in method_defaults(kind, name).items() if k != "name"}
        for name in method_names(kind)
    }


def _enum(kind: str, name: str, option: str) -> tuple[str, ...]:
    return tuple(load_schema()["$defs"][f"{kind}_options"][name]["properties"][option]["enum"])


#: name -> options with their defaults (``name`` not included), read from the schema.
ANSATZ_DEFAULTS: dict[str, dict[str, Any]] = _table("ansatz")
OPTIMIZER_DEFAULTS: dict[str, dict[str, Any]] = _table("optimizer")
ESTIMATOR_DEFAULTS: dict[str, dict[str, Any]] = _table("estimator")

MAPPINGS: tuple[str, ...] = tuple(
    load_schema()["properties"]["methods"]["properties"]["mapping"]["items"]["enum"]
)
"""Fermion-to-qubit mappings (values of ``methods.mapping``)."""

POOLS: tuple[str, ...] = _enum("ansatz", "adapt", "pool")
"""ADAPT-VQE operator pools (:mod:`eigensweep.vqe.adapt`)."""

ROTATION_AXES: tuple[str, ...] = _enum("ansatz", "hardware_efficient", "axes")
"""Rotation axes of the hardware-efficient ansatz (:mod:`eigensweep.vqe.hardware_efficient`)."""


def validate_method(kind: str, cfg: dict[str, Any]) -> dict[str, Any]:
    """Return ``cfg`` (a dict with ``name``) with defaults filled for ``kind``.

    ``kind`` is ``"ansatz"``, ``"optimizer"`` or ``"estimator"``; raises
    :class:`~eigensweep.errors.ConfigError` on an unknown name, unknown key or out-of-range
    value (see :func:`eigensweep.config.complete_method`).
    """
    return complete_method(kind, cfg)


def validate_options(method: str, options: dict[str, Any] | None) -> dict[str, Any]:
    """Options of optimizer ``method`` with defaults filled (``name`` not included)."""
    out = complete_method("optimizer", {**(options or {}), "name": method})
    out.pop("name")
    return out


def validate_estimator(cfg: dict[str, Any]) -> dict[str, Any]:
    """The estimator entry (with ``name``) with defaults filled."""
    return complete_method("estimator", cfg)


def check_mapping(mapping: Any, key: str = "mapping") -> str:
    """Return ``mapping`` if it is one of :data:`MAPPINGS`, else raise ConfigError."""
    if mapping not in MAPPINGS:
        raise ConfigError(f"{key}: unknown value {mapping!r}; allowed: {', '.join(MAPPINGS)}")
    return str(mapping)
