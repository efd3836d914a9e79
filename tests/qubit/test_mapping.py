"""Mappings: bad input, then OpenFermion / PySCF references computed at test time."""

from __future__ import annotations

import numpy as np
import openfermion as of
import pytest
from fixtures import pyscf_molecule
from openfermion.chem.molecular_data import spinorb_from_spatial

from eigensweep.errors import ConfigError
from eigensweep.qubit import (
    MAPPINGS,
    PauliExpansion,
    basis_state,
    encode_linear,
    encoding_matrix,
    expectation,
    interaction_operator,
    map_fermion_operator,
    map_hamiltonian,
    number_operator,
    reference_bits,
    sz_operator,
)


def openfermion_interaction_operator(m) -> of.InteractionOperator:
    """OpenFermion's own spin-orbital construction (its PySCF-interface convention)."""
    one, two = spinorb_from_spatial(m.h1e, m.eri.transpose(0, 2, 3, 1))
    return of.InteractionOperator(m.e_core, one, 0.5 * two)


# ---------------------------------------------------------------- bad input
def test_unknown_mapping_lists_allowed_names():
    m = pyscf_molecule("h2", with_fci=False)
    with pytest.raises(ConfigError, match="jordan_wigner, bravyi_kitaev, parity"):
        map_hamiltonian(m.h1e, m.eri, m.e_core, "jw")
    with pytest.raises(ConfigError, match="unknown mapping 'bk'"):
        reference_bits((1, 1), 2, "bk")


def test_wrong_types():
    m = pyscf_molecule("h2", with_fci=False)
    with pytest.raises(TypeError, match="numpy.ndarray"):
        map_hamiltonian(m.h1e.tolist(), m.eri, m.e_core, "parity")
    with pytest.raises(TypeError, match="mapping must be a str"):
        map_hamiltonian(m.h1e, m.eri, m.e_core, 0)
    with pytest.raises(TypeError, match="FermionOperator or InteractionOperator"):
        map_fermion_operator(of.QubitOperator("Z0"), 2, "parity")
    with pytest.raises(TypeError, match="nelec must be a tuple"):
        reference_bits(2, 2, "parity")
    with pytest.raises(TypeError, match="e_core must be a real number"):
        interaction_operator(m.h1e, m.eri, "0.7")


def test_bad_shapes_and_sizes():
    m = pyscf_molecule("h2", with_fci=False)
    with pytest.raises(ConfigError, match="do not match"):
        map_hamiltonian(m.h1e, m.eri[:1], m.e_core, "jordan_wigner")
    with pytest.raises(ConfigError, match="does not fit"):
        reference_bits((3, 1), 2, "jordan_wigner")
    with pytest.raises(ConfigError, match="n_qubits is 2"):
        map_fermion_operator(of.FermionOperator("3^ 3"), 2, "jordan_wigner")
    with pytest.raises(ValueError, match="not Hermitian"):
        map_fermion_operator(of.FermionOperator("2^ 0") - of.FermionOperator("0^ 2"), 4, "parity")


# ---------------------------------------------------------------- reference values
def test_interaction_operator_matches_openfermion_construction():
    # reference: OpenFermion spinorb_from_spatial computed at test time
    m = pyscf_molecule("lih", with_fci=False)
    ours = interaction_operator(m.h1e, m.eri, m.e_core)
    ref = openfermion_interaction_operator(m)
    assert np.allclose(ours.one_body_tensor, ref.one_body_tensor, atol=1e-14)
    assert np.allclose(ours.two_body_tensor, ref.two_body_tensor, atol=1e-14)
    assert ours.constant == ref.constant


@pytest.mark.parametrize("mapping", MAPPINGS)
def test_h2_spectrum_matches_openfermion(mapping):
    # reference: OpenFermion get_sparse_operator(jordan_wigner(...)) computed at test time
    m = pyscf_molecule("h2", with_fci=False)
    ref_op = of.get_sparse_operator(of.jordan_wigner(openfermion_interaction_operator(m)))
    ref = np.linalg.eigvalsh(ref_op.toarray())
    ham = map_hamiltonian(m.h1e, m.eri, m.e_core, mapping)
    assert ham.n_qubits == 4
    ours = np.linalg.eigvalsh(ham.sparse_matrix().toarray())
    assert np.abs(ours - ref).max() < 1e-10


@pytest.mark.parametrize(("name", "count"), [("h2", 15), ("lih", 631), ("h2o", 1086)])
def test_jordan_wigner_term_counts(name, count):
    # computed with PySCF + OpenFermion, ../shared/notes (project check values); tolerance 1e-12
    m = pyscf_molecule(name, with_fci=False)
    ham = map_hamiltonian(m.h1e, m.eri, m.e_core, "jordan_wigner")
    assert ham.n_terms == count
    # reference: OpenFermion computed at test time, same drop tolerance
    ref = of.jordan_wigner(openfermion_interaction_operator(m))
    ref.compress(1e-12)
    assert len(ref.terms) == count
    assert ham.allclose(PauliExpansion.from_openfermion(ref, ham.n_qubits), atol=1e-12)


@pytest.mark.parametrize("name", ["h2", "lih"])
def test_parity_matches_openfermion_binary_code(name):
    # reference: OpenFermion binary_code_transform with parity_code computed at test time
    m = pyscf_molecule(name, with_fci=False)
    n = 2 * m.norb
    fop = of.get_fermion_operator(openfermion_interaction_operator(m))
    ref = of.binary_code_transform(fop, of.parity_code(n))
    ref.compress(1e-12)
    ham = map_hamiltonian(m.h1e, m.eri, m.e_core, "parity")
    assert ham.allclose(PauliExpansion.from_openfermion(ref, n), atol=1e-12)


def test_bravyi_kitaev_matrix_matches_openfermion():
    # reference: OpenFermion bravyi_kitaev computed at test time; the same linear-encoding
    # construction that builds parity reproduces it with the Seeley-Richard-Love matrix
    m = pyscf_molecule("lih", with_fci=False)
    n = 2 * m.norb
    jw = map_hamiltonian(m.h1e, m.eri, m.e_core, "jordan_wigner")
    bk = map_hamiltonian(m.h1e, m.eri, m.e_core, "bravyi_kitaev")
    assert encode_linear(jw, encoding_matrix(n, "bravyi_kitaev")).allclose(bk, atol=1e-12)
    # Seeley, Richard, Love, J. Chem. Phys. 137, 224109 (2012): qubit k holds the parity of a
    # Fenwick-tree set of modes; written out for 4 modes in OpenFermion's index order (the match
    # with OpenFermion above is the reference)
    assert encoding_matrix(4, "bravyi_kitaev").tolist() == [
        [1, 0, 0, 0],
        [1, 1, 0, 0],
        [0, 0, 1, 0],
        [1, 1, 1, 1],
    ]


@pytest.mark.parametrize("n", [5, 8])
def test_random_fermion_operator_all_mappings(n):
    # reference: OpenFermion jordan_wigner / bravyi_kitaev / parity binary code at test time
    rng = np.random.default_rng(n)
    op = of.FermionOperator()
    for _ in range(6):
        p, q, r, s = (int(v) for v in rng.integers(0, n, 4))
        c = float(rng.normal())
        term = of.FermionOperator(((p, 1), (q, 1), (r, 0), (s, 0)), c)
        op += term + of.hermitian_conjugated(term)
        c = float(rng.normal())
        op += of.FermionOperator(((p, 1), (s, 0)), c) + of.FermionOperator(((s, 1), (p, 0)), c)
    refs = {
        "jordan_wigner": of.jordan_wigner(op),
        "bravyi_kitaev": of.bravyi_kitaev(op, n_qubits=n),
        "parity": of.binary_code_transform(op, of.parity_code(n)),
    }
    for mapping, ref in refs.items():
        ours = map_fermion_operator(op, n, mapping)
        ref.compress(1e-12)
        assert ours.allclose(PauliExpansion.from_openfermion(ref, n), atol=1e-12), mapping


@pytest.mark.parametrize("mapping", MAPPINGS)
@pytest.mark.parametrize("name", ["h2", "lih", "h2o"])
def test_reference_bits_give_hartree_fock_energy(name, mapping):
    # reference: PySCF RHF energy computed at test time (<HF|H|HF> = E_HF)
    m = pyscf_molecule(name, with_fci=False)
    ham = map_hamiltonian(m.h1e, m.eri, m.e_core, mapping)
    bits = reference_bits(m.nelec, m.norb, mapping)
    assert bits.dtype == np.uint8 and bits.size == 2 * m.norb
    psi = basis_state(bits)
    assert expectation(psi, ham) == pytest.approx(m.e_hf, abs=1e-8)
    assert expectation(psi, number_operator(2 * m.norb, mapping)) == pytest.approx(sum(m.nelec))
    assert expectation(psi, sz_operator(2 * m.norb, mapping)) == pytest.approx(0.0, abs=1e-12)


def test_reference_bits_small_examples():
    # common practice, by hand from the encodings: occupations 1100 give parity bits
    # b_k = n_0 + ... + n_k = 1000 and Bravyi-Kitaev bits (n0, n0+n1, n2, n0+..+n3) = 1000
    assert reference_bits((1, 1), 2, "jordan_wigner").tolist() == [1, 1, 0, 0]
    assert reference_bits((1, 1), 2, "parity").tolist() == [1, 0, 0, 0]
    assert reference_bits((1, 1), 2, "bravyi_kitaev").tolist() == [1, 0, 0, 0]
    assert reference_bits((2, 1), 3, "jordan_wigner").tolist() == [1, 1, 1, 0, 0, 0]


@pytest.mark.parametrize("mapping", MAPPINGS)
def test_number_and_sz_are_diagonal(mapping):
    # common practice: linear encodings map occupation numbers to Z strings
    n_op, sz_op = number_operator(8, mapping), sz_operator(8, mapping)
    assert n_op.is_diagonal() and sz_op.is_diagonal()
    ref = of.get_sparse_operator(of.jordan_wigner(of.number_operator(8)), 8)
    ours = n_op.sparse_matrix()
    if mapping == "jordan_wigner":
        # reference: OpenFermion number_operator computed at test time
        assert abs(ours - ref).max() < 1e-12
    assert sorted(np.unique(np.round(ours.diagonal().real)).tolist()) == list(range(9))


def test_schema_mapping_names_are_the_implemented_mappings():
    # common practice: the config's allowed values are exactly what the code implements
    from eigensweep.config import load_schema

    enum = load_schema()["properties"]["methods"]["properties"]["mapping"]["items"]["enum"]
    assert tuple(enum) == MAPPINGS


@pytest.mark.parametrize("mapping", ["jordan_wigner", "bravyi_kitaev", "parity"])
def test_spin_square_operator_matches_pyscf_spin_square_of_fci_roots(mapping):
    from pyscf import ao2mo, fci, gto, scf

    from eigensweep.qubit import reduce_to_sector, spin_square_operator
    from eigensweep.qubit.mapping import encode_state
    from eigensweep.vqe.detspace import to_qubit_state

    mol = gto.M(atom="H 0 0 0; H 0 0 2.0", basis="6-31g", symmetry=True, verbose=0)
    mf = scf.RHF(mol).run(conv_tol=1e-12)
    c = mf.mo_coeff
    h1 = c.T @ mf.get_hcore() @ c
    eri = ao2mo.restore(1, ao2mo.kernel(mol, c), mol.nao)
    _, roots = fci.direct_spin1.FCI(mol).kernel(h1, eri, mol.nao, mol.nelec, nroots=4)
    s2 = spin_square_operator(2 * mol.nao, mapping)
    ham = map_hamiltonian(h1, eri, mol.energy_nuc(), mapping)
    tap = reduce_to_sector(ham, reference_bits(mol.nelec, mol.nao, mapping))
    s2_tapered = tap.taper_operator(s2)  # commutes with every Z2 symmetry: taperable
    seen = set()
    for v in roots:
        ref = fci.spin_square(v, mol.nao, mol.nelec)[0]
        seen.add(round(ref))
        psi = encode_state(to_qubit_state(v, mol.nao, mol.nelec), mapping)
        # reference: PySCF fci.spin_square of the FCI root (singlets 0, the triplet 2)
        assert expectation(psi, s2) == pytest.approx(ref, abs=1e-8)
        phi = tap.taper_state(psi)
        if np.vdot(phi, phi).real > 0.5:  # roots inside the reference's sector
            assert expectation(phi, s2_tapered) == pytest.approx(ref, abs=1e-8)
    assert seen == {0, 2}
