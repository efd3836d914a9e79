"""Memory estimate of determinant-space emulation (light: no PySCF, no Numba).

One estimate serves the size gate of :class:`eigensweep.vqe.detspace.DetSpace` (a problem
that cannot fit in this machine's memory is refused before anything is allocated) and the
``mem_mb`` request of ``optimize`` jobs on a cluster (:mod:`eigensweep.resources`).

With the factored gates of :mod:`eigensweep.vqe.detspace` the gates hold only string maps
(a few arrays of length ``C(norb, n_alpha)`` or ``C(norb, n_beta)`` per distinct one-spin
excitation), so memory is dominated by CI vectors of ``C(norb, n_alpha) * C(norb, n_beta)``
8-byte floats:

* an energy + gradient holds about ``VECTORS_OPTIMIZE = 6`` of them (reference, state,
  ``H|state>``, PySCF's sigma-vector output and temporaries);
* the exact reference computed by the optimize stage (PySCF FCI Davidson, subspace of up to
  12 vectors and their sigma vectors) peaks at about ``VECTORS_FCI = 30``;
* plus ``BASE_MB`` for the interpreter with NumPy, SciPy, PySCF and Numba loaded.

Measured with ``benchmarks/bench_engine.py`` (peak resident set size), e.g. N2/6-31G
(14e,14o), 11.8 million determinants: about 1.2 GB for energy + gradient alone and the
FCI reference dominating at about 3 GB; the estimate is meant to be an upper bound within
a factor of about 1.5.
"""

from __future__ import annotations

import math
import os

BASE_MB = 400
VECTORS_OPTIMIZE = 6
VECTORS_FCI = 30


def n_determinants(norb: int, nelec: tuple[int, int]) -> int:
    """``C(norb, n_alpha) * C(norb, n_beta)``."""
    return math.comb(int(norb), int(nelec[0])) * math.comb(int(norb), int(nelec[1]))


def detspace_memory_mb(norb: int, nelec: tuple[int, int], *, exact_reference: bool = True) -> int:
    """Estimated peak memory (MB) of a determinant-space optimization of this size.

    ``exact_reference``: the job also computes the exact (FCI) ground state in the same
    space, as the optimize stage does.
    """
    return math.ceil(detspace_memory_mb_of(n_determinants(norb, nelec), exact_reference))


def detspace_memory_mb_of(determinants: int | float, exact_reference: bool = True) -> float:
    """:func:`detspace_memory_mb` from a determinant count (a float for huge estimates)."""
    vectors = VECTORS_FCI if exact_reference else VECTORS_OPTIMIZE
    return BASE_MB + float(determinants) * 8 * vectors / 2**20


def physical_memory_mb() -> int | None:
    """Physical memory of this machine in MB, or ``None`` where the OS does not say."""
    try:
        return int(os.sysconf("SC_PHYS_PAGES") * os.sysconf("SC_PAGE_SIZE") // 2**20)
    except (ValueError, OSError, AttributeError):
        return None
