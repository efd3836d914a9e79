"""A water bending scan from Z-matrix input run through the chemistry (issue 14).

Outside references: PySCF's own Z-matrix reader (``pyscf.gto.mole.from_zmatrix`` and
``gto.M`` with Z-matrix atoms), PySCF RHF and CASCI(4, 4) computed here, and the closed-form
bond angle of the Cartesian geometry.
"""

from __future__ import annotations

import csv
import math
from pathlib import Path

import numpy as np
import pytest
import yaml
from fixtures import run_plan

from eigensweep.analysis import NO_WAVENUMBER_NOTE, analyse_study
from eigensweep.collect import collect, summary_rows
from eigensweep.figures import axis_of

CONFIG = Path(__file__).parent / "configs" / "water_bend.yaml"
ZMAT = "O; H 1 0.9572; H 1 0.9572 2 {a}"


def _pyscf_mol(angle: float):
    from pyscf import gto

    # PySCF reads the Z-matrix itself (its own converter, independent of eigensweep's)
    return gto.M(atom=ZMAT.format(a=angle).replace(";", "\n"), basis="sto-3g", verbose=0)


def _casci(angle: float) -> float:
    from pyscf import mcscf, scf

    mf = scf.RHF(_pyscf_mol(angle))
    mf.conv_tol = 1e-11
    mf.kernel()
    cas = mcscf.CASCI(mf, 4, 4)
    cas.fcisolver.conv_tol = 1e-12
    return float(cas.kernel()[0])


@pytest.fixture(scope="module")
def study(tmp_path_factory):
    raw = yaml.safe_load(CONFIG.read_text())
    results = tmp_path_factory.mktemp("bend") / "results"
    cfg, plan = run_plan(raw, results, source=str(CONFIG))
    collect(plan.rows, results, cfg["collect"]["accuracy_mha"], plan.exports, study=cfg["study"])
    return results, plan, summary_rows(plan.rows, results)


def _xyz(atoms: str) -> np.ndarray:
    return np.array([[float(v) for v in e.split()[1:4]] for e in atoms.split(";")])


def _distances(p: np.ndarray) -> np.ndarray:
    return np.linalg.norm(p[:, None, :] - p[None, :, :], axis=-1)


def test_cartesian_geometry_equals_pyscf_zmatrix_conversion(study):
    from pyscf.gto.mole import from_zmatrix

    results, plan, _ = study
    angles = yaml.safe_load(CONFIG.read_text())["molecules"][0]["scan"]["a"]
    nodes = plan.by_stage("integrals")
    assert len(nodes) == len(angles)
    for node, a in zip(nodes, angles, strict=True):
        mine = _xyz(node.params["atoms"])
        # reference: PySCF's Z-matrix converter; frames differ, so compare distance matrices
        ref = np.array([c for _, c in from_zmatrix(ZMAT.format(a=a).replace(";", "\n"))])
        assert np.abs(_distances(mine) - _distances(ref)).max() < 1e-8
        # closed form: the H-O-H angle of the Cartesian geometry is the scanned value
        u, v = mine[1] - mine[0], mine[2] - mine[0]
        cos = u @ v / np.linalg.norm(u) / np.linalg.norm(v)
        assert math.degrees(math.acos(np.clip(cos, -1, 1))) == pytest.approx(a, abs=1e-7)


def test_chemistry_along_the_bend_matches_pyscf(study):
    from pyscf import scf

    _, _, rows = study
    for r in rows[:: len(rows) - 1] + rows[2:3]:  # both ends and a point near the minimum
        a = float(r["scan_a_deg"])
        mol = _pyscf_mol(a)
        # reference: PySCF RHF and CASCI(4e, 4o) of the molecule PySCF built from the Z-matrix
        mf = scf.RHF(mol)
        mf.conv_tol = 1e-11
        assert float(r["energy_hf_eh"]) == pytest.approx(mf.kernel(), abs=1e-7)
        assert float(r["energy_exact_eh"]) == pytest.approx(_casci(a), abs=1e-7)


def test_labels_and_axis_in_degrees(study):
    results, plan, rows = study
    with open(results / "water_bend" / "summary.csv", newline="") as fh:
        table = list(csv.DictReader(fh))
    assert [t["point"] for t in table] == [
        f"a={a:g}" for a in (95, 98, 101, 104, 107, 110, 120, 140, 160, 180)
    ]
    assert "scan_a_deg" in table[0] and float(table[-1]["scan_a_deg"]) == 180.0
    assert axis_of(rows) == ("scan_a_deg", "a (°)")
    plots = results / "water_bend" / "plots"
    assert (plots / "h2o_energy.png").is_file() and (plots / "h2o_energy.pdf").is_file()


def test_bend_analysis_gives_angle_and_curvature_but_no_wavenumber(study):
    from scipy.optimize import minimize_scalar

    results, _, rows = study
    (row,), _ = analyse_study(rows)
    assert row["variable"] == "a" and row["unit"] == "degree"
    # reference: a fine PySCF CASCI(4, 4) scan (golden section) and a 5-point stencil, in degrees
    opt = minimize_scalar(_casci, bracket=(97.0, 100.0, 104.0), tol=1e-8)
    h = 1.0
    f = [_casci(opt.x + k * h) for k in (-2, -1, 0, 1, 2)]
    k_ref = (-f[0] + 16 * f[1] - 30 * f[2] + 16 * f[3] - f[4]) / (12 * h * h)
    assert row["x_e_exact"] == pytest.approx(opt.x, abs=0.1)
    assert row["curvature_exact_eh_per_unit2"] == pytest.approx(k_ref, rel=0.03)
    # UCCSD on (4e, 4o) is within chemical accuracy here: the same angle to 0.2 degree
    assert row["x_e"] == pytest.approx(opt.x, abs=0.2)
    # no harmonic wavenumber for an angle coordinate (needs the Wilson G matrix), said so
    assert math.isnan(row["omega_e_cm1"]) and math.isnan(row["omega_e_exact_cm1"])
    assert row["notes"] == NO_WAVENUMBER_NOTE
    with open(results / "water_bend" / "analysis.csv", newline="") as fh:
        (written,) = list(csv.DictReader(fh))
    assert written["omega_e_cm1"] == "" and "Wilson G" in written["notes"]
    assert written["unit"] == "degree"
