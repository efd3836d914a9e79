"""Unitary coupled-cluster singles and doubles (UCCSD) in disentangled (Trotterised) form.

UCCSD as a variational ansatz: Peruzzo et al., Nat. Commun. 5, 4213 (2014); Romero et al.,
Quantum Sci. Technol. 4, 014008 (2018), arXiv:1701.02691.

The exponential ``exp(T - T^dagger)`` is replaced by its first-order Trotter / disentangled
product ``prod_k exp(theta_k (T_k - T_k^dagger))`` over spin-conserving occupied -> virtual
excitations of the Hartree-Fock determinant (all orbitals of the active space are
correlated; no frozen core). Application order (first applied first): alpha-alpha doubles,
beta-beta doubles, alpha-beta doubles, alpha singles, beta singles (orderings in
:func:`eigensweep.vqe.fermionic.sd_excitation_terms`); the parameter vector follows the same
order. Parameter counts (STO-3G, no frozen core): H2 3, LiH 92, BeH2 204, H2O 140.

``spin_adapted=True`` ties the parameters of spin-complementary excitations (alpha <-> beta
exchanged: alpha/beta singles, alpha-alpha/beta-beta doubles, and alpha-beta doubles
``(i a, j b) <-> (j b, i a)``), the parameter sharing used for closed-shell singlet
references. This enforces alpha/beta (spin-flip) symmetry of the amplitudes, i.e. removes
odd-S (triplet-like) directions, but it is not a full S^2 adaptation: the same-spin doubles
keep independent amplitudes and the Trotter ordering is not symmetrised. LiH: 50 parameters
instead of 92.
"""

from __future__ import annotations

from .detspace import DetSpace
from .fermionic import Excitation, FermionicAnsatz, sd_excitation_terms, tie_spin_complements


class UCCSD(FermionicAnsatz):
    """Disentangled UCCSD on the HF determinant (see module docstring)."""

    name = "uccsd"

    def __init__(self, space: DetSpace, spin_adapted: bool = False) -> None:
        doubles, singles = sd_excitation_terms(space.norb, space.nelec)
        terms = doubles + singles
        if spin_adapted:
            excitations, n_params = tie_spin_complements(terms)
        else:
            excitations = [Excitation(t, k) for k, t in enumerate(terms)]
            n_params = len(terms)
        self.spin_adapted = bool(spin_adapted)
        super().__init__(space, excitations, n_params)

    def meta(self) -> dict:
        out = super().meta()
        out["spin_adapted"] = self.spin_adapted
        return out
