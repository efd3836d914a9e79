"""Vectorised NumPy statevector kernels (complex128, no ``2**n x 2**n`` matrices).

Bit order (see :mod:`eigensweep.circuit`): qubit ``k`` is bit ``n - 1 - k`` of the basis-state
index, i.e. qubit 0 is the most significant bit, as in OpenFermion's ``get_sparse_operator``.

A Pauli string ``P(x, z) = i^{x.z} X^x Z^z`` acts on a basis state as
``P|b> = i^{ny} (-1)^{popcount(b & zmask)} |b ^ xmask>`` (``ny`` = number of ``Y`` letters).
:func:`apply_pauli_expansion` groups the terms of a Hamiltonian by ``xmask`` (one permutation per
group, see :class:`eigensweep.qubit.pauli.XMaskGroups`); each group's diagonal phase vector
factorises over a high/low split of the qubits into short sums of outer products of sign tables.
Up to ``2**24`` (group, basis state) pairs the groups are compiled once into a cached CSR matrix;
above that a memory-lean loop rebuilds the diagonals block by block, with the permutation done as
a column gather shared by all groups with the same low bits plus a flipped strided view over the
high bits (``O(2**n)`` work space plus cached sign tables: about 100 MB at 20 qubits, against
2.4 GiB for a CSR matrix of the N2/STO-3G Hamiltonian). Plain NumPy linear algebra; no method
beyond the Pauli algebra.
"""

from __future__ import annotations

import numpy as np

from ..circuit import KNOWN_GATES, TWO_QUBIT, Circuit, Gate
from ..errors import ConfigError
from .pauli import PauliExpansion, XMaskGroups, bits_to_mask

__all__ = [
    "basis_state",
    "apply_pauli",
    "apply_pauli_rotation",
    "apply_pauli_expansion",
    "expectation",
    "apply_cx",
    "apply_cz",
    "apply_rxx",
    "apply_gate",
    "apply_gate_batch",
    "apply_gate_density_",
    "apply_matrix_1q",
    "gate_matrix",
    "probabilities_to_distribution",
    "PauliStrings",
    "simulate",
    "GATE_MATRICES",
]

_I_POWERS = np.array([1.0, 1j, -1.0, -1j])  # i^k
# Below this many (group, basis state) pairs the groups are compiled once into a cached CSR
# matrix (at most ~200 MB, typically a third of that); above it the memory-lean group loop runs.
_CSR_LIMIT = 1 << 24
# Diagonal blocks of higher rank than this use one BLAS product instead of outer products.
_RANK_BLAS = 8

_SQ = 1.0 / np.sqrt(2.0)
GATE_MATRICES: dict[str, np.ndarray] = {
    "x": np.array([[0, 1], [1, 0]], dtype=np.complex128),
    "y": np.array([[0, -1j], [1j, 0]], dtype=np.complex128),
    "z": np.array([[1, 0], [0, -1]], dtype=np.complex128),
    "h": np.array([[_SQ, _SQ], [_SQ, -_SQ]], dtype=np.complex128),
    "s": np.array([[1, 0], [0, 1j]], dtype=np.complex128),
    "sdg": np.array([[1, 0], [0, -1j]], dtype=np.complex128),
    "sx": 0.5 * np.array([[1 + 1j, 1 - 1j], [1 - 1j, 1 + 1j]], dtype=np.complex128),
}


def _rotation_matrix(name: str, angle: float) -> np.ndarray:
    c, s = np.cos(angle / 2.0), np.sin(angle / 2.0)
    if name == "rx":
        return np.array([[c, -1j * s], [-1j * s, c]], dtype=np.complex128)
    if name == "ry":
        return np.array([[c, -s], [s, c]], dtype=np.complex128)
    return np.array([[c - 1j * s, 0], [0, c + 1j * s]], dtype=np.complex128)  # rz


def _check_state(state: np.ndarray, n_qubits: int | None = None) -> tuple[np.ndarray, int]:
    if not isinstance(state, np.ndarray):
        raise TypeError(f"state must be a numpy.ndarray, got {type(state).__name__}")
    if state.ndim != 1 or state.size == 0 or state.size & (state.size - 1):
        raise ConfigError(f"state must be a 1-D array of length 2**n, got shape {state.shape}")
    n = state.size.bit_length() - 1
    if n_qubits is not None and n != n_qubits:
        raise ConfigError(f"state has {n} qubits but the operator acts on {n_qubits}")
    return np.asarray(state, dtype=np.complex128), n


def _check_row(row: np.ndarray, n: int, name: str) -> np.ndarray:
    if not isinstance(row, np.ndarray | list | tuple):
        raise TypeError(
            f"{name} must be a numpy array, list or tuple of bits, got {type(row).__name__}"
        )
    r = np.asarray(row).astype(bool).reshape(-1)
    if r.size != n:
        raise ConfigError(f"{name} has {r.size} entries but the state has {n} qubits")
    return r


def basis_state(bits: np.ndarray) -> np.ndarray:
    """Computational basis state ``|bits>`` (character/entry ``k`` = qubit ``k``).

    Args:
        bits: 0/1 array of length ``n_qubits``.

    Returns:
        complex128 vector of length ``2**n_qubits`` with a single 1.

    Example:
        >>> np.flatnonzero(basis_state(np.array([1, 0, 0])))
        array([4])
    """
    if not isinstance(bits, np.ndarray | list | tuple):
        raise TypeError(f"bits must be a numpy array, list or tuple, got {type(bits).__name__}")
    b = np.asarray(bits).reshape(-1)
    if b.size == 0 or not np.all((b == 0) | (b == 1)):
        raise ConfigError("bits must be a non-empty sequence of 0/1 values")
    state = np.zeros(1 << b.size, dtype=np.complex128)
    state[int(bits_to_mask(b.astype(bool)))] = 1.0
    return state


def apply_pauli(state: np.ndarray, x_row: np.ndarray, z_row: np.ndarray) -> np.ndarray:
    """Return ``P(x_row, z_row)|state>`` for one Hermitian Pauli string.

    Args:
        state: complex vector of length ``2**n``.
        x_row, z_row: 0/1 rows of length ``n`` (``Y`` where both are set).

    Returns:
        A new complex128 vector.
    """
    psi, n = _check_state(state)
    x = _check_row(x_row, n, "x_row")
    z = _check_row(z_row, n, "z_row")
    xm = int(bits_to_mask(x))
    zm = int(bits_to_mask(z))
    idx = np.arange(psi.size, dtype=np.int64)
    phase = _I_POWERS[int(np.count_nonzero(x & z)) % 4]
    signed = psi * (1.0 - 2.0 * (np.bitwise_count(idx & zm) & 1))
    # P|b> = phase(b)|b ^ xm>  =>  out[c] = phase(c ^ xm) psi[c ^ xm]
    return phase * signed[idx ^ xm]


def apply_pauli_rotation(
    state: np.ndarray, x_row: np.ndarray, z_row: np.ndarray, angle: float
) -> np.ndarray:
    """Return ``exp(-i angle/2 P)|state> = cos(angle/2)|state> - i sin(angle/2) P|state>``.

    Args:
        state: complex vector of length ``2**n``.
        x_row, z_row: 0/1 rows of the Hermitian Pauli string ``P``.
        angle: rotation angle in radians (``rz(t) = exp(-i t Z/2)`` convention).

    Returns:
        A new complex128 vector.
    """
    if isinstance(angle, bool) or not isinstance(angle, int | float | np.integer | np.floating):
        raise TypeError(f"angle must be a real number, got {type(angle).__name__}")
    psi, _ = _check_state(state)
    p_psi = apply_pauli(psi, x_row, z_row)
    return np.cos(angle / 2.0) * psi - 1j * np.sin(angle / 2.0) * p_psi


def _cached_csr(grp: XMaskGroups):
    """The group table as a cached CSR matrix (small problems only)."""
    if grp._csr_cache is None:
        grp._csr_cache = grp.to_csr()
    return grp._csr_cache


def _apply_groups_large(grp: XMaskGroups, psi: np.ndarray) -> np.ndarray:
    """Loop over x-mask groups without forming any matrix.

    Groups are visited sorted by the low part of their mask: the column permutation (low qubits)
    is one gather shared by all groups with that low mask. Rows (high qubits) are processed in
    cache-sized blocks; the row permutation inside a block is a flipped strided view, and each
    block of the group's diagonal is rebuilt from its rank factors
    (:meth:`XMaskGroups.real_factors`, duplicated along the interleaved real/imaginary layout of
    ``psi``), so memory stays ``O(2**n)`` and nothing is cached per basis state.
    """
    n_high, n_low = grp.n_high, grp.n_low
    rows, cols = 1 << n_high, 1 << n_low
    low = cols - 1
    k = max(0, min(n_high, 16 - (n_low + 1)))  # block = 2**k rows, about 2**16 floats
    block = 1 << k
    sign_high, sign_low = grp.sign_tables()
    factors = grp.real_factors()
    psi2 = psi.reshape(rows, cols)
    out = np.zeros((rows, cols), dtype=np.complex128)
    out_f = out.view(np.float64)  # (rows, 2 * cols), real/imaginary interleaved
    bshape_f = (2,) * k + (2 * cols,)
    bshape_c = (2,) * k + (cols,)
    dbuf = np.empty((block, 2 * cols))
    tmp = np.empty((block, 2 * cols))
    dbuf_b, tmp_b = dbuf.reshape(bshape_f), tmp.reshape(bshape_f)
    col_index = np.arange(cols, dtype=np.int64)
    order = np.lexsort((grp.masks >> n_low, grp.masks & low))
    current = -1
    src_f = psi2.view(np.float64)
    for g in order:
        m = int(grp.masks[g])
        ml, mh = m & low, m >> n_low
        if ml != current:
            src = np.take(psi2, col_index ^ ml, axis=1) if ml else psi2
            src_f = np.ascontiguousarray(src).view(np.float64)
            current = ml
        hi, lo = mh & ~(block - 1), mh & (block - 1)
        flip = tuple(
            slice(None, None, -1) if (lo >> (k - 1 - j)) & 1 else slice(None) for j in range(k)
        )
        a, b = int(grp.starts[g]), int(grp.starts[g + 1])
        real = factors[g]
        if real is None:  # complex phases (odd number of Y letters): complex arithmetic
            w = grp.weights[a:b]
            left_re = sign_high[a:b].T * w.real
            left_im = sign_high[a:b].T * w.imag
        for r0 in range(0, rows, block):
            src_blk = src_f[(r0 ^ hi) : (r0 ^ hi) + block]
            if real is None:
                diag = left_re[r0 : r0 + block] @ sign_low[a:b]
                diag = diag + 1j * (left_im[r0 : r0 + block] @ sign_low[a:b])
                src_c = src_blk.view(np.complex128).reshape(bshape_c)[flip]
                out[r0 : r0 + block] += (diag.reshape(bshape_c) * src_c).reshape(block, cols)
                continue
            u, v2 = real
            if u.shape[0] > _RANK_BLAS:
                np.matmul(u[:, r0 : r0 + block].T, v2, out=dbuf)
            else:  # short sum of outer products: tiny GEMMs would only wake BLAS threads
                np.multiply(u[0, r0 : r0 + block, None], v2[0], out=dbuf)
                for j in range(1, u.shape[0]):
                    np.multiply(u[j, r0 : r0 + block, None], v2[j], out=tmp)
                    dbuf += tmp
            np.multiply(dbuf_b, src_blk.reshape(bshape_f)[flip], out=tmp_b)
            out_f[r0 : r0 + block] += tmp
    return out.reshape(-1)


def apply_pauli_expansion(state: np.ndarray, ham: PauliExpansion) -> np.ndarray:
    """Return ``H|state>`` for a :class:`PauliExpansion` ``H``.

    Terms are grouped by their ``x`` pattern (same permutation of basis states), so the cost is
    ``O(n_groups * 2**n)`` rather than ``O(n_terms * 2**n)``; the grouping is cached on ``ham``.
    Small problems (``n_groups * 2**n <= 2**24``) compile the groups once into a cached CSR
    matrix (built row-major from the groups, no sorting) and reuse it on every call, which is what
    an optimizer loop wants; larger ones loop over groups with ``O(2**n)`` extra memory.

    Args:
        state: complex vector of length ``2**ham.n_qubits``.
        ham: the operator.

    Returns:
        A new complex128 vector.
    """
    if not isinstance(ham, PauliExpansion):
        raise TypeError(f"apply_pauli_expansion accepts a PauliExpansion, got {type(ham).__name__}")
    psi, _ = _check_state(state, ham.n_qubits)
    grp = ham.compile()
    if grp.n_groups == 0:
        return np.zeros_like(psi)
    if grp.n_qubits < 4 or grp.n_groups * psi.size <= _CSR_LIMIT:
        return np.asarray(_cached_csr(grp) @ psi, dtype=np.complex128)
    return _apply_groups_large(grp, psi)


def expectation(state: np.ndarray, ham: PauliExpansion) -> float:
    """``<state|H|state>`` (real part) for a normalised ``state``.

    Args:
        state: complex vector of length ``2**ham.n_qubits``.
        ham: the operator.

    Returns:
        The expectation value as a float.
    """
    psi, _ = _check_state(state, getattr(ham, "n_qubits", None))
    return float(np.vdot(psi, apply_pauli_expansion(psi, ham)).real)


def apply_matrix_1q(
    states: np.ndarray, qubit: int, matrix: np.ndarray, out: np.ndarray | None = None
) -> np.ndarray:
    """Apply a 2x2 ``matrix`` to ``qubit`` of one state or a batch of states (last axis ``2**n``).

    The kernel of every one-qubit gate in eigensweep: circuits (:func:`apply_gate`), the
    estimators' measurement basis changes and readout confusion, and the synthetic device's
    trajectories. The result has the common dtype of ``states`` and ``matrix`` (a real
    ``matrix`` on real probabilities stays real).

    Args:
        states: array ``(..., 2**n)``; not modified.
        qubit: target qubit (qubit 0 = most significant bit).
        matrix: ``(2, 2)`` array.
        out: optional array of the result's shape and dtype to write into (not ``states``).

    Returns:
        A new array of the same shape (or ``out``).
    """
    dim = states.shape[-1]
    lead = states.shape[:-1]
    v = states.reshape(lead + (1 << qubit, 2, dim >> (qubit + 1)))
    if out is None:
        out = np.empty(v.shape, dtype=np.result_type(states, matrix))
    res = out.reshape(v.shape)
    a, b = v[..., 0, :], v[..., 1, :]
    o0, o1 = res[..., 0, :], res[..., 1, :]
    # written into the output halves (no temporaries of the full size): several times faster
    np.multiply(a, matrix[0, 0], out=o0)
    o0 += matrix[0, 1] * b
    np.multiply(a, matrix[1, 0], out=o1)
    o1 += matrix[1, 1] * b
    return res.reshape(states.shape)


def apply_cx(
    states: np.ndarray, control: int, target: int, out: np.ndarray | None = None
) -> np.ndarray:
    """CNOT on one state or a batch of states (last axis ``2**n``); a new array (or ``out``,
    an array of the same shape and dtype other than ``states``)."""
    n = states.shape[-1].bit_length() - 1
    lead = states.shape[:-1]
    lo, hi = min(control, target), max(control, target)
    shape = lead + (1 << lo, 2, 1 << (hi - lo - 1), 2, 1 << (n - 1 - hi))
    if out is None:
        out = states.copy()
    else:
        np.copyto(out, states)
    v, src = out.reshape(shape), states.reshape(shape)
    # the two entries with the control set and the target 0 / 1 trade places
    if control < target:
        v[..., 1, :, 0, :], v[..., 1, :, 1, :] = src[..., 1, :, 1, :], src[..., 1, :, 0, :]
    else:
        v[..., 0, :, 1, :], v[..., 1, :, 1, :] = src[..., 1, :, 1, :], src[..., 0, :, 1, :]
    return out


def apply_cz(states: np.ndarray, a: int, b: int) -> np.ndarray:
    """Controlled-Z on one state or a batch (last axis ``2**n``); symmetric in ``a``, ``b``."""
    n = states.shape[-1].bit_length() - 1
    lead = states.shape[:-1]
    out = states.copy()
    v = out.reshape(lead + (2,) * n)
    sel: list = [slice(None)] * (len(lead) + n)
    sel[len(lead) + a] = 1
    sel[len(lead) + b] = 1
    v[tuple(sel)] *= -1
    return out


def apply_rxx(states: np.ndarray, a: int, b: int, angle: float) -> np.ndarray:
    """``rxx(t) = cos(t/2) I - i sin(t/2) X_a X_b`` on one state or a batch; a new array."""
    n = states.shape[-1].bit_length() - 1
    lead = states.shape[:-1]
    v = states.reshape(lead + (2,) * n)
    flipped = np.flip(np.flip(v, axis=len(lead) + a), axis=len(lead) + b).reshape(states.shape)
    return np.cos(angle / 2.0) * states - 1j * np.sin(angle / 2.0) * flipped


def _apply_two_qubit(states: np.ndarray, gate: Gate) -> np.ndarray:
    a, b = gate.qubits
    if gate.name == "cx":
        return apply_cx(states, a, b)
    if gate.name == "cz":
        return apply_cz(states, a, b)
    return apply_rxx(states, a, b, gate.params[0])


def gate_matrix(gate: Gate) -> np.ndarray:
    """The 2x2 matrix of a one-qubit :class:`~eigensweep.circuit.Gate` (OpenQASM 3 meaning)."""
    if gate.name in GATE_MATRICES:
        return GATE_MATRICES[gate.name]
    if gate.name not in ("rx", "ry", "rz") or len(gate.params) != 1:
        raise ConfigError(f"gate {gate.name} is not a one-qubit gate with known matrix")
    return _rotation_matrix(gate.name, gate.params[0])


def apply_gate_batch(states: np.ndarray, gate: Gate) -> np.ndarray:
    """Apply one gate to every state of a batch ``(batch, 2**n)`` (no input checks)."""
    if len(gate.qubits) == 2:
        return _apply_two_qubit(states, gate)
    return apply_matrix_1q(states, gate.qubits[0], gate_matrix(gate))


def apply_gate_density_(rho: np.ndarray, gate: Gate, n_qubits: int, work: np.ndarray) -> np.ndarray:
    """``rho <- U rho U^dagger`` for a density matrix stored as a vector of ``4**n_qubits``
    entries, in place (``work``: scratch array of the same shape and dtype).

    The vector is ``rho.reshape(-1)`` (row index in the high bits), i.e. a state of
    ``2 n_qubits`` qubits whose qubit ``q`` is the row's and qubit ``n_qubits + q`` the column's
    qubit ``q``: ``U rho U^dagger`` is the gate's kernel with ``U`` on ``q`` and ``conj(U)`` on
    ``n_qubits + q``. Used by the noise simulator (:mod:`eigensweep.qubit.noise`); no input
    checks. Returns ``rho``.
    """
    n = int(n_qubits)
    if gate.name == "cx":
        c, t = gate.qubits
        apply_cx(rho, c, t, out=work)
        return apply_cx(work, n + c, n + t, out=rho)
    if gate.name == "cz":  # real: the same kernel on both indices
        a, b = gate.qubits
        rho[...] = apply_cz(apply_cz(rho, a, b), n + a, n + b)
        return rho
    if gate.name == "rxx":  # conj(rxx(t)) = rxx(-t)
        a, b = gate.qubits
        t = gate.params[0]
        rho[...] = apply_rxx(apply_rxx(rho, a, b, t), n + a, n + b, -t)
        return rho
    m = gate_matrix(gate)
    q = gate.qubits[0]
    apply_matrix_1q(rho, q, m, out=work)
    return apply_matrix_1q(work, n + q, m.conj(), out=rho)


def apply_gate(state: np.ndarray, gate: Gate, n_qubits: int) -> np.ndarray:
    """Apply one :class:`eigensweep.circuit.Gate` (OpenQASM 3 ``stdgates`` meaning).

    Args:
        state: complex vector of length ``2**n_qubits``.
        gate: the gate (``cx`` has the control first).
        n_qubits: number of qubits of the register.

    Returns:
        A new complex128 vector.
    """
    if not isinstance(gate, Gate):
        raise TypeError(f"apply_gate accepts an eigensweep.circuit.Gate, got {type(gate).__name__}")
    psi, _ = _check_state(state, n_qubits)
    if gate.name not in KNOWN_GATES:
        raise ConfigError(f"unknown gate {gate.name!r}; known: {sorted(KNOWN_GATES)}")
    if any(not 0 <= q < n_qubits for q in gate.qubits):
        raise ConfigError(f"gate {gate.name} acts on {gate.qubits}, outside 0..{n_qubits - 1}")
    if gate.name in TWO_QUBIT:
        if len(gate.qubits) != 2 or gate.qubits[0] == gate.qubits[1]:
            raise ConfigError(f"{gate.name} needs two distinct qubits, got {gate.qubits}")
        if gate.name == "rxx" and len(gate.params) != 1:
            raise ConfigError(f"rxx needs one angle, got {gate.params}")
        return _apply_two_qubit(psi, gate)
    if len(gate.qubits) != 1:
        raise ConfigError(f"gate {gate.name} acts on one qubit, got {gate.qubits}")
    if gate.name not in GATE_MATRICES and len(gate.params) != 1:
        raise ConfigError(f"gate {gate.name} needs one angle, got {gate.params}")
    return apply_matrix_1q(psi, gate.qubits[0], gate_matrix(gate))


def simulate(circuit: Circuit, initial: np.ndarray | None = None) -> np.ndarray:
    """Run a circuit on a statevector.

    Args:
        circuit: the gate list.
        initial: starting state (default ``|0...0>``); not modified.

    Returns:
        The final complex128 statevector.
    """
    if not isinstance(circuit, Circuit):
        raise TypeError(
            f"simulate accepts an eigensweep.circuit.Circuit, got {type(circuit).__name__}"
        )
    if initial is None:
        psi = np.zeros(1 << circuit.n_qubits, dtype=np.complex128)
        psi[0] = 1.0
    else:
        psi, _ = _check_state(initial, circuit.n_qubits)
        psi = psi.copy()
    for gate in circuit.gates:
        psi = apply_gate(psi, gate, circuit.n_qubits)
    return psi


def probabilities_to_distribution(
    probs: np.ndarray, n_qubits: int, cutoff: float = 1e-12
) -> dict[str, float]:
    """``{bitstring: probability}`` for entries ``>= cutoff``; character ``k`` is qubit ``k``."""
    probs = np.asarray(probs, dtype=float)
    return {
        format(int(i), f"0{n_qubits}b"): float(probs[i]) for i in np.flatnonzero(probs >= cutoff)
    }


class PauliStrings:
    """Fixed Pauli strings applied many times (ansatz gates): ``P_k psi`` and rotations.

    Single-qubit strings act on a reshaped view; multi-qubit strings use precomputed tables
    ``P_k psi = phase_k * sign_k * psi[perm_k]`` when they fit in :attr:`TABLE_BUDGET` bytes
    (one sign vector per string, one index vector per distinct X part), otherwise the generic
    :func:`apply_pauli` / :func:`apply_pauli_rotation`. Tables are built on first use.

    Args:
        strings: ``[(x_row, z_row), ...]`` bool rows of length ``n_qubits``.
        n_qubits: register size.
    """

    #: bytes of precomputed multi-qubit tables allowed per set of strings
    TABLE_BUDGET = 256 * 2**20

    def __init__(self, strings: list[tuple[np.ndarray, np.ndarray]], n_qubits: int) -> None:
        self.strings = [(np.asarray(x, dtype=bool), np.asarray(z, dtype=bool)) for x, z in strings]
        self.n_qubits = int(n_qubits)
        self._single: list[tuple[int, str]] = []
        for x, z in self.strings:
            support = np.flatnonzero(x | z)
            if support.size == 1:
                q = int(support[0])
                self._single.append((q, "Y" if x[q] and z[q] else ("X" if x[q] else "Z")))
            else:
                self._single.append((-1, ""))
        self._tables: list[tuple[np.ndarray, np.ndarray, complex] | None] | None = None

    def _build_tables(self) -> list[tuple[np.ndarray, np.ndarray, complex] | None]:
        n = self.n_qubits
        dim = 1 << n
        multi = [k for k, (q, _) in enumerate(self._single) if q < 0]
        weights = 1 << (n - 1 - np.arange(n, dtype=np.int64))  # qubit 0 = most significant bit
        xms = {int(weights @ self.strings[k][0]) for k in multi}
        if 8 * dim * (len(multi) + len(xms)) > self.TABLE_BUDGET:
            return [None] * len(self.strings)
        idx = np.arange(dim, dtype=np.int64)
        perms = {xm: idx ^ xm for xm in xms}
        tables: list[tuple[np.ndarray, np.ndarray, complex] | None] = [None] * len(self.strings)
        for k in multi:
            x, z = self.strings[k]
            perm = perms[int(weights @ x)]
            zm = int(weights @ z)
            sign = 1.0 - 2.0 * (np.bitwise_count(perm & zm) & 1)
            phase = (1j) ** int(np.count_nonzero(x & z))
            tables[k] = (perm, sign, complex(phase))
        return tables

    def _table(self, k: int) -> tuple[np.ndarray, np.ndarray, complex] | None:
        if self._tables is None:
            self._tables = self._build_tables()
        return self._tables[k]

    def rotate(self, psi: np.ndarray, k: int, angle: float) -> np.ndarray:
        """``exp(-i angle/2 P_k) psi`` (a new array)."""
        q, letter = self._single[k]
        if q < 0:
            table = self._table(k)
            if table is None:
                x, z = self.strings[k]
                return apply_pauli_rotation(psi, x, z, angle)
            perm, sign, phase = table
            flipped = psi[perm]
            flipped *= sign
            out = np.cos(angle / 2.0) * psi
            out += (-1j * np.sin(angle / 2.0) * phase) * flipped
            return out
        v = psi.reshape(1 << q, 2, -1)
        c, s = np.cos(angle / 2.0), np.sin(angle / 2.0)
        out = np.empty_like(v)
        a, b = v[:, 0, :], v[:, 1, :]
        if letter == "Z":
            out[:, 0, :] = (c - 1j * s) * a
            out[:, 1, :] = (c + 1j * s) * b
        elif letter == "X":
            out[:, 0, :] = c * a - 1j * s * b
            out[:, 1, :] = c * b - 1j * s * a
        else:  # Y
            out[:, 0, :] = c * a - s * b
            out[:, 1, :] = c * b + s * a
        return out.reshape(-1)

    def rotate_batch(self, psis: np.ndarray, k: int, angles: np.ndarray) -> np.ndarray:
        """``exp(-i angles[b]/2 P_k) psis[b]`` for a batch ``(B, 2**n)`` (a new array).

        Row ``b`` is computed with the same floating-point operations as
        :meth:`rotate` (``psis[b], k, angles[b]``), so the results agree bit for bit; one call
        for the batch saves the per-call overhead of many small states (parameter shifts).
        """
        angles = np.asarray(angles, dtype=float).reshape(-1)
        c, s = np.cos(angles / 2.0), np.sin(angles / 2.0)
        q, letter = self._single[k]
        if q < 0:
            table = self._table(k)
            if table is None:
                x, z = self.strings[k]
                return np.array(
                    [
                        apply_pauli_rotation(p, x, z, float(a))
                        for p, a in zip(psis, angles, strict=True)
                    ]
                )
            perm, sign, phase = table
            flipped = psis[:, perm]
            flipped *= sign
            out = c[:, None] * psis
            out += ((-1j * s) * phase)[:, None] * flipped
            return out
        v = psis.reshape(psis.shape[0], 1 << q, 2, -1)
        c, s = c[:, None, None], s[:, None, None]
        out = np.empty_like(v)
        a, b = v[:, :, 0, :], v[:, :, 1, :]
        if letter == "Z":
            out[:, :, 0, :] = (c - 1j * s) * a
            out[:, :, 1, :] = (c + 1j * s) * b
        elif letter == "X":
            out[:, :, 0, :] = c * a - 1j * s * b
            out[:, :, 1, :] = c * b - 1j * s * a
        else:  # Y
            out[:, :, 0, :] = c * a - s * b
            out[:, :, 1, :] = c * b + s * a
        return out.reshape(psis.shape)

    def apply(self, psi: np.ndarray, k: int) -> np.ndarray:
        """``P_k psi`` (a new array)."""
        q, letter = self._single[k]
        if q < 0:
            table = self._table(k)
            if table is None:
                x, z = self.strings[k]
                return apply_pauli(psi, x, z)
            perm, sign, phase = table
            out = psi[perm]
            out *= sign
            out *= phase
            return out
        v = psi.reshape(1 << q, 2, -1)
        out = np.empty_like(v)
        if letter == "Z":
            out[:, 0, :] = v[:, 0, :]
            out[:, 1, :] = -v[:, 1, :]
        elif letter == "X":
            out[:, 0, :] = v[:, 1, :]
            out[:, 1, :] = v[:, 0, :]
        else:
            out[:, 0, :] = -1j * v[:, 1, :]
            out[:, 1, :] = 1j * v[:, 0, :]
        return out.reshape(-1)
