"""Geometry input: Cartesian atom strings, XYZ files, element data and frozen-core counts.

The atom strings used throughout eigensweep are PySCF's Cartesian form, ``"Li 0 0 0; H 0 0 1.6"``
(entries separated by ``;`` or new lines, each ``symbol x y z``).  They are parsed here rather
than by PySCF so that a typo gives a one-line :class:`~eigensweep.errors.ConfigError` naming the
molecule and the offending entry instead of a Python exception from deep inside the library.

This module does not import PySCF (planning code reads XYZ files without the chemistry stack).
"""

from __future__ import annotations

import math
import os
import re

from eigensweep.errors import ConfigError

__all__ = [
    "BOHR_IN_ANGSTROM",
    "ELEMENTS",
    "MAX_COORDINATE",
    "MIN_DISTANCE_ANGSTROM",
    "atomic_number",
    "canonical_atoms",
    "check_geometry",
    "min_distance",
    "noble_gas_core_orbitals",
    "normalise_unit",
    "parse_atoms",
    "read_xyz",
]

#: 1 bohr in Angstrom (CODATA 2010), the value PySCF uses for its own unit conversion.
BOHR_IN_ANGSTROM: float = 0.52917721092

#: Chemical symbols by atomic number (index 0 is unused).
ELEMENTS: tuple[str, ...] = ("",) + tuple(
    """H He Li Be B C N O F Ne Na Mg Al Si P S Cl Ar K Ca Sc Ti V Cr Mn Fe Co Ni Cu Zn Ga Ge As
    Se Br Kr Rb Sr Y Zr Nb Mo Tc Ru Rh Pd Ag Cd In Sn Sb Te I Xe Cs Ba La Ce Pr Nd Pm Sm Eu Gd Tb
    Dy Ho Er Tm Yb Lu Hf Ta W Re Os Ir Pt Au Hg Tl Pb Bi Po At Rn Fr Ra Ac Th Pa U Np Pu Am Cm Bk
    Cf Es Fm Md No Lr Rf Db Sg Bh Hs Mt Ds Rg Cn Nh Fl Mc Lv Ts Og""".split()
)
_Z = {sym: z for z, sym in enumerate(ELEMENTS) if sym}

#: Two nuclei closer than this (Angstrom) are taken as a typo in the geometry.
MIN_DISTANCE_ANGSTROM: float = 0.1

#: A coordinate larger than this (in the unit given) is taken as a typo: the integrals of such
#: a geometry are not meaningful (1e300 gives a "converged" wrong energy).
MAX_COORDINATE: float = 1.0e4

_UNITS = {
    "angstrom": "angstrom",
    "ang": "angstrom",
    "a": "angstrom",
    "bohr": "bohr",
    "b": "bohr",
    "au": "bohr",
}

# Noble-gas cores as (last atomic number of the core, spatial orbitals in the core):
# [He] 1s; [Ne] +2s2p; [Ar] +3s3p; [Kr] +3d4s4p; [Xe] +4d5s5p; [Rn] +4f5d6s6p.
_NOBLE_GAS_CORES = ((2, 1), (10, 5), (18, 9), (36, 18), (54, 27), (86, 43))

_LABEL = re.compile(r"^([A-Za-z]{1,3})(\d*)$")


def _one_line(text: str) -> str:
    return " ".join(str(text).split())


def normalise_unit(unit: str, where: str = "molecule") -> str:
    """Map the accepted spellings of a length unit to ``"angstrom"`` or ``"bohr"``.

    Args:
        unit: ``"angstrom"`` (also ``"ang"``, ``"A"``) or ``"bohr"`` (also ``"B"``, ``"AU"``).
        where: prefix for error messages, e.g. ``"molecules[1] (lih) point r=1.6"``.

    Returns:
        ``"angstrom"`` or ``"bohr"``.
    """
    key = unit.strip().lower() if isinstance(unit, str) else None
    if key not in _UNITS:
        raise ConfigError(
            _one_line(f"{where}: unit: unknown length unit {unit!r}; use 'angstrom' or 'bohr'")
        )
    return _UNITS[key]


def atomic_number(symbol: str) -> int:
    """Nuclear charge of a chemical symbol (case-insensitive, numeric label suffix allowed).

    Args:
        symbol: e.g. ``"O"``, ``"li"``, ``"H1"`` (PySCF-style labelled atom).

    Returns:
        The atomic number, or 0 when the symbol is not a chemical element.
    """
    match = _LABEL.match(symbol.strip())
    if match is None:
        return 0
    return _Z.get(match.group(1).capitalize(), 0)


def parse_atoms(
    atoms: str, unit: str = "angstrom", where: str = "molecule"
) -> list[tuple[str, tuple[float, float, float]]]:
    """Parse a Cartesian atom string into ``(symbol, (x, y, z))`` entries, coordinates unchanged.

    Args:
        atoms: ``"Li 0 0 0; H 0 0 1.6"``; entries separated by ``;`` or new lines.
        unit: unit of the coordinates (kept as given; see :func:`normalise_unit`).
        where: prefix for error messages.

    Returns:
        A list of ``(symbol, (x, y, z))`` with the symbol as written (e.g. ``"li"``) and float
        coordinates in ``unit``.
    """
    normalise_unit(unit, where)
    if not isinstance(atoms, str) or not atoms.strip():
        raise ConfigError(
            _one_line(
                f"{where}: atoms: empty or not a string ({type(atoms).__name__}); "
                "give 'El x y z; El x y z; ...' with one entry per atom"
            )
        )
    entries = [e.strip() for e in re.split(r"[;\n]", atoms) if e.strip()]
    parsed: list[tuple[str, tuple[float, float, float]]] = []
    for i, entry in enumerate(entries, start=1):
        fields = entry.replace(",", " ").split()
        if len(fields) != 4:
            raise ConfigError(
                _one_line(
                    f"{where}: atoms: entry {i} {entry!r} is not 'element x y z'; "
                    "give Cartesian coordinates (Z-matrix input is not supported)"
                )
            )
        symbol = fields[0]
        if atomic_number(symbol) == 0:
            raise ConfigError(
                _one_line(
                    f"{where}: atoms: unknown element {symbol!r} in entry {i}; "
                    "use a chemical symbol such as H, C, N, O (ghost atoms are not supported)"
                )
            )
        try:
            xyz = tuple(float(v) for v in fields[1:])
        except ValueError:
            raise ConfigError(
                _one_line(
                    f"{where}: atoms: entry {i} {entry!r} has a non-numeric coordinate; "
                    "placeholders must be filled with numbers before the chemistry stage"
                )
            ) from None
        if not all(math.isfinite(v) and abs(v) <= MAX_COORDINATE for v in xyz):
            raise ConfigError(
                _one_line(
                    f"{where}: atoms: entry {i} has a coordinate that is not finite or larger "
                    f"than {MAX_COORDINATE:g} in magnitude; check the coordinates and unit"
                )
            )
        parsed.append((symbol, xyz))  # type: ignore[arg-type]
    return parsed


def _canonical_number(v: float) -> str:
    text = format(v, ".12g")
    return "0" if text == "-0" else text


def canonical_atoms(atoms: str, unit: str = "angstrom", where: str = "molecule") -> str:
    """The atom string in one spelling, so cosmetic differences do not change cache keys.

    Element symbols are capitalised (``li`` -> ``Li``, labels kept: ``h1`` -> ``H1``),
    coordinates written with 12 significant digits (``0.740`` -> ``0.74``, ``-0`` -> ``0``),
    entries joined by ``"; "``. A string already in this form is returned unchanged.

    Args:
        atoms: ``"Li 0 0 0; H 0 0 1.6"`` (see :func:`parse_atoms`).
        unit: unit of the coordinates (unchanged).
        where: prefix for error messages.
    """
    out = []
    for symbol, xyz in parse_atoms(atoms, unit, where):
        m = _LABEL.match(symbol.strip())
        sym = m.group(1).capitalize() + m.group(2) if m else symbol
        out.append(" ".join([sym, *(_canonical_number(v) for v in xyz)]))
    return "; ".join(out)


def min_distance(
    parsed: list[tuple[str, tuple[float, float, float]]], unit: str = "angstrom"
) -> tuple[float, int, int]:
    """Smallest internuclear distance of a parsed geometry, in Angstrom.

    All pairs at once for up to 64 atoms, else nearest neighbours from a k-d tree (SciPy), so
    10^5 atoms take about a second.

    Args:
        parsed: output of :func:`parse_atoms`.
        unit: unit of the coordinates in ``parsed``.

    Returns:
        ``(distance, i, j)`` with 1-based atom indices, ``i < j``; ``(inf, 0, 0)`` for a single
        atom.
    """
    import numpy as np

    if len(parsed) < 2:
        return (math.inf, 0, 0)
    scale = BOHR_IN_ANGSTROM if normalise_unit(unit) == "bohr" else 1.0
    coords = scale * np.array([xyz for _, xyz in parsed], dtype=float)
    if len(parsed) <= 64:  # all pairs at once; the tree pays off for large molecules
        d2 = ((coords[:, None, :] - coords[None, :, :]) ** 2).sum(axis=-1)
        d2[np.diag_indices_from(d2)] = np.inf
        i, j = np.unravel_index(int(np.argmin(d2)), d2.shape)
        return (float(np.sqrt(d2[i, j])), int(min(i, j)) + 1, int(max(i, j)) + 1)
    from scipy.spatial import cKDTree

    dist, idx = cKDTree(coords).query(coords, k=2)
    i = int(np.argmin(dist[:, 1]))
    j = int(idx[i, 1])
    return (float(dist[i, 1]), min(i, j) + 1, max(i, j) + 1)


def check_geometry(
    atoms: str, unit: str = "angstrom", where: str = "molecule"
) -> list[tuple[str, tuple[float, float, float]]]:
    """Parse ``atoms`` (:func:`parse_atoms`) and refuse nuclei closer than 0.1 Angstrom.

    Returns:
        The parsed geometry.
    """
    parsed = parse_atoms(atoms, unit, where)
    dist, i, j = min_distance(parsed, unit)
    if dist < MIN_DISTANCE_ANGSTROM:
        raise ConfigError(
            _one_line(
                f"{where}: atoms: atoms {i} and {j} are {dist:.3g} Angstrom apart "
                f"(< {MIN_DISTANCE_ANGSTROM}); check the coordinates and unit ({unit})"
            )
        )
    return parsed


def noble_gas_core_orbitals(z: int) -> int:
    """Spatial orbitals in the noble-gas core of an element (the ``frozen_core="auto"`` rule).

    The core is the preceding noble-gas configuration: none for H and He, [He] = 1 orbital for
    Li-Ne, [Ne] = 5 for Na-Ar, [Ar] = 9 for K-Kr, [Kr] = 18 for Rb-Xe, [Xe] = 27 for Cs-Rn,
    [Rn] = 43 beyond.  (Sub-valence d shells of the p-block, e.g. 3d of Ga-Kr, are therefore
    correlated; pass an explicit count to freeze them.)

    Args:
        z: atomic number.

    Returns:
        Number of doubly occupied spatial orbitals to freeze for this atom.
    """
    count = 0
    for last_z, norb in _NOBLE_GAS_CORES:
        if z > last_z:
            count = norb
    return count


def read_xyz(path: str | os.PathLike) -> str:
    """Read a standard XYZ file into a Cartesian atom string in Angstrom.

    Format: line 1 the number of atoms, line 2 a free comment, then one ``element x y z`` line
    per atom (Angstrom); trailing blank lines are allowed, multi-frame files are not.

    Args:
        path: the ``.xyz`` file.

    Returns:
        ``"O 0.0 0.0 0.0; H 0.0 0.757 0.587; ..."`` suitable for ``compute_integrals(atoms=...)``.
    """
    from eigensweep.inputs import MAX_XYZ_BYTES, read_user_text

    name = os.fspath(path)
    # bounded read of a regular file; messages below never quote the file's content
    lines = read_user_text(name, limit=MAX_XYZ_BYTES, what="XYZ file").splitlines()

    def bad(lineno: int, what: str) -> ConfigError:
        return ConfigError(_one_line(f"{name}: line {lineno}: {what}; fix the XYZ file"))

    if not lines or not lines[0].strip():
        raise bad(1, "expected the number of atoms, found an empty line")
    try:
        natm = int(lines[0].strip())
    except ValueError:
        raise bad(1, "expected the number of atoms") from None
    if natm <= 0:
        raise bad(1, f"atom count must be positive, found {natm}")
    body = lines[2 : 2 + natm]
    if len(body) < natm:
        raise bad(len(lines) + 1, f"file ends after {len(body)} of {natm} atom lines")
    extra = [k for k, text in enumerate(lines[2 + natm :], start=3 + natm) if text.strip()]
    if extra:
        raise bad(extra[0], f"more atom lines than the count {natm} (multi-frame XYZ?)")
    out = []
    for lineno, text in enumerate(body, start=3):
        fields = text.split()
        if len(fields) < 4:
            raise bad(lineno, f"expected 'element x y z', found {len(fields)} fields")
        symbol = fields[0]
        if atomic_number(symbol) == 0:
            raise bad(lineno, "unknown element symbol")
        try:
            xyz = [float(v) for v in fields[1:4]]
        except ValueError:
            raise bad(lineno, "non-numeric coordinate") from None
        if not all(math.isfinite(v) for v in xyz):
            raise bad(lineno, "non-finite coordinate")
        out.append(f"{symbol} {xyz[0]!r} {xyz[1]!r} {xyz[2]!r}")
    return "; ".join(out)
