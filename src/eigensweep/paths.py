"""Where the workflow files live and where stage files go."""

from __future__ import annotations

import sysconfig
from pathlib import Path

from .stage_table import STAGE_NAMES, stage_path

STAGES = STAGE_NAMES


def repo_root() -> Path:
    """The folder holding the ``Snakefile``, ``workflow/``, ``profiles/`` and ``config/``.

    For an editable install (``pip install -e .``, ``make install``) this is the repository
    the package is imported from (``<repo>/src/eigensweep``); for an install from a wheel it is
    ``<prefix>/share/eigensweep``, where the wheel puts the workflow (``pyproject.toml``,
    ``[tool.setuptools.data-files]``).
    """
    here = Path(__file__).resolve().parent
    repo = here.parents[1]
    if (
        here.parent.name == "src"
        and (repo / "Snakefile").is_file()
        and (repo / "workflow").is_dir()
    ):
        return repo
    candidates = [parent / "share" / "eigensweep" for parent in here.parents]
    candidates.append(Path(sysconfig.get_path("data")) / "share" / "eigensweep")
    for root in candidates:
        if (root / "Snakefile").is_file() and (root / "workflow").is_dir():
            return root
    raise FileNotFoundError(
        "eigensweep: cannot find the workflow (Snakefile) of this installation; reinstall "
        "eigensweep (pip install eigensweep, or pip install -e . in its repository)"
    )


def stage_file(stage: str, key: str, results: str | Path = "results") -> Path:
    """Path of one stage file: ``results/<stage>/<key>.h5`` (from the stage table)."""
    return stage_path(stage, key, results)


#: Config key (and ``snakemake --config`` key) naming the shared stage store.
STORE_KEY = "store"


def sweep_store(given: str | Path | None, cfg: dict | None = None) -> Path | None:
    """The stage store of a sweep: ``given`` (``--store DIR``, ``--config store=DIR``) or
    else the config's ``store`` key; relative paths are taken from the sweep folder (the
    current folder). None: stage files live in the study's own ``results/``.
    """
    value = given if given not in (None, "") else (cfg or {}).get(STORE_KEY)
    if value in (None, ""):
        return None
    return Path(value).expanduser().resolve()
