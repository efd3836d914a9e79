"""Bad input table: each case exits non-zero with one line naming the key or file, no traceback,
and leaves results/ byte-identical (common practice for command-line tools; the brief's rule)."""

from __future__ import annotations

import hashlib
from pathlib import Path

import pytest

from eigensweep.cli import main

GOOD_MOL = 'name: h2\n    atoms: "H 0 0 0; H 0 0 {r}"\n    scan: {r: [0.74]}'


def cfg(mol: str = GOOD_MOL, methods: str = "", top: str = "") -> str:
    return f"molecules:\n  - {mol}\n" + (f"methods:\n{methods}\n" if methods else "") + top


CASES = [
    # (id, config text, expected fragment)
    ("yaml-syntax", "molecules: [\n  - name: h2\n", "YAML syntax error"),
    ("empty", "", "empty"),
    ("top-level-list", "- 1\n- 2\n", "top level must be a mapping"),
    ("python-tag", "molecules: !!python/object/apply:os.system ['true']\n", "YAML syntax error"),
    ("unknown-top-key", cfg(top="sede: 3\n"), "sede: unknown key"),
    (
        "unknown-molecule-key",
        cfg(mol=GOOD_MOL + "\n    bassis: sto-3g"),
        "molecules[0].bassis: unknown key",
    ),
    ("charge-type", cfg(mol=GOOD_MOL + "\n    charge: one"), "molecules[0].charge"),
    ("multiplicity-zero", cfg(mol=GOOD_MOL + "\n    multiplicity: 0"), "molecules[0].multiplicity"),
    (
        "missing-name",
        'molecules:\n  - atoms: "H 0 0 0; H 0 0 0.74"\n',
        "missing key 'name'",
    ),
    ("unknown-mapping", cfg(methods="  mapping: [jordan_wiggler]"), "jordan_wiggler"),
    ("unknown-ansatz", cfg(methods="  ansatz: [{name: uccsdt}]"), "uccsdt"),
    (
        "unknown-optimizer-option",
        cfg(methods="  optimizer: [{name: lbfgs, maxiterr: 5}]"),
        "maxiterr",
    ),
    ("shots-zero", cfg(methods="  estimator: [{name: shots, shots: 0}]"), "shots"),
    (
        "empty-scan",
        cfg(mol='name: h2\n    atoms: "H 0 0 0; H 0 0 {r}"\n    scan: {r: []}'),
        "molecules[0].scan.r",
    ),
    (
        "grid-num-zero",
        cfg(
            mol='name: h2\n    atoms: "H 0 0 0; H 0 0 {r}"\n    scan: {r: {start: 1, stop: 2, num: 0}}'
        ),
        "scan",
    ),
    (
        "placeholder-without-scan",
        cfg(mol='name: h2\n    atoms: "H 0 0 0; H 0 0 {d}"'),
        "has no values",
    ),
    (
        "scan-without-placeholder",
        cfg(mol='name: h2\n    atoms: "H 0 0 0; H 0 0 0.7"\n    scan: {r: [1]}'),
        "does not appear",
    ),
    ("duplicate-names", "molecules:\n  - " + GOOD_MOL + "\n  - " + GOOD_MOL + "\n", "used twice"),
    ("atoms-and-xyz", cfg(mol=GOOD_MOL + "\n    xyz: m.xyz"), "exactly one of"),
    ("xyz-missing", "molecules:\n  - name: w\n    xyz: nothere.xyz\n", "nothere.xyz"),
    ("unknown-element", cfg(mol='name: x\n    atoms: "Xx 0 0 0; H 0 0 0.74"'), "Xx"),
    ("unknown-basis", cfg(mol=GOOD_MOL + "\n    basis: sto-99g"), "sto-99g"),
    ("atoms-too-close", cfg(mol='name: h2\n    atoms: "H 0 0 0; H 0 0 0.01"'), "Angstrom apart"),
    ("parity", cfg(mol=GOOD_MOL + "\n    multiplicity: 2"), "multiplicity"),
    ("no-electrons", cfg(mol=GOOD_MOL + "\n    charge: 2"), "electron"),
    ("active-too-big", cfg(mol=GOOD_MOL + "\n    active: {electrons: 2, orbitals: 5}"), "orbitals"),
    (
        "zip-unequal",
        cfg(
            mol='name: h2o\n    atoms: "O 0 0 0; H 0 0 {r}; H 0 {a} 0"\n    scan: {r: [1, 2], a: [1]}\n    scan_mode: zip'
        ),
        "equally long",
    ),
    ("seed-negative", cfg(top="seed: -1\n"), "seed"),
]


def _snapshot(root: Path) -> dict[str, str]:
    return {
        str(p.relative_to(root)): hashlib.sha256(p.read_bytes()).hexdigest()
        for p in root.rglob("*")
        if p.is_file()
    }


@pytest.fixture
def workdir(tmp_path, monkeypatch):
    monkeypatch.chdir(tmp_path)
    (tmp_path / "results" / "integrals").mkdir(parents=True)
    (tmp_path / "results" / "integrals" / "keep.txt").write_text("finished work that must survive")
    return tmp_path


@pytest.mark.parametrize("case_id, text, fragment", CASES, ids=[c[0] for c in CASES])
@pytest.mark.parametrize("command", ["run", "plan"])
def test_bad_config(workdir, capsys, case_id, text, fragment, command):
    (workdir / "bad.yaml").write_text(text)
    before = _snapshot(workdir / "results")
    code = main([command, "--config", "bad.yaml"])
    err = capsys.readouterr().err
    assert code != 0
    lines = [line for line in err.splitlines() if line.strip()]
    assert len(lines) == 1, err
    assert "Traceback" not in err
    assert fragment in lines[0], lines[0]
    assert "bad.yaml" in lines[0] or "molecule" in lines[0]
    assert _snapshot(workdir / "results") == before


def test_config_file_missing(workdir, capsys):
    assert main(["plan", "--config", "nope.yaml"]) != 0
    err = capsys.readouterr().err.strip()
    assert "nope.yaml" in err and "not found" in err and "\n" not in err


@pytest.mark.parametrize(
    "content", [b"", b"not an hdf5 file at all", b"\x89HDF\r\n\x1a\n" + b"\0" * 50]
)
def test_show_refuses_damaged_stage_file(workdir, capsys, content):
    bad = workdir / "results" / "integrals" / "0123456789abcdef.h5"
    bad.write_bytes(content)
    assert main(["show", str(bad)]) != 0
    err = capsys.readouterr().err.strip()
    assert str(bad) in err and "\n" not in err and "Traceback" not in err


def test_debug_flag_shows_traceback(workdir):
    (workdir / "bad.yaml").write_text("seed: -1\nmolecules: []\n")
    with pytest.raises(Exception):  # noqa: B017 - any error type; the point is that it propagates
        main(["--debug", "plan", "--config", "bad.yaml"])
