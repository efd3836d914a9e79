"""k-UpCCGSD: k products of generalized singles and generalized paired doubles.

Lee, Huggins, Head-Gordon, Whaley, "Generalized unitary coupled cluster wave functions for
quantum computation", J. Chem. Theory Comput. 15, 311 (2019).

One layer is the disentangled product of the paired doubles
``a^+_{p alpha} a^+_{p beta} a_{q beta} a_{q alpha} - h.c.`` for all spatial ``p > q``
(in order of ``(p, q)``), followed by the generalized spin-conserving singles
``a^+_{p sigma} a_{q sigma} - h.c.`` for all ``p > q`` (alpha then beta for each pair). Layers
are applied first to last, each with its own parameters (``3 n(n-1)/2`` per layer for ``n``
spatial orbitals, or ``n(n-1)`` with ``spin_adapted=True``, which gives the alpha and beta
singles of a pair one shared parameter).

Initial parameters: ``init_scale * N(0, 1)`` from the seed (zeros by default, i.e. HF); the
original work starts several layers from small random values, which ``init_scale`` allows.
"""

from __future__ import annotations

import numpy as np

from .detspace import DetSpace
from .fermionic import Excitation, FermionicAnsatz


class KUpCCGSD(FermionicAnsatz):
    """k-UpCCGSD on the HF determinant (see module docstring)."""

    name = "kupccgsd"

    def __init__(
        self,
        space: DetSpace,
        k: int = 1,
        spin_adapted: bool = False,
        init_scale: float = 0.0,
        seed: int = 0,
    ) -> None:
        if k < 1:
            raise ValueError("k must be >= 1")
        n = space.norb
        pairs = [(p, q) for p in range(n) for q in range(p)]
        excitations: list[Excitation] = []
        n_params = 0
        for _ in range(int(k)):
            for p, q in pairs:
                term = ((2 * p, 1), (2 * p + 1, 1), (2 * q + 1, 0), (2 * q, 0))
                excitations.append(Excitation(term, n_params))
                n_params += 1
            for p, q in pairs:
                for s in (0, 1):
                    term = ((2 * p + s, 1), (2 * q + s, 0))
                    excitations.append(Excitation(term, n_params))
                    if not spin_adapted or s == 1:
                        n_params += 1
        self.k = int(k)
        self.spin_adapted = bool(spin_adapted)
        self.init_scale = float(init_scale)
        self.seed = int(seed)
        super().__init__(space, excitations, n_params)

    def initial_params(self) -> np.ndarray:
        if self.init_scale == 0.0:
            return np.zeros(self.n_params)
        rng = np.random.default_rng(self.seed)
        return self.init_scale * rng.standard_normal(self.n_params)

    def meta(self) -> dict:
        out = super().meta()
        out.update(k=self.k, spin_adapted=self.spin_adapted)
        return out
