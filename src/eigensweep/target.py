"""Device targets: qubits, coupling graph, native gates, error rates, durations, T1/T2, readout.

A target file is our own YAML format (documented in ``config/README.md``, "Device targets"),
validated against the JSON schema shipped in the package
(``eigensweep/schemas/target.schema.yaml``); :func:`load_target` adds the checks a schema
cannot express and returns a frozen :class:`Target`. Bad input is one line naming the file
and the key (:class:`~eigensweep.errors.ConfigError`). It lives outside ``eigensweep.device`` because the
planner reads targets while Snakemake parses the workflow, and that package imports the
simulators.

The built-in default, :data:`GENERIC_TARGET` (``generic``), is the device the exports assumed
before targets existed: all-to-all coupling, the gate set of :mod:`eigensweep.circuit`, the
synthetic device's former default depolarizing and readout numbers, and no durations (so no
idle decay). The example targets in ``config/targets/`` carry invented numbers.

This module is light (standard library, NumPy, PyYAML, jsonschema): the planner imports it
while Snakemake parses the workflow.
"""

from __future__ import annotations

import hashlib
from collections import deque
from collections.abc import Mapping
from dataclasses import dataclass, field
from functools import cached_property, lru_cache
from pathlib import Path
from typing import Any

import numpy as np

from eigensweep.errors import ConfigError

__all__ = [
    "GENERIC",
    "GENERIC_TARGET",
    "GateSpec",
    "Target",
    "load_target",
    "resolve_target",
    "target_from_dict",
    "target_schema_path",
]

#: Name of the built-in all-to-all target (``export.targets: [generic]``).
GENERIC = "generic"
#: Largest target file accepted (a 1000-qubit device with every list is far below it).
MAX_TARGET_BYTES = 2_000_000

ONE_QUBIT_BASES = ("sx", "ry", "rx")  # with rz: a universal one-qubit set
ENTANGLERS = ("cx", "cz", "rxx")
PER_QUBIT_KEYS = ("t1_us", "t2_us", "readout_p01", "readout_p10")


def target_schema_path() -> Path:
    """The target JSON schema inside the installed package."""
    return Path(__file__).resolve().parent / "schemas" / "target.schema.yaml"


@lru_cache(maxsize=1)
def _validator() -> Any:
    import yaml

    from eigensweep.config import _Validator

    with open(target_schema_path(), encoding="utf-8") as fh:
        return _Validator(yaml.safe_load(fh))


@dataclass(frozen=True)
class GateSpec:
    """Error probability and duration of one native gate."""

    error: float
    duration_ns: float


@dataclass(frozen=True)
class Target:
    """One device target (see the module docstring); build it with :func:`load_target`.

    Attributes:
        name: target name (``[A-Za-z0-9_-]``).
        n_qubits: physical qubits ``0 .. n_qubits-1``.
        coupling: sorted undirected pairs ``(a, b)`` with ``a < b``; ``None`` = all-to-all.
        native_gates: the native gate names, in file order.
        gates: native gate name -> :class:`GateSpec`.
        t1_us, t2_us, readout_p01, readout_p10: one value per physical qubit.
        description, source, date: provenance text.
        path: the file it was read from (``None`` for the built-in target).
    """

    name: str
    n_qubits: int
    coupling: tuple[tuple[int, int], ...] | None
    native_gates: tuple[str, ...]
    gates: Mapping[str, GateSpec]
    t1_us: tuple[float, ...]
    t2_us: tuple[float, ...]
    readout_p01: tuple[float, ...]
    readout_p10: tuple[float, ...]
    description: str = ""
    source: str = ""
    date: str = ""
    path: str | None = field(default=None, compare=False)

    # ------------------------------------------------------------------ connectivity
    @property
    def all_to_all(self) -> bool:
        """True when every pair of qubits is coupled."""
        return self.coupling is None

    def edges(self) -> list[tuple[int, int]]:
        """Every coupled pair ``(a, b)``, ``a < b`` (all pairs for an all-to-all target)."""
        if self.coupling is None:
            n = self.n_qubits
            return [(a, b) for a in range(n) for b in range(a + 1, n)]
        return list(self.coupling)

    @cached_property
    def _neighbours(self) -> tuple[frozenset[int], ...]:
        adj: list[set[int]] = [set() for _ in range(self.n_qubits)]
        for a, b in self.edges():
            adj[a].add(b)
            adj[b].add(a)
        return tuple(frozenset(s) for s in adj)

    def neighbours(self, qubit: int) -> frozenset[int]:
        """Physical qubits coupled to ``qubit``."""
        return self._neighbours[qubit]

    def coupled(self, a: int, b: int) -> bool:
        """Whether a two-qubit gate may act on physical qubits ``a`` and ``b``."""
        return a != b and (self.coupling is None or b in self._neighbours[a])

    @cached_property
    def distances(self) -> np.ndarray:
        """Shortest-path lengths between physical qubits (breadth-first search; -1 = unreachable)."""
        n = self.n_qubits
        dist = np.full((n, n), -1, dtype=np.int64)
        for s in range(n):
            dist[s, s] = 0
            todo = deque([s])
            while todo:
                u = todo.popleft()
                for v in self._neighbours[u]:
                    if dist[s, v] < 0:
                        dist[s, v] = dist[s, u] + 1
                        todo.append(v)
        return dist

    # ------------------------------------------------------------------ gates
    @property
    def entangler(self) -> str:
        """The native two-qubit gate (``cx``, ``cz`` or ``rxx``; ``cx`` for the generic target)."""
        return next(g for g in ENTANGLERS if g in self.native_gates)

    @property
    def one_qubit_basis(self) -> str:
        """``generic`` (any gate of :mod:`eigensweep.circuit`), else ``sx``, ``ry`` or ``rx`` (with ``rz``)."""
        if self.name == GENERIC and self.path is None:
            return GENERIC
        return next(g for g in ONE_QUBIT_BASES if g in self.native_gates)

    def gate_error(self, gate: str) -> float:
        """Error probability of native gate ``gate`` (``KeyError`` naming the natives otherwise)."""
        return self._spec(gate).error

    def gate_duration_ns(self, gate: str) -> float:
        """Duration in ns of native gate ``gate``."""
        return self._spec(gate).duration_ns

    def _spec(self, gate: str) -> GateSpec:
        try:
            return self.gates[gate]
        except KeyError:
            raise KeyError(
                f"gate {gate!r} is not native on target {self.name}; natives: "
                + ", ".join(self.native_gates)
            ) from None

    # ------------------------------------------------------------------ per-qubit arrays
    def per_qubit(self, key: str) -> np.ndarray:
        """One of ``t1_us``, ``t2_us``, ``readout_p01``, ``readout_p10`` as a float array."""
        if key not in PER_QUBIT_KEYS:
            raise KeyError(f"unknown per-qubit key {key!r}; known: {', '.join(PER_QUBIT_KEYS)}")
        return np.asarray(getattr(self, key), dtype=float)

    # ------------------------------------------------------------------ identity
    def to_dict(self) -> dict:
        """Canonical plain-data form (lists expanded, numbers as floats), as stored in manifests."""
        return {
            "name": self.name,
            "description": self.description,
            "source": self.source,
            "date": self.date,
            "n_qubits": self.n_qubits,
            "coupling": "all" if self.coupling is None else [list(e) for e in self.coupling],
            "native_gates": list(self.native_gates),
            "gates": {
                g: {"error": s.error, "duration_ns": s.duration_ns}
                for g, s in sorted(self.gates.items())
            },
            "qubits": {k: list(getattr(self, k)) for k in PER_QUBIT_KEYS},
        }

    @cached_property
    def sha256(self) -> str:
        """SHA-256 of the canonical JSON of :meth:`to_dict` (formatting and comments do not count)."""
        from eigensweep.stage_table import canonical_json

        return hashlib.sha256(canonical_json(self.to_dict()).encode()).hexdigest()


def _fail(source: str, key: str, problem: str) -> ConfigError:
    return ConfigError(f"{source}: {key}: {problem}")


def _per_qubit_values(value: Any, n: int, source: str, key: str) -> tuple[float, ...]:
    if isinstance(value, list):
        if len(value) != n:
            raise _fail(source, key, f"has {len(value)} values for {n} qubits; give one per qubit")
        return tuple(float(v) for v in value)
    return (float(value),) * n


def _coupling(raw: Any, n: int, source: str) -> tuple[tuple[int, int], ...] | None:
    if raw == "all":
        return None
    pairs: set[tuple[int, int]] = set()
    for i, (a, b) in enumerate(raw):
        if a == b or max(a, b) >= n:
            raise _fail(
                source,
                f"coupling[{i}]",
                f"[{a}, {b}] is not a pair of distinct qubits in 0..{n - 1}; fix the pair",
            )
        pairs.add((min(a, b), max(a, b)))
    if not pairs and n > 1:
        raise _fail(source, "coupling", 'no pairs; list coupled pairs or write "all"')
    return tuple(sorted(pairs))


def _natives(raw: list[str], gates: Mapping, source: str) -> tuple[str, ...]:
    natives = tuple(raw)
    if "rz" not in natives or not any(g in natives for g in ONE_QUBIT_BASES):
        raise _fail(
            source, "native_gates", "needs rz and one of sx, ry, rx (a universal one-qubit set)"
        )
    two = [g for g in ENTANGLERS if g in natives]
    if len(two) != 1:
        raise _fail(source, "native_gates", "needs exactly one entangler of cx, cz, rxx")
    missing = [g for g in natives if g not in gates]
    extra = [g for g in gates if g not in natives]
    if missing:
        raise _fail(
            source,
            f"gates.{missing[0]}",
            "missing; give error and duration_ns of every native gate",
        )
    if extra:
        raise _fail(
            source, f"gates.{extra[0]}", "is not in native_gates; remove it or add it there"
        )
    return natives


def target_from_dict(data: Any, source: str, path: str | None = None) -> Target:
    """A :class:`Target` from parsed YAML data (schema, then the cross-field checks).

    Raises:
        ConfigError: one line ``<source>: <key>: <problem>; <what to do>``.
    """
    from eigensweep.config import _describe

    errors = list(_validator().iter_errors(data))
    if errors:
        import jsonschema

        best = jsonschema.exceptions.best_match(errors)
        raise ConfigError(f"{source}: {_describe(best, '')}")
    if data["name"] == GENERIC:
        raise _fail(source, "name", f"{GENERIC!r} is the built-in target's name; choose another")
    n = int(data["n_qubits"])
    coupling = _coupling(data["coupling"], n, source)
    natives = _natives(data["native_gates"], data["gates"], source)
    q = data["qubits"]
    values = {k: _per_qubit_values(q[k], n, source, f"qubits.{k}") for k in PER_QUBIT_KEYS}
    for i, (t1, t2) in enumerate(zip(values["t1_us"], values["t2_us"], strict=True)):
        if t2 > 2 * t1 * (1 + 1e-12):
            raise _fail(
                source,
                "qubits.t2_us",
                f"qubit {i}: T2 = {t2} us exceeds 2 T1 = {2 * t1} us; check the numbers",
            )
    gates = {
        g: GateSpec(float(s["error"]), float(s["duration_ns"])) for g, s in data["gates"].items()
    }
    return Target(
        name=data["name"],
        n_qubits=n,
        coupling=coupling,
        native_gates=natives,
        gates=gates,
        **values,
        description=data.get("description", ""),
        source=data["source"],
        date=data["date"],
        path=path,
    )


def load_target(path: str | Path) -> Target:
    """Read and check one target YAML file (see the module docstring).

    Raises:
        ConfigError: one line naming the file and the key at fault.

    Example:
        >>> t = load_target("config/targets/chain12-demo.yaml")  # doctest: +SKIP
        >>> t.n_qubits, t.entangler, t.coupled(0, 1), t.coupled(0, 2)
        (12, 'cx', True, False)
    """
    from eigensweep.config import parse_yaml
    from eigensweep.inputs import read_user_text

    source = str(path)
    text = read_user_text(path, limit=MAX_TARGET_BYTES, what="target file")
    return target_from_dict(parse_yaml(text, source), source, path=source)


def _generic(n_qubits: int) -> Target:
    from eigensweep.circuit import KNOWN_GATES

    natives = tuple(sorted(KNOWN_GATES))
    gates = {g: GateSpec(0.01 if g == "cx" else 0.001, 0.0) for g in natives}
    return Target(
        name=GENERIC,
        n_qubits=n_qubits,
        coupling=None,
        native_gates=natives,
        gates=gates,
        t1_us=(1.0e6,) * n_qubits,
        t2_us=(1.0e6,) * n_qubits,
        readout_p01=(0.02,) * n_qubits,
        readout_p10=(0.04,) * n_qubits,
        description="all-to-all, every gate of eigensweep.circuit, no durations (no idle decay)",
        source="built-in default of eigensweep (the synthetic device's former default numbers)",
        date="2026-12-04",
    )


#: The built-in generic target (sized for any circuit: :func:`generic_target` gives n qubits).
GENERIC_TARGET = _generic(1)


def generic_target(n_qubits: int) -> Target:
    """The built-in all-to-all target with ``n_qubits`` qubits."""
    return _generic(int(n_qubits))


def resolve_target(entry: str, base_dir: str | Path = ".") -> Target | None:
    """``None`` for ``generic`` (sized to the circuit later), else the loaded target file.

    Relative paths are resolved against ``base_dir`` (the folder the sweep runs from).
    """
    if entry == GENERIC:
        return None
    path = Path(entry)
    if not path.is_absolute():
        path = Path(base_dir) / path
    return load_target(path)
