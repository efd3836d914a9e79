"""Curve analysis of a scan: equilibrium geometry, force constant, harmonic frequency, well depth.

For every molecule with a one-variable scan and every method (sweep, mapping, tapering, ansatz,
optimizer, estimator), the energies along the scan are fitted near their minimum by the
interpolating polynomial of degree 4 through the five points closest to the lowest one (degree
``n - 1`` with fewer points).  From it: the equilibrium value ``x_e`` of the scan variable, the
energy there, the curvature ``k = d²E/dx²`` and, for a diatomic bond-length scan, the harmonic
wavenumber ``omega_e = sqrt(k / mu) / (2 pi c)`` with the reduced mass of the most abundant
isotopes.  The same numbers from the exact (CASCI/FCI) curve at the same points sit beside them.

Harmonic wavenumbers are given only for diatomic bond-length scans. Along an angle (or any
coordinate of a polyatomic) the curvature is a diagonal force constant ``F_xx`` in Eh per unit²
of the scan variable, and a frequency needs the kinetic-energy (Wilson G) matrix of all internal
coordinates and the coupled normal-mode problem ``det(FG - lambda) = 0`` (Wilson, Decius &
Cross, *Molecular Vibrations*, 1955); a one-coordinate scan with the other coordinates frozen
does not hold the coupling terms, so the wavenumber cells stay empty and the ``notes`` column
says why.

The well depth ``E(x_last) - E(x_e)`` uses the scan's outermost point, so it is a dissociation
energy only when the scan reaches the asymptote (it is a lower bound otherwise; the column name
says so).  A scan is called too coarse when the degree-4 fit and the degree-3 fit through the
four nearest points disagree by more than 0.01 in ``x_e`` (Å or degrees) or 3 % in curvature;
the row then carries a warning instead of silently reporting a number.  The disagreement mostly
measures the cruder degree-3 fit: for H2 STO-3G FCI it was about ten times the degree-4 error
(0.05 Å grid: 1.8 % apart, degree-4 curvature 0.2 % off a fine scan; 0.25 Å grid: warned).
"""

from __future__ import annotations

import math
from dataclasses import dataclass
from pathlib import Path

import numpy as np

from .chem.geometry import BOHR_IN_ANGSTROM, atomic_number
from .tables import Column, write_table

#: Mass of the most abundant isotope (u) by atomic number, H-Ar (AME2016 via NIST, from memory).
ISOTOPE_MASS_U: dict[int, float] = {
    1: 1.00782503223,
    2: 4.00260325413,
    3: 7.0160034366,
    4: 9.012183065,
    5: 11.00930536,
    6: 12.0,
    7: 14.00307400443,
    8: 15.99491461957,
    9: 18.99840316273,
    10: 19.9924401762,
    11: 22.989769282,
    12: 23.985041697,
    13: 26.98153853,
    14: 27.97692653465,
    15: 30.97376199842,
    16: 31.9720711744,
    17: 34.968852682,
    18: 39.9623831237,
}

# CODATA 2018
_HARTREE_J = 4.3597447222071e-18
_AMU_KG = 1.66053906660e-27
_C_CM_S = 2.99792458e10

#: Largest disagreement of the two fits before a scan is called too coarse.
COARSE_X = 0.01
COARSE_CURVATURE = 0.03

_METHOD_KEYS = ("sweep", "mapping", "tapered", "ansatz", "optimizer", "estimator")

ANALYSIS_COLUMNS: list[Column] = [
    Column("molecule", "", "molecule name"),
    *(Column(k, "", f"{k} of the method") for k in _METHOD_KEYS),
    Column("variable", "", "the scan variable"),
    Column("unit", "", "its unit (angstrom, bohr, degree)"),
    Column("n_points", "", "scan points with an energy"),
    Column("x_e", "unit", "equilibrium value of the scan variable (fitted VQE curve)"),
    Column("x_e_exact", "unit", "the same from the exact curve at the same points"),
    Column("energy_min_eh", "Eh", "fitted minimum energy (VQE)"),
    Column("energy_min_exact_eh", "Eh", "fitted minimum energy (exact)"),
    Column(
        "curvature_eh_per_unit2",
        "Eh/unit²",
        "d²E/dx² at x_e (VQE), per unit² of the scan variable (Eh/deg² for an angle)",
    ),
    Column("curvature_exact_eh_per_unit2", "Eh/unit²", "d²E/dx² at x_e (exact)"),
    Column("omega_e_cm1", "cm⁻¹", "harmonic wavenumber (diatomic bond scans only)"),
    Column("omega_e_exact_cm1", "cm⁻¹", "harmonic wavenumber from the exact curve"),
    Column("well_depth_to_last_point_eh", "Eh", "E(last scan point) - E(x_e), VQE"),
    Column("well_depth_to_last_point_exact_eh", "Eh", "the same for the exact curve"),
    Column("warning", "", "why a number may mislead (coarse scan, minimum at the edge, ...)"),
    Column("notes", "", "why a cell is empty (e.g. no wavenumber for a non-diatomic coordinate)"),
]

#: Why an analysis row has no harmonic wavenumber.
NO_WAVENUMBER_NOTE = (
    "omega_e not given: harmonic wavenumbers only for diatomic bond-length scans (an angle or "
    "polyatomic coordinate needs the Wilson G matrix and the coupled normal-mode problem)"
)


@dataclass
class CurveFit:
    """Minimum of a scanned curve from a local interpolating polynomial."""

    x_e: float
    energy_min: float
    curvature: float
    well_depth_to_last_point: float
    warning: str


def _local_fit(x: np.ndarray, y: np.ndarray, npts: int) -> tuple[float, float, float] | None:
    i0 = int(np.argmin(y))
    idx = np.sort(np.argsort(np.abs(x - x[i0]))[: min(npts, len(x))])
    xs, ys = x[idx], y[idx]
    shift = xs.mean()
    poly = np.polynomial.Polynomial.fit(
        xs - shift, ys, deg=len(xs) - 1, domain=[-1, 1], window=[-1, 1]
    )
    d1, d2 = poly.deriv(1), poly.deriv(2)
    roots = [r.real for r in d1.roots() if abs(r.imag) < 1e-9]
    roots = [r for r in roots if xs[0] - shift <= r <= xs[-1] - shift and d2(r) > 0]
    if not roots:
        return None
    r = min(roots, key=lambda t: poly(t))
    return float(r + shift), float(poly(r)), float(d2(r))


def fit_minimum(x, y) -> CurveFit:
    """Equilibrium value, minimum energy and curvature of a scanned curve.

    Args:
        x: scan values (any order).
        y: energies (hartree); nan entries are dropped.

    Returns:
        A :class:`CurveFit`; fields are nan (with a warning) when no interior minimum exists.

    Examples:
        >>> f = fit_minimum([0.6, 0.7, 0.8, 0.9, 1.0], [0.5 * (t - 0.75) ** 2 for t in (0.6, 0.7, 0.8, 0.9, 1.0)])
        >>> round(f.x_e, 6), round(f.curvature, 6)
        (0.75, 1.0)
    """
    x, y = np.asarray(x, float), np.asarray(y, float)
    ok = np.isfinite(x) & np.isfinite(y)
    x, y = x[ok], y[ok]
    order = np.argsort(x)
    x, y = x[order], y[order]
    nan = math.nan
    if len(x) < 3:
        return CurveFit(nan, nan, nan, nan, "fewer than 3 points: no fit")
    i0 = int(np.argmin(y))
    depth = float(y[-1] - y[i0])
    if i0 in (0, len(x) - 1):
        return CurveFit(nan, nan, nan, depth, "lowest energy at the edge of the scan: no minimum")
    main = _local_fit(x, y, 5)
    if main is None:
        return CurveFit(nan, nan, nan, depth, "no minimum of the fitted polynomial inside the scan")
    x_e, e_min, k = main
    warning = ""
    if len(x) < 5:
        warning = f"only {len(x)} points: fit is an interpolation through all of them"
    else:
        check = _local_fit(x, y, 4)
        if check is None or (
            abs(check[0] - x_e) > COARSE_X or abs(check[2] - k) > COARSE_CURVATURE * abs(k)
        ):
            dx = "?" if check is None else f"{abs(check[0] - x_e):.2g}"
            dk = "?" if check is None else f"{abs(check[2] - k) / abs(k):.1%}"
            warning = (
                f"scan too coarse near the minimum (degree-3 and degree-4 fits differ by {dx} "
                f"in x_e and {dk} in curvature); add points around x = {x_e:.3g}"
            )
    return CurveFit(x_e, e_min, k, float(y[-1] - e_min), warning)


def harmonic_wavenumber(curvature_eh_per_a2: float, mass1_u: float, mass2_u: float) -> float:
    """Harmonic wavenumber (cm⁻¹) of a diatomic: ``sqrt(k / mu) / (2 pi c)``.

    Args:
        curvature_eh_per_a2: d²E/dr² at r_e in hartree per Å².
        mass1_u, mass2_u: nuclear masses in u.
    """
    if not (math.isfinite(curvature_eh_per_a2) and curvature_eh_per_a2 > 0):
        return math.nan
    k_si = curvature_eh_per_a2 * _HARTREE_J / 1e-20
    mu = mass1_u * mass2_u / (mass1_u + mass2_u) * _AMU_KG
    return math.sqrt(k_si / mu) / (2.0 * math.pi * _C_CM_S)


def _diatomic_masses(atoms: str) -> tuple[float, float] | None:
    entries = [e.split() for e in atoms.split(";") if e.strip()]
    if len(entries) != 2:
        return None
    masses = [ISOTOPE_MASS_U.get(atomic_number(e[0])) for e in entries]
    if None in masses:
        return None
    return masses[0], masses[1]  # type: ignore[return-value]


def _is_bond_scan(rows: list[dict], var_col: str, unit: str) -> bool:
    """The scan value equals the internuclear distance at every point (diatomics)."""
    for r in rows:
        entries = [e.split() for e in str(r.get("_atoms", "")).split(";") if e.strip()]
        if len(entries) != 2:
            return False
        d = math.dist([float(v) for v in entries[0][1:4]], [float(v) for v in entries[1][1:4]])
        if abs(d - float(r[var_col])) > 1e-6:
            return False
    return unit in ("angstrom", "bohr")


def analyse_study(summary: list[dict]) -> tuple[list[dict], list[str]]:
    """Curve analysis of every (molecule, method) with a one-variable scan of 3+ points.

    Args:
        summary: rows of :func:`eigensweep.collect.summary_rows` (internal ``_atoms`` and
            ``_scan_units`` keys are used when present).

    Returns:
        ``(rows, warnings)``: one row per curve with the columns of :data:`ANALYSIS_COLUMNS`,
        and one line per curve whose numbers may mislead.
    """
    out: list[dict] = []
    warnings: list[str] = []
    groups: dict[tuple, list[dict]] = {}
    for r in summary:
        scan = [k for k in r if k.startswith("scan_")]
        if len(scan) != 1:
            continue
        groups.setdefault(
            (r["molecule"], scan[0], *(str(r.get(k)) for k in _METHOD_KEYS)), []
        ).append(r)
    for (mol, col, *_), rows in groups.items():
        if len({float(r[col]) for r in rows}) < 3:
            continue
        var, unit = rows[0].get("_scan_var", col[5:]), rows[0].get("_scan_unit", "none")
        x = np.array([float(r[col]) for r in rows])
        vqe = fit_minimum(x, [float(r["energy_eh"]) for r in rows])
        exact = fit_minimum(x, [float(r["energy_exact_eh"]) for r in rows])
        omega = omega_exact = math.nan
        notes = NO_WAVENUMBER_NOTE
        masses = _diatomic_masses(str(rows[0].get("_atoms", "")))
        if masses and _is_bond_scan(rows, col, unit):
            to_a2 = 1.0 / BOHR_IN_ANGSTROM**2 if unit == "bohr" else 1.0
            omega = harmonic_wavenumber(vqe.curvature * to_a2, *masses)
            omega_exact = harmonic_wavenumber(exact.curvature * to_a2, *masses)
            notes = ""
        if vqe.warning and vqe.warning == exact.warning:
            warning = f"VQE and exact: {vqe.warning}"
        else:
            warning = "; ".join(
                f"{name}: {f.warning}" for name, f in (("VQE", vqe), ("exact", exact)) if f.warning
            )
        row = {
            "molecule": mol,
            **{k: rows[0].get(k, "") for k in _METHOD_KEYS},
            "variable": var,
            "unit": unit,
            "n_points": len(rows),
            "x_e": vqe.x_e,
            "x_e_exact": exact.x_e,
            "energy_min_eh": vqe.energy_min,
            "energy_min_exact_eh": exact.energy_min,
            "curvature_eh_per_unit2": vqe.curvature,
            "curvature_exact_eh_per_unit2": exact.curvature,
            "omega_e_cm1": omega,
            "omega_e_exact_cm1": omega_exact,
            "well_depth_to_last_point_eh": vqe.well_depth_to_last_point,
            "well_depth_to_last_point_exact_eh": exact.well_depth_to_last_point,
            "warning": warning,
            "notes": notes,
        }
        out.append(row)
        if warning:
            label = " / ".join(str(row[k]) for k in _METHOD_KEYS)
            warnings.append(f"curve analysis of {mol} ({label}): {warning}")
    return out, warnings


def write_analysis(rows: list[dict], path: str | Path) -> Path:
    """Write ``analysis.csv`` atomically (LF line endings, 10 significant digits)."""
    return write_table(rows, path, ANALYSIS_COLUMNS)
