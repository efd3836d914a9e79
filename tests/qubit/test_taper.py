"""Z2 tapering (Bravyi, Gambetta, Mezzacapo, Temme, arXiv:1701.08213): bad input, round trips,
qubit counts, sector energies (PySCF FCI) and OpenFermion's taper_off_qubits cross-check."""

from __future__ import annotations

import functools

import numpy as np
import openfermion as of
import pytest
from fixtures import pyscf_molecule

from eigensweep.errors import ConfigError, StageFileError
from eigensweep.qubit import (
    MAPPINGS,
    PauliExpansion,
    SectorReduction,
    basis_state,
    expectation,
    identity_reduction,
    map_fermion_operator,
    map_hamiltonian,
    number_operator,
    reduce_to_sector,
    reference_bits,
    sector_ground_energy,
    symmetry_null_space,
)
from eigensweep.qubit.pauli import symplectic_inner


@functools.cache
def tapered(name: str, mapping: str) -> tuple[PauliExpansion, SectorReduction]:
    m = pyscf_molecule(name)
    ham = map_hamiltonian(m.h1e, m.eri, m.e_core, mapping)
    return ham, reduce_to_sector(ham, reference_bits(m.nelec, m.norb, mapping))


# ---------------------------------------------------------------- bad input
def test_bad_input():
    ham = PauliExpansion.from_strings(["ZZ", "XX"], [1.0, 0.5])
    with pytest.raises(TypeError, match="PauliExpansion"):
        reduce_to_sector(of.QubitOperator("Z0"), np.array([0, 0]))
    with pytest.raises(TypeError, match="PauliExpansion"):
        symmetry_null_space(ham.to_openfermion())
    with pytest.raises(ConfigError, match="2 values of 0/1"):
        reduce_to_sector(ham, np.array([0, 1, 1]))
    with pytest.raises(TypeError, match="PauliExpansion"):
        identity_reduction(None, np.array([0, 0]))


def test_taper_operator_refuses_non_commuting_operator():
    _, result = tapered("h2", "jordan_wigner")
    x_on_0 = PauliExpansion.from_strings(["XIII"], [1.0])  # flips the alpha-electron parity
    with pytest.raises(ValueError, match="anticommute"):
        result.taper_operator(x_on_0)
    with pytest.raises(ConfigError, match="5 qubits"):
        result.taper_operator(PauliExpansion.from_strings(["IIIII"], [1.0]))


# ---------------------------------------------------------------- round trips
def test_store_round_trip():
    _, result = tapered("lih", "parity")
    arrays = result.to_store("taper_")
    back = SectorReduction.from_store(arrays, "taper_")
    assert back.hamiltonian.allclose(result.hamiltonian, atol=0)
    assert back.generators.allclose(result.generators, atol=0)
    assert np.array_equal(back.sector, result.sector)
    assert np.array_equal(back.qubits_removed, result.qubits_removed)
    assert np.array_equal(back.reference_bits, result.reference_bits)
    assert back.n_qubits_before == 12 and back.n_qubits == 8
    broken = dict(arrays)
    broken["taper_sector"] = broken["taper_sector"][:-1]
    with pytest.raises(StageFileError, match="inconsistent"):
        SectorReduction.from_store(broken, "taper_")


def test_identity_reduction_passes_the_problem_through():
    ham, _ = tapered("h2", "jordan_wigner")
    bits = reference_bits((1, 1), 2, "jordan_wigner")
    result = identity_reduction(ham, bits)
    assert result.generators.n_terms == 0 and result.n_qubits == 4
    assert result.hamiltonian.allclose(ham, atol=0)
    assert np.array_equal(result.reference_bits, bits)
    assert result.taper_operator(ham).allclose(ham, atol=0)
    back = SectorReduction.from_store(result.to_store("t_"), "t_")
    assert back.generators.n_terms == 0 and back.hamiltonian.allclose(ham, atol=0)


# ---------------------------------------------------------------- reference values
def test_h2_four_qubits_to_one():
    # Bravyi et al. 2017 (arXiv:1701.08213) H2 example: STO-3G H2 needs a single qubit
    for mapping in MAPPINGS:
        ham, result = tapered("h2", mapping)
        assert result.generators.n_terms == 3
        assert result.n_qubits == 1
        # reference: PySCF FCI computed at test time (2x2 problem: lowest eigenvalue)
        lowest = np.linalg.eigvalsh(result.hamiltonian.sparse_matrix().toarray())[0]
        assert lowest == pytest.approx(pyscf_molecule("h2").e_fci, abs=1e-8)


@pytest.mark.parametrize(
    ("name", "before", "after"), [("lih", 12, 8), ("beh2", 14, 9), ("h2o", 14, 10)]
)
@pytest.mark.parametrize("mapping", MAPPINGS)
def test_tapered_qubit_counts_and_sector_energy(name, before, after, mapping):
    # computed with PySCF + GF(2) null space, ../shared/notes (project check values)
    ham, result = tapered(name, mapping)
    assert (result.n_qubits_before, result.n_qubits) == (before, after)
    gens = result.generators
    # every generator is a Z string that commutes with every term and with the others
    assert not gens.x.any() and np.all(gens.coeffs == 1.0)
    anti = symplectic_inner(ham.x[:, None, :], ham.z[:, None, :], gens.x[None], gens.z[None])
    assert not anti.any()
    assert np.array_equal(np.sort(result.qubits_removed), np.unique(result.qubits_removed))
    # reference: PySCF FCI computed at test time, in the tapered N / S_z sector
    m = pyscf_molecule(name)
    energy = sector_ground_energy(
        result.hamiltonian, n_electrons=sum(m.nelec), sz=0.0, mapping=mapping, taper=result
    )
    assert energy == pytest.approx(m.e_fci, abs=1e-8)
    # reference: PySCF RHF computed at test time (tapered reference is still the HF state)
    assert expectation(basis_state(result.reference_bits), result.hamiltonian) == pytest.approx(
        m.e_hf, abs=1e-8
    )


def test_sector_is_eigenvalue_on_reference():
    # Bravyi et al. 2017 (arXiv:1701.08213): the sector is fixed by the reference determinant
    ham, result = tapered("h2o", "bravyi_kitaev")
    m = pyscf_molecule("h2o")
    psi = basis_state(reference_bits(m.nelec, m.norb, "bravyi_kitaev"))
    for i in range(result.generators.n_terms):
        gen = result.generators.subset([i])
        assert expectation(psi, gen) == pytest.approx(float(result.sector[i]))


@pytest.mark.parametrize("name", ["h2", "lih"])
@pytest.mark.parametrize("mapping", ["jordan_wigner", "parity"])
def test_spectrum_matches_openfermion_taper_off_qubits(name, mapping):
    # reference: OpenFermion taper_off_qubits computed at test time with our generators and the
    # sector applied as the stabilizer sign
    ham, result = tapered(name, mapping)
    stabilizers = [
        float(s) * result.generators.subset([i]).to_openfermion()
        for i, s in enumerate(result.sector)
    ]
    ref_op = of.taper_off_qubits(ham.to_openfermion(), stabilizers)
    n = result.n_qubits
    ref = np.linalg.eigvalsh(of.get_sparse_operator(ref_op, n).toarray())
    ours = np.linalg.eigvalsh(result.hamiltonian.sparse_matrix().toarray())
    assert np.abs(ours - ref).max() < 1e-10


def test_taper_operator_keeps_number_and_excitation_algebra():
    # reference: OpenFermion jordan_wigner of a double excitation computed at test time; the
    # tapered operators must act on the tapered reference as the originals act on the full one
    ham, result = tapered("lih", "jordan_wigner")
    m = pyscf_molecule("lih")
    n = 2 * m.norb
    full_ref = basis_state(reference_bits(m.nelec, m.norb, "jordan_wigner"))
    tap_ref = basis_state(result.reference_bits)
    n_tap = result.taper_operator(number_operator(n, "jordan_wigner"))
    assert n_tap.is_diagonal()
    assert expectation(tap_ref, n_tap) == pytest.approx(4.0)
    # Hermitian generator i(T - T^dag) of the symmetric double excitation 0,1 -> 4,5
    t = of.FermionOperator("4^ 5^ 1 0")
    gen = map_fermion_operator(1j * (t - of.hermitian_conjugated(t)), n, "jordan_wigner")
    gen_tap = result.taper_operator(gen)
    full_val = np.vdot(full_ref, of.get_sparse_operator(gen.to_openfermion(), n) @ full_ref)
    tap_val = expectation(tap_ref, gen_tap)
    assert tap_val == pytest.approx(full_val.real, abs=1e-12)
    # <HF|G^2|HF> is the weight of the excited determinant: same before and after tapering
    g2_full = of.get_sparse_operator(gen.to_openfermion(), n) @ full_ref
    g2_tap = result.taper_operator(gen).sparse_matrix() @ tap_ref
    assert np.vdot(g2_tap, g2_tap).real == pytest.approx(np.vdot(g2_full, g2_full).real)


def test_symmetry_with_x_letters_is_reported_not_tapered():
    # common practice, by hand: X0 X1 + Z0 Z1 commutes with both X0 X1 and Z0 Z1; only the
    # Z string has a sector fixed by a basis-state reference
    ham = PauliExpansion.from_strings(["XX", "ZZ"], [0.5, 1.0])
    gens = symmetry_null_space(ham)
    assert gens.labels() == ["ZZ", "XX"]
    with pytest.warns(UserWarning, match="not tapered"):
        result = reduce_to_sector(ham, np.array([1, 0]))
    assert result.generators.labels() == ["ZZ"] and result.n_qubits == 1
    assert result.sector.tolist() == [-1]
    assert result.qubits_kept.tolist() == [0]
    # by hand: on the ZZ = -1 states {01, 10}, H = -1 + 0.5 (swap), eigenvalues -1.5 and -0.5
    assert np.allclose(
        np.linalg.eigvalsh(result.hamiltonian.sparse_matrix().toarray()), [-1.5, -0.5]
    )
