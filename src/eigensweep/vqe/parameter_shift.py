"""Parameter-shift gradients: the derivative of a measured energy from shifted circuits.

On hardware no adjoint gradient exists; the derivative along a gate angle is a linear
combination of energies of the same circuit with that angle shifted, each measured like any
energy (the estimator's grouping and shot allocation, :mod:`eigensweep.vqe.estimators`).

Shift rules
-----------
Let a gate be ``U(x) = exp(-i x A)`` with Hermitian ``A`` and all other gates fixed. In the
eigenbasis of ``A`` the energy ``f(x) = <psi_0|U(x)^+ W U(x)|psi_0>`` only contains the phases
``exp(i (lambda_j - lambda_k) x)``, so ``f`` is a trigonometric polynomial whose frequencies
are the positive differences ``Omega`` of eigenvalues of ``A`` (Wierichs, Izaac, Wang, Lin,
Quantum 6, 677 (2022), eq. (6)). When they are equidistant, ``Omega_l = l`` for
``l = 1..R``, the odd part of ``f`` around ``x`` is ``sum_l b_l sin(l s)`` and
``f'(x) = sum_l l b_l``. Wierichs et al. (eq. (A10) and (25)) give the exact rule with the
``2R`` shifts ``+-x_mu``, ``x_mu = (2 mu - 1) pi / (2R)``:

    f'(x) = sum_{mu=1..R} c_mu [f(x + x_mu) - f(x - x_mu)],
    c_mu = (-1)^(mu - 1) / (4 R sin^2(x_mu / 2)).

:func:`shift_rule` evaluates this formula; the two rules used here follow from it:

* **Pauli rotation** ``exp(-i a/2 P)`` (``P^2 = 1``; ``A = P/2``, eigenvalues ``+-1/2``, one
  frequency, ``R = 1``): ``x_1 = pi/2``, ``c_1 = 1/(4 sin^2(pi/4)) = 1/2``, i.e. the two-term
  rule ``f'(a) = [f(a + pi/2) - f(a - pi/2)] / 2`` (Mitarai, Negoro, Kitagawa, Fujii, PRA 98,
  032309 (2018); Schuld, Bergholm, Gogolin, Izaac, Killoran, PRA 99, 032331 (2019)).
* **Fermionic excitation** ``exp(phi (T - T^+))`` for a single or double excitation ``T``:
  ``G = T - T^+`` acts as a real rotation on each pair (determinant, excited determinant) and
  annihilates the rest, so ``G^3 = -G`` and ``A = i G`` has eigenvalues ``{0, +-1}``
  (Kottmann, Anand, Aspuru-Guzik, arXiv:2011.05938 (2021)). The frequencies are ``{1, 2}``,
  ``R = 2``: ``x_1 = pi/4``, ``x_2 = 3 pi/4``, ``sin^2(pi/8) = (2 - sqrt 2)/4`` and
  ``sin^2(3 pi/8) = (2 + sqrt 2)/4``, so

      c_1 = 1 / (8 sin^2(pi/8)) = (2 + sqrt 2)/4,   c_2 = -1 / (8 sin^2(3pi/8)) = -(2 - sqrt 2)/4.

  Check: ``sin`` terms give ``2 c_1 sin(pi/4) + 2 c_2 sin(3pi/4) = 1`` and
  ``2 c_1 sin(pi/2) + 2 c_2 sin(3pi/2) = 2``, the derivatives of ``sin x`` and ``sin 2x``. In
  the ``exp(-i theta/2 G')`` convention of Kottmann et al. (``theta = 2 phi``) this is their
  four-term rule with shifts ``pi/2``, ``3pi/2`` and coefficients ``(sqrt 2 +- 1)/(4 sqrt 2)``.
  Four circuits per excitation instead of two per Pauli string (eight strings for a
  Jordan-Wigner double).

A mapped or tapered excitation is the product of commuting Pauli rotations with angles
``w_j phi`` (:mod:`eigensweep.vqe.fermionic`, :mod:`eigensweep.vqe.tapered`); on the qubits
it is the same operator (tapering restricts it to one symmetry sector, which keeps its
spectrum inside ``{0, +-1}``), so the four-term rule shifts all its rotations together by
``w_j s``.

Parameters and shift units
--------------------------
A :class:`ShiftUnit` is one gate variable ``x`` (a rotation angle or an excitation angle
``phi``) with ``x = coeff * theta[param] (+ const)``. A parameter shared by several gates (spin-
flip ties, k-UpCCGSD layers are separate, tapered strings of one excitation) gets the chain
rule ``dE/dtheta_p = sum_{units u of p} coeff_u f_u'(x_u)``. An ansatz offers
``shift_units()``, ``angles(theta)`` (one angle per gate) and ``state_at_angles(angles)``.
"""

from __future__ import annotations

import math
from collections.abc import Callable, Sequence
from dataclasses import dataclass

import numpy as np

__all__ = [
    "EXCITATION_RULE",
    "PAULI_RULE",
    "GradientEstimate",
    "ansatz_gradient",
    "curvature_factor",
    "ShiftRule",
    "ShiftUnit",
    "parameter_shift_gradient",
    "shift_rule",
]


@dataclass(frozen=True)
class ShiftRule:
    """``f'(x) = sum_mu coeffs[mu] [f(x + shifts[mu]) - f(x - shifts[mu])]``."""

    shifts: tuple[float, ...]
    coeffs: tuple[float, ...]

    @property
    def n_terms(self) -> int:
        """Shifted circuits per derivative."""
        return 2 * len(self.shifts)

    @property
    def max_frequency(self) -> int:
        """Largest frequency ``R`` the rule is exact for (frequencies ``1..R``)."""
        return len(self.shifts)


def shift_rule(n_frequencies: int) -> ShiftRule:
    """Exact rule for the frequencies ``1..R`` (Wierichs et al. 2022; module docstring)."""
    r = int(n_frequencies)
    if r < 1:
        raise ValueError("n_frequencies must be >= 1")
    shifts = tuple((2 * mu - 1) * math.pi / (2 * r) for mu in range(1, r + 1))
    coeffs = tuple(
        (-1) ** (mu - 1) / (4 * r * math.sin(s / 2) ** 2) for mu, s in enumerate(shifts, start=1)
    )
    return ShiftRule(shifts, coeffs)


#: Two-term rule of ``exp(-i a/2 P)`` (shift pi/2, coefficient 1/2).
PAULI_RULE = shift_rule(1)
#: Four-term rule of ``exp(phi (T - T^+))`` (shifts pi/4, 3pi/4; coefficients (2 +- sqrt 2)/4).
EXCITATION_RULE = shift_rule(2)


@dataclass(frozen=True)
class ShiftUnit:
    """One gate variable: shifting it by ``s`` adds ``weights * s`` to the angles of ``gates``.

    ``param`` is the ansatz parameter it depends on and ``coeff`` the chain-rule factor
    ``dx/dtheta[param]``.
    """

    gates: tuple[int, ...]
    weights: tuple[float, ...]
    param: int
    coeff: float
    rule: ShiftRule


@dataclass
class GradientEstimate:
    """A parameter-shift gradient: per-parameter value, variance and shots spent."""

    gradient: np.ndarray
    variance: np.ndarray
    shots: int
    n_circuits: int


EnergyFn = Callable[[np.ndarray, int], tuple[float, float, int]]
"""``(state, shots) -> (value, stderr, shots spent)``; ``shots = 0`` for an exact value."""


def parameter_shift_gradient(
    units: Sequence[ShiftUnit],
    angles: np.ndarray,
    n_params: int,
    state_at_angles: Callable[[np.ndarray], np.ndarray],
    energy: EnergyFn,
    shots: np.ndarray | int = 0,
    params: np.ndarray | None = None,
    *,
    states_at_angles: Callable[[np.ndarray], np.ndarray] | None = None,
) -> GradientEstimate:
    """Gradient of ``energy(state_at_angles(angles))`` with respect to the ansatz parameters.

    Args:
        units: the ansatz's :class:`ShiftUnit` list.
        angles: per-gate angles at the current parameters.
        n_params: number of ansatz parameters.
        state_at_angles: per-gate angles -> state (as ``energy`` reads it).
        energy: measures one state with the given shots (:data:`EnergyFn`).
        shots: shots of each shifted circuit, one number or one per parameter.
        params: only these parameters (the others are returned as 0 with variance 0).
        states_at_angles: optional batched form of ``state_at_angles`` (rows of angles ->
            rows of states, each equal to the one-at-a-time state); the shifted states are
            then prepared in chunks of :data:`BATCH_ENTRIES` amplitudes, and measured in the
            same order as without it (same estimates, same random draws).

    Returns:
        :class:`GradientEstimate`; ``variance`` is ``sum coeff^2 c_mu^2 stderr^2`` over the
        shifted circuits of each parameter (the estimates are independent).
    """
    angles = np.asarray(angles, dtype=float)
    per_param = np.broadcast_to(np.asarray(shots, dtype=np.int64), (n_params,))
    wanted = None if params is None else {int(p) for p in np.asarray(params).reshape(-1)}
    grad = np.zeros(n_params)
    var = np.zeros(n_params)
    # every shifted circuit in measurement order: (unit index, sign, coefficient, angles)
    circuits: list[tuple[int, float, float, np.ndarray]] = []
    for j, u in enumerate(units):
        if wanted is not None and u.param not in wanted:
            continue
        idx = np.asarray(u.gates, dtype=np.intp)
        w = np.asarray(u.weights, dtype=float)
        for s, c in zip(u.rule.shifts, u.rule.coeffs, strict=True):
            for sign in (1.0, -1.0):
                shifted = angles.copy()
                shifted[idx] += sign * s * w
                circuits.append((j, sign, c, shifted))
    states = _shifted_states(circuits, state_at_angles, states_at_angles)
    spent = 0
    d = dv = 0.0
    for i, (j, sign, c, _) in enumerate(circuits):
        u = units[j]
        value, stderr, used = energy(next(states), int(per_param[u.param]))
        d += sign * c * value
        dv += (c * stderr) ** 2
        spent += int(used)
        if i + 1 == len(circuits) or circuits[i + 1][0] != j:  # last circuit of unit u
            grad[u.param] += u.coeff * d
            var[u.param] += u.coeff**2 * dv
            d = dv = 0.0
    return GradientEstimate(grad, var, spent, len(circuits))


#: Largest number of amplitudes of one batch of shifted states (16 MB of complex128).
BATCH_ENTRIES = 1 << 20


def _shifted_states(circuits, state_at_angles, states_at_angles):
    """The states of the shifted circuits in order, batched when ``states_at_angles`` is given
    (prepared chunk by chunk, so a gradient stopped by the shot budget wastes at most one)."""
    if states_at_angles is None or not circuits:
        for *_, shifted in circuits:
            yield state_at_angles(shifted)
        return
    first = states_at_angles(circuits[0][3][None, :])
    yield first[0]
    chunk = max(1, BATCH_ENTRIES // max(first.shape[-1], 1))
    for lo in range(1, len(circuits), chunk):
        batch = np.array([row[3] for row in circuits[lo : lo + chunk]])
        yield from states_at_angles(batch)


def curvature_factor(units: Sequence[ShiftUnit], n_params: int) -> float:
    """``max_p (sum_{units u of p} |coeff_u| R_u)^2``: a second derivative along one parameter
    is at most this times the spread of the measured operator (each unit contributes
    frequencies up to ``R_u`` in its variable, scaled by ``coeff_u``)."""
    per = np.zeros(max(int(n_params), 1))
    for u in units:
        per[u.param] += abs(u.coeff) * u.rule.max_frequency
    return float(np.max(per) ** 2) if per.size else 1.0


def ansatz_gradient(
    ansatz, theta: np.ndarray, energy: EnergyFn | None = None, shots: np.ndarray | int = 0
) -> GradientEstimate:
    """Parameter-shift gradient of an ansatz at ``theta``; ``energy`` defaults to the exact
    expectation of the ansatz's own state (``ansatz.state_energy``)."""
    if energy is None:

        def energy(psi: np.ndarray, _shots: int) -> tuple[float, float, int]:
            return float(ansatz.state_energy(psi)), 0.0, 0

    return parameter_shift_gradient(
        ansatz.shift_units(),
        ansatz.angles(theta),
        ansatz.n_params,
        ansatz.state_at_angles,
        energy,
        shots,
    )
