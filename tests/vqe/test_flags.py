"""Success flags of the optimize engine say what happened.

References: PySCF RHF and FCI energies computed here; Spall, IEEE Trans. Autom. Control 37,
332 (1992): SPSA runs a fixed gain schedule and has no convergence test of its own (from
memory).
"""

from __future__ import annotations

import numpy as np
import pytest
from fixtures import active_integrals
from pyscf import fci, gto, scf

from eigensweep.vqe import run_optimize

H2 = "H 0 0 0; H 0 0 0.74"


def pyscf_h2():
    mf = scf.RHF(gto.M(atom=H2, basis="sto-3g", verbose=0)).run(conv_tol=1e-12)
    return mf.e_tot, fci.FCI(mf).kernel()[0]


def test_gradient_run_converges_and_says_so():
    e_hf, e_fci = pyscf_h2()
    res = run_optimize(
        **active_integrals("H2"),
        ansatz={"name": "uccsd"},
        optimizer={"name": "lbfgs"},
        estimator={"name": "exact"},
    )
    assert res.converged and res.stop_reason == "converged"
    assert res.energy == pytest.approx(e_fci, abs=1e-6)  # reference: PySCF FCI


def test_spsa_never_claims_convergence():
    res = run_optimize(
        **active_integrals("H2"),
        ansatz={"name": "uccsd"},
        optimizer={"name": "spsa", "maxiter": 40},
        estimator={"name": "shots", "shots": 2000},
        seed=3,
    )
    # Spall (1992): no convergence test, the schedule just ends
    assert not res.converged and res.stop_reason == "max_iterations"


def test_cobyla_that_returns_its_start_is_not_converged():
    e_hf, _ = pyscf_h2()
    res = run_optimize(
        **active_integrals("H2"),
        ansatz={"name": "uccsd"},
        optimizer={"name": "cobyla"},
        estimator={"name": "shots", "shots": 1000},
        seed=1,
    )
    # this seed's shot noise makes every COBYLA trial look worse than the start: the returned
    # state is Hartree-Fock (reference: PySCF RHF energy), so nothing was optimized
    assert np.all(res.params == 0.0)
    assert res.energy_exact_at_params == pytest.approx(e_hf, abs=1e-9)
    assert not res.converged and res.stop_reason == "never_moved"
    assert "never moved" in res.message
