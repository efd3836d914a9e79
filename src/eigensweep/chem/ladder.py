"""Correlated rungs of the reference ladder: MP2, CCSD, CCSD(T) in the active space, and FCI
in the full orbital space (with the one exact solver, :func:`eigensweep.chem.exact.solve_sector`)."""

from __future__ import annotations

import numpy as np
from pyscf import ao2mo, cc, lib, mp, scf

from eigensweep.chem.exact import n_determinants, solve_sector
from eigensweep.chem.notes import add_note, reason

__all__ = ["LARGE_CI", "correlated_references", "full_space_fci", "label_ladder"]

#: CI spaces larger than this many determinants use all threads.
LARGE_CI = 20_000
#: A rung more than this (hartree) below the exact energy gets a note.
BELOW_EXACT_TOL = 1e-6


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


def correlated_references(mf: scf.hf.SCF, ncore: int, ncas: int, refs: dict, notes: dict) -> None:
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
                notes[key] = f"failed: semicanonical ROHF orbitals ({reason(err)})"
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
        notes["mp2"] = f"failed: {reason(err)}"

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
        notes["ccsd"] = f"failed: {reason(err)}"
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
        notes["ccsd_t"] = f"failed: {reason(err)}"


def full_space_fci(
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
        notes["fci"] = f"failed: {reason(err)}"


def label_ladder(refs: dict, notes: dict, scf_method: str) -> None:
    """Say which reference each correlated rung is built on, and flag unphysical values.

    Every computed MP2/CCSD/CCSD(T) note starts with ``"RHF-based"`` or ``"ROHF-based"``. A
    rung below the exact (CASCI) energy of the same Hamiltonian by more than
    :data:`BELOW_EXACT_TOL` cannot be a good approximation (the exact energy is the lowest
    eigenvalue; perturbation theory and coupled cluster are not variational and fail this way
    near dissociation); its note says so and by how much.
    """
    exact = refs.get("casci", float("nan"))
    for key in ("mp2", "ccsd", "ccsd_t"):
        value = refs.get(key, float("nan"))
        if not np.isfinite(value):
            continue
        base = f"{scf_method}-based"
        notes[key] = f"{base}; {notes[key]}" if key in notes else base
        if np.isfinite(exact) and value < exact - BELOW_EXACT_TOL:
            add_note(
                notes,
                key,
                f"{(exact - value) * 1000:.1f} mHa below the exact (CASCI) energy: "
                "not variational, unreliable here",
            )
