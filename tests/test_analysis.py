"""Curve analysis (equilibrium bond length, curvature, harmonic wavenumber) against outside values."""

from __future__ import annotations

import math

import numpy as np
import pytest
from fixtures import run_plan

from eigensweep.analysis import ISOTOPE_MASS_U, analyse_study, fit_minimum, harmonic_wavenumber
from eigensweep.collect import collect, summary_rows


def _fci(r: float) -> float:
    from pyscf import fci, gto, scf

    mol = gto.M(atom=f"H 0 0 0; H 0 0 {r}", basis="sto-3g", verbose=0)
    return fci.FCI(scf.RHF(mol).run()).kernel()[0]


def _hf(r: float) -> float:
    from pyscf import gto, scf

    return scf.RHF(gto.M(atom=f"H 0 0 0; H 0 0 {r}", basis="sto-3g", verbose=0)).run().e_tot


@pytest.fixture(scope="module")
def fine_fci_reference():
    """r_e and d2E/dr2 of H2 STO-3G FCI from a fine PySCF scan (golden section + 5-point stencil)."""
    from scipy.optimize import minimize_scalar

    opt = minimize_scalar(_fci, bracket=(0.70, 0.73, 0.76), tol=1e-10)
    h = 0.005
    f = [_fci(opt.x + k * h) for k in (-2, -1, 0, 1, 2)]
    k = (-f[0] + 16 * f[1] - 30 * f[2] + 16 * f[3] - f[4]) / (12 * h * h)
    return opt.x, k


def test_isotope_masses_match_pyscf():
    # reference: PySCF's table of the most abundant isotopes' masses (independent copy)
    from pyscf.data.elements import COMMON_ISOTOPE_MASSES

    for z, m in ISOTOPE_MASS_U.items():
        assert m == pytest.approx(COMMON_ISOTOPE_MASSES[z], abs=2e-6), z


def test_harmonic_wavenumber_units_against_handbook():
    # reference: H2 ground state omega_e = 4401.21 cm-1, force constant k_e = 575.1 N/m with
    # mu = 0.50391 u (Huber & Herzberg 1979 / NIST CCCBDB, from memory); 1 Eh/Å² = 435.974 N/m
    k_eh_a2 = 575.1 / 435.974472
    assert harmonic_wavenumber(k_eh_a2, 1.00782503223, 1.00782503223) == pytest.approx(
        4401.2, rel=5e-4
    )


def test_fit_recovers_a_closed_form_morse_minimum():
    # reference: Morse potential D (1 - exp(-a (r - r_e)))^2 has its minimum at r_e and
    # curvature 2 D a^2 (closed form)
    d, a, re = 0.17, 1.9, 0.741
    r = np.linspace(0.55, 1.05, 11)
    fit = fit_minimum(r, d * (1 - np.exp(-a * (r - re))) ** 2)
    assert fit.x_e == pytest.approx(re, abs=2e-4)
    assert fit.curvature == pytest.approx(2 * d * a * a, rel=1e-2)
    assert fit.warning == ""


def test_fit_refuses_an_edge_minimum_and_flags_a_coarse_scan():
    r = np.array([0.8, 0.9, 1.0, 1.1])
    assert "edge" in fit_minimum(r, (r - 0.5) ** 2).warning
    coarse = np.linspace(0.5, 2.5, 9)  # the default sweep's 0.25 Å grid
    fit = fit_minimum(coarse, [_fci(x) for x in coarse])
    assert "too coarse" in fit.warning


def test_h2_sto3g_equilibrium_and_frequency_from_the_exact_curve(tmp_path, fine_fci_reference):
    # reference: a fine PySCF FCI scan computed in this test (fixture above); the study runs the
    # whole chain (integrals -> optimize -> collect) on a 0.05 Å grid and fits its exact curve
    re_ref, k_ref = fine_fci_reference
    raw = {
        "molecules": [
            {
                "name": "h2",
                "atoms": "H 0 0 0; H 0 0 {r}",
                "scan": {"r": {"start": 0.6, "stop": 0.9, "num": 7}},
            }
        ],
    }
    results = tmp_path / "results"
    cfg, plan = run_plan(raw, results)
    collect(plan.rows, results, 1.6, [], study="h2fit")
    rows, warnings = analyse_study(summary_rows(plan.rows, results))
    (row,) = rows
    mu = ISOTOPE_MASS_U[1] / 2
    omega_ref = harmonic_wavenumber(k_ref, 2 * mu, 2 * mu)
    assert row["x_e_exact"] == pytest.approx(re_ref, abs=1e-3)
    assert row["curvature_exact_eh_per_unit2"] == pytest.approx(k_ref, rel=0.01)
    assert row["omega_e_exact_cm1"] == pytest.approx(omega_ref, rel=0.005)
    # UCCSD is exact for two electrons: its curve gives the same numbers (PySCF FCI again)
    assert row["x_e"] == pytest.approx(re_ref, abs=1e-3)
    assert row["omega_e_cm1"] == pytest.approx(omega_ref, rel=0.005)
    assert (results / "h2fit" / "analysis.csv").read_text().count("\n") == 2
    assert warnings == []


def test_h2_hf_bond_length_against_szabo_ostlund():
    # reference: HF/STO-3G equilibrium bond length of H2, 1.346 bohr = 0.712 Å (Szabo & Ostlund,
    # Modern Quantum Chemistry, 1996, from memory), with HF energies from PySCF
    r = np.linspace(0.62, 0.82, 9)
    fit = fit_minimum(r, [_hf(x) for x in r])
    assert fit.x_e == pytest.approx(0.712, abs=2e-3)
    assert math.isfinite(fit.curvature) and fit.curvature > 0
