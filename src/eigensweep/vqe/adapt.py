"""ADAPT-VQE with a fermionic singles-and-doubles pool.

Grimsley, Economou, Barnes, Mayhall, "An adaptive variational algorithm for exact molecular
simulations on a quantum computer", Nat. Commun. 10, 3007 (2019).

Pools (spin-conserving excitations ``G = T - T^dagger``):

``singles_doubles``
    occupied -> virtual singles and doubles of the HF determinant (the UCCSD operators).
``qubit``
    qubit-ADAPT (Tang et al., PRX Quantum 2, 020310 (2021)): the distinct Pauli strings of
    the Jordan-Wigner-mapped ``singles_doubles`` generators with their Z letters removed
    (each has an odd number of Y letters); each selected string ``P`` becomes the rotation
    ``exp(-i theta/2 P)`` on the JW statevector, whose gradient at 0 is
    ``Im <H psi|P|psi>``. These rotations do not conserve the particle number in general;
    the simulation is therefore done on the full qubit statevector.
``generalised_singles_doubles``
    generalized singles ``a^+_p a_q`` (``p > q``, same spin) and generalized doubles
    ``a^+_p a^+_q a_s a_r`` on four distinct spin orbitals with ``p > q``, ``r > s``,
    ``(p, q) > (r, s)`` and equal alpha/beta counts on both sides.

With a tapering (Bravyi, Gambetta, Mezzacapo, Temme, arXiv:1701.08213) the fermionic pools run
on the tapered statevector: every pool operator is carried through the tapering
(:func:`eigensweep.vqe.tapered.taper_excitation`), symmetry-forbidden operators are removed from
the pool (their gradient vanishes identically in the reference's sector, so ADAPT could never
select them), and the gradient of appending operator ``k`` with tapered rotations
``exp(-i w_j theta/2 P_j)`` is ``sum_j w_j Im <H psi|P_j|psi>``. The selected sequence is that of
the determinant-space run up to round-off in ties.

Each iteration computes the energy gradient of appending every pool operator at angle 0,
``dE/dtheta = 2 <H psi|G|psi>``, stops if its 2-norm is below ``gradient_tolerance`` (or
``max_operators`` operators are in use), otherwise appends the operator of largest
``|gradient|`` (repeats allowed) with a zero parameter and re-optimizes all parameters,
warm-started from the previous ones. Gradients are exact (determinant space, adjoint method).
"""

from __future__ import annotations

from collections.abc import Callable
from dataclasses import dataclass, field
from typing import TYPE_CHECKING

import numpy as np

from ..errors import ConfigError
from ..qubit import statevector as sv
from ..qubit.mapping import generator_paulis
from .detspace import DetSpace, FermionTerm
from .fermionic import Excitation, FermionicAnsatz, sd_excitation_terms
from .methods import POOLS
from .optimizers import minimize
from .pauli_rotation import PauliGate, PauliRotationAnsatz
from .tapered import TaperedFermionicAnsatz, TaperedString, taper_excitation

if TYPE_CHECKING:
    from ..qubit.pauli import PauliExpansion
    from ..qubit.taper import SectorReduction

__all__ = [
    "POOLS",
    "AdaptAnsatz",
    "AdaptResult",
    "QubitAdaptAnsatz",
    "TaperedAdaptAnsatz",
    "pool_excitations",
    "z_stripped_generator_strings",
    "run_adapt",
]


def pool_excitations(pool: str, norb: int, nelec: tuple[int, int]) -> list[FermionTerm]:
    """Excitation operators ``T`` of a pool (see module docstring)."""
    if pool == "singles_doubles":
        doubles, singles = sd_excitation_terms(norb, nelec)
        return singles + doubles
    if pool == "generalised_singles_doubles":
        n = 2 * norb
        terms: list[FermionTerm] = []
        for p in range(n):
            for q in range(p):
                if p % 2 == q % 2:
                    terms.append(((p, 1), (q, 0)))
        pairs = [(p, q) for p in range(n) for q in range(p)]
        for i, (p, q) in enumerate(pairs):
            for r, s in pairs[:i]:
                if len({p, q, r, s}) < 4:
                    continue
                if (p % 2) + (q % 2) != (r % 2) + (s % 2):
                    continue
                terms.append(((p, 1), (q, 1), (s, 0), (r, 0)))
        return terms
    raise ConfigError(f"ansatz.pool: unknown pool {pool!r}; allowed: {', '.join(POOLS)}")


def z_stripped_generator_strings(
    norb: int, nelec: tuple[int, int]
) -> list[tuple[np.ndarray, np.ndarray]]:
    """Distinct Z-stripped Pauli strings ``(x, z)`` of the JW ``singles_doubles`` generators."""
    n = 2 * norb
    doubles, singles = sd_excitation_terms(norb, nelec)
    seen: dict[bytes, tuple[np.ndarray, np.ndarray]] = {}
    for term in singles + doubles:
        for x, _z, _c in generator_paulis(term, "jordan_wigner", n):
            z = _z & x  # drop Z letters, keep Y (x and z set)
            key = np.packbits(np.concatenate([x, z])).tobytes()
            if key not in seen:
                seen[key] = (x.copy(), z.copy())
    return list(seen.values())


class QubitAdaptAnsatz(PauliRotationAnsatz):
    """The Pauli rotations selected by qubit-ADAPT (one parameter each)."""

    name = "adapt"

    def __init__(
        self, hamiltonian: PauliExpansion, reference: np.ndarray, strings: list, pool: str = "qubit"
    ) -> None:
        self.pool = pool
        gates = [PauliGate(x, z, k) for k, (x, z) in enumerate(strings)]
        super().__init__(hamiltonian, reference, gates, len(gates))

    def meta(self) -> dict:
        out = super().meta()
        out["pool"] = self.pool
        return out


class AdaptAnsatz(FermionicAnsatz):
    """The operator sequence selected by ADAPT-VQE (one parameter per selected operator)."""

    name = "adapt"

    def __init__(self, space: DetSpace, terms: list[FermionTerm], pool: str = "") -> None:
        self.pool = pool
        super().__init__(space, [Excitation(t, k) for k, t in enumerate(terms)], len(terms))

    def meta(self) -> dict:
        out = super().meta()
        out["pool"] = self.pool
        return out


class TaperedAdaptAnsatz(TaperedFermionicAnsatz):
    """The operators selected by ADAPT-VQE as Pauli rotations on the tapered qubits."""

    def __init__(
        self,
        terms: list[FermionTerm],
        mapping: str,
        tapering: SectorReduction,
        *,
        pool: str,
        space: DetSpace,
        cache: dict[FermionTerm, list[TaperedString] | None] | None = None,
        pool_dropped: int = 0,
    ) -> None:
        self.pool = pool
        extra = {
            "pool": pool,
            "pool_operators_dropped": int(pool_dropped),
            "norb": space.norb,
            "nelec": list(space.nelec),
        }
        super().__init__(
            [Excitation(t, k) for k, t in enumerate(terms)],
            len(terms),
            mapping,
            tapering,
            name="adapt",
            extra_meta=extra,
            cache=cache,
        )


@dataclass
class AdaptResult:
    """Outcome of :func:`run_adapt`.

    ``history`` has one dict per ADAPT iteration: ``n_operators``, ``energy``,
    ``pool_gradient_norm``, ``selected`` (term or None), ``max_gradient``.
    ``trace`` concatenates the optimizer traces of all re-optimizations.
    """

    ansatz: AdaptAnsatz | QubitAdaptAnsatz | TaperedAdaptAnsatz
    params: np.ndarray
    energy: float
    converged: bool
    message: str
    n_iterations: int
    n_evaluations: int
    history: list[dict] = field(default_factory=list)
    trace: list[dict] = field(default_factory=list)


def run_adapt(
    space: DetSpace,
    *,
    pool: str = "singles_doubles",
    gradient_tolerance: float = 1e-3,
    max_operators: int = 50,
    optimizer: dict | None = None,
    seed: int = 0,
    progress: Callable[[int, float], None] | None = None,
    hamiltonian: PauliExpansion | None = None,
    reference: np.ndarray | None = None,
    tapering: SectorReduction | None = None,
    mapping: str = "jordan_wigner",
) -> AdaptResult:
    """Run ADAPT-VQE in determinant space, or on tapered qubits (module docstring).

    ``optimizer`` is ``{"name": method, **options}`` for the re-optimizations (default
    L-BFGS-B with the analytic gradient). The ``qubit`` pool also needs the JW
    ``hamiltonian`` and ``reference`` bits. A ``tapering`` with at least one generator (of the
    Hamiltonian under ``mapping``) runs a fermionic pool on the tapered statevector.
    """
    opt = dict(optimizer or {"name": "lbfgs"})
    method = opt.pop("name", "lbfgs")
    qubit = pool == "qubit"
    tapered = tapering is not None and tapering.generators.n_terms > 0
    if qubit:
        if tapered:
            raise ConfigError(
                "ansatz.pool: 'qubit' cannot run on a tapered Hamiltonian; use pool "
                "singles_doubles or generalised_singles_doubles, or methods.taper false"
            )
        if hamiltonian is None or reference is None:
            raise ValueError("the qubit pool needs the JW Hamiltonian and reference bits")
        strings = z_stripped_generator_strings(space.norb, space.nelec)
    elif tapered:
        assert tapering is not None
        cache: dict[FermionTerm, list[TaperedString] | None] = {}
        terms = []
        for t in pool_excitations(pool, space.norb, space.nelec):
            cache[t] = taper_excitation(t, mapping, tapering)
            if cache[t]:
                terms.append(t)
        tapered_pool = [cache[t] for t in terms]
        pool_dropped = len(cache) - len(terms)
        t_ham = tapering.hamiltonian
    else:
        terms = pool_excitations(pool, space.norb, space.nelec)
        pool_gates = [space.cached_gate(t) for t in terms]
    selected: list = []
    params = np.zeros(0)
    history: list[dict] = []
    trace: list[dict] = []
    n_iter = 0
    converged = False
    message = ""

    def build(sel: list):
        if qubit:
            return QubitAdaptAnsatz(hamiltonian, reference, sel)
        if tapered:
            return TaperedAdaptAnsatz(
                sel,
                mapping,
                tapering,
                pool=pool,
                space=space,
                cache=cache,
                pool_dropped=pool_dropped,
            )
        return AdaptAnsatz(space, sel, pool)

    ansatz = build(selected)
    energy = ansatz.energy(params)

    def objective(theta: np.ndarray) -> tuple[float, np.ndarray]:
        e, g = ansatz.energy_and_gradient(theta)
        if progress is not None:
            progress(len(trace) + len(local_trace), e)
        local_trace.append(e)
        return e, g

    while True:
        psi = ansatz.state(params)
        if qubit:
            lam = sv.apply_pauli_expansion(psi, hamiltonian)
            grads = np.array([np.vdot(lam, sv.apply_pauli(psi, x, z)).imag for x, z in strings])
        elif tapered:
            lam = sv.apply_pauli_expansion(psi, t_ham)
            grads = np.array(
                [
                    sum(w * np.vdot(lam, sv.apply_pauli(psi, x, z)).imag for x, z, w in op)
                    for op in tapered_pool
                ]
            )
        else:
            lam = space.apply_h(psi)
            grads = np.array([2.0 * space.generator_expectation(g, lam, psi) for g in pool_gates])
        norm = float(np.linalg.norm(grads))
        k = int(np.argmax(np.abs(grads))) if grads.size else -1
        entry = {
            "n_operators": len(selected),
            "energy": float(energy),
            "pool_gradient_norm": norm,
            "max_gradient": float(abs(grads[k])) if k >= 0 else 0.0,
            "selected": None,
        }
        history.append(entry)
        if norm < gradient_tolerance:
            converged = True
            message = f"pool gradient norm {norm:.3g} < gradient_tolerance {gradient_tolerance:g}"
            break
        if len(selected) >= max_operators:
            message = f"max_operators={max_operators} reached (pool gradient norm {norm:.3g})"
            break
        if qubit:
            x, z = strings[k]
            entry["selected"] = "".join(
                "IXZY"[int(a) + 2 * int(b)] for a, b in zip(x, z, strict=True)
            )
            selected.append(strings[k])
        else:
            entry["selected"] = [[int(o), int(a)] for o, a in terms[k]]
            selected.append(terms[k])
        ansatz = build(selected)
        x0 = np.concatenate([params, [0.0]])
        local_trace: list[float] = []
        res = minimize(objective, x0, method=method, options=opt, seed=seed, grad=True)
        for t in res.trace:
            trace.append({**t, "evaluation": len(trace)})
        n_iter += res.n_iterations
        params = np.asarray(res.x, dtype=float)
        energy = float(res.fun)
    return AdaptResult(
        ansatz=ansatz,
        params=params,
        energy=float(ansatz.energy(params)),
        converged=converged,
        message=message,
        n_iterations=n_iter,
        n_evaluations=len(trace),
        history=history,
        trace=trace,
    )
