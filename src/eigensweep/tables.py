"""Plain tables: a column description type and the one CSV writer of study tables."""

from __future__ import annotations

import csv
import math
from dataclasses import dataclass
from pathlib import Path

import numpy as np

from .store import atomic_path


@dataclass(frozen=True)
class Column:
    """One table column: its name (with unit suffix), unit and meaning."""

    name: str
    unit: str
    description: str


def format_cell(v) -> str:
    """Cell text: floats at 10 significant digits, missing as empty."""
    if isinstance(v, (float, np.floating)):
        return "" if not math.isfinite(v) else format(float(v), ".10g")
    if v is None:
        return ""
    return str(v)


#: Prefix of the per-target cost columns of the summary (``target_<name>_<metric>``).
TARGET_PREFIX = "target_"


def _columns(rows: list[dict], table: list[Column]) -> list[str]:
    names = [c.name for c in table]
    scan = list(dict.fromkeys(k for r in rows for k in r if k.startswith("scan_")))
    i = names.index("point") + 1 if "point" in names else 0
    names = names[:i] + scan + names[i:]
    target = list(dict.fromkeys(k for r in rows for k in r if k.startswith(TARGET_PREFIX)))
    target = [k for k in target if k not in names]
    j = names.index("key") if "key" in names else len(names)
    return names[:j] + target + names[j:]


def write_table(rows: list[dict], path: str | Path, table: list[Column]) -> Path:
    """Write rows as CSV atomically (LF line endings, 10 significant digits)."""
    path = Path(path)
    cols = _columns(rows, table)
    with atomic_path(path) as tmp, open(tmp, "w", newline="", encoding="utf-8") as fh:
        w = csv.DictWriter(fh, fieldnames=cols, extrasaction="ignore", lineterminator="\n")
        w.writeheader()
        for r in rows:
            w.writerow({c: format_cell(r.get(c, "")) for c in cols})
    return path
