"""Entry points called by the thin Snakemake scripts in ``workflow/scripts/``.

They send stderr to the job's log file, turn user-facing errors into one line (no traceback)
and a non-zero exit, and never leave a partial stage file (the store writes atomically).
"""

from __future__ import annotations

import os
import sys
import traceback

from .errors import EigensweepError
from .paths import STORE_KEY
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
    _open_log(smk)
    node_d = smk.params.node
    node = Node(node_d["stage"], node_d["key"], node_d["params"], node_d["parents"])
    inputs = {name: str(path) for name, path in smk.input.items()}
    try:
        run_stage(node, inputs, str(smk.output[0]), store=smk.config.get(STORE_KEY))
    except EigensweepError as exc:
        _fail(exc, stage)


def run_stage(node: Node, inputs: dict[str, str], output: str, store: str | None = None) -> bool:
    """Run one stage job into ``output`` (``results/<stage>/<key>.h5``), through the shared
    stage store ``store`` when given (:func:`eigensweep.store.produce_stage`: computed once
    under the key's lock, then linked). Progress lines go to stderr (the job's log).

    Returns:
        True when the stage was computed (False: the store already held it).
    """
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
