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

All maps of a gate sequence are packed into flat arrays (``m_src``, ``m_dst``, ``m_sign``,
offsets ``m_off``; map ``m`` is ``[m_off[m], m_off[m + 1])``), and gate ``k`` refers to its
maps by index (``g_a[k]``, ``g_b[k]``, ``-1`` = none). The kernels apply a whole sequence in
one call (no Python work per gate), and the backward kernel fuses the adjoint-gradient term
with the un-application of the gate to both the state and ``H|state>`` (Jones & Gacon,
arXiv:2009.02823).
"""

from __future__ import annotations

import math

import numpy as np
from numba import njit, prange


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
                x = C[rs, cs]
                y = C[rd, cd]
                C[rs, cs] = c * x - ss * y
                C[rd, cd] = c * y + ss * x
    elif kind == 1:
        for i in prange(src_a.size):
            rs = src_a[i]
            rd = dst_a[i]
            ss = s * sgn_a[i]
            for j in range(nb):
                x = C[rs, j]
                y = C[rd, j]
                C[rs, j] = c * x - ss * y
                C[rd, j] = c * y + ss * x
    else:
        for i in prange(na):
            for j in range(src_b.size):
                cs = src_b[j]
                cd = dst_b[j]
                ss = s * sgn_b[j]
                x = C[i, cs]
                y = C[i, cd]
                C[i, cs] = c * x - ss * y
                C[i, cd] = c * y + ss * x


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


@njit(parallel=True, cache=True, nogil=True)
def _unrotate_grad(
    P, L, kind, src_a, dst_a, sgn_a, src_b, dst_b, sgn_b, c, s, undo
):  # pragma: no cover
    """``<L|G|P>`` (unit gate sign) and, if ``undo``, ``P, L <- exp(-phi G) P, L`` in place.

    ``c = cos(phi)``, ``s = sin(phi) * gate sign``; the returned value is multiplied by the
    gate sign by the caller.
    """
    na, nb = P.shape
    acc = 0.0
    if kind == 0:
        for i in prange(src_a.size):
            rs = src_a[i]
            rd = dst_a[i]
            sa = sgn_a[i]
            row = 0.0
            for j in range(src_b.size):
                cs = src_b[j]
                cd = dst_b[j]
                sg = sa * sgn_b[j]
                ps = P[rs, cs]
                pd = P[rd, cd]
                ls = L[rs, cs]
                ld = L[rd, cd]
                row += sg * (ld * ps - ls * pd)
                if undo:
                    ss = s * sg
                    P[rs, cs] = c * ps + ss * pd
                    P[rd, cd] = c * pd - ss * ps
                    L[rs, cs] = c * ls + ss * ld
                    L[rd, cd] = c * ld - ss * ls
            acc += row
    elif kind == 1:
        for i in prange(src_a.size):
            rs = src_a[i]
            rd = dst_a[i]
            sg = sgn_a[i]
            ss = s * sg
            row = 0.0
            for j in range(nb):
                ps = P[rs, j]
                pd = P[rd, j]
                ls = L[rs, j]
                ld = L[rd, j]
                row += ld * ps - ls * pd
                if undo:
                    P[rs, j] = c * ps + ss * pd
                    P[rd, j] = c * pd - ss * ps
                    L[rs, j] = c * ls + ss * ld
                    L[rd, j] = c * ld - ss * ls
            acc += sg * row
    else:
        for i in prange(na):
            row = 0.0
            for j in range(src_b.size):
                cs = src_b[j]
                cd = dst_b[j]
                sg = sgn_b[j]
                ss = s * sg
                ps = P[i, cs]
                pd = P[i, cd]
                ls = L[i, cs]
                ld = L[i, cd]
                row += sg * (ld * ps - ls * pd)
                if undo:
                    P[i, cs] = c * ps + ss * pd
                    P[i, cd] = c * pd - ss * ps
                    L[i, cs] = c * ls + ss * ld
                    L[i, cd] = c * ld - ss * ls
            acc += row
    return acc


@njit(cache=True, nogil=True)
def _map_slice(m_off, m_src, m_dst, m_sign, m):  # pragma: no cover
    if m < 0:
        return m_src[:0], m_dst[:0], m_sign[:0]
    a0 = m_off[m]
    a1 = m_off[m + 1]
    return m_src[a0:a1], m_dst[a0:a1], m_sign[a0:a1]


@njit(cache=True, nogil=True)
def _kind(a, b):  # pragma: no cover
    if a >= 0 and b >= 0:
        return 0
    if a >= 0:
        return 1
    return 2


@njit(cache=True, nogil=True)
def apply_sequence(C, g_a, g_b, g_sign, phis, m_off, m_src, m_dst, m_sign):  # pragma: no cover
    """In place: ``C <- U_K ... U_1 C`` with ``U_k = exp(phis[k] G_k)`` (gate 0 first)."""
    for k in range(g_a.size):
        if g_a[k] < 0 and g_b[k] < 0:
            continue
        sa, da, wa = _map_slice(m_off, m_src, m_dst, m_sign, g_a[k])
        sb, db, wb = _map_slice(m_off, m_src, m_dst, m_sign, g_b[k])
        _rotate(
            C,
            _kind(g_a[k], g_b[k]),
            sa,
            da,
            wa,
            sb,
            db,
            wb,
            math.cos(phis[k]),
            math.sin(phis[k]) * g_sign[k],
        )


@njit(cache=True, nogil=True)
def adjoint_sweep(P, L, g_a, g_b, g_sign, phis, m_off, m_src, m_dst, m_sign):  # pragma: no cover
    """Backward sweep: ``dE/dphi_k = 2 <L_k|G_k|P_k>`` for every gate; ``P``, ``L`` are consumed.

    ``P = U|ref>`` and ``L = H P`` on entry; gate ``k`` is un-applied to both after its term
    is taken (except gate 0, whose un-application is never needed).
    """
    out = np.zeros(g_a.size)
    for k in range(g_a.size - 1, -1, -1):
        if g_a[k] < 0 and g_b[k] < 0:
            continue
        sa, da, wa = _map_slice(m_off, m_src, m_dst, m_sign, g_a[k])
        sb, db, wb = _map_slice(m_off, m_src, m_dst, m_sign, g_b[k])
        val = _unrotate_grad(
            P,
            L,
            _kind(g_a[k], g_b[k]),
            sa,
            da,
            wa,
            sb,
            db,
            wb,
            math.cos(phis[k]),
            math.sin(phis[k]) * g_sign[k],
            k > 0,
        )
        out[k] = 2.0 * g_sign[k] * val
    return out


def rotate(C: np.ndarray, kind: int, a_map, b_map, c: float, s: float) -> None:
    """Python entry of :func:`_rotate` for one gate (maps are ``(src, dst, sign)`` triples)."""
    _rotate(C, kind, *a_map, *b_map, c, s)


def expect(B: np.ndarray, K: np.ndarray, kind: int, a_map, b_map) -> float:
    """Python entry of :func:`_expect` for one gate."""
    return float(_expect(B, K, kind, *a_map, *b_map))
