"""Stage 1 chemistry: SCF, active-space integrals and a ladder of classical reference energies.

One call of :func:`compute_integrals` handles one molecule at one geometry point:

1. pre-flight checks of the input (:func:`check_molecule`, no SCF);
2. a tightly converged RHF (closed shell) or ROHF (open shell) in the abelian point group of
   the geometry, optionally started from a neighbouring point's orbitals and followed by an
   internal stability analysis with re-optimisation along the unstable direction;
   the CASCI/FCI solver and MP2/CC run without symmetry restrictions, so no irrep is missed;
3. the active-space Hamiltonian: frozen/inactive doubly occupied orbitals are folded into a
   one-electron core potential and a constant (the CASCI effective Hamiltonian), the two-electron
   integrals of the active orbitals are stored as a full 4-index array in chemists' notation;
4. reference energies: HF, MP2, CCSD, CCSD(T), CASCI (exact in the active space) and FCI (exact
   in the full orbital space), each in the requested (N, S) sector; a rung that cannot be
   computed is ``nan`` with the reason in ``reference_notes``.

Orbital-space rules (``frozen_core`` with ``active``), with N electrons, spin 2S = multiplicity-1
and nmo molecular orbitals:

* ``frozen_core``: ``"none"`` = 0 orbitals; ``"auto"`` = sum over atoms of the noble-gas core
  (1 orbital for Li-Ne, 5 for Na-Ar, 9 for K-Kr, ...; see
  :func:`eigensweep.chem.geometry.noble_gas_core_orbitals`); an int = that many lowest orbitals.
* ``active=None``: the active space is everything above the frozen core: ``n_frozen`` = frozen
  core, ``norb = nmo - n_frozen``, active electrons ``N - 2*n_frozen``.
* ``active={"electrons": n, "orbitals": m}``: the inactive (doubly occupied, folded-in) orbitals
  are the lowest ``(N - n)/2``, the active ones the next ``m``; ``n`` may not exceed the
  ``N - 2*frozen`` electrons left by ``frozen_core`` (so the frozen core is always inactive).
  ``IntegralsResult.n_frozen`` reports the inactive count ``(N - n)/2``; the active orbitals are
  ``mo_coeff[:, n_frozen:n_frozen + norb]`` in every case.
* Active ``(n_alpha, n_beta)`` carry Ms = S: ``n_alpha - n_beta = multiplicity - 1``.

MP2, CCSD and CCSD(T) correlate the same orbitals as the active-space Hamiltonian (inactive and
external orbitals frozen), so the ladder hf -> mp2 -> ccsd -> ccsd_t -> casci approximates one
Hamiltonian, the one handed to the quantum solver; ``fci`` measures the active-space error.
"""

from __future__ import annotations

import math
import warnings
from dataclasses import dataclass, field
from typing import Any

import numpy as np
from pyscf import ao2mo, cc, gto, lib, mcscf, mp, scf, symm
from pyscf.scf import hf_symm
from pyscf.scf import stability as scf_stability

from eigensweep.chem.exact import SectorSolution, n_determinants, solve_sector
from eigensweep.chem.geometry import (
    ELEMENTS,
    atomic_number,
    check_geometry,
    noble_gas_core_orbitals,
    normalise_unit,
)
from eigensweep.errors import ChemistryError, ConfigError, StageFileError

__all__ = [
    "REFERENCE_KEYS",
    "IntegralsResult",
    "check_molecule",
    "compute_integrals",
    "n_determinants",
    "solve_sector",
]

#: Keys of ``IntegralsResult.references``, cheapest to exact.
REFERENCE_KEYS: tuple[str, ...] = ("hf", "mp2", "ccsd", "ccsd_t", "casci", "fci")

#: SCF thresholds: energy change (hartree) and orbital gradient norm.
SCF_CONV_TOL = 1e-10
SCF_CONV_TOL_GRAD = 1e-7
#: Internal-stability re-optimisation cycles.
STABILITY_CYCLES = 3
#: Up to this many basis functions PySCF runs single-threaded inside compute_integrals ...
SMALL_NAO = 40
#: ... except for CI spaces larger than this many determinants, which use all threads.
LARGE_CI = 20_000
#: Largest number of CI coefficients (vectors x determinants) stored with the integrals.
MAX_STORED_EXACT = 4_000_000

_STORE_FORMAT = "eigensweep.integrals"
_STORE_VERSION = 2
_ARRAY_KEYS = ("h1e", "eri", "mo_energy", "mo_occ", "mo_coeff", "exact_vectors")
_META_KEYS = (
    "norb",
    "nelec",
    "e_core",
    "e_nuc",
    "orbsym",
    "point_group",
    "scf_method",
    "n_frozen",
    "references",
    "reference_notes",
    "spin_square",
)


def _one_line(text: str) -> str:
    return " ".join(str(text).split())


def _reason(err: BaseException) -> str:
    text = _one_line(str(err)) or "no message"
    return f"{type(err).__name__}: {text[:160]}"


# --------------------------------------------------------------------------------------------
# result container
# --------------------------------------------------------------------------------------------


@dataclass(eq=False)
class IntegralsResult:
    """Active-space Hamiltonian and reference energies of one molecule at one geometry.

    The electronic Hamiltonian in the active space is
    ``H = e_core + sum_pq h1e[p,q] E_pq + 1/2 sum_pqrs eri[p,q,r,s] (E_pq E_rs - delta_qr E_ps)``
    with spin-summed excitation operators ``E_pq``; ``eri`` is in chemists' notation (pq|rs).
    All energies are in hartree; ``references`` are total energies (core included).

    Attributes:
        norb: active spatial orbitals.
        nelec: active (n_alpha, n_beta), n_alpha - n_beta = multiplicity - 1.
        h1e: (norb, norb) one-electron integrals in the active MOs, core potential folded in.
        eri: (norb,)*4 real two-electron integrals (pq|rs) in the active MOs (not packed).
        e_core: nuclear repulsion + energy of the doubly occupied inactive orbitals.
        e_nuc: nuclear repulsion.
        mo_energy, mo_occ, mo_coeff: all SCF orbitals, ordered doubly / singly / unoccupied
            (energy order within each), ``mo_coeff`` in the AO basis of PySCF's standard
            orientation of the molecule when symmetry is used.
        orbsym: irrep labels of the active orbitals ([] without symmetry).
        point_group: abelian group used ("C1" without symmetry).
        scf_method: "RHF" or "ROHF".
        n_frozen: doubly occupied orbitals below the active window (frozen core plus any
            inactive orbitals implied by ``active``); active MOs are
            ``mo_coeff[:, n_frozen:n_frozen + norb]``.
        references: total energies for :data:`REFERENCE_KEYS` (``nan`` when not computed).
        reference_notes: why a rung is ``nan`` or how it was approximated; also
            ``"symmetry"`` when point-group detection failed.
        spin_square: <S^2> of the CASCI state (``nan`` when CASCI was skipped).
        exact_vectors: ``(k, n_determinants)`` orthonormal flat CI vectors (PySCF string order)
            spanning the degenerate CASCI ground space of ``references["casci"]`` (the one exact
            reference, :func:`eigensweep.chem.exact.solve_sector`); ``(0, 0)`` when CASCI was
            skipped or failed, or the vectors exceed :data:`MAX_STORED_EXACT`.
    """

    norb: int
    nelec: tuple[int, int]
    h1e: np.ndarray
    eri: np.ndarray
    e_core: float
    e_nuc: float
    mo_energy: np.ndarray
    mo_occ: np.ndarray
    mo_coeff: np.ndarray
    orbsym: list[str]
    point_group: str
    scf_method: str
    n_frozen: int
    references: dict[str, float]
    reference_notes: dict[str, str] = field(default_factory=dict)
    spin_square: float = float("nan")
    exact_vectors: np.ndarray = field(default_factory=lambda: np.zeros((0, 0)))

    @property
    def has_exact_vectors(self) -> bool:
        """Whether the exact ground space is stored (CASCI computed and small enough)."""
        return self.exact_vectors.size > 0

    def to_store(self) -> tuple[dict[str, np.ndarray], dict]:
        """Split into numpy arrays and JSON-serialisable metadata (plain Python types only).

        ``nan`` energies are written as ``None`` so that the metadata is strict JSON.

        Returns:
            ``(arrays, meta)``; ``IntegralsResult.from_store(arrays, meta)`` restores the result.
        """
        arrays = {key: np.array(getattr(self, key), dtype=np.float64) for key in _ARRAY_KEYS}

        def num(x: float) -> float | None:
            x = float(x)
            return None if math.isnan(x) else x

        meta = {
            "format": _STORE_FORMAT,
            "version": _STORE_VERSION,
            "norb": int(self.norb),
            "nelec": [int(self.nelec[0]), int(self.nelec[1])],
            "e_core": float(self.e_core),
            "e_nuc": float(self.e_nuc),
            "orbsym": [str(s) for s in self.orbsym],
            "point_group": str(self.point_group),
            "scf_method": str(self.scf_method),
            "n_frozen": int(self.n_frozen),
            "references": {str(k): num(v) for k, v in self.references.items()},
            "reference_notes": {str(k): str(v) for k, v in self.reference_notes.items()},
            "spin_square": num(self.spin_square),
        }
        return arrays, meta

    @classmethod
    def from_store(cls, arrays: dict[str, np.ndarray], meta: dict) -> IntegralsResult:
        """Rebuild a result written by :meth:`to_store`.

        Args:
            arrays: mapping with ``h1e``, ``eri``, ``mo_energy``, ``mo_occ``, ``mo_coeff``.
            meta: the metadata dictionary (e.g. read back from JSON).

        Returns:
            The restored :class:`IntegralsResult`.
        """
        if meta.get("format") != _STORE_FORMAT or meta.get("version") != _STORE_VERSION:
            raise StageFileError(
                f"integrals store: format {meta.get('format')!r} version {meta.get('version')!r} "
                f"is not {_STORE_FORMAT!r} version {_STORE_VERSION}; re-run the integrals stage"
            )
        missing = [k for k in _ARRAY_KEYS if k not in arrays]
        missing += [k for k in _META_KEYS if k not in meta]
        if missing:
            raise StageFileError(
                f"integrals store: missing {', '.join(missing)}; re-run the integrals stage"
            )
        norb = int(meta["norb"])
        h1e = np.asarray(arrays["h1e"], dtype=np.float64)
        eri = np.asarray(arrays["eri"], dtype=np.float64)
        if h1e.shape != (norb, norb) or eri.shape != (norb,) * 4:
            raise StageFileError(
                f"integrals store: h1e {h1e.shape} / eri {eri.shape} do not match norb={norb}; "
                "re-run the integrals stage"
            )

        def num(x: Any) -> float:
            return float("nan") if x is None else float(x)

        return cls(
            norb=norb,
            nelec=(int(meta["nelec"][0]), int(meta["nelec"][1])),
            h1e=h1e,
            eri=eri,
            e_core=float(meta["e_core"]),
            e_nuc=float(meta["e_nuc"]),
            mo_energy=np.asarray(arrays["mo_energy"], dtype=np.float64),
            mo_occ=np.asarray(arrays["mo_occ"], dtype=np.float64),
            mo_coeff=np.asarray(arrays["mo_coeff"], dtype=np.float64),
            orbsym=[str(s) for s in meta["orbsym"]],
            point_group=str(meta["point_group"]),
            scf_method=str(meta["scf_method"]),
            n_frozen=int(meta["n_frozen"]),
            references={str(k): num(v) for k, v in meta["references"].items()},
            reference_notes={str(k): str(v) for k, v in meta["reference_notes"].items()},
            spin_square=num(meta["spin_square"]),
            exact_vectors=np.atleast_2d(np.asarray(arrays["exact_vectors"], dtype=np.float64)),
        )


# --------------------------------------------------------------------------------------------
# pre-flight checks
# --------------------------------------------------------------------------------------------


@dataclass
class _Plan:
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


def _is_int(x: Any) -> bool:
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
    if _is_int(frozen_core) and frozen_core >= 0:
        return int(frozen_core)
    raise ConfigError(
        _one_line(
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
            _one_line(
                f"{where}: basis: only {nmo} orbitals for {nalpha} alpha electrons; "
                "use a larger basis or check charge/multiplicity"
            )
        )
    if n_frozen_core > ndocc:
        raise ConfigError(
            _one_line(
                f"{where}: frozen_core: {n_frozen_core} frozen orbitals exceed the {ndocc} doubly "
                f"occupied orbitals ({nelectron} electrons, multiplicity {multiplicity}); "
                f"freeze at most {ndocc}"
            )
        )
    if active is None:
        ne = nelectron - 2 * n_frozen_core
        if ne <= 0:
            raise ConfigError(
                _one_line(
                    f"{where}: frozen_core: freezing {n_frozen_core} orbitals leaves no active "
                    "electrons; freeze fewer orbitals"
                )
            )
        return n_frozen_core, nmo - n_frozen_core, ((ne + spin) // 2, (ne - spin) // 2)

    if not isinstance(active, dict) or set(active) != {"electrons", "orbitals"}:
        raise ConfigError(
            _one_line(
                f"{where}: active: expected {{'electrons': int, 'orbitals': int}}, got {active!r}; "
                "give both keys or leave active unset for all orbitals above the frozen core"
            )
        )
    ne, no = active["electrons"], active["orbitals"]
    for key, val in (("electrons", ne), ("orbitals", no)):
        if not _is_int(val) or val <= 0:
            raise ConfigError(
                _one_line(f"{where}: active.{key}: {val!r} is not a positive integer; fix it")
            )
    available = nelectron - 2 * n_frozen_core
    if ne > available:
        raise ConfigError(
            _one_line(
                f"{where}: active.electrons: {ne} exceeds the {available} electrons available "
                f"after freezing {n_frozen_core} core orbitals ({nelectron} in total); "
                "lower active.electrons or frozen_core"
            )
        )
    if ne < spin or (ne - spin) % 2:
        raise ConfigError(
            _one_line(
                f"{where}: active.electrons: {ne} is incompatible with multiplicity "
                f"{multiplicity} ({nelectron} electrons): inactive orbitals are doubly occupied, "
                f"so use at least {spin} active electrons with the parity of {nelectron}"
            )
        )
    ncore = (nelectron - ne) // 2
    if no > nmo - ncore:
        raise ConfigError(
            _one_line(
                f"{where}: active.orbitals: {no} exceeds the {nmo - ncore} orbitals available "
                f"above the {ncore} inactive ones ({nmo} in the basis); "
                "lower active.orbitals or use a larger basis"
            )
        )
    na, nb = (ne + spin) // 2, (ne - spin) // 2
    if na > no:
        raise ConfigError(
            _one_line(
                f"{where}: active.orbitals: {no} orbitals cannot hold {na} alpha electrons; "
                f"use at least {na} active orbitals"
            )
        )
    return ncore, int(no), (na, nb)


def _plan(
    *,
    atoms: str,
    basis: str,
    charge: int,
    multiplicity: int,
    unit: str,
    frozen_core: str | int,
    active: dict | None,
    where: str,
) -> _Plan:
    unit = normalise_unit(unit, where)
    parsed = check_geometry(atoms, unit, where)
    if not _is_int(charge):
        raise ConfigError(_one_line(f"{where}: charge: {charge!r} is not an integer; fix it"))
    if not _is_int(multiplicity) or multiplicity < 1:
        raise ConfigError(
            _one_line(
                f"{where}: multiplicity: {multiplicity!r} is not valid; give 2S+1 >= 1 "
                "(1 singlet, 2 doublet, 3 triplet, ...)"
            )
        )
    if not isinstance(basis, str) or not basis.strip():
        raise ConfigError(
            _one_line(f"{where}: basis: {basis!r} is not a basis name; give e.g. 'sto-3g'")
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
                _one_line(
                    f"{where}: basis: {basis!r} is unknown or has no functions for element "
                    f"{name}; check the spelling or pick a basis that covers {name} "
                    "(e.g. sto-3g, 6-31g, cc-pvdz)"
                )
            )
    nelectron = sum(zs) - int(charge)
    if nelectron <= 0:
        raise ConfigError(
            _one_line(
                f"{where}: charge: {charge} leaves {nelectron} electrons "
                f"(nuclear charge {sum(zs)}); lower the charge"
            )
        )
    spin = int(multiplicity) - 1
    if spin > nelectron:
        raise ConfigError(
            _one_line(
                f"{where}: multiplicity: {multiplicity} needs {spin} unpaired electrons but there "
                f"are only {nelectron}; lower the multiplicity"
            )
        )
    if (nelectron - spin) % 2:
        parity = "even" if nelectron % 2 == 0 else "odd"
        allowed = "odd (1, 3, ...)" if nelectron % 2 == 0 else "even (2, 4, ...)"
        raise ConfigError(
            _one_line(
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
            _one_line(f"{where}: atoms/basis: PySCF cannot build the molecule ({_reason(err)})")
        ) from None
    nmo = int(mol.nao_nr())
    n_frozen_core = _resolve_frozen(frozen_core, zs, where)
    ncore, ncas, nelecas = _resolve_space(
        nelectron, spin, int(multiplicity), nmo, n_frozen_core, active, where
    )
    return _Plan(parsed, unit, nelectron, spin, nmo, n_frozen_core, ncore, ncas, nelecas)


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
    _plan(
        atoms=atoms,
        basis=basis,
        charge=charge,
        multiplicity=multiplicity,
        unit=unit,
        frozen_core=frozen_core,
        active=active,
        where=where,
    )


# --------------------------------------------------------------------------------------------
# SCF
# --------------------------------------------------------------------------------------------


def _build_mol(plan: _Plan, basis: str, charge: int, symmetry: bool, notes: dict) -> gto.Mole:
    kwargs = dict(atom=plan.parsed, basis=basis, charge=int(charge), spin=plan.spin, unit=plan.unit)
    if symmetry:
        try:
            mol = gto.M(symmetry=True, verbose=0, **kwargs)
            # Atoms and linear molecules have non-abelian groups; use the abelian subgroup.
            sub = {"SO3": "D2h", "Dooh": "D2h", "Coov": "C2v"}.get(mol.groupname)
            if sub is not None:
                mol = gto.M(symmetry=True, symmetry_subgroup=sub, verbose=0, **kwargs)
            return mol
        except Exception as err:
            notes["symmetry"] = f"point-group detection failed ({_reason(err)}); ran in C1"
    return gto.M(symmetry=False, verbose=0, **kwargs)


def _guess_dm(mol: gto.Mole, guess: Any, open_shell: bool, label: str) -> np.ndarray:
    """Density of a neighbouring point's occupied orbitals, Loewdin-orthonormalised in this
    geometry's overlap metric (so it is idempotent here)."""
    try:
        mo_coeff, mo_occ = guess
        mo_coeff = np.asarray(mo_coeff, dtype=np.float64)
        mo_occ = np.asarray(mo_occ, dtype=np.float64)
    except (TypeError, ValueError):
        raise ConfigError(
            _one_line(f"{label}: guess: expected a (mo_coeff, mo_occ) pair of arrays")
        ) from None
    nao = mol.nao_nr()
    if mo_coeff.ndim != 2 or mo_coeff.shape[0] != nao or mo_occ.shape != (mo_coeff.shape[1],):
        raise ConfigError(
            _one_line(
                f"{label}: guess: mo_coeff {mo_coeff.shape} / mo_occ {mo_occ.shape} do not fit "
                f"{nao} atomic orbitals; pass the guess of a point with the same atoms and basis"
            )
        )
    if abs(mo_occ.sum() - mol.nelectron) > 1e-6:
        raise ConfigError(
            _one_line(
                f"{label}: guess: orbitals hold {mo_occ.sum():g} electrons, the molecule has "
                f"{mol.nelectron}; pass the guess of a point with the same charge"
            )
        )
    sel = mo_occ > 1e-8
    c_occ, occ = mo_coeff[:, sel], mo_occ[sel]
    s1e = mol.intor_symmetric("int1e_ovlp")
    w, v = np.linalg.eigh(c_occ.T @ s1e @ c_occ)
    if w.min() < 1e-8:
        raise ConfigError(
            _one_line(
                f"{label}: guess: occupied orbitals are linearly dependent in this geometry; "
                "pass the guess of a neighbouring point with the same atom order"
            )
        )
    c_occ = c_occ @ (v * w**-0.5) @ v.T
    if not open_shell:
        return (c_occ * occ) @ c_occ.T
    ca, cb = c_occ[:, occ > 0.5], c_occ[:, occ > 1.5]
    return np.array([ca @ ca.T, cb @ cb.T])


def _newton(mf: scf.hf.SCF, mo_coeff: np.ndarray, mo_occ: np.ndarray) -> None:
    """Second-order SCF (augmented-Hessian Newton) from the given orbitals, then a DIIS polish
    to the tight thresholds; results go into ``mf``.

    PySCF's Newton solver reliably reaches the basin but its orbital gradient can stall around
    1e-6, so DIIS finishes; the Newton result is kept when DIIS fails or climbs out of it.
    """
    newton = mf.newton()
    newton.max_cycle = 50
    newton.conv_tol_grad = max(SCF_CONV_TOL_GRAD, 1e-5)
    newton.kernel(mo_coeff, mo_occ)
    mf.kernel(mf.make_rdm1(newton.mo_coeff, newton.mo_occ))
    if not mf.converged or mf.e_tot > newton.e_tot + 1e-8:
        for key in _STATE:
            setattr(mf, key, getattr(newton, key))


_STATE = ("mo_coeff", "mo_energy", "mo_occ", "e_tot", "converged")


def _kernel(mf: scf.hf.SCF, dm0: np.ndarray | None) -> None:
    """Converge ``mf`` from ``dm0``: DIIS first, then the second-order (Newton) solver."""
    mf.kernel(dm0)
    if not mf.converged:
        _newton(mf, mf.mo_coeff, mf.mo_occ)


def _new_scf(mol: gto.Mole) -> scf.hf.SCF:
    mf = scf.ROHF(mol) if mol.spin else scf.RHF(mol)
    mf.verbose = 0
    mf.conv_tol = SCF_CONV_TOL
    mf.conv_tol_grad = SCF_CONV_TOL_GRAD
    mf.max_cycle = 200
    mf.chkfile = None  # no scratch HDF5 file per SCF
    return mf


def _c1_copy(mol: gto.Mole) -> gto.Mole:
    """The same molecule without symmetry, kept in PySCF's standard orientation (same AOs)."""
    return gto.M(
        atom=[(mol.atom_symbol(i), mol.atom_coord(i)) for i in range(mol.natm)],
        unit="Bohr",
        basis=mol.basis,
        charge=mol.charge,
        spin=mol.spin,
        symmetry=False,
        verbose=0,
    )


def _internal_stability(mf: scf.hf.SCF, with_symmetry: bool) -> tuple[np.ndarray | None, bool]:
    """Lowest eigenvector of the internal orbital Hessian (Seeger & Pople 1977).

    Returns ``(mo_coeff rotated along it, stable)``; ``(None, True)`` when no orbital rotation
    is allowed (e.g. minimal-basis H2 in D2h).
    """
    occ = np.asarray(mf.mo_occ)
    n2, n0 = int(np.sum(occ > 1.5)), int(np.sum(occ < 0.5))
    n1 = occ.size - n2 - n0
    if n2 * (n1 + n0) + n1 * n0 == 0:
        return None, True
    internal = scf_stability.rohf_internal if mf.mol.spin else scf_stability.rhf_internal
    try:
        return internal(mf, with_symmetry=with_symmetry, verbose=0, return_status=True)
    except lib.exceptions.LinearDependencyError:
        return None, True  # no symmetry-allowed occupied-virtual rotation


def _stability_cycles(mf: scf.hf.SCF, with_symmetry: bool) -> bool:
    """Re-optimise along unstable directions, at most STABILITY_CYCLES times.

    Each re-optimisation is a second-order SCF started from the orbitals rotated along the
    negative Hessian mode (DIIS tends to fall back to the saddle point).  Returns whether the
    final solution is stable; a re-optimisation that does not converge or does not lower the
    energy is undone (the last converged solution is kept).
    """
    for _ in range(STABILITY_CYCLES):
        mo_new, stable = _internal_stability(mf, with_symmetry)
        if stable:
            return True
        saved = {k: getattr(mf, k) for k in _STATE}
        _newton(mf, mo_new, mf.mo_occ)
        if not mf.converged or mf.e_tot > saved["e_tot"] + 1e-10:
            for key, val in saved.items():
                setattr(mf, key, val)
            mf.converged = True
            return False
    return _internal_stability(mf, with_symmetry)[1]


def _symmetry_breaking_step(mf: scf.hf.SCF, notes: dict) -> scf.hf.SCF:
    """Follow an instability that the symmetry-adapted SCF cannot see.

    A symmetry-adapted SCF can be trapped in a solution with the wrong irrep occupation (e.g.
    when started from a poor guess); it is stable towards totally symmetric rotations only.
    If the Hessian without symmetry restriction has a negative mode, the SCF is re-optimised in
    C1 along it and the lower density is re-converged with symmetry.  The symmetry-adapted
    result is kept (symmetry was asked for); a note says when a symmetry-broken solution is
    lower still (``symmetry=False`` follows it).
    """
    mo_new, stable = _internal_stability(mf, with_symmetry=False)
    if stable:
        return mf
    c1 = _new_scf(_c1_copy(mf.mol))
    _newton(c1, mo_new, mf.mo_occ)
    if not c1.converged or c1.e_tot > mf.e_tot - 1e-8:
        return mf
    _stability_cycles(c1, with_symmetry=False)
    sym = _new_scf(mf.mol)
    _kernel(sym, c1.make_rdm1())
    if sym.converged and sym.e_tot < mf.e_tot - 1e-8:
        _add_note(notes, "hf", "moved to a lower symmetric solution (other irrep occupation)")
        mf = sym
    if c1.e_tot < mf.e_tot - 1e-6:
        _add_note(
            notes,
            "hf",
            f"a {mf.mol.groupname}-symmetry-broken solution lies {mf.e_tot - c1.e_tot:.2e} Eh "
            "lower (symmetry=False follows it)",
        )
    return mf


def _add_note(notes: dict, key: str, text: str) -> None:
    notes[key] = f"{notes[key]}; {text}" if key in notes else text


def _run_scf(mol: gto.Mole, guess: Any, stability: bool, label: str, notes: dict) -> scf.hf.SCF:
    mf = _new_scf(mol)
    method = "ROHF" if mol.spin else "RHF"
    dm0 = None if guess is None else _guess_dm(mol, guess, bool(mol.spin), label)
    _kernel(mf, dm0)
    if not mf.converged:
        raise ChemistryError(
            _one_line(
                f"{label}: scf: {method} did not converge (DIIS then second-order, "
                f"last E={mf.e_tot:.8f}); check geometry/charge/multiplicity, or start from a "
                "neighbouring point with guess= (smaller scan step)"
            )
        )
    if not stability:
        return mf
    saved = {k: getattr(mf, k) for k in ("mo_coeff", "mo_energy", "mo_occ", "e_tot")}
    try:
        if not _stability_cycles(mf, with_symmetry=True):
            _add_note(notes, "hf", "SCF internally unstable after re-optimisation attempts")
        if mol.symmetry:
            mf = _symmetry_breaking_step(mf, notes)
    except Exception as err:  # the analysis must not lose a converged SCF
        for key, val in saved.items():
            setattr(mf, key, val)
        mf.converged = True
        _add_note(notes, "hf", f"stability analysis failed ({_reason(err)}); SCF kept")
    return mf


def _orbsym_ids(mol: gto.Mole, mo_coeff: np.ndarray) -> np.ndarray | None:
    if not mol.symmetry:
        return None
    ids = getattr(mo_coeff, "orbsym", None)
    if ids is None:
        ids = hf_symm.get_orbsym(mol, mo_coeff)
    return np.asarray(ids)


def _aufbau_order(mf: scf.hf.SCF, notes: dict) -> None:
    """Ensure the orbital order is (doubly, singly, un-)occupied so index windows make sense."""
    mo_occ = np.asarray(mf.mo_occ)
    if np.all(np.diff(mo_occ) <= 0):
        return
    order = np.argsort(-mo_occ, kind="stable")  # keeps the energy order within each occupation
    ids = _orbsym_ids(mf.mol, mf.mo_coeff)
    mo_coeff = np.asarray(mf.mo_coeff)[:, order]
    if ids is not None:
        mo_coeff = lib.tag_array(mo_coeff, orbsym=ids[order])
    mf.mo_coeff = mo_coeff
    mf.mo_energy = np.asarray(mf.mo_energy)[order]
    mf.mo_occ = np.asarray(mf.mo_occ)[order]
    _add_note(notes, "hf", "non-aufbau SCF occupation; orbitals re-ordered by occupation")


# --------------------------------------------------------------------------------------------
# correlated references
# --------------------------------------------------------------------------------------------


def _frozen_list(ncore: int, ncas: int, nmo: int) -> list[int] | None:
    frozen = list(range(ncore)) + list(range(ncore + ncas, nmo))
    return frozen or None


def _semicanonical_uhf(mf: scf.hf.SCF, ncore: int, ncas: int) -> tuple[scf.uhf.UHF, list]:
    """ROHF orbitals as a UHF object in semicanonical form.

    The alpha and beta Fock matrices are diagonalised separately inside each block (frozen
    core | active occupied | active virtual | frozen virtual), which leaves the determinant and
    the frozen orbitals unchanged.  Returns the UHF object and the two MO-basis Fock matrices.
    """
    mol = mf.mol
    mo_coeff = np.asarray(mf.mo_coeff)
    nmo = mo_coeff.shape[1]
    occ = np.asarray(mf.mo_occ)
    occs = [(occ > 0.5).astype(np.float64), (occ > 1.5).astype(np.float64)]
    dm = np.array([(mo_coeff * o) @ mo_coeff.T for o in occs])
    umf = mf.to_uhf()
    umf.verbose = 0
    vhf = umf.get_veff(mol, dm)
    hcore = mf.get_hcore()
    coeffs, energies, focks = [], [], []
    for sigma in (0, 1):
        nocc = int(occs[sigma].sum())
        fock = mo_coeff.T @ (hcore + vhf[sigma]) @ mo_coeff
        edges = sorted({0, ncore, nocc, ncore + ncas, nmo})
        u = np.zeros((nmo, nmo))
        eps = np.zeros(nmo)
        for lo, hi in zip(edges[:-1], edges[1:], strict=True):
            w, v = np.linalg.eigh(fock[lo:hi, lo:hi])
            u[lo:hi, lo:hi] = v
            eps[lo:hi] = w
        coeffs.append(mo_coeff @ u)
        energies.append(eps)
        focks.append(u.T @ fock @ u)
    umf.mo_coeff = np.array(coeffs)
    umf.mo_energy = np.array(energies)
    umf.mo_occ = np.array(occs)
    umf.e_tot = mf.e_tot
    umf.converged = True
    return umf, focks


def _correlated(mf: scf.hf.SCF, ncore: int, ncas: int, refs: dict, notes: dict) -> None:
    """MP2, CCSD and CCSD(T) in the active space; failures become nan plus a note."""
    nmo = np.asarray(mf.mo_coeff).shape[-1]
    frozen = _frozen_list(ncore, ncas, nmo)
    open_shell = mf.mol.spin != 0
    e_hf = float(mf.e_tot)
    extra = []
    if frozen is not None:
        extra.append(
            f"frozen orbitals: {ncore} core, {nmo - ncore - ncas} virtual (same space as casci)"
        )
    active_occ = np.asarray(mf.mo_occ)[ncore : ncore + ncas]
    if not np.any(active_occ > 0.5) or np.all(active_occ > 1.5):
        # no occupied-to-virtual excitation inside the active space: one determinant
        for key in ("mp2", "ccsd", "ccsd_t"):
            refs[key] = e_hf
            notes[key] = "; ".join([*extra, "no excitations in the active space: equals HF"])
        return
    if open_shell:
        try:
            umf, focks = _semicanonical_uhf(mf, ncore, ncas)
        except Exception as err:
            for key in ("mp2", "ccsd", "ccsd_t"):
                notes[key] = f"failed: semicanonical ROHF orbitals ({_reason(err)})"
            return

    # MP2 (Moller & Plesset 1934); open shell: RMP2 of Knowles, Andrews, Amos, Handy & Pople,
    # Chem. Phys. Lett. 186, 130 (1991): semicanonical ROHF orbitals, doubles + singles.
    try:
        if not open_shell:
            pt = mp.MP2(mf, frozen=frozen)
            pt.verbose = 0
            e_corr = pt.kernel()[0]
        else:
            pt = mp.UMP2(umf, frozen=frozen)
            pt.verbose = 0
            e_corr = pt.kernel()[0]
            for sigma in (0, 1):
                n_occ = int(umf.mo_occ[sigma].sum())
                eps = umf.mo_energy[sigma]
                f_ov = focks[sigma][ncore:n_occ, n_occ : ncore + ncas]
                denom = eps[ncore:n_occ, None] - eps[None, n_occ : ncore + ncas]
                e_corr += float(np.sum(f_ov**2 / denom))
        refs["mp2"] = e_hf + float(e_corr)
        mp2_notes = list(extra)
        if open_shell:
            mp2_notes.append("RMP2 (semicanonical ROHF orbitals, singles included)")
        if mp2_notes:
            notes["mp2"] = "; ".join(mp2_notes)
    except Exception as err:
        notes["mp2"] = f"failed: {_reason(err)}"

    # CCSD (Purvis & Bartlett 1982) and CCSD(T) (Raghavachari et al. 1989); open shell:
    # spin-unrestricted CC on the ROHF determinant, (T) in semicanonical orbitals.
    try:
        mycc = cc.UCCSD(umf, frozen=frozen) if open_shell else cc.CCSD(mf, frozen=frozen)
        mycc.verbose = 0
        mycc.conv_tol = 1e-10
        mycc.conv_tol_normt = 1e-7
        mycc.max_cycle = 200
        mycc.kernel()
        if not mycc.converged:
            notes["ccsd"] = f"failed: CCSD not converged in {mycc.max_cycle} iterations"
            notes["ccsd_t"] = "skipped: CCSD not converged"
            return
        refs["ccsd"] = float(mycc.e_tot)
        if extra:
            notes["ccsd"] = "; ".join(extra)
    except Exception as err:
        notes["ccsd"] = f"failed: {_reason(err)}"
        notes["ccsd_t"] = "skipped: CCSD failed"
        return
    try:
        refs["ccsd_t"] = float(mycc.e_tot + mycc.ccsd_t())
        t_notes = list(extra)
        if open_shell:
            t_notes.append("ROHF-based (T) in semicanonical orbitals")
        if t_notes:
            notes["ccsd_t"] = "; ".join(t_notes)
    except Exception as err:
        notes["ccsd_t"] = f"failed: {_reason(err)}"


def _full_space_fci(
    mf: scf.hf.SCF, nelec: tuple[int, int], max_det: int, refs: dict, notes: dict, threads: int
) -> None:
    mo = np.asarray(mf.mo_coeff)
    nmo = mo.shape[1]
    ndet = n_determinants(nmo, nelec)
    if ndet > max_det:
        notes["fci"] = f"skipped: {ndet:.3g} determinants > fci_max_determinants={max_det:.3g}"
        return
    h1e = mo.T @ mf.get_hcore() @ mo
    eri = ao2mo.restore(1, ao2mo.full(mf.mol, mo), nmo)
    try:
        with lib.with_omp_threads(threads if ndet > LARGE_CI else None):
            refs["fci"] = solve_sector(h1e, eri, nmo, nelec, ecore=mf.energy_nuc()).energy
    except Exception as err:
        notes["fci"] = f"failed: {_reason(err)}"


# --------------------------------------------------------------------------------------------
# driver
# --------------------------------------------------------------------------------------------


def compute_integrals(
    *,
    atoms: str,
    basis: str,
    charge: int = 0,
    multiplicity: int = 1,
    unit: str = "angstrom",
    symmetry: bool = True,
    frozen_core: str | int = "none",
    active: dict | None = None,
    fci_max_determinants: int = 2_000_000,
    stability: bool = True,
    guess: tuple[np.ndarray, np.ndarray] | None = None,
    label: str = "molecule",
) -> IntegralsResult:
    """SCF, active-space integrals and reference energies of one molecule at one geometry.

    See the module docstring for the orbital-space rules.  The SCF is RHF for multiplicity 1
    and ROHF otherwise (Roothaan 1951/1960), converged to 1e-10 Eh and a 1e-7 orbital gradient,
    with DIIS (Pulay 1980) and a second-order fallback.  With ``stability`` the internal
    (RHF->RHF, ROHF->ROHF) orbital Hessian is checked (Seeger & Pople 1977) and the SCF
    re-optimised along a negative mode, at most three times; with symmetry, a second check
    without symmetry restriction catches a wrong irrep occupation (the SCF moves to the lower
    symmetric solution) and reports, without following it, a lower symmetry-broken solution
    (``reference_notes["hf"]``).  The active Hamiltonian is the CASCI effective Hamiltonian
    built from the SCF orbitals.  ``casci``/``fci`` are exact in the
    ``nelec`` sector with total spin S = (multiplicity-1)/2 (see :func:`solve_sector`).

    Args:
        atoms: Cartesian atom string, e.g. ``"Li 0 0 0; H 0 0 1.6"``.
        basis: PySCF basis name.
        charge: molecular charge.
        multiplicity: 2S+1; 1 runs RHF, anything else ROHF.
        unit: ``"angstrom"`` or ``"bohr"``.
        symmetry: use the abelian point group of the geometry (orbital irreps in ``orbsym``);
            if detection fails the calculation runs in C1 and ``reference_notes["symmetry"]``
            says why.
        frozen_core: ``"none"``, ``"auto"`` (noble-gas cores) or a number of orbitals.
        active: ``{"electrons": int, "orbitals": int}``; ``None`` = all orbitals above the core.
        fci_max_determinants: CASCI and full FCI are skipped (``nan`` plus a note) when their
            determinant count exceeds this.
        stability: run the internal stability analysis and re-optimise when unstable.
        guess: ``(mo_coeff, mo_occ)`` of a neighbouring geometry (same atoms, order and basis)
            to start the SCF from, keeping a scan on one solution.
        label: names the molecule/point in messages, e.g. ``"molecules[1] (lih) point r=1.6"``.

    Returns:
        The :class:`IntegralsResult`.
    """
    plan = _plan(
        atoms=atoms,
        basis=basis,
        charge=charge,
        multiplicity=multiplicity,
        unit=unit,
        frozen_core=frozen_core,
        active=active,
        where=label,
    )
    if not _is_int(fci_max_determinants) or fci_max_determinants < 0:
        raise ConfigError(
            _one_line(
                f"{label}: fci_max_determinants: {fci_max_determinants!r} is not a "
                "non-negative integer; fix it"
            )
        )
    notes: dict[str, str] = {}
    try:
        mol = _build_mol(plan, basis, charge, bool(symmetry), notes)
    except Exception as err:
        raise ChemistryError(
            _one_line(f"{label}: atoms/basis: PySCF cannot build the molecule ({_reason(err)})")
        ) from None
    # Small problems run faster single-threaded (OpenMP start-up and spin-waiting dominate,
    # badly so on a shared machine); larger ones keep PySCF's thread count.
    threads = lib.num_threads()
    with lib.with_omp_threads(1 if mol.nao_nr() <= SMALL_NAO else None):
        return _compute(plan, mol, notes, guess, stability, fci_max_determinants, label, threads)


def _compute(
    plan: _Plan,
    mol: gto.Mole,
    notes: dict[str, str],
    guess: Any,
    stability: bool,
    fci_max_determinants: int,
    label: str,
    threads: int,
) -> IntegralsResult:
    mf = _run_scf(mol, guess, bool(stability), label, notes)
    mol = mf.mol  # a C1 copy when the lowest solution breaks the point-group symmetry
    _aufbau_order(mf, notes)

    ncore, ncas, nelecas = plan.ncore, plan.ncas, plan.nelecas
    mo_coeff = mf.mo_coeff
    nmo = np.asarray(mo_coeff).shape[1]
    if ncore + ncas > nmo:  # only if PySCF dropped linearly dependent functions
        raise ChemistryError(
            _one_line(
                f"{label}: active: {ncore}+{ncas} orbitals requested but the SCF has {nmo}; "
                "lower active.orbitals"
            )
        )

    # CASCI effective Hamiltonian: core density folded into h1e and a constant.
    mc = mcscf.CASCI(mf, ncas, nelecas, ncore=ncore)
    mc.verbose = 0
    h1e, e_core = mc.get_h1eff(mo_coeff)
    eri = ao2mo.restore(1, mc.get_h2eff(mo_coeff), ncas)
    h1e = np.ascontiguousarray(h1e, dtype=np.float64)
    eri = np.ascontiguousarray(eri, dtype=np.float64)

    refs = {key: float("nan") for key in REFERENCE_KEYS}
    refs["hf"] = float(mf.e_tot)
    _correlated(mf, ncore, ncas, refs, notes)

    spin_square = float("nan")
    exact_vectors = np.zeros((0, 0))
    ndet = n_determinants(ncas, nelecas)
    if ndet > fci_max_determinants:
        notes["casci"] = (
            f"skipped: {ndet:.3g} determinants > fci_max_determinants={fci_max_determinants:.3g}"
        )
    else:
        try:
            with lib.with_omp_threads(threads if ndet > LARGE_CI else None):
                sol: SectorSolution = solve_sector(h1e, eri, ncas, nelecas, ecore=e_core)
            refs["casci"], spin_square = sol.energy, sol.spin_square
            if sol.vectors.size <= MAX_STORED_EXACT:
                exact_vectors = sol.vectors
            else:
                _add_note(notes, "casci", "ground-state vectors too large to store")
            if sol.degeneracy > 1:
                _add_note(notes, "casci", f"{sol.degeneracy}-fold degenerate ground state")
        except Exception as err:
            notes["casci"] = f"failed: {_reason(err)}"

    nelec_full = ((plan.nelectron + plan.spin) // 2, (plan.nelectron - plan.spin) // 2)
    if ncore == 0 and ncas == nmo:
        refs["fci"] = refs["casci"]
        if "casci" in notes:
            notes["fci"] = notes["casci"]
    else:
        _full_space_fci(mf, nelec_full, fci_max_determinants, refs, notes, threads)

    ids = _orbsym_ids(mol, mo_coeff)
    orbsym = (
        []
        if ids is None
        else [symm.irrep_id2name(mol.groupname, int(i)) for i in ids[ncore : ncore + ncas]]
    )
    return IntegralsResult(
        norb=int(ncas),
        nelec=(int(nelecas[0]), int(nelecas[1])),
        h1e=h1e,
        eri=eri,
        e_core=float(e_core),
        e_nuc=float(mol.energy_nuc()),
        mo_energy=np.array(mf.mo_energy, dtype=np.float64),
        mo_occ=np.array(mf.mo_occ, dtype=np.float64),
        mo_coeff=np.array(mo_coeff, dtype=np.float64),
        orbsym=orbsym,
        point_group=str(mol.groupname) if mol.symmetry else "C1",
        scf_method="ROHF" if mol.spin else "RHF",
        n_frozen=int(ncore),
        references=refs,
        reference_notes=notes,
        spin_square=float(spin_square),
        exact_vectors=exact_vectors,
    )
