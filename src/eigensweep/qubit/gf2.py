"""Linear algebra over GF(2) (bits with XOR as addition): the one home of it in eigensweep.

Used by the linear fermion-to-qubit encodings (:mod:`eigensweep.qubit.mapping`: inverse of the
encoding matrix) and by Z2 tapering (:mod:`eigensweep.qubit.taper`: null space of the
symplectic check matrix, Bravyi, Gambetta, Mezzacapo, Temme, arXiv:1701.08213). Everything is
Gauss-Jordan elimination (textbook; e.g. Nielsen & Chuang (2000), section 10.5.1, for its use
on check matrices).
"""

from __future__ import annotations

import numpy as np

__all__ = ["inverse", "null_space", "rank", "rref"]


def rref(mat: np.ndarray, col_order: np.ndarray | None = None) -> tuple[np.ndarray, list[int]]:
    """Reduced row-echelon form over GF(2), pivots searched in ``col_order``.

    Args:
        mat: binary ``(rows, cols)`` matrix (any integer or bool dtype).
        col_order: the order in which columns are tried as pivots (default ascending).

    Returns:
        ``(rows, pivots)``: the nonzero rows (bool) and their pivot columns.

    Example:
        >>> rref(np.array([[1, 1], [1, 0]]))[1]
        [0, 1]
    """
    m = np.array(mat, dtype=bool, copy=True)
    n_rows, n_cols = m.shape
    order = np.arange(n_cols) if col_order is None else np.asarray(col_order)
    pivots: list[int] = []
    r = 0
    for c in order:
        if r == n_rows:
            break
        cand = np.flatnonzero(m[r:, c])
        if cand.size == 0:
            continue
        p = r + cand[0]
        if p != r:
            m[[r, p]] = m[[p, r]]
        others = np.flatnonzero(m[:, c])
        others = others[others != r]
        m[others] ^= m[r]
        pivots.append(int(c))
        r += 1
    return m[:r], pivots


def rank(rows: np.ndarray) -> int:
    """Rank over GF(2) of a binary matrix (0 for an empty one)."""
    return len(rref(rows)[1]) if rows.shape[0] else 0


def null_space(mat: np.ndarray) -> np.ndarray:
    """Basis of ``{v : mat @ v = 0 (mod 2)}``, one vector per free column (deterministic).

    Args:
        mat: binary ``(rows, cols)`` matrix.

    Returns:
        bool array ``(dim, cols)``.
    """
    mat = np.asarray(mat, dtype=bool)
    n_cols = mat.shape[1]
    reduced, pivots = rref(mat)
    free = [c for c in range(n_cols) if c not in set(pivots)]
    basis = np.zeros((len(free), n_cols), dtype=bool)
    for i, f in enumerate(free):
        basis[i, f] = True
        for row, p in zip(reduced, pivots, strict=True):
            if row[f]:
                basis[i, p] = True
    return basis


def inverse(mat: np.ndarray) -> np.ndarray:
    """Inverse of a square binary matrix over GF(2): the right half of ``rref([A | I])``.

    Raises:
        ValueError: the matrix is singular over GF(2).

    Example:
        >>> inverse(np.tril(np.ones((3, 3), dtype=np.uint8)))
        array([[1, 0, 0],
               [1, 1, 0],
               [0, 1, 1]], dtype=uint8)
    """
    a = np.asarray(mat)
    n = a.shape[0]
    if a.shape != (n, n):
        raise ValueError(f"GF(2) inverse needs a square matrix, got shape {a.shape}")
    reduced, pivots = rref(np.concatenate([a.astype(bool), np.eye(n, dtype=bool)], axis=1))
    if pivots[:n] != list(range(n)):
        raise ValueError("matrix is singular over GF(2)")
    return reduced[:n, n:].astype(np.uint8)
