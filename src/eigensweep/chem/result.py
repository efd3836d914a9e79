"""The integrals stage's result: active-space Hamiltonian, reference ladder, exact ground space,
and its (arrays, metadata) form for a stage file."""

from __future__ import annotations

import math
from dataclasses import dataclass, field
from typing import Any

import numpy as np

from eigensweep.errors import StageFileError

__all__ = ["ARRAY_UNITS", "REFERENCE_KEYS", "ROOT_SETS", "IntegralsResult"]

#: Keys of ``IntegralsResult.references``, cheapest to exact.
REFERENCE_KEYS: tuple[str, ...] = ("hf", "mp2", "ccsd", "ccsd_t", "casci", "fci")

_STORE_FORMAT = "eigensweep.integrals"
_STORE_VERSION = 4
#: Exact-root arrays: spin-fixed roots and the roots of the whole S_z sector (any spin).
ROOT_SETS = ("exact_roots", "exact_sz_roots")
_ROOT_SUFFIXES = ("", "_spin_square", "_dipole", "_transition_dipole", "_symmetry_weight")
_ARRAY_KEYS = (
    "h1e",
    "eri",
    "mo_energy",
    "mo_occ",
    "mo_coeff",
    "exact_vectors",
    "dipole_active",
    "dipole_core",
    "dipole_nuclear",
    "dipole_hf",
) + tuple(f"{r}{x}" for r in ROOT_SETS for x in _ROOT_SUFFIXES)
#: Units of the stored arrays (stage-file ``units`` attributes).
ARRAY_UNITS = {
    "h1e": "hartree",
    "eri": "hartree",
    "mo_energy": "hartree",
    "exact_vectors": "1",
    "dipole_active": "bohr",
    "dipole_core": "e*bohr",
    "dipole_nuclear": "e*bohr",
    "dipole_hf": "e*bohr",
    **{r: "hartree" for r in ROOT_SETS},
    **{f"{r}_dipole": "e*bohr" for r in ROOT_SETS},
    **{f"{r}_transition_dipole": "e*bohr" for r in ROOT_SETS},
}
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
        dipole_active: (3, norb, norb) dipole integrals ``<p|r|q>`` of the active MOs (bohr),
            about the origin of the molecule's frame (see :mod:`eigensweep.chem.properties`).
        dipole_core: (3,) electronic dipole sum ``2 sum_i <i|r|i>`` of the inactive orbitals.
        dipole_nuclear: (3,) nuclear dipole ``sum_A Z_A R_A``.
        dipole_hf: (3,) total dipole of the SCF determinant (e a0).
        exact_roots: lowest ``nroots`` CASCI energies of the requested spin (hartree), with
            ``exact_roots_spin_square``, ``exact_roots_dipole`` (nroots, 3) and
            ``exact_roots_transition_dipole`` (nroots, 3) ``<root 0|mu|root k>`` (sign
            arbitrary; row 0 is zero: no transition); empty when CASCI was skipped.
            ``exact_roots_symmetry_weight``: each root's weight on the determinants of the
            reference determinant's irrep (1 without point-group symmetry), the roots a
            Z2-tapered problem (which keeps that sector) can reach.
        exact_sz_roots: the same five for the lowest roots of the whole S_z sector (any spin).
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
    dipole_active: np.ndarray = field(default_factory=lambda: np.zeros((3, 0, 0)))
    dipole_core: np.ndarray = field(default_factory=lambda: np.zeros(3))
    dipole_nuclear: np.ndarray = field(default_factory=lambda: np.zeros(3))
    dipole_hf: np.ndarray = field(default_factory=lambda: np.full(3, np.nan))
    exact_roots: np.ndarray = field(default_factory=lambda: np.zeros(0))
    exact_roots_spin_square: np.ndarray = field(default_factory=lambda: np.zeros(0))
    exact_roots_dipole: np.ndarray = field(default_factory=lambda: np.zeros((0, 3)))
    exact_roots_transition_dipole: np.ndarray = field(default_factory=lambda: np.zeros((0, 3)))
    exact_roots_symmetry_weight: np.ndarray = field(default_factory=lambda: np.zeros(0))
    exact_sz_roots: np.ndarray = field(default_factory=lambda: np.zeros(0))
    exact_sz_roots_spin_square: np.ndarray = field(default_factory=lambda: np.zeros(0))
    exact_sz_roots_dipole: np.ndarray = field(default_factory=lambda: np.zeros((0, 3)))
    exact_sz_roots_transition_dipole: np.ndarray = field(default_factory=lambda: np.zeros((0, 3)))
    exact_sz_roots_symmetry_weight: np.ndarray = field(default_factory=lambda: np.zeros(0))

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
            **{
                k: np.asarray(arrays[k], dtype=np.float64)
                for k in _ARRAY_KEYS
                if k.startswith(("dipole_", "exact_roots", "exact_sz_roots"))
            },
        )
