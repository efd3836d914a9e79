"""The chemistry pre-flight (eigensweep.preflight): every planned point checked before any job.

References: PySCF's own molecule builder computed at test time (what it refuses, we refuse
first, in one line naming the molecule and point); the contract of the module docstring (once
per composition, every geometry).
"""

from __future__ import annotations

import pytest
from pyscf import gto

from eigensweep import preflight
from eigensweep.config import validate_config
from eigensweep.errors import ConfigError
from eigensweep.plan import build_plan


def _plan(tmp_path, molecule: dict):
    cfg = validate_config({"molecules": [molecule]}, source="t.yaml")
    return build_plan(cfg, base_dir=tmp_path, results_dir=tmp_path / "results")


def test_an_impossible_spin_is_refused_where_pyscf_refuses_it(tmp_path):
    # reference: PySCF refuses 1 electron with multiplicity 1 (H2+ as a singlet) at build time
    with pytest.raises(RuntimeError):
        gto.M(atom="H 0 0 0; H 0 0 0.74", basis="sto-3g", charge=1, spin=0, verbose=0)
    plan = _plan(
        tmp_path,
        {"name": "h2p", "atoms": "H 0 0 0; H 0 0 {r}", "scan": {"r": [0.7, 0.8]}, "charge": 1},
    )
    with pytest.raises(ConfigError) as info:
        preflight.check_plan_chemistry(plan)
    message = str(info.value)
    assert "\n" not in message and "h2p" in message and "multiplicity" in message


def test_one_bad_geometry_among_many_is_named_by_its_point(tmp_path):
    # atoms 0.05 Angstrom apart at the last point only: nuclei closer than the documented
    # 0.1 Angstrom minimum (config/README.md) are refused, naming that point
    plan = _plan(
        tmp_path,
        {"name": "h2", "atoms": "H 0 0 0; H 0 0 {r}", "scan": {"r": [0.7, 0.9, 1.1, 0.05]}},
    )
    with pytest.raises(ConfigError) as info:
        preflight.check_plan_chemistry(plan)
    assert "r=0.05" in str(info.value) and "\n" not in str(info.value)


def test_chemistry_is_checked_once_per_composition_geometry_every_point(tmp_path, monkeypatch):
    # module contract: basis/electron checks (PySCF) once per composition, geometry per point
    plan = _plan(
        tmp_path,
        {
            "name": "h2",
            "atoms": "H 0 0 0; H 0 0 {r}",
            "scan": {"r": {"start": 0.5, "stop": 2.0, "num": 40}},
        },
    )
    from eigensweep import chem
    from eigensweep.chem import geometry

    calls = {"molecule": 0, "geometry": 0}
    real_molecule, real_geometry = chem.check_molecule, geometry.check_geometry

    def count_molecule(**kw):
        calls["molecule"] += 1
        return real_molecule(**kw)

    def count_geometry(*a, **kw):
        calls["geometry"] += 1
        return real_geometry(*a, **kw)

    monkeypatch.setattr(chem, "check_molecule", count_molecule)
    monkeypatch.setattr(geometry, "check_geometry", count_geometry)
    preflight.check_plan_chemistry(plan)
    assert calls == {"molecule": 1, "geometry": 40}


def test_points_already_computed_are_not_checked_again_the_others_are(tmp_path):
    # the same impossible H2+ singlet as above (PySCF refuses it): with its integrals stage file
    # present (a placeholder: the pre-flight only asks whether the point was computed) the
    # point is skipped; a second, new point of the same molecule is still refused
    from eigensweep.stage_table import stage_path

    plan = _plan(
        tmp_path,
        {"name": "h2p", "atoms": "H 0 0 0; H 0 0 {r}", "scan": {"r": [0.7, 0.8]}, "charge": 1},
    )
    first, second = plan.by_stage("integrals")
    results = tmp_path / "results"
    for node in (first, second):
        stage_path("integrals", node.key, results).parent.mkdir(parents=True, exist_ok=True)
        stage_path("integrals", node.key, results).write_bytes(b"")
    preflight.check_plan_chemistry(plan, results)  # both computed: nothing to check
    stage_path("integrals", second.key, results).unlink()
    with pytest.raises(ConfigError, match="h2p"):
        preflight.check_plan_chemistry(plan, results)
