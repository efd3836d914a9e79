"""Old API and option names stay gone (issue 13): outside tests/ they appear only in the tables
that map them to their replacements (DEVELOPERS.md "Renamed names", config/README.md "Renamed and
removed options") and in the schema's one-line refusals of old config keys."""

from __future__ import annotations

import re
from pathlib import Path

ROOT = Path(__file__).resolve().parents[1]
OLD = [
    # the words the issue names
    "tensored",
    "find_z2_symmetries",
    "from_labels",
    "PauliSum",
    "ry_rz",
    "fermionic_sd",
    "fermionic_gsd",
    "target_step",
    "calibration_samples",
    "average_last",
    "success_tolerance",
    "fail_tolerance",
    # the other renamed API names
    "TaperResult",
    "EnergyEstimate",
    "apply_tensored_inverse",
    "apply_pauli_sum",
    "no_taper",
    "z2_symmetries",
    "z_only",
    "extrapolate_richardson",
    "extrapolate_linear",
    "fold_circuit",
    "unfold_circuit",
    "qubit_pool",
    "pool_terms",
]
PATTERN = re.compile(r"\b(" + "|".join(OLD) + r")\b|Z-only|\.simplify\(|\bto_sparse\b")
TABLE_HEADINGS = ("## Renamed names", "### Renamed and removed options")


def _files():
    for d in ("src", "workflow", "benchmarks", "docs", "config"):
        for p in sorted((ROOT / d).rglob("*")):
            if p.is_file() and p.suffix in {".py", ".md", ".yaml", ".yml", ".smk", ".rst"}:
                yield p
    for name in ("README.md", "DEVELOPERS.md", "Snakefile"):
        yield ROOT / name


def _allowed_lines(path: Path, lines: list[str]) -> set[int]:
    """Line numbers of the old->new tables (markdown) and the schema's refusal entries."""
    allowed: set[int] = set()
    if path.suffix == ".md":
        inside = False
        for i, line in enumerate(lines):
            if line.startswith("#"):
                inside = line.strip() in TABLE_HEADINGS
            if inside:
                allowed.add(i)
    if path.name == "config.schema.yaml":
        allowed |= {i for i, line in enumerate(lines) if "renamed" in line}
    return allowed


def test_old_names_appear_only_in_the_rename_tables():
    # reference: the list of names in issue 13 ("Must show")
    hits = []
    for path in _files():
        lines = path.read_text(encoding="utf-8").splitlines()
        allowed = _allowed_lines(path, lines)
        for i, line in enumerate(lines):
            m = PATTERN.search(line)
            if m and i not in allowed:
                hits.append(f"{path.relative_to(ROOT)}:{i + 1}: {m.group(0)}")
    assert not hits, "old names outside the rename tables:\n" + "\n".join(hits)
