"""Sector-restricted exact energies against PySCF FCI and OpenFermion (computed at test time)."""

from __future__ import annotations

import functools

import numpy as np
import openfermion as of
import pytest
from fixtures import pyscf_molecule
from pyscf import fci

from eigensweep.errors import ConfigError
from eigensweep.qubit import (
    MAPPINGS,
    PauliExpansion,
    identity_reduction,
    map_hamiltonian,
    reduce_to_sector,
    reference_bits,
    sector_basis_states,
    sector_ground_energy,
)


@functools.cache
def mapped(name: str, mapping: str) -> PauliExpansion:
    m = pyscf_molecule(name)
    return map_hamiltonian(m.h1e, m.eri, m.e_core, mapping)


# ---------------------------------------------------------------- bad input
def test_bad_input():
    ham = mapped("h2", "jordan_wigner")
    with pytest.raises(TypeError, match="PauliExpansion"):
        sector_ground_energy(ham.to_openfermion(), n_electrons=2, mapping="jordan_wigner")
    with pytest.raises(ConfigError, match="needs the mapping"):
        sector_ground_energy(ham, n_electrons=2)
    with pytest.raises(ConfigError, match="choose one of jordan_wigner, bravyi_kitaev, parity"):
        sector_ground_energy(ham, n_electrons=2, mapping="jw")
    with pytest.raises(ConfigError, match="no basis state"):
        sector_ground_energy(ham, n_electrons=5, mapping="jordan_wigner")
    with pytest.raises(ConfigError, match="exceeds the sector dimension"):
        sector_ground_energy(ham, n_electrons=2, sz=0.0, mapping="jordan_wigner", k=5)
    with pytest.raises(TypeError, match="SectorReduction"):
        sector_ground_energy(ham, taper="yes")
    tr = reduce_to_sector(ham, reference_bits((1, 1), 2, "jordan_wigner"))
    with pytest.raises(ConfigError, match="leaves 1 qubits"):
        sector_ground_energy(ham, n_electrons=2, mapping="jordan_wigner", taper=tr)


# ---------------------------------------------------------------- reference values
@pytest.mark.parametrize("mapping", MAPPINGS)
@pytest.mark.parametrize("name", ["h2", "lih", "beh2", "h2o"])
def test_untapered_sector_energy_equals_fci(name, mapping):
    # reference: PySCF FCI computed at test time
    m = pyscf_molecule(name)
    energy = sector_ground_energy(
        mapped(name, mapping), n_electrons=sum(m.nelec), sz=0.0, mapping=mapping
    )
    assert energy == pytest.approx(m.e_fci, abs=1e-8)


@pytest.mark.parametrize("mapping", MAPPINGS)
def test_anion_sector_equals_fci(mapping):
    # reference: PySCF FCI of LiH- (N_alpha, N_beta) = (3, 2) computed at test time
    m = pyscf_molecule("lih")
    solver = fci.direct_spin1.FCI()
    solver.conv_tol = 1e-12
    ref, _ = solver.kernel(m.h1e, m.eri, m.norb, (3, 2), ecore=m.e_core)
    ours = sector_ground_energy(mapped("lih", mapping), n_electrons=5, sz=0.5, mapping=mapping)
    assert ours == pytest.approx(ref, abs=1e-8)


def test_several_roots_match_pyscf_fci():
    # reference: PySCF FCI (direct_spin1, nroots=4) computed at test time; S_z = 0 sector
    m = pyscf_molecule("lih")
    solver = fci.direct_spin1.FCI()
    solver.conv_tol = 1e-12
    solver.nroots = 4
    ref, _ = solver.kernel(m.h1e, m.eri, m.norb, m.nelec, ecore=m.e_core)
    ours = sector_ground_energy(
        mapped("lih", "bravyi_kitaev"), n_electrons=4, sz=0.0, mapping="bravyi_kitaev", k=4
    )
    assert np.allclose(ours, np.sort(ref), atol=1e-8)


def test_sector_states_match_openfermion_number_restriction():
    # reference: OpenFermion jw_number_indices computed at test time
    ours = sector_basis_states(8, n_electrons=3, mapping="jordan_wigner")
    assert np.array_equal(ours, np.sort(of.jw_number_indices(3, 8)))


def test_h2_triplet_sector():
    # reference: OpenFermion eigenspectrum restricted by jw_sz_restrict_operator at test time:
    # the S_z = 1 sector of H2 (both electrons alpha) holds the lowest triplet
    m = pyscf_molecule("h2")
    ham = mapped("h2", "jordan_wigner")
    ours = sector_ground_energy(ham, n_electrons=2, sz=1.0, mapping="jordan_wigner")
    sparse = of.get_sparse_operator(ham.to_openfermion(), 4)
    restricted = of.jw_sz_restrict_operator(sparse, 1.0, n_electrons=2, n_qubits=4)
    assert ours == pytest.approx(np.linalg.eigvalsh(restricted.toarray())[0], abs=1e-10)
    assert ours > m.e_fci


@pytest.mark.parametrize("mapping", MAPPINGS)
def test_no_taper_passes_sector_through(mapping):
    # reference: PySCF FCI computed at test time
    m = pyscf_molecule("h2o")
    ham = mapped("h2o", mapping)
    result = identity_reduction(ham, reference_bits(m.nelec, m.norb, mapping))
    energy = sector_ground_energy(
        result.hamiltonian, n_electrons=10, sz=0.0, mapping=mapping, taper=result
    )
    assert energy == pytest.approx(m.e_fci, abs=1e-8)
