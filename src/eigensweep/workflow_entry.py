"""Entry points called by the thin Snakemake scripts in ``workflow/scripts/``.

They send stderr to the job's log file, turn user-facing errors into one line (no traceback)
and a non-zero exit, and never leave a partial stage file (the store writes atomically).
"""

from __future__ import annotations

import os
import sys
import traceback

from .errors import EigensweepError
from .plan import Node


def _open_log(smk) -> None:
    if smk.log:
        sys.stderr = open(smk.log[0], "w", buffering=1)  # noqa: SIM115 (lives for the job)


def _fail(exc: BaseException, stage: str) -> None:
    line = f"eigensweep {stage}: {exc}"
    print(line, file=sys.stderr)
    if os.environ.get("EIGENSWEEP_DEBUG"):
        traceback.print_exc()
    print(line, file=sys.__stderr__)
    sys.exit(1)


def run_stage_job(smk, stage: str) -> None:
    """Run one keyed stage job inside Snakemake."""
    from .stages import STAGE_ACTIONS

    _open_log(smk)
    node_d = smk.params.node
    node = Node(node_d["stage"], node_d["key"], node_d["params"], node_d["parents"])
    inputs = {name: str(path) for name, path in smk.input.items()}
    try:
        STAGE_ACTIONS[stage](
            node, inputs, str(smk.output[0]), progress=lambda m: print(m, file=sys.stderr)
        )
    except EigensweepError as exc:
        _fail(exc, stage)


def run_collect_job(smk) -> None:
    """Write the summary table and plots inside Snakemake."""
    from .collect import collect

    _open_log(smk)
    try:
        files = collect(
            smk.params.rows,
            "results",
            smk.params.accuracy_mha,
            smk.params.exports,
            study=smk.params.study,
        )
    except EigensweepError as exc:
        _fail(exc, "collect")
    print("wrote " + ", ".join(map(str, files)), file=sys.stderr)
