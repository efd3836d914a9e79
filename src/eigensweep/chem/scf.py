"""SCF of the integrals stage: RHF/ROHF with symmetry, neighbour guesses, stability analysis.

RHF for multiplicity 1 and ROHF otherwise (Roothaan 1951/1960), converged to
:data:`SCF_CONV_TOL` and a :data:`SCF_CONV_TOL_GRAD` orbital gradient with DIIS (Pulay 1980)
and a second-order fallback; internal stability (Seeger & Pople 1977) with re-optimisation.
"""

from __future__ import annotations

from typing import Any

import numpy as np
from pyscf import gto, lib, scf
from pyscf.scf import hf_symm
from pyscf.scf import stability as scf_stability

from eigensweep.chem.notes import add_note, one_line, reason
from eigensweep.chem.space import MoleculePlan
from eigensweep.errors import ChemistryError, ConfigError

__all__ = ["aufbau_order", "build_mol", "orbsym_ids", "run_scf"]

#: SCF thresholds: energy change (hartree) and orbital gradient norm.
SCF_CONV_TOL = 1e-10
SCF_CONV_TOL_GRAD = 1e-7
#: Internal-stability re-optimisation cycles.
STABILITY_CYCLES = 3


def build_mol(plan: MoleculePlan, basis: str, charge: int, symmetry: bool, notes: dict) -> gto.Mole:
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
            notes["symmetry"] = f"point-group detection failed ({reason(err)}); ran in C1"
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
            one_line(f"{label}: guess: expected a (mo_coeff, mo_occ) pair of arrays")
        ) from None
    nao = mol.nao_nr()
    if mo_coeff.ndim != 2 or mo_coeff.shape[0] != nao or mo_occ.shape != (mo_coeff.shape[1],):
        raise ConfigError(
            one_line(
                f"{label}: guess: mo_coeff {mo_coeff.shape} / mo_occ {mo_occ.shape} do not fit "
                f"{nao} atomic orbitals; pass the guess of a point with the same atoms and basis"
            )
        )
    if abs(mo_occ.sum() - mol.nelectron) > 1e-6:
        raise ConfigError(
            one_line(
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
            one_line(
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
        add_note(notes, "hf", "moved to a lower symmetric solution (other irrep occupation)")
        mf = sym
    if c1.e_tot < mf.e_tot - 1e-6:
        add_note(
            notes,
            "hf",
            f"a {mf.mol.groupname}-symmetry-broken solution lies {mf.e_tot - c1.e_tot:.2e} Eh "
            "lower (symmetry=False follows it)",
        )
    return mf


def run_scf(mol: gto.Mole, guess: Any, stability: bool, label: str, notes: dict) -> scf.hf.SCF:
    mf = _new_scf(mol)
    method = "ROHF" if mol.spin else "RHF"
    dm0 = None if guess is None else _guess_dm(mol, guess, bool(mol.spin), label)
    _kernel(mf, dm0)
    if not mf.converged:
        raise ChemistryError(
            one_line(
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
            add_note(notes, "hf", "SCF internally unstable after re-optimisation attempts")
        if mol.symmetry:
            mf = _symmetry_breaking_step(mf, notes)
    except Exception as err:  # the analysis must not lose a converged SCF
        for key, val in saved.items():
            setattr(mf, key, val)
        mf.converged = True
        add_note(notes, "hf", f"stability analysis failed ({reason(err)}); SCF kept")
    return mf


def orbsym_ids(mol: gto.Mole, mo_coeff: np.ndarray) -> np.ndarray | None:
    if not mol.symmetry:
        return None
    ids = getattr(mo_coeff, "orbsym", None)
    if ids is None:
        ids = hf_symm.get_orbsym(mol, mo_coeff)
    return np.asarray(ids)


def aufbau_order(mf: scf.hf.SCF, notes: dict) -> None:
    """Ensure the orbital order is (doubly, singly, un-)occupied so index windows make sense."""
    mo_occ = np.asarray(mf.mo_occ)
    if np.all(np.diff(mo_occ) <= 0):
        return
    order = np.argsort(-mo_occ, kind="stable")  # keeps the energy order within each occupation
    ids = orbsym_ids(mf.mol, mf.mo_coeff)
    mo_coeff = np.asarray(mf.mo_coeff)[:, order]
    if ids is not None:
        mo_coeff = lib.tag_array(mo_coeff, orbsym=ids[order])
    mf.mo_coeff = mo_coeff
    mf.mo_energy = np.asarray(mf.mo_energy)[order]
    mf.mo_occ = np.asarray(mf.mo_occ)[order]
    add_note(notes, "hf", "non-aufbau SCF occupation; orbitals re-ordered by occupation")
