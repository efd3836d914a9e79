"""Where the workflow files live and where stage files go."""

from __future__ import annotations

from pathlib import Path

from .stage_table import STAGE_NAMES, stage_path

STAGES = STAGE_NAMES


def repo_root() -> Path:
    """The repository holding the Snakefile (the package is installed from it in editable mode)."""
    here = Path(__file__).resolve()
    for parent in here.parents:
        if (parent / "Snakefile").is_file() and (parent / "workflow").is_dir():
            return parent
    raise FileNotFoundError(
        "eigensweep: cannot find the workflow (Snakefile); install eigensweep from its repository "
        "with 'pip install -e .'"
    )


def schema_path() -> Path:
    return repo_root() / "workflow" / "schemas" / "config.schema.yaml"


def stage_file(stage: str, key: str, results: str | Path = "results") -> Path:
    """Path of one stage file: ``results/<stage>/<key>.h5`` (from the stage table)."""
    return stage_path(stage, key, results)
