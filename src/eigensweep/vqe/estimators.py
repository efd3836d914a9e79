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
    As ``shots``, but the groups are measured on a noisy run of the state's *circuit* (the
    ansatz compiled at the current angles, as the export stage compiles it), with eigensweep's
    one noise simulator (:mod:`eigensweep.qubit.noise`, the same as the synthetic device's):
    each group's measurement circuit (:func:`eigensweep.device.compile.measurement_circuit`)
    runs with depolarizing after every gate, T1/T2 relaxation over gate and idle times and
    asymmetric readout flips; the estimate samples the resulting outcome distributions. The
    config keys map onto a :class:`~eigensweep.qubit.noise.NoiseModel`: ``depolarizing`` is the
    depolarizing error rate of every two-qubit gate (one-qubit gates noiseless, no durations,
    so no relaxation), ``p01`` = P(read 1 | 0) and ``p10`` = P(read 0 | 1) (both default to
    ``readout_error``). With ``target`` (a device target file) the noise is the target's
    (:meth:`~eigensweep.qubit.noise.NoiseModel.from_mapping`, the keys above are then unused)
    and the circuit is compiled for the target as the export stage compiles it (routing,
    native gates, :func:`eigensweep.device.compile.measurement_circuits_on_target`), so an
    optimization under a target's noise and the synthetic device's run of that target's export
    see the same circuits and noise. :func:`make_estimator` also takes a ``NoiseModel``. No
    error mitigation is applied.

Shot accounting: every estimator carries a :class:`ShotLedger` that adds up the shots of
each estimate by purpose (``energy``, ``gradient``, ``calibration``, ``selection`` of
restarts, ``final`` re-evaluation). With a budget (the optimizer option ``max_shots``) an
estimate whose shots (after allocation, :meth:`ShotEstimator.cost`) would take the total
past the budget is refused *before* sampling with :class:`ShotBudgetExhausted`, so the total
never exceeds the budget; the optimizers stop cleanly on it.
"""

from __future__ import annotations

import math
from dataclasses import dataclass
from typing import Any

import numpy as np

from ..circuit import Circuit
from ..errors import ConfigError
from ..qubit.grouping import qwc_groups
from ..qubit.noise import NoiseModel, readout_distribution, simulate_distributions
from ..qubit.pauli import PauliExpansion, bits_to_mask
from ..qubit.statevector import GATE_MATRICES, apply_matrix_1q
from ..qubit.statevector import expectation as sv_expectation
from .methods import ESTIMATOR_DEFAULTS, validate_estimator

__all__ = [
    "ESTIMATOR_DEFAULTS",
    "MeasuredEnergy",
    "Estimator",
    "MeasurementPlan",
    "NoisyEstimator",
    "ShotBudgetExhausted",
    "ShotEstimator",
    "ShotLedger",
    "make_estimator",
    "estimator_target",
    "noise_of_estimator",
    "validate_estimator",
]


@dataclass
class MeasuredEnergy:
    """One energy estimate: ``value`` (hartree), its standard error and the shots spent."""

    value: float
    stderr: float
    shots: int


class ShotBudgetExhausted(Exception):
    """An estimate would take the job's shots past its budget (nothing was sampled)."""


class ShotLedger:
    """Shots spent by purpose, with an optional budget (module docstring)."""

    def __init__(self, budget: int | None = None) -> None:
        self.budget = None if budget is None else int(budget)
        self.total = 0
        self.by_purpose: dict[str, int] = {}

    @property
    def remaining(self) -> float:
        return math.inf if self.budget is None else self.budget - self.total

    def charge(self, shots: int, purpose: str, *, reserved: bool = False) -> None:
        """Book ``shots``; raise :class:`ShotBudgetExhausted` first if they do not fit
        (``reserved``: shots set aside from the budget beforehand, never refused)."""
        shots = int(shots)
        if not reserved and shots > self.remaining:
            raise ShotBudgetExhausted(
                f"shot budget of {self.budget} reached ({self.total} spent, next estimate "
                f"needs {shots})"
            )
        self.total += shots
        self.by_purpose[purpose] = self.by_purpose.get(purpose, 0) + shots


#: Largest ``n_groups * 2**n`` for which the estimators batch all groups (about 64 MB of
#: float64 per table); above it they loop over groups.
TABLE_MAX_ENTRIES = 1 << 23

_H = GATE_MATRICES["h"]
_HSDG = GATE_MATRICES["h"] @ GATE_MATRICES["sdg"]  # sdg, then h


class MeasurementPlan:
    """QWC groups of a Hamiltonian with their measurement bases and shot weights."""

    def __init__(self, ham: PauliExpansion) -> None:
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
        self._bases_cache: np.ndarray | None = None
        self._table: np.ndarray | None = None
        self._tree: list[tuple[np.ndarray, np.ndarray, np.ndarray]] | None = None
        self._group_nodes = np.zeros(0, dtype=np.intp)

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

    def all_probabilities(self, psi: np.ndarray) -> np.ndarray:
        """Outcome distributions of every group, ``(n_groups, 2**n)`` (the same numbers as
        :meth:`probabilities`, bit for bit).

        The basis changes are shared along a prefix tree of the groups' bases (qubit 0
        first, ``I`` and ``Z`` alike): a state is rotated once per distinct prefix, not once
        per group, and each qubit's ``h`` / ``sdg h`` is one batched call over the prefixes.
        """
        cur = psi[None, :]
        for q, (parents, x_nodes, y_nodes) in enumerate(self._prefix_tree):
            nxt = cur[parents]
            for rows, mat in ((x_nodes, _H), (y_nodes, _HSDG)):
                if rows.size:
                    nxt[rows] = apply_matrix_1q(nxt[rows], q, mat)
            cur = nxt
        p = np.abs(cur[self._group_nodes]) ** 2
        return p / p.sum(axis=1, keepdims=True)

    @property
    def _prefix_tree(self) -> list[tuple[np.ndarray, np.ndarray, np.ndarray]]:
        """Per qubit ``q``: parent index of every distinct basis prefix of length ``q + 1``
        and the prefixes ending in X and in Y; ``_group_nodes`` maps groups to the leaves."""
        if self._tree is None:
            letters = np.where(self._bases_matrix % 2 == 1, self._bases_matrix, 0)
            tree = []
            node = np.zeros(self.n_groups, dtype=np.intp)  # each group's node at this level
            for q in range(self.n_qubits):
                keys = np.stack([node, letters[:, q]], axis=1)
                uniq, node = np.unique(keys, axis=0, return_inverse=True)
                node = node.reshape(-1)
                tree.append(
                    (
                        uniq[:, 0].astype(np.intp),
                        np.flatnonzero(uniq[:, 1] == 1),
                        np.flatnonzero(uniq[:, 1] == 3),
                    )
                )
            self._tree, self._group_nodes = tree, node
        return self._tree

    @property
    def _bases_matrix(self) -> np.ndarray:
        if self._bases_cache is None:
            self._bases_cache = (
                np.array(self.bases, dtype=np.int8).reshape(self.n_groups, self.n_qubits)
                if self.n_groups
                else np.zeros((0, self.n_qubits), dtype=np.int8)
            )
        return self._bases_cache

    def value_table(self) -> np.ndarray | None:
        """``y_g(b)`` for every group and outcome, ``(n_groups, 2**n)``; None above
        :data:`TABLE_MAX_ENTRIES` entries (then values are formed per sampled outcome)."""
        if self._table is None and self.n_groups * (1 << self.n_qubits) <= TABLE_MAX_ENTRIES:
            b = np.arange(1 << self.n_qubits, dtype=np.int64)
            self._table = np.array([self.group_values(g, b) for g in range(self.n_groups)])
            self._table = self._table.reshape(self.n_groups, 1 << self.n_qubits)
        return self._table

    def group_values(self, g: int, outcomes: np.ndarray) -> np.ndarray:
        """``y(b) = sum_t c_t (-1)^{popcount(b & zmask_t)}`` for the given outcomes ``b``."""
        par = np.bitwise_count(outcomes[None, :] & self.zmasks[g][:, None]) & 1
        return self.coeffs[g] @ (1.0 - 2.0 * par)


class Estimator:
    """Base: ``estimate(psi) -> MeasuredEnergy`` for a qubit statevector ``psi``."""

    name = "exact"
    shots = 0

    def __init__(self, ham: PauliExpansion | None = None) -> None:
        self.ham = ham
        self.ledger = ShotLedger()

    def cost(self, shots: int | None = None) -> int:
        """Shots an estimate with ``shots`` requested really uses (0 for exact)."""
        return 0

    def estimate(
        self,
        psi: np.ndarray,
        shots: int | None = None,
        purpose: str = "energy",
        *,
        reserved: bool = False,
    ) -> MeasuredEnergy:
        if self.ham is None:
            raise RuntimeError("exact estimator has no qubit Hamiltonian")
        return MeasuredEnergy(sv_expectation(psi, self.ham), 0.0, 0)


class ShotEstimator(Estimator):
    """Finite-shot estimate with QWC grouping (module docstring)."""

    name = "shots"

    def __init__(self, ham: PauliExpansion, shots: int, rng: np.random.Generator) -> None:
        super().__init__(ham)
        self.plan = MeasurementPlan(ham)
        self.shots = int(shots)
        self.rng = rng

    def _distribution(self, psi: np.ndarray, g: int) -> np.ndarray:
        return self.plan.probabilities(psi, g)

    def cost(self, shots: int | None = None) -> int:
        """Shots after allocation (at least 2 per group) for ``shots`` requested."""
        return int(self.plan.allocate(self.shots if shots is None else int(shots)).sum())

    def estimate(
        self,
        psi: np.ndarray,
        shots: int | None = None,
        purpose: str = "energy",
        *,
        reserved: bool = False,
    ) -> MeasuredEnergy:
        """Sample ``psi`` with ``shots`` (default the estimator's), booked under ``purpose``."""
        alloc = self.plan.allocate(self.shots if shots is None else int(shots))
        self.ledger.charge(int(alloc.sum()), purpose, reserved=reserved)
        table = self.plan.value_table()
        if table is not None and self.plan.n_groups:
            return self._estimate_batched(psi, alloc, table)
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
        return MeasuredEnergy(float(value), math.sqrt(var), int(alloc.sum()))

    def _distributions(self, psi: np.ndarray) -> np.ndarray:
        return self.plan.all_probabilities(psi)

    def _estimate_batched(
        self, psi: np.ndarray, alloc: np.ndarray, table: np.ndarray
    ) -> MeasuredEnergy:
        """All groups at once: the same draws as the per-group loop (one multinomial per
        group, in group order), the values read from :meth:`MeasurementPlan.value_table`."""
        p = self._distributions(psi)
        counts = self.rng.multinomial(alloc, p).astype(float)
        n_g = alloc.astype(float)
        means = np.einsum("gb,gb->g", counts, table) / n_g
        s2 = np.einsum("gb,gb->g", counts, (table - means[:, None]) ** 2) / (n_g - 1.0)
        value = self.plan.constant + float(means.sum())
        return MeasuredEnergy(value, math.sqrt(float((s2 / n_g).sum())), int(alloc.sum()))


class NoisyEstimator(ShotEstimator):
    """Shots of a circuit run on the noise simulator (module docstring).

    :meth:`estimate` takes the state's :class:`~eigensweep.circuit.Circuit` (not a
    statevector): local noise depends on the gates, not only on the state they prepare. With
    a device ``target`` (:class:`eigensweep.target.Target`) the circuit is first compiled for
    it as the export stage compiles it (routing, native gates; ``noise`` then holds the
    target's per-physical-qubit numbers, :meth:`NoiseModel.from_mapping` of the target).
    """

    name = "noisy"

    def __init__(
        self,
        ham: PauliExpansion,
        shots: int,
        rng: np.random.Generator,
        noise: NoiseModel,
        *,
        trajectories: int = 200,
        target=None,
    ) -> None:
        super().__init__(ham, shots, rng)
        self.noise = noise
        self.target = target
        self.trajectories = int(trajectories)
        self.labels = ["".join("IXZY"[b] for b in basis) for basis in self.plan.bases]

    def _circuits(self, circuit: Circuit, labels: list[str]):
        """(circuits in bit order, their noise model, logical bit positions or None)."""
        from ..device.compile import compile_for_target, measurement_circuit

        if self.target is None:
            return [measurement_circuit(circuit, lab) for lab in labels], self.noise, None
        from ..device.compile import measurement_circuits_on_target
        from ..device.manifest import bit_order_circuit

        compiled = compile_for_target(circuit, self.target)
        measured = compiled.measured_qubits
        physical = measurement_circuits_on_target(compiled, labels, self.target)
        circuits = [bit_order_circuit(c, measured) for c in physical]
        return circuits, self.noise.for_qubits(measured), compiled.logical_bit_positions()

    def _simulate(self, circuit: Circuit, groups) -> np.ndarray:
        """Noisy outcome distributions (readout included) of the groups' measurement circuits."""
        from ..device.manifest import logical_distributions

        if not isinstance(circuit, Circuit):
            raise TypeError(
                "the noisy estimator measures a circuit (eigensweep.circuit.Circuit), got "
                f"{type(circuit).__name__}"
            )
        circuits, noise, positions = self._circuits(circuit, [self.labels[g] for g in groups])
        p = simulate_distributions(circuits, noise, trajectories=self.trajectories, rng=self.rng)
        p = readout_distribution(p, noise.readout_p01, noise.readout_p10)
        return p if positions is None else logical_distributions(p, positions)

    def _distributions(self, psi) -> np.ndarray:
        return self._simulate(psi, range(self.plan.n_groups))

    def _distribution(self, psi, g: int) -> np.ndarray:
        return self._simulate(psi, [g])[0]


def estimator_target(cfg: dict[str, Any]):
    """The device target of a ``noisy`` estimator config, or ``None``.

    ``target`` is a target file's path (library use; read with
    :func:`eigensweep.target.load_target`) or, in a planned sweep, the file's canonical
    content (:meth:`eigensweep.target.Target.to_dict`, filled in by the planner so that the
    cache key follows what the target says).
    """
    from ..target import load_target, target_from_dict

    raw = cfg.get("target")
    if raw is None:
        return None
    if isinstance(raw, dict):
        return target_from_dict(raw, f"estimator.target ({raw.get('name')})")
    return load_target(raw)


def noise_of_estimator(cfg: dict[str, Any]) -> NoiseModel:
    """The :class:`NoiseModel` of a validated ``noisy`` estimator config (module docstring):
    the target's (:meth:`NoiseModel.from_mapping`) when ``target`` is set, else the keys."""
    target = estimator_target(cfg)
    if target is not None:
        return NoiseModel.from_mapping(target.to_dict())
    p01 = cfg["p01"] if cfg["p01"] is not None else cfg["readout_error"]
    p10 = cfg["p10"] if cfg["p10"] is not None else cfg["readout_error"]
    return NoiseModel.from_probabilities(
        depolarizing_2q=cfg["depolarizing"], readout_p01=p01, readout_p10=p10
    )


def make_estimator(
    cfg: dict[str, Any],
    ham: PauliExpansion | None,
    *,
    seed: int,
    noise: NoiseModel | None = None,
) -> Estimator:
    """Build the estimator of a validated config (``seed`` used if the config has none);
    ``noise`` replaces the ``noisy`` estimator's config keys (:func:`noise_of_estimator`)."""
    name = cfg["name"]
    if name == "exact":
        return Estimator(ham)
    if ham is None:
        raise ConfigError(f"estimator.name: {name!r} needs a qubit Hamiltonian")
    s = cfg.get("seed")
    rng = np.random.default_rng(seed if s is None else s)
    if name == "shots":
        return ShotEstimator(ham, cfg["shots"], rng)
    target = estimator_target(cfg)
    return NoisyEstimator(ham, cfg["shots"], rng, noise or noise_of_estimator(cfg), target=target)
