"""Loading and validating sweep configurations.

The JSON schema shipped in the package (``eigensweep/schemas/config.schema.yaml``) is the one
specification of the config: every key and every ansatz, optimizer and estimator option with
its type, bounds, default and description. This module

* reads YAML as plain data (:func:`load_config`): a safe loader, a size cap, no duplicate
  keys, no templating markers, a cap on the size after YAML aliases are expanded;
* validates against the schema (integers must be integers, numbers finite) and fills every
  default (:func:`validate_config`, :func:`complete_method`), numbers written as integers
  becoming floats so that ``0.1`` and ``1`` vs ``1.0`` never give different cache keys;
* keeps in Python only the rules a schema cannot express: unique molecule names and the
  (ansatz, taper, mapping, optimizer, estimator) combinations the optimize stage runs
  (:func:`check_combination`).

Every problem is a one-line :class:`~eigensweep.errors.ConfigError` naming the key path and
what is allowed; values quoted in messages are shortened.
"""

from __future__ import annotations

import copy
import math
import numbers
from collections.abc import Sequence
from functools import lru_cache
from pathlib import Path
from typing import Any

import jsonschema
import yaml

from .errors import ConfigError
from .inputs import MAX_CONFIG_BYTES, read_user_text
from .paths import STORE_KEY

__all__ = [
    "DEFAULT_CONFIG",
    "GRADIENT_METHODS",
    "MAX_CONFIG_VALUES",
    "METHOD_KINDS",
    "SWEEP_KEY",
    "check_combination",
    "complete_method",
    "load_config",
    "load_schema",
    "method_defaults",
    "method_names",
    "parse_yaml",
    "schema_path",
    "validate_config",
    "workflow_config",
]

#: The default sweep, relative to the folder a run starts in.
DEFAULT_CONFIG = "config/config.yaml"

#: Snakemake config key naming the sweep file: ``snakemake --config sweep=FILE``.
SWEEP_KEY = "sweep"

#: Largest number of values (mapping keys, list items, scalars; long strings count more) a
#: config may hold once YAML aliases are expanded: a 100,000-point scan is 10^5 values, a
#: "billion laughs" alias bomb is refused after reading this many.
MAX_CONFIG_VALUES = 1_000_000

METHOD_KINDS = ("ansatz", "optimizer", "estimator", "states")

#: Optimizers that need exact (adjoint) gradients, hence the ``exact`` estimator.
GRADIENT_METHODS = ("lbfgs", "bfgs")

_MAX_SHOWN = 60  # longest value quoted in a message


def schema_path() -> Path:
    """The config schema file inside the installed package."""
    return Path(__file__).resolve().parent / "schemas" / "config.schema.yaml"


# ---------------------------------------------------------------------------- YAML as data
_Loader = getattr(yaml, "CSafeLoader", yaml.SafeLoader)


class _PlainLoader(_Loader):  # type: ignore[misc, valid-type]
    """Safe loader that refuses duplicate mapping keys (a silent overwrite is a typo)."""


def _construct_mapping(loader: _PlainLoader, node: yaml.MappingNode) -> dict:
    loader.flatten_mapping(node)
    out: dict = {}
    for key_node, value_node in node.value:
        key = loader.construct_object(key_node, deep=True)
        try:
            duplicate = key in out
        except TypeError:
            raise yaml.constructor.ConstructorError(
                None, None, "a mapping key is not text", key_node.start_mark
            ) from None
        if duplicate:
            raise yaml.constructor.ConstructorError(
                None, None, f"key {_short(key)} appears twice", key_node.start_mark
            )
        out[key] = loader.construct_object(value_node, deep=True)
    return out


_PlainLoader.add_constructor(yaml.resolver.BaseResolver.DEFAULT_MAPPING_TAG, _construct_mapping)


def _short(value: Any) -> str:
    """``repr(value)`` cut to about 60 characters, for messages."""
    text = repr(value)
    return text if len(text) <= _MAX_SHOWN else text[: _MAX_SHOWN - 3] + "..."


def _check_plain_data(doc: Any, source: str) -> None:
    """Refuse templating markers, non-text keys and documents that expand beyond the cap."""
    if isinstance(doc, dict) and "__use_yte__" in doc:
        raise ConfigError(
            f"{source}: __use_yte__: templating is not supported (a config is plain data and "
            "nothing in it is evaluated); remove the key and write the values out"
        )
    seen = 0
    stack = [doc]
    while stack:
        item = stack.pop()
        seen += 1
        if isinstance(item, str):
            seen += len(item) // 256
            if item.startswith("?"):
                raise ConfigError(
                    f"{source}: {_short(item)} looks like a template expression; a config is "
                    "plain data and nothing in it is evaluated; write the value out"
                )
        elif isinstance(item, dict):
            for key in item:
                if not isinstance(key, str):
                    raise ConfigError(f"{source}: mapping key {_short(key)} is not text; quote it")
            stack.extend(item)
            stack.extend(item.values())
        elif isinstance(item, list):
            stack.extend(item)
        if seen > MAX_CONFIG_VALUES:
            raise ConfigError(
                f"{source}: the config expands to more than {MAX_CONFIG_VALUES} values (nested "
                "YAML aliases?); write a smaller config"
            )


def parse_yaml(text: str, source: str) -> Any:
    """Parse YAML text as plain data (see the module docstring); ConfigError if it is not."""
    try:
        doc = yaml.load(text, Loader=_PlainLoader)  # noqa: S506 - a safe loader subclass
    except yaml.YAMLError as exc:
        mark = getattr(exc, "problem_mark", None)
        where = f" line {mark.line + 1}, column {mark.column + 1}:" if mark else ""
        problem = getattr(exc, "problem", None) or str(exc).splitlines()[0]
        raise ConfigError(
            f"{source}:{where} YAML syntax error: {' '.join(str(problem).split())[:120]}; "
            "fix the file and retry"
        ) from None
    except RecursionError:
        raise ConfigError(
            f"{source}: the YAML is nested too deeply; write a flatter config"
        ) from None
    _check_plain_data(doc, source)
    return doc


# ---------------------------------------------------------------------------- schema
@lru_cache(maxsize=1)
def load_schema() -> dict:
    """The config JSON schema (parsed once per process)."""
    with open(schema_path(), encoding="utf-8") as fh:
        return yaml.load(fh, Loader=_Loader)  # noqa: S506 - a safe loader


def _is_integer(_checker: Any, value: Any) -> bool:
    return isinstance(value, numbers.Integral) and not isinstance(value, bool)


def _is_number(_checker: Any, value: Any) -> bool:
    return (
        isinstance(value, numbers.Real)
        and not isinstance(value, bool)
        and math.isfinite(float(value))
    )


# JSON Schema lets `integer` accept 3.0 and `number` accept NaN and infinity; a config does not.
_Validator = jsonschema.validators.extend(
    jsonschema.Draft202012Validator,
    type_checker=jsonschema.Draft202012Validator.TYPE_CHECKER.redefine_many(
        {"integer": _is_integer, "number": _is_number}
    ),
)


@lru_cache(maxsize=8)
def _validator(ref: str | None = None) -> Any:
    """A validator for the whole schema, or for ``#/$defs/<ref>`` (one method entry)."""
    root = load_schema()
    schema = root if ref is None else {"$ref": f"#/$defs/{ref}", "$defs": root["$defs"]}
    return _Validator(schema)


def _deref(schema: dict) -> dict:
    while "$ref" in schema:
        node: Any = load_schema()
        for part in schema["$ref"].removeprefix("#/").split("/"):
            node = node[part]
        schema = node
    return schema


def _key_path(path: Sequence) -> str:
    out = ""
    for part in path:
        out += f"[{part}]" if isinstance(part, int) else (f".{part}" if out else str(part))
    return out


def _types(schema: dict) -> list[str]:
    t = schema.get("type", [])
    return [t] if isinstance(t, str) else list(t)


def _describe(err: jsonschema.ValidationError, prefix: str) -> str:
    """One line for a schema error: ``<key path>: <problem>; <what is allowed>``."""
    path = _key_path(err.absolute_path)
    where = f"{prefix}.{path}" if prefix and path else (prefix or path or "(top level)")
    v, value, schema = err.validator, err.instance, err.schema
    if v == "additionalProperties":
        allowed = sorted(schema.get("properties", {}))
        extra = sorted(map(str, set(value) - set(allowed))) if isinstance(value, dict) else []
        retired = schema.get("x-retired", {})
        base = "" if where == "(top level)" else f"{where}."
        for key in extra:
            if key in retired:
                return f"{base}{key}: {retired[key]}"
        key = extra[0] if extra else "?"
        return f"{base}{_short(key)[1:-1]}: unknown key; allowed keys: {', '.join(allowed)}"
    if v == "enum":
        renamed = schema.get("x-renamed-values", {})
        if isinstance(value, str) and value in renamed:
            return f"{where}: {value!r} was renamed; write {renamed[value]!r}"
        allowed = ", ".join(map(str, err.validator_value))
        return f"{where}: unknown value {_short(value)}; allowed: {allowed}"
    if v == "type":
        wanted = " or ".join(
            {"integer": "an integer", "number": "a finite number", "null": "null"}.get(t, t)
            for t in _types(schema)
        )
        hint = ""
        if isinstance(value, str) and "number" in _types(schema):
            try:
                float(value)
                hint = " (YAML reads 1e-6 as text: write 1.0e-6)"
            except ValueError:
                pass
        return f"{where}: expected {wanted}, got {type(value).__name__} {_short(value)}{hint}"
    bounds = {
        "minimum": ">=",
        "exclusiveMinimum": ">",
        "maximum": "<=",
        "exclusiveMaximum": "<",
    }
    if v in bounds:
        return f"{where}: must be {bounds[v]} {err.validator_value}, got {_short(value)}"
    if v in ("minItems", "maxItems"):
        word = "at least" if v == "minItems" else "at most"
        return f"{where}: needs {word} {err.validator_value} entries, got {len(value)}"
    if v == "maxLength":
        return f"{where}: longer than {err.validator_value} characters; shorten it"
    if v == "pattern":
        what = schema.get("description", "")
        return f"{where}: {_short(value)} is not allowed" + (
            f"; {what[:1].lower()}{what[1:]}" if what else ""
        )
    if v == "required":
        missing = [k for k in err.validator_value if k not in value]
        return f"{where}: missing key {missing[0]!r}"
    if v == "oneOf":
        return f"{where}: {_short(value)} does not fit; see this key in config/README.md"
    return f"{where}: {' '.join(err.message.split())[: _MAX_SHOWN * 2]}"


def _first_error(validator: Any, instance: Any, prefix: str) -> str | None:
    errors = list(validator.iter_errors(instance))
    if not errors:
        return None
    return _describe(jsonschema.exceptions.best_match(errors), prefix)


def _complete(instance: Any, schema: dict) -> Any:
    """Copy of a valid ``instance`` with every schema default filled and numbers normalised."""
    schema = _deref(schema)
    types = _types(schema)
    if isinstance(instance, dict) and "object" in types:
        props = dict(schema.get("properties", {}))
        for branch in schema.get("allOf", []):
            if "if" in branch and _Validator(branch["if"]).is_valid(instance):
                props.update(_deref(branch["then"]).get("properties", {}))
        out = dict(instance)
        for name, sub in props.items():
            sub = _deref(sub)
            if name not in out and "default" in sub:
                out[name] = copy.deepcopy(sub["default"])
            if name in out:
                out[name] = _complete(out[name], sub)
        return out
    if isinstance(instance, list) and isinstance(schema.get("items"), dict):
        return [_complete(item, schema["items"]) for item in instance]
    if isinstance(instance, numbers.Integral) and not isinstance(instance, bool):
        return float(instance) if "number" in types and "integer" not in types else int(instance)
    if isinstance(instance, numbers.Real) and not isinstance(instance, bool):
        return float(instance)
    return instance


# ---------------------------------------------------------------------------- method entries
def method_names(kind: str) -> tuple[str, ...]:
    """The names allowed for a method kind (``"ansatz"``, ``"optimizer"``, ``"estimator"``)."""
    return tuple(load_schema()["$defs"][f"{kind}_options"])


@lru_cache(maxsize=64)
def _defaults(kind: str, name: str) -> dict[str, Any]:
    return complete_method(kind, {"name": name})


def method_defaults(kind: str, name: str) -> dict[str, Any]:
    """Every option of one method with its default, ``name`` included (a fresh copy)."""
    return {k: copy.copy(v) for k, v in _defaults(kind, name).items()}


def complete_method(kind: str, entry: Any) -> dict[str, Any]:
    """Validate one method entry against its subschema and return it with defaults filled.

    Args:
        kind: ``"ansatz"``, ``"optimizer"`` or ``"estimator"``.
        entry: a mapping with ``name`` and options, e.g. ``{"name": "kupccgsd", "k": 2}``.

    Returns:
        A new dict holding ``name`` and every option of that method.

    Raises:
        ConfigError: one line naming ``<kind>.<option>``, e.g. ``ansatz.k: must be >= 1``.
    """
    if kind not in METHOD_KINDS:
        raise ConfigError(
            f"kind: unknown method kind {_short(kind)}; allowed: {', '.join(METHOD_KINDS)}"
        )
    if not isinstance(entry, dict):
        raise ConfigError(f"{kind}: must be a mapping with a 'name' key, got {_short(entry)}")
    problem = _first_error(_validator(kind), entry, kind)
    if problem:
        raise ConfigError(problem)
    return _complete(entry, {"$ref": f"#/$defs/{kind}"})


# ---------------------------------------------------------------------------- cross-field rules
def check_combination(
    ansatz: dict[str, Any],
    taper: bool,
    mapping: str,
    *,
    optimizer: dict[str, Any] | None = None,
    estimator: dict[str, Any] | None = None,
    states: dict[str, Any] | None = None,
) -> None:
    """Raise :class:`ConfigError` if the optimize stage cannot run this combination.

    ``ansatz`` (and the optional ``optimizer``/``estimator``) are method entries with
    ``name`` (completed here); ``taper`` and ``mapping`` are one value of ``methods.taper``
    and ``methods.mapping``. What the optimize stage runs:

    =====================================  ==========================  ==========================
    ansatz                                 ``taper: false``            ``taper: true``
    =====================================  ==========================  ==========================
    ``uccsd``, ``kupccgsd``                determinant space, any      tapered statevector, any
                                           mapping (costs in it)       mapping
    ``adapt`` (fermionic pools)            determinant space, any      tapered statevector, any
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
    estimator. Excited-state methods (``states`` other than ``ground``) run where the ground
    state runs (determinant space untapered, the tapered statevector tapered): ``uccsd`` or
    ``kupccgsd``, the ``exact`` estimator, and for ``vqd``/``ssvqe`` a gradient optimizer
    (:mod:`eigensweep.vqe.excited`).
    """
    a_cfg = complete_method("ansatz", ansatz)
    if not isinstance(taper, bool) and type(taper).__name__ != "bool_":
        raise ConfigError(f"methods.taper: must be true or false, got {_short(taper)}")
    mappings = load_schema()["properties"]["methods"]["properties"]["mapping"]["items"]["enum"]
    if mapping not in mappings:
        raise ConfigError(
            f"methods.mapping: unknown value {_short(mapping)}; allowed: {', '.join(mappings)}"
        )
    _check_ansatz_encoding(a_cfg, bool(taper), mapping)
    o_name = None if optimizer is None else complete_method("optimizer", optimizer)["name"]
    e_name = None if estimator is None else complete_method("estimator", estimator)["name"]
    _check_estimator(a_cfg["name"], o_name, e_name)
    if states is not None:
        _check_states(
            complete_method("states", states)["name"], a_cfg["name"], taper, o_name, e_name
        )


def _check_states(
    states: str, ansatz: str, taper: bool, optimizer: str | None, estimator: str | None
) -> None:
    if states == "ground":
        return
    if ansatz not in ("uccsd", "kupccgsd"):
        raise ConfigError(
            f"states.name: {states!r} needs a fermionic ansatz (determinant space, or the "
            "tapered statevector with taper true): use ansatz uccsd or kupccgsd"
        )
    if estimator not in (None, "exact"):
        raise ConfigError(f"states.name: {states!r} needs the exact estimator")
    if states != "qeom" and optimizer not in (None, *GRADIENT_METHODS):
        raise ConfigError(
            f"states.name: {states!r} needs a gradient optimizer: {', '.join(GRADIENT_METHODS)}"
        )


def _check_ansatz_encoding(ansatz: dict[str, Any], taper: bool, mapping: str) -> None:
    if (
        ansatz["name"] == "adapt"
        and ansatz["pool"] == "qubit"
        and (taper or mapping != "jordan_wigner")
    ):
        raise ConfigError(
            "ansatz.pool: 'qubit' (qubit-ADAPT) runs on the Jordan-Wigner statevector and allows "
            f"only methods.mapping jordan_wigner with methods.taper false, got {mapping!r}, taper "
            f"{str(taper).lower()}; use pool singles_doubles or generalised_singles_doubles"
        )


def _check_estimator(ansatz: str | None, optimizer: str | None, estimator: str | None) -> None:
    if estimator in (None, "exact"):
        return
    if optimizer in GRADIENT_METHODS:
        raise ConfigError(
            f"optimizer.name: {optimizer!r} needs exact gradients; with estimator {estimator!r} "
            "use one of adam, shot_adaptive_descent, spsa, rbf_surrogate, cobyla, nelder_mead"
        )
    if ansatz == "adapt":
        raise ConfigError("estimator.name: the adapt ansatz needs the exact estimator")


# ---------------------------------------------------------------------------- whole configs
def validate_config(raw: Any, source: str = "config") -> dict:
    """Validate a parsed configuration and return it with all defaults filled in.

    Args:
        raw: the parsed YAML document (plain data, e.g. from :func:`parse_yaml`).
        source: name used in error messages (usually the file name).

    Returns:
        A new dict with every default filled, method entries included.

    Raises:
        ConfigError: one line, ``<source>: <key path>: <problem>; <what is allowed>``.
    """
    if raw is None:
        raise ConfigError(
            f"{source}: the configuration is empty; see config/config.yaml for an example"
        )
    if not isinstance(raw, dict):
        raise ConfigError(
            f"{source}: the top level must be a mapping with 'molecules' and 'methods'"
        )
    _check_plain_data(raw, source)
    problem = _first_error(_validator(), raw, "")
    if problem:
        raise ConfigError(f"{source}: {problem}")
    cfg = _complete(raw, load_schema())
    names = [m["name"] for m in cfg["molecules"]]
    dup = sorted({n for n in names if names.count(n) > 1})
    if dup:
        raise ConfigError(
            f"{source}: molecules: name {dup[0]!r} is used twice; give each molecule its own name"
        )
    from .study import expand_sweeps  # unsupported combinations: skipped, or refused if strict

    expand_sweeps(cfg, check_combination, source)
    return cfg


def load_config(path: str | Path) -> dict:
    """Read a YAML config file as plain data, validate it and fill defaults."""
    text = read_user_text(path, limit=MAX_CONFIG_BYTES, what="config file")
    return validate_config(parse_yaml(text, str(path)), source=str(path))


def workflow_config(snakemake_config: dict, configfiles: Sequence[str | Path]) -> dict:
    """The validated sweep of a Snakemake run, always read from disk by :func:`load_config`.

    Routes: ``snakemake --config sweep=FILE`` (what ``eigensweep run`` passes; Snakemake
    never parses the file), ``snakemake --configfile FILE`` (the file is re-read here, so
    templating markers are refused, but Snakemake's own loader has read it first), or
    neither (the default sweep, ``config/config.yaml``).
    """
    extra = sorted(set(snakemake_config) - {SWEEP_KEY, STORE_KEY})
    if SWEEP_KEY in snakemake_config:
        path = snakemake_config[SWEEP_KEY]
        if not isinstance(path, str) or configfiles:
            raise ConfigError(
                f"--config {SWEEP_KEY}=FILE: give one sweep file path and no --configfile"
            )
        return load_config(path)
    if len(configfiles) > 1:
        raise ConfigError("--configfile: give one sweep file; merging several is not supported")
    if configfiles:
        return load_config(configfiles[0])
    if extra:
        raise ConfigError(
            f"--config {extra[0]}=...: sweep settings come from a file; use --config {SWEEP_KEY}=FILE"
        )
    return load_config(DEFAULT_CONFIG)
