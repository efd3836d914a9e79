"""The one noise simulator: local gate, relaxation and readout noise on circuits.

Used by the optimize stage's ``noisy`` estimator (:mod:`eigensweep.vqe.estimators`) and by the
synthetic device (:mod:`eigensweep.device.synthetic`), so an optimization under noise and a
device run of the same circuit see the same noise.

Noise model (:class:`NoiseModel`; the channels are those of Nielsen & Chuang, *Quantum
Computation and Quantum Information* (2000), chapter 8):

* **gate error** -- after every gate, the depolarizing channel on the gate's ``k`` qubits with
  the gate's error rate ``p``: ``rho -> (1 - p) rho + p/(4^k - 1) sum_{P != I} P rho P``
  (the Pauli-uniform form of N&C section 8.3.4; ``sum_{all P} P rho P = 2^k Tr_S(rho) (x) I_S``
  gives it in closed form).
* **relaxation** -- over every gate's duration on its qubits and over idle time on idle qubits,
  amplitude damping with ``gamma = 1 - exp(-t/T1)`` (N&C section 8.3.5, Kraus operators
  ``[[1, 0], [0, sqrt(1 - gamma)]]`` and ``[[0, sqrt(gamma)], [0, 0]]``) followed by pure
  dephasing (phase damping, N&C section 8.3.6) with ``1/T_phi = 1/T2 - 1/(2 T1)``: populations
  relax as ``P(1) -> P(1) exp(-t/T1)`` and coherences decay as ``exp(-t/T2)``.
  ``T2 <= 2 T1`` is required; ``T1 = inf`` switches amplitude damping off and ``T2 = inf``
  pure dephasing (then ``T2 = 2 T1``).
* **schedule** -- as soon as possible in continuous time: a gate starts when all its qubits are
  free (a two-qubit gate waits for the later of its qubits) and lasts its ``duration_ns``; a
  qubit idles between its gates and from its last gate to the end of the circuit (the end of
  its latest gate over all qubits), when every qubit is measured. With one duration per arity
  this is the layer schedule in which a layer lasts its longest gate, except that a short gate
  never waits for a long gate on other qubits. The schedule of a gate depends only on the gates
  before it, so circuits with a common prefix (the measurement circuits of one state, folded
  copies) share its simulation: :func:`simulate_distributions` sorts the circuits and reuses
  the state after the longest common prefix.
* **readout** -- each measured bit flips independently after the circuit, ``P(read 1 | 0) =
  readout_p01`` and ``P(read 0 | 1) = readout_p10`` per qubit (:func:`readout_distribution`),
  the uncorrelated model that per-qubit readout-error inversion corrects.

Simulation: up to :data:`MAX_DENSITY_QUBITS` qubits the density matrix is propagated exactly
(``4**n`` complex entries, 16 MiB at 10 qubits), stored as a vector of ``2n`` qubits (row index
in the high bits): a gate ``U rho U^dagger`` is ``U`` on qubit ``q`` and ``conj(U)`` on qubit
``n + q`` with the statevector kernels (:func:`eigensweep.qubit.statevector.apply_gate_density_`).
Above it, stochastic trajectories (quantum trajectories / Monte-Carlo wavefunctions; Dalibard,
Castin, Molmer, PRL 68, 580 (1992)): a batch of statevectors, each with its own sampled Kraus
operators (random Paulis for depolarizing and dephasing, a quantum jump or the no-jump operator
for amplitude damping); the distribution is the average over trajectories, unbiased with a
statistical error ``~ 1/sqrt(trajectories)``.

Conventions of :mod:`eigensweep.circuit`: qubit 0 is the most significant bit of an index.

Mapping of older config keys onto a :class:`NoiseModel` (:meth:`NoiseModel.from_probabilities`):
the ``noisy`` estimator's ``depolarizing`` is the error rate of every two-qubit gate (one-qubit
gates noiseless), its ``p01``/``p10`` (default ``readout_error``) the readout errors; the
synthetic device's ``depolarizing_1q``/``depolarizing_2q`` are the error rates of every one- and
two-qubit gate and ``readout_error = [p01, p10]`` its readout errors. Neither has durations or
T1/T2, so those models have no relaxation. Device targets give their calibration data in the
plain layout of :meth:`NoiseModel.from_mapping`.
"""

from __future__ import annotations

import math
from collections.abc import Mapping, Sequence
from dataclasses import dataclass

import numpy as np

from ..circuit import TWO_QUBIT, Circuit, Gate
from .statevector import GATE_MATRICES, apply_gate_batch, apply_gate_density_, apply_matrix_1q

__all__ = [
    "MAX_DENSITY_QUBITS",
    "GateNoise",
    "NoiseModel",
    "depolarizing_channel_",
    "readout_distribution",
    "relaxation_channel_",
    "simulate_distributions",
]

#: Largest register simulated with a density matrix; trajectories above.
MAX_DENSITY_QUBITS = 10
#: Gate names read as two-qubit gates in a noise mapping (all others act on one qubit).
TWO_QUBIT_NAMES = frozenset(TWO_QUBIT | {"cy", "ecr", "swap", "iswap", "ryy", "rzz"})

_PAULIS = (None, GATE_MATRICES["x"], GATE_MATRICES["y"], GATE_MATRICES["z"])


@dataclass(frozen=True)
class GateNoise:
    """Depolarizing ``error`` (probability ``p`` of the module docstring) and ``duration_ns``."""

    error: float = 0.0
    duration_ns: float = 0.0


PerQubit = float | tuple[float, ...]


def _per_qubit_value(value, what: str, low: float, high: float) -> PerQubit:
    vals = [value] if np.isscalar(value) else list(value)
    out = []
    for v in vals:
        if isinstance(v, bool) or not isinstance(v, int | float | np.integer | np.floating):
            raise ValueError(f"{what}: expected a number or a list of numbers, got {v!r}")
        v = float(v)
        if not low <= v <= high:
            raise ValueError(f"{what}: {v} is outside [{low}, {high}]")
        out.append(v)
    if not out:
        raise ValueError(f"{what}: empty list")
    return out[0] if np.isscalar(value) else tuple(out)


def _broadcast(value: PerQubit, n: int, what: str) -> np.ndarray:
    arr = np.asarray(value, dtype=float).reshape(-1)
    if arr.size == 1:
        return np.full(n, float(arr[0]))
    if arr.size != n:
        raise ValueError(f"{what}: has {arr.size} values per qubit, the circuit {n} qubits")
    return arr


@dataclass(frozen=True)
class NoiseModel:
    """Local noise of a device (module docstring).

    Attributes:
        gates: ``((name, GateNoise), ...)`` per gate name.
        default_1q, default_2q: noise of one-/two-qubit gates not listed in ``gates``
            (``None``: the listed gate of that arity with the largest error, else none).
        t1_us, t2_us: relaxation and coherence times (microseconds; scalar or one per qubit;
            ``t1_us = inf``: no amplitude damping; ``t2_us = inf``: no pure dephasing).
        readout_p01, readout_p10: ``P(read 1 | 0)`` and ``P(read 0 | 1)`` (scalar or per qubit).
    """

    gates: tuple[tuple[str, GateNoise], ...] = ()
    default_1q: GateNoise | None = None
    default_2q: GateNoise | None = None
    t1_us: PerQubit = math.inf
    t2_us: PerQubit = math.inf
    readout_p01: PerQubit = 0.0
    readout_p10: PerQubit = 0.0

    def __post_init__(self) -> None:
        for name, g in self.gates:
            if not 0.0 <= g.error <= 1.0:
                raise ValueError(f"gates.{name}.error: {g.error} is outside [0, 1]")
            if not 0.0 <= g.duration_ns < math.inf:
                raise ValueError(f"gates.{name}.duration_ns: {g.duration_ns} must be >= 0")
        for key in ("t1_us", "t2_us"):
            object.__setattr__(
                self, key, _per_qubit_value(getattr(self, key), key, 1e-12, math.inf)
            )
        for key in ("readout_p01", "readout_p10"):
            object.__setattr__(self, key, _per_qubit_value(getattr(self, key), key, 0.0, 0.5))
        t1 = np.asarray(self.t1_us, dtype=float)
        t2 = np.asarray(self.t2_us, dtype=float)
        if t1.size > 1 and t2.size > 1 and t1.size != t2.size:
            raise ValueError("t1_us, t2_us: lists of different lengths")
        if np.any(np.isfinite(t2) & (t2 > 2.0 * t1 * (1 + 1e-12))):
            raise ValueError("t2_us: T2 must not exceed 2 T1 (1/T_phi = 1/T2 - 1/(2 T1) >= 0)")

    @classmethod
    def from_mapping(cls, d: Mapping) -> NoiseModel:
        """From the plain layout of a device target (other top-level keys are ignored)::

            {"gates": {"cx": {"error": 8e-3, "duration_ns": 300}, "sx": {...}, "rz": {...}},
             "qubits": {"t1_us": 100, "t2_us": [80, 90], "readout_p01": 0.01,
                        "readout_p10": 0.03}}

        A gate entry may leave out ``error`` or ``duration_ns`` (0); ``qubits`` may leave out
        any key (no relaxation, no readout error). Raises ``ValueError`` naming the key.
        """
        gates = []
        for name, entry in dict(d.get("gates") or {}).items():
            if not isinstance(entry, Mapping):
                raise ValueError(f"gates.{name}: expected a mapping with error and duration_ns")
            try:
                gates.append(
                    (
                        str(name),
                        GateNoise(
                            float(entry.get("error", 0.0)), float(entry.get("duration_ns", 0.0))
                        ),
                    )
                )
            except (TypeError, ValueError):
                raise ValueError(f"gates.{name}: error and duration_ns must be numbers") from None
        q = dict(d.get("qubits") or {})
        return cls(
            gates=tuple(sorted(gates)),
            t1_us=q.get("t1_us", math.inf),
            t2_us=q.get("t2_us", math.inf),
            readout_p01=q.get("readout_p01", 0.0),
            readout_p10=q.get("readout_p10", 0.0),
        )

    @classmethod
    def from_probabilities(
        cls,
        *,
        depolarizing_1q: float = 0.0,
        depolarizing_2q: float = 0.0,
        readout_p01: PerQubit = 0.0,
        readout_p10: PerQubit = 0.0,
    ) -> NoiseModel:
        """Per-arity depolarizing and readout only (the older config keys, module docstring)."""
        return cls(
            default_1q=GateNoise(float(depolarizing_1q)),
            default_2q=GateNoise(float(depolarizing_2q)),
            readout_p01=readout_p01,
            readout_p10=readout_p10,
        )

    def for_qubits(self, physical: Sequence[int]) -> NoiseModel:
        """The model of a sub-register: logical qubit ``k`` sits on ``physical[k]`` (a layout),
        so per-qubit lists are picked at those positions (scalars stay)."""
        picked = {}
        for key in ("t1_us", "t2_us", "readout_p01", "readout_p10"):
            value = getattr(self, key)
            picked[key] = value if np.isscalar(value) else tuple(value[int(q)] for q in physical)
        return NoiseModel(self.gates, self.default_1q, self.default_2q, **picked)

    def gate_noise(self, name: str, arity: int) -> GateNoise:
        """The noise of gate ``name`` acting on ``arity`` qubits."""
        for gname, g in self.gates:
            if gname == name:
                return g
        default = self.default_2q if arity == 2 else self.default_1q
        if default is not None:
            return default
        same = [g for gname, g in self.gates if (gname in TWO_QUBIT_NAMES) == (arity == 2)]
        return max(same, key=lambda g: (g.error, g.duration_ns)) if same else GateNoise()


def readout_distribution(probs: np.ndarray, p01, p10) -> np.ndarray:
    """Outcome distributions (last axis ``2**n``) after independent readout bit flips.

    ``p01`` = P(read 1 | 0), ``p10`` = P(read 0 | 1), scalars or one per qubit: each qubit's
    confusion matrix ``[[1 - p01, p10], [p01, 1 - p10]]`` acts on its bit of the outcome.
    """
    n = probs.shape[-1].bit_length() - 1
    a01, a10 = _broadcast(p01, n, "readout_p01"), _broadcast(p10, n, "readout_p10")
    p = np.asarray(probs, dtype=float)
    for q in range(n):
        if a01[q] or a10[q]:
            conf = np.array([[1.0 - a01[q], a10[q]], [a01[q], 1.0 - a10[q]]])
            p = apply_matrix_1q(p, q, conf)
    p = np.clip(p, 0.0, None)
    return p / p.sum(axis=-1, keepdims=True)


def depolarizing_channel_(
    rho: np.ndarray, n_qubits: int, qubits: Sequence[int], p: float
) -> np.ndarray:
    """Depolarizing channel on ``qubits`` of a density matrix (vector of ``4**n`` entries).

    ``(1 - p) rho + p/d sum_{P != I} P rho P = (1 - p - p/d) rho + (p 2^k/d) Tr_S(rho) (x) I_S``
    with ``d = 4^k - 1`` (Nielsen & Chuang (2000) section 8.3.4; the closed form from
    ``sum_{all P} P rho P = 2^k Tr_S(rho) (x) I_S``), **in place**; returns ``rho``.
    """
    n, k = int(n_qubits), len(qubits)
    d = 4**k - 1
    # rho as (blocks..., row bit of each qubit of S, ..., column bits ...) with S sorted
    qs = sorted(int(q) for q in qubits)
    cuts = qs + [n + q for q in qs]
    shape, last = [], -1
    for c in cuts:
        shape += [1 << (c - last - 1), 2]
        last = c
    shape.append(1 << (2 * n - 1 - last))
    v = rho.reshape(shape)
    diagonals = []
    for bits in np.ndindex(*(2,) * k):
        sel: list = [slice(None)] * len(shape)
        for j, b in enumerate(bits):
            sel[2 * j + 1] = b
            sel[2 * (k + j) + 1] = b
        diagonals.append(tuple(sel))
    tr = sum(v[sel] for sel in diagonals)  # Tr_S(rho), entries of the other qubits
    tr *= p * 2**k / d
    rho *= 1.0 - p - p / d
    for sel in diagonals:
        v[sel] += tr
    return rho


def relaxation_channel_(
    rho: np.ndarray, n_qubits: int, q: int, gamma: float, dephase: float
) -> np.ndarray:
    """Amplitude damping (``gamma``) then phase damping (coherence factor ``dephase``) on
    qubit ``q`` of a density matrix (vector of ``4**n`` entries), **in place**.

    Closed form of the Kraus sums (Nielsen & Chuang (2000) sections 8.3.5-8.3.6):
    ``rho_00 += gamma rho_11``, ``rho_11 *= 1 - gamma``, ``rho_01, rho_10 *=
    sqrt(1 - gamma) dephase``; over a time ``t``, ``gamma = 1 - exp(-t/T1)`` and
    ``dephase = exp(-t/T_phi)``, so coherences decay as ``exp(-t/T2)``.
    """
    n = int(n_qubits)
    v = rho.reshape(1 << q, 2, 1 << (n - 1 - q), 1 << q, 2, 1 << (n - 1 - q))
    keep = math.sqrt(1.0 - gamma) * dephase
    v[:, 0, :, :, 0, :] += gamma * v[:, 1, :, :, 1, :]
    v[:, 1, :, :, 1, :] *= 1.0 - gamma
    v[:, 0, :, :, 1, :] *= keep
    v[:, 1, :, :, 0, :] *= keep
    return rho


# ---------------------------------------------------------------- the schedule and its channels


@dataclass
class _Qubits:
    """Per-qubit relaxation constants (ns) of one register."""

    t1_ns: np.ndarray
    tphi_ns: np.ndarray  # inf: no pure dephasing

    @classmethod
    def of(cls, noise: NoiseModel, n: int) -> _Qubits:
        t1 = _broadcast(noise.t1_us, n, "t1_us") * 1e3
        t2 = _broadcast(noise.t2_us, n, "t2_us") * 1e3
        with np.errstate(divide="ignore"):
            rate = np.maximum(1.0 / t2 - 0.5 / t1, 0.0)
            tphi = np.where(rate > 0, 1.0 / np.where(rate > 0, rate, 1.0), math.inf)
        return cls(t1, tphi)

    def factors(self, q: int, t_ns: float) -> tuple[float, float]:
        """``(gamma, exp(-t/T_phi))``: damping probability and dephasing factor over ``t_ns``."""
        return -math.expm1(-t_ns / self.t1_ns[q]), math.exp(-t_ns / self.tphi_ns[q])


def _step_noise(noise: NoiseModel, gate: Gate) -> tuple[float, float]:
    g = noise.gate_noise(gate.name, len(gate.qubits))
    return float(g.error), float(g.duration_ns)


class _Backend:
    """What a simulation method does to its state (density matrix or trajectory batch)."""

    def __init__(self, n: int, noise: NoiseModel, qubits: _Qubits) -> None:
        self.n, self.noise, self.qubits = n, noise, qubits

    def relax(self, state, q: int, t_ns: float):
        if t_ns <= 0.0:
            return state
        gamma, dephase = self.qubits.factors(q, t_ns)
        if gamma == 0.0 and dephase == 1.0:
            return state
        return self._relax(state, q, gamma, dephase)


class _Density(_Backend):
    """Density matrix as a ``4**n`` vector (module docstring)."""

    _work: np.ndarray | None = None  # scratch vector of the in-place gate kernels

    def initial(self) -> np.ndarray:
        rho = np.zeros(1 << (2 * self.n), dtype=np.complex128)
        rho[0] = 1.0
        return rho

    def gate(self, rho: np.ndarray, gate: Gate) -> np.ndarray:
        if self._work is None:
            self._work = np.empty_like(rho)
        return apply_gate_density_(rho, gate, self.n, self._work)

    def depolarize(self, rho: np.ndarray, qubits: tuple[int, ...], p: float) -> np.ndarray:
        return depolarizing_channel_(rho, self.n, qubits, p)

    def _relax(self, rho: np.ndarray, q: int, gamma: float, dephase: float) -> np.ndarray:
        return relaxation_channel_(rho, self.n, q, gamma, dephase)

    def probabilities(self, rho: np.ndarray) -> np.ndarray:
        dim = 1 << self.n
        p = rho[:: dim + 1].real.copy()
        p = np.clip(p, 0.0, None)
        return p / p.sum()

    @staticmethod
    def copy(rho: np.ndarray) -> np.ndarray:
        return rho.copy()


class _Trajectories(_Backend):
    """A batch of statevectors with sampled Kraus operators (module docstring)."""

    def __init__(self, n, noise, qubits, batch: int, rng: np.random.Generator) -> None:
        super().__init__(n, noise, qubits)
        self.batch, self.rng = int(batch), rng

    def initial(self) -> np.ndarray:
        psi = np.zeros((self.batch, 1 << self.n), dtype=np.complex128)
        psi[:, 0] = 1.0
        return psi

    def gate(self, psi: np.ndarray, gate: Gate) -> np.ndarray:
        return apply_gate_batch(psi, gate)

    def depolarize(self, psi: np.ndarray, qubits: tuple[int, ...], p: float) -> np.ndarray:
        """A uniformly random non-identity Pauli on ``qubits`` with probability ``p``."""
        hit = np.flatnonzero(self.rng.random(self.batch) < p)
        if hit.size == 0:
            return psi
        k = len(qubits)
        which = self.rng.integers(1, 4**k, size=hit.size)  # base-4 digit per qubit
        sub = psi[hit]
        for j, q in enumerate(qubits):
            letter = (which // 4 ** (k - 1 - j)) % 4
            for code in (1, 2, 3):
                sel = np.flatnonzero(letter == code)
                if sel.size:
                    sub[sel] = apply_matrix_1q(sub[sel], q, _PAULIS[code])
        psi[hit] = sub
        return psi

    def _relax(self, psi: np.ndarray, q: int, gamma: float, dephase: float) -> np.ndarray:
        """A quantum jump ``|1> -> |0>`` with probability ``gamma P(1)``, otherwise the no-jump
        operator ``diag(1, sqrt(1 - gamma))`` (renormalised); then ``Z`` with probability
        ``(1 - exp(-t/T_phi))/2``, which is phase damping as a mixture of unitaries."""
        v = psi.reshape(self.batch, 1 << q, 2, -1)
        if gamma > 0.0:
            p1 = (np.abs(v[:, :, 1, :]) ** 2).sum(axis=(1, 2))
            jump = self.rng.random(self.batch) < gamma * p1
            j = np.flatnonzero(jump)
            if j.size:
                v[j, :, 0, :] = v[j, :, 1, :]
                v[j, :, 1, :] = 0.0
            s = np.flatnonzero(~jump)
            if s.size:
                v[s, :, 1, :] *= math.sqrt(1.0 - gamma)
            norm = np.sqrt((np.abs(psi) ** 2).sum(axis=1))
            psi /= norm[:, None]
        if dephase < 1.0:
            flip = np.flatnonzero(self.rng.random(self.batch) < 0.5 * (1.0 - dephase))
            if flip.size:
                v[flip, :, 1, :] *= -1.0
        return psi

    def probabilities(self, psi: np.ndarray) -> np.ndarray:
        p = (np.abs(psi) ** 2).mean(axis=0)
        return p / p.sum()

    @staticmethod
    def copy(psi: np.ndarray) -> np.ndarray:
        return psi.copy()


@dataclass
class _Position:
    """Simulation state after a gate prefix: the state and when each qubit is free (ns)."""

    state: np.ndarray
    free_ns: np.ndarray
    n_gates: int


def _advance(backend: _Backend, pos: _Position, gates: Sequence[Gate], stop: int) -> _Position:
    """Apply gates ``pos.n_gates .. stop-1`` with their noise (in place on ``pos``)."""
    state, free = pos.state, pos.free_ns
    for gate in gates[pos.n_gates : stop]:
        qs = gate.qubits
        p, dur = _step_noise(backend.noise, gate)
        start = max(free[q] for q in qs)
        for q in qs:  # idle until the gate starts
            state = backend.relax(state, q, start - free[q])
        state = backend.gate(state, gate)
        if p > 0.0:
            state = backend.depolarize(state, qs, p)
        for q in qs:
            state = backend.relax(state, q, dur)
            free[q] = start + dur
    pos.state, pos.n_gates = state, stop
    return pos


def _finish(backend: _Backend, pos: _Position) -> np.ndarray:
    """Idle every qubit until the end of the circuit, then the outcome distribution."""
    state, free = backend.copy(pos.state), pos.free_ns
    end = float(free.max(initial=0.0))
    for q in range(backend.n):
        state = backend.relax(state, q, end - free[q])
    return backend.probabilities(state)


def _gate_key(g: Gate) -> tuple:
    return (g.name, g.qubits, g.params)


def _common_prefix(a: list[tuple], b: list[tuple]) -> int:
    m = min(len(a), len(b))
    i = 0
    while i < m and a[i] == b[i]:
        i += 1
    return i


def _restart_points(shared: list[int], j: int, start: int) -> list[int]:
    """Prefix lengths of circuit ``j`` (in sorted order) at which a later circuit restarts:
    circuit ``k + 1`` restarts at ``shared[k]``, reached through circuit ``j`` when it is at
    most every ``shared[j..k]``, i.e. the running minima of ``shared[j:]`` above ``start``
    (returned in increasing order)."""
    points: list[int] = []
    low = None
    for m in shared[j:]:
        low = m if low is None else min(low, m)
        if low <= start:
            break
        if not points or low < points[-1]:
            points.append(low)
    return points[::-1]


def simulate_distributions(
    circuits: Sequence[Circuit],
    noise: NoiseModel,
    *,
    method: str = "auto",
    trajectories: int = 200,
    rng: np.random.Generator | None = None,
) -> np.ndarray:
    """Outcome distributions of circuits run from ``|0...0>`` under ``noise`` (no readout).

    Args:
        circuits: circuits on the same number of qubits.
        noise: the noise model (readout errors are applied separately, with
            :func:`readout_distribution`).
        method: ``density`` (exact), ``trajectories`` or ``auto`` (density matrix up to
            :data:`MAX_DENSITY_QUBITS` qubits).
        trajectories: batch size of the trajectory method.
        rng: random stream of the trajectory method (required for it).

    Returns:
        ``(len(circuits), 2**n)`` probabilities (character ``k`` of an outcome = qubit ``k``,
        qubit 0 the most significant bit of the index).

    Circuits are simulated in sorted gate order; each one starts from the state after its
    common prefix with the previous one, so a set of measurement circuits of one state
    costs one state preparation plus the basis changes.
    """
    circuits = list(circuits)
    if not circuits:
        return np.zeros((0, 1))
    n = circuits[0].n_qubits
    if any(c.n_qubits != n for c in circuits):
        raise ValueError("simulate_distributions: circuits act on different numbers of qubits")
    if method == "auto":
        method = "density" if n <= MAX_DENSITY_QUBITS else "trajectories"
    qubits = _Qubits.of(noise, n)
    if method == "density":
        backend: _Backend = _Density(n, noise, qubits)
    elif method == "trajectories":
        if rng is None:
            raise ValueError("simulate_distributions: the trajectory method needs an rng")
        if trajectories < 1:
            raise ValueError("trajectories must be >= 1")
        backend = _Trajectories(n, noise, qubits, trajectories, rng)
    else:
        raise ValueError(f"method: {method!r}; use auto, density or trajectories")
    keys = [[_gate_key(g) for g in c.gates] for c in circuits]
    order = sorted(range(len(circuits)), key=lambda i: keys[i])
    # shared[j]: common prefix of circuits order[j] and order[j + 1]
    shared = [_common_prefix(keys[a], keys[b]) for a, b in zip(order, order[1:], strict=False)]
    out = np.empty((len(circuits), 1 << n))
    stack: list[_Position] = [_Position(backend.initial(), np.zeros(n), 0)]
    for j, i in enumerate(order):
        gates = circuits[i].gates
        start = shared[j - 1] if j else 0
        while stack[-1].n_gates > start:
            stack.pop()
        top = stack[-1]
        pos = _Position(backend.copy(top.state), top.free_ns.copy(), top.n_gates)
        for stop in _restart_points(shared, j, pos.n_gates):
            pos = _advance(backend, pos, gates, stop)
            stack.append(_Position(backend.copy(pos.state), pos.free_ns.copy(), pos.n_gates))
        pos = _advance(backend, pos, gates, len(gates))
        out[i] = _finish(backend, pos)
    return out
