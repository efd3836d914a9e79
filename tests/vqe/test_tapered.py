"""Optimization on Z2-tapered Hamiltonians (Bravyi, Gambetta, Mezzacapo, Temme, arXiv:1701.08213).

Integrals are built directly with PySCF (RHF/STO-3G, ``symmetry=True`` so the orbitals are
symmetry-adapted and point-group parities become Z2 symmetries): ``h1e = C^T hcore C``,
``eri = ao2mo.restore(1, ao2mo.kernel(mol, C), norb)``, ``e_core = mol.energy_nuc()``; the qubit
problem comes from :func:`eigensweep.qubit.map_hamiltonian`, ``reference_bits`` and ``reduce_to_sector``.
"""

from __future__ import annotations

import json
import subprocess
import sys
from functools import cache

import numpy as np
import pytest
from fixtures import problem, tapering

from eigensweep.errors import ConfigError
from eigensweep.qubit import identity_reduction, map_hamiltonian, reference_bits
from eigensweep.qubit.statevector import expectation, simulate
from eigensweep.vqe import (
    UCCSD,
    DetSpace,
    TaperedFermionicAnsatz,
    check_combination,
    circuit_from_meta,
    run_optimize,
)

TAPERED_QUBITS = {"H2": 1, "LiH": 8}
MAPPINGS = ("jordan_wigner", "bravyi_kitaev", "parity")
EXACT = {"optimizer": {"name": "lbfgs"}, "estimator": {"name": "exact"}}


@cache
def untapered_uccsd(name: str):
    return run_optimize(**problem(name)["ints"], ansatz={"name": "uccsd"}, **EXACT)


@cache
def tapered_uccsd(name: str, mapping: str):
    tap = tapering(name, mapping)
    return run_optimize(
        **problem(name)["ints"],
        ansatz={"name": "uccsd"},
        **EXACT,
        mapping=mapping,
        tapering=tap,
        qubit_hamiltonian=tap.hamiltonian,
    )


@pytest.mark.parametrize("mapping", MAPPINGS)
@pytest.mark.parametrize("name", ["H2", "LiH"])
def test_tapered_uccsd_equals_untapered_and_fci(name, mapping):
    res = tapered_uccsd(name, mapping)
    e_fci = problem(name)["e_fci"]
    # reference: untapered determinant-space UCCSD (exact emulator, computed at test time)
    assert abs(res.energy - untapered_uccsd(name).energy) < 1e-7
    # reference: PySCF FCI computed at test time; variational, within chemical accuracy
    assert e_fci - 1e-9 <= res.energy < e_fci + 1.6e-3
    assert res.n_qubits == TAPERED_QUBITS[name] == tapering(name, mapping).n_qubits
    meta = res.ansatz_meta
    assert meta["tapered"] and meta["mapping"] == mapping == meta["mapping_for_costs"]
    assert res.n_params == len(meta["kept_params"]) == meta["n_params"]
    assert meta["n_params_untapered"] == untapered_uccsd(name).n_params
    # symmetry-forbidden excitations exist in both (H2: the two sigma_g -> sigma_u singles)
    assert meta["n_excitations_dropped"] >= 2
    assert res.n_params + meta["n_params_dropped"] == meta["n_params_untapered"]
    # the exact ground state of the tapered operator is the FCI state: overlap is defined
    assert res.overlap_exact == pytest.approx(1.0, abs=1e-4)
    # tapering removes qubits and CNOTs
    assert res.cnot_count < untapered_uccsd(name).cnot_count


@pytest.mark.parametrize("mapping", MAPPINGS)
@pytest.mark.parametrize("name", ["H2", "LiH"])
def test_circuit_from_meta_reproduces_tapered_energy(name, mapping):
    res = tapered_uccsd(name, mapping)
    meta = json.loads(json.dumps(res.ansatz_meta))  # as stored in the stage file
    circ = circuit_from_meta(meta, res.params, mapping)
    assert circ.n_qubits == res.n_qubits
    assert circ.cnot_count == res.cnot_count and circ.depth == res.depth
    e_circ = expectation(simulate(circ), tapering(name, mapping).hamiltonian)
    assert abs(e_circ - res.energy) < 1e-8


@pytest.mark.parametrize("mapping", MAPPINGS)
@pytest.mark.parametrize("name", ["H2", "LiH"])
def test_tapered_adjoint_gradient_matches_finite_differences(name, mapping):
    ints = problem(name)["ints"]
    space = DetSpace(ints["norb"], ints["nelec"], ints["h1e"], ints["eri"], ints["e_core"])
    ans = TaperedFermionicAnsatz.from_ansatz(UCCSD(space), mapping, tapering(name, mapping))
    theta = 0.2 * np.random.default_rng(7).standard_normal(ans.n_params)
    energy, grad = ans.energy_and_gradient(theta)
    assert abs(energy - ans.energy(theta)) < 1e-12
    h = 1e-5
    fd = np.array(
        [
            (ans.energy(theta + h * e) - ans.energy(theta - h * e)) / (2 * h)
            for e in np.eye(ans.n_params)
        ]
    )
    # reference: central finite differences (common practice)
    assert np.max(np.abs(grad - fd)) < 1e-6
    # the tapered state is the untapered determinant-space state, carried through tapering
    full = UCCSD(space)
    assert abs(ans.energy(theta) - full.energy(ans.untapered_params(theta))) < 1e-10


def test_tapered_adapt_and_kupccgsd_match_determinant_space():
    name, mapping = "H2", "parity"
    ints, tap = problem(name)["ints"], tapering(name, mapping)
    for ansatz in ({"name": "adapt"}, {"name": "kupccgsd", "k": 2}):
        full = run_optimize(**ints, ansatz=ansatz, **EXACT, mapping=mapping)
        res = run_optimize(**ints, ansatz=ansatz, **EXACT, mapping=mapping, tapering=tap)
        # reference: untapered determinant-space run of the same ansatz
        assert abs(res.energy - full.energy) < 1e-7
        assert res.n_qubits == 1 and res.ansatz_meta["reference_bits"] == [1]
        circ = circuit_from_meta(res.ansatz_meta, res.params, mapping)
        assert abs(expectation(simulate(circ), tap.hamiltonian) - res.energy) < 1e-8


def test_tapered_adapt_lih_matches_determinant_space():
    name, mapping = "LiH", "jordan_wigner"
    ints, tap = problem(name)["ints"], tapering(name, mapping)
    kw = {"ansatz": {"name": "adapt", "gradient_tolerance": 1e-2}, **EXACT, "mapping": mapping}
    full = run_optimize(**ints, **kw)
    res = run_optimize(**ints, **kw, tapering=tap)
    # reference: untapered determinant-space ADAPT (same selections up to round-off)
    assert abs(res.energy - full.energy) < 1e-7
    assert res.n_params == full.n_params and res.n_qubits == 8
    assert res.ansatz_meta["pool"] == "singles_doubles"
    assert res.ansatz_meta["pool_operators_dropped"] > 0  # point-group-forbidden excitations


def test_shots_on_tapered_problem_sample_the_tapered_hamiltonian():
    name, mapping = "H2", "bravyi_kitaev"
    res = run_optimize(
        **problem(name)["ints"],
        ansatz={"name": "uccsd"},
        optimizer={"name": "spsa", "maxiter": 40, "first_step": 0.01},
        estimator={"name": "shots", "shots": 4000, "final_shots": 40000},
        mapping=mapping,
        tapering=tapering(name, mapping),
        seed=2,
    )
    assert res.n_qubits == 1 and res.energy_stderr > 0
    # reference: the exact energy at the same parameters (statistics, common practice)
    assert abs(res.energy - res.energy_exact_at_params) < 5 * res.energy_stderr
    assert res.energy_exact_at_params - problem(name)["e_fci"] < 5e-3


def test_untapered_mapping_sets_costs_and_taper_stage_identity():
    name = "LiH"
    ints = problem(name)["ints"]
    base = untapered_uccsd(name)
    for mapping in ("bravyi_kitaev", "parity"):
        ident = identity_reduction(
            map_hamiltonian(ints["h1e"], ints["eri"], ints["e_core"], mapping),
            reference_bits(ints["nelec"], ints["norb"], mapping),
        )
        res = run_optimize(
            **ints, ansatz={"name": "uccsd"}, **EXACT, mapping=mapping, tapering=ident
        )
        assert res.n_qubits == 12 and abs(res.energy - base.energy) < 1e-10
        circ = circuit_from_meta(res.ansatz_meta, res.params, mapping)
        assert circ.cnot_count == res.cnot_count != base.cnot_count
        assert abs(expectation(simulate(circ), ident.hamiltonian) - res.energy) < 1e-8


def test_mismatched_tapering_is_rejected():
    ints = problem("H2")["ints"]
    wrong = tapering("LiH", "jordan_wigner")
    with pytest.raises(ConfigError, match="tapering"):
        run_optimize(**ints, ansatz={"name": "uccsd"}, **EXACT, tapering=wrong)
    with pytest.raises(ConfigError, match="qubit_hamiltonian"):
        run_optimize(
            **ints,
            ansatz={"name": "uccsd"},
            **EXACT,
            tapering=tapering("H2", "jordan_wigner"),
            qubit_hamiltonian=map_hamiltonian(
                ints["h1e"], ints["eri"], ints["e_core"], "jordan_wigner"
            ),
        )


@pytest.mark.parametrize("name", ["H2", "LiH"])
def test_tapering_of_another_mapping_is_rejected(name):
    ints = problem(name)["ints"]
    for built, claimed in (("jordan_wigner", "parity"), ("parity", "jordan_wigner")):
        if name == "LiH":
            # (H2's single tapered rotation happens to coincide under the two mappings)
            with pytest.raises(ConfigError, match="mapping"):
                run_optimize(
                    **ints,
                    ansatz={"name": "uccsd"},
                    **EXACT,
                    mapping=claimed,
                    tapering=tapering(name, built),
                )
        ham = map_hamiltonian(ints["h1e"], ints["eri"], ints["e_core"], built)
        ident = identity_reduction(ham, reference_bits(ints["nelec"], ints["norb"], built))
        with pytest.raises(ConfigError, match="mapping"):
            run_optimize(**ints, ansatz={"name": "uccsd"}, **EXACT, mapping=claimed, tapering=ident)


def test_check_combination_rejects_unsupported():
    # common practice: one-line ConfigError naming the key and what is allowed
    for taper_on, mapping in ((True, "jordan_wigner"), (False, "parity"), (True, "bravyi_kitaev")):
        with pytest.raises(ConfigError, match="ansatz.pool") as err:
            check_combination({"name": "adapt", "pool": "qubit"}, taper_on, mapping)
        assert "jordan_wigner" in str(err.value) and "\n" not in str(err.value)
    with pytest.raises(ConfigError, match="methods.mapping"):
        check_combination({"name": "uccsd"}, False, "qubitwise")
    with pytest.raises(ConfigError, match="methods.taper"):
        check_combination({"name": "uccsd"}, "yes", "parity")
    with pytest.raises(ConfigError, match="ansatz.mapping"):
        check_combination({"name": "uccsd", "mapping": "parity"}, True, "parity")
    with pytest.raises(ConfigError, match="optimizer.name"):
        check_combination(
            {"name": "uccsd"},
            True,
            "parity",
            optimizer={"name": "bfgs"},
            estimator={"name": "shots"},
        )
    for ansatz in (
        {"name": "uccsd"},
        {"name": "kupccgsd"},
        {"name": "adapt"},
        {"name": "hardware_efficient"},
    ):
        for mapping in MAPPINGS:
            for taper_on in (False, True):
                check_combination(ansatz, taper_on, mapping)
    check_combination({"name": "adapt", "pool": "qubit"}, False, "jordan_wigner")
    # the same check runs inside run_optimize
    with pytest.raises(ConfigError, match="ansatz.pool"):
        run_optimize(
            **problem("H2")["ints"],
            ansatz={"name": "adapt", "pool": "qubit"},
            **EXACT,
            mapping="parity",
        )


def test_validation_import_is_light():
    # common practice: config validation runs in every Snakemake process
    code = (
        "import sys; from eigensweep.vqe import validate_method, check_combination; "
        "validate_method('ansatz', {'name': 'uccsd'}); "
        "check_combination({'name': 'uccsd'}, True, 'parity'); "
        "heavy = [m for m in ('openfermion', 'pyscf', 'scipy', 'eigensweep.qubit') if m in sys.modules]; "
        "print(heavy)"
    )
    out = subprocess.run([sys.executable, "-c", code], capture_output=True, text=True, check=True)
    assert out.stdout.strip() == "[]"


def test_determinant_space_jw_path_needs_no_openfermion():
    # common practice: the optimize stage's default path should not pay for OpenFermion
    code = (
        "import sys; from pyscf import gto, scf, ao2mo; from eigensweep.vqe import run_optimize; "
        "mol = gto.M(atom='H 0 0 0; H 0 0 0.74', basis='sto-3g', verbose=0); "
        "mf = scf.RHF(mol).run(); c = mf.mo_coeff; "
        "r = run_optimize(h1e=c.T @ mf.get_hcore() @ c, eri=ao2mo.restore(1, ao2mo.kernel(mol, c), 2), "
        "e_core=mol.energy_nuc(), norb=2, nelec=(1, 1), ansatz={'name': 'uccsd'}, "
        "optimizer={'name': 'lbfgs'}, estimator={'name': 'exact'}); "
        "print(r.cnot_count, 'openfermion' in sys.modules)"
    )
    out = subprocess.run([sys.executable, "-c", code], capture_output=True, text=True, check=True)
    # the double excitation's 8 JW strings of weight 4 at 2(w - 1) CNOTs each (Nielsen &
    # Chuang, section 4.7.3); the singles stay at zero by symmetry and are not compiled
    assert out.stdout.split() == ["48", "False"]
