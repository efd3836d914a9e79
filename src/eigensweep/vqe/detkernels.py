"""Compiled kernels of the factored determinant-space gates (Numba, see :mod:`.detspace`).

A gate acts on the CI matrix ``C[ia, ib]`` (alpha string ``ia``, beta string ``ib``) through
at most one alpha string map and one beta string map. A string map is three arrays
``(src, dst, sign)``: ``T_spin |src[i]> = sign[i] |dst[i]>`` on the strings of one spin. The
pairs of determinants rotated by the gate are

* ``kind 0`` (alpha and beta operators, e.g. an alpha-beta double):
  ``(src_a[i], src_b[j]) <-> (dst_a[i], dst_b[j])`` with sign ``s * sign_a[i] * sign_b[j]``,
  the outer product of the two maps;
* ``kind 1`` (alpha operators only): ``(src_a[i], j) <-> (dst_a[i], j)`` for every beta ``j``;
* ``kind 2`` (beta operators only): ``(i, src_b[j]) <-> (i, dst_b[j])`` for every alpha ``i``.

so the memory of a gate grows with the number of strings, never with determinants x
excitations. Every pair is rotated by ``exp(phi G)`` exactly (``G^2 = -1`` on a pair, see
:mod:`.detspace`). Rows of different ``i`` in the outer loop never overlap (source and
destination strings of one map are distinct and disjoint), so the outer loops run in
parallel threads (``numba.prange``) without races; the thread count is set by the caller.

All maps of a gate sequence are packed into flat arrays (``m_src``, ``m_dst`` as 32-bit
string addresses, ``m_sign`` as 8-bit signs, offsets ``m_off``; map ``m`` is ``[m_off[m],
m_off[m + 1])``), and gate ``k`` refers to its maps by index (``g_a[k]``, ``g_b[k]``, ``-1`` =
none). The sequence kernels apply a whole sequence in one call (no Python work per gate),
block by block (below: consecutive gates sharing their row pairing, rows or columns are
applied together while that part of the CI matrix is in cache, which is what keeps a
(14e,14o) sweep near one sigma vector once the matrix no longer fits in the last-level
cache), and the backward kernel fuses the adjoint-gradient term with the un-application of the
gate to both the state and ``H|state>`` (Jones & Gacon, arXiv:2009.02823). Blocking only
reorders loops over independent rows, row pairs or columns: every amplitude sees the same
rotations in the same order as gate by gate.
"""

from __future__ import annotations

import numpy as np
from numba import njit, prange


@njit(cache=True, nogil=True, inline="always")
def _turn(C, rs, cs, rd, cd, c, ss):  # pragma: no cover
    """Rotate one determinant pair: ``(x, y) <- (c x - ss y, c y + ss x)``."""
    x = C[rs, cs]
    y = C[rd, cd]
    C[rs, cs] = c * x - ss * y
    C[rd, cd] = c * y + ss * x


@njit(cache=True, nogil=True, inline="always")
def _grad_unturn(P, L, rs, cs, rd, cd, c, ss, undo):  # pragma: no cover
    """``L[d] P[s] - L[s] P[d]`` of one pair (its adjoint-gradient term, unit sign) and, if
    ``undo``, the inverse rotation of that pair in both ``P`` and ``L``."""
    ps = P[rs, cs]
    pd = P[rd, cd]
    ls = L[rs, cs]
    ld = L[rd, cd]
    if undo:
        P[rs, cs] = c * ps + ss * pd
        P[rd, cd] = c * pd - ss * ps
        L[rs, cs] = c * ls + ss * ld
        L[rd, cd] = c * ld - ss * ls
    return ld * ps - ls * pd


@njit(parallel=True, cache=True, nogil=True)
def _rotate(C, kind, src_a, dst_a, sgn_a, src_b, dst_b, sgn_b, c, s):  # pragma: no cover
    """In place on the CI matrix ``C``: rotate every pair of one gate by ``(cos, sin*sign)``."""
    na, nb = C.shape
    if kind == 0:
        for i in prange(src_a.size):
            rs = src_a[i]
            rd = dst_a[i]
            sa = s * sgn_a[i]
            for j in range(src_b.size):
                cs = src_b[j]
                cd = dst_b[j]
                ss = sa * sgn_b[j]
                _turn(C, rs, cs, rd, cd, c, ss)
    elif kind == 1:
        for i in prange(src_a.size):
            rs = src_a[i]
            rd = dst_a[i]
            ss = s * sgn_a[i]
            for j in range(nb):
                _turn(C, rs, j, rd, j, c, ss)
    else:
        for i in prange(na):
            for j in range(src_b.size):
                cs = src_b[j]
                cd = dst_b[j]
                ss = s * sgn_b[j]
                _turn(C, i, cs, i, cd, c, ss)


@njit(parallel=True, cache=True, nogil=True)
def _expect(B, K, kind, src_a, dst_a, sgn_a, src_b, dst_b, sgn_b):  # pragma: no cover
    """``<B|G|K>`` for one gate with unit sign: ``sum sign * (B[dst] K[src] - B[src] K[dst])``."""
    na, nb = K.shape
    acc = 0.0
    if kind == 0:
        for i in prange(src_a.size):
            rs = src_a[i]
            rd = dst_a[i]
            row = 0.0
            for j in range(src_b.size):
                cs = src_b[j]
                cd = dst_b[j]
                row += sgn_b[j] * (B[rd, cd] * K[rs, cs] - B[rs, cs] * K[rd, cd])
            acc += sgn_a[i] * row
    elif kind == 1:
        for i in prange(src_a.size):
            rs = src_a[i]
            rd = dst_a[i]
            row = 0.0
            for j in range(nb):
                row += B[rd, j] * K[rs, j] - B[rs, j] * K[rd, j]
            acc += sgn_a[i] * row
    else:
        for i in prange(na):
            row = 0.0
            for j in range(src_b.size):
                cs = src_b[j]
                cd = dst_b[j]
                row += sgn_b[j] * (B[i, cd] * K[i, cs] - B[i, cs] * K[i, cd])
            acc += row
    return acc


# ---------------------------------------------------------------------------- blocked sweeps
# A sequence is cut into blocks of consecutive gates that share their loop structure:
#
# * block kind 0: alpha-beta gates with the same alpha map (UCCSD lists the alpha-beta doubles
#   alpha excitation by alpha excitation). Every gate of the block pairs the same rows
#   ``(src_a[i], dst_a[i])``, and different ``i`` never share a row, so the loops are swapped:
#   for each row pair, every gate of the block is applied in order (its beta map on the two
#   rows). Each element sees exactly the same operations in the same order as gate by gate;
#   the two rows stay in cache while the block runs instead of the whole matrix being streamed
#   once per gate.
# * block kind 1: alpha-only gates (whole rows rotated): every column is independent, so the
#   block runs tile by tile of ``TILE`` columns.
# * block kind 2: beta-only gates (rotations inside each row): every row is independent, so
#   the block runs row by row.
#
# Threads split the outer loop of a block (row pairs, column tiles, rows). Gradient terms of a
# block are summed per fixed chunk of the outer loop and then over chunks, so the result does
# not depend on the thread count.

TILE = 16
CHUNKS = 64


@njit(parallel=True, cache=True, nogil=True)
def _fwd_ab(C, a0, a1, g0, g1, g_b, c_k, s_k, m_off, m_src, m_dst, m_sign):  # pragma: no cover
    for i in prange(a1 - a0):
        rs = m_src[a0 + i]
        rd = m_dst[a0 + i]
        sa = m_sign[a0 + i]
        for k in range(g0, g1):
            c = c_k[k]
            sk = s_k[k] * sa
            for j in range(m_off[g_b[k]], m_off[g_b[k] + 1]):
                cs = m_src[j]
                cd = m_dst[j]
                ss = sk * m_sign[j]
                _turn(C, rs, cs, rd, cd, c, ss)


@njit(parallel=True, cache=True, nogil=True)
def _fwd_a(C, g0, g1, g_a, c_k, s_k, m_off, m_src, m_dst, m_sign):  # pragma: no cover
    nb = C.shape[1]
    for t in prange((nb + TILE - 1) // TILE):
        j0 = t * TILE
        j1 = min(nb, j0 + TILE)
        for k in range(g0, g1):
            c = c_k[k]
            for i in range(m_off[g_a[k]], m_off[g_a[k] + 1]):
                rs = m_src[i]
                rd = m_dst[i]
                ss = s_k[k] * m_sign[i]
                for j in range(j0, j1):
                    _turn(C, rs, j, rd, j, c, ss)


@njit(parallel=True, cache=True, nogil=True)
def _fwd_b(C, g0, g1, g_b, c_k, s_k, m_off, m_src, m_dst, m_sign):  # pragma: no cover
    for i in prange(C.shape[0]):
        for k in range(g0, g1):
            c = c_k[k]
            for j in range(m_off[g_b[k]], m_off[g_b[k] + 1]):
                cs = m_src[j]
                cd = m_dst[j]
                ss = s_k[k] * m_sign[j]
                _turn(C, i, cs, i, cd, c, ss)


@njit(parallel=True, cache=True, nogil=True)
def _bwd_ab(P, L, a0, a1, g0, g1, g_b, c_k, s_k, m_off, m_src, m_dst, m_sign):  # pragma: no cover
    n = a1 - a0
    nchunk = min(CHUNKS, n)
    acc = np.zeros((nchunk, g1 - g0))
    for t in prange(nchunk):
        for i in range(a0 + t * n // nchunk, a0 + (t + 1) * n // nchunk):
            rs = m_src[i]
            rd = m_dst[i]
            sa = m_sign[i]
            for k in range(g1 - 1, g0 - 1, -1):
                c = c_k[k]
                sk = s_k[k] * sa
                undo = k > 0
                row = 0.0
                for j in range(m_off[g_b[k]], m_off[g_b[k] + 1]):
                    cs = m_src[j]
                    cd = m_dst[j]
                    sb = m_sign[j]
                    ss = sk * sb
                    row += sb * _grad_unturn(P, L, rs, cs, rd, cd, c, ss, undo)
                acc[t, k - g0] += sa * row
    return acc.sum(axis=0)


@njit(parallel=True, cache=True, nogil=True)
def _bwd_a(P, L, g0, g1, g_a, c_k, s_k, m_off, m_src, m_dst, m_sign):  # pragma: no cover
    nb = P.shape[1]
    ntile = (nb + TILE - 1) // TILE
    acc = np.zeros((ntile, g1 - g0))
    for t in prange(ntile):
        j0 = t * TILE
        j1 = min(nb, j0 + TILE)
        for k in range(g1 - 1, g0 - 1, -1):
            c = c_k[k]
            undo = k > 0
            tot = 0.0
            for i in range(m_off[g_a[k]], m_off[g_a[k] + 1]):
                rs = m_src[i]
                rd = m_dst[i]
                sg = m_sign[i]
                ss = s_k[k] * sg
                row = 0.0
                for j in range(j0, j1):
                    row += _grad_unturn(P, L, rs, j, rd, j, c, ss, undo)
                tot += sg * row
            acc[t, k - g0] = tot
    return acc.sum(axis=0)


@njit(parallel=True, cache=True, nogil=True)
def _bwd_b(P, L, g0, g1, g_b, c_k, s_k, m_off, m_src, m_dst, m_sign):  # pragma: no cover
    na = P.shape[0]
    nchunk = min(CHUNKS, na)
    acc = np.zeros((nchunk, g1 - g0))
    for t in prange(nchunk):
        for i in range(t * na // nchunk, (t + 1) * na // nchunk):
            for k in range(g1 - 1, g0 - 1, -1):
                c = c_k[k]
                undo = k > 0
                row = 0.0
                for j in range(m_off[g_b[k]], m_off[g_b[k] + 1]):
                    cs = m_src[j]
                    cd = m_dst[j]
                    sg = m_sign[j]
                    ss = s_k[k] * sg
                    row += sg * _grad_unturn(P, L, i, cs, i, cd, c, ss, undo)
                acc[t, k - g0] += row
    return acc.sum(axis=0)


@njit(cache=True, nogil=True)
def apply_sequence(
    C, blocks, g_a, g_b, g_sign, phis, m_off, m_src, m_dst, m_sign
):  # pragma: no cover
    """In place: ``C <- U_K ... U_1 C`` with ``U_k = exp(phis[k] G_k)`` (gate 0 first).

    ``blocks[r] = (kind, first gate, end gate)`` cut the sequence into runs (see above).
    """
    c_k = np.cos(phis)
    s_k = np.sin(phis) * g_sign
    for r in range(blocks.shape[0]):
        kind, g0, g1 = blocks[r, 0], blocks[r, 1], blocks[r, 2]
        if kind == 0:
            m = g_a[g0]
            _fwd_ab(C, m_off[m], m_off[m + 1], g0, g1, g_b, c_k, s_k, m_off, m_src, m_dst, m_sign)
        elif kind == 1:
            _fwd_a(C, g0, g1, g_a, c_k, s_k, m_off, m_src, m_dst, m_sign)
        elif kind == 2:
            _fwd_b(C, g0, g1, g_b, c_k, s_k, m_off, m_src, m_dst, m_sign)


@njit(cache=True, nogil=True)
def adjoint_sweep(
    P, L, blocks, g_a, g_b, g_sign, phis, m_off, m_src, m_dst, m_sign
):  # pragma: no cover
    """Backward sweep: ``dE/dphi_k = 2 <L_k|G_k|P_k>`` for every gate; ``P``, ``L`` are consumed.

    ``P = U|ref>`` and ``L = H P`` on entry; gate ``k`` is un-applied to both after its term
    is taken (except gate 0, whose un-application is never needed).
    """
    c_k = np.cos(phis)
    s_k = np.sin(phis) * g_sign
    out = np.zeros(g_a.size)
    for r in range(blocks.shape[0] - 1, -1, -1):
        kind, g0, g1 = blocks[r, 0], blocks[r, 1], blocks[r, 2]
        if kind == 0:
            m = g_a[g0]
            val = _bwd_ab(
                P, L, m_off[m], m_off[m + 1], g0, g1, g_b, c_k, s_k, m_off, m_src, m_dst, m_sign
            )
        elif kind == 1:
            val = _bwd_a(P, L, g0, g1, g_a, c_k, s_k, m_off, m_src, m_dst, m_sign)
        elif kind == 2:
            val = _bwd_b(P, L, g0, g1, g_b, c_k, s_k, m_off, m_src, m_dst, m_sign)
        else:
            continue
        for k in range(g0, g1):
            out[k] = 2.0 * g_sign[k] * val[k - g0]
    return out


def sequence_blocks(kinds: np.ndarray, g_a: np.ndarray, max_block: int = 64) -> np.ndarray:
    """Cut a gate sequence into the blocks of :func:`apply_sequence`: ``(kind, start, end)``.

    Consecutive gates of kind 1 (alpha only) or 2 (beta only), or of kind 0 with the same
    alpha map, form one block of at most ``max_block`` gates; kind 3 (no operator) gates
    are left out.
    """
    out: list[list[int]] = []
    for k, kind in enumerate(int(x) for x in kinds):
        if kind == 3:
            continue
        last = out[-1] if out else None
        same = (
            last is not None
            and last[0] == kind
            and last[2] == k
            and last[2] - last[1] < max_block
            and (kind != 0 or g_a[last[1]] == g_a[k])
        )
        if same:
            last[2] = k + 1
        else:
            out.append([kind, k, k + 1])
    return np.array(out, dtype=np.int64).reshape(-1, 3)


def rotate(C: np.ndarray, kind: int, a_map, b_map, c: float, s: float) -> None:
    """Python entry of :func:`_rotate` for one gate (maps are ``(src, dst, sign)`` triples)."""
    _rotate(C, kind, *a_map, *b_map, c, s)


def expect(B: np.ndarray, K: np.ndarray, kind: int, a_map, b_map) -> float:
    """Python entry of :func:`_expect` for one gate."""
    return float(_expect(B, K, kind, *a_map, *b_map))
