"""What ``eigensweep run`` shows while a sweep runs.

By default one live progress line (jobs done / to run per stage, failures so far, elapsed,
estimated time left; drawn by ``tqdm`` on a terminal), one line per failed job naming its point
and its log, and a closing summary. Snakemake's own output goes to ``logs/run-<time>.log``
(``--verbose`` shows it live instead of the progress line). When the output is not a terminal
(CI logs, Slurm) the progress line becomes a plain text line at every tenth of the sweep.

Progress is read from the plan and the file system: a pending stage job is done when its stage
file appears (stage files appear only by an atomic rename), so the count does not depend on the
wording of Snakemake's log. Failures are read from Snakemake's ``Error in rule`` blocks
(their ``output:`` line names the stage file, hence the key and the point).
"""

from __future__ import annotations

import re
import subprocess
import sys
import threading
import time
from collections.abc import Iterable
from pathlib import Path
from typing import IO

from .stage_table import STAGE_NAMES, stage_path

_ERROR = re.compile(r"^Error in rule (\w+):")
_OUTPUT = re.compile(r"^\s+output: .*?results/(\w+)/([0-9a-f]{16})\.h5")
_LOG = re.compile(r"^\s+log: (\S+)")


def run_log_path(logs: str | Path = "logs") -> Path:
    """``logs/run-<UTC time>.log``: where a run's full engine log goes."""
    return Path(logs) / time.strftime("run-%Y%m%d-%H%M%S.log", time.gmtime())


def point_labels(plan) -> dict[str, str]:
    """A readable name for every stage key of the plan: molecule, point and the methods that
    the stage depends on (``h2 r=1.4``, ``h2 r=1.4 jordan_wigner tapered uccsd lbfgs exact``)."""
    out: dict[str, str] = {}
    for row in plan.rows:
        where = f"{row['molecule']} {row['point']}"
        out.setdefault(row["key_integrals"], where)
        out.setdefault(row["key_hamiltonian"], f"{where} {row['mapping']}")
        taper = "tapered" if row["tapered"] else "untapered"
        out.setdefault(row["key_taper"], f"{where} {row['mapping']} {taper}")
        out.setdefault(
            row["key"],
            f"{where} {row['mapping']} {taper} {row['ansatz']} {row['optimizer']} {row['estimator']}",
        )
    for ex in plan.exports:
        for k in (ex.get("key_export"), ex.get("key_reconcile")):
            if k:
                out.setdefault(k, f"{ex['molecule']} {ex['point']} {ex['ansatz']} device job")
    return out


def _clock(seconds: float) -> str:
    s = int(round(seconds))
    return (
        f"{s // 3600}:{s % 3600 // 60:02d}:{s % 60:02d}" if s >= 3600 else f"{s // 60}:{s % 60:02d}"
    )


def _short(text: str, n: int = 160) -> str:
    text = " ".join(text.split())
    return text if len(text) <= n else text[: n - 3] + "..."


class RunDisplay:
    """Progress, failures and the closing summary of one run.

    Args:
        plan: the sweep's :class:`~eigensweep.plan.Plan` (for readable point names).
        pending: the stage nodes this run has to compute.
        results: the study's results folder.
        log: the file that receives the engine's full output.
        verbose: show the engine output live (no progress line).
        out: where lines go (default stdout); ``tty`` says whether it is a terminal
            (default: ``out.isatty()``).
    """

    def __init__(
        self,
        plan,
        pending: Iterable,
        results: str | Path,
        log: str | Path,
        *,
        verbose: bool = False,
        out: IO[str] | None = None,
        tty: bool | None = None,
    ) -> None:
        self.out = out or sys.stdout
        self.tty = self.out.isatty() if tty is None else tty
        self.verbose = verbose
        self.results = Path(results)
        self.log_path = Path(log)
        self.log_path.parent.mkdir(parents=True, exist_ok=True)
        self._log = open(self.log_path, "w", buffering=1)  # noqa: SIM115 (closed in finish)
        self.labels = point_labels(plan)
        self.waiting = {n.key: n.stage for n in pending}
        self.total = {s: 0 for s in STAGE_NAMES}
        for stage in self.waiting.values():
            self.total[stage] += 1
        self.done = {s: 0 for s in STAGE_NAMES}
        self.failed: list[tuple[str, str, str]] = []  # (stage, key, log)
        self.blocked: set[str] = set()  # waiting jobs downstream of a failure
        self._children: dict[str, list[str]] = {}
        for node in plan.nodes.values():
            for parent in node.parents.values():
                self._children.setdefault(parent, []).append(node.key)
        self._block: dict | None = None
        self._lock = threading.Lock()
        self._bar = None
        self._next_tenth = 1
        self.t0 = time.monotonic()

    # ------------------------------------------------------------------ state

    @property
    def n_total(self) -> int:
        return sum(self.total.values())

    @property
    def n_done(self) -> int:
        return sum(self.done.values())

    def _counts_text(self) -> str:
        return ", ".join(
            f"{s} {self.done[s]}/{self.total[s]}" for s in STAGE_NAMES if self.total[s]
        )

    def _stages_text(self) -> str:
        if self.n_total and not self.failed and self.n_done >= self.n_total:
            return self._counts_text() + "; writing tables and plots"
        return self._counts_text()

    @property
    def _n_settled(self) -> int:
        """Jobs that will not run any more: failed, or downstream of a failure."""
        return len(self.failed) + len(self.blocked)

    def _eta(self) -> str:
        if not self.n_done:
            return "?"
        elapsed = time.monotonic() - self.t0
        left = elapsed / self.n_done * (self.n_total - self.n_done - self._n_settled)
        return _clock(max(left, 0.0))

    def progress_text(self) -> str:
        """The progress line as plain text."""
        return (
            f"eigensweep: {self.n_done}/{self.n_total} stage jobs ({self._stages_text()}), "
            f"{len(self.failed)} failed, {_clock(time.monotonic() - self.t0)} elapsed, "
            f"~{self._eta()} left"
        )

    # ------------------------------------------------------------------ input

    def feed(self, line: str) -> None:
        """One line of engine output: to the log file (and the screen with ``verbose``);
        ``Error in rule`` blocks become one failure line each."""
        with self._lock:
            self._log.write(line if line.endswith("\n") else line + "\n")
            if self.verbose:
                self.out.write(line if line.endswith("\n") else line + "\n")
                self.out.flush()
            self._parse(line.rstrip("\n"))

    def _parse(self, line: str) -> None:
        m = _ERROR.match(line)
        if m:
            self._close_block()
            self._block = {"rule": m.group(1)}
            return
        if self._block is None:
            return
        if m := _OUTPUT.match(line):
            self._block.setdefault("stage", m.group(1))
            self._block.setdefault("key", m.group(2))
        elif m := _LOG.match(line):
            self._block.setdefault("log", m.group(1))
        elif not line.startswith(" "):
            self._close_block()

    def _close_block(self) -> None:
        block, self._block = self._block, None
        if not block or "key" not in block:
            return
        stage, key = block["stage"], block["key"]
        if any(k == key for _, k, _ in self.failed):
            return
        log = block.get("log") or f"logs/{stage}/{key}.log"
        self.failed.append((stage, key, log))
        self.waiting.pop(key, None)
        todo = [key]
        while todo:  # jobs that need the failed job's output will not run
            for child in self._children.get(todo.pop(), ()):
                if child in self.waiting and child not in self.blocked:
                    self.blocked.add(child)
                    todo.append(child)
        self._say(
            f"eigensweep: FAILED {stage} {self.labels.get(key, key)}: {_short(self._reason(log))}"
            f" (log: {log})"
        )

    def _reason(self, log: str) -> str:
        """The job's own one-line error (``eigensweep <stage>: ...``) or its log's last line."""
        try:
            lines = [ln for ln in Path(log).read_text(errors="replace").splitlines() if ln.strip()]
        except OSError:
            return "no log written"
        for ln in reversed(lines):
            if ln.startswith("eigensweep "):
                return ln.split(": ", 1)[1] if ": " in ln else ln
        return lines[-1] if lines else "empty log"

    # ------------------------------------------------------------------ output

    def _say(self, text: str) -> None:
        if self._bar is not None:
            self._bar.write(text, file=self.out)
        else:
            print(text, file=self.out, flush=True)

    def tick(self) -> None:
        """Count stage files that appeared and redraw the progress line."""
        with self._lock:
            for key, stage in list(self.waiting.items()):
                if stage_path(stage, key, self.results).exists():
                    self.done[stage] += 1
                    del self.waiting[key]
            if self.verbose or not self.n_total:
                return
            if self.tty:
                self._draw()
            else:
                crossed = False
                while self.n_done + self._n_settled >= self._next_tenth * self.n_total / 10:
                    self._next_tenth += 1
                    crossed = True
                if crossed:
                    print(self.progress_text(), file=self.out, flush=True)

    def _draw(self) -> None:
        if self._bar is None:
            from tqdm import tqdm

            self._bar = tqdm(
                total=self.n_total,
                file=self.out,
                bar_format="{desc}{n_fmt}/{total_fmt} jobs [{elapsed}<{remaining}]{postfix}",
                desc="eigensweep: ",
                dynamic_ncols=True,
                leave=False,
            )
        self._bar.total = self.n_total - self._n_settled
        self._bar.n = self.n_done
        self._bar.set_postfix_str(
            f"{self._stages_text()}; {len(self.failed)} failed", refresh=False
        )
        self._bar.refresh()

    def finish(self, returncode: int) -> list[str]:
        """Close the progress line and the log; print and return the closing summary."""
        self.tick()
        with self._lock:
            self._close_block()
            self._log.close()
            if self._bar is not None:
                self._bar.close()
                self._bar = None
        not_run = len(self.waiting)
        elapsed = _clock(time.monotonic() - self.t0)
        if returncode == 0 and not self.failed:
            line = f"eigensweep: {self.n_done} stage jobs run in {elapsed}"
        else:
            line = (
                f"eigensweep: {len(self.failed)} stage job(s) failed, {self.n_done} done, "
                f"{not_run} not run in {elapsed}"
            )
        stages = f" ({self._counts_text()})" if self.n_total else ""
        lines = [f"{line}{stages}; engine log: {self.log_path}"]
        for line in lines:
            print(line, file=self.out, flush=True)
        return lines


def run_engine(
    cmd: list[str], display: RunDisplay, poll_s: float = 0.5, start=subprocess.Popen
) -> int:
    """Run the engine command, its output through ``display``; returns its exit status.

    The output is read on a thread; the progress line is redrawn every ``poll_s`` seconds.
    On Ctrl-C the engine (in the same process group) gets the signal too; it is waited for.
    ``start`` starts the engine (``subprocess.Popen`` or the CLI's supervised start).
    """
    proc = start(
        cmd,
        stdout=subprocess.PIPE,
        stderr=subprocess.STDOUT,
        text=True,
        bufsize=1,
        errors="replace",
    )

    def pump() -> None:
        assert proc.stdout is not None
        for line in proc.stdout:
            display.feed(line)

    reader = threading.Thread(target=pump, daemon=True)
    reader.start()
    try:
        while proc.poll() is None:
            display.tick()
            time.sleep(poll_s)
    except KeyboardInterrupt:
        proc.wait()
        reader.join(timeout=5)
        display.finish(130)
        raise
    reader.join()
    display.finish(proc.returncode)
    return proc.returncode
