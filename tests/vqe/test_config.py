"""Bad input to the variational engine raises ConfigError naming the key (checked first)."""

from __future__ import annotations

import numpy as np
import pytest
from fixtures import active_integrals, h2_two_qubit

from eigensweep.errors import ConfigError
from eigensweep.vqe import (
    ANSATZ_DEFAULTS,
    ESTIMATOR_DEFAULTS,
    OPTIMIZER_DEFAULTS,
    minimize,
    run_optimize,
    validate_method,
)


def _run(**kw):
    args = dict(
        active_integrals("H2"),
        ansatz={"name": "uccsd"},
        optimizer={"name": "lbfgs"},
        estimator={"name": "exact"},
    )
    args.update(kw)
    return run_optimize(**args)


@pytest.mark.parametrize(
    "kind,cfg,needle",
    [
        ("ansatz", {"name": "uccsdt"}, "ansatz.name"),
        ("ansatz", {"name": "uccsd", "frozen": 1}, "ansatz.frozen"),
        ("ansatz", {"name": "kupccgsd", "k": 0}, "ansatz.k"),
        ("ansatz", {"name": "kupccgsd", "k": 1.5}, "ansatz.k"),
        ("ansatz", {"name": "uccsd", "spin_flip_tied": "yes"}, "ansatz.spin_flip_tied"),
        ("ansatz", {"name": "uccsd", "spin_adapted": True}, "renamed: write spin_flip_tied"),
        ("ansatz", {"name": "uccsd", "mapping": "qubitwise"}, "ansatz.mapping"),
        ("ansatz", {"name": "uccsd", "mapping": "parity"}, "methods.mapping"),
        ("ansatz", {"name": "adapt", "mapping": "jordan_wigner"}, "methods.mapping"),
        ("ansatz", {"name": "adapt", "pool": "everything"}, "ansatz.pool"),
        ("ansatz", {"name": "adapt", "gradient_tolerance": 0}, "ansatz.gradient_tolerance"),
        ("ansatz", {"name": "hardware_efficient", "axes": "x"}, "ansatz.axes"),
        ("ansatz", {"name": "hardware_efficient", "rounds": -1}, "ansatz.rounds"),
        ("optimizer", {"name": "simulated_annealing"}, "optimizer.name"),
        ("optimizer", {"name": "lbfgs", "gtol": 1e-6}, "optimizer.gtol"),
        ("optimizer", {"name": "lbfgs", "maxiter": 0}, "optimizer.maxiter"),
        ("optimizer", {"name": "spsa", "c": -0.1}, "optimizer.c"),
        ("optimizer", {"name": "rbf_surrogate", "weights": []}, "optimizer.weights"),
        ("optimizer", {"name": "cobyla", "tol": "small"}, "optimizer.tol"),
        ("estimator", {"name": "sampled"}, "estimator.name"),
        ("estimator", {"name": "shots", "shots": 0}, "estimator.shots"),
        ("estimator", {"name": "shots", "nshots": 10}, "estimator.nshots"),
        ("estimator", {"name": "noisy", "readout_error": 0.7}, "estimator.readout_error"),
        ("kinds", {"name": "x"}, "kind"),
    ],
)
def test_bad_config_raises_config_error_naming_key(kind, cfg, needle):
    # common practice: one-line message naming the offending key
    with pytest.raises(ConfigError) as err:
        validate_method(kind, cfg)
    msg = str(err.value)
    assert needle in msg
    assert "\n" not in msg


def test_unknown_names_list_allowed_values():
    with pytest.raises(ConfigError, match="allowed: uccsd, kupccgsd, hardware_efficient, adapt"):
        validate_method("ansatz", {"name": "foo"})
    with pytest.raises(ConfigError, match="lbfgs"):
        validate_method("optimizer", {"name": "foo"})


def test_run_optimize_rejects_bad_input():
    with pytest.raises(ConfigError, match="ansatz.name"):
        _run(ansatz={"name": "nope"})
    with pytest.raises(ConfigError, match="optimizer.tolerance"):
        _run(optimizer={"name": "lbfgs", "tolerance": 1})
    with pytest.raises(ConfigError, match="optimizer.name"):
        # gradient optimizers need exact gradients
        _run(estimator={"name": "shots", "shots": 100})
    with pytest.raises(ConfigError, match="initial_params"):
        _run(initial_params=np.zeros(5))
    with pytest.raises(ConfigError, match="estimator.name"):
        _run(ansatz={"name": "adapt"}, optimizer={"name": "cobyla"}, estimator={"name": "shots"})
    with pytest.raises(ConfigError, match="reference_bits"):
        _run(
            ansatz={"name": "hardware_efficient"},
            qubit_hamiltonian=h2_two_qubit()[0],
        )


def test_minimize_rejects_unknown_method_and_option():
    with pytest.raises(ConfigError, match="optimizer.name"):
        minimize(lambda x: float(x @ x), np.ones(2), method="newton", options={})
    with pytest.raises(ConfigError, match="optimizer.step"):
        minimize(lambda x: float(x @ x), np.ones(2), method="spsa", options={"step": 1})


def test_defaults_are_filled_and_complete():
    for kind, table in (
        ("ansatz", ANSATZ_DEFAULTS),
        ("optimizer", OPTIMIZER_DEFAULTS),
        ("estimator", ESTIMATOR_DEFAULTS),
    ):
        for name, defaults in table.items():
            out = validate_method(kind, {"name": name})
            assert out == {"name": name, **defaults}
    out = validate_method("optimizer", {"name": "lbfgs", "maxiter": 5})
    assert out["maxiter"] == 5 and out["tol"] == OPTIMIZER_DEFAULTS["lbfgs"]["tol"]


def test_package_attributes_load_lazily():
    import eigensweep.vqe as vqe

    for name in vqe.__all__:
        assert getattr(vqe, name) is not None
    assert set(vqe.__all__) <= set(dir(vqe))
    with pytest.raises(AttributeError):
        vqe.no_such_name  # noqa: B018
    from eigensweep.vqe.methods import ANSATZ_DEFAULTS as table

    assert table is ANSATZ_DEFAULTS
    assert all("mapping" not in d for d in ANSATZ_DEFAULTS.values())
