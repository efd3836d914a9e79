"""Measurement grouping and shot budgets.

- Qubit-wise commuting (QWC) groups by sorted insertion (Crawford et al., "Efficient quantum
  measurement of Pauli operators in the presence of finite sampling error", Quantum 5, 385
  (2021)): terms sorted by ``|c|`` descending, each put in the
  first group all of whose members it commutes with qubit by qubit. Members of a QWC group share
  one single-qubit measurement basis per qubit (:func:`measurement_basis`).
- Shot budgets for a target standard error ``eps`` of the energy estimate:

  * the 1-norm bound ``M = ceil((sum_{t != I} |c_t| / eps)^2)``, valid for any state (Wecker,
    Hastings, Troyer, arXiv:1507.08969);
  * the variance-optimal allocation over groups (minimise ``sum_g Var_g / M_g`` at fixed total,
    a Lagrange-multiplier argument also used by Crawford et al. 2021), ``M_g ~ sqrt(Var_g)``,
    giving ``M = (sum_g sqrt(Var_g))^2 / eps^2`` with ``Var_g = <H_g^2> - <H_g>^2`` computed
    exactly from a statevector. Since
    ``sqrt(Var_g) <= ||H_g psi|| <= sum_{t in g} |c_t|`` it never exceeds the 1-norm bound.
"""

from __future__ import annotations

import math

import numpy as np

from ..errors import ConfigError
from .pauli import PauliExpansion
from .statevector import apply_pauli_expansion

__all__ = ["qwc_groups", "measurement_basis", "shots_for_precision"]


def qwc_groups(ham: PauliExpansion) -> list[np.ndarray]:
    """Qubit-wise commuting groups by sorted insertion (Crawford et al., Quantum 5, 385 (2021)).

    Args:
        ham: the operator; identity terms are left out (they need no measurement).

    Returns:
        List of int64 arrays of term indices into ``ham``; groups in creation order, members in
        insertion order (largest ``|c|`` first; ``|c|`` equal to 1e-10 count as ties, broken
        by term index, so round-off in the integrals does not change the groups).
    """
    if not isinstance(ham, PauliExpansion):
        raise TypeError(f"qwc_groups accepts a PauliExpansion, got {type(ham).__name__}")
    candidates = np.flatnonzero(~ham.identity_mask)
    # |c| rounded to 1e-10 so that ties from exact symmetries (degenerate orbitals) are broken by
    # the canonical term order, not by floating-point noise in the integrals
    weight = np.round(np.abs(ham.coeffs[candidates]), 10)
    order = candidates[np.argsort(-weight, kind="stable")]
    n = ham.n_qubits
    cap = max(1, len(order))
    gx = np.zeros((cap, n), dtype=bool)
    gz = np.zeros((cap, n), dtype=bool)
    members: list[list[int]] = []
    for t in order:
        x, z = ham.x[t], ham.z[t]
        g_count = len(members)
        if g_count:
            sx, sz = gx[:g_count], gz[:g_count]
            # conflict: both act on a qubit with different letters
            both = (sx | sz) & (x | z)
            clash = (both & ((sx ^ x) | (sz ^ z))).any(axis=1)
            free = np.flatnonzero(~clash)
        else:
            free = np.zeros(0, dtype=np.int64)
        if free.size:
            g = int(free[0])
            members[g].append(int(t))
        else:
            g = g_count
            members.append([int(t)])
        gx[g] |= x
        gz[g] |= z
    return [np.array(m, dtype=np.int64) for m in members]


def measurement_basis(ham: PauliExpansion, group: np.ndarray) -> str:
    """Shared measurement basis of a QWC group as a letter string (``I`` = not measured).

    Args:
        ham: the operator.
        group: term indices of one qubit-wise commuting group.

    Returns:
        String of length ``n_qubits`` over ``I, X, Y, Z`` (character ``k`` = qubit ``k``).

    Raises:
        ValueError: the terms do not commute qubit-wise.
    """
    if not isinstance(ham, PauliExpansion):
        raise TypeError(f"measurement_basis accepts a PauliExpansion, got {type(ham).__name__}")
    idx = np.asarray(group, dtype=np.int64)
    x, z = ham.x[idx], ham.z[idx]
    support = x | z
    gx, gz = x.any(axis=0), z.any(axis=0)
    consistent = np.all(~support | ((x == gx) & (z == gz)), axis=0)
    if not consistent.all():
        raise ValueError("the terms of this group do not commute qubit-wise")
    return PauliExpansion(gx[None, :], gz[None, :], np.ones(1), ham.n_qubits).labels()[0]


def _ceil(value: float) -> int:
    """``ceil`` that ignores relative round-off of 1e-12 (0.4 + 0.2 must not cost a shot)."""
    return int(math.ceil(value * (1.0 - 1e-12)))


def shots_for_precision(
    ham: PauliExpansion,
    target_se: float = 1.6e-3,
    state: np.ndarray | None = None,
    groups: list[np.ndarray] | None = None,
) -> dict:
    """Shots needed for a standard error ``target_se`` (hartree) of the energy estimate.

    Args:
        ham: the Hamiltonian.
        target_se: wanted standard error ``eps`` (default 1.6 mHa, chemical accuracy).
        state: statevector at which group variances are evaluated; None skips that estimate.
        groups: QWC groups (default :func:`qwc_groups` of ``ham``).

    Returns:
        dict with ``shots_one_norm_bound`` (int, Wecker–Hastings–Troyer 1-norm bound),
        ``shots_variance`` (int or None, optimal allocation over groups),
        ``shots_per_group`` (int64 array or None, ``ceil`` of the optimal allocation),
        ``group_std`` (float array or None, ``sqrt(Var_g)``), ``n_groups`` (int),
        ``one_norm_nonidentity`` (float) and ``target_se``.
    """
    if not isinstance(ham, PauliExpansion):
        raise TypeError(f"shots_for_precision accepts a PauliExpansion, got {type(ham).__name__}")
    if isinstance(target_se, bool) or not isinstance(target_se, int | float | np.floating):
        raise TypeError(f"target_se must be a float, got {type(target_se).__name__}")
    if not target_se > 0 or not math.isfinite(target_se):
        raise ConfigError(f"target_se must be a positive number of hartree, got {target_se}")
    if groups is None:
        groups = qwc_groups(ham)
    norm1 = ham.one_norm_nonidentity
    result: dict = {
        "shots_one_norm_bound": _ceil((norm1 / target_se) ** 2),
        "shots_variance": None,
        "shots_per_group": None,
        "group_std": None,
        "n_groups": len(groups),
        "one_norm_nonidentity": norm1,
        "target_se": float(target_se),
    }
    if state is None:
        return result
    if not isinstance(state, np.ndarray):
        raise TypeError(f"state must be a numpy.ndarray or None, got {type(state).__name__}")
    psi = np.asarray(state, dtype=np.complex128)
    if psi.shape != (1 << ham.n_qubits,):
        raise ConfigError(f"state has shape {psi.shape}, expected ({1 << ham.n_qubits},)")
    norm = np.linalg.norm(psi)
    if not norm > 0:
        raise ConfigError("state is the zero vector")
    psi = psi / norm
    std = np.zeros(len(groups))
    for i, g in enumerate(groups):
        hg_psi = apply_pauli_expansion(psi, ham.subset(np.asarray(g, dtype=np.int64)))
        mean = np.vdot(psi, hg_psi).real
        var = max(0.0, float(np.vdot(hg_psi, hg_psi).real - mean**2))
        std[i] = math.sqrt(var)
    total = float(std.sum())
    result["group_std"] = std
    result["shots_variance"] = _ceil((total / target_se) ** 2)
    if total > 0:
        result["shots_per_group"] = np.ceil(result["shots_variance"] * std / total).astype(np.int64)
    else:
        result["shots_per_group"] = np.zeros(len(groups), dtype=np.int64)
    return result
