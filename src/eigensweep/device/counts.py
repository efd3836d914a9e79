"""Returned-results JSON format: validation against a job manifest and atomic import.

Format ``eigensweep-device-results`` version 1 (specified in ``docs/counts-format.md``)::

    {"format": "eigensweep-device-results", "format_version": 1,
     "job_id": "<job_id from manifest.json>", "device": "<free text>",
     "results": {"<circuit_id>": {"sha256": "<sha256 of the OpenQASM 3 file>",
                                  "counts": {"<bitstring>": <int>, ...}}, ...}}

Character ``k`` of a bitstring is the value measured on qubit ``k`` (= classical bit
``c[k]``); the leftmost character is qubit 0.

Every problem is reported as one :class:`eigensweep.errors.ResultsFileError` line naming the
file, the problem and what to do; nothing is imported when any check fails.
"""

from __future__ import annotations

import json
from collections.abc import Mapping
from pathlib import Path

import jsonschema

from eigensweep.device.manifest import as_manifest, atomic_write_text, load_manifest
from eigensweep.errors import ResultsFileError, StageFileError
from eigensweep.inputs import read_bounded

__all__ = [
    "RESULTS_FORMAT",
    "RESULTS_FORMAT_VERSION",
    "RESULTS_SCHEMA",
    "DEFAULT_MAX_BYTES",
    "QUBIT0_ENDS",
    "load_results",
    "validate_results",
    "normalise_results",
    "import_results",
]

RESULTS_FORMAT = "eigensweep-device-results"
RESULTS_FORMAT_VERSION = 1
DEFAULT_MAX_BYTES = 50 * 1024 * 1024

#: JSON Schema (draft 2020-12) of the structural part; manifest-dependent checks (circuit
#: ids, hashes, bitstring lengths) are done in code.
RESULTS_SCHEMA: dict = {
    "$schema": "https://json-schema.org/draft/2020-12/schema",
    "title": "eigensweep device results, format_version 1",
    "type": "object",
    "required": ["format", "format_version", "job_id", "results"],
    "properties": {
        "format": {"const": RESULTS_FORMAT},
        "format_version": {"const": RESULTS_FORMAT_VERSION},
        "job_id": {"type": "string", "pattern": "^[0-9a-f]{64}$"},
        "device": {"type": "string"},
        "results": {
            "type": "object",
            "additionalProperties": {
                "type": "object",
                "required": ["sha256", "counts"],
                "properties": {
                    "sha256": {"type": "string", "pattern": "^[0-9a-f]{64}$"},
                    "counts": {
                        "type": "object",
                        "propertyNames": {"pattern": "^[01]+$"},
                        "additionalProperties": {"type": "integer", "minimum": 0},
                    },
                },
            },
        },
    },
}

_FIX_EXPORT = "send the circuits of this job folder again or pick the matching job folder"


class _Bad(Exception):
    """Internal: carries the problem text; turned into one ResultsFileError line."""


def _short(value, limit: int = 40) -> str:
    text = " ".join(repr(value).split())
    return text if len(text) <= limit else text[: limit - 3] + "..."


def _no_duplicates(pairs):
    out = {}
    for k, v in pairs:
        if k in out:
            raise _Bad(f"key {_short(k)} appears twice in one object; keep one entry per key")
        out[k] = v
    return out


def _reject_constant(name):
    raise _Bad(f"contains {name}, which is not valid JSON; export plain integer counts")


#: Counts at or above 2**53 cannot be summed exactly in double precision: refused.
MAX_COUNT = 2**53


def _parse_count(text: str) -> int:
    if len(text.lstrip("-")) > 16:
        raise _Bad(f"holds an integer of {len(text)} digits; counts must be below 2**53")
    return int(text)


def _is_int(v) -> bool:
    return isinstance(v, int) and not isinstance(v, bool)


def _schema_problem(err: jsonschema.ValidationError) -> str:
    where = "/".join(str(p) for p in err.absolute_path) or "top level"
    v = err.validator
    if v == "required":
        return f"{where}: required key {err.message.split(' is a required')[0]} is missing"
    if v == "type":
        return f"{where}: {_short(err.instance)} should be of type {err.validator_value}"
    if v == "minimum":
        return f"{where}: negative count {_short(err.instance)}; counts must be >= 0"
    if v == "pattern" and err.validator_value == "^[0-9a-f]{64}$":
        return f"{where}: {_short(err.instance)} is not a lowercase hex SHA-256"
    return f"{where}: {_short(err.instance)} is invalid ({v})"


def validate_results(data, manifest, name: str = "results") -> dict[str, dict[str, int]]:
    """Check a parsed results object against a manifest dict; return counts per circuit id.

    Raises :class:`ResultsFileError` with one line ``"<name>: <problem>; <what to do>"``.
    """
    try:
        return _validate(data, as_manifest(manifest))
    except _Bad as err:
        raise ResultsFileError(f"{name}: {err}") from None


def _validate(data, manifest: dict) -> dict[str, dict[str, int]]:
    if not isinstance(data, dict):
        raise _Bad("top level is not a JSON object; expected the eigensweep-device-results format")
    if data.get("format") != RESULTS_FORMAT:
        raise _Bad(
            f"format is {_short(data.get('format'))}, expected {RESULTS_FORMAT!r}; "
            "convert the file to the format in docs/counts-format.md"
        )
    version = data.get("format_version")
    if not _is_int(version) or version != RESULTS_FORMAT_VERSION:
        raise _Bad(
            f"format_version {_short(version)} is not supported (expected "
            f"{RESULTS_FORMAT_VERSION}); convert the file or upgrade eigensweep"
        )
    if data.get("job_id") != manifest["job_id"] and isinstance(data.get("job_id"), str):
        raise _Bad(
            f"job_id {_short(data['job_id'], 20)} does not match the job's "
            f"{manifest['job_id'][:12]}...; {_FIX_EXPORT}"
        )
    # structural part: JSON Schema
    validator = jsonschema.Draft202012Validator(RESULTS_SCHEMA)
    errors = sorted(validator.iter_errors(data), key=lambda e: list(e.absolute_path))
    # report our own clearer messages for counts first
    n = int(manifest["n_qubits"])
    results = data.get("results")
    if isinstance(results, dict):
        records = {r["circuit_id"]: r for r in manifest["circuits"]}
        unknown = [c for c in results if c not in records]
        if unknown:
            raise _Bad(
                f"unknown circuit id {_short(unknown[0])} (not in this job's manifest); "
                f"{_FIX_EXPORT}"
            )
        missing = [c for c in records if c not in results]
        if missing:
            raise _Bad(
                f"circuit {missing[0]!r} has no results ({len(missing)} missing); "
                "add every circuit of the job before importing"
            )
        for cid, rec in records.items():
            entry = results[cid]
            if not isinstance(entry, dict):
                raise _Bad(f"results/{cid} is not an object with 'sha256' and 'counts'; fix it")
            if isinstance(entry.get("sha256"), str) and entry["sha256"] != rec["sha256"]:
                raise _Bad(
                    f"results/{cid}: sha256 differs from the exported circuit (a different "
                    f"or edited circuit was run); {_FIX_EXPORT}"
                )
            counts = entry.get("counts")
            if not isinstance(counts, dict):
                continue  # reported by the schema below
            total = 0
            for bits, c in counts.items():
                if len(bits) != n:
                    raise _Bad(
                        f"results/{cid}: bitstring {_short(bits)} has length {len(bits)}, "
                        f"expected {n} (one character per qubit, qubit 0 first)"
                    )
                if set(bits) - {"0", "1"}:
                    raise _Bad(
                        f"results/{cid}: bitstring {_short(bits)} has characters other than "
                        "0 and 1; write measured bits only"
                    )
                if not _is_int(c):
                    raise _Bad(
                        f"results/{cid}: count {_short(c)} for {bits!r} is not a whole "
                        "number; counts must be non-negative integers"
                    )
                if c >= MAX_COUNT:
                    raise _Bad(
                        f"results/{cid}: count {c} for {bits!r} is not below 2**53; "
                        "counts must be exact shot numbers"
                    )
                if c < 0:
                    raise _Bad(
                        f"results/{cid}: count {c} for {bits!r} is negative; "
                        "counts must be non-negative integers"
                    )
                total += c
            if total == 0:
                raise _Bad(f"results/{cid}: zero shots in total; re-run or remove the circuit")
    if errors:
        raise _Bad(_schema_problem(errors[0]) + "; fix the file as in docs/counts-format.md")
    return {
        rec["circuit_id"]: {
            bits: int(c) for bits, c in sorted(results[rec["circuit_id"]]["counts"].items()) if c
        }
        for rec in manifest["circuits"]
    }


def _read(path: Path, max_bytes: int):
    try:
        raw = read_bounded(path, max_bytes, "counts file", error=ResultsFileError)
        text = raw.decode("utf-8")
    except UnicodeDecodeError:
        raise _Bad("is not UTF-8 text; export the results as JSON") from None
    try:
        return json.loads(
            text,
            object_pairs_hook=_no_duplicates,
            parse_constant=_reject_constant,
            parse_int=_parse_count,
        )
    except json.JSONDecodeError as err:
        raise _Bad(
            f"is not valid JSON ({err.msg} at line {err.lineno} column {err.colno}); "
            "export the results as JSON in the format of docs/counts-format.md"
        ) from None
    except RecursionError:
        raise _Bad("is nested too deeply to be a results file; check the file") from None


#: Which end of a returned bitstring holds qubit 0: ``left`` is eigensweep's own order
#: (character k = qubit k); ``right`` is the order of tools that print a classical register
#: highest bit first. Files read with ``right`` are reversed on import.
QUBIT0_ENDS = ("left", "right")


def load_results(
    path: str | Path, manifest, *, max_bytes: int = DEFAULT_MAX_BYTES, qubit0: str = "left"
) -> dict[str, dict[str, int]]:
    """Load and validate a results file; return ``{circuit_id: {bitstring: count}}``.

    ``manifest`` is the manifest dict, a :class:`DeviceJob`, a job folder or ``manifest.json``.
    Refused with one-line :class:`ResultsFileError`: unreadable / not JSON / too large, wrong
    format name or version, job_id mismatch, unknown or missing circuit id, sha256 mismatch,
    bitstring of wrong length or with characters other than 0/1, negative, non-integer or
    boolean counts, duplicate keys, and circuits with zero shots. ``qubit0="right"`` reads
    a file whose bitstrings have qubit 0 as their last character (:data:`QUBIT0_ENDS`).
    """
    return _load(Path(path), as_manifest(manifest), max_bytes, qubit0)[1]


def _reversed_bitstrings(data):
    """``data`` with every bitstring of every circuit's counts reversed (structure kept)."""
    results = data.get("results") if isinstance(data, dict) else None
    if not isinstance(results, dict):
        return data
    out = dict(data, results=dict(results))
    for cid, rec in results.items():
        if isinstance(rec, dict) and isinstance(rec.get("counts"), dict):
            out["results"][cid] = dict(rec, counts={b[::-1]: c for b, c in rec["counts"].items()})
    return out


def _load(
    path: Path, manifest: dict, max_bytes: int, qubit0: str = "left"
) -> tuple[dict, dict[str, dict[str, int]]]:
    if qubit0 not in QUBIT0_ENDS:
        raise ResultsFileError(
            f"qubit0: unknown value {qubit0!r}; allowed: {', '.join(QUBIT0_ENDS)}"
        )
    try:
        data = _read(path, max_bytes)
        if qubit0 == "right":
            data = _reversed_bitstrings(data)
        return data, _validate(data, manifest)
    except _Bad as err:
        raise ResultsFileError(f"{path}: {err}") from None


def normalise_results(counts: Mapping[str, Mapping[str, int]], manifest, device: str) -> dict:
    """Canonical results object: manifest order of circuits, sorted bitstrings, zeros dropped."""
    man = as_manifest(manifest)
    return {
        "format": RESULTS_FORMAT,
        "format_version": RESULTS_FORMAT_VERSION,
        "job_id": man["job_id"],
        "device": " ".join(str(device).split()),
        "results": {
            rec["circuit_id"]: {
                "sha256": rec["sha256"],
                "counts": {
                    b: int(c) for b, c in sorted(counts[rec["circuit_id"]].items()) if c > 0
                },
            }
            for rec in man["circuits"]
        },
    }


def import_results(
    src: str | Path,
    job_folder: str | Path,
    dest: str | Path,
    *,
    max_bytes=DEFAULT_MAX_BYTES,
    qubit0: str = "left",
) -> Path:
    """Validate ``src`` against ``job_folder/manifest.json`` and write a normalised copy to ``dest``.

    ``qubit0="right"`` imports a file whose bitstrings end with qubit 0; the copy is written in
    eigensweep's own order (qubit 0 first).

    The write is atomic. An existing ``dest`` with identical content is left as is; a
    different existing file is never overwritten. Nothing is written on any error.
    """
    src, dest = Path(src), Path(dest)
    try:
        manifest = load_manifest(job_folder)
    except StageFileError as err:
        raise ResultsFileError(f"{src}: cannot check it, {err}") from None
    data, counts = _load(src, manifest, max_bytes, qubit0)
    device = data.get("device", "")
    text = json.dumps(normalise_results(counts, manifest, device), indent=1) + "\n"
    if dest.exists():
        try:
            same = dest.read_text(encoding="utf-8") == text
        except (OSError, UnicodeDecodeError):
            same = False
        if same:
            return dest
        raise ResultsFileError(
            f"{dest}: already exists with different content; remove or rename it to import "
            f"{src.name} again"
        )
    return atomic_write_text(dest, text)
