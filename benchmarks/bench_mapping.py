"""Benchmark of the qubit-Hamiltonian library: mapping, tapering, grouping and H|psi>.

Run from the repository root::

    .venv/bin/python benchmarks/bench_mapping.py            # LiH and N2 (20 qubits)
    .venv/bin/python benchmarks/bench_mapping.py --no-csr   # skip the ~3 GB CSR baseline

Targets: LiH mapping + tapering well under 2 s; N2/STO-3G (20 qubits) mapping, symmetries,
tapering and grouping under a minute. ``apply_pauli_expansion`` on the 20-qubit N2 Hamiltonian is
compared with a SciPy CSR matrix-vector product measured in the same run (the CSR matrix is
built by eigensweep's own row-major builder; OpenFermion's ``get_sparse_operator`` would take far
longer at 20 qubits) and with the naive one-term-at-a-time loop (extrapolated from a sample).
Integrals come from PySCF (RHF/STO-3G, symmetry-adapted orbitals, no frozen core).
"""

from __future__ import annotations

import argparse
import time

import numpy as np
from pyscf import ao2mo, gto, scf

from eigensweep.qubit import (
    apply_pauli,
    apply_pauli_expansion,
    map_hamiltonian,
    qwc_groups,
    reduce_to_sector,
    reference_bits,
    sector_ground_energy,
    symmetry_null_space,
)

GEOMETRIES = {"lih": "Li 0 0 0; H 0 0 1.595", "n2": "N 0 0 0; N 0 0 1.098"}


def integrals(name: str):
    mol = gto.M(atom=GEOMETRIES[name], basis="sto-3g", symmetry=True, verbose=0)
    mf = scf.RHF(mol).run()
    c = mf.mo_coeff
    norb = c.shape[1]
    h1e = c.T @ mf.get_hcore() @ c
    eri = ao2mo.restore(1, ao2mo.kernel(mol, c), norb)
    return h1e, eri, mol.energy_nuc(), mol.nelec, norb


def timed(rows: list, label: str, func, *args, **kwargs):
    t0 = time.perf_counter()
    out = func(*args, **kwargs)
    dt = time.perf_counter() - t0
    rows.append((label, dt))
    return out


def best_of(rows: list, label: str, func, *args, repeats: int = 2) -> float:
    """Time ``repeats`` further calls (after a first, warm-up call) and return the best."""
    times = []
    for k in range(repeats):
        t0 = time.perf_counter()
        func(*args)
        times.append(time.perf_counter() - t0)
        rows.append((f"{label}, call {k + 2}", times[-1]))
    return min(times)


def pipeline(name: str, mapping: str, rows: list, extra: list) -> tuple:
    h1e, eri, e_core, nelec, norb = integrals(name)
    tag = f"{name} {mapping}"
    t_start = time.perf_counter()
    ham = timed(rows, f"{tag}: map_hamiltonian", map_hamiltonian, h1e, eri, e_core, mapping)
    gens = timed(rows, f"{tag}: symmetry_null_space", symmetry_null_space, ham)
    bits = reference_bits(nelec, norb, mapping)
    result = timed(rows, f"{tag}: taper", reduce_to_sector, ham, bits)
    groups = timed(rows, f"{tag}: qwc_groups (untapered)", qwc_groups, ham)
    rows.append((f"{tag}: total (map+symmetries+taper+groups)", time.perf_counter() - t_start))
    extra.append(
        f"{tag}: {ham.n_terms} terms on {ham.n_qubits} qubits, {gens.n_terms} Z2 generators, "
        f"{result.n_qubits} qubits after tapering ({result.hamiltonian.n_terms} terms), "
        f"{len(groups)} QWC groups, 1-norm {ham.one_norm_nonidentity:.3f} Eh"
    )
    return ham, result, nelec


def main() -> None:
    parser = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    parser.add_argument("--no-csr", action="store_true", help="skip the CSR baseline (~3 GB)")
    args = parser.parse_args()
    rows: list[tuple[str, float]] = []
    extra: list[str] = []

    pipeline("lih", "jordan_wigner", rows, extra)
    pipeline("lih", "bravyi_kitaev", rows, extra)
    ham, result, nelec = pipeline("n2", "jordan_wigner", rows, extra)
    energy = timed(
        rows,
        "n2 jordan_wigner: sector_ground_energy (tapered, N=14, Sz=0)",
        sector_ground_energy,
        result.hamiltonian,
        n_electrons=sum(nelec),
        sz=0.0,
        mapping="jordan_wigner",
        taper=result,
    )
    extra.append(f"n2 tapered sector ground energy {energy:.8f} Eh")

    rng = np.random.default_rng(0)
    tap = result.hamiltonian
    phi = rng.standard_normal(1 << tap.n_qubits) + 1j * rng.standard_normal(1 << tap.n_qubits)
    timed(
        rows,
        f"n2 tapered ({tap.n_qubits} q) apply_pauli_expansion, 1st (builds CSR)",
        apply_pauli_expansion,
        phi,
        tap,
    )
    best_of(
        rows,
        f"n2 tapered ({tap.n_qubits} q) apply_pauli_expansion",
        apply_pauli_expansion,
        phi,
        tap,
    )
    psi = rng.standard_normal(1 << ham.n_qubits) + 1j * rng.standard_normal(1 << ham.n_qubits)
    psi /= np.linalg.norm(psi)
    timed(
        rows, "n2 H|psi>: compile (x-mask groups, sign tables)", lambda: ham.compile().sign_tables()
    )
    out = timed(rows, "n2 H|psi>: apply_pauli_expansion, 1st call", apply_pauli_expansion, psi, ham)
    best = best_of(rows, "n2 H|psi>: apply_pauli_expansion", apply_pauli_expansion, psi, ham)
    sample = np.arange(0, ham.n_terms, max(1, ham.n_terms // 40))
    t0 = time.perf_counter()
    for t in sample:
        apply_pauli(psi, ham.x[t], ham.z[t])
    naive = (time.perf_counter() - t0) * ham.n_terms / sample.size
    rows.append((f"n2 H|psi>: naive term-by-term loop (extrapolated, {ham.n_terms} terms)", naive))
    extra.append(
        f"apply_pauli_expansion uses {ham.compile().n_groups} x-mask groups for {ham.n_terms} terms; "
        f"speed-up over the naive loop {naive / best:.1f}x"
    )
    if not args.no_csr:
        mat = timed(rows, "n2 H|psi>: build CSR baseline (sparse_matrix)", ham.sparse_matrix)
        ref = timed(rows, "n2 H|psi>: scipy CSR matvec, 1st", mat.__matmul__, psi)
        csr = best_of(rows, "n2 H|psi>: scipy CSR matvec", mat.__matmul__, psi)
        err = float(np.abs(ref - out).max())
        gib = (mat.data.nbytes + mat.indices.nbytes + mat.indptr.nbytes) / 2**30
        extra.append(
            f"CSR baseline: nnz {mat.nnz:,} ({gib:.2f} GiB); max |difference| {err:.1e}; "
            f"apply_pauli_expansion / CSR matvec time ratio {best / csr:.2f} (best of calls 2-3)"
        )

    width = max(len(label) for label, _ in rows)
    print(f"{'step':<{width}}  {'seconds':>9}")
    print("-" * (width + 11))
    for label, dt in rows:
        print(f"{label:<{width}}  {dt:9.3f}")
    print()
    for line in extra:
        print(line)


if __name__ == "__main__":
    main()
