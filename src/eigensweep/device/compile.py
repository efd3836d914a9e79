"""Measurement basis changes and unitary folding of device circuits.

The state-preparation circuit comes from eigensweep's one Pauli-rotation compiler,
:func:`eigensweep.circuit.circuit_from_rotations` (re-exported here), the same one that gives the
optimize stage's reported CNOT count and depth. Only the gates ``x, h, s, sdg, rx, ry, rz, cx``
are emitted by it and by :func:`measurement_circuit`, so every exported circuit uses the small
common subset of OpenQASM's standard gate library. A qubit-wise-commuting group is measured in
the Z basis after ``h`` (X) or ``sdg`` then ``h`` (Y), because ``Sdg Y S = X`` and ``H X H = Z``.

Global unitary folding ``G -> G (G^dagger G)^k`` with odd scale ``2k + 1`` follows
Giurgica-Tiron, Hindy, LaRose, Mari, Zeng, "Digital zero noise extrapolation for quantum
error mitigation", IEEE QCE 2020 (arXiv:2005.10921).
"""

from __future__ import annotations

from collections.abc import Iterable

from eigensweep.circuit import Circuit, circuit_from_rotations

__all__ = [
    "circuit_from_rotations",
    "group_basis",
    "measurement_circuit",
    "globally_folded_circuit",
    "state_circuit",
    "base_of_global_fold",
]


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


def globally_folded_circuit(circuit: Circuit, scale: int) -> Circuit:
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


def base_of_global_fold(folded: Circuit, scale: int) -> Circuit:
    """Recover ``G`` from ``globally_folded_circuit(G, scale)``; raises ``ValueError`` if not such a fold."""
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
        if globally_folded_circuit(base, 2 * k + 1).gates == folded.gates:
            return base
    raise ValueError(f"circuit is not a global fold with scale {2 * k + 1}")


def state_circuit(
    ansatz_meta: dict,
    params,
    mapping: str,
    ham,
    energy_expected: float,
    *,
    atol: float = 1e-6,
) -> tuple[Circuit, float]:
    """The optimized state's circuit on the problem's qubits, checked against the optimizer.

    The circuit is :func:`eigensweep.vqe.circuits.circuit_from_meta` of the stored ansatz (the
    same compilation that gives the optimize stage's reported CNOT count and depth): fermionic
    excitations mapped with ``mapping`` for an untapered problem, the stored (already tapered)
    Pauli rotations for a tapered one (Bravyi et al. 2017, arXiv:1701.08213), native gates for
    ``hardware_efficient``; rotations at zero angle (symmetry-forbidden excitations, which stay
    at zero) are left out.

    Args:
        ansatz_meta: ``ansatz_meta`` of the optimize stage file.
        params: the optimized parameters.
        mapping: the problem's fermion-to-qubit mapping.
        ham: the qubit Hamiltonian the job measures (the taper stage's, possibly tapered).
        energy_expected: the optimizer's exact energy at ``params`` (hartree).
        atol: largest accepted difference between the circuit's energy and ``energy_expected``.

    Returns:
        ``(circuit, energy of the circuit's state under ham)``.

    Raises:
        StageFileError: the circuit acts on other qubits than ``ham`` or prepares a state of
            another energy (an inconsistent optimize / taper pair); nothing should be exported.
    """
    from eigensweep.errors import StageFileError
    from eigensweep.qubit.statevector import expectation, simulate
    from eigensweep.vqe.circuits import circuit_from_meta

    circ = circuit_from_meta(ansatz_meta, params, mapping)
    if circ.n_qubits != int(ham.n_qubits):
        raise StageFileError(
            f"export: the optimized circuit acts on {circ.n_qubits} qubits but the taper stage's "
            f"Hamiltonian on {ham.n_qubits}; export an optimize result of the same taper stage"
        )
    energy = float(expectation(simulate(circ), ham))
    if abs(energy - float(energy_expected)) > atol:
        raise StageFileError(
            f"export: the compiled circuit gives {energy:.8f} Eh but the optimizer's state "
            f"{float(energy_expected):.8f} Eh; refusing to export an inconsistent job"
        )
    return circ, energy
