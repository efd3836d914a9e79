"""Memory estimate of determinant-space emulation (light: no PySCF, no Numba).

One estimate serves two callers: the size gate of :class:`eigensweep.vqe.detspace.DetSpace`
(``exact_reference=False``: a problem whose emulation cannot fit in this machine's memory is
refused before anything is allocated) and the ``mem_mb`` request of ``optimize`` jobs on a
cluster (:func:`eigensweep.resources.optimize_size`, which uses the default
``exact_reference=True``).

With the factored gates of :mod:`eigensweep.vqe.detspace` the gates hold only string maps
(a few arrays of length ``C(norb, n_alpha)`` or ``C(norb, n_beta)`` per distinct one-spin
excitation: about 2 MB at (12e,12o) and 10 MB at (14e,14o) with their packed copy), so
memory is dominated by CI vectors of ``C(norb, n_alpha) * C(norb, n_beta)`` 8-byte floats:

* an energy + gradient holds about ``VECTORS_OPTIMIZE = 6`` of them (an upper bound: state,
  ``H|state>``, PySCF's sigma-vector output and temporaries, the reference);
* an exact (FCI Davidson) solve in the same space, ``exact_reference=True``, is counted as
  ``VECTORS_FCI = 30`` vectors. The optimize stage no longer runs one: it reads the exact
  vectors stored by the integrals stage (:meth:`eigensweep.vqe.reference.ExactReference.
  from_integrals`), so its request is generous by the difference; the solve itself runs in
  the integrals stage (:func:`eigensweep.chem.exact.solve_sector`);
* plus ``BASE_MB`` for the interpreter with NumPy, SciPy, PySCF and Numba loaded (Numba and
  its compiled kernels alone add about 150-200 MB of resident memory).

Measured peak resident memory (``benchmarks/bench_engine.py``, one thread, N2/6-31G; the
process holds PySCF integrals, the UCCSD gates, one energy + gradient and one sigma vector):

========  =============  ==================  ================================
space     determinants   measured peak (MB)  estimate, ``exact_reference=False``
========  =============  ==================  ================================
(10e,10o)        63,504                 216                               403
(12e,12o)       853,776                 233                               440
(14e,14o)    11,778,624                 458                               940
========  =============  ==================  ================================

``solve_sector`` alone at (12e,12o) peaked at 512 MB (estimate with ``exact_reference=True``:
596 MB). The estimate is an upper bound, about 2x the measured emulation peak at (14e,14o).
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
