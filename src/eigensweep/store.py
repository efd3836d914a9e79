"""The one stage-file I/O module: atomic writes, self-describing HDF5, verified reads.

Layout of every stage file ``results/<stage>/<key>.h5`` (format version 2)::

    /                   root attributes: format, format_version, stage, stage_version, key,
                        parameters (JSON), parent_keys (JSON), software (JSON), created (UTC ISO),
                        host, wall_s, content_sha256
    /data/<object>/...  one group per stored object (e.g. ``data/hamiltonian``), one dataset per
                        array, a ``units`` attribute on every dataset that has units
    /results            the stage's structured results: numbers, flags and short text are
                        attributes (``energy``, ``n_qubits``); a nested mapping is a subgroup;
                        lists and longer text are JSON-text datasets (attribute
                        ``encoding = "json"``)

``content_sha256`` covers every dataset's name, dtype, shape and bytes plus the canonical JSON
of the results, so a damaged file is refused on read even when HDF5 itself still opens it.
Timings are outside it (the ``wall_s`` and ``created`` attributes, and top-level results named in
:data:`TIMING_KEYS`, stored in ``/timing``): identical runs have identical content hashes.
On every read the key is recomputed from the stored stage, version, parameters and parent keys;
a file whose stored identity does not hash to its key is refused.

This module also holds the one atomic file write (:func:`atomic_path`, :func:`atomic_write_text`,
:func:`atomic_write_bytes`) that every writer of result files uses.
"""

from __future__ import annotations

import contextlib
import errno
import hashlib
import json
import os
import platform
import socket
import stat
import tempfile
import time
from collections.abc import Iterator, Mapping
from dataclasses import dataclass
from datetime import UTC, datetime
from importlib import metadata
from pathlib import Path
from typing import Any

import h5py
import numpy as np

from . import __version__
from .errors import EigensweepError, StageFileError
from .stage_table import STAGE_VERSIONS, canonical_json, stage_key

FORMAT = "eigensweep-stage"
FORMAT_VERSION = 2
#: Top-level results that are timings: stored under ``/timing``, outside the content hash.
TIMING_KEYS = ("wall_s",)
KNOWN_FORMAT_VERSIONS = {2}
#: Largest stage file read (bytes): a bound against a huge or endless file given as a stage file.
MAX_STAGE_FILE_BYTES = 8 * 2**30
#: Text longer than this is stored as a JSON dataset rather than an attribute.
_MAX_ATTR_TEXT = 256
#: A mapping with more entries than this (counts per bitstring, ...) is one JSON dataset.
_MAX_GROUP_ENTRIES = 64
_INT64 = (-(2**63), 2**63 - 1)


# ----------------------------------------------------------------------------- atomic writes


def _file_mode() -> int:
    """Permissions of a new regular file under the current umask (``0o666 & ~umask``)."""
    mask = os.umask(0)
    os.umask(mask)
    return 0o666 & ~mask


@contextlib.contextmanager
def atomic_path(path: str | Path, *, prefix: str | None = None) -> Iterator[Path]:
    """Write a file atomically: yield a temporary path in the destination folder.

    When the ``with`` block ends without error the temporary file is flushed to disk, given the
    umask's permissions and renamed onto ``path`` (readers see the old file or the new one,
    never half of one); on error it is removed and ``path`` is left untouched.

    Example:
        >>> with atomic_path(folder / "table.csv") as tmp:  # doctest: +SKIP
        ...     tmp.write_text("a,b\n1,2\n")
    """
    path = Path(path)
    try:
        path.parent.mkdir(parents=True, exist_ok=True)
        fd, name = tempfile.mkstemp(
            prefix=prefix or f".{path.name}.", suffix=".tmp", dir=path.parent
        )
    except OSError as exc:
        raise _write_error(path, exc) from None
    os.close(fd)
    tmp = Path(name)
    try:
        yield tmp
        with open(tmp, "rb") as fh:
            os.fsync(fh.fileno())
        os.chmod(tmp, _file_mode())
        os.replace(tmp, path)
    except OSError as exc:
        with contextlib.suppress(FileNotFoundError):
            os.unlink(tmp)
        err = _write_error(path, exc)
        if err is exc:
            raise
        raise err from None
    except BaseException:
        with contextlib.suppress(FileNotFoundError):
            os.unlink(tmp)
        raise


_FULL = (errno.ENOSPC, getattr(errno, "EDQUOT", errno.ENOSPC))


def _write_error(path: Path, exc: OSError) -> OSError | EigensweepError:
    """A one-line error naming the folder for a full, read-only or forbidden disk; otherwise
    the original error (a bug, shown with its traceback)."""
    folder = path.parent
    text = str(exc)
    if exc.errno in _FULL or "No space left" in text or "errno = 28" in text:
        return EigensweepError(
            f"{folder}: disk full (or quota exceeded) while writing {path.name}; free space and "
            "rerun (finished files are kept)"
        )
    if exc.errno == errno.EROFS or "Read-only file system" in text:
        return EigensweepError(
            f"{folder}: read-only file system; run from a folder you can write to"
        )
    if exc.errno in (errno.EACCES, errno.EPERM):
        return EigensweepError(
            f"{folder}: no permission to write {path.name}; run from a folder you can write to"
        )
    return exc


def atomic_write_bytes(path: str | Path, data: bytes) -> Path:
    """Write ``data`` to ``path`` atomically (see :func:`atomic_path`)."""
    path = Path(path)
    with atomic_path(path) as tmp:
        tmp.write_bytes(data)
    return path


def atomic_write_text(path: str | Path, text: str) -> Path:
    """Write UTF-8 ``text`` (``\n`` line ends) to ``path`` atomically (see :func:`atomic_path`)."""
    path = Path(path)
    with atomic_path(path) as tmp, open(tmp, "w", encoding="utf-8", newline="\n") as fh:
        fh.write(text)
    return path


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


def _content_hash(arrays: Mapping[str, np.ndarray], results_text: str) -> str:
    h = hashlib.sha256()
    for name in sorted(arrays):
        a = np.ascontiguousarray(arrays[name])
        h.update(name.encode())
        h.update(str(a.dtype.str).encode())
        h.update(str(a.shape).encode())
        h.update(a.tobytes())
    h.update(results_text.encode())
    return h.hexdigest()


def _prepare(arrays: Mapping[str, Any]) -> dict[str, np.ndarray]:
    out = {}
    for name, value in arrays.items():
        a = np.asarray(value)
        if a.dtype == object or a.dtype.kind in "US":
            raise TypeError(f"array {name!r}: store text in meta, not as an array")
        if not name or any(not part or part == "." for part in name.split("/")):
            raise ValueError(f"array name {name!r}: use names like 'hamiltonian/x'")
        out[name] = a
    return out


# ----------------------------------------------------------------------------- results tree


def _is_group_key(k: Any) -> bool:
    return isinstance(k, str) and k not in ("", ".") and "/" not in k


def _write_tree(group: h5py.Group, tree: Mapping[str, Any]) -> None:
    """Results as HDF5: scalars -> attributes, mappings -> subgroups, the rest -> JSON datasets."""
    for k, v in tree.items():
        if (
            isinstance(v, Mapping)
            and len(v) <= _MAX_GROUP_ENTRIES
            and all(_is_group_key(x) for x in v)
        ):
            _write_tree(group.create_group(k), v)
        elif isinstance(v, bool | np.bool_):
            group.attrs[k] = np.bool_(v)
        elif isinstance(v, int | np.integer) and _INT64[0] <= int(v) <= _INT64[1]:
            group.attrs[k] = np.int64(v)
        elif isinstance(v, float | np.floating):
            group.attrs[k] = np.float64(v)
        elif isinstance(v, str) and len(v) <= _MAX_ATTR_TEXT:
            group.attrs[k] = v
        else:
            ds = group.create_dataset(k, data=canonical_json(v))
            ds.attrs["encoding"] = "json"


def _read_tree(group: h5py.Group) -> dict[str, Any]:
    out: dict[str, Any] = {}
    for k, v in group.attrs.items():
        if isinstance(v, np.bool_ | bool):
            out[k] = bool(v)
        elif isinstance(v, np.integer):
            out[k] = int(v)
        elif isinstance(v, np.floating):
            out[k] = float(v)
        else:
            out[k] = v.decode() if isinstance(v, bytes) else str(v)
    for k, obj in group.items():
        if isinstance(obj, h5py.Group):
            out[k] = _read_tree(obj)
        else:
            raw = obj[()]
            out[k] = json.loads(raw.decode() if isinstance(raw, bytes) else str(raw))
    return out


def write_stage(
    path: str | Path,
    *,
    stage: str,
    key: str,
    params: dict,
    parents: Mapping[str, str],
    arrays: Mapping[str, Any],
    meta: Mapping[str, Any],
    units: Mapping[str, str] | None = None,
    wall_s: float | None = None,
) -> Path:
    """Write a stage file atomically (temporary file in the same folder, then rename).

    Args:
        path: destination ``.../<stage>/<key>.h5``; its stem must equal ``key``, and ``key`` must
            be the stage key of ``stage``, ``params`` and ``parents``.
        arrays: name -> numeric array, stored as datasets under ``/data``; a name with ``/``
            (``"hamiltonian/x"``) puts the dataset in a group per object.
        meta: JSON-serialisable results, stored under ``/results`` (see the module docstring).
        units: array name -> unit string (``"hartree"``), the dataset's ``units`` attribute.
        wall_s: wall time of the job (a timing: not part of the content hash).

    Raises:
        StageFileError: the file name or key does not match (a bug in the caller).
    """
    path = Path(path)
    if path.stem != key:
        raise StageFileError(
            f"{path}: file name does not match key {key}; this is a bug in the caller"
        )
    if stage_key(stage, params, parents) != key:
        raise StageFileError(
            f"{path}: key {key} is not the stage key of its parameters and parents; "
            "this is a bug in the caller"
        )
    arrays = _prepare(arrays)
    timing = {k: meta[k] for k in TIMING_KEYS if k in meta}
    meta_text = canonical_json({k: v for k, v in meta.items() if k not in timing})
    units = dict(units or {})
    unknown = sorted(set(units) - set(arrays))
    if unknown:
        raise ValueError(f"units given for arrays that are not stored: {unknown}")
    with atomic_path(path, prefix=f".{key}.") as tmp, h5py.File(tmp, "w") as f:
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
        _write_tree(f.create_group("results"), json.loads(meta_text))
        _write_tree(f.create_group("timing"), json.loads(canonical_json(timing)))
    return path


_FIX = "delete it and rerun (eigensweep run recomputes it)"


def _check_header(path: Path, attrs: dict, stage: str | None, key: str | None) -> tuple:
    """Format, version, stage, key and identity checks of a stage file's root attributes."""
    fmt = attrs.get("format")
    if fmt != FORMAT:
        raise StageFileError(f"{path}: not an eigensweep stage file (no {FORMAT!r} format mark)")
    fv = int(attrs.get("format_version", -1))
    if fv not in KNOWN_FORMAT_VERSIONS:
        if fv < FORMAT_VERSION:
            raise StageFileError(
                f"{path}: written in the old stage-file format {fv} (this eigensweep writes "
                f"{FORMAT_VERSION}); rerun the sweep with 'eigensweep run' to recompute it"
            )
        raise StageFileError(
            f"{path}: stage-file format version {fv} is unknown to eigensweep {__version__} "
            f"(knows {sorted(KNOWN_FORMAT_VERSIONS)}); upgrade eigensweep or {_FIX}"
        )
    st = str(attrs.get("stage"))
    if stage is not None and st != stage:
        raise StageFileError(f"{path}: holds stage {st!r}, expected {stage!r}; {_FIX}")
    if st not in STAGE_VERSIONS or int(attrs.get("stage_version", -1)) != STAGE_VERSIONS[st]:
        raise StageFileError(
            f"{path}: {st} stage version {attrs.get('stage_version')} is not the current "
            f"{STAGE_VERSIONS.get(st)}; {_FIX}"
        )
    k = str(attrs.get("key"))
    if k != path.stem:
        raise StageFileError(f"{path}: key {k} inside does not match the file name; {_FIX}")
    if key is not None and k != key:
        raise StageFileError(f"{path}: key {k} is not the expected {key}; {_FIX}")
    params = json.loads(attrs["parameters"])
    parents = json.loads(attrs["parent_keys"])
    if not isinstance(params, dict) or not isinstance(parents, dict):
        raise ValueError("parameters or parent keys are not JSON objects")
    if stage_key(st, params, parents) != k:
        raise StageFileError(
            f"{path}: its stored parameters and parent keys do not hash to its key {k} "
            f"(copied or edited file); {_FIX}"
        )
    return st, k, params, parents


def read_stage(path: str | Path, *, stage: str | None = None, key: str | None = None) -> StageData:
    """Read and verify a stage file.

    Checks: a regular file, readable HDF5, format name and version known, stage (and stage
    version) as expected, key equals the file name (and ``key`` when given), the key recomputed
    from the stored stage, version, parameters and parent keys, content hash intact. Every parse
    of stored metadata happens inside these checks.

    Raises:
        StageFileError: one line naming the file, the problem and what to do.
    """
    path = Path(path)
    if not path.exists():
        raise StageFileError(f"{path}: stage file not found; run the sweep to create it")
    try:
        st_mode = os.stat(path)
    except OSError as exc:
        raise StageFileError(f"{path}: cannot read stage file ({exc.strerror})") from None
    if not stat.S_ISREG(st_mode.st_mode):
        raise StageFileError(f"{path}: not a regular file, so not a stage file")
    if st_mode.st_size > MAX_STAGE_FILE_BYTES:
        raise StageFileError(
            f"{path}: {st_mode.st_size} bytes is larger than any stage file "
            f"({MAX_STAGE_FILE_BYTES}); not a stage file"
        )
    if not h5py.is_hdf5(path):
        raise StageFileError(f"{path}: not an HDF5 file, so not an eigensweep stage file")
    try:
        with h5py.File(path, "r") as f:
            attrs = {k: (v.decode() if isinstance(v, bytes) else v) for k, v in f.attrs.items()}
            st, k, params, parents = _check_header(path, attrs, stage, key)
            arrays: dict[str, np.ndarray] = {}

            def _grab(name: str, obj) -> None:
                if isinstance(obj, h5py.Dataset):
                    arrays[name] = obj[()]

            f["data"].visititems(_grab)
            meta = _read_tree(f["results"])
            meta_text = canonical_json(meta)
            if "timing" in f:
                meta.update(_read_tree(f["timing"]))
    except StageFileError:
        raise
    except (OSError, KeyError, ValueError, TypeError) as exc:
        raise StageFileError(
            f"{path}: damaged or truncated stage file ({type(exc).__name__}); {_FIX}"
        ) from None
    if _content_hash(arrays, meta_text) != attrs.get("content_sha256"):
        raise StageFileError(f"{path}: content checksum mismatch (file damaged); {_FIX}")
    return StageData(
        stage=st, key=k, params=params, parents=parents, arrays=arrays, meta=meta, attrs=attrs
    )


class Timer:
    """Wall-clock timer for the ``wall_s`` attribute."""

    def __enter__(self) -> Timer:
        self.t0 = time.perf_counter()
        return self

    def __exit__(self, *exc) -> None:
        self.seconds = time.perf_counter() - self.t0


# ----------------------------------------------------------------------------- shared store
#
# A stage store is one folder of stage files by key, shared by many study folders
# (``eigensweep run --store DIR`` or the config key ``store``)::
#
#     DIR/<stage>/<key>.h5        the stage files (written only by write-then-rename)
#     DIR/export/<key>/           device-job folders of export jobs
#     DIR/studies/<id>.json       the study folders that use the store (for prune)
#     DIR/.locks/<stage>-<key>.lock   one lock per key while a job computes it
#     DIR/.store.lock             held shared by every running sweep, exclusively by prune
#
# A study using a store holds symbolic links ``results/<stage>/<key>.h5 -> DIR/<stage>/<key>.h5``
# (and ``results/export/<key> -> DIR/export/<key>``) and the pointer ``results/store.json``, so
# every reader of ``results/`` (collect, archive, show) works unchanged and reads through the
# same verified :func:`read_stage`. Locks are ``flock`` locks: released by the kernel when the
# holder dies, so a killed job never blocks the store.

#: Pointer file in a study's results folder naming the store it uses.
STORE_POINTER = "store.json"
_STUDIES = "studies"
_LOCKS = ".locks"
_STORE_LOCK = ".store.lock"


class StoreBusy(EigensweepError):
    """The store is in use by a running sweep (prune needs it to itself)."""


def store_root(path: str | Path) -> Path:
    """The store folder as an absolute path, created if missing; one-line error otherwise."""
    root = Path(path).expanduser().resolve()
    try:
        root.mkdir(parents=True, exist_ok=True)
        (root / _LOCKS).mkdir(exist_ok=True)
    except OSError as exc:
        raise EigensweepError(
            f"store {root}: cannot create it ({exc.strerror}); give --store a folder you can write to"
        ) from None
    if not os.access(root, os.W_OK):
        raise EigensweepError(f"store {root}: not writable; give --store a folder you can write to")
    return root


@contextlib.contextmanager
def _flock(path: Path, *, exclusive: bool, wait: bool = True) -> Iterator[None]:
    import fcntl

    fh = open(path, "a")  # noqa: SIM115 (held for the block)
    try:
        mode = fcntl.LOCK_EX if exclusive else fcntl.LOCK_SH
        try:
            fcntl.flock(fh, mode | (0 if wait else fcntl.LOCK_NB))
        except BlockingIOError:
            raise StoreBusy(str(path)) from None
        yield
    finally:
        fh.close()


def store_in_use(root: Path):
    """Shared lock on the store for the lifetime of a sweep (prune waits for none of them:
    it refuses while any is held)."""
    import fcntl

    fh = open(Path(root) / _STORE_LOCK, "a")  # noqa: SIM115 (held by the caller)
    fcntl.flock(fh, fcntl.LOCK_SH)
    return fh


def key_lock(root: Path, stage: str, key: str):
    """Exclusive lock of one key: a second writer of the same key waits, then finds it done."""
    return _flock(Path(root) / _LOCKS / f"{stage}-{key}.lock", exclusive=True)


def stored_valid(root: Path, stage: str, key: str) -> bool:
    """True when the store holds a verified stage file of ``key`` (and, for export, its
    device-job folder with its manifest)."""
    from .stage_table import job_folder, spec, stage_path

    path = stage_path(stage, key, root)
    if not path.is_file():
        return False
    try:
        read_stage(path, stage=stage, key=key)
    except EigensweepError:
        return False
    return "jobs" not in spec(stage).outputs or (job_folder(key, root) / "manifest.json").is_file()


def _symlink(target: Path, link: Path) -> None:
    """Point ``link`` at ``target`` atomically (a new link renamed over the old path)."""
    link.parent.mkdir(parents=True, exist_ok=True)
    if link.is_dir() and not link.is_symlink():
        import shutil

        shutil.rmtree(link)  # a device-job folder of a run without the store
    tmp = link.with_name(f".{link.name}.{os.getpid()}.link.tmp")
    with contextlib.suppress(FileNotFoundError):
        os.unlink(tmp)
    os.symlink(target, tmp)
    os.replace(tmp, link)


def link_stored(root: Path, stage: str, key: str, results: str | Path = "results") -> None:
    """Make the study's ``results/<stage>/<key>.h5`` (and device-job folder) refer to the store."""
    from .stage_table import job_folder, spec, stage_path

    root, results = Path(root), Path(results)
    if "jobs" in spec(stage).outputs:
        _symlink(job_folder(key, root), job_folder(key, results))
    _symlink(stage_path(stage, key, root), stage_path(stage, key, results))


def register_study(root: Path, results: str | Path = "results") -> None:
    """Record that the study folder ``results`` uses the store (its links are the references
    :func:`store_usage` counts) and write the study's pointer ``results/store.json``."""
    results = Path(results).resolve()
    entry = Path(root) / _STUDIES / f"{hashlib.sha256(str(results).encode()).hexdigest()[:16]}.json"
    if not entry.is_file():
        atomic_write_text(entry, json.dumps({"results": str(results)}) + "\n")
    pointer = results / STORE_POINTER
    text = json.dumps({"store": str(root)}) + "\n"
    if not pointer.is_file() or pointer.read_text() != text:
        atomic_write_text(pointer, text)


def read_pointer(results: str | Path = "results") -> Path | None:
    """The store named by a study's ``results/store.json``, or None."""
    pointer = Path(results) / STORE_POINTER
    if not pointer.is_file():
        return None
    try:
        from .inputs import read_bounded

        return Path(json.loads(read_bounded(pointer, 4096, "store pointer"))["store"])
    except (ValueError, KeyError, TypeError):
        raise EigensweepError(
            f"{pointer}: not a store pointer ({{'store': DIR}}); delete it or rerun with --store DIR"
        ) from None


def produce_stage(
    output: str | Path,
    stage: str,
    key: str,
    store: str | Path | None,
    compute,
) -> bool:
    """Write one stage job's output, through the store when there is one.

    Without a store ``compute(output)`` writes ``output``. With one, under the key's lock:
    if the store already holds a verified file of ``key`` nothing is computed, otherwise
    ``compute(DIR/<stage>/<key>.h5)`` writes it there (atomically, as every stage write);
    then ``output`` becomes a link to it. Two studies running the same key at the same time
    therefore compute it once and both refer to the one file.

    Returns:
        True when ``compute`` ran.
    """
    from .stage_table import stage_path

    if store is None:
        compute(str(output))
        return True
    root = store_root(store)
    results = Path(output).parent.parent
    ran = False
    with key_lock(root, stage, key):
        if not stored_valid(root, stage, key):
            compute(str(stage_path(stage, key, root)))
            ran = True
        link_stored(root, stage, key, results)
    register_study(root, results)
    return ran


@dataclass
class StoreEntry:
    """One key held by a store: its stage file and (export) device-job folder."""

    stage: str
    key: str
    paths: list[Path]
    size: int
    studies: int


@dataclass
class StoreUsage:
    """What a store holds and which study folders refer to it."""

    root: Path
    entries: list[StoreEntry]
    studies: list[Path]
    gone: list[Path]  # registrations of study folders that no longer exist
    litter: list[Path]  # temporary and lock files left by killed jobs

    @property
    def unreferenced(self) -> list[StoreEntry]:
        return [e for e in self.entries if not e.studies]


def _size(path: Path) -> int:
    if path.is_dir() and not path.is_symlink():
        return sum(p.stat().st_size for p in path.rglob("*") if p.is_file())
    return path.stat().st_size


def store_usage(root: str | Path) -> StoreUsage:
    """Every key the store holds with the number of registered study folders linking to it."""
    from .stage_table import STAGE_NAMES, job_folder

    root = Path(root).resolve()
    refs: dict[tuple[str, str], int] = {}
    studies, gone = [], []
    for entry in sorted((root / _STUDIES).glob("*.json")):
        try:
            results = Path(json.loads(entry.read_text())["results"])
        except (OSError, ValueError, KeyError, TypeError):
            gone.append(entry)
            continue
        if not results.is_dir():
            gone.append(entry)
            continue
        studies.append(results)
        seen: set[tuple[str, str]] = set()
        for stage in STAGE_NAMES:
            folder = results / stage
            if not folder.is_dir():
                continue
            for link in folder.iterdir():
                if not link.is_symlink():
                    continue
                target = Path(os.path.realpath(link))
                if target.parent == root / stage:
                    seen.add((stage, target.name.removesuffix(".h5")))
        for ref in seen:
            refs[ref] = refs.get(ref, 0) + 1
    entries, litter = [], sorted((root / _LOCKS).glob("*.lock"))
    for stage in STAGE_NAMES:
        folder = root / stage
        if not folder.is_dir():
            continue
        keys: dict[str, list[Path]] = {}
        for p in sorted(folder.iterdir()):
            if p.name.endswith(".tmp"):
                litter.append(p)
            elif p.suffix == ".h5" or (p.is_dir() and "jobs" in _outputs(stage)):
                keys.setdefault(p.name.removesuffix(".h5"), []).append(p)
        for key, paths in keys.items():
            if "jobs" in _outputs(stage):
                folder_k = job_folder(key, root)
                litter += [q for q in folder_k.glob(".*.tmp")] if folder_k.is_dir() else []
            entries.append(
                StoreEntry(
                    stage, key, paths, sum(_size(p) for p in paths), refs.get((stage, key), 0)
                )
            )
    return StoreUsage(root, entries, studies, gone, litter)


def _outputs(stage: str) -> tuple[str, ...]:
    from .stage_table import spec

    return spec(stage).outputs


def prune_store(root: str | Path, *, delete: bool) -> StoreUsage:
    """Files of ``root`` that no registered study folder refers to (and litter of killed
    jobs, registrations of removed study folders); removed when ``delete``.

    Holds the store's lock exclusively, so no sweep writes or links while it looks.

    Raises:
        EigensweepError: a sweep using the store is running.
    """
    import shutil

    root = Path(root).resolve()
    if not root.is_dir():
        raise EigensweepError(f"store {root}: no such folder; check --store")
    try:
        with _flock(root / _STORE_LOCK, exclusive=True, wait=False):
            usage = store_usage(root)
            if delete:
                for e in usage.unreferenced:
                    for p in e.paths:
                        if p.is_dir() and not p.is_symlink():
                            shutil.rmtree(p)
                        else:
                            p.unlink(missing_ok=True)
                for p in [*usage.litter, *usage.gone]:
                    p.unlink(missing_ok=True)
    except StoreBusy:
        raise EigensweepError(
            f"store {root}: a sweep using it is running; prune when it has finished"
        ) from None
    return usage
