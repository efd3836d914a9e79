"""Excited states: VQD, weighted SSVQE and qEOM (exact estimator).

All three take a fermionic ansatz (UCCSD, k-UpCCGSD) and run in one of two frames, chosen as
the ground-state optimizer chooses (:mod:`eigensweep.vqe.engine`):

* :class:`DetFrame` - the determinant-space emulator (:mod:`eigensweep.vqe.detspace`), for
  untapered problems;
* :class:`QubitFrame` - the qubit statevector (:mod:`eigensweep.qubit.statevector`) of the
  mapping's encoding, Z2-tapered when the problem is (the ansatz is then
  :class:`~eigensweep.vqe.tapered.TaperedFermionicAnsatz`). Energies, the spin penalty,
  ``<S^2>`` and ``<N>`` use the qubit operators the hamiltonian and taper stages stored; every
  state stays in the reference's symmetry sector (tapering keeps one sector only, so the
  states found are the lowest ones *of that sector*, e.g. only the ``Sigma_g^+`` singlets of
  H2). Initial states, VQD gap-bound vectors and the qEOM manifold are built in determinant
  space (the one excitation builder) and carried into the frame by the encoding and the
  taper stage's Clifford (:meth:`QubitFrame.carry`); those outside the sector are dropped.
  qEOM's matrices are formed from the optimized statevector decoded to its CI vector
  (:meth:`QubitFrame.civec`) with the symmetry-allowed excitations only.

* ``vqd`` - variational quantum deflation (Higgott, Wang, Brierley, Quantum 3, 156 (2019)):
  state ``k`` minimises ``<H'> + sum_{j<k} beta_j |<psi_j|psi_k>|^2`` over the lower states
  found (the ground state is the ground-state optimize job's result, reused). Default weights:
  the paper's sufficient condition ``beta_j > E_k - E_j`` with ``E_k`` bounded from above by
  the Courant-Fischer principle: the largest eigenvalue of ``H'`` in the span of the ``k + 1``
  determinants of lowest diagonal energy is an upper bound of the ``k``-th eigenvalue
  (:func:`gap_bound_weights`), plus :data:`VQD_MARGIN_EH`.
* ``ssvqe`` - weighted subspace-search VQE (Nakanishi, Mitarai, Fujii, Phys. Rev. Research 1,
  033062 (2019)): one unitary ``U(theta)`` applied to ``n`` orthogonal initial states (the HF
  determinant and its lowest single excitations, spin-adapted for the requested spin),
  minimising ``sum_j w_j <phi_j|U^dagger H' U|phi_j>`` with ``w_0 > w_1 > ...`` (default
  ``w_j = n - j``); the states come out ordered by energy.
* ``qeom`` - quantum equation of motion on the optimized ground state (Ollitrault et al.,
  Phys. Rev. Research 2, 043140 (2020)): singles and doubles (spin-conserving, occupied to
  virtual of the HF reference) ``E_m``; matrices ``M = <[E_m^+, H, E_n]>``,
  ``Q = -<[E_m^+, E_n^+, H]>``, ``V = <[E_m^+, E_n]>``, ``W = -<[E_m^+, E_n^+]>`` with the
  symmetrised double commutator ``[A, B, C] = ([[A, B], C] + [A, [B, C]]) / 2``, and the
  generalized eigenproblem ``[[M, Q], [Q, M]] z = w [[V, W], [-W, -V]] z``; positive ``w``
  are excitation energies, ``O_n^+ = sum_m X_m E_m - Y_m E_m^+`` the excitation operator, and
  ``<0|mu|n> = <0|[mu, O_n^+]|0>`` the transition amplitude. qEOM is exact only when the
  ground state and the manifold are (two electrons with singles and doubles).

Spin: by default only states of the requested multiplicity are sought, by a penalty
``H' = H + mu (S^2 - S(S+1))`` with ``S = |M_s|`` (the lowest spin of the sector, so the
penalty operator is positive semi-definite and commutes with ``H``: eigenstates are unchanged,
other spins are raised by at least ``2 mu (S+1)``); reported energies are ``<H>`` without the
penalty. qEOM filters its roots by the ``<S^2>`` of ``O_n^+|0>`` instead. With
``spin: all`` no penalty is applied and no filter: all states of the S_z sector.
"""

from __future__ import annotations

import math
from collections.abc import Callable
from dataclasses import dataclass, field
from typing import TYPE_CHECKING, Any

import numpy as np
from pyscf import lib
from pyscf.fci import direct_spin1

from ..chem.exact import civec_spin_square
from .detspace import DetSpace
from .fermionic import sd_excitation_terms
from .optimizers import minimize

if TYPE_CHECKING:
    from ..qubit.pauli import PauliExpansion
    from ..qubit.taper import SectorReduction

__all__ = [
    "DetFrame",
    "ExcitedState",
    "QubitFrame",
    "VQD_MARGIN_EH",
    "gap_bound_weights",
    "qeom",
    "ssvqe",
    "ssvqe_initial_states",
    "vqd",
]

#: Added to the gap bound of the VQD weights (hartree).
VQD_MARGIN_EH = 0.1
#: qEOM roots with |imaginary part| or norm below this are dropped.
QEOM_TOL = 1e-8


@dataclass
class ExcitedState:
    """One state of an excited-state method (energies in hartree).

    Attributes:
        energy: ``<psi|H|psi>`` (total, core included); for qEOM ground + excitation energy.
        vector: flat CI vector (normalised; for qEOM ``O_n^+|0>`` normalised).
        spin_square: ``<S^2>`` of ``vector``.
        params: optimized parameters (VQD: this state's; SSVQE: the shared unitary's;
            qEOM: empty).
        evaluations: objective evaluations spent on this state.
        transition_dipole: qEOM's ``<0|mu|n>`` (e a0), else None (formed from vectors).
        n_electrons: ``<N>`` of ``vector``.
    """

    energy: float
    vector: np.ndarray
    spin_square: float
    params: np.ndarray = field(default_factory=lambda: np.zeros(0))
    evaluations: int = 0
    transition_dipole: np.ndarray | None = None
    n_electrons: float = math.nan


def _target_s2(space: DetSpace) -> float:
    s = abs(space.nelec[0] - space.nelec[1]) / 2
    return s * (s + 1)


class DetFrame:
    """States as flat real CI vectors of the ``(N_alpha, N_beta)`` sector of ``space``.

    ``apply_h`` is the electronic part; ``e_core`` is added to expectation values."""

    def __init__(self, space: DetSpace) -> None:
        self.space = space
        self.e_core = float(space.e_core)
        self.target_s2 = _target_s2(space)

    def apply_h(self, psi: np.ndarray) -> np.ndarray:
        return self.space.apply_h(psi)

    def apply_s2(self, psi: np.ndarray) -> np.ndarray:
        return self.space.apply_s2(psi)

    def inner(self, bra: np.ndarray, ket: np.ndarray) -> float:
        return float(bra @ ket)

    def energy(self, psi: np.ndarray) -> float:
        return self.space.energy(psi)

    def spin_square(self, psi: np.ndarray) -> float:
        return civec_spin_square(psi, self.space.norb, self.space.nelec)

    def n_electrons(self, psi: np.ndarray) -> float:
        return float(sum(self.space.nelec))

    def carry(self, civec: np.ndarray) -> np.ndarray | None:
        """A CI vector in this frame (itself)."""
        return civec

    def civec(self, psi: np.ndarray) -> np.ndarray:
        """The CI vector of a state of this frame (itself)."""
        return np.asarray(psi, float)

    def allows(self, term) -> bool:
        """Every excitation keeps a determinant-space state in the frame."""
        return True


class QubitFrame:
    """States as statevectors of ``mapping``'s encoding, tapered by ``tapering`` when it has
    generators (module docstring).

    Args:
        space: the determinant space of the integrals (the order of determinants by diagonal
            energy, and the CI vectors states are decoded to).
        hamiltonian: the qubit Hamiltonian of the frame (constant included: ``e_core`` is 0).
        spin_square, number: ``S^2`` and ``N`` in the frame (the taper stage's operators).
        mapping: the encoding.
        tapering: the taper stage's reduction (None or no generators: untapered).
    """

    def __init__(
        self,
        space: DetSpace,
        hamiltonian: PauliExpansion,
        spin_square: PauliExpansion,
        number: PauliExpansion,
        mapping: str,
        tapering: SectorReduction | None = None,
    ) -> None:
        for name, op in (("spin_square", spin_square), ("number", number)):
            if op.n_qubits != hamiltonian.n_qubits:
                raise ValueError(
                    f"{name} acts on {op.n_qubits} qubits, the Hamiltonian on "
                    f"{hamiltonian.n_qubits}"
                )
        self.space = space
        self.hamiltonian, self._s2, self._number = hamiltonian, spin_square, number
        self.mapping = mapping
        self.tapering = tapering if tapering is not None and tapering.generators.n_terms else None
        self.e_core = 0.0
        self.target_s2 = _target_s2(space)
        self._allowed: dict = {}

    def apply_h(self, psi: np.ndarray) -> np.ndarray:
        from ..qubit.statevector import apply_pauli_expansion

        return apply_pauli_expansion(psi, self.hamiltonian)

    def apply_s2(self, psi: np.ndarray) -> np.ndarray:
        from ..qubit.statevector import apply_pauli_expansion

        return apply_pauli_expansion(psi, self._s2)

    def inner(self, bra: np.ndarray, ket: np.ndarray) -> complex:
        return complex(np.vdot(bra, ket))

    def energy(self, psi: np.ndarray) -> float:
        from ..qubit.statevector import expectation

        return float(expectation(psi, self.hamiltonian))

    def spin_square(self, psi: np.ndarray) -> float:
        from ..qubit.statevector import expectation

        return float(expectation(psi, self._s2))

    def n_electrons(self, psi: np.ndarray) -> float:
        from ..qubit.statevector import expectation

        return float(expectation(psi, self._number))

    def carry(self, civec: np.ndarray) -> np.ndarray | None:
        """The statevector of a normalised CI vector: encoded, then tapered with the taper
        stage's Clifford and sector; None when the vector lies (partly) outside the sector."""
        from ..qubit.mapping import encode_state
        from .detspace import to_qubit_state

        space = self.space
        psi = encode_state(to_qubit_state(civec, space.norb, space.nelec), self.mapping)
        if self.tapering is None:
            return psi
        out = self.tapering.taper_state(psi)
        norm2 = float(np.vdot(out, out).real)
        return out if abs(norm2 - float(np.vdot(psi, psi).real)) < 1e-8 else None

    def civec(self, psi: np.ndarray) -> np.ndarray:
        """The real CI vector of a state of the frame (:func:`~eigensweep.vqe.reference.state_civec`)."""
        from .reference import state_civec

        space = self.space
        return state_civec(psi, space.norb, space.nelec, self.mapping, self.tapering)

    def allows(self, term) -> bool:
        """Whether the excitation ``term`` keeps states in the sector (commutes with every
        symmetry generator; :func:`~eigensweep.vqe.tapered.taper_excitation`)."""
        if self.tapering is None:
            return True
        if term not in self._allowed:
            from .tapered import taper_excitation

            self._allowed[term] = taper_excitation(term, self.mapping, self.tapering) is not None
        return self._allowed[term]


Frame = DetFrame | QubitFrame


def penalised(frame: Frame, mu: float) -> Callable[[np.ndarray], np.ndarray]:
    """``psi -> (H + mu (S^2 - S(S+1))) psi`` (``H`` as the frame applies it; module
    docstring)."""
    target = frame.target_s2
    if mu == 0.0:
        return frame.apply_h

    def apply(psi: np.ndarray) -> np.ndarray:
        return frame.apply_h(psi) + mu * (frame.apply_s2(psi) - target * psi)

    return apply


def gap_bound_weights(
    frame: Frame, lower_energies: list[float], mu: float, margin: float = VQD_MARGIN_EH
) -> list[float]:
    """VQD weights ``beta_j = U_k - E_j + margin`` for state ``k = len(lower_energies)``.

    ``U_k``: largest eigenvalue of the penalised Hamiltonian in the span of the ``k + 1``
    determinants of lowest ``<D|H|D>`` (of those inside the frame's symmetry sector): an upper
    bound of its ``k``-th eigenvalue (Courant-Fischer: the ``k``-th eigenvalue is at most the
    largest Rayleigh quotient of any ``k + 1``-dimensional subspace),
    so ``beta_j > E_k - E_j``, the sufficient condition of Higgott et al. (2019).
    """
    k = len(lower_energies)
    apply = penalised(frame, mu)
    space = frame.space
    vecs = []
    for i in np.argsort(space.hamiltonian_diagonal(), kind="stable"):
        v = frame.carry(_unit(space, int(i)))
        if v is not None:
            vecs.append(v)
        if len(vecs) == k + 1:
            break
    block = np.array([[frame.inner(a, apply(b)) for b in vecs] for a in vecs])
    upper = float(np.linalg.eigvalsh(0.5 * (block + block.conj().T))[-1]) + frame.e_core
    return [max(upper - e, 0.0) + margin for e in lower_energies]


def _unit(space: DetSpace, i: int) -> np.ndarray:
    v = np.zeros(space.dim)
    v[i] = 1.0
    return v


def _optimize(
    value_grad: Callable[[np.ndarray], tuple[float, np.ndarray]],
    x0: np.ndarray,
    optimizer: dict,
    seed: int,
):
    """The gradient optimizer from ``x0`` plus the optimizer's ``restarts`` extra starts
    ``x0 + restart_scale * N(0, 1)`` (seeded by ``(seed, r)``), as for the ground state; the
    lowest objective wins (evaluations of all starts are counted)."""
    method = optimizer["name"]
    skip = ("name", "restarts", "restart_scale", "max_shots")
    options = {k: v for k, v in optimizer.items() if k not in skip}
    scale = float(optimizer.get("restart_scale", 0.1))
    best, n_eval = None, 0
    for r in range(int(optimizer.get("restarts", 0)) + 1):
        start = x0
        if r:
            start = x0 + scale * np.random.default_rng([seed, r]).standard_normal(x0.size)
        res = minimize(value_grad, start, method=method, grad=True, options=options, seed=seed)
        n_eval += int(res.n_evaluations)
        if best is None or res.fun < best.fun:
            best = res
    best.n_evaluations = n_eval
    return best


def vqd(
    ansatz: Any,
    n_states: int,
    ground_params: np.ndarray,
    optimizer: dict,
    *,
    weights: list[float] | None = None,
    mu: float = 1.0,
    seed: int = 0,
    start_scale: float = 0.1,
    frame: Frame | None = None,
) -> list[ExcitedState]:
    """VQD (module docstring): states ``0..n_states-1``; state 0 is the given ground state.

    Args:
        ansatz: the fermionic ansatz of the frame (determinant space, or its Pauli rotations
            on the (tapered) qubits).
        n_states: states to return, ground included.
        ground_params: the ground state's optimized parameters (reused, not re-optimized).
        optimizer: validated gradient-optimizer config (``lbfgs``/``bfgs``).
        weights: ``beta_j`` for the lower states (one value for all, or one per state);
            None = :func:`gap_bound_weights`.
        mu: spin penalty (0 = all spins of the S_z sector).
        seed: starts of state ``k`` are ``ground_params + start_scale * N(0,1)`` (seed + k).
        frame: where the states live (default: the determinant space of ``ansatz``).
    """
    frame = DetFrame(ansatz.space) if frame is None else frame
    apply_h = penalised(frame, mu)
    g = np.asarray(ground_params, float)
    psi0 = ansatz.state(g)
    states = [_state(frame, psi0, g)]
    for k in range(1, n_states):
        lower = [s.vector for s in states]
        lower_e = [float(np.real(frame.inner(v, apply_h(v)))) + frame.e_core for v in lower]
        if weights is None:
            beta = gap_bound_weights(frame, lower_e, mu)
        else:
            beta = [float(weights[min(j, len(weights) - 1)]) for j in range(k)]

        def apply(psi: np.ndarray, lower=lower, beta=beta) -> np.ndarray:
            out = apply_h(psi)
            for b, phi in zip(beta, lower, strict=True):
                out = out + b * frame.inner(phi, psi) * phi
            return out

        x0 = g + start_scale * np.random.default_rng(seed + k).standard_normal(g.size)
        res = _optimize(
            lambda t, apply=apply: ansatz.expectation_and_gradient(t, apply),
            x0,
            optimizer,
            seed + k,
        )
        x = np.asarray(res.x, float)
        states.append(_state(frame, ansatz.state(x), x, res.n_evaluations))
    return states


def _state(frame: Frame, psi: np.ndarray, params: np.ndarray, n_eval: int = 0) -> ExcitedState:
    psi = np.asarray(psi)
    return ExcitedState(
        energy=frame.energy(psi),
        vector=psi,
        spin_square=frame.spin_square(psi),
        params=np.asarray(params, float),
        evaluations=int(n_eval),
        n_electrons=frame.n_electrons(psi),
    )


def ssvqe_initial_states(
    space: DetSpace, n_states: int, spin_adapted: bool, frame: Frame | None = None
) -> list[np.ndarray]:
    """HF and its lowest single excitations ``i -> a`` (ordered by ``a - i``, then ``i``
    descending), as orthonormal CI vectors; spin-adapted (``(E_ai alpha + E_ai beta)/sqrt 2``
    on a closed shell) when ``spin_adapted``, else alpha excitations then beta. With a
    ``frame`` only vectors inside its symmetry sector are kept, returned in the frame; when
    the singles run out (a sector holds few of them: H2 6-31G's ``Sigma_g^+`` one), the
    paired doubles ``i i -> a a`` follow in the same order."""
    frame = DetFrame(space) if frame is None else frame
    hf = space.hf_state()
    na, nb = space.nelec
    out = [hf]
    pairs = sorted(
        ((i, a) for i in range(max(na, nb)) for a in range(min(na, nb), space.norb) if a != i),
        key=lambda p: (p[1] - p[0], -p[0]),
    )
    for kind, (i, a) in [("single", p) for p in pairs] + [("paired", p) for p in pairs]:
        vecs = []
        if kind == "paired":
            if i < min(na, nb) and a >= max(na, nb):
                term = ((2 * a, 1), (2 * a + 1, 1), (2 * i + 1, 0), (2 * i, 0))
                vecs.append(space.apply_excitation(space.cached_gate(term), hf))
        else:
            for spin, n in ((0, na), (1, nb)):
                if i < n and a >= n:
                    gate = space.cached_gate(((2 * a + spin, 1), (2 * i + spin, 0)))
                    vecs.append(space.apply_excitation(gate, hf))
        cands = [sum(vecs)] if spin_adapted and vecs else vecs
        for v in cands:
            for u in out:
                v = v - (u @ v) * u
            norm = float(np.linalg.norm(v))
            if norm > 1e-8 and len(out) < n_states:
                if (
                    spin_adapted
                    and abs(civec_spin_square(v, space.norb, space.nelec) - _target_s2(space))
                    > 1e-6
                ):
                    continue
                if frame.carry(v / norm) is None:
                    continue
                out.append(v / norm)
        if len(out) == n_states:
            break
    return [frame.carry(v) for v in out]


def ssvqe(
    ansatz: Any,
    n_states: int,
    optimizer: dict,
    *,
    weights: list[float] | None = None,
    mu: float = 1.0,
    seed: int = 0,
    start_scale: float = 0.1,
    frame: Frame | None = None,
) -> list[ExcitedState]:
    """Weighted SSVQE (module docstring); states sorted by energy.

    The start is ``start_scale * N(0, 1)`` (seeded): from zero, the symmetric start of a
    k-UpCCGSD unitary stalls in a local minimum (H2/6-31G at 1.2 A: 9 mHa on state 1).
    ``frame``: where the states live (default: the determinant space of ``ansatz``)."""
    frame = DetFrame(ansatz.space) if frame is None else frame
    apply = penalised(frame, mu)
    refs = ssvqe_initial_states(frame.space, n_states, spin_adapted=mu != 0.0, frame=frame)
    n = len(refs)
    w = [float(n - j) for j in range(n)] if weights is None else [float(x) for x in weights[:n]]

    def value_grad(theta: np.ndarray) -> tuple[float, np.ndarray]:
        total, grad = 0.0, np.zeros(ansatz.n_params)
        for wj, ref in zip(w, refs, strict=True):
            e, g = ansatz.expectation_and_gradient(theta, apply, ref)
            total += wj * e
            grad += wj * g
        return total, grad

    x0 = start_scale * np.random.default_rng(seed).standard_normal(ansatz.n_params)
    res = _optimize(value_grad, x0, optimizer, seed)
    x = np.asarray(res.x, float)
    states = [_state(frame, ansatz.state_from(x, ref), x, res.n_evaluations) for ref in refs]
    return sorted(states, key=lambda s: s.energy)


def _apply_1e(f1e: np.ndarray, psi: np.ndarray, space: DetSpace) -> np.ndarray:
    with lib.with_omp_threads(1):
        out = direct_spin1.contract_1e(f1e, psi, space.norb, space.nelec)
    return np.asarray(out).reshape(-1)


def qeom(
    space: DetSpace,
    ground: np.ndarray,
    n_states: int,
    *,
    spin_filter: bool = True,
    dipole_active: np.ndarray | None = None,
    allowed: Callable[[Any], bool] | None = None,
) -> list[ExcitedState]:
    """qEOM on the optimized ground state ``ground`` (module docstring); ``allowed(term)``
    selects the excitations of the manifold (default all: a tapered frame keeps those that
    stay in its symmetry sector, :meth:`QubitFrame.allows`).

    Returns:
        ``[ground, excited_1, ...]`` up to ``n_states`` states: energies ``E_0 + w_n``, the
        vectors ``O_n^+|0>`` (normalised) and, with ``dipole_active`` (3, norb, norb), the
        transition dipoles ``<0|mu|n>``.
    """
    import scipy.linalg

    psi = np.asarray(ground, float)
    psi = psi / np.linalg.norm(psi)
    hpsi = space.apply_h(psi)
    e0 = float(psi @ hpsi) + space.e_core
    doubles, singles = sd_excitation_terms(space.norb, space.nelec)
    terms = [t for t in singles + doubles if allowed is None or allowed(t)]
    gates = [space.cached_gate(t) for t in terms]
    u = np.array([space.apply_excitation(g, psi) for g in gates])  # E_m |0>
    d = np.array([space.apply_excitation(g, psi, adjoint=True) for g in gates])  # E_m^+ |0>
    w = np.array([space.apply_excitation(g, hpsi) for g in gates])  # E_m H|0>
    z = np.array([space.apply_excitation(g, hpsi, adjoint=True) for g in gates])  # E_m^+ H|0>
    hu = np.array([space.apply_h(v) for v in u])
    hd = np.array([space.apply_h(v) for v in d])
    uhu, dhd, uhd = u @ hu.T, d @ hd.T, u @ hd.T
    wu, dz = w @ u.T, d @ z.T
    m_mat = 0.5 * (2 * uhu - wu - dz - wu.T - dz.T + 2 * dhd.T)
    uz, wd = u @ z.T, w @ d.T
    q_mat = -0.5 * (2 * uz - uz.T - wd - uhd - uhd.T + 2 * wd.T)
    v_mat = u @ u.T - (d @ d.T).T
    w_mat = -(u @ d.T - (u @ d.T).T)
    a = np.block([[m_mat, q_mat], [q_mat, m_mat]])
    b = np.block([[v_mat, w_mat], [-w_mat, -v_mat]])
    vals, vecs = scipy.linalg.eig(a, b)
    n_op = len(gates)
    target = _target_s2(space)
    states = [_state(DetFrame(space), psi, np.zeros(0))]
    order = np.argsort(np.where(np.isfinite(vals.real), vals.real, np.inf))
    for i in order:
        om = vals[i]
        if not np.isfinite(om) or abs(om.imag) > QEOM_TOL or om.real <= QEOM_TOL:
            continue
        x, y = vecs[:n_op, i].real, vecs[n_op:, i].real
        norm2 = float(np.concatenate([x, y]) @ b @ np.concatenate([x, y]))
        if norm2 <= QEOM_TOL:
            continue
        x, y = x / math.sqrt(norm2), y / math.sqrt(norm2)
        vec = x @ u - y @ d
        nv = float(np.linalg.norm(vec))
        if nv < QEOM_TOL:
            continue
        vec = vec / nv
        s2 = civec_spin_square(vec, space.norb, space.nelec)
        if spin_filter and abs(s2 - target) > 1e-3:
            continue
        if any(abs(om.real + e0 - s.energy) < 1e-9 and abs(s.vector @ vec) > 0.99 for s in states):
            continue
        tdm = None
        if dipole_active is not None:
            mpsi = np.array([-_apply_1e(dipole_active[c], psi, space) for c in range(3)])
            tdm = (mpsi @ u.T - mpsi @ d.T) @ x - (mpsi @ d.T - mpsi @ u.T) @ y
        states.append(
            ExcitedState(
                energy=e0 + float(om.real),
                vector=vec,
                spin_square=s2,
                transition_dipole=tdm,
                n_electrons=float(sum(space.nelec)),
            )
        )
        if len(states) == n_states:
            break
    return states
