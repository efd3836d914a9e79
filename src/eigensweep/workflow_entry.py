"""Stage actions as Snakemake runs them: the ``run:`` blocks of ``workflow/rules/*.smk``.

Every job runs inside the Snakemake process that schedules it (a worker thread of Snakemake's
local executor; on a cluster, of the Snakemake process inside the scheduler job that runs a
group), so one interpreter and its imports (PySCF, OpenFermion, SciPy) serve every job of a run.
Each job still has its own log, ``logs/<stage>/<key>.log``: what the job prints, and what the
libraries it calls print through ``sys.stdout``/``sys.stderr``, goes there (a per-thread
stream), closed by one line with the job's wall and CPU seconds. A failing job fails alone:
its error is one line in its log and in Snakemake's report, the other jobs go on, and no
partial stage file is left (the store writes atomically).
"""

from __future__ import annotations

import importlib
import os
import sys
import threading
import time
import traceback
from collections.abc import Iterator
from contextlib import contextmanager
from typing import TextIO

from .errors import EigensweepError
from .plan import Node, parent_files


class StageJobError(Exception):
    """A stage job stopped on bad input or a failed check: one line, no traceback needed."""


class _ThreadStream:
    """``sys.stdout``/``sys.stderr`` that write to the current job's log in a job thread."""

    def __init__(self, default: TextIO) -> None:
        self._default = default
        self._local = threading.local()

    def _target(self) -> TextIO:
        return getattr(self._local, "stream", None) or self._default

    def write(self, text: str) -> int:
        return self._target().write(text)

    def flush(self) -> None:
        self._target().flush()

    def __getattr__(self, name: str):
        return getattr(self._target(), name)


_install_lock = threading.Lock()


def _thread_streams() -> tuple[_ThreadStream, _ThreadStream]:
    """The per-thread stdout and stderr, installed once per process."""
    with _install_lock:
        if not isinstance(sys.stdout, _ThreadStream):
            sys.stdout = _ThreadStream(sys.stdout)
        if not isinstance(sys.stderr, _ThreadStream):
            sys.stderr = _ThreadStream(sys.stderr)
    return sys.stdout, sys.stderr  # type: ignore[return-value]


@contextmanager
def job_log(path: str | os.PathLike | None) -> Iterator[TextIO]:
    """Send this thread's stdout/stderr to ``path`` (the job's log) while the job runs."""
    if path is None:
        yield sys.__stderr__
        return
    out, err = _thread_streams()
    os.makedirs(os.path.dirname(os.fspath(path)) or ".", exist_ok=True)
    with open(path, "w", buffering=1) as fh:
        out._local.stream = err._local.stream = fh
        try:
            yield fh
        finally:
            out._local.stream = err._local.stream = None


def _log_path(log) -> str | None:
    return str(log[0]) if log else None


def _finish(fh: TextIO, what: str, wall0: float, cpu0: float) -> None:
    wall = time.perf_counter() - wall0
    cpu = time.thread_time() - cpu0
    print(f"eigensweep {what}: done in {wall:.2f} s ({cpu:.2f} s CPU in this job)", file=fh)


def _fail(fh: TextIO, exc: BaseException, what: str) -> StageJobError:
    line = f"eigensweep {what}: {exc}"
    print(line, file=fh)
    if os.environ.get("EIGENSWEEP_DEBUG"):
        traceback.print_exc(file=fh)
    return StageJobError(line)


_IMPORT_LOCK = threading.Lock()
_IMPORTED: set[str] = set()
# Modules stage actions import inside functions; OpenFermion only where a stage uses it.
_SCIENCE = (
    "eigensweep.stages",
    "eigensweep.chem",
    "eigensweep.qubit",
    "eigensweep.vqe",
    "eigensweep.vqe.detspace",
    "eigensweep.device",
)
_STAGE_IMPORTS = {"hamiltonian": ("openfermion",)}


def import_science(stage: str) -> None:
    """Import the modules a stage job needs, one thread at a time.

    Stage jobs run in threads of one Snakemake process (``force-use-threads``). Two threads
    importing the same package tree at once can see a partially initialised module (Python's
    import system locks modules one by one, so package ``__init__`` chains that import each
    other can interleave): measured as ``cannot import name 'MAPPINGS' from partially
    initialized module 'eigensweep.qubit.mapping'`` when a resumed sweep started a hamiltonian
    and an optimize job together. Importing under one lock before the action removes the race.
    """
    wanted = _SCIENCE + _STAGE_IMPORTS.get(stage, ())
    if _IMPORTED.issuperset(wanted):
        return
    with _IMPORT_LOCK:
        for name in wanted:
            if name not in _IMPORTED:
                importlib.import_module(name)
                _IMPORTED.add(name)


def run_stage(node: Node, inputs: dict[str, str], output: str, store: str | None = None) -> bool:
    """Run one stage job into ``output`` (``results/<stage>/<key>.h5``), through the shared
    stage store ``store`` when given (:func:`eigensweep.store.produce_stage`: computed once
    under the key's lock, then linked). Progress lines go to stderr (the job's log).

    Returns:
        True when the stage was computed (False: the store already held it).
    """
    import_science(node.stage)
    from .stages import STAGE_ACTIONS
    from .store import produce_stage

    action = STAGE_ACTIONS[node.stage]
    ran = produce_stage(
        output,
        node.stage,
        node.key,
        store,
        lambda out: action(node, inputs, out, progress=lambda m: print(m, file=sys.stderr)),
    )
    if not ran:
        print(f"{node.stage} {node.key}: already in the store {store}; linked", file=sys.stderr)
    return ran


def stage_job(stage: str, input, output, params, log, store: str | None = None) -> None:
    """One keyed stage job: the ``run:`` block of ``workflow/rules/<stage>.smk``."""
    node_d = params.node
    node = Node(node_d["stage"], node_d["key"], node_d["params"], node_d["parents"])
    # a verified stage file names no inputs (workflow/rules/common.smk); forced to rerun
    # anyway (snakemake --forcerun), it reads its parents from the plan
    inputs = {name: str(path) for name, path in input.items()} or parent_files(node)
    what = f"{stage} {node.key}"
    with job_log(_log_path(log)) as fh:
        wall0, cpu0 = time.perf_counter(), time.thread_time()
        try:
            run_stage(node, inputs, str(output[0]), store)
        except EigensweepError as exc:
            raise _fail(fh, exc, what) from None
        except Exception:
            traceback.print_exc(file=fh)
            raise
        _finish(fh, what, wall0, cpu0)


def collect_job(params, log) -> None:
    """Write the study's tables and plots (the ``run:`` block of ``collect.smk``)."""
    from .collect import collect

    with job_log(_log_path(log)) as fh:
        wall0, cpu0 = time.perf_counter(), time.thread_time()
        try:
            files = collect(
                params.rows,
                "results",
                params.accuracy_mha,
                params.exports,
                study=params.study,
                spectrum_point=params.spectrum_point,
            )
        except EigensweepError as exc:
            raise _fail(fh, exc, "collect") from None
        except Exception:
            traceback.print_exc(file=fh)
            raise
        print("wrote " + ", ".join(map(str, files)), file=fh)
        _finish(fh, "collect", wall0, cpu0)
