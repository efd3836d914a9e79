"""Test-only fault injection: an impossible SCF convergence limit for one geometry.

Put this folder on PYTHONPATH and set EIGENSWEEP_TEST_SCF_FAIL_R to a bond length in Angstrom:
every SCF of a molecule whose second atom sits at that z gets conv_tol = -1 (|dE| < -1 never
holds), so PySCF reports no convergence and the integrals job of that point fails in the
ordinary way. Nothing else changes. Used by tests/test_run_display.py.
"""

import importlib.abc
import importlib.util
import os
import sys

_TARGET = os.environ.get("EIGENSWEEP_TEST_SCF_FAIL_R")
_BOHR = 0.52917721092  # Angstrom per bohr (CODATA 2010, PySCF's value)


class _PatchScf(importlib.abc.MetaPathFinder):
    def find_spec(self, name, path, target=None):
        if name != "eigensweep.chem.scf":
            return None
        sys.meta_path.remove(self)
        spec = importlib.util.find_spec(name)
        run = spec.loader.exec_module

        def exec_module(module):
            run(module)
            original = module._new_scf

            def _new_scf(mol):
                mf = original(mol)
                if mol.natm > 1 and abs(mol.atom_coord(1)[2] * _BOHR - float(_TARGET)) < 1e-6:
                    mf.conv_tol = -1.0
                    mf.max_cycle = 3
                return mf

            module._new_scf = _new_scf

        spec.loader.exec_module = exec_module
        return spec


if _TARGET:
    sys.meta_path.insert(0, _PatchScf())
