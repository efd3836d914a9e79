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

from typing import Any

import numpy as np
from pyscf import ao2mo, gto, lib, mcscf, symm

from eigensweep.chem.exact import (
    DENSE_MAX_DETERMINANTS,
    SectorSolution,
    n_determinants,
    solve_sector,
)
from eigensweep.chem.ladder import (
    LARGE_CI,
    correlated_references,
    full_space_fci,
    label_ladder,
)
from eigensweep.chem.notes import add_note, one_line, reason
from eigensweep.chem.properties import dipole_from_rdm1, transition_dipole
from eigensweep.chem.result import REFERENCE_KEYS, IntegralsResult
from eigensweep.chem.scf import aufbau_order, build_mol, orbsym_ids, run_scf
from eigensweep.chem.space import (
    MoleculePlan,
    check_active_window,
    check_molecule,
    is_int,
    note_character_change,
    plan_molecule,
)
from eigensweep.errors import ChemistryError, ConfigError

__all__ = [
    "REFERENCE_KEYS",
    "IntegralsResult",
    "check_molecule",
    "compute_integrals",
    "n_determinants",
    "solve_sector",
]

#: Up to this many basis functions PySCF runs single-threaded inside compute_integrals ...
SMALL_NAO = 40
#: Largest number of CI coefficients (vectors x determinants) stored with the integrals.
MAX_STORED_EXACT = 4_000_000


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
    nroots: int = 1,
    stability: bool = True,
    guess: tuple[np.ndarray, np.ndarray] | None = None,
    label: str = "molecule",
    neighbour_orbsym: list[str] | None = None,
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
        nroots: exact roots stored besides the ground space: the lowest ``nroots`` states of
            the requested spin (``exact_roots``) and of the whole S_z sector
            (``exact_sz_roots``), with ``<S^2>``, dipoles and transition dipoles from the
            lowest root (PySCF ``make_rdm1`` / ``trans_rdm1``).
        stability: run the internal stability analysis and re-optimise when unstable.
        guess: ``(mo_coeff, mo_occ)`` of a neighbouring geometry (same atoms, order and basis)
            to start the SCF from, keeping a scan on one solution.
        label: names the molecule/point in messages, e.g. ``"molecules[1] (lih) point r=1.6"``.
        neighbour_orbsym: active-orbital irreps of the neighbouring scan point; when they
            differ, ``reference_notes["active"]`` says the active space changed character.

    Raises:
        ChemistryError: the active window splits a set of degenerate orbitals (the message
            names the nearest active spaces that do not).

    Returns:
        The :class:`IntegralsResult`.
    """
    plan = plan_molecule(
        atoms=atoms,
        basis=basis,
        charge=charge,
        multiplicity=multiplicity,
        unit=unit,
        frozen_core=frozen_core,
        active=active,
        where=label,
    )
    if not is_int(fci_max_determinants) or fci_max_determinants < 0:
        raise ConfigError(
            one_line(
                f"{label}: fci_max_determinants: {fci_max_determinants!r} is not a "
                "non-negative integer; fix it"
            )
        )
    notes: dict[str, str] = {}
    try:
        mol = build_mol(plan, basis, charge, bool(symmetry), notes)
    except Exception as err:
        raise ChemistryError(
            one_line(f"{label}: atoms/basis: PySCF cannot build the molecule ({reason(err)})")
        ) from None
    # Small problems run faster single-threaded (OpenMP start-up and spin-waiting dominate,
    # badly so on a shared machine); larger ones keep PySCF's thread count.
    threads = lib.num_threads()
    with lib.with_omp_threads(1 if mol.nao_nr() <= SMALL_NAO else None):
        return _compute(
            plan,
            mol,
            notes,
            guess,
            stability,
            fci_max_determinants,
            label,
            threads,
            neighbour_orbsym,
            int(nroots),
        )


def _compute(
    plan: MoleculePlan,
    mol: gto.Mole,
    notes: dict[str, str],
    guess: Any,
    stability: bool,
    fci_max_determinants: int,
    label: str,
    threads: int,
    neighbour_orbsym: list[str] | None = None,
    nroots: int = 1,
) -> IntegralsResult:
    mf = run_scf(mol, guess, bool(stability), label, notes)
    mol = mf.mol  # a C1 copy when the lowest solution breaks the point-group symmetry
    aufbau_order(mf, notes)

    ncore, ncas, nelecas = plan.ncore, plan.ncas, plan.nelecas
    mo_coeff = mf.mo_coeff
    nmo = np.asarray(mo_coeff).shape[1]
    if ncore + ncas > nmo:  # only if PySCF dropped linearly dependent functions
        raise ChemistryError(
            one_line(
                f"{label}: active: {ncore}+{ncas} orbitals requested but the SCF has {nmo}; "
                "lower active.orbitals"
            )
        )
    check_active_window(np.asarray(mf.mo_energy), ncore, ncas, nelecas, label)
    h1e, eri, e_core = _active_hamiltonian(mf, ncore, ncas, nelecas)

    refs = {key: float("nan") for key in REFERENCE_KEYS}
    refs["hf"] = float(mf.e_tot)
    correlated_references(mf, ncore, ncas, refs, notes)
    dip = _dipole_integrals(mol, mo_coeff, ncore, ncas)
    dip["dipole_hf"] = dipole_from_rdm1(
        np.diag(np.asarray(mf.mo_occ, float)[ncore : ncore + ncas]), **dip
    )
    sol = _exact_rung(
        h1e, eri, e_core, ncas, nelecas, fci_max_determinants, threads, refs, notes, nroots
    )
    spin_square, exact_vectors = _ground_space(sol, notes)
    ids = orbsym_ids(mol, mo_coeff)
    roots = _root_properties(
        sol, ncas, nelecas, dip, None if ids is None else ids[ncore : ncore + ncas]
    )
    nelec_full = ((plan.nelectron + plan.spin) // 2, (plan.nelectron - plan.spin) // 2)
    if ncore == 0 and ncas == nmo:
        refs["fci"] = refs["casci"]
        if "casci" in notes:
            notes["fci"] = notes["casci"]
    else:
        full_space_fci(mf, nelec_full, fci_max_determinants, refs, notes, threads)
    scf_method = "ROHF" if mol.spin else "RHF"
    label_ladder(refs, notes, scf_method)

    orbsym = (
        []
        if ids is None
        else [symm.irrep_id2name(mol.groupname, int(i)) for i in ids[ncore : ncore + ncas]]
    )
    note_character_change(orbsym, neighbour_orbsym, notes)
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
        scf_method=scf_method,
        n_frozen=int(ncore),
        references=refs,
        reference_notes=notes,
        spin_square=float(spin_square),
        exact_vectors=exact_vectors,
        **dip,
        **roots,
    )


def _active_hamiltonian(
    mf: Any, ncore: int, ncas: int, nelecas: tuple[int, int]
) -> tuple[np.ndarray, np.ndarray, float]:
    """CASCI effective Hamiltonian: core density folded into ``h1e`` and a constant."""
    mc = mcscf.CASCI(mf, ncas, nelecas, ncore=ncore)
    mc.verbose = 0
    h1e, e_core = mc.get_h1eff(mf.mo_coeff)
    eri = ao2mo.restore(1, mc.get_h2eff(mf.mo_coeff), ncas)
    return (
        np.ascontiguousarray(h1e, dtype=np.float64),
        np.ascontiguousarray(eri, dtype=np.float64),
        float(e_core),
    )


def _dipole_integrals(mol: gto.Mole, mo_coeff: np.ndarray, ncore: int, ncas: int) -> dict:
    """Dipole integrals about the frame's origin (see :mod:`eigensweep.chem.properties`):
    active-MO ``<p|r|q>``, frozen-core electronic and nuclear parts (bohr, e a0)."""
    with mol.with_common_orig((0.0, 0.0, 0.0)):
        ao = mol.intor_symmetric("int1e_r", comp=3)
    c = np.asarray(mo_coeff, dtype=np.float64)
    act, core = c[:, ncore : ncore + ncas], c[:, :ncore]
    nuclear = np.einsum("a,ax->x", mol.atom_charges().astype(float), mol.atom_coords())
    return {
        "dipole_active": np.ascontiguousarray(np.einsum("ui,xuv,vj->xij", act, ao, act)),
        "dipole_core": 2.0 * np.einsum("ui,xuv,vi->x", core, ao, core),
        "dipole_nuclear": np.asarray(nuclear, dtype=np.float64),
    }


def _root_properties(
    sol: SectorSolution | None,
    ncas: int,
    nelecas: tuple[int, int],
    dip: dict,
    active_irreps: np.ndarray | None = None,
) -> dict:
    """Energies, <S^2>, dipoles, transition dipoles (from the lowest root) and reference-irrep
    weights (:func:`_symmetry_weights`) of the stored spin-fixed roots and of the all-spin
    S_z-sector roots (empty when CASCI was skipped)."""
    from pyscf.fci import direct_spin1

    out: dict = {}
    sets = {"exact_roots": None, "exact_sz_roots": None}
    if sol is not None:
        sets["exact_roots"] = (sol.roots, sol.root_vectors, sol.root_spin_squares)
        sets["exact_sz_roots"] = (
            sol.sector_roots,
            sol.sector_root_vectors,
            sol.sector_root_spin_squares,
        )
    for name, found in sets.items():
        if found is None:
            out[name] = np.zeros(0)
            out[f"{name}_spin_square"] = np.zeros(0)
            out[f"{name}_dipole"] = np.zeros((0, 3))
            out[f"{name}_transition_dipole"] = np.zeros((0, 3))
            out[f"{name}_symmetry_weight"] = np.zeros(0)
            continue
        energies, vectors, s2 = found
        dipoles, tdms = [], []
        for i, v in enumerate(vectors):
            dm = direct_spin1.make_rdm1(v, ncas, nelecas)
            dipoles.append(dipole_from_rdm1(dm, *(dip[part] for part in _DIPOLE_PARTS)))
            t = direct_spin1.trans_rdm1(vectors[0], v, ncas, nelecas)
            tdms.append(transition_dipole(t, dip["dipole_active"]) if i else np.zeros(3))
        out[name] = np.asarray(energies, dtype=np.float64)
        out[f"{name}_spin_square"] = np.asarray(s2, dtype=np.float64)
        out[f"{name}_dipole"] = np.array(dipoles).reshape(-1, 3)
        out[f"{name}_transition_dipole"] = np.array(tdms).reshape(-1, 3)
        out[f"{name}_symmetry_weight"] = _symmetry_weights(vectors, ncas, nelecas, active_irreps)
    return out


def _symmetry_weights(
    vectors, norb: int, nelec: tuple[int, int], irreps: np.ndarray | None
) -> np.ndarray:
    """Weight of each CI vector on the determinants whose irrep is the reference
    determinant's (lowest orbitals occupied); a determinant's irrep is the XOR of its occupied
    orbitals' PySCF irrep ids (abelian groups, D2h and subgroups). All ones without symmetry.
    Tapering keeps exactly that sector (with the spin parities, which every root shares)."""
    from pyscf.fci import cistring

    if len(vectors) == 0 or np.size(vectors) == 0:
        return np.zeros(0)
    vectors = np.asarray(vectors, dtype=np.float64).reshape(len(vectors), -1)
    if irreps is None:
        return np.ones(len(vectors))
    irreps = np.asarray(irreps, dtype=np.int64)

    def string_irreps(n: int) -> np.ndarray:
        strings = cistring.make_strings(range(norb), n)
        out = np.zeros(len(strings), dtype=np.int64)
        for p in range(norb):
            out ^= np.where((strings >> p) & 1, irreps[p], 0)
        return out

    det = string_irreps(int(nelec[0]))[:, None] ^ string_irreps(int(nelec[1]))[None, :]
    mask = (det == det[0, 0]).reshape(-1)
    return np.array([float(v[mask] @ v[mask]) for v in vectors])


_DIPOLE_PARTS = ("dipole_active", "dipole_core", "dipole_nuclear")


def _ground_space(sol: SectorSolution | None, notes: dict) -> tuple[float, np.ndarray]:
    """``(<S^2>, ground-space vectors)`` of the CASCI solution, as stored."""
    if sol is None:
        return float("nan"), np.zeros((0, 0))
    vectors = sol.vectors
    if vectors.size > MAX_STORED_EXACT:
        add_note(notes, "casci", "ground-state vectors too large to store")
        vectors = np.zeros((0, 0))
    if sol.degeneracy > 1:
        add_note(notes, "casci", f"{sol.degeneracy}-fold degenerate ground state")
    return sol.spin_square, vectors


def _exact_rung(
    h1e: np.ndarray,
    eri: np.ndarray,
    e_core: float,
    ncas: int,
    nelecas: tuple[int, int],
    fci_max_determinants: int,
    threads: int,
    refs: dict,
    notes: dict,
    nroots: int = 1,
) -> SectorSolution | None:
    """CASCI with the one exact solver: ground space, ``nroots`` spin-fixed roots and the
    ``nroots`` lowest roots of the whole S_z sector (empty for one root above the dense
    size); None when skipped or failed."""
    ndet = n_determinants(ncas, nelecas)
    if ndet > fci_max_determinants:
        notes["casci"] = (
            f"skipped: {ndet:.3g} determinants > fci_max_determinants={fci_max_determinants:.3g}"
        )
        return None
    try:
        with lib.with_omp_threads(threads if ndet > LARGE_CI else None):
            # S_z-sector roots cost a second Davidson run: only when excited roots are asked
            # for or the sector is diagonalised densely anyway
            all_spins = nroots > 1 or ndet <= DENSE_MAX_DETERMINANTS
            sol: SectorSolution = solve_sector(
                h1e, eri, ncas, nelecas, ecore=e_core, nroots=nroots, all_spins=all_spins
            )
    except Exception as err:
        notes["casci"] = f"failed: {reason(err)}"
        return None
    refs["casci"] = sol.energy
    return sol
