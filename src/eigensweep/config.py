"""Loading and validating sweep configurations.

The configuration is YAML, read with the safe loader (nothing is executed), validated against
the JSON schema in ``workflow/schemas/config.schema.yaml`` and completed with the schema's
defaults. Method entries (ansatz, optimizer, estimator) are further checked and completed by
:func:`eigensweep.vqe.validate_method`. Every problem becomes a one-line
:class:`~eigensweep.errors.ConfigError` naming the key path and what is allowed.
"""

from __future__ import annotations

import copy
from functools import lru_cache
from pathlib import Path
from typing import Any

import jsonschema
import yaml

from .errors import ConfigError
from .paths import schema_path

MAX_CONFIG_BYTES = 5_000_000


@lru_cache(maxsize=1)
def load_schema() -> dict:
    with open(schema_path(), encoding="utf-8") as fh:
        return yaml.safe_load(fh)


def _key_path(path) -> str:
    out = ""
    for part in path:
        out += f"[{part}]" if isinstance(part, int) else (f".{part}" if out else str(part))
    return out or "(top level)"


def _describe(err: jsonschema.ValidationError) -> str:
    where = _key_path(err.absolute_path)
    v = err.validator
    if v == "additionalProperties":
        allowed = sorted(err.schema.get("properties", {}))
        extra = sorted(set(err.instance) - set(allowed)) if isinstance(err.instance, dict) else []
        return f"{where}: unknown key {', '.join(map(repr, extra))}; allowed keys: {', '.join(allowed)}"
    if v == "enum":
        return f"{where}: {err.instance!r} is not allowed; use one of {', '.join(map(str, err.validator_value))}"
    if v == "required":
        return f"{where}: {err.message}"
    if v == "type":
        return f"{where}: expected {err.validator_value}, got {type(err.instance).__name__} {err.instance!r}"
    if v == "oneOf":
        return f"{where}: {err.instance!r} does not fit; see the description of this key in config/README.md"
    return f"{where}: {err.message}"


def _fill_defaults(instance: Any, schema: dict) -> Any:
    """Return a copy of ``instance`` with every missing ``default`` of the schema filled in."""
    if isinstance(instance, dict) and schema.get("type") in ("object", ["object", "null"]):
        out = dict(instance)
        for name, sub in schema.get("properties", {}).items():
            if name not in out and "default" in sub:
                out[name] = copy.deepcopy(sub["default"])
            if name in out:
                out[name] = _fill_defaults(out[name], sub)
        return out
    if isinstance(instance, list) and isinstance(schema.get("items"), dict):
        return [_fill_defaults(item, schema["items"]) for item in instance]
    return instance


def validate_config(raw: Any, source: str = "config") -> dict:
    """Validate a parsed configuration and return it with all defaults filled in.

    Args:
        raw: the parsed YAML document.
        source: name used in error messages (usually the file name).

    Returns:
        A new dict; method entries are completed with their option defaults.

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
    schema = load_schema()
    validator = jsonschema.Draft202012Validator(schema)
    errors = sorted(
        validator.iter_errors(raw), key=lambda e: (len(list(e.absolute_path)), str(e.absolute_path))
    )
    if errors:
        err = jsonschema.exceptions.best_match(errors)
        raise ConfigError(f"{source}: {_describe(err)}")
    cfg = _fill_defaults(raw, schema)
    if not cfg["molecules"]:
        raise ConfigError(f"{source}: molecules: the list is empty; add at least one molecule")
    from .vqe.methods import validate_method  # light module: no chemistry imports

    methods = cfg["methods"]
    for kind in ("ansatz", "optimizer", "estimator"):
        filled = []
        for i, entry in enumerate(methods[kind]):
            try:
                filled.append(validate_method(kind, entry))
            except ConfigError as exc:
                raise ConfigError(f"{source}: methods.{kind}[{i}]: {exc}") from None
        methods[kind] = filled
    from .vqe.methods import check_combination

    for ia, ansatz in enumerate(methods["ansatz"]):
        for taper in methods["taper"]:
            for mapping in methods["mapping"]:
                for optimizer in methods["optimizer"]:
                    for estimator in methods["estimator"]:
                        try:
                            check_combination(
                                ansatz, taper, mapping, optimizer=optimizer, estimator=estimator
                            )
                        except ConfigError as exc:
                            raise ConfigError(
                                f"{source}: methods.ansatz[{ia}] with taper {str(taper).lower()}, {mapping}, "
                                f"{optimizer['name']}, {estimator['name']}: {exc}"
                            ) from None
    names = [m["name"] for m in cfg["molecules"]]
    dup = sorted({n for n in names if names.count(n) > 1})
    if dup:
        raise ConfigError(
            f"{source}: molecules: name {dup[0]!r} is used twice; give each molecule its own name"
        )
    return cfg


def load_config(path: str | Path) -> dict:
    """Read a YAML config file safely, validate it and fill defaults."""
    path = Path(path)
    if not path.is_file():
        raise ConfigError(
            f"{path}: config file not found; pass an existing YAML file with --config"
        )
    if path.stat().st_size > MAX_CONFIG_BYTES:
        raise ConfigError(
            f"{path}: config file is larger than {MAX_CONFIG_BYTES} bytes; is it the right file?"
        )
    try:
        with open(path, encoding="utf-8") as fh:
            raw = yaml.safe_load(fh)
    except yaml.YAMLError as exc:
        mark = getattr(exc, "problem_mark", None)
        where = f" line {mark.line + 1}, column {mark.column + 1}" if mark else ""
        problem = getattr(exc, "problem", None) or str(exc).splitlines()[0]
        raise ConfigError(
            f"{path}:{where}: YAML syntax error: {problem}; fix the file and retry"
        ) from None
    except UnicodeDecodeError:
        raise ConfigError(f"{path}: not a UTF-8 text file; pass a YAML config") from None
    return validate_config(raw, source=str(path))
