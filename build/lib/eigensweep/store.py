"""The one HDF5 stage-file helper: atomic writes, provenance attributes, verified reads.

Layout of every stage file ``results/<stage>/<key>.h5``::

    /                 root attributes: format, format_version, stage, stage_version, key,
                      parameters (JSON), parent_keys (JSON), software (JSON), created (UTC ISO),
                      host, wall_s, content_sha256
    /data/<name>      one dataset per array (``units`` attribute where it applies)
    /meta             JSON text: small structured results (energies, labels, ...)

``content_sha256`` covers every dataset's name, dtype, shape and bytes plus the meta text, so a
damaged file is refused on read even when HDF5 itself still opens it.
"""

from __future__ import annotations

import contextlib
import hashlib
import json
import os
import platform
import socket
import tempfile
import time
from dataclasses import dataclass
from datetime import UTC, datetime
from importlib import metadata
from pathlib import Path
from typing import Any

import h5py
import numpy as np

from . import __version__
from .errors import StageFileError
from .stage_table import STAGE_VERSIONS, canonical_json

FORMAT = "eigensweep-stage"
FORMAT_VERSION = 1
KNOWN_FORMAT_VERSIONS = {1}


@dataclass
class StageData:
    """What a stage file holds."""

    stage: str
    key: str
    params: dict
    parents: dict[str, str]
    arrays: dict[str, np.ndarray]
    meta: dict
    attrs: dict[str, Any]


def software_versions() -> dict[str, str]:
    """Versions of the packages whose behaviour a stage result depends on."""
    out = {"eigensweep": __version__, "python": platform.python_version()}
    for dist in ("numpy", "scipy", "h5py", "pyscf", "openfermion"):
        try:
            out[dist] = metadata.version(dist)
        except metadata.PackageNotFoundError:  # pragma: no cover
            out[dist] = "not installed"
    return out


def _content_hash(arrays: dict[str, np.ndarray], meta_text: str) -> str:
    h = hashlib.sha256()
    for name in sorted(arrays):
        a = np.ascontiguousarray(arrays[name])
        h.update(name.encode())
        h.update(str(a.dtype.str).encode())
        h.update(str(a.shape).encode())
        h.update(a.tobytes())
    h.update(meta_text.encode())
    return h.hexdigest()


def _prepare(arrays: dict[str, Any]) -> dict[str, np.ndarray]:
    out = {}
    for name, value in arrays.items():
        a = np.asarray(value)
        if a.dtype == object or a.dtype.kind in "US":
            raise TypeError(f"array {name!r}: store text in meta, not as an array")
        out[name] = a
    return out


def write_stage(
    path: str | Path,
    *,
    stage: str,
    key: str,
    params: dict,
    parents: dict[str, str],
    arrays: dict[str, Any],
    meta: dict,
    units: dict[str, str] | None = None,
    wall_s: float | None = None,
) -> Path:
    """Write a stage file atomically (temporary file in the same folder, then rename).

    Args:
        path: destination ``.../<stage>/<key>.h5``; its stem must equal ``key``.
        arrays: name -> numeric array (stored as datasets under ``/data``).
        meta: JSON-serialisable results stored as text under ``/meta``.
        units: optional name -> unit string attached to datasets.
    """
    path = Path(path)
    if path.stem != key:
        raise StageFileError(
            f"{path}: file name does not match key {key}; this is a bug in the caller"
        )
    path.parent.mkdir(parents=True, exist_ok=True)
    arrays = _prepare(arrays)
    meta_text = canonical_json(meta)
    units = units or {}
    fd, tmp = tempfile.mkstemp(prefix=f".{key}.", suffix=".tmp", dir=path.parent)
    os.close(fd)
    try:
        with h5py.File(tmp, "w") as f:
            f.attrs["format"] = FORMAT
            f.attrs["format_version"] = FORMAT_VERSION
            f.attrs["stage"] = stage
            f.attrs["stage_version"] = STAGE_VERSIONS[stage]
            f.attrs["key"] = key
            f.attrs["parameters"] = canonical_json(params)
            f.attrs["parent_keys"] = canonical_json(parents)
            f.attrs["software"] = canonical_json(software_versions())
            f.attrs["created"] = datetime.now(UTC).isoformat(timespec="seconds")
            f.attrs["host"] = socket.gethostname()
            f.attrs["wall_s"] = float(wall_s) if wall_s is not None else float("nan")
            f.attrs["content_sha256"] = _content_hash(arrays, meta_text)
            g = f.create_group("data")
            for name, a in arrays.items():
                ds = g.create_dataset(name, data=a)
                if name in units:
                    ds.attrs["units"] = units[name]
            f.create_dataset("meta", data=meta_text)
        with open(tmp, "rb") as fh:
            os.fsync(fh.fileno())
        os.replace(tmp, path)
    except BaseException:
        with contextlib.suppress(FileNotFoundError):
            os.unlink(tmp)
        raise
    return path


def read_stage(path: str | Path, *, stage: str | None = None, key: str | None = None) -> StageData:
    """Read and verify a stage file.

    Checks: readable HDF5, format name and version known, stage (and stage version) as expected,
    key equals the file name (and ``key`` when given), content hash intact.

    Raises:
        StageFileError: one line naming the file, the problem and what to do.
    """
    path = Path(path)
    fix = "delete it and rerun (eigensweep run recomputes it)"
    if not path.is_file():
        raise StageFileError(f"{path}: stage file not found; run the sweep to create it")
    try:
        with h5py.File(path, "r") as f:
            attrs = {k: (v.decode() if isinstance(v, bytes) else v) for k, v in f.attrs.items()}
            if attrs.get("format") != FORMAT:
                raise StageFileError(
                    f"{path}: not an eigensweep stage file (format {attrs.get('format')!r})"
                )
            fv = int(attrs.get("format_version", -1))
            if fv not in KNOWN_FORMAT_VERSIONS:
                raise StageFileError(
                    f"{path}: stage-file format version {fv} is unknown to eigensweep {__version__} "
                    f"(knows {sorted(KNOWN_FORMAT_VERSIONS)}); upgrade eigensweep or {fix}"
                )
            st = str(attrs.get("stage"))
            if stage is not None and st != stage:
                raise StageFileError(f"{path}: holds stage {st!r}, expected {stage!r}; {fix}")
            if (
                st not in STAGE_VERSIONS
                or int(attrs.get("stage_version", -1)) != STAGE_VERSIONS[st]
            ):
                raise StageFileError(
                    f"{path}: {st} stage version {attrs.get('stage_version')} is not the current "
                    f"{STAGE_VERSIONS.get(st)}; {fix}"
                )
            k = str(attrs.get("key"))
            if k != path.stem:
                raise StageFileError(f"{path}: key {k} inside does not match the file name; {fix}")
            if key is not None and k != key:
                raise StageFileError(f"{path}: key {k} is not the expected {key}; {fix}")
            arrays: dict[str, np.ndarray] = {}

            def _grab(name: str, obj) -> None:
                if isinstance(obj, h5py.Dataset):
                    arrays[name] = obj[()]

            f["data"].visititems(_grab)
            meta_raw = f["meta"][()]
            meta_text = meta_raw.decode() if isinstance(meta_raw, bytes) else str(meta_raw)
    except StageFileError:
        raise
    except (OSError, KeyError, ValueError) as exc:
        raise StageFileError(
            f"{path}: damaged or truncated stage file ({type(exc).__name__}); {fix}"
        ) from None
    if _content_hash(arrays, meta_text) != attrs.get("content_sha256"):
        raise StageFileError(f"{path}: content checksum mismatch (file damaged); {fix}")
    return StageData(
        stage=st,
        key=k,
        params=json.loads(attrs["parameters"]),
        parents=json.loads(attrs["parent_keys"]),
        arrays=arrays,
        meta=json.loads(meta_text),
        attrs=attrs,
    )


class Timer:
    """Wall-clock timer for the ``wall_s`` attribute."""

    def __enter__(self) -> Timer:
        self.t0 = time.perf_counter()
        return self

    def __exit__(self, *exc) -> None:
        self.seconds = time.perf_counter() - self.t0
