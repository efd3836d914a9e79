"""Qubit Hamiltonians: mappings, Pauli sums, Z2 tapering, sector energies, grouping, kernels.

One method family per module:

- :mod:`.pauli` — :class:`PauliExpansion` in symplectic form;
- :mod:`.mapping` — Jordan–Wigner, Bravyi–Kitaev (Seeley, Richard, Love, J. Chem. Phys. 137,
  224109 (2012)) and parity mappings of molecular Hamiltonians;
- :mod:`.taper` — Z2 tapering (Bravyi, Gambetta, Mezzacapo, Temme, arXiv:1701.08213);
- :mod:`.exact` — lowest eigenvalues in an electron-number / S_z sector;
- :mod:`.grouping` — qubit-wise commuting groups by sorted insertion (Crawford et al., Quantum 5,
  385 (2021)) and shot budgets (Wecker, Hastings, Troyer, arXiv:1507.08969);
- :mod:`.statevector` — vectorised NumPy statevector kernels.
"""

from .exact import sector_basis_states, sector_ground_energy
from .grouping import measurement_basis, qwc_groups, shots_for_precision
from .mapping import (
    MAPPINGS,
    encode_linear,
    encoding_matrix,
    interaction_operator,
    map_fermion_operator,
    map_hamiltonian,
    number_operator,
    reference_bits,
    spin_square_operator,
    sz_operator,
)
from .pauli import PauliExpansion
from .statevector import (
    apply_gate,
    apply_pauli,
    apply_pauli_expansion,
    apply_pauli_rotation,
    basis_state,
    expectation,
    simulate,
)
from .taper import (
    SectorReduction,
    diagonal_symmetries,
    identity_reduction,
    reduce_to_sector,
    symmetry_null_space,
)

__all__ = [
    "MAPPINGS",
    "PauliExpansion",
    "SectorReduction",
    "apply_gate",
    "apply_pauli",
    "apply_pauli_rotation",
    "apply_pauli_expansion",
    "basis_state",
    "encode_linear",
    "encoding_matrix",
    "expectation",
    "symmetry_null_space",
    "interaction_operator",
    "map_fermion_operator",
    "map_hamiltonian",
    "measurement_basis",
    "identity_reduction",
    "number_operator",
    "qwc_groups",
    "reference_bits",
    "sector_basis_states",
    "sector_ground_energy",
    "shots_for_precision",
    "simulate",
    "spin_square_operator",
    "sz_operator",
    "reduce_to_sector",
    "diagonal_symmetries",
]
