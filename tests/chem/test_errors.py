"""Bad input to the chemistry stage: one-line messages that name the point, the key and a fix.

reference for every expectation here: the message contract of eigensweep.errors (one line,
prefixed with the caller's ``where``/``label``), checked against the wording of
eigensweep.chem.
"""

from __future__ import annotations

import pytest
from pyscf import lib

from eigensweep.chem import check_molecule, compute_integrals, read_xyz
from eigensweep.chem import scf as scf_module
from eigensweep.chem.space import plan_molecule
from eigensweep.errors import ChemistryError, ConfigError

WHERE = "molecules[1] (h2) point r=0.74"
H2 = "H 0 0 0; H 0 0 0.74"
H2O = "O 0 0 0; H 0 0.757 0.587; H 0 -0.757 0.587"


@pytest.fixture(autouse=True, scope="module")
def _single_thread():
    with lib.with_omp_threads(1):
        yield


def _kw(**over):
    kw = dict(atoms=H2, basis="sto-3g", charge=0, multiplicity=1)
    kw.update(over)
    return kw


BAD_INPUT = [
    ("unknown element", _kw(atoms="Xx 0 0 0; H 0 0 0.74"), "atoms: unknown element 'Xx'"),
    ("unknown basis", _kw(basis="sto-99g"), "basis: 'sto-99g' is unknown"),
    ("basis lacks element", _kw(atoms="Kr 0 0 0", basis="6-31g"), "no functions for element Kr"),
    ("atoms too close", _kw(atoms="H 0 0 0; H 0 0 0.01"), "0.01 Angstrom apart"),
    ("too close in bohr", _kw(atoms="H 0 0 0; H 0 0 0.1", unit="bohr"), "Angstrom apart"),
    ("closed-shell doublet", _kw(multiplicity=2), "multiplicity: 2 is impossible for 2"),
    ("multiplicity zero", _kw(multiplicity=0), "multiplicity: 0 is not valid"),
    ("too many unpaired", _kw(multiplicity=5), "needs 4 unpaired electrons"),
    ("zero electrons", _kw(charge=2), "charge: 2 leaves 0 electrons"),
    ("negative electrons", _kw(charge=3, multiplicity=2), "charge: 3 leaves -1 electrons"),
    ("charge not int", _kw(charge=0.5), "charge: 0.5 is not an integer"),
    ("non-numeric coordinate", _kw(atoms="H 0 0 0; H 0 0 r"), "non-numeric coordinate"),
    ("z-matrix entry", _kw(atoms="H; H 1 0.74"), "is not 'element x y z'"),
    ("empty atoms", _kw(atoms="  "), "atoms: empty"),
    ("bad unit", _kw(unit="furlong"), "unit: unknown length unit 'furlong'"),
    (
        "active electrons > available",
        _kw(atoms=H2O, active={"electrons": 12, "orbitals": 6}),
        "active.electrons: 12 exceeds the 10 electrons",
    ),
    (
        "active electrons > after frozen core",
        _kw(atoms=H2O, frozen_core="auto", active={"electrons": 10, "orbitals": 6}),
        "active.electrons: 10 exceeds the 8 electrons available after freezing 1",
    ),
    (
        "active orbitals > available",
        _kw(atoms=H2O, active={"electrons": 4, "orbitals": 10}),
        "active.orbitals: 10 exceeds the 4 orbitals available",
    ),
    (
        "active orbitals cannot hold electrons",
        _kw(atoms=H2O, active={"electrons": 6, "orbitals": 2}),
        "cannot hold 3 alpha electrons",
    ),
    (
        "active electrons vs multiplicity",
        _kw(atoms=H2O, charge=1, multiplicity=2, active={"electrons": 4, "orbitals": 4}),
        "active.electrons: 4 is incompatible with multiplicity 2",
    ),
    (
        "active missing key",
        _kw(atoms=H2O, active={"electrons": 4}),
        "active: expected {'electrons': int, 'orbitals': int}",
    ),
    (
        "active not positive",
        _kw(atoms=H2O, active={"electrons": 0, "orbitals": 4}),
        "active.electrons: 0 is not a positive integer",
    ),
    (
        "frozen core too big",
        _kw(atoms=H2O, frozen_core=6),
        "frozen_core: 6 frozen orbitals exceed the 5 doubly occupied",
    ),
    ("frozen core leaves nothing", _kw(frozen_core=1), "leaves no active electrons"),
    ("frozen core bad value", _kw(frozen_core="all"), "frozen_core: 'all' is not valid"),
]


@pytest.mark.parametrize("func", ["check_molecule", "compute_integrals"])
@pytest.mark.parametrize(("case", "kwargs", "fragment"), BAD_INPUT, ids=[c[0] for c in BAD_INPUT])
def test_bad_molecule_input(func, case, kwargs, fragment):
    with pytest.raises(ConfigError) as info:
        if func == "check_molecule":
            check_molecule(where=WHERE, **kwargs)
        else:
            compute_integrals(label=WHERE, **kwargs)
    message = str(info.value)
    assert "\n" not in message, message
    assert message.startswith(f"{WHERE}: "), message
    assert fragment in message, message


@pytest.mark.parametrize(
    ("extra", "fragment"),
    [
        ({"fci_max_determinants": -1}, "fci_max_determinants: -1 is not"),
        ({"guess": "neighbour"}, "guess: expected a (mo_coeff, mo_occ) pair"),
        ({"guess": ([[1.0]], [2.0])}, "guess: mo_coeff (1, 1) / mo_occ (1,) do not fit 2"),
        ({"guess": ([[1.0, 0.0], [0.0, 1.0]], [2.0, 2.0])}, "orbitals hold 4 electrons"),
    ],
)
def test_bad_compute_options(extra, fragment):
    with pytest.raises(ConfigError) as info:
        compute_integrals(atoms=H2, basis="sto-3g", label=WHERE, **extra)
    message = str(info.value)
    assert "\n" not in message and message.startswith(f"{WHERE}: ") and fragment in message


def test_scf_non_convergence_is_chemistry_error(monkeypatch):
    def never_converges(mf, dm0):
        mf.converged = False
        mf.e_tot = 0.0

    monkeypatch.setattr(scf_module, "_kernel", never_converges)
    with pytest.raises(ChemistryError) as info:
        compute_integrals(atoms=H2, basis="sto-3g", label=WHERE)
    message = str(info.value)
    assert "\n" not in message and message.startswith(f"{WHERE}: scf: RHF did not converge")
    assert "guess=" in message  # says what to do


XYZ_CASES = [
    ("bad count", "two\ncomment\nH 0 0 0\nH 0 0 0.74\n", "line 1: expected the number of atoms"),
    ("zero count", "0\ncomment\n", "line 1: atom count must be positive"),
    ("empty file", "", "line 1: expected the number of atoms"),
    ("non-numeric coordinate", "2\nc\nH 0 0 0\nH 0 zero 0.74\n", "line 4: non-numeric coordinate"),
    ("missing column", "2\nc\nH 0 0 0\nH 0 0.74\n", "line 4: expected 'element x y z'"),
    ("too few atoms", "3\nc\nH 0 0 0\nH 0 0 0.74\n", "line 5: file ends after 2 of 3 atom lines"),
    ("too many atoms", "1\nc\nH 0 0 0\nH 0 0 0.74\n", "line 4: more atom lines than the count 1"),
    ("unknown element", "1\nc\nQq 0 0 0\n", "line 3: unknown element"),
]


@pytest.mark.parametrize(("case", "text", "fragment"), XYZ_CASES, ids=[c[0] for c in XYZ_CASES])
def test_malformed_xyz(tmp_path, case, text, fragment):
    path = tmp_path / "bad.xyz"
    path.write_text(text)
    with pytest.raises(ConfigError) as info:
        read_xyz(path)
    message = str(info.value)
    assert "\n" not in message and message.startswith(str(path)) and fragment in message
    assert "fix the XYZ file" in message


def test_missing_xyz_file(tmp_path):
    path = tmp_path / "nowhere.xyz"
    with pytest.raises(ConfigError, match="XYZ file not found"):
        read_xyz(path)


def test_good_input_passes_and_auto_core_counts():
    # references: PySCF's own electron and orbital counts of the same molecule (gto.M, computed
    # here); the noble-gas core rule (Li-Ne freeze the 1s shell, textbook, from memory)
    from pyscf import gto

    mol = gto.M(atom=H2O, basis="sto-3g", verbose=0)
    full = plan_molecule(
        atoms=H2O,
        basis="sto-3g",
        charge=0,
        multiplicity=1,
        unit="angstrom",
        frozen_core="none",
        active=None,
        where=WHERE,
    )
    assert (full.nelectron, full.nmo, full.n_frozen_core) == (mol.nelectron, mol.nao_nr(), 0)
    assert full.nelecas == mol.nelec and full.ncas == mol.nao_nr()
    frozen = plan_molecule(
        atoms=H2O,
        basis="sto-3g",
        charge=0,
        multiplicity=1,
        unit="angstrom",
        frozen_core="auto",
        active={"electrons": 8, "orbitals": 6},
        where=WHERE,
    )
    assert frozen.n_frozen_core == 1 and frozen.nelecas == (4, 4) and frozen.ncas == 6
    check_molecule(  # the same checks, raising on the first problem
        atoms=H2O,
        basis="sto-3g",
        charge=0,
        multiplicity=1,
        frozen_core="auto",
        active={"electrons": 8, "orbitals": 6},
        where=WHERE,
    )
    check_molecule(
        atoms="O 0 0 0; H 0 0 1.8", basis="sto-3g", charge=0, multiplicity=2, unit="bohr"
    )
