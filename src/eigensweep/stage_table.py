"""The one stage table: every stage's name, format version, action, parent roles and outputs.

The planner (keys), the store (versions, key check on read), the command line (stage choices),
the Snakemake helpers and the path helpers all derive from :data:`STAGES`; nothing else lists
the stages. This module is light (standard library and NumPy only) so that every other module
can import it without cycles or start-up cost.

Cache keys are the first 16 hex digits of SHA-256 over the canonical JSON of
``{stage, stage version, fully resolved parameters, parent keys}`` (a Merkle chain, as in
content-addressed build systems): :func:`stage_key`.

Adding a stage: add one :class:`StageSpec` row here (its action is a function of that name in
``eigensweep.stages``), create its nodes in :func:`eigensweep.plan.build_plan`, and add its rule.
"""

from __future__ import annotations

import hashlib
import json
from collections.abc import Mapping
from dataclasses import dataclass
from pathlib import Path
from types import MappingProxyType
from typing import Any

import numpy as np

#: Pseudo-stage of parent roles that point at returned device counts (not a stage file).
RETURNED = "returned"


@dataclass(frozen=True)
class StageSpec:
    """One row of the stage table.

    Attributes:
        name: stage name; stage files are ``results/<name>/<key>.h5``.
        version: stage format version; bump it when what the stage stores (or how it computes
            it) changes meaning: every key of this stage and of its descendants changes.
        action: name of the function in ``eigensweep.stages`` that runs one job of this stage,
            ``action(node, inputs, output, progress=None)``.
        parents: parent role -> the stage whose file fills it (:data:`RETURNED` for imported
            device counts ``results/returned/<key>.json``). Optional roles (``guess``, ``warm``,
            ``ground``, ``counts``) appear only in the nodes that need them.
        outputs: what one job writes besides its stage file: ``"jobs"`` is the device-job folder
            ``results/<name>/<key>/``.
        description: one line for help texts.
    """

    name: str
    version: int
    action: str
    parents: Mapping[str, str]
    outputs: tuple[str, ...]
    description: str


def _spec(name, version, action, parents, outputs, description) -> StageSpec:
    return StageSpec(name, version, action, MappingProxyType(parents), outputs, description)


#: The stages in dependency order.
STAGES: tuple[StageSpec, ...] = (
    _spec(
        "integrals",
        4,
        "run_integrals",
        {"guess": "integrals"},
        ("stage",),
        "SCF, active-space integrals and the classical reference ladder of one geometry point",
    ),
    _spec(
        "hamiltonian",
        2,
        "run_hamiltonian",
        {"integrals": "integrals"},
        ("stage",),
        "fermion-to-qubit mapping, number, S_z and S^2 operators, measurement costs",
    ),
    _spec(
        "taper",
        3,
        "run_taper",
        {"hamiltonian": "hamiltonian", "integrals": "integrals"},
        ("stage",),
        "Z2 tapering (or the identity stage recording 'no tapering')",
    ),
    _spec(
        "optimize",
        6,
        "run_optimize",
        {"taper": "taper", "integrals": "integrals", "warm": "optimize", "ground": "optimize"},
        ("stage",),
        "variational optimization of one ansatz x optimizer x estimator",
    ),
    _spec(
        "export",
        7,
        "run_export",
        {"optimize": "optimize", "taper": "taper", "integrals": "integrals"},
        ("stage", "jobs"),
        "device jobs (OpenQASM 3/2, manifest, job summary) for one optimized point",
    ),
    _spec(
        "reconcile",
        5,
        "run_reconcile",
        {"export": "export", "taper": "taper", "integrals": "integrals", "counts": RETURNED},
        ("stage",),
        "returned counts -> energies with bootstrap intervals and mitigation",
    ),
)

STAGE_NAMES: tuple[str, ...] = tuple(s.name for s in STAGES)
STAGE_BY_NAME: Mapping[str, StageSpec] = MappingProxyType({s.name: s for s in STAGES})
#: Stage format versions, derived from the table (part of every key).
STAGE_VERSIONS: Mapping[str, int] = MappingProxyType({s.name: s.version for s in STAGES})


def spec(stage: str) -> StageSpec:
    """The table row of ``stage``; ``KeyError`` naming the known stages otherwise."""
    try:
        return STAGE_BY_NAME[stage]
    except KeyError:
        raise KeyError(f"unknown stage {stage!r}; known: {', '.join(STAGE_NAMES)}") from None


# ----------------------------------------------------------------------------- keys


def canonical_json(obj: Any) -> str:
    """Deterministic JSON: sorted keys, no spaces, numpy scalars converted, floats as repr."""
    return json.dumps(obj, sort_keys=True, separators=(",", ":"), default=_json_default)


def _json_default(o: Any) -> Any:
    if isinstance(o, np.integer):
        return int(o)
    if isinstance(o, np.floating):
        return float(o)
    if isinstance(o, np.ndarray):
        return o.tolist()
    raise TypeError(f"cannot serialise {type(o).__name__}")


def stage_key(stage: str, params: dict, parents: Mapping[str, str]) -> str:
    """First 16 hex digits of SHA-256 over the canonical JSON of the stage's identity."""
    blob = canonical_json(
        {"stage": stage, "version": STAGE_VERSIONS[stage], "params": params, "parents": parents}
    )
    return hashlib.sha256(blob.encode()).hexdigest()[:16]


# ----------------------------------------------------------------------------- paths


def stage_path(stage: str, key: str, results: str | Path = "results") -> Path:
    """Stage file of one job: ``results/<stage>/<key>.h5``."""
    return Path(results) / spec(stage).name / f"{key}.h5"


def job_folder(key: str, results: str | Path = "results") -> Path:
    """Device-job folder written by an export job: ``results/export/<key>/``."""
    return Path(results) / "export" / key


def returned_path(key: str, results: str | Path = "results") -> Path:
    """Imported device counts of export job ``key``: ``results/returned/<key>.json``."""
    return Path(results) / RETURNED / f"{key}.json"


def parent_paths(
    stage: str, parents: Mapping[str, str], results: str | Path = "results"
) -> dict[str, str]:
    """Input files of a job by role, from the table's parent roles.

    Raises:
        KeyError: a role the stage table does not list for ``stage``.
    """
    roles = spec(stage).parents
    out = {}
    for role, key in parents.items():
        if role not in roles:
            raise KeyError(f"stage {stage} has no parent role {role!r}; known: {sorted(roles)}")
        source = roles[role]
        path = (
            returned_path(key, results) if source == RETURNED else stage_path(source, key, results)
        )
        out[role] = str(path)
    return out
