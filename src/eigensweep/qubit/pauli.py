"""Real-weighted sums of Pauli strings in symplectic (binary) form.

A Pauli string on ``n`` qubits is stored as two bit rows ``x`` and ``z`` (the symplectic, or
"check-matrix", representation of the stabilizer formalism; Gottesman, PhD thesis, Caltech 1997,
arXiv:quant-ph/9705052). Qubit ``k`` carries the letter

    ========  =====  =====
    letter     x_k    z_k
    ========  =====  =====
    ``I``       0      0
    ``X``       1      0
    ``Y``       1      1
    ``Z``       0      1
    ========  =====  =====

and the string is the Hermitian tensor product of those letters, ``P(x, z) = i^{x.z} X^x Z^z``
(``x.z`` counted as an integer, the number of ``Y`` letters). A :class:`PauliExpansion` is
``sum_t coeffs[t] * P(x[t], z[t])`` with real ``coeffs``, i.e. a Hermitian operator.

Conventions follow :mod:`eigensweep.circuit`: qubit ``k`` is spin orbital ``k`` (interleaved
alpha/beta), in a statevector qubit 0 is the most significant bit of the basis-state index (the
order of OpenFermion's ``get_sparse_operator``), and character ``k`` of a label is qubit ``k``.

Treat the arrays of a :class:`PauliExpansion` as immutable: methods return new objects.
"""

from __future__ import annotations

import hashlib
from dataclasses import dataclass, field
from typing import TYPE_CHECKING

import numpy as np
import scipy.sparse

if TYPE_CHECKING:
    from openfermion import QubitOperator

from ..errors import ConfigError, StageFileError

__all__ = [
    "PauliExpansion",
    "XMaskGroups",
    "pauli_product",
    "symplectic_inner",
    "bits_to_mask",
]

_LETTERS = np.array(list("IXYZ"))
_IMAG_TOL = 1e-12
_MINUS_I_POWERS = np.array([1.0, -1j, -1.0, 1j])  # (-i)^k, exact


def _letter_codes(x: np.ndarray, z: np.ndarray) -> np.ndarray:
    """Letter code per qubit: I=0, X=1, Y=2, Z=3 (the sort order of canonical term lists)."""
    x8 = x.astype(np.uint8)
    z8 = z.astype(np.uint8)
    return x8 + z8 + 2 * z8 * (1 - x8)


def bits_to_mask(bits: np.ndarray) -> np.ndarray:
    """Integer masks of bit rows with qubit 0 as the most significant bit.

    Args:
        bits: bool/int array ``(..., n_qubits)``; ``n_qubits <= 62``.

    Returns:
        int64 array ``(...)``: ``sum_k bits[..., k] << (n_qubits - 1 - k)``.
    """
    bits = np.asarray(bits)
    n = bits.shape[-1]
    if n > 62:
        raise ConfigError(f"{n} qubits is beyond the 62-qubit limit of integer bit masks")
    weights = np.left_shift(np.int64(1), np.arange(n - 1, -1, -1, dtype=np.int64))
    return (bits.astype(np.int64) * weights).sum(axis=-1)


def symplectic_inner(x1: np.ndarray, z1: np.ndarray, x2: np.ndarray, z2: np.ndarray) -> np.ndarray:
    """Symplectic inner product ``x1.z2 + z1.x2 (mod 2)``: 0 where the strings commute.

    Args:
        x1, z1: bool rows ``(..., n)`` of the first strings.
        x2, z2: bool rows ``(..., n)`` of the second strings (broadcast against the first).

    Returns:
        bool array: True where the two Pauli strings anticommute.
    """
    return np.logical_xor.reduce((x1 & z2) ^ (z1 & x2), axis=-1)


def pauli_product(
    x1: np.ndarray, z1: np.ndarray, x2: np.ndarray, z2: np.ndarray
) -> tuple[np.ndarray, np.ndarray, np.ndarray]:
    """Product of Hermitian Pauli strings, ``P(x1, z1) P(x2, z2) = i^e P(x3, z3)``.

    With ``P(x, z) = i^{x.z} X^x Z^z`` and ``Z^z X^x = (-1)^{x.z} X^x Z^z`` the phase exponent is
    ``e = x1.z1 + x2.z2 + 2 z1.x2 - x3.z3 (mod 4)`` (dot products counted as integers).

    Args:
        x1, z1: bool rows ``(..., n)`` of the left factors.
        x2, z2: bool rows ``(..., n)`` of the right factors (broadcast against the left).

    Returns:
        ``(x3, z3, e)`` with ``e`` an int64 array of phase exponents in ``{0, 1, 2, 3}``.
    """
    x3 = x1 ^ x2
    z3 = z1 ^ z2
    e = (
        np.count_nonzero(x1 & z1, axis=-1)
        + np.count_nonzero(x2 & z2, axis=-1)
        + 2 * np.count_nonzero(z1 & x2, axis=-1)
        - np.count_nonzero(x3 & z3, axis=-1)
    )
    return x3, z3, np.mod(e, 4).astype(np.int64)


def _sign_matrix(zmasks: np.ndarray, n_bits: int) -> np.ndarray:
    """``S[t, b] = (-1)^{popcount(b & zmasks[t])}`` for ``b < 2**n_bits`` (float64)."""
    b = np.arange(1 << n_bits, dtype=np.int64)
    parity = np.bitwise_count(zmasks[:, None] & b[None, :]) & 1
    return 1.0 - 2.0 * parity


@dataclass(eq=False)
class XMaskGroups:
    """Terms of a :class:`PauliExpansion` grouped by their ``x`` pattern (the key of fast kernels).

    All strings with the same ``x`` row map basis state ``|b>`` to ``|b ^ m>``; only their
    diagonal phases differ. For the group with mask ``m`` the matrix elements are
    ``<c|H_m|c ^ m> = sum_t w_t (-1)^{popcount(c & z_t)}`` with ``w_t = coeff_t (-i)^{ny_t}`` and
    ``ny_t`` the number of ``Y`` letters (``P|b> = i^{ny} (-1)^{popcount(b & z)} |b ^ m>``).

    The diagonal of a group over all ``2**n`` rows factorises over a split of the qubits into a
    high part (``n_high`` most significant) and a low part: it is the matrix product
    ``sign_high[g].T @ diag(w) @ sign_low[g]`` of shape ``(2**n_high, 2**n_low)``, so BLAS does
    the heavy lifting and nothing of size ``2**n x 2**n`` is ever formed.

    Attributes:
        n_qubits: number of qubits.
        masks: int64 ``(G,)`` distinct ``x`` masks (qubit 0 = most significant bit), sorted.
        starts: int64 ``(G + 1,)`` term ranges of each group in the arrays below.
        zmasks: int64 ``(T,)`` ``z`` masks of the terms, ordered by group.
        weights: complex128 ``(T,)`` the ``w_t`` above.
        n_high, n_low: the qubit split used by the factorised diagonals.
    """

    n_qubits: int
    masks: np.ndarray
    starts: np.ndarray
    zmasks: np.ndarray
    weights: np.ndarray
    n_high: int
    n_low: int
    _sign_high: np.ndarray | None = field(default=None, repr=False)
    _sign_low: np.ndarray | None = field(default=None, repr=False)
    _csr_cache: scipy.sparse.csr_matrix | None = field(default=None, repr=False)
    _factor_cache: list | None = field(default=None, repr=False)

    @property
    def n_groups(self) -> int:
        return int(self.masks.shape[0])

    @property
    def is_real(self) -> bool:
        """True when every matrix element is real (even number of Y letters in every term)."""
        return bool(np.all(self.weights.imag == 0.0))

    def sign_tables(self) -> tuple[np.ndarray, np.ndarray]:
        """Return (and cache) the high/low sign matrices ``(T, 2**n_high)``, ``(T, 2**n_low)``."""
        if self._sign_high is None:
            low_mask = (1 << self.n_low) - 1
            self._sign_high = _sign_matrix(self.zmasks >> self.n_low, self.n_high)
            self._sign_low = _sign_matrix(self.zmasks & low_mask, self.n_low)
        return self._sign_high, self._sign_low

    def real_factors(self) -> list[tuple[np.ndarray, np.ndarray] | None]:
        """Per group, rank factors ``(U, V2)`` of a real diagonal: ``D = U.T @ V`` with one row
        per distinct low ``z`` part, ``U[j] = sum_t w_t sign_high[t]`` over the terms with that
        part and ``V2[j]`` its low sign row repeated twice (interleaved real/imaginary layout).
        None for groups with complex weights. Cached."""
        if self._factor_cache is None:
            sh, sl = self.sign_tables()
            low = (1 << self.n_low) - 1
            factors: list[tuple[np.ndarray, np.ndarray] | None] = []
            for g in range(self.n_groups):
                a, b = int(self.starts[g]), int(self.starts[g + 1])
                w = self.weights[a:b]
                if np.any(w.imag != 0.0):
                    factors.append(None)
                    continue
                zl = self.zmasks[a:b] & low
                uniq, first, inverse = np.unique(zl, return_index=True, return_inverse=True)
                u = np.zeros((uniq.size, sh.shape[1]))
                np.add.at(u, inverse.reshape(-1), sh[a:b] * w.real[:, None])
                factors.append((u, np.repeat(sl[a:b][first], 2, axis=1)))
            self._factor_cache = factors
        return self._factor_cache

    def group_diagonal(self, g: int) -> np.ndarray:
        """Matrix elements ``<c|H_g|c ^ m_g>`` for all ``c``, shaped ``(2**n_high, 2**n_low)``.

        Args:
            g: group index.

        Returns:
            float64 array when the group is real, complex128 otherwise.
        """
        sh, sl = self.sign_tables()
        a, b = int(self.starts[g]), int(self.starts[g + 1])
        w = self.weights[a:b]
        left = sh[a:b].T
        re = (left * w.real) @ sl[a:b]
        if np.any(w.imag != 0.0):
            return re + 1j * ((left * w.imag) @ sl[a:b])
        return re

    def block_diagonal(self, g: int, row_start: int, n_rows: int) -> np.ndarray:
        """Rows ``row_start : row_start + n_rows`` of :meth:`group_diagonal` (same dtype rule)."""
        sh, sl = self.sign_tables()
        a, b = int(self.starts[g]), int(self.starts[g + 1])
        w = self.weights[a:b]
        left = sh[a:b, row_start : row_start + n_rows].T
        re = (left * w.real) @ sl[a:b]
        if np.any(w.imag != 0.0):
            return re + 1j * ((left * w.imag) @ sl[a:b])
        return re

    def to_csr(self) -> scipy.sparse.csr_matrix:
        """The operator as a CSR matrix (float64 when real, else complex128), built without
        sorting: each row ``c`` holds ``H[c, c ^ m_g]`` for the groups whose entry is nonzero."""
        n = self.n_qubits
        dim = 1 << n
        dtype = np.float64 if self.is_real else np.complex128
        if self.n_groups == 0:
            return scipy.sparse.csr_matrix((dim, dim), dtype=dtype)
        cols_per_row = 1 << self.n_low
        # high rows per chunk so that n_groups * chunk stays near 2**22 entries
        chunk_high = max(1, min(1 << self.n_high, (1 << 22) // (self.n_groups * cols_per_row)))
        data, indices, counts = [], [], []
        for h0 in range(0, 1 << self.n_high, chunk_high):
            nh = min(chunk_high, (1 << self.n_high) - h0)
            vals = np.stack(
                [self.block_diagonal(g, h0, nh).reshape(-1) for g in range(self.n_groups)], axis=1
            ).astype(dtype, copy=False)  # (rows, G)
            rows = np.arange(h0 * cols_per_row, (h0 + nh) * cols_per_row, dtype=np.int64)
            keep = vals != 0
            data.append(vals[keep])
            indices.append((rows[:, None] ^ self.masks[None, :])[keep])
            counts.append(keep.sum(axis=1))
        indptr = np.zeros(dim + 1, dtype=np.int64)
        np.cumsum(np.concatenate(counts), out=indptr[1:])
        idx_dtype = np.int32 if indptr[-1] < 2**31 and dim < 2**31 else np.int64
        mat = scipy.sparse.csr_matrix(
            (
                np.concatenate(data),
                np.concatenate(indices).astype(idx_dtype),
                indptr.astype(idx_dtype),
            ),
            shape=(dim, dim),
        )
        mat.has_sorted_indices = False
        return mat

    def diagonal_at(self, g: int, rows: np.ndarray) -> np.ndarray:
        """Matrix elements ``<c|H_g|c ^ m_g>`` for selected basis states ``c = rows``."""
        a, b = int(self.starts[g]), int(self.starts[g + 1])
        parity = np.bitwise_count(rows[None, :] & self.zmasks[a:b, None]) & 1
        return self.weights[a:b] @ (1.0 - 2.0 * parity)


@dataclass(eq=False)
class PauliExpansion:
    """Hermitian operator ``sum_t coeffs[t] P(x[t], z[t])`` in symplectic form.

    Attributes:
        x: bool ``(n_terms, n_qubits)``, X part of each string.
        z: bool ``(n_terms, n_qubits)``, Z part of each string (``Y`` where both are set).
        coeffs: float64 ``(n_terms,)`` real coefficients.
        n_qubits: number of qubits.

    Example:
        >>> h = PauliExpansion.from_strings(["II", "ZI", "XX"], [-0.5, 0.25, 0.1])
        >>> h.labels(), h.one_norm_nonidentity
        (['II', 'XX', 'ZI'], 0.35)
    """

    x: np.ndarray
    z: np.ndarray
    coeffs: np.ndarray
    n_qubits: int
    _compiled: tuple | None = field(default=None, init=False, repr=False)

    def __post_init__(self) -> None:
        if isinstance(self.n_qubits, bool) or not isinstance(self.n_qubits, int | np.integer):
            raise TypeError(f"n_qubits must be an int, got {type(self.n_qubits).__name__}")
        self.n_qubits = int(self.n_qubits)
        if self.n_qubits < 0:
            raise ConfigError(f"n_qubits must be >= 0, got {self.n_qubits}")
        for name in ("x", "z", "coeffs"):
            if not isinstance(getattr(self, name), np.ndarray | list | tuple):
                raise TypeError(
                    f"PauliExpansion.{name} must be a numpy array, list or tuple, "
                    f"got {type(getattr(self, name)).__name__}"
                )
        coeffs = np.asarray(self.coeffs)
        if np.iscomplexobj(coeffs):
            if coeffs.size and np.max(np.abs(coeffs.imag)) >= _IMAG_TOL:
                raise ValueError(
                    "PauliExpansion coefficients must be real (the operator is Hermitian)"
                )
            coeffs = coeffs.real
        self.coeffs = np.ascontiguousarray(coeffs, dtype=np.float64).reshape(-1)
        shape = (self.coeffs.shape[0], self.n_qubits)
        x = np.ascontiguousarray(self.x, dtype=bool)
        z = np.ascontiguousarray(self.z, dtype=bool)
        for name, arr in (("x", x), ("z", z)):
            if arr.shape != shape and not (arr.size == 0 and shape[0] * shape[1] == 0):
                raise ConfigError(f"PauliExpansion.{name} has shape {arr.shape}, expected {shape}")
        self.x, self.z = x.reshape(shape), z.reshape(shape)

    # ------------------------------------------------------------------ constructors
    @classmethod
    def zero(cls, n_qubits: int) -> PauliExpansion:
        """The zero operator (no terms) on ``n_qubits`` qubits."""
        empty = np.zeros((0, n_qubits), dtype=bool)
        return cls(empty, empty.copy(), np.zeros(0), n_qubits)

    @classmethod
    def from_strings(cls, labels: list[str] | tuple[str, ...], coeffs) -> PauliExpansion:
        """Build from letter strings such as ``"IXZY"`` (character ``k`` is qubit ``k``).

        Args:
            labels: equal-length strings over ``I, X, Y, Z``.
            coeffs: real coefficient per label.

        Returns:
            The simplified sum (duplicates merged, exact zeros dropped, canonical order).
        """
        if isinstance(labels, str) or not isinstance(labels, list | tuple):
            raise TypeError(f"labels must be a list or tuple of str, got {type(labels).__name__}")
        if not labels:
            raise ConfigError(
                "labels is empty; use PauliExpansion.zero(n_qubits) for the zero operator"
            )
        n = len(labels[0])
        if any(len(s) != n for s in labels):
            raise ConfigError("all Pauli labels must have the same length")
        chars = np.array([list(s.upper()) for s in labels]).reshape(len(labels), n)
        if not np.all(np.isin(chars, list("IXYZ"))):
            raise ConfigError("Pauli labels may contain only the letters I, X, Y, Z")
        values = np.asarray(coeffs, dtype=float).reshape(-1)
        if values.size != len(labels):
            raise ConfigError(f"{len(labels)} labels but {values.size} coefficients")
        x = (chars == "X") | (chars == "Y")
        z = (chars == "Z") | (chars == "Y")
        return cls(x, z, values, n).combine_like_terms(atol=0.0)

    @classmethod
    def from_openfermion(cls, op: QubitOperator, n_qubits: int) -> PauliExpansion:
        """Convert an OpenFermion ``QubitOperator`` (Hermitian) to a :class:`PauliExpansion`.

        Args:
            op: the operator; coefficients must be real up to ``|imag| < 1e-12``.
            n_qubits: number of qubits (at least one more than the largest index used).

        Returns:
            The sum in canonical term order (exact zeros dropped, nothing else).

        Raises:
            TypeError: ``op`` is not a ``QubitOperator``.
            ValueError: a coefficient has ``|imag| >= 1e-12`` (the operator is not Hermitian).
            ConfigError: a term acts on a qubit ``>= n_qubits``.
        """
        from openfermion import QubitOperator

        if not isinstance(op, QubitOperator):
            raise TypeError(
                f"from_openfermion accepts openfermion.QubitOperator, got {type(op).__name__}"
            )
        if isinstance(n_qubits, bool) or not isinstance(n_qubits, int | np.integer):
            raise TypeError(f"n_qubits must be an int, got {type(n_qubits).__name__}")
        n_terms = len(op.terms)
        x = np.zeros((n_terms, n_qubits), dtype=bool)
        z = np.zeros((n_terms, n_qubits), dtype=bool)
        coeffs = np.zeros(n_terms)
        for t, (term, coeff) in enumerate(op.terms.items()):
            c = complex(coeff)
            if abs(c.imag) >= _IMAG_TOL:
                raise ValueError(
                    f"coefficient {c} of {term} is not real: the operator is not Hermitian "
                    "(for an anti-Hermitian generator A pass 1j * A)"
                )
            coeffs[t] = c.real
            for q, letter in term:
                if q >= n_qubits:
                    raise ConfigError(f"term {term} acts on qubit {q} but n_qubits is {n_qubits}")
                x[t, q] = letter in ("X", "Y")
                z[t, q] = letter in ("Z", "Y")
        return cls(x, z, coeffs, int(n_qubits)).combine_like_terms(atol=0.0)

    # ------------------------------------------------------------------ conversions
    def to_openfermion(self) -> QubitOperator:
        """Return the equivalent OpenFermion ``QubitOperator`` (real coefficients)."""
        from openfermion import QubitOperator

        op = QubitOperator()
        codes = _letter_codes(self.x, self.z)
        for t in range(self.n_terms):
            nz = np.flatnonzero(codes[t])
            key = tuple((int(q), str(_LETTERS[codes[t, q]])) for q in nz)
            op.terms[key] = op.terms.get(key, 0.0) + float(self.coeffs[t])
        return op

    def labels(self) -> list[str]:
        """Letter strings of the terms, character ``k`` = qubit ``k`` (e.g. ``"IXZY"``)."""
        if self.n_terms == 0:
            return []
        letters = _LETTERS[_letter_codes(self.x, self.z)]
        return ["".join(row) for row in letters]

    def to_store(self, prefix: str) -> dict[str, np.ndarray]:
        """Arrays for a stage file: ``{prefix}x``, ``{prefix}z`` (uint8), ``{prefix}coeffs``,
        ``{prefix}n_qubits`` (0-d int64). Use a prefix such as ``"hamiltonian_"``.

        Args:
            prefix: string prepended to each array name.

        Returns:
            name -> array.
        """
        if not isinstance(prefix, str):
            raise TypeError(f"prefix must be a str, got {type(prefix).__name__}")
        return {
            f"{prefix}x": self.x.astype(np.uint8),
            f"{prefix}z": self.z.astype(np.uint8),
            f"{prefix}coeffs": self.coeffs.copy(),
            f"{prefix}n_qubits": np.array(self.n_qubits, dtype=np.int64),
        }

    @classmethod
    def from_store(cls, arrays: dict[str, np.ndarray], prefix: str) -> PauliExpansion:
        """Inverse of :meth:`to_store`.

        Raises:
            StageFileError: an array is missing or the shapes disagree.
        """
        if not isinstance(arrays, dict):
            raise TypeError(f"arrays must be a dict of numpy arrays, got {type(arrays).__name__}")
        names = [f"{prefix}{k}" for k in ("x", "z", "coeffs", "n_qubits")]
        missing = [k for k in names if k not in arrays]
        if missing:
            raise StageFileError(
                f"stored Pauli sum {prefix!r} lacks arrays {missing}; recompute the stage"
            )
        n_qubits = int(np.asarray(arrays[names[3]]))
        coeffs = np.asarray(arrays[names[2]], dtype=np.float64)
        x = np.asarray(arrays[names[0]])
        z = np.asarray(arrays[names[1]])
        shape = (coeffs.shape[0], n_qubits)
        if coeffs.ndim != 1 or x.shape != shape or z.shape != shape:
            raise StageFileError(
                f"stored Pauli sum {prefix!r} has inconsistent shapes; recompute the stage"
            )
        return cls(x.astype(bool), z.astype(bool), coeffs, n_qubits)

    def sparse_matrix(self) -> scipy.sparse.csr_matrix:
        """Sparse complex ``2**n x 2**n`` matrix in OpenFermion's ``get_sparse_operator`` order.

        Built row-block by row-block from the x-mask groups (one shifted diagonal per distinct
        ``x`` row, see :class:`XMaskGroups`); entries that cancel to exactly zero are left out.
        """
        if self.n_qubits > 26:
            raise ConfigError(
                f"sparse_matrix on {self.n_qubits} qubits would not fit in memory; use apply_pauli_expansion"
            )
        return self.compile().to_csr().astype(np.complex128)

    # ------------------------------------------------------------------ algebra
    def combine_like_terms(self, atol: float = 1e-12) -> PauliExpansion:
        """Merge equal strings, drop terms with ``|coeff| <= atol``, sort canonically.

        Canonical order: identity first, then lexicographic by letters ``I < X < Y < Z`` with
        qubit 0 the most significant position. Deterministic for equal input.

        Args:
            atol: absolute tolerance below which a merged coefficient is dropped (``0`` drops
                only exact zeros).

        Returns:
            A new :class:`PauliExpansion`.
        """
        if self.n_terms == 0:
            return PauliExpansion.zero(self.n_qubits)
        codes = _letter_codes(self.x, self.z)
        uniq, inverse = np.unique(codes, axis=0, return_inverse=True)
        summed = np.zeros(uniq.shape[0])
        np.add.at(summed, inverse.reshape(-1), self.coeffs)
        keep = np.abs(summed) > atol
        uniq, summed = uniq[keep], summed[keep]
        if uniq.shape[0] > 1:
            order = np.lexsort(uniq.T[::-1])
            uniq, summed = uniq[order], summed[order]
        x = (uniq == 1) | (uniq == 2)
        z = (uniq == 2) | (uniq == 3)
        return PauliExpansion(x, z, summed, self.n_qubits)

    def __add__(self, other: PauliExpansion) -> PauliExpansion:
        if not isinstance(other, PauliExpansion):
            return NotImplemented
        if other.n_qubits != self.n_qubits:
            raise ConfigError(
                f"cannot add Pauli sums on {self.n_qubits} and {other.n_qubits} qubits"
            )
        return PauliExpansion(
            np.vstack([self.x, other.x]),
            np.vstack([self.z, other.z]),
            np.concatenate([self.coeffs, other.coeffs]),
            self.n_qubits,
        ).combine_like_terms(atol=0.0)

    def __mul__(self, scalar: float) -> PauliExpansion:
        if isinstance(scalar, bool) or not isinstance(
            scalar, int | float | np.integer | np.floating
        ):
            return NotImplemented
        return PauliExpansion(
            self.x.copy(), self.z.copy(), self.coeffs * float(scalar), self.n_qubits
        )

    __rmul__ = __mul__

    def subset(self, index: np.ndarray) -> PauliExpansion:
        """The terms selected by an index or boolean array, order kept."""
        return PauliExpansion(self.x[index], self.z[index], self.coeffs[index], self.n_qubits)

    def allclose(self, other: PauliExpansion, atol: float = 1e-10) -> bool:
        """True when both sums are the same operator up to ``atol`` per coefficient."""
        if not isinstance(other, PauliExpansion):
            raise TypeError(f"allclose compares with a PauliExpansion, got {type(other).__name__}")
        if other.n_qubits != self.n_qubits:
            return False
        diff = (self + other * -1.0).combine_like_terms(atol=atol)
        return diff.n_terms == 0

    def commutes_with(self, x_row: np.ndarray, z_row: np.ndarray) -> np.ndarray:
        """Bool per term: True where the term commutes with the string ``P(x_row, z_row)``."""
        return ~symplectic_inner(self.x, self.z, np.asarray(x_row, bool), np.asarray(z_row, bool))

    def is_diagonal(self) -> bool:
        """True when every term is a product of ``I`` and ``Z`` only."""
        return not bool(self.x.any())

    def diagonal_at(self, basis_states: np.ndarray) -> np.ndarray:
        """``<b|H|b>`` for integer basis-state indices ``b`` (qubit 0 = most significant bit)."""
        b = np.asarray(basis_states, dtype=np.int64).reshape(-1)
        diag_terms = ~self.x.any(axis=1)
        zm = bits_to_mask(self.z[diag_terms])
        parity = np.bitwise_count(zm[:, None] & b[None, :]) & 1
        return self.coeffs[diag_terms] @ (1.0 - 2.0 * parity)

    # ------------------------------------------------------------------ statistics
    @property
    def n_terms(self) -> int:
        return int(self.coeffs.shape[0])

    @property
    def identity_mask(self) -> np.ndarray:
        """Bool per term: True for the identity string."""
        return ~(self.x.any(axis=1) | self.z.any(axis=1))

    @property
    def identity_coeff(self) -> float:
        """Coefficient of the identity string (0 when absent)."""
        return float(self.coeffs[self.identity_mask].sum())

    @property
    def one_norm(self) -> float:
        """``sum_t |coeffs[t]|`` over all terms, identity included."""
        return float(np.abs(self.coeffs).sum())

    @property
    def one_norm_nonidentity(self) -> float:
        """``sum_t |coeffs[t]|`` over the non-identity terms."""
        return float(np.abs(self.coeffs[~self.identity_mask]).sum())

    # ------------------------------------------------------------------ fast kernels
    def _fingerprint(self) -> str:
        h = hashlib.sha1(self.x.tobytes())
        h.update(self.z.tobytes())
        h.update(self.coeffs.tobytes())
        h.update(str(self.x.shape).encode())
        return h.hexdigest()

    def compile(self) -> XMaskGroups:
        """Group the terms by ``x`` pattern for the statevector kernels (cached per content).

        Returns:
            The :class:`XMaskGroups` of this sum; recomputed if the arrays changed.
        """
        fp = self._fingerprint()
        if self._compiled is not None and self._compiled[0] == fp:
            return self._compiled[1]
        n = self.n_qubits
        xm = bits_to_mask(self.x) if n else np.zeros(self.n_terms, dtype=np.int64)
        zm = bits_to_mask(self.z) if n else np.zeros(self.n_terms, dtype=np.int64)
        order = np.argsort(xm, kind="stable")
        xm, zm, coeffs = xm[order], zm[order], self.coeffs[order]
        ny = np.bitwise_count(xm & zm).astype(np.int64)
        weights = coeffs * _MINUS_I_POWERS[ny % 4]
        masks, starts = np.unique(xm, return_index=True)
        starts = np.append(starts, xm.shape[0]).astype(np.int64)
        n_high = n // 2
        compiled = XMaskGroups(
            n_qubits=n,
            masks=masks.astype(np.int64),
            starts=starts,
            zmasks=zm,
            weights=weights.astype(np.complex128),
            n_high=n_high,
            n_low=n - n_high,
        )
        self._compiled = (fp, compiled)
        return compiled
