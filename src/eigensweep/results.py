"""Load a study's tables into pandas, with the unit of every column in the metadata.

Examples:
    >>> from eigensweep import results
    >>> df = results.load("default")                     # results/default/summary.csv
    >>> df.attrs["units"]["error_mha"]
    'mHa'
    >>> df.groupby(["molecule", "optimizer"])["error_mha"].max()   # doctest: +SKIP
"""

from __future__ import annotations

from pathlib import Path
from typing import Any

from .errors import EigensweepError

#: Tables a study folder holds, by the name given to :func:`load`.
TABLES = ("summary", "device_summary", "analysis")

_BOOLEAN = ("tapered", "below_exact", "converged")
_TEXT = (
    "molecule",
    "sweep",
    "point",
    "basis",
    "mapping",
    "ansatz",
    "optimizer",
    "estimator",
    "stop_reason",
    "key",
    "notes",
    "estimate",
    "key_export",
    "key_reconcile",
    "variable",
    "unit",
    "warning",
)


def _units(table: str, columns: list[str]) -> dict[str, str]:
    from .analysis import ANALYSIS_COLUMNS
    from .collect import DEVICE_COLUMNS, SCAN_SUFFIX, SUMMARY_COLUMNS

    spec = {
        "summary": SUMMARY_COLUMNS,
        "device_summary": DEVICE_COLUMNS,
        "analysis": ANALYSIS_COLUMNS,
    }
    known = {c.name: c.unit for c in spec[table]}
    suffix_unit = {"angstrom": "Å", "bohr": "bohr", "degree": "degree"}
    out = {}
    for col in columns:
        if col in known:
            out[col] = known[col]
        elif col.startswith("scan_"):
            out[col] = next(
                (suffix_unit[u] for u, s in SCAN_SUFFIX.items() if s and col.endswith(s)), ""
            )
        else:
            out[col] = ""
    return out


def load(study: str, table: str = "summary", results: str | Path = "results") -> Any:
    """A study table as a pandas DataFrame; ``df.attrs["units"]`` maps column -> unit.

    Args:
        study: the study name (folder ``results/<study>/``), or a path to that folder.
        table: ``"summary"`` (default), ``"device_summary"`` or ``"analysis"``.
        results: the results folder the study lives in.

    Returns:
        ``pandas.DataFrame``: empty cells as missing (NaN), ``tapered``/``converged``/
        ``below_exact`` as booleans, numbers as floats or integers; ``df.attrs`` holds
        ``units``, ``descriptions``, ``study`` and ``path``.

    Raises:
        EigensweepError: unknown table, or the file does not exist (run the study first).
    """
    try:
        import pandas as pd
    except ImportError:  # pragma: no cover
        raise EigensweepError("eigensweep.results.load needs pandas; pip install pandas") from None
    if table not in TABLES:
        raise EigensweepError(f"table {table!r}: unknown; use one of {', '.join(TABLES)}")
    folder = Path(study) if Path(study).is_dir() else Path(results) / study
    path = folder / f"{table}.csv"
    if not path.is_file():
        raise EigensweepError(f"{path}: missing; run the study (eigensweep run --config ...) first")
    df = pd.read_csv(
        path, dtype={c: "string" for c in _TEXT}, keep_default_na=False, na_values=[""]
    )
    for col in _BOOLEAN:
        if col in df.columns:
            df[col] = (
                df[col]
                .map({"True": True, "False": False, True: True, False: False})
                .astype("boolean")
            )
    from .analysis import ANALYSIS_COLUMNS
    from .collect import DEVICE_COLUMNS, SUMMARY_COLUMNS

    descriptions = {
        c.name: c.description for c in SUMMARY_COLUMNS + DEVICE_COLUMNS + ANALYSIS_COLUMNS
    }
    df.attrs["units"] = _units(table, list(df.columns))
    df.attrs["descriptions"] = {c: descriptions.get(c, "") for c in df.columns}
    df.attrs["study"] = folder.name
    df.attrs["path"] = str(path)
    return df
