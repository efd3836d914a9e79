"""Compile variational states into hardware gate lists and fold them for noise scaling.

Only the gates ``x, h, s, sdg, rx, ry, rz, cx`` are emitted by :func:`circuit_from_rotations`
and :func:`measurement_circuit`, so every exported circuit uses the small common subset of
OpenQASM's standard gate library.

Pauli exponentials are compiled in the textbook way: rotate every qubit of the string into the
Z basis, collect the parity on the last qubit with a CNOT ladder, apply ``rz(angle)`` and undo
the ladder and the basis change. For a single qubit,

* ``X = H Z H``, so the basis change is ``h`` before and after;
* ``Y = (H Sdg)^dagger Z (H Sdg)``, i.e. apply ``sdg`` then ``h`` before, and ``h`` then ``s``
  after (because ``Sdg Y S = X`` and ``H X H = Z``).

Global unitary folding ``G -> G (G^dagger G)^k`` with odd scale ``2k + 1`` follows
Giurgica-Tiron, Hindy, LaRose, Mari, Zeng, "Digital zero noise extrapolation for quantum
error mitigation", IEEE QCE 2020 (arXiv:2005.10921).
"""

from __future__ import annotations

from collections.abc import Iterable, Sequence

import numpy as np

from eigensweep.circuit import Circuit

__all__ = [
    "circuit_from_rotations",
    "group_basis",
    "measurement_circuit",
    "fold_circuit",
    "unfold_circuit",
]


def _bool_row(row, n: int, what: str) -> np.ndarray:
    arr = np.asarray(row).astype(bool).reshape(-1)
    if arr.shape != (n,):
        raise ValueError(f"{what} has {arr.size} entries, expected {n} (one per qubit)")
    return arr


def _append_pauli_rotation(circ: Circuit, x: np.ndarray, z: np.ndarray, angle: float) -> None:
    """Append exp(-i angle/2 P) for the Pauli string with symplectic rows ``x``, ``z``."""
    support = [int(q) for q in np.flatnonzero(x | z)]
    if not support:
        return  # exp(-i angle/2 I) is a global phase: nothing to apply on hardware
    # basis change into Z on every qubit of the support
    for q in support:
        if x[q] and z[q]:  # Y: (H Sdg) Y (H Sdg)^dagger = Z
            circ.append("sdg", (q,))
            circ.append("h", (q,))
        elif x[q]:  # X: H X H = Z
            circ.append("h", (q,))
    ladder = list(zip(support[:-1], support[1:], strict=True))
    for c, t in ladder:
        circ.append("cx", (c, t))
    circ.append("rz", (support[-1],), (float(angle),))
    for c, t in reversed(ladder):
        circ.append("cx", (c, t))
    for q in support:
        if x[q] and z[q]:
            circ.append("h", (q,))
            circ.append("s", (q,))
        elif x[q]:
            circ.append("h", (q,))


def circuit_from_rotations(
    reference_bits: Sequence[int] | np.ndarray,
    rotations: Iterable[tuple[Sequence[bool], Sequence[bool], float]],
) -> Circuit:
    """Circuit preparing ``prod_k exp(-i angle_k/2 P_k) |reference>`` (rotations in list order).

    ``reference_bits[k]`` is the occupation of qubit ``k``; each rotation is
    ``(x_row, z_row, angle)`` with the symplectic convention ``x & z`` = Y. The state is
    reproduced exactly, including the global phase, except that identity rotations (empty
    Pauli string, a pure global phase ``exp(-i angle/2)``) are dropped.
    """
    bits = np.asarray(reference_bits).astype(np.int64).reshape(-1)
    if np.any((bits != 0) & (bits != 1)):
        raise ValueError("reference_bits must contain only 0 and 1")
    n = int(bits.size)
    circ = Circuit(n)
    for q in np.flatnonzero(bits):
        circ.append("x", (int(q),))
    for i, rot in enumerate(rotations):
        x_row, z_row, angle = rot
        x = _bool_row(x_row, n, f"rotation {i} x row")
        z = _bool_row(z_row, n, f"rotation {i} z row")
        if not np.isfinite(angle):
            raise ValueError(f"rotation {i} has a non-finite angle {angle!r}")
        _append_pauli_rotation(circ, x, z, float(angle))
    return circ


def group_basis(group_labels: str | Iterable[str], n_qubits: int | None = None) -> str:
    """Merge the Pauli labels of one qubit-wise-commuting group into one basis string.

    Character ``k`` is the letter measured on qubit ``k`` (``I`` where no term acts). Raises
    ``ValueError`` if two labels disagree on a qubit (the group is not qubit-wise commuting).
    """
    labels = [group_labels] if isinstance(group_labels, str) else list(group_labels)
    if not labels:
        if n_qubits is None:
            raise ValueError("empty group and no n_qubits given")
        return "I" * n_qubits
    n = len(labels[0]) if n_qubits is None else n_qubits
    basis = ["I"] * n
    for lab in labels:
        lab = lab.upper()
        if len(lab) != n:
            raise ValueError(f"label {lab!r} has length {len(lab)}, expected {n}")
        for k, ch in enumerate(lab):
            if ch not in "IXYZ":
                raise ValueError(f"label {lab!r} has letter {ch!r}; use I, X, Y, Z")
            if ch == "I":
                continue
            if basis[k] not in ("I", ch):
                raise ValueError(
                    f"labels do not commute qubit-wise on qubit {k}: {basis[k]} vs {ch}"
                )
            basis[k] = ch
    return "".join(basis)


def measurement_circuit(base: Circuit, group_labels: str | Iterable[str]) -> Circuit:
    """Copy of ``base`` followed by the basis change that measures one QWC group in Z.

    Per qubit: X -> ``h``; Y -> ``sdg`` then ``h``; Z or I -> nothing. All qubits are then
    measured in the computational basis; a term's value is the parity of its support.
    """
    basis = group_basis(group_labels, base.n_qubits)
    out = base.copy()
    for q, ch in enumerate(basis):
        if ch == "X":
            out.append("h", (q,))
        elif ch == "Y":
            out.append("sdg", (q,))
            out.append("h", (q,))
    return out


def _check_scale(scale: int) -> int:
    if isinstance(scale, bool) or int(scale) != scale:
        raise ValueError(f"fold scale must be an odd positive integer, got {scale!r}")
    scale = int(scale)
    if scale < 1 or scale % 2 == 0:
        raise ValueError(f"fold scale must be an odd positive integer (1, 3, 5, ...), got {scale}")
    return scale


def fold_circuit(circuit: Circuit, scale: int) -> Circuit:
    """Global unitary folding ``G (G^dagger G)^((scale-1)/2)`` (Giurgica-Tiron et al. 2020).

    The folded circuit implements exactly the same unitary; on a noisy device it runs about
    ``scale`` times as many gates, which amplifies the gate noise by ``scale``. The gate count
    is exactly ``scale * len(circuit)`` unless the circuit contains ``sx`` (whose inverse takes
    two gates). Raises ``ValueError`` for even or non-positive scales.
    """
    k = (_check_scale(scale) - 1) // 2
    inv = circuit.inverse()
    out = circuit.copy()
    for _ in range(k):
        out.gates.extend(inv.gates)
        out.gates.extend(circuit.gates)
    return out


def unfold_circuit(folded: Circuit, scale: int) -> Circuit:
    """Recover ``G`` from ``fold_circuit(G, scale)``; raises ``ValueError`` if not such a fold."""
    k = (_check_scale(scale) - 1) // 2
    n_total = len(folded.gates)
    # len(fold) = m + k * (m + n_sx(m) + m) where m = len(G); n_sx counts gates inverted in two
    n_sx = 0
    for m in range(n_total + 1):
        if m > 0 and folded.gates[m - 1].name == "sx":
            n_sx += 1
        if m + k * (2 * m + n_sx) != n_total:
            continue
        base = Circuit(folded.n_qubits, list(folded.gates[:m]))
        if fold_circuit(base, 2 * k + 1).gates == folded.gates:
            return base
    raise ValueError(f"circuit is not a global fold with scale {2 * k + 1}")
