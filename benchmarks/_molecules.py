"""Shared by the benchmark scripts: RHF active integrals straight from PySCF.

Scripts in this folder import it as ``from _molecules import rhf_integrals`` (Python puts a
script's own folder first on the path).
"""

from __future__ import annotations

from pyscf import ao2mo, gto, scf


def rhf_integrals(atoms: str, basis: str = "sto-3g", conv_tol: float | None = 1e-12):
    """RHF in symmetry-adapted orbitals; returns (integrals as ``run_optimize`` keywords, mf).

    ``h1e = C^T hcore C``, ``eri = ao2mo.restore(1, ao2mo.kernel(mol, C), norb)``,
    ``e_core = E_nuc``, all orbitals active. ``conv_tol=None`` keeps PySCF's default.
    """
    mol = gto.M(atom=atoms, basis=basis, symmetry=True, verbose=0)
    mf = scf.RHF(mol)
    if conv_tol is not None:
        mf.conv_tol = conv_tol
    mf.kernel()
    c = mf.mo_coeff
    norb = c.shape[1]
    ints = {
        "h1e": c.T @ mf.get_hcore() @ c,
        "eri": ao2mo.restore(1, ao2mo.kernel(mol, c), norb),
        "e_core": float(mol.energy_nuc()),
        "norb": int(norb),
        "nelec": (int(mol.nelec[0]), int(mol.nelec[1])),
    }
    return ints, mf
