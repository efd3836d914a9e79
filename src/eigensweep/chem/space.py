"""Pre-flight checks of a molecule and its orbital partition (frozen core, active space).

Fast (no SCF): the rules are those of :mod:`eigensweep.chem.integrals`' module docstring.
"""

from __future__ import annotations

import warnings
from dataclasses import dataclass
from typing import Any

import numpy as np
from pyscf import gto

from eigensweep.chem.geometry import (
    ELEMENTS,
    atomic_number,
    check_geometry,
    noble_gas_core_orbitals,
    normalise_unit,
)
from eigensweep.chem.notes import one_line, reason
from eigensweep.errors import ConfigError

__all__ = [
    "DEGENERATE_ORBITAL_TOL",
    "MoleculePlan",
    "check_active_window",
    "check_molecule",
    "is_int",
    "note_character_change",
    "plan_molecule",
]

#: Orbitals whose energies differ by less than this (hartree) are one degenerate set.
DEGENERATE_ORBITAL_TOL = 1e-5


@dataclass
class MoleculePlan:
    """Validated input: parsed geometry, electron counts and the orbital partition."""

    parsed: list[tuple[str, tuple[float, float, float]]]
    unit: str
    nelectron: int
    spin: int
    nmo: int
    n_frozen_core: int
    ncore: int
    ncas: int
    nelecas: tuple[int, int]


def is_int(x: Any) -> bool:
    return isinstance(x, (int, np.integer)) and not isinstance(x, bool)


def _load_basis(basis: str, element: str) -> bool:
    with warnings.catch_warnings():
        warnings.simplefilter("ignore")
        try:
            return bool(gto.basis.load(basis, element))
        except Exception:
            return False


def _resolve_frozen(frozen_core: str | int, zs: list[int], where: str) -> int:
    if isinstance(frozen_core, str) and frozen_core.strip().lower() in ("none", "auto"):
        if frozen_core.strip().lower() == "none":
            return 0
        return sum(noble_gas_core_orbitals(z) for z in zs)
    if is_int(frozen_core) and frozen_core >= 0:
        return int(frozen_core)
    raise ConfigError(
        one_line(
            f"{where}: frozen_core: {frozen_core!r} is not valid; "
            "use 'none', 'auto' (noble-gas cores) or a non-negative number of orbitals"
        )
    )


def _resolve_space(
    nelectron: int,
    spin: int,
    multiplicity: int,
    nmo: int,
    n_frozen_core: int,
    active: dict | None,
    where: str,
) -> tuple[int, int, tuple[int, int]]:
    """Apply the orbital-space rules of the module docstring; returns (ncore, ncas, nelecas)."""
    ndocc = (nelectron - spin) // 2
    nalpha = (nelectron + spin) // 2
    if nalpha > nmo:
        raise ConfigError(
            one_line(
                f"{where}: basis: only {nmo} orbitals for {nalpha} alpha electrons; "
                "use a larger basis or check charge/multiplicity"
            )
        )
    if n_frozen_core > ndocc:
        raise ConfigError(
            one_line(
                f"{where}: frozen_core: {n_frozen_core} frozen orbitals exceed the {ndocc} doubly "
                f"occupied orbitals ({nelectron} electrons, multiplicity {multiplicity}); "
                f"freeze at most {ndocc}"
            )
        )
    if active is None:
        ne = nelectron - 2 * n_frozen_core
        if ne <= 0:
            raise ConfigError(
                one_line(
                    f"{where}: frozen_core: freezing {n_frozen_core} orbitals leaves no active "
                    "electrons; freeze fewer orbitals"
                )
            )
        return n_frozen_core, nmo - n_frozen_core, ((ne + spin) // 2, (ne - spin) // 2)

    if not isinstance(active, dict) or set(active) != {"electrons", "orbitals"}:
        raise ConfigError(
            one_line(
                f"{where}: active: expected {{'electrons': int, 'orbitals': int}}, got {active!r}; "
                "give both keys or leave active unset for all orbitals above the frozen core"
            )
        )
    ne, no = active["electrons"], active["orbitals"]
    for key, val in (("electrons", ne), ("orbitals", no)):
        if not is_int(val) or val <= 0:
            raise ConfigError(
                one_line(f"{where}: active.{key}: {val!r} is not a positive integer; fix it")
            )
    available = nelectron - 2 * n_frozen_core
    if ne > available:
        raise ConfigError(
            one_line(
                f"{where}: active.electrons: {ne} exceeds the {available} electrons available "
                f"after freezing {n_frozen_core} core orbitals ({nelectron} in total); "
                "lower active.electrons or frozen_core"
            )
        )
    if ne < spin or (ne - spin) % 2:
        raise ConfigError(
            one_line(
                f"{where}: active.electrons: {ne} is incompatible with multiplicity "
                f"{multiplicity} ({nelectron} electrons): inactive orbitals are doubly occupied, "
                f"so use at least {spin} active electrons with the parity of {nelectron}"
            )
        )
    ncore = (nelectron - ne) // 2
    if no > nmo - ncore:
        raise ConfigError(
            one_line(
                f"{where}: active.orbitals: {no} exceeds the {nmo - ncore} orbitals available "
                f"above the {ncore} inactive ones ({nmo} in the basis); "
                "lower active.orbitals or use a larger basis"
            )
        )
    na, nb = (ne + spin) // 2, (ne - spin) // 2
    if na > no:
        raise ConfigError(
            one_line(
                f"{where}: active.orbitals: {no} orbitals cannot hold {na} alpha electrons; "
                f"use at least {na} active orbitals"
            )
        )
    return ncore, int(no), (na, nb)


def plan_molecule(
    *,
    atoms: str,
    basis: str,
    charge: int,
    multiplicity: int,
    unit: str,
    frozen_core: str | int,
    active: dict | None,
    where: str,
) -> MoleculePlan:
    unit = normalise_unit(unit, where)
    parsed = check_geometry(atoms, unit, where)
    if not is_int(charge):
        raise ConfigError(one_line(f"{where}: charge: {charge!r} is not an integer; fix it"))
    if not is_int(multiplicity) or multiplicity < 1:
        raise ConfigError(
            one_line(
                f"{where}: multiplicity: {multiplicity!r} is not valid; give 2S+1 >= 1 "
                "(1 singlet, 2 doublet, 3 triplet, ...)"
            )
        )
    if not isinstance(basis, str) or not basis.strip():
        raise ConfigError(
            one_line(f"{where}: basis: {basis!r} is not a basis name; give e.g. 'sto-3g'")
        )
    zs = [atomic_number(sym) for sym, _ in parsed]
    elements_seen = []
    for z in zs:
        if z not in elements_seen:
            elements_seen.append(z)
    for z in elements_seen:
        name = ELEMENTS[z]
        if not _load_basis(basis, name):
            raise ConfigError(
                one_line(
                    f"{where}: basis: {basis!r} is unknown or has no functions for element "
                    f"{name}; check the spelling or pick a basis that covers {name} "
                    "(e.g. sto-3g, 6-31g, cc-pvdz)"
                )
            )
    nelectron = sum(zs) - int(charge)
    if nelectron <= 0:
        raise ConfigError(
            one_line(
                f"{where}: charge: {charge} leaves {nelectron} electrons "
                f"(nuclear charge {sum(zs)}); lower the charge"
            )
        )
    spin = int(multiplicity) - 1
    if spin > nelectron:
        raise ConfigError(
            one_line(
                f"{where}: multiplicity: {multiplicity} needs {spin} unpaired electrons but there "
                f"are only {nelectron}; lower the multiplicity"
            )
        )
    if (nelectron - spin) % 2:
        parity = "even" if nelectron % 2 == 0 else "odd"
        allowed = "odd (1, 3, ...)" if nelectron % 2 == 0 else "even (2, 4, ...)"
        raise ConfigError(
            one_line(
                f"{where}: multiplicity: {multiplicity} is impossible for {nelectron} electrons "
                f"(charge {charge}): an {parity} electron count needs an {allowed} "
                "multiplicity; change charge or multiplicity"
            )
        )
    try:
        mol = gto.M(
            atom=parsed,
            basis=basis,
            charge=int(charge),
            spin=spin,
            unit=unit,
            symmetry=False,
            verbose=0,
        )
    except Exception as err:
        raise ConfigError(
            one_line(f"{where}: atoms/basis: PySCF cannot build the molecule ({reason(err)})")
        ) from None
    nmo = int(mol.nao_nr())
    n_frozen_core = _resolve_frozen(frozen_core, zs, where)
    ncore, ncas, nelecas = _resolve_space(
        nelectron, spin, int(multiplicity), nmo, n_frozen_core, active, where
    )
    return MoleculePlan(parsed, unit, nelectron, spin, nmo, n_frozen_core, ncore, ncas, nelecas)


def check_molecule(
    *,
    atoms: str,
    basis: str,
    charge: int,
    multiplicity: int,
    unit: str = "angstrom",
    frozen_core: str | int = "none",
    active: dict | None = None,
    where: str = "molecule",
) -> None:
    """Fast pre-flight validation of one molecule/point (no SCF, milliseconds).

    Checks: parseable Cartesian atoms with known elements; nuclei at least 0.1 Angstrom apart;
    the basis exists for every element; a positive electron count; a multiplicity compatible
    with the electron count; a frozen core no larger than the doubly occupied orbitals; an
    active space that fits (see the module docstring for the rules).

    Args:
        atoms: ``"Li 0 0 0; H 0 0 1.6"`` (Cartesian, numbers already filled in).
        basis: PySCF basis name, e.g. ``"sto-3g"``.
        charge: molecular charge.
        multiplicity: 2S+1.
        unit: ``"angstrom"`` or ``"bohr"``.
        frozen_core: ``"none"``, ``"auto"`` or a number of spatial orbitals.
        active: ``{"electrons": int, "orbitals": int}`` or ``None`` for all orbitals.
        where: prefix of error messages, e.g. ``"molecules[1] (lih) point r=1.6"``.

    Returns:
        None; raises :class:`~eigensweep.errors.ConfigError` (one-line message starting with
        ``where``) on the first problem found.
    """
    plan_molecule(
        atoms=atoms,
        basis=basis,
        charge=charge,
        multiplicity=multiplicity,
        unit=unit,
        frozen_core=frozen_core,
        active=active,
        where=where,
    )


def _degenerate_set(mo_energy: np.ndarray, boundary: int) -> tuple[int, int] | None:
    """``(lo, hi)``: the degenerate run of orbitals that a window edge before ``boundary``
    splits (``lo < boundary <= hi``), or None."""
    if boundary <= 0 or boundary >= mo_energy.size:
        return None
    if abs(mo_energy[boundary] - mo_energy[boundary - 1]) >= DEGENERATE_ORBITAL_TOL:
        return None
    lo, hi = boundary - 1, boundary
    while lo > 0 and abs(mo_energy[lo - 1] - mo_energy[lo]) < DEGENERATE_ORBITAL_TOL:
        lo -= 1
    while (
        hi + 1 < mo_energy.size and abs(mo_energy[hi + 1] - mo_energy[hi]) < DEGENERATE_ORBITAL_TOL
    ):
        hi += 1
    return lo, hi


def check_active_window(
    mo_energy: np.ndarray, ncore: int, ncas: int, nelecas: tuple[int, int], where: str
) -> None:
    """Refuse an active window that splits a set of degenerate orbitals.

    With one partner of a degenerate pair (e.g. a pi pair) active and the other inactive or
    external, the active-space model breaks the molecule's symmetry and differs from point to
    point of a scan (orbital order changes), so its energies cannot be compared.

    Raises:
        ChemistryError: one line naming ``active`` and the two nearest windows that keep the set
            whole (one larger, one smaller).
    """
    from eigensweep.errors import ChemistryError

    mo_energy = np.asarray(mo_energy, dtype=float).reshape(-1)
    ne = int(sum(nelecas))
    for edge, boundary in (("lower", ncore), ("upper", ncore + ncas)):
        found = _degenerate_set(mo_energy, boundary)
        if found is None:
            continue
        lo, hi = found
        if edge == "lower":  # inactive doubly occupied orbitals lo..boundary-1
            grow, shrink = boundary - lo, hi + 1 - boundary
            options = [(ne + 2 * grow, ncas + grow), (ne - 2 * shrink, ncas - shrink)]
        else:
            grow, shrink = hi + 1 - boundary, boundary - lo
            options = [(ne, ncas + grow), (ne, ncas - shrink)]
        valid = [f"{{electrons: {e}, orbitals: {o}}}" for e, o in options if e > 0 and o * 2 >= e]
        raise ChemistryError(
            one_line(
                f"{where}: active: the {edge} edge of the active window splits degenerate "
                f"orbitals {lo}-{hi} (energy {mo_energy[lo]:.6f} Eh); use "
                f"{' or '.join(valid) or 'another active space'} to keep them together"
            )
        )


def note_character_change(
    orbsym: list[str], neighbour_orbsym: list[str] | None, notes: dict
) -> None:
    """Note when the active orbitals' irreps differ from those of the neighbouring point."""
    if not neighbour_orbsym or not orbsym or sorted(orbsym) == sorted(neighbour_orbsym):
        return
    notes["active"] = (
        "the active orbitals changed character from the neighbouring scan point "
        f"({' '.join(sorted(neighbour_orbsym))} -> {' '.join(sorted(orbsym))}): "
        "energies along the scan belong to different models"
    )
