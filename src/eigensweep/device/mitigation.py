"""Error-mitigation numerics for returned counts (all vectorised over bootstrap replicates).

* **Readout mitigation by calibration matrices** (per-qubit / uncorrelated model): from the
  all-zeros and all-ones calibration circuits every qubit ``k`` gets a confusion matrix
  ``A_k = [[P(0|0), P(0|1)], [P(1|0), P(1|1)]]`` (columns: prepared value). The measured
  distribution is ``p_meas = (A_0 (x) ... (x) A_{n-1}) p_true``; we apply the per-qubit inverse
  qubit by qubit and then project the result onto the probability simplex (the nearest
  probability vector in Euclidean distance, sort-based algorithm of Held, Wolfe & Crowder
  1974 / Duchi et al., ICML 2008), so the mitigated probabilities are >= 0 and sum to 1. This
  is the constrained least-squares solution when the per-qubit inverse is well conditioned;
  cost is ``O(n 2^n)`` per distribution, fine for up to ~16 qubits.
* **Symmetry verification** (Bonet-Monroig, Sagastizabal, Singh, O'Brien, PRA 98, 062339
  (2018); McArdle, Yuan, Benjamin, PRL 122, 180501 (2019)): keep only the shots whose
  measured bits are consistent with the known eigenvalue of a Z2 symmetry that is diagonal in
  the measured basis, and renormalise.
* **Zero-noise extrapolation** over odd folding scale factors (Temme, Bravyi, Gambetta, PRL
  119, 180509 (2017); folding: Giurgica-Tiron et al., IEEE QCE 2020): a least-squares straight
  line in the scale, and Richardson extrapolation (the polynomial of degree ``m - 1`` through
  ``m`` points, evaluated at zero).

Distributions are dense arrays over basis indices with qubit 0 as the most significant bit,
which is exactly ``int(bitstring, 2)`` for our bitstrings (character ``k`` = qubit ``k``).
"""

from __future__ import annotations

from collections.abc import Mapping, Sequence

import numpy as np

__all__ = [
    "counts_to_vector",
    "z_parity_signs",
    "term_expectations",
    "per_qubit_confusion_matrices",
    "invert_confusion_per_qubit",
    "confusion_inverse",
    "apply_confusion_inverse",
    "project_to_simplex",
    "mitigate_readout",
    "symmetry_mask",
    "richardson_weights",
    "line_fit_zero_noise_value",
    "richardson_zero_noise_value",
    "total_variation_distance",
]


def counts_to_vector(counts: Mapping[str, int], n_qubits: int) -> np.ndarray:
    """Dense count vector of length ``2**n`` indexed by ``int(bitstring, 2)``."""
    v = np.zeros(2**n_qubits, dtype=np.int64)
    for bits, c in counts.items():
        v[int(bits, 2)] += int(c)
    return v


def _bits_table(n_qubits: int) -> np.ndarray:
    """(2**n, n) array: bit of qubit k in basis index i (qubit 0 = most significant)."""
    idx = np.arange(2**n_qubits)
    return ((idx[:, None] >> (n_qubits - 1 - np.arange(n_qubits))) & 1).astype(np.int8)


def z_parity_signs(supports: Sequence[Sequence[bool]], n_qubits: int) -> np.ndarray:
    """(2**n, n_terms) array of ``(-1)^(parity of the bits on each support)``."""
    bits = _bits_table(n_qubits)
    sup = np.asarray(supports, dtype=np.int64).reshape(-1, n_qubits)
    parity = (bits @ sup.T) % 2
    return 1.0 - 2.0 * parity


def term_expectations(probs: np.ndarray, labels: Sequence[str]) -> np.ndarray:
    """<P> for Pauli labels measured after their basis change: parity over each support.

    ``probs`` has shape ``(..., 2**n)``; returns shape ``(..., n_terms)``.
    """
    n = int(np.log2(probs.shape[-1]))
    signs = z_parity_signs([[ch != "I" for ch in lab] for lab in labels], n)
    return probs @ signs


def per_qubit_confusion_matrices(zeros: np.ndarray, ones: np.ndarray, n_qubits: int) -> np.ndarray:
    """Per-qubit confusion matrices from all-zeros / all-ones calibration count vectors.

    ``zeros`` and ``ones`` have shape ``(..., 2**n)``; returns ``(..., n, 2, 2)`` with
    ``A[k] = [[P(0|0), P(0|1)], [P(1|0), P(1|1)]]`` for qubit ``k``.
    """
    bits = _bits_table(n_qubits).astype(float)
    z = np.asarray(zeros, dtype=float)
    o = np.asarray(ones, dtype=float)
    p1_given0 = (z @ bits) / z.sum(axis=-1, keepdims=True)
    p0_given1 = (o @ (1.0 - bits)) / o.sum(axis=-1, keepdims=True)
    a = np.empty(p1_given0.shape + (2, 2))
    a[..., 0, 0] = 1.0 - p1_given0
    a[..., 1, 0] = p1_given0
    a[..., 0, 1] = p0_given1
    a[..., 1, 1] = 1.0 - p0_given1
    return a


def confusion_inverse(matrices: np.ndarray, batch: int) -> tuple[np.ndarray, np.ndarray]:
    """``(A_0 (x) ... (x) A_{n-1})^{-1}`` as the pair ``(K_high, K_low)`` for ``batch`` rows.

    ``K_high`` is the Kronecker product of the inverses of qubits ``0 .. n//2 - 1``, ``K_low``
    of the others (qubit 0 most significant), each ``(batch, d, d)``: with the outcome index
    split into its high and low bits, the inverse maps ``P`` to ``K_high P K_low^T``
    (:func:`apply_confusion_inverse`). ``matrices`` has shape ``(n, 2, 2)`` or
    ``(batch, n, 2, 2)``. Raises ``numpy.linalg.LinAlgError`` for a singular confusion matrix
    (a qubit that reads 0 and 1 with the same probability).
    """
    n = matrices.shape[-3]
    inv = np.linalg.inv(matrices)
    if inv.ndim == 3:
        inv = np.broadcast_to(inv, (batch,) + inv.shape)
    h = n // 2
    return _kron_batch(inv[:, :h]), _kron_batch(inv[:, h:])


def apply_confusion_inverse(probs: np.ndarray, inverse: tuple[np.ndarray, np.ndarray]):
    """``probs`` (shape ``(B, 2**n)``) times the inverse from :func:`confusion_inverse`."""
    k_high, k_low = inverse
    p = np.asarray(probs, dtype=float)
    b = p.shape[0]
    state = p.reshape(b, k_high.shape[-1], k_low.shape[-1])
    return np.matmul(np.matmul(k_high, state), np.swapaxes(k_low, 1, 2)).reshape(b, -1)


def invert_confusion_per_qubit(probs: np.ndarray, matrices: np.ndarray) -> np.ndarray:
    """Apply ``(A_0 (x) ... (x) A_{n-1})^{-1}`` to ``probs`` of shape ``(B, 2**n)``.

    ``matrices`` has shape ``(n, 2, 2)`` or ``(B, n, 2, 2)``. Raises ``numpy.linalg.LinAlgError``
    for a singular confusion matrix (a qubit that reads 0 and 1 with the same probability).
    """
    p = np.asarray(probs, dtype=float)
    return apply_confusion_inverse(p, confusion_inverse(matrices, p.shape[0]))


def _kron_batch(mats: np.ndarray) -> np.ndarray:
    """``mats[:, 0] (x) mats[:, 1] (x) ...`` per batch entry: ``(B, k, 2, 2) -> (B, 2^k, 2^k)``."""
    b = mats.shape[0]
    out = np.ones((b, 1, 1))
    for k in range(mats.shape[1]):
        m = mats[:, k]
        d = out.shape[1] * 2
        out = np.einsum("bij,bkl->bikjl", out, m).reshape(b, d, d)
    return out


def project_to_simplex(v: np.ndarray) -> np.ndarray:
    """Euclidean projection of each row of ``v`` onto {p >= 0, sum p = 1} (Duchi et al. 2008)."""
    v = np.atleast_2d(np.asarray(v, dtype=float))
    u = -np.sort(-v, axis=1)
    css = np.cumsum(u, axis=1) - 1.0
    ind = np.arange(1, v.shape[1] + 1)
    cond = u - css / ind > 0
    rho = v.shape[1] - 1 - np.argmax(cond[:, ::-1], axis=1)
    theta = css[np.arange(v.shape[0]), rho] / (rho + 1)
    return np.maximum(v - theta[:, None], 0.0)


def mitigate_readout(probs: np.ndarray, matrices: np.ndarray) -> np.ndarray:
    """Per-qubit readout-error inversion followed by projection onto probabilities."""
    return project_to_simplex(invert_confusion_per_qubit(probs, matrices))


def symmetry_mask(
    supports: Sequence[Sequence[bool]], eigenvalues: Sequence[int], n_qubits: int
) -> np.ndarray:
    """Boolean mask over basis indices: every Z-string ``supports[j]`` has ``eigenvalues[j]``."""
    if len(supports) == 0:
        return np.ones(2**n_qubits, dtype=bool)
    signs = z_parity_signs(supports, n_qubits)
    return np.all(signs == np.asarray(eigenvalues, dtype=float)[None, :], axis=1)


def richardson_weights(scales: Sequence[float]) -> np.ndarray:
    """Weights ``gamma_j = prod_{k != j} l_k / (l_k - l_j)`` with ``E(0) = sum_j gamma_j E(l_j)``."""
    lam = np.asarray(scales, dtype=float)
    m = lam.size
    return np.array(
        [np.prod([lam[k] / (lam[k] - lam[j]) for k in range(m) if k != j]) for j in range(m)]
    )


def richardson_zero_noise_value(scales: Sequence[float], values: np.ndarray) -> np.ndarray:
    """Richardson extrapolation to zero noise (Temme et al. 2017); ``values``: (..., m)."""
    return np.asarray(values, dtype=float) @ richardson_weights(scales)


def line_fit_zero_noise_value(scales: Sequence[float], values: np.ndarray) -> np.ndarray:
    """Intercept at zero of the least-squares line through (scale, value); ``values``: (..., m)."""
    lam = np.asarray(scales, dtype=float)
    a = np.stack([np.ones_like(lam), lam], axis=1)
    row0 = np.linalg.pinv(a)[0]  # intercept = row0 . values
    return np.asarray(values, dtype=float) @ row0


def total_variation_distance(p: np.ndarray, q: np.ndarray) -> np.ndarray:
    """``0.5 * sum |p - q|`` along the last axis."""
    return 0.5 * np.abs(np.asarray(p) - np.asarray(q)).sum(axis=-1)
