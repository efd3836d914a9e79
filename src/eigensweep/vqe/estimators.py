"""Energy estimators: exact expectation, finite-shot sampling, and a simple noise model.

``exact``
    ``<psi|H|psi>`` from the state (determinant space or statevector).
``shots``
    The Hamiltonian's non-identity terms are split into qubit-wise commuting (QWC) groups
    (sorted insertion, :func:`eigensweep.qubit.grouping.qwc_groups`). The ``shots`` of one evaluation are
    allocated to groups in proportion to the group weight ``sum_t |c_t|`` (largest remainder,
    at least 2 shots per group so every group has a variance estimate). For each group the
    statevector is rotated to the group's measurement basis (``h`` for X, ``sdg`` then ``h``
    for Y), bitstrings are drawn from the exact outcome distribution with a multinomial draw
    of a seeded ``numpy.random.Generator``, and each shot gives ``y = sum_t c_t (-1)^parity``.
    The estimate is the sum of group means (plus the identity coefficient); its standard error
    is ``sqrt(sum_g s_g^2 / N_g)`` with ``s_g^2`` the sample variance of ``y`` in group ``g``.
``noisy``
    As ``shots`` plus (i) depolarizing noise approximated by a *global* depolarizing channel:
    every CNOT of the compiled circuit contributes a depolarizing probability ``depolarizing``
    and the prepared state is replaced by ``f rho + (1 - f) I/2^n`` with
    ``f = (1 - depolarizing)^n_cnot`` (an approximation: real gate noise is local and
    state-dependent), and (ii) independent readout bit flips, ``p01`` = P(read 1 | 0) and
    ``p10`` = P(read 0 | 1) (both default to ``readout_error``), applied to the outcome
    distribution before sampling. No error mitigation is applied.
"""

from __future__ import annotations

import math
from dataclasses import dataclass
from typing import Any

import numpy as np

from ..errors import ConfigError
from ..qubit.grouping import qwc_groups
from ..qubit.pauli import PauliSum, bits_to_mask
from ..qubit.statevector import GATE_MATRICES, apply_matrix_1q
from ..qubit.statevector import expectation as sv_expectation
from .methods import ESTIMATOR_DEFAULTS, validate_estimator

__all__ = [
    "ESTIMATOR_DEFAULTS",
    "Estimate",
    "Estimator",
    "MeasurementPlan",
    "NoisyEstimator",
    "ShotEstimator",
    "make_estimator",
    "validate_estimator",
]


@dataclass
class Estimate:
    """One energy estimate: ``value`` (hartree), its standard error and the shots spent."""

    value: float
    stderr: float
    shots: int


_H = GATE_MATRICES["h"]
_HSDG = GATE_MATRICES["h"] @ GATE_MATRICES["sdg"]  # sdg, then h


class MeasurementPlan:
    """QWC groups of a Hamiltonian with their measurement bases and shot weights."""

    def __init__(self, ham: PauliSum) -> None:
        self.ham = ham
        self.n_qubits = ham.n_qubits
        self.constant = ham.identity_coeff
        self.groups = qwc_groups(ham)
        letters = ham.x.astype(np.int8) + 2 * ham.z.astype(np.int8)
        self.bases = []
        self.zmasks = []
        self.coeffs = []
        for g in self.groups:
            basis = np.zeros(self.n_qubits, dtype=np.int8)
            for t in g:
                np.copyto(basis, letters[t], where=letters[t] != 0)
            self.bases.append(basis)
            # after the basis change each term is Z on its support
            self.zmasks.append(bits_to_mask(letters[g] != 0))
            self.coeffs.append(ham.coeffs[g])
        self.weights = np.array([np.abs(c).sum() for c in self.coeffs])

    @property
    def n_groups(self) -> int:
        return len(self.groups)

    def allocate(self, shots: int) -> np.ndarray:
        """Shots per group, proportional to weight (largest remainder), at least 2 each."""
        if self.n_groups == 0:
            return np.zeros(0, dtype=np.int64)
        share = shots * self.weights / self.weights.sum()
        base = np.floor(share).astype(np.int64)
        rest = shots - int(base.sum())
        if rest > 0:
            order = np.argsort(-(share - base), kind="stable")
            base[order[:rest]] += 1
        return np.maximum(base, 2)

    def probabilities(self, psi: np.ndarray, g: int) -> np.ndarray:
        """Outcome distribution of group ``g`` measured on ``psi``."""
        n = self.n_qubits
        phi = psi
        for q in range(n):
            b = self.bases[g][q]
            if b == 1:
                phi = apply_matrix_1q(phi, q, _H)
            elif b == 3:
                phi = apply_matrix_1q(phi, q, _HSDG)
        p = np.abs(phi) ** 2
        return p / p.sum()

    def group_values(self, g: int, outcomes: np.ndarray) -> np.ndarray:
        """``y(b) = sum_t c_t (-1)^{popcount(b & zmask_t)}`` for the given outcomes ``b``."""
        par = np.bitwise_count(outcomes[None, :] & self.zmasks[g][:, None]) & 1
        return self.coeffs[g] @ (1.0 - 2.0 * par)


class Estimator:
    """Base: ``estimate(psi) -> Estimate`` for a qubit statevector ``psi``."""

    name = "exact"
    shots = 0

    def __init__(self, ham: PauliSum | None = None) -> None:
        self.ham = ham

    def estimate(self, psi: np.ndarray) -> Estimate:
        if self.ham is None:
            raise RuntimeError("exact estimator has no qubit Hamiltonian")
        return Estimate(sv_expectation(psi, self.ham), 0.0, 0)


class ShotEstimator(Estimator):
    """Finite-shot estimate with QWC grouping (module docstring)."""

    name = "shots"

    def __init__(self, ham: PauliSum, shots: int, rng: np.random.Generator) -> None:
        super().__init__(ham)
        self.plan = MeasurementPlan(ham)
        self.shots = int(shots)
        self.rng = rng

    def _distribution(self, psi: np.ndarray, g: int) -> np.ndarray:
        return self.plan.probabilities(psi, g)

    def estimate(self, psi: np.ndarray, shots: int | None = None) -> Estimate:
        alloc = self.plan.allocate(self.shots if shots is None else int(shots))
        value = self.plan.constant
        var = 0.0
        for g in range(self.plan.n_groups):
            p = self._distribution(psi, g)
            counts = self.rng.multinomial(int(alloc[g]), p)
            hit = np.flatnonzero(counts)
            y = self.plan.group_values(g, hit.astype(np.int64))
            w = counts[hit].astype(float)
            n_g = float(alloc[g])
            mean = float(w @ y) / n_g
            s2 = float(w @ (y - mean) ** 2) / (n_g - 1.0)
            value += mean
            var += s2 / n_g
        return Estimate(float(value), math.sqrt(var), int(alloc.sum()))


class NoisyEstimator(ShotEstimator):
    """Shots with global depolarizing and readout bit flips (module docstring)."""

    name = "noisy"

    def __init__(
        self,
        ham: PauliSum,
        shots: int,
        rng: np.random.Generator,
        *,
        depolarizing: float,
        p01: float,
        p10: float,
        n_cnot: int,
    ) -> None:
        super().__init__(ham, shots, rng)
        self.fidelity = (1.0 - depolarizing) ** int(n_cnot)
        self.p01 = float(p01)
        self.p10 = float(p10)

    def _distribution(self, psi: np.ndarray, g: int) -> np.ndarray:
        p = super()._distribution(psi, g)
        n = self.plan.n_qubits
        p = self.fidelity * p + (1.0 - self.fidelity) / p.size
        if self.p01 or self.p10:
            conf = np.array([[1.0 - self.p01, self.p10], [self.p01, 1.0 - self.p10]])
            for q in range(n):
                p = apply_matrix_1q(p, q, conf)
        p = np.clip(p, 0.0, None)
        return p / p.sum()


def make_estimator(
    cfg: dict[str, Any], ham: PauliSum | None, *, seed: int, n_cnot: int = 0
) -> Estimator:
    """Build the estimator of a validated config (``seed`` used if the config has none)."""
    name = cfg["name"]
    if name == "exact":
        return Estimator(ham)
    if ham is None:
        raise ConfigError(f"estimator.name: {name!r} needs a qubit Hamiltonian")
    s = cfg.get("seed")
    rng = np.random.default_rng(seed if s is None else s)
    if name == "shots":
        return ShotEstimator(ham, cfg["shots"], rng)
    p01 = cfg["p01"] if cfg["p01"] is not None else cfg["readout_error"]
    p10 = cfg["p10"] if cfg["p10"] is not None else cfg["readout_error"]
    return NoisyEstimator(
        ham,
        cfg["shots"],
        rng,
        depolarizing=cfg["depolarizing"],
        p01=p01,
        p10=p10,
        n_cnot=n_cnot,
    )
