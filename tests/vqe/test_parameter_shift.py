"""Parameter-shift gradients (:mod:`eigensweep.vqe.parameter_shift`) against the adjoint ones.

With exact expectations the shift rules are exact identities, so the gradient must equal the
adjoint gradient of the engine (Jones & Gacon, arXiv:2009.02823) to round-off.
"""

from __future__ import annotations

import math

import numpy as np
import pytest
from fixtures import active_integrals, problem, space_of, tapering

from eigensweep.qubit import map_hamiltonian, reference_bits
from eigensweep.vqe import UCCSD, DetSpace, KUpCCGSD, TaperedFermionicAnsatz
from eigensweep.vqe.hardware_efficient import HardwareEfficientAnsatz
from eigensweep.vqe.parameter_shift import (
    EXCITATION_RULE,
    PAULI_RULE,
    ansatz_gradient,
    shift_rule,
)


def test_shift_rule_coefficients_are_the_published_closed_forms():
    # Mitarai et al. PRA 98, 032309 (2018): shift pi/2, coefficient 1/2
    assert PAULI_RULE.shifts == pytest.approx((math.pi / 2,))
    assert PAULI_RULE.coeffs == pytest.approx((0.5,))
    # Kottmann et al. arXiv:2011.05938 in exp(-i theta/2 G) form: shifts pi/2, 3pi/2 and
    # coefficients (sqrt2 +- 1)/(4 sqrt2); here phi = theta/2, so shifts halve, coeffs double
    r2 = math.sqrt(2.0)
    assert EXCITATION_RULE.shifts == pytest.approx((math.pi / 4, 3 * math.pi / 4))
    assert EXCITATION_RULE.coeffs == pytest.approx(
        (2 * (r2 + 1) / (4 * r2), -2 * (r2 - 1) / (4 * r2))
    )


@pytest.mark.parametrize("r", [1, 2, 3, 4])
def test_shift_rule_differentiates_trigonometric_polynomials(r):
    # reference: the derivative of a random trigonometric polynomial, computed with NumPy
    rng = np.random.default_rng(r)
    a, b = rng.normal(size=r), rng.normal(size=r)
    ls = np.arange(1, r + 1)

    def f(x):
        return 0.3 + a @ np.cos(ls * x) + b @ np.sin(ls * x)

    x0 = 0.37
    exact = -(a * ls) @ np.sin(ls * x0) + (b * ls) @ np.cos(ls * x0)
    rule = shift_rule(r)
    est = sum(c * (f(x0 + s) - f(x0 - s)) for s, c in zip(rule.shifts, rule.coeffs, strict=True))
    assert abs(est - exact) < 1e-12


def _theta(n: int, seed: int = 3) -> np.ndarray:
    return 0.2 * np.random.default_rng(seed).standard_normal(n)


def _check(ans, seed: int = 3) -> None:
    theta = _theta(ans.n_params, seed)
    _, adjoint = ans.energy_and_gradient(theta)
    ps = ansatz_gradient(ans, theta)
    assert ps.shots == 0
    # reference: the engine's adjoint gradient (exact identity with exact expectations)
    assert np.max(np.abs(ps.gradient - adjoint)) < 1e-10
    assert np.linalg.norm(adjoint) > 1e-3  # a nontrivial point


@pytest.mark.parametrize("tied", [False, True])
def test_uccsd_lih_determinant_space(tied):
    _check(UCCSD(space_of("LiH"), spin_adapted=tied))


@pytest.mark.parametrize("tied", [False, True])
def test_kupccgsd_lih_determinant_space(tied):
    _check(KUpCCGSD(space_of("LiH"), k=2, spin_adapted=tied))


@pytest.mark.parametrize("kind", ["uccsd", "kupccgsd"])
def test_tapered_fermionic_lih(kind):
    ints = problem("LiH")["ints"]
    space = DetSpace(ints["norb"], ints["nelec"], ints["h1e"], ints["eri"], ints["e_core"])
    base = UCCSD(space, spin_adapted=True) if kind == "uccsd" else KUpCCGSD(space, k=1)
    ans = TaperedFermionicAnsatz.from_ansatz(
        base, "jordan_wigner", tapering("LiH", "jordan_wigner")
    )
    _check(ans)


@pytest.mark.parametrize("tapered", [False, True])
def test_hardware_efficient_lih(tapered):
    if tapered:
        tap = tapering("LiH", "parity")
        ham, ref = tap.hamiltonian, tap.reference_bits
    else:
        m = active_integrals("LiH")
        ham = map_hamiltonian(m["h1e"], m["eri"], m["e_core"], "jordan_wigner")
        ref = reference_bits(m["nelec"], m["norb"], "jordan_wigner")
    _check(HardwareEfficientAnsatz(ham, ref, rounds=2, axes="yz", init_scale=0.0))
