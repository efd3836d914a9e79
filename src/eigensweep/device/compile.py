"""Measurement basis changes and unitary folding of device circuits.

The state-preparation circuit comes from eigensweep's one Pauli-rotation compiler,
:func:`eigensweep.circuit.circuit_from_rotations` (re-exported here), the same one that gives the
optimize stage's reported CNOT count and depth. Only the gates ``x, h, s, sdg, rx, ry, rz, cx``
are emitted by it and by :func:`measurement_circuit`, so every exported circuit uses the small
common subset of OpenQASM's standard gate library. A qubit-wise-commuting group is measured in
the Z basis after ``h`` (X) or ``sdg`` then ``h`` (Y), because ``Sdg Y S = X`` and ``H X H = Z``.

Global unitary folding ``G -> G (G^dagger G)^k`` with odd scale ``2k + 1`` follows
Giurgica-Tiron, Hindy, LaRose, Mari, Zeng, "Digital zero noise extrapolation for quantum
error mitigation", IEEE QCE 2020 (arXiv:2005.10921). Device jobs fold the state preparation
only and append each group's basis change after the fold (:func:`folded_measurement_circuit`),
so all measurement circuits of one job share their (folded) state preparation as a prefix.
"""

from __future__ import annotations

import math
from collections.abc import Iterable, Sequence
from dataclasses import dataclass

import numpy as np

from eigensweep.circuit import Circuit, Gate, circuit_from_rotations

__all__ = [
    "circuit_from_rotations",
    "group_basis",
    "measurement_circuit",
    "globally_folded_circuit",
    "state_circuit",
    "base_of_global_fold",
    "CircuitCost",
    "CompiledCircuit",
    "basis_change_on_physical",
    "folded_measurement_circuit",
    "measurement_circuits_on_target",
    "split_folded_measurement",
    "estimate_cost",
    "choose_region",
    "compile_for_target",
    "logical_bit_positions",
    "naive_route",
    "native_gates_of",
    "one_qubit_native",
    "peephole",
    "sabre_route",
    "zyz_angles",
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


# ============================================================================= device targets
#
# Compilation for a device target (eigensweep.target.Target): an initial layout and routing by
# swap insertion with lookahead (SABRE), decomposition into the target's native gates, a
# peephole pass, and the final logical -> physical permutation. See compile_for_target.

_TWO_PI = 2.0 * math.pi
_TOL = 1e-10


@dataclass
class CompiledCircuit:
    """A circuit compiled for a target, on the target's physical register.

    Attributes:
        circuit: native gates on ``target.n_qubits`` physical qubits.
        layout: ``layout[j]`` is the physical qubit holding logical qubit ``j`` at the start.
        final_permutation: ``final_permutation[j]`` is the physical qubit holding logical
            qubit ``j`` at the end (after the routing swaps).
        measured_qubits: the physical qubits the circuit uses, ascending; bit ``k`` of a
            returned bitstring is physical qubit ``measured_qubits[k]``.
        swaps: swaps the router inserted.
        target: the target's name.
    """

    circuit: Circuit
    layout: list[int]
    final_permutation: list[int]
    measured_qubits: list[int]
    swaps: int
    target: str

    def logical_bit_positions(self) -> list[int]:
        """``pos[j]``: the bitstring character that holds logical qubit ``j``."""
        return logical_bit_positions(self.measured_qubits, self.final_permutation)


def logical_bit_positions(measured_qubits, final_permutation) -> list[int]:
    """Character index of each logical qubit in a bitstring measured on ``measured_qubits``."""
    where = {int(p): k for k, p in enumerate(measured_qubits)}
    return [where[int(p)] for p in final_permutation]


# ----------------------------------------------------------------------------- region


def _induced_distances(target, region: list[int]) -> dict[int, dict[int, int]]:
    """Shortest paths inside the induced subgraph of ``region`` (breadth-first search)."""
    inside = set(region)
    out: dict[int, dict[int, int]] = {}
    for s in region:
        dist = {s: 0}
        todo = [s]
        for u in todo:
            for v in sorted(target.neighbours(u)):
                if v in inside and v not in dist:
                    dist[v] = dist[u] + 1
                    todo.append(v)
        out[s] = dist
    return out


def choose_region(target, n: int) -> list[int]:
    """A connected set of ``n`` physical qubits with many internal couplings (ascending).

    Greedy growth from every start qubit: add the outside neighbour with the most couplings
    into the set (then the lowest two-qubit error, then the lowest index); keep the set with
    the most internal couplings. All-to-all targets use qubits ``0 .. n-1``.
    """
    if n > target.n_qubits:
        raise ValueError(
            f"the circuit needs {n} qubits but target {target.name} has {target.n_qubits}; "
            "choose a larger target"
        )
    if target.all_to_all or n == target.n_qubits:
        return list(range(n))
    best: tuple | None = None
    for start in range(target.n_qubits):
        chosen = [start]
        inside = {start}
        while len(chosen) < n:
            cands = {v for u in chosen for v in target.neighbours(u)} - inside
            if not cands:
                break
            v = min(cands, key=lambda c: (-len(target.neighbours(c) & inside), c))
            chosen.append(v)
            inside.add(v)
        if len(chosen) < n:
            continue
        edges = sum(1 for a, b in target.edges() if a in inside and b in inside)
        score = (-edges, sorted(chosen))
        if best is None or score < best:
            best = score
    if best is None:
        raise ValueError(
            f"target {target.name} has no connected set of {n} qubits; choose another target"
        )
    return best[1]


# ----------------------------------------------------------------------------- SABRE


def _dag(gates: list[Gate], n: int) -> tuple[list[list[int]], list[int]]:
    succ: list[list[int]] = [[] for _ in gates]
    npred = [0] * len(gates)
    last = [-1] * n
    for i, g in enumerate(gates):
        for q in g.qubits:
            p = last[q]
            if p >= 0 and i not in succ[p]:
                succ[p].append(i)
                npred[i] += 1
            last[q] = i
    return succ, npred


def _sabre_pass(
    gates: list[Gate],
    n: int,
    layout: list[int],
    dist: dict[int, dict[int, int]],
    *,
    extended_size: int = 20,
    extended_weight: float = 0.5,
    decay_step: float = 0.001,
    decay_reset: int = 5,
    emit: bool = True,
) -> tuple[list[tuple], list[int], int]:
    """One SABRE routing pass (Li, Ding, Xie, ASPLOS 2019, arXiv:1809.02573).

    Executes every front-layer gate whose qubits are coupled; otherwise scores each swap on a
    physical qubit of a front gate by ``max(decay) * (H_front / |F| + W H_ext / |E|)``, the
    sums of distances of the front layer and of the extended set (the next ``extended_size``
    two-qubit gates), and applies the best (ties: lowest pair). ``decay`` grows by
    ``decay_step`` on swapped qubits and is reset every ``decay_reset`` swaps or after a
    gate executes. Should ``3 n`` swaps pass without progress, the first front gate is routed
    along a shortest path (release valve against cycles).

    Returns:
        ``(ops, final layout, swaps)``; ``ops`` are ``(gate, physical qubits)`` and
        ``("swap", (a, b))`` entries.
    """
    succ, npred = _dag(gates, n)
    npred = list(npred)
    l2p = list(layout)
    p2l = {p: j for j, p in enumerate(l2p)}
    region = sorted(dist)
    nbrs = {p: [v for v in region if dist[p].get(v) == 1] for p in region}
    decay = dict.fromkeys(region, 1.0)
    front = [i for i in range(len(gates)) if npred[i] == 0]
    ops: list[tuple] = []
    swaps = 0
    since_progress = 0
    since_reset = 0

    def swap(a: int, b: int) -> None:
        nonlocal swaps
        la, lb = p2l.get(a), p2l.get(b)
        if la is not None:
            l2p[la] = b
        if lb is not None:
            l2p[lb] = a
        p2l.pop(a, None)
        p2l.pop(b, None)
        if la is not None:
            p2l[b] = la
        if lb is not None:
            p2l[a] = lb
        swaps += 1
        if emit:
            ops.append(("swap", (a, b)))

    while front:
        progress = True
        while progress:
            progress = False
            nxt = []
            for i in front:
                g = gates[i]
                if len(g.qubits) == 1 or dist[l2p[g.qubits[0]]][l2p[g.qubits[1]]] == 1:
                    if emit:
                        ops.append((g, tuple(l2p[q] for q in g.qubits)))
                    for s in succ[i]:
                        npred[s] -= 1
                        if npred[s] == 0:
                            nxt.append(s)
                    progress = True
                else:
                    nxt.append(i)
            if progress:
                since_progress = 0
                decay = dict.fromkeys(region, 1.0)
            front = nxt
        if not front:
            break
        if since_progress > 3 * n:
            g = gates[front[0]]
            a, b = l2p[g.qubits[0]], l2p[g.qubits[1]]
            while dist[a][b] > 1:
                step = min(v for v in nbrs[a] if dist[v][b] < dist[a][b])
                swap(a, step)
                a = step
            since_progress = 0
            continue
        fgates = [gates[i] for i in front]
        ext: list[Gate] = []
        seen = set(front)
        todo = list(front)
        while todo and len(ext) < extended_size:
            i = todo.pop(0)
            for s in succ[i]:
                if s not in seen:
                    seen.add(s)
                    todo.append(s)
                    if len(gates[s].qubits) == 2:
                        ext.append(gates[s])
                        if len(ext) >= extended_size:
                            break
        cands = sorted(
            {
                (min(p, v), max(p, v))
                for g in fgates
                for p in (l2p[g.qubits[0]], l2p[g.qubits[1]])
                for v in nbrs[p]
            }
        )
        best, best_score = None, math.inf
        for a, b in cands:

            def where(q: int, a=a, b=b) -> int:
                p = l2p[q]
                return b if p == a else (a if p == b else p)

            h = sum(dist[where(g.qubits[0])][where(g.qubits[1])] for g in fgates) / len(fgates)
            if ext:
                h += (
                    extended_weight
                    * sum(dist[where(g.qubits[0])][where(g.qubits[1])] for g in ext)
                    / len(ext)
                )
            h *= max(decay[a], decay[b])
            if h < best_score - 1e-12:
                best, best_score = (a, b), h
        a, b = best
        swap(a, b)
        decay[a] += decay_step
        decay[b] += decay_step
        since_progress += 1
        since_reset += 1
        if since_reset >= decay_reset:
            since_reset = 0
            decay = dict.fromkeys(region, 1.0)
    return ops, l2p, swaps


def _initial_layout(region: list[int], dist, n: int) -> list[int]:
    """Logical ``j`` -> the ``j``-th qubit of a breadth-first walk of the region from an end."""
    far = max(region, key=lambda p: (max(dist[p].values()), -p))
    order = sorted(region, key=lambda p: (dist[far][p], p))
    return order[:n]


def sabre_route(
    circuit: Circuit, target, *, passes: int = 3
) -> tuple[list[tuple], list[int], list[int], list[int], int]:
    """SABRE layout and routing of ``circuit`` on ``target`` (Li, Ding, Xie, ASPLOS 2019).

    The initial layout comes from ``passes`` forward-backward passes (the final layout of a
    pass over the circuit starts a pass over the reversed circuit, and so on), then a last
    forward pass emits the routed operations. Routing stays inside :func:`choose_region`.

    Returns:
        ``(ops, layout, final layout, region, swaps)``.
    """
    n = circuit.n_qubits
    region = choose_region(target, n)
    dist = _induced_distances(target, region)
    layout = _initial_layout(region, dist, n)
    gates = list(circuit.gates)
    two = [g for g in gates if len(g.qubits) == 2]
    if two:
        for _ in range(passes):
            _, end, _ = _sabre_pass(two, n, layout, dist, emit=False)
            _, layout, _ = _sabre_pass(two[::-1], n, end, dist, emit=False)
    ops, final, swaps = _sabre_pass(gates, n, layout, dist)
    return ops, layout, final, region, swaps


def naive_route(
    circuit: Circuit, target
) -> tuple[list[tuple], list[int], list[int], list[int], int]:
    """Baseline router: trivial layout, and before each uncoupled gate its first qubit is swapped
    along a shortest path until it neighbours the second (a nearest-neighbour swap chain)."""
    n = circuit.n_qubits
    region = choose_region(target, n)
    dist = _induced_distances(target, region)
    layout = _initial_layout(region, dist, n)
    l2p = list(layout)
    p2l = {p: j for j, p in enumerate(l2p)}
    ops: list[tuple] = []
    swaps = 0
    for g in circuit.gates:
        if len(g.qubits) == 2:
            a, b = l2p[g.qubits[0]], l2p[g.qubits[1]]
            while dist[a][b] > 1:
                step = min(v for v in region if dist[a].get(v) == 1 and dist[v][b] < dist[a][b])
                la, lb = p2l.get(a), p2l.get(step)
                for p, lq in ((step, la), (a, lb)):
                    if lq is None:
                        p2l.pop(p, None)
                    else:
                        p2l[p] = lq
                        l2p[lq] = p
                ops.append(("swap", (a, step)))
                swaps += 1
                a = step
        ops.append((g, tuple(l2p[q] for q in g.qubits)))
    return ops, layout, l2p, region, swaps


# ----------------------------------------------------------------------------- native gates


def _u_matrix(gate: Gate) -> np.ndarray:
    from eigensweep.qubit.statevector import gate_matrix

    return gate_matrix(gate)


def _is_identity(m: np.ndarray) -> bool:
    """``m`` is the identity up to a global phase."""
    return abs(m[0, 1]) < _TOL and abs(m[1, 0]) < _TOL and abs(m[0, 0] - m[1, 1]) < _TOL


def _wrap(angle: float) -> float:
    """Angle in (-pi, pi] (``rz(a + 2 pi) = -rz(a)``: the same gate up to a global phase)."""
    a = math.remainder(angle, _TWO_PI)
    return math.pi if abs(a + math.pi) < 1e-14 else a


def zyz_angles(m: np.ndarray) -> tuple[float, float, float]:
    """``(phi, theta, lam)`` with ``m = e^{i a} rz(phi) ry(theta) rz(lam)`` (Euler ZYZ angles)."""
    det = np.linalg.det(m)
    su = m / np.sqrt(det)
    theta = 2.0 * math.atan2(abs(su[1, 0]), abs(su[0, 0]))
    plus = 2.0 * float(np.angle(su[1, 1])) if abs(su[1, 1]) > 1e-12 else 0.0
    minus = 2.0 * float(np.angle(su[1, 0])) if abs(su[1, 0]) > 1e-12 else 0.0
    return (plus + minus) / 2.0, theta, (plus - minus) / 2.0


def one_qubit_native(m: np.ndarray, q: int, basis: str) -> list[Gate]:
    """Native gates (circuit order) equal to the 2x2 unitary ``m`` up to a global phase.

    ``sx`` basis (``rz``, ``sx``, ``x``): ``rz(lam) sx rz(theta + pi) sx rz(phi + pi)`` from
    the ZYZ angles, with the shorter forms ``rz``, ``x rz`` and ``rz sx rz`` when theta is 0,
    pi or pi/2; ``ry`` basis: ``rz ry rz``; ``rx`` basis: ``rz(lam - pi/2) rx(theta)
    rz(phi + pi/2)``. Zero rotations are left out.
    """
    if _is_identity(m):
        return []
    phi, theta, lam = zyz_angles(m)
    out: list[Gate] = []

    def rz(a: float) -> None:
        a = _wrap(a)
        if abs(a) > _TOL:
            out.append(Gate("rz", (q,), (a,)))

    if abs(theta) < _TOL:
        rz(phi + lam)
    elif basis == "ry":
        rz(lam)
        out.append(Gate("ry", (q,), (theta,)))
        rz(phi)
    elif basis == "rx":
        rz(lam - math.pi / 2)
        out.append(Gate("rx", (q,), (theta,)))
        rz(phi + math.pi / 2)
    elif abs(theta - math.pi) < _TOL:
        out.append(Gate("x", (q,)))
        rz(phi - lam - math.pi)
    elif abs(theta - math.pi / 2) < _TOL:
        rz(lam - math.pi / 2)
        out.append(Gate("sx", (q,)))
        rz(phi + math.pi / 2)
    else:
        rz(lam)
        out.append(Gate("sx", (q,)))
        rz(theta + math.pi)
        out.append(Gate("sx", (q,)))
        rz(phi + math.pi)
    return out


def _two_qubit_native(name: str, a: int, b: int, entangler: str) -> list:
    """``cx`` or ``swap`` on physical ``a, b`` as the entangler plus one-qubit gates (circuit order).

    ``cx = h_t cz h_t`` (exact); ``cx = ry_c(pi/2) rxx(pi/2) rx_c(-pi/2) rx_t(-pi/2)
    ry_c(-pi/2)`` up to a global phase (Maslov, New J. Phys. 19, 023035 (2017));
    ``swap = cx(a,b) cx(b,a) cx(a,b)``.
    """
    if name == "swap":
        return [
            *_two_qubit_native("cx", a, b, entangler),
            *_two_qubit_native("cx", b, a, entangler),
            *_two_qubit_native("cx", a, b, entangler),
        ]
    if entangler == "cx":
        return [Gate("cx", (a, b))]
    if entangler == "cz":
        return [Gate("h", (b,)), Gate("cz", (a, b)), Gate("h", (b,))]
    h = math.pi / 2
    return [
        Gate("ry", (a,), (h,)),
        Gate("rxx", (a, b), (h,)),
        Gate("rx", (a,), (-h,)),
        Gate("rx", (b,), (-h,)),
        Gate("ry", (a,), (-h,)),
    ]


def _cancels(first: Gate, second: Gate) -> Gate | None | bool:
    """``True`` if the two-qubit pair multiplies to the identity, a merged gate, or ``False``."""
    if first.name != second.name:
        return False
    same = first.qubits == second.qubits
    flipped = first.qubits == second.qubits[::-1]
    if first.name == "cx":
        return same
    if first.name == "cz":
        return same or flipped
    if first.name == "rxx" and (same or flipped):
        angle = math.remainder(first.params[0] + second.params[0], 2 * _TWO_PI)
        if abs(math.remainder(angle, _TWO_PI)) < _TOL:
            return True
        return Gate("rxx", first.qubits, (angle,))
    return False


def peephole(gates: list[Gate], n_qubits: int, basis: str) -> list[Gate]:
    """Merge one-qubit runs and cancel adjacent inverse two-qubit pairs, until nothing changes.

    One-qubit gates between two-qubit gates are multiplied into one 2x2 unitary (so runs of
    ``rz`` merge, and gate-inverse pairs vanish) and re-expressed in the native ``basis`` by
    :func:`one_qubit_native`; two ``cx`` (or ``cz``) on the same qubits with nothing between
    them on those qubits cancel, two ``rxx`` merge. The result equals the input up to a global
    phase.
    """
    current = _peephole_pass(list(gates), n_qubits, basis)
    while True:
        out = _peephole_pass(current, n_qubits, basis)
        if len(out) >= len(current):
            return current
        current = out


def _peephole_pass(gates: list[Gate], n: int, basis: str) -> list[Gate]:
    ops: list = []  # entries: ("u", q, matrix) | ("g", gate) | None (removed)
    prev: list[dict[int, int]] = []  # per op: qubit -> index of the previous op on it
    last = [-1] * n
    pending: list[np.ndarray | None] = [None] * n

    def push(op, qubits) -> None:
        prev.append({q: last[q] for q in qubits})
        ops.append(op)
        for q in qubits:
            last[q] = len(ops) - 1

    def remove(i: int, qubits) -> None:
        ops[i] = None
        for q in qubits:
            last[q] = prev[i][q]

    def flush(q: int) -> None:
        m = pending[q]
        pending[q] = None
        if m is None:
            return
        j = last[q]
        if j >= 0 and ops[j] is not None and ops[j][0] == "u":
            m = m @ ops[j][2]
            remove(j, (q,))
        if not _is_identity(m):
            push(("u", q, m), (q,))

    for g in gates:
        if len(g.qubits) == 1:
            q = g.qubits[0]
            m = _u_matrix(g)
            pending[q] = m if pending[q] is None else m @ pending[q]
            continue
        a, b = g.qubits
        flush(a)
        flush(b)
        j = last[a]
        if j >= 0 and j == last[b] and ops[j] is not None and ops[j][0] == "g":
            res = _cancels(ops[j][1], g)
            if res is True:
                remove(j, (a, b))
                continue
            if isinstance(res, Gate):
                remove(j, (a, b))
                push(("g", res), (a, b))
                continue
        push(("g", g), (a, b))
    for q in range(n):
        flush(q)
    out: list[Gate] = []
    for op in ops:
        if op is None:
            continue
        if op[0] == "g":
            out.append(op[1])
        else:
            out.extend(one_qubit_native(op[2], op[1], basis))
    return out


def to_native(ops: list[tuple], n_physical: int, target, *, optimize: bool = True) -> Circuit:
    """Routed operations (``(gate, physical qubits)`` / ``("swap", (a, b))``) in native gates."""
    basis = target.one_qubit_basis
    ent = target.entangler
    gates: list[Gate] = []
    for g, qs in ops:
        if g == "swap":
            gates += _two_qubit_native("swap", qs[0], qs[1], ent)
        elif len(qs) == 2:
            if g.name != "cx":
                raise ValueError(f"cannot route gate {g.name!r}; the ansatz compiler emits cx")
            gates += _two_qubit_native("cx", qs[0], qs[1], ent)
        else:
            gates.append(Gate(g.name, qs, g.params))
    if optimize:
        gates = peephole(gates, n_physical, basis)
    else:
        gates = _one_qubit_to_native(gates, basis)
    return Circuit(n_physical, gates)


def _one_qubit_to_native(gates: list[Gate], basis: str) -> list[Gate]:
    out: list[Gate] = []
    for g in gates:
        if len(g.qubits) == 2:
            out.append(g)
        else:
            out.extend(one_qubit_native(_u_matrix(g), g.qubits[0], basis))
    return out


def compile_for_target(
    circuit: Circuit, target=None, *, router: str = "sabre", passes: int = 3
) -> CompiledCircuit:
    """Compile a logical circuit for a device target (``None`` or generic: unchanged).

    Steps: a connected region of physical qubits (:func:`choose_region`), layout and routing
    by swap insertion (:func:`sabre_route`, or :func:`naive_route` with ``router="naive"``),
    decomposition into the target's natives, and :func:`peephole`. The generic target keeps
    the circuit exactly as the ansatz compiler wrote it (its gate set is native there).
    """
    from eigensweep.target import GENERIC

    n = circuit.n_qubits
    if target is None or (target.name == GENERIC and target.path is None):
        ident = list(range(n))
        return CompiledCircuit(circuit.copy(), ident, ident, ident, 0, GENERIC)
    if router == "sabre":
        ops, layout, final, region, swaps = sabre_route(circuit, target, passes=passes)
    elif router == "naive":
        ops, layout, final, region, swaps = naive_route(circuit, target)
    else:
        raise ValueError(f"unknown router {router!r}; use sabre or naive")
    native = to_native(ops, target.n_qubits, target)
    return CompiledCircuit(native, layout, final, sorted(region), swaps, target.name)


def basis_change_on_physical(compiled: CompiledCircuit, basis: str, target) -> Circuit:
    """The basis change measuring ``basis`` on the final physical positions, in native gates.

    Logical qubit ``j``'s gates (:func:`measurement_circuit`: ``h`` for X, ``sdg h`` for Y) act
    on physical qubit ``compiled.final_permutation[j]``; on a device target each qubit's gates
    are merged into one native one-qubit sequence (:func:`peephole`). The result is on the
    same register as ``compiled.circuit`` and follows it (and its folds) unchanged.
    """
    logical = measurement_circuit(Circuit(len(compiled.final_permutation)), basis)
    n_reg = compiled.circuit.n_qubits
    if target is None or compiled.target == "generic":
        return Circuit(n_reg, list(logical.gates))
    extra = [
        Gate(g.name, (compiled.final_permutation[g.qubits[0]],), g.params) for g in logical.gates
    ]
    return Circuit(n_reg, peephole(extra, n_reg, target.one_qubit_basis))


def folded_measurement_circuit(state: Circuit, basis_change: Circuit, scale: int) -> Circuit:
    """``G (G^dagger G)^((scale-1)/2) B``: the state preparation ``G`` folded, then ``B``.

    Only the state preparation is folded (Giurgica-Tiron et al. 2020 fold any unitary; the
    basis change is a layer of one-qubit gates whose noise is left unscaled), so every
    measurement circuit of one scale shares the folded state preparation as a common prefix,
    and the folds of lower scales are prefixes of the higher ones: the noise simulator
    (:func:`eigensweep.qubit.noise.simulate_distributions`) computes each prefix once.
    """
    out = globally_folded_circuit(state, scale)
    if basis_change.n_qubits != out.n_qubits:
        raise ValueError(f"basis change on {basis_change.n_qubits} qubits, state on {out.n_qubits}")
    out.gates.extend(basis_change.gates)
    return out


def measurement_circuits_on_target(
    compiled: CompiledCircuit, bases: Sequence[str], target, scale: int = 1
) -> list[Circuit]:
    """One :func:`folded_measurement_circuit` per basis, on the target's physical register.

    What the export stage sends and what the ``noisy`` estimator with a target simulates:
    ``compiled.circuit`` (the state preparation compiled for ``target``) folded to ``scale``,
    then the basis change of each group on the final physical positions.
    """
    return [
        folded_measurement_circuit(
            compiled.circuit, basis_change_on_physical(compiled, b, target), scale
        )
        for b in bases
    ]


def split_folded_measurement(
    circuit: Circuit, scale: int, basis_change_gates: int
) -> tuple[Circuit, Circuit]:
    """``(G, B)`` from :func:`folded_measurement_circuit` ``(G, B, scale)``.

    ``basis_change_gates`` is the length of ``B`` (the manifest records it per circuit).
    Raises ``ValueError`` if the circuit minus its last ``basis_change_gates`` gates is not a
    global fold of scale ``scale`` (:func:`base_of_global_fold`).
    """
    m = int(basis_change_gates)
    if not 0 <= m <= len(circuit.gates):
        raise ValueError(f"basis_change_gates {m} outside 0..{len(circuit.gates)}")
    cut = len(circuit.gates) - m
    state = base_of_global_fold(Circuit(circuit.n_qubits, list(circuit.gates[:cut])), scale)
    return state, Circuit(circuit.n_qubits, list(circuit.gates[cut:]))


def native_gates_of(circuit: Circuit, target) -> Circuit:
    """``circuit`` (already on physical qubits) with every gate in the target's natives."""
    if target is None or (target.name == "generic" and target.path is None):
        return circuit.copy()
    return to_native(
        [(g, g.qubits) for g in circuit.gates], circuit.n_qubits, target, optimize=False
    )


# ----------------------------------------------------------------------------- cost estimate


@dataclass(frozen=True)
class CircuitCost:
    """Estimated cost of one compiled circuit on its target (see :func:`estimate_cost`)."""

    two_qubit_count: int
    depth: int
    duration_ns: float
    gate_fidelity: float
    idle_fidelity: float
    readout_fidelity: float = 1.0

    @property
    def fidelity(self) -> float:
        """Estimated circuit fidelity: gate part times idle part times readout part."""
        return self.gate_fidelity * self.idle_fidelity * self.readout_fidelity

    def to_dict(self) -> dict:
        return {
            "two_qubit_count": self.two_qubit_count,
            "depth": self.depth,
            "duration_ns": self.duration_ns,
            "gate_fidelity": self.gate_fidelity,
            "idle_fidelity": self.idle_fidelity,
            "readout_fidelity": self.readout_fidelity,
            "fidelity": self.fidelity,
        }


def estimate_cost(circuit: Circuit, target, qubits=None) -> CircuitCost:
    """Two-qubit gates, depth, duration and an estimated fidelity of a native circuit.

    Model (an estimate that can mislead; documented in ``config/README.md``): gates start as
    soon as their qubits are free (ASAP); the duration is the critical path of the gate
    durations. The fidelity is ``prod_gates (1 - error_g)`` times, for every used qubit,
    ``exp(-t_idle / T1) exp(-t_idle / T_phi)`` with ``1/T_phi = max(0, 1/T2 - 1/(2 T1))``
    (amplitude damping and pure dephasing while the qubit waits; Nielsen & Chuang, ch. 8),
    where ``t_idle`` is the duration minus the qubit's busy time, times the readout part
    ``prod_qubits (1 - (p01 + p10) / 2)``, each measured qubit's assignment fidelity (the
    probability of reading the right bit, averaged over 0 and 1). Crosstalk, leakage, coherent
    errors and correlated readout errors are not in it.

    Args:
        circuit: native gates on the target's physical qubits.
        target: the :class:`eigensweep.target.Target` (``None``: generic sized to the circuit).
        qubits: physical qubits whose idling counts (default: every qubit a gate touches).
    """
    from eigensweep.target import generic_target

    target = target or generic_target(circuit.n_qubits)
    ready = [0.0] * circuit.n_qubits
    busy = [0.0] * circuit.n_qubits
    log_f = 0.0
    for g in circuit.gates:
        name = g.name if g.name in target.gates else None
        dur = target.gate_duration_ns(name) if name else 0.0
        err = target.gate_error(name) if name else 0.0
        start = max(ready[q] for q in g.qubits)
        for q in g.qubits:
            ready[q] = start + dur
            busy[q] += dur
        log_f += math.log1p(-min(err, 1.0 - 1e-300))
    duration = max(ready, default=0.0)
    used = sorted({q for g in circuit.gates for q in g.qubits}) if qubits is None else qubits
    log_idle = 0.0
    log_read = 0.0
    for q in used:
        t_idle_us = (duration - busy[q]) / 1000.0
        t1, t2 = target.t1_us[q], target.t2_us[q]
        rate_phi = max(0.0, 1.0 / t2 - 1.0 / (2.0 * t1))
        log_idle -= t_idle_us * (1.0 / t1 + rate_phi)
        log_read += math.log1p(-0.5 * (target.readout_p01[q] + target.readout_p10[q]))
    return CircuitCost(
        two_qubit_count=circuit.two_qubit_count,
        depth=circuit.depth,
        duration_ns=float(duration),
        gate_fidelity=float(math.exp(log_f)),
        idle_fidelity=float(math.exp(log_idle)),
        readout_fidelity=float(math.exp(log_read)),
    )
