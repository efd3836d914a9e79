"""Fermionic ansätze on Z2-tapered qubits (Bravyi, Gambetta, Mezzacapo, Temme, arXiv:1701.08213).

Tapering (:mod:`eigensweep.qubit.taper`) conjugates the mapped Hamiltonian with a Clifford
``U`` that turns each Z2 symmetry generator ``tau_i`` into ``X`` on a pivot qubit, replaces that
``X`` by the reference state's eigenvalue ``s_i`` and deletes the qubit. An operator ``P`` that
commutes with every ``tau_i`` goes through the same map (``SectorReduction.taper_operator``): ``U P U``
has only ``I``/``X`` on the pivots, so on the sector ``U P U = s P'`` with ``P'`` one Pauli
string on the remaining qubits and ``s = +-1``. Hence a rotation ``exp(-i a/2 P)`` acting on a
state of the sector equals ``exp(-i (s a)/2 P')`` on the tapered state: the sign multiplies
the angle.

A fermionic excitation gate ``exp(phi G)``, ``G = T - T^dagger``, is the product of the commuting
rotations of its mapped strings (:func:`eigensweep.qubit.mapping.generator_paulis`, angle
``-2 phi c_j``); each string is tapered separately. Strings of one excitation that land on the
same tapered string are merged (their angles add; they commute, so this is exact) and strings
whose merged angle vanishes are removed.

Symmetry-forbidden excitations
------------------------------
With diagonal generators the strings of one excitation share their ``X`` part, so either all
of them commute with a generator or all anticommute. An anticommuting excitation (one that
changes a point-group irrep or a spin parity, e.g. an ``a_1 -> b_1`` single) maps the sector of
the reference onto the other sector: ``G`` is block off-diagonal. Such excitations are dropped,
and this is exact for the optimisation from Hartree-Fock: with all forbidden angles zero the
state stays in the reference's sector, where ``<psi|[H, G]|psi> = 0`` for every forbidden
``G`` (``H G psi`` lies in the other sector), so the energy gradient along every forbidden
parameter vanishes identically and a gradient optimizer started at zero never moves them.
A forbidden gate at angle zero is the identity, so removing it changes nothing in the product
either (whatever its position in the Trotter order). The tapered ansatz therefore reproduces
the untapered determinant-space optimum in the sector of the reference (the tests check this to
1e-7 Eh). Its parameters are the kept ones; the meta data records how many excitations and
parameters were dropped. A parameter shared by an allowed and a forbidden excitation (never the
case for the spin-complement ties used here) is an error, since it could not stay at zero.
"""

from __future__ import annotations

from collections.abc import Sequence
from dataclasses import dataclass
from typing import TYPE_CHECKING, Any

import numpy as np

from ..qubit.mapping import check_mapping, generator_paulis
from .detspace import FermionTerm
from .fermionic import Excitation, FermionicAnsatz
from .parameter_shift import EXCITATION_RULE, ShiftUnit
from .pauli_rotation import PauliGate, PauliRotationAnsatz

if TYPE_CHECKING:
    from ..qubit.taper import SectorReduction

__all__ = [
    "TaperedFermionicAnsatz",
    "TaperedString",
    "taper_excitation",
]

TaperedString = tuple[np.ndarray, np.ndarray, float]
"""``(x, z, w)`` on the tapered qubits: the gate ``exp(phi G)`` contributes ``exp(-i w phi/2 P)``."""

_ZERO = 1e-12


def taper_excitation(
    term: FermionTerm, mapping: str, tapering: SectorReduction
) -> list[TaperedString] | None:
    """Tapered rotations of the excitation ``exp(phi (T - T^dagger))`` (module docstring).

    Args:
        term: ``T`` as ``((spin_orbital, 1 = creation), ...)``.
        mapping: the mapping of ``tapering``'s Hamiltonian.
        tapering: a :class:`~eigensweep.qubit.SectorReduction` of that Hamiltonian.

    Returns:
        ``[(x, z, w), ...]`` in the order of the mapped strings (merged duplicates at their first
        position; ``w`` is the angle per unit ``phi``), or ``None`` if the excitation
        anticommutes with a symmetry generator (symmetry-forbidden).

    Raises:
        ValueError: some strings of the excitation commute with the generators and others do
            not (impossible for diagonal generators).
    """
    from ..qubit.pauli import PauliExpansion

    n = int(tapering.n_qubits_before)
    merged: dict[bytes, list[Any]] = {}
    n_ok = n_bad = 0
    for x, z, c in generator_paulis(tuple(term), check_mapping(mapping), n):
        single = PauliExpansion(x[None, :].copy(), z[None, :].copy(), np.ones(1), n)
        try:
            tapered = tapering.taper_operator(single)
        except ValueError:
            n_bad += 1
            continue
        n_ok += 1
        if tapered.n_terms != 1:
            raise AssertionError(f"tapering one string of {term} gave {tapered.n_terms} terms")
        tx, tz = tapered.x[0].copy(), tapered.z[0].copy()
        w = -2.0 * float(c) * float(tapered.coeffs[0])
        key = np.packbits(np.concatenate([tx, tz])).tobytes()
        if key in merged:
            merged[key][2] += w
        else:
            merged[key] = [tx, tz, w]
    if n_bad and n_ok:
        raise ValueError(
            f"excitation {term}: {n_bad} of its strings anticommute with the symmetry "
            f"generators and {n_ok} commute; it cannot be tapered"
        )
    if n_bad:
        return None
    return [(x, z, float(w)) for x, z, w in merged.values() if abs(w) > _ZERO and (x | z).any()]


@dataclass(frozen=True)
class _Plan:
    gates: list[PauliGate]
    kept_params: np.ndarray
    kept_excitations: list[int]
    n_dropped_excitations: int
    units: list[ShiftUnit]


def _plan(
    excitations: Sequence[Excitation],
    n_params: int,
    mapping: str,
    tapering: SectorReduction,
    cache: dict[FermionTerm, list[TaperedString] | None] | None,
) -> _Plan:
    cache = {} if cache is None else cache
    per_exc: list[list[TaperedString] | None] = []
    for e in excitations:
        if e.term not in cache:
            cache[e.term] = taper_excitation(e.term, mapping, tapering)
        per_exc.append(cache[e.term])
    allowed = np.zeros(n_params, dtype=bool)
    forbidden = np.zeros(n_params, dtype=bool)
    has_gate = np.zeros(n_params, dtype=bool)
    for e, strings in zip(excitations, per_exc, strict=True):
        if strings is None:
            forbidden[e.param] = True
        else:
            allowed[e.param] = True
            has_gate[e.param] |= bool(strings)
    both = np.flatnonzero(allowed & forbidden)
    if both.size:
        raise ValueError(
            f"parameter {int(both[0])} is shared by symmetry-allowed and symmetry-forbidden "
            "excitations; the ansatz cannot be tapered"
        )
    kept_params = np.flatnonzero(has_gate)
    new_index = np.full(n_params, -1, dtype=np.int64)
    new_index[kept_params] = np.arange(kept_params.size)
    gates: list[PauliGate] = []
    kept_exc: list[int] = []
    units: list[ShiftUnit] = []
    for i, (e, strings) in enumerate(zip(excitations, per_exc, strict=True)):
        if not strings:
            continue
        kept_exc.append(i)
        p = int(new_index[e.param])
        first = len(gates)
        for x, z, w in strings:
            gates.append(PauliGate(x, z, p, float(e.coeff) * w))
        units.append(
            ShiftUnit(
                tuple(range(first, len(gates))),
                tuple(float(w) for _, _, w in strings),
                p,
                float(e.coeff),
                EXCITATION_RULE,
            )
        )
    n_dropped = sum(1 for s in per_exc if s is None)
    return _Plan(gates, kept_params, kept_exc, n_dropped, units)


class TaperedFermionicAnsatz(PauliRotationAnsatz):
    """A product of excitation gates as Pauli rotations on the tapered qubits.

    State ``prod_k exp(-i a_k/2 P_k)|reference>`` on ``tapering.n_qubits`` qubits with
    ``reference = tapering.reference_bits``, energies of ``tapering.hamiltonian`` and adjoint
    gradients (:class:`~eigensweep.vqe.pauli_rotation.PauliRotationAnsatz`). Parameter ``j`` is the
    untapered parameter ``kept_params[j]``; symmetry-forbidden excitations are dropped (module
    docstring).

    Args:
        excitations: the untapered gates (first applied first), as in
            :class:`~eigensweep.vqe.fermionic.FermionicAnsatz`.
        n_params: number of untapered parameters.
        mapping: the mapping of ``tapering``.
        tapering: a tapering with at least one generator (zero generators work too, giving the
            untapered statevector ansatz).
        name: ansatz name stored in :meth:`meta`.
        initial: untapered initial parameters (default zeros = Hartree-Fock).
        extra_meta: further JSON-able entries for :meth:`meta`.
        cache: shared ``term -> tapered strings`` cache (ADAPT rebuilds its ansatz often).
    """

    def __init__(
        self,
        excitations: Sequence[Excitation],
        n_params: int,
        mapping: str,
        tapering: SectorReduction,
        *,
        name: str = "fermionic",
        initial: np.ndarray | None = None,
        extra_meta: dict | None = None,
        cache: dict[FermionTerm, list[TaperedString] | None] | None = None,
    ) -> None:
        self.mapping = check_mapping(mapping)
        self.tapering = tapering
        self.name = name
        self.excitations = list(excitations)
        self.n_params_untapered = int(n_params)
        plan = _plan(self.excitations, self.n_params_untapered, self.mapping, tapering, cache)
        self.kept_params = plan.kept_params
        self.kept_excitations = plan.kept_excitations
        self.n_dropped_excitations = plan.n_dropped_excitations
        self._units = plan.units
        full = np.zeros(self.n_params_untapered) if initial is None else np.asarray(initial)
        self._initial = np.asarray(full, dtype=float).reshape(-1)[self.kept_params].copy()
        self._extra_meta = dict(extra_meta or {})
        super().__init__(
            tapering.hamiltonian,
            np.asarray(tapering.reference_bits, dtype=np.uint8),
            plan.gates,
            int(self.kept_params.size),
        )

    @classmethod
    def from_ansatz(
        cls, ansatz: FermionicAnsatz, mapping: str, tapering: SectorReduction
    ) -> TaperedFermionicAnsatz:
        """Taper a determinant-space ansatz (UCCSD, k-UpCCGSD, ADAPT), keeping its meta."""
        extra = {
            k: v
            for k, v in ansatz.meta().items()
            if k not in ("name", "n_params", "n_qubits", "operators")
        }
        return cls(
            ansatz.excitations,
            ansatz.n_params,
            mapping,
            tapering,
            name=ansatz.name,
            initial=ansatz.initial_params(),
            extra_meta=extra,
        )

    def shift_units(self) -> list[ShiftUnit]:
        """One four-term unit per kept excitation: its tapered rotations shift together by
        ``w_j s`` (:mod:`eigensweep.vqe.parameter_shift`)."""
        return list(self._units)

    def initial_params(self) -> np.ndarray:
        """The untapered initial parameters of the kept parameters (zeros = Hartree-Fock)."""
        return self._initial.copy()

    def untapered_params(self, theta: np.ndarray) -> np.ndarray:
        """The untapered parameter vector: ``theta`` on the kept parameters, zero elsewhere."""
        full = np.zeros(self.n_params_untapered)
        full[self.kept_params] = np.asarray(theta, dtype=float).reshape(-1)
        return full

    def meta(self) -> dict:
        """Tapered Pauli rotations and reference bits (enough for
        :func:`~eigensweep.vqe.circuits.circuit_from_meta`), plus the tapering bookkeeping."""
        out = {**self._extra_meta, **super().meta()}
        out.update(
            tapered=True,
            mapping=self.mapping,
            n_qubits_before=int(self.tapering.n_qubits_before),
            n_excitations=len(self.excitations),
            n_excitations_dropped=int(self.n_dropped_excitations),
            n_params_untapered=self.n_params_untapered,
            n_params_dropped=self.n_params_untapered - self.n_params,
            kept_params=[int(p) for p in self.kept_params],
            fermion_operators=[
                {
                    "term": [[int(o), int(a)] for o, a in self.excitations[i].term],
                    "param_untapered": int(self.excitations[i].param),
                    "coeff": float(self.excitations[i].coeff),
                }
                for i in self.kept_excitations
            ],
        )
        return out
