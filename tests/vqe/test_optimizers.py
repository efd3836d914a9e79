"""Optimizers: every method converges on H2, deterministic for fixed seeds, honest traces."""

from __future__ import annotations

import numpy as np
import pytest
from fixtures import active_integrals

from eigensweep.vqe import OPTIMIZER_DEFAULTS, fci_ground_state, minimize, run_optimize

# tolerance per method on H2/UCCSD (3 parameters) with exact energies
TOLERANCES = {
    "lbfgs": 1e-9,
    "bfgs": 1e-9,
    "cobyla": 1e-6,
    "nelder_mead": 1e-6,
    "spsa": 1e-4,
    "rbf_surrogate": 1e-5,
    "adam": 1e-5,
    "shot_adaptive_descent": 1e-6,
}


# SPSA's default first step (0.001 rad) is sized for noise-dominated gradients (LiH at 1000
# shots, config/README.md); with exact energies in 300 iterations it takes the larger one
EXACT_OPTIONS = {"spsa": {"first_step": 0.01}}


def _e_fci():
    # reference: PySCF FCI computed at test time
    m = active_integrals("H2")
    return fci_ground_state(m["h1e"], m["eri"], m["e_core"], m["norb"], m["nelec"])[0]


@pytest.mark.parametrize("method", list(OPTIMIZER_DEFAULTS))
def test_every_optimizer_converges_on_h2(method):
    m = active_integrals("H2")
    res = run_optimize(
        **m,
        ansatz={"name": "uccsd"},
        optimizer={"name": method, **EXACT_OPTIONS.get(method, {})},
        estimator={"name": "exact"},
        seed=3,
    )
    assert res.energy - _e_fci() < TOLERANCES[method]
    assert res.energy > _e_fci() - 1e-9
    assert res.n_evaluations == res.trace_energy.size > 0
    assert np.all(res.trace_shots == 0)
    if method in ("lbfgs", "bfgs"):
        assert np.all(np.isfinite(res.trace_grad_norm)) and res.converged
    elif method in ("adam", "shot_adaptive_descent"):
        assert np.all(np.isfinite(res.trace_grad_norm))
    else:
        assert np.all(np.isnan(res.trace_grad_norm))


@pytest.mark.parametrize("method", ["spsa", "rbf_surrogate", "cobyla", "nelder_mead"])
def test_deterministic_for_fixed_seed(method):
    rng = np.random.default_rng(0)
    centre = rng.standard_normal(4)

    def quadratic(x):
        return float(np.sum((x - centre) ** 2))

    runs = [
        minimize(quadratic, np.zeros(4), method=method, options={"maxiter": 60}, seed=7)
        for _ in range(2)
    ]
    assert np.array_equal(runs[0].x, runs[1].x)
    assert [t["energy"] for t in runs[0].trace] == [t["energy"] for t in runs[1].trace]
    other = minimize(quadratic, np.zeros(4), method=method, options={"maxiter": 60}, seed=8)
    if method in ("spsa", "rbf_surrogate"):
        assert not np.array_equal(other.x, runs[0].x)


def test_minimize_trace_and_counts():
    calls = []

    def fg(x):
        calls.append(1)
        return float(np.sum((x - 1.0) ** 2)), 2.0 * (x - 1.0)

    res = minimize(fg, np.zeros(3), method="lbfgs", options={}, grad=True, shots=0)
    assert res.n_evaluations == len(calls) == len(res.trace) == res.n_gradient_evaluations
    assert np.allclose(res.x, 1.0, atol=1e-7) and res.converged
    assert [t["evaluation"] for t in res.trace] == list(range(len(calls)))
    assert set(res.trace[0]) == {"energy", "grad_norm", "evaluation", "shots"}


def test_rbf_surrogate_on_rosenbrock_like_problem():
    def f(x):
        return float((1 - x[0]) ** 2 + 5 * (x[1] - x[0] ** 2) ** 2)

    res = minimize(
        f,
        np.array([0.5, 0.5]),
        method="rbf_surrogate",
        options={"maxiter": 150, "radius": 1.0},
        seed=1,
    )
    assert res.fun < 1e-3
