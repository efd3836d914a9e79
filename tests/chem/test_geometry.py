"""Z-matrix input, arithmetic placeholders and scan units (planner side; no Snakemake)."""

from __future__ import annotations

import math

import numpy as np
import pytest

from eigensweep.chem.geometry import (
    evaluate_expression,
    fill_template,
    infer_scan_units,
    parse_atoms,
    zmatrix_to_cartesian,
)
from eigensweep.config import validate_config
from eigensweep.errors import ConfigError
from eigensweep.plan import build_plan


def _xyz(atoms: str) -> np.ndarray:
    return np.array([xyz for _, xyz in parse_atoms(atoms)])


def _distances(p: np.ndarray) -> np.ndarray:
    return np.linalg.norm(p[:, None, :] - p[None, :, :], axis=-1)


def _angle(a, b, c) -> float:
    u, v = a - b, c - b
    return math.degrees(math.acos(u @ v / np.linalg.norm(u) / np.linalg.norm(v)))


def _dihedral(p0, p1, p2, p3) -> float:
    # IUPAC torsion angle by the atan2 formula (e.g. Blondel & Karplus, J. Comput. Chem. 17,
    # 1132 (1996)): an independent closed form
    b0, b1, b2 = p0 - p1, p2 - p1, p3 - p2
    b1 = b1 / np.linalg.norm(b1)
    v, w = b0 - (b0 @ b1) * b1, b2 - (b2 @ b1) * b1
    return math.degrees(math.atan2(np.cross(b1, v) @ w, v @ w))


# --- bad input first -------------------------------------------------------------------------


@pytest.mark.parametrize(
    "expr, fragment",
    [
        ("__import__('os')", "uses something other than"),
        ("r.real", "uses something other than"),
        ("[r]", "uses something other than"),
        ("open(r)", "uses something other than"),
        ("q + 1", "no scan variable"),
        ("r +", "not an arithmetic expression"),
        ("r / 0", "cannot be evaluated"),
        ("10 ** 1000", "cannot be evaluated"),
    ],
)
def test_expression_refuses_anything_but_arithmetic(expr, fragment):
    with pytest.raises(ConfigError) as err:
        evaluate_expression(expr, {"r": 1.0}, where="molecules[0] (h2)")
    assert fragment in str(err.value) and "\n" not in str(err.value)


@pytest.mark.parametrize(
    "zmat, fragment",
    [
        ("O; H 1", "expected 3"),
        ("O; H 2 0.96", "distinct earlier atoms"),
        ("O; H 1 -0.96", "must be positive"),
        ("O; H 1 0.96; H 1 0.96 2 190", "[0, 180]"),
        ("O; H 1 0.96; H 1 0.96 1 104", "distinct earlier atoms"),
        ("O; Xx 1 0.96", "unknown element"),
    ],
)
def test_zmatrix_errors_are_one_line(zmat, fragment):
    with pytest.raises(ConfigError) as err:
        fill_template(zmat, {})
    assert fragment in str(err.value) and "\n" not in str(err.value)


# --- values against closed forms and an independent converter --------------------------------


def test_expression_values_match_python_math():
    # reference: Python's math module evaluating the same formula (closed form)
    r, a = 0.9572, 104.52
    got = evaluate_expression("r*sin(radians(a/2)) - -2**2/sqrt(4)", {"r": r, "a": a})
    assert got == pytest.approx(r * math.sin(math.radians(a / 2)) + 2.0, abs=1e-14)
    assert evaluate_expression("pi*degrees(1)", {}) == pytest.approx(180.0, abs=1e-12)


def test_water_zmatrix_geometry_closed_form():
    # reference: the definition of bond length and angle (closed form)
    atoms = fill_template("O; H 1 {r}; H 1 {r} 2 {a}", {"r": 0.9572, "a": 104.52})
    p = _xyz(atoms)
    assert _distances(p)[0, 1] == pytest.approx(0.9572, abs=1e-9)
    assert _distances(p)[0, 2] == pytest.approx(0.9572, abs=1e-9)
    assert _angle(p[1], p[0], p[2]) == pytest.approx(104.52, abs=1e-7)
    assert p[2][0] > 0 and abs(p[2][1]) < 1e-12  # third atom in the xz-plane


@pytest.mark.parametrize("dihedral", [60.0, 111.5, -60.0, 180.0])
def test_dihedral_matches_pyscf_and_iupac_sign(dihedral):
    # references: PySCF's own Z-matrix converter (independent code; the frame differs, so compare
    # the distance matrix and the handedness) and the atan2 torsion formula for the sign
    from pyscf.gto.mole import from_zmatrix

    zmat = f"O; O 1 1.45; H 1 0.97 2 100; H 2 0.97 1 100 3 {dihedral}"
    mine = _xyz(fill_template(zmat, {}))
    ref = np.array([c for _, c in from_zmatrix(zmat)])
    assert np.abs(_distances(mine) - _distances(ref)).max() < 1e-8
    vol = lambda q: np.linalg.det(q[1:] - q[0])  # noqa: E731
    assert np.sign(vol(mine)) == np.sign(vol(ref)) or abs(vol(ref)) < 1e-9
    assert _dihedral(mine[3], mine[1], mine[0], mine[2]) == pytest.approx(
        dihedral
        if dihedral != 180.0
        else math.copysign(180.0, _dihedral(mine[3], mine[1], mine[0], mine[2])),
        abs=1e-7,
    )


def test_zmatrix_linear_molecule():
    # reference: closed form; a 180 degree angle puts all atoms on one line
    p = np.array(
        [
            c
            for _, c in zmatrix_to_cartesian(
                [["H"], ["Be", "1", "1.3"], ["H", "2", "1.3", "1", "180"]]
            )
        ]
    )
    assert np.allclose(p[:, :2], 0) and p[2, 2] == pytest.approx(2.6)


def test_scan_units_inferred_from_place():
    assert infer_scan_units("O; H 1 {r}; H 1 {r} 2 {a}") == {"r": "angstrom", "a": "degree"}
    assert infer_scan_units("H 0 0 0; H 0 0 {r}", "bohr") == {"r": "bohr"}
    cart = "O 0 0 0; H 0 {r*sin(radians(a/2))} {r*cos(radians(a/2))}"
    assert infer_scan_units(cart) == {"r": "angstrom", "a": "degree"}


WATER = {
    "molecules": [
        {
            "name": "h2o",
            "atoms": "O; H 1 0.9572; H 1 0.9572 2 {a}",
            "scan": {"a": {"start": 95, "stop": 180, "num": 6}},
        }
    ]
}


def test_water_bending_scan_plan_in_degrees():
    # reference: closed-form H-O-H angle of the Cartesian geometry handed to the chemistry stage
    plan = build_plan(validate_config(WATER))
    ints = plan.by_stage("integrals")
    angles = [_angle(*(_xyz(n.params["atoms"])[[1, 0, 2]])) for n in ints]
    assert angles == pytest.approx([95, 112, 129, 146, 163, 180], abs=1e-7)
    assert {r["point"] for r in plan.rows} == {f"a={v}" for v in (95, 112, 129, 146, 163, 180)}
    assert all(r["axis_units"] == {"a": "degree"} for r in plan.rows)


def test_cartesian_keys_unchanged_by_the_evaluator():
    # the default sweep's integrals keys must not move: "{r}" is written as before (10 digits)
    raw = {"molecules": [{"name": "h2", "atoms": "H 0 0 0; H 0 0 {r}", "scan": {"r": [0.75]}}]}
    node = build_plan(validate_config(raw)).by_stage("integrals")[0]
    assert node.params["atoms"] == "H 0 0 0; H 0 0 0.75"
