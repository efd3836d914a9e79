"""Geometry input: Cartesian and Z-matrix atom strings, placeholders, XYZ files, element data.

The atom strings stored in stage parameters are PySCF's Cartesian form, ``"Li 0 0 0; H 0 0 1.6"``
(entries separated by ``;`` or new lines, each ``symbol x y z``).  They are parsed here rather
than by PySCF so that a typo gives a one-line :class:`~eigensweep.errors.ConfigError` naming the
molecule and the offending entry instead of a Python exception from deep inside the library.

Configurations may also give a Z-matrix (lines ``El``, ``El i r``, ``El i r j angle``,
``El i r j angle k dihedral``; 1-based atom indices, angles in degrees) and ``{placeholders}``
holding arithmetic on scan variables (``{r*cos(radians(a/2))}``), evaluated by a small
whitelisting evaluator (:func:`evaluate_expression`, no ``eval``).  The planner turns both into
the Cartesian form with :func:`fill_template`, so the chemistry stage only ever sees Cartesians.

This module does not import PySCF (planning code reads XYZ files without the chemistry stack).
"""

from __future__ import annotations

import ast
import math
import operator
import os
import re

from eigensweep.errors import ConfigError

__all__ = [
    "BOHR_IN_ANGSTROM",
    "ELEMENTS",
    "MAX_COORDINATE",
    "MIN_DISTANCE_ANGSTROM",
    "SCAN_UNITS",
    "atomic_number",
    "canonical_atoms",
    "check_geometry",
    "evaluate_expression",
    "fill_template",
    "infer_scan_units",
    "is_zmatrix",
    "min_distance",
    "noble_gas_core_orbitals",
    "normalise_unit",
    "parse_atoms",
    "placeholder_variables",
    "read_xyz",
    "zmatrix_to_cartesian",
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


# ---------------------------------------------------------------------------------------------
# Placeholders with arithmetic: a whitelisting evaluator over Python's expression grammar
# ---------------------------------------------------------------------------------------------

#: Units a scan variable may carry: lengths follow the molecule's ``unit``; angles are degrees.
SCAN_UNITS: dict[str, str] = {"angstrom": "Å", "bohr": "bohr", "degree": "°", "none": ""}

_FUNCTIONS = {
    "sin": math.sin,
    "cos": math.cos,
    "tan": math.tan,
    "asin": math.asin,
    "acos": math.acos,
    "atan": math.atan,
    "sqrt": math.sqrt,
    "radians": math.radians,
    "degrees": math.degrees,
    "abs": abs,
}
_CONSTANTS = {"pi": math.pi}
_BINARY = {
    ast.Add: operator.add,
    ast.Sub: operator.sub,
    ast.Mult: operator.mul,
    ast.Div: operator.truediv,
    ast.Pow: operator.pow,
}
_UNARY = {ast.UAdd: operator.pos, ast.USub: operator.neg}
_PLACEHOLDER = re.compile(r"\{([^{}]*)\}")


def _parse_expression(text: str, where: str) -> ast.Expression:
    try:
        tree = ast.parse(text.strip(), mode="eval")
    except SyntaxError:
        raise ConfigError(
            _one_line(f"{where}: placeholder {{{text}}} is not an arithmetic expression")
        ) from None
    for node in ast.walk(tree):
        ok = (
            isinstance(
                node,
                (
                    ast.Expression,
                    ast.BinOp,
                    ast.UnaryOp,
                    ast.Constant,
                    ast.Name,
                    ast.Load,
                    ast.Call,
                ),
            )
            or type(node) in _BINARY
            or type(node) in _UNARY
        )
        if isinstance(node, ast.Constant) and not isinstance(node.value, (int, float)):
            ok = False
        if isinstance(node, ast.Call) and not (
            isinstance(node.func, ast.Name)
            and node.func.id in _FUNCTIONS
            and len(node.args) == 1
            and not node.keywords
        ):
            ok = False
        if not ok:
            raise ConfigError(
                _one_line(
                    f"{where}: placeholder {{{text}}} uses something other than numbers, scan "
                    "variables, + - * / **, pi and " + ", ".join(sorted(_FUNCTIONS))
                )
            )
    return tree


def _expression_names(tree: ast.Expression) -> set[str]:
    funcs = {id(n.func) for n in ast.walk(tree) if isinstance(n, ast.Call)}
    return {
        n.id
        for n in ast.walk(tree)
        if isinstance(n, ast.Name) and id(n) not in funcs and n.id not in _CONSTANTS
    }


def evaluate_expression(text: str, variables: dict[str, float], where: str = "atoms") -> float:
    """Value of an arithmetic placeholder such as ``"r*cos(radians(a/2))"``.

    Allowed: numbers, the given variables, ``pi``, ``+ - * / **``, unary minus and the
    one-argument functions sin, cos, tan, asin, acos, atan (radians), sqrt, radians, degrees, abs.
    The text is parsed with :mod:`ast` and walked node by node; nothing is executed.

    Args:
        text: the expression (without braces).
        variables: scan variable values.
        where: prefix for error messages.

    Returns:
        The value as a finite float.

    Examples:
        >>> evaluate_expression("2*r - 0.5", {"r": 1.0})
        1.5
    """
    tree = _parse_expression(text, where)
    unknown = sorted(_expression_names(tree) - set(variables))
    if unknown:
        raise ConfigError(
            _one_line(
                f"{where}: placeholder {{{text}}} uses {unknown[0]!r}, which is no scan variable; "
                f"add scan: {{{unknown[0]}: [...]}}"
            )
        )

    def ev(node: ast.AST) -> float:
        if isinstance(node, ast.Expression):
            return ev(node.body)
        if isinstance(node, ast.Constant):
            return float(node.value)
        if isinstance(node, ast.Name):
            return float(_CONSTANTS[node.id] if node.id in _CONSTANTS else variables[node.id])
        if isinstance(node, ast.UnaryOp):
            return _UNARY[type(node.op)](ev(node.operand))
        if isinstance(node, ast.BinOp):
            left, right = ev(node.left), ev(node.right)
            if isinstance(node.op, ast.Pow) and abs(right) > 64:
                raise ValueError("exponent above 64")
            return _BINARY[type(node.op)](left, right)
        assert isinstance(node, ast.Call) and isinstance(node.func, ast.Name)
        return float(_FUNCTIONS[node.func.id](ev(node.args[0])))

    try:
        value = ev(tree)
    except (ValueError, ZeroDivisionError, OverflowError) as err:
        raise ConfigError(
            _one_line(f"{where}: placeholder {{{text}}} cannot be evaluated ({err})")
        ) from None
    if not math.isfinite(value):
        raise ConfigError(_one_line(f"{where}: placeholder {{{text}}} is not finite"))
    return value


def placeholder_variables(template: str, where: str = "atoms") -> set[str]:
    """Scan variables named inside the ``{...}`` placeholders of an atom template."""
    names: set[str] = set()
    for text in _PLACEHOLDER.findall(template):
        names |= _expression_names(_parse_expression(text, where))
    return names


def _entries(text: str) -> list[list[str]]:
    return [e.replace(",", " ").split() for e in re.split(r"[;\n]", text) if e.strip()]


def is_zmatrix(template: str) -> bool:
    """True when the atom string is a Z-matrix: its first entry is a bare element symbol."""
    entries = _entries(_PLACEHOLDER.sub("0", template))
    return bool(entries) and len(entries[0]) == 1


def infer_scan_units(template: str, unit: str = "angstrom", where: str = "atoms") -> dict[str, str]:
    """Unit of every scan variable as placed in the template.

    In a Z-matrix, a variable inside an angle or dihedral field is in degrees and one inside a
    distance field in the molecule's ``unit``; in Cartesian input a variable is a length, except
    inside ``radians(...)`` (degrees) or directly inside sin/cos/tan (radians: ``"none"``).
    A variable used in two kinds of place is ``"none"``; a scan entry's own ``unit`` overrides.

    Returns:
        ``{variable: "angstrom" | "bohr" | "degree" | "none"}``.
    """
    length = normalise_unit(unit, where)
    zmat = is_zmatrix(template)
    out: dict[str, str] = {}
    for entry in re.split(r"[;\n]", template):
        # split on whitespace outside braces so "{r * 2}" stays one field
        fields = re.findall(r"(?:\{[^{}]*\}|[^\s,{}])+", entry)
        for pos, field in enumerate(fields):
            kind = "degree" if zmat and pos in (4, 6) else length
            for text in _PLACEHOLDER.findall(field):
                tree = _parse_expression(text, where)
                angles = _names_inside(tree, ("radians",))
                bare = _names_inside(tree, ("sin", "cos", "tan"))
                for name in _expression_names(tree):
                    this = "degree" if name in angles else "none" if name in bare else kind
                    out[name] = this if out.get(name, this) == this else "none"
    return out


def _names_inside(tree: ast.Expression, functions: tuple[str, ...]) -> set[str]:
    """Variables appearing inside a call of one of ``functions``."""
    out: set[str] = set()
    for node in ast.walk(tree):
        if isinstance(node, ast.Call) and node.func.id in functions:  # type: ignore[attr-defined]
            out |= _expression_names(ast.Expression(body=node.args[0]))
    return out


def zmatrix_to_cartesian(
    entries: list[list[str]], where: str = "atoms"
) -> list[tuple[str, tuple[float, float, float]]]:
    """Cartesian coordinates from a Z-matrix (natural extension reference frame placement).

    Convention: atom 1 at the origin, atom 2 on +z, atom 3 in the xz-plane (x > 0); a dihedral
    is the IUPAC torsion angle i-j-k-l (positive clockwise seen from j to k).  Method: Parsons,
    Holmes, Rojas, Tsai, Strauss, J. Comput. Chem. 26, 1063 (2005).

    Args:
        entries: split Z-matrix lines ``[El]``, ``[El, i, r]``, ``[El, i, r, j, angle]``,
            ``[El, i, r, j, angle, k, dihedral]`` with numbers already filled in; indices 1-based.
        where: prefix for error messages.

    Returns:
        ``(symbol, (x, y, z))`` per atom, lengths in the unit of the distances given.
    """
    import numpy as np

    coords: list[np.ndarray] = []
    out: list[tuple[str, tuple[float, float, float]]] = []

    def bad(i: int, what: str) -> ConfigError:
        return ConfigError(_one_line(f"{where}: atoms: Z-matrix line {i}: {what}"))

    for i, fields in enumerate(entries, start=1):
        want = 1 + 2 * min(i - 1, 3)
        if len(fields) != want:
            raise bad(
                i,
                f"{' '.join(fields)!r} has {len(fields)} fields, expected {want} "
                "(El, El i r, El i r j angle, El i r j angle k dihedral)",
            )
        symbol = fields[0]
        if atomic_number(symbol) == 0:
            raise bad(i, f"unknown element {symbol!r}")
        try:
            refs = [int(v) for v in fields[1::2]]
            vals = [float(v) for v in fields[2::2]]
        except ValueError:
            raise bad(
                i, f"{' '.join(fields)!r}: atom indices must be integers, values numbers"
            ) from None
        if any(not 1 <= r < i for r in refs) or len(set(refs)) != len(refs):
            raise bad(i, f"atom indices {refs} must be distinct earlier atoms (1..{i - 1})")
        if vals and vals[0] <= 0:
            raise bad(i, f"distance {vals[0]} must be positive")
        if len(vals) > 1 and not 0.0 <= vals[1] <= 180.0:
            raise bad(i, f"angle {vals[1]} must lie in [0, 180] degrees")
        if i == 1:
            pos = np.zeros(3)
        elif i == 2:
            pos = coords[refs[0] - 1] + np.array([0.0, 0.0, vals[0]])
        else:
            a = coords[refs[0] - 1]
            b = coords[refs[1] - 1]
            if i == 3:
                # atoms 1 and 2 lie on z: a helper point on +x at torsion 0 puts atom 3 at x > 0
                c = b + np.array([1.0, 0.0, 0.0])
                dihedral = 0.0
            else:
                c = coords[refs[2] - 1]
                dihedral = vals[2]
            pos = _place(a, b, c, vals[0], vals[1], dihedral)
            if pos is None:
                raise bad(i, "the reference atoms are collinear, so the dihedral is undefined")
        coords.append(pos)
        out.append((symbol, tuple(float(v) for v in pos)))  # type: ignore[arg-type]
    return out


def _place(a, b, c, bond: float, angle: float, dihedral: float):
    """Point d with |d-a| = bond, angle d-a-b and torsion d-a-b-c (NeRF, Parsons et al. 2005)."""
    import numpy as np

    bc = a - b
    bc = bc / np.linalg.norm(bc)
    n = np.cross(b - c, bc)
    if np.linalg.norm(n) < 1e-10:
        if abs(angle) < 1e-9 or abs(angle - 180.0) < 1e-9:
            n = np.cross(bc, [1.0, 0.0, 0.0] if abs(bc[0]) < 0.9 else [0.0, 1.0, 0.0])
        else:
            return None
    n = n / np.linalg.norm(n)
    m = np.cross(n, bc)
    th, ph = math.radians(angle), math.radians(dihedral)
    d2 = np.array(
        [
            -bond * math.cos(th),
            bond * math.sin(th) * math.cos(ph),
            bond * math.sin(th) * math.sin(ph),
        ]
    )
    return a + d2[0] * bc + d2[1] * m + d2[2] * n


def fill_template(template: str, point: dict[str, float], where: str = "atoms") -> str:
    """Fill the ``{placeholders}`` of an atom template and return a Cartesian atom string.

    Placeholders hold a variable or an arithmetic expression of scan variables (see
    :func:`evaluate_expression`); values are written with 10 significant digits.  A Z-matrix
    template is converted with :func:`zmatrix_to_cartesian`.  The result is in the one spelling
    of :func:`canonical_atoms`, so cosmetic edits of the configuration do not change stage keys.

    Args:
        template: ``"H 0 0 0; H 0 0 {r}"`` or ``"O; H 1 {r}; H 1 {r} 2 {a}"``.
        point: ``{variable: value}`` for this scan point; must name exactly the variables used.
        where: prefix for error messages.

    Returns:
        ``"El x y z; El x y z; ..."`` in the molecule's unit.

    Examples:
        >>> fill_template("O; H 1 1.0; H 1 1.0 2 90", {})
        'O 0 0 0; H 0 0 1; H 1 0 0'
    """
    used = placeholder_variables(template, where)
    given = set(point)
    if used - given:
        missing = sorted(used - given)[0]
        raise ConfigError(
            f"{where}: atoms uses {{{missing}}} but scan has no values for it; add scan: {{{missing}: [...]}}"
        )
    if given - used:
        extra = sorted(given - used)[0]
        raise ConfigError(
            f"{where}: scan variable {extra!r} does not appear as {{{extra}}} in atoms; remove it or use it"
        )
    text = _PLACEHOLDER.sub(
        lambda m: format(evaluate_expression(m.group(1), point, where), ".10g"), template
    )
    if "{" in text or "}" in text:
        raise ConfigError(
            f"{where}: atoms has a malformed placeholder; write {{name}} or {{expression}} with matching braces"
        )
    if is_zmatrix(template):
        atoms = zmatrix_to_cartesian(_entries(text), where)
        text = "; ".join(f"{s} {x!r} {y!r} {z!r}" for s, (x, y, z) in atoms)
    # one spelling (symbols, numbers, separators) so cosmetic edits do not change keys
    return canonical_atoms(text, where=where)
