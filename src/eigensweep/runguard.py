"""One sweep at a time per folder, and stage files trusted only for what they prove.

Used by every route into the workflow: ``eigensweep run`` and a plain ``snakemake`` in a sweep
folder (``workflow/rules/common.smk``).

The folder lock is an OS file lock (``flock``) on ``.eigensweep-run.lock`` in the sweep folder,
outside ``.snakemake/`` (which users are told they may delete). The kernel drops it when the
last process holding it ends, however it ends, so it lives exactly as long as the work:
``eigensweep run`` takes it and passes it to the Snakemake it starts (an inherited descriptor,
named in ``EIGENSWEEP_RUN_LOCK_FD``); a plain ``snakemake`` takes it itself while its Snakefile
is parsed. Under the lock no other sweep runs in the folder, so a Snakemake lock left in
``.snakemake/locks`` is stale (its owner was killed) and may be removed with
``snakemake --unlock``.

Damaged stage files (a file that fails ``store.read_stage``: truncated, bit flips, a key that
does not hash to its name) are moved to ``results/.damaged/<time>/`` before Snakemake builds
its DAG, so Snakemake rebuilds exactly them.
"""

from __future__ import annotations

import fcntl
import os
import time
from collections.abc import Callable, Iterable
from pathlib import Path
from typing import TextIO

from .errors import EigensweepError

LOCK_FILE = ".eigensweep-run.lock"
#: Set by ``eigensweep run`` for the Snakemake it starts: the descriptor of the held lock.
LOCK_FD_ENV = "EIGENSWEEP_RUN_LOCK_FD"
#: Set by ``eigensweep run`` after it verified (and quarantined) the stage files itself.
VERIFIED_ENV = "EIGENSWEEP_VERIFIED"
#: Set by ``eigensweep run --dry-run``: the workflow moves nothing.
DRY_RUN_ENV = "EIGENSWEEP_DRY_RUN"

_held: list[TextIO] = []  # the lock file of this process, kept open while the process lives


class FolderBusy(EigensweepError):
    """Another sweep holds the folder lock."""


def _lock_path(folder: str | Path = ".") -> Path:
    return Path(folder) / LOCK_FILE


def acquire(
    folder: str | Path = ".", wait: bool = True, say: Callable[[str], None] = print
) -> TextIO:
    """Take the folder lock (waiting for another sweep when ``wait``); returns its file."""
    path = _lock_path(folder)
    said = False
    while True:
        fh = open(path, "a+")  # noqa: SIM115 (held for the whole run)
        try:
            fcntl.flock(fh, fcntl.LOCK_EX | fcntl.LOCK_NB)
        except BlockingIOError:
            if not wait:
                fh.close()
                raise FolderBusy(
                    f"another sweep is running in {Path(folder).resolve()} (it holds "
                    f"{LOCK_FILE}); wait for it to finish, or use eigensweep run, which waits"
                ) from None
            if not said:
                say("eigensweep: another sweep is running in this folder; waiting for it to finish")
                said = True
            fcntl.flock(fh, fcntl.LOCK_EX)
        # the file we locked must still be the one at the path (not deleted meanwhile)
        try:
            same = os.path.samestat(os.fstat(fh.fileno()), path.stat())
        except OSError:
            same = False
        if same:
            _held.append(fh)
            return fh
        fh.close()


def release(fh: TextIO) -> None:
    if fh in _held:
        _held.remove(fh)
    fh.close()


def inherited(folder: str | Path = ".") -> bool:
    """True when this process inherited the held folder lock from ``eigensweep run``."""
    fd = os.environ.get(LOCK_FD_ENV)
    if not fd or not fd.isdigit():
        return False
    try:
        st = os.fstat(int(fd))
        lock = _lock_path(folder).stat()
    except OSError:
        return False
    return (st.st_dev, st.st_ino) == (lock.st_dev, lock.st_ino)


def workflow_lock(folder: str | Path = ".") -> None:
    """The lock for a Snakemake main process: inherited, or taken now (refused when busy)."""
    if _held or inherited(folder):
        return
    acquire(folder, wait=False)


def stale_snakemake_lock(folder: str | Path = ".") -> bool:
    """Snakemake lock files present; under the folder lock they can only be stale."""
    locks = Path(folder) / ".snakemake" / "locks"
    return locks.is_dir() and any(locks.iterdir())


def clean_tmp(results: str | Path = "results") -> None:
    """Remove leftovers of killed writes (never stage files: those appear only by rename).

    Only under the folder lock: then no other writer exists."""
    for tmp in Path(results).rglob(".*.tmp"):
        tmp.unlink(missing_ok=True)


def stage_status(node, results: str | Path = "results") -> str:
    """``cached``, ``pending`` or ``damaged`` for one stage job of a plan."""
    f = Path(results) / node.stage / f"{node.key}.h5"
    if not f.exists():
        return "pending"
    from .store import read_stage  # (h5py only once there are files to check)

    try:
        read_stage(f, stage=node.stage, key=node.key)
    except EigensweepError:
        return "damaged"
    return "cached"


def quarantine(nodes: Iterable, results: str | Path = "results", store: Path | None = None) -> Path:
    """Move damaged stage files aside (never delete evidence), return the folder.

    A damaged file of the shared store is moved inside the store (``DIR/.damaged/``, under the
    key's lock) and the study's link to it removed."""
    from .stage_table import stage_path
    from .store import key_lock

    results = Path(results)
    stamp = time.strftime("%Y%m%d-%H%M%S")
    folder = results / ".damaged" / stamp
    for node in nodes:
        src = stage_path(node.stage, node.key, results)
        if store is not None:
            target = stage_path(node.stage, node.key, store)
            if not src.exists() or (src.is_symlink() and src.resolve() == target):
                with key_lock(store, node.stage, node.key):
                    if target.is_file():
                        folder = store / ".damaged" / stamp
                        dst = folder / node.stage / target.name
                        dst.parent.mkdir(parents=True, exist_ok=True)
                        os.replace(target, dst)
                if src.is_symlink():
                    src.unlink()
                continue
        dst = folder / node.stage / src.name
        dst.parent.mkdir(parents=True, exist_ok=True)
        os.replace(src, dst)
    return folder


def verify_and_quarantine(
    plan,
    results: str | Path = "results",
    move: bool = True,
    say: Callable[[str], None] = print,
    store: Path | None = None,
) -> dict[str, str]:
    """Status of every stage job of ``plan`` (as found, before any move); damaged files are
    moved aside when ``move``, so Snakemake rebuilds them."""
    status = {key: stage_status(node, results) for key, node in plan.nodes.items()}
    damaged = [plan.nodes[k] for k, st in status.items() if st == "damaged"]
    if damaged and move:
        moved = quarantine(damaged, results, store)
        say(
            f"eigensweep: {len(damaged)} damaged stage file(s) moved to {moved} and will be "
            "recomputed"
        )
    return status
