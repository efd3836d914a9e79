"""Archives are built from the plan, carry the workflow, and verify refuses stale or extra files.

The sweeps here are tiny (H2, STO-3G, one point) and run in-process through the stage actions,
without Snakemake. Archive contents are read with Python's tarfile and json modules and the
RO-Crate metadata with the rocrate library (outside references for the formats).
"""

from __future__ import annotations

import hashlib
import io
import tarfile
from pathlib import Path

import pytest
import yaml

from eigensweep.archive import ARCHIVE_ROOT, make_archive, safe_extract, verify_archive
from eigensweep.collect import collect
from eigensweep.config import load_config
from eigensweep.errors import EigensweepError
from eigensweep.plan import build_plan, parent_files
from eigensweep.stage_table import stage_path
from eigensweep.stages import STAGE_ACTIONS

BASE = {
    "molecules": [{"name": "h2", "atoms": "H 0 0 0; H 0 0 {r}", "scan": {"r": [0.74]}}],
    "methods": {"taper": [False], "optimizer": [{"name": "lbfgs"}]},
}


def _run(cfg_path: Path):
    """Run a sweep in-process in the current folder (stage actions in plan order, then collect)."""
    cfg = load_config(cfg_path)
    plan = build_plan(cfg, base_dir=".", config_path=cfg_path)
    for node in plan.nodes.values():  # insertion order: parents first
        out = stage_path(node.stage, node.key)
        if not out.exists():
            STAGE_ACTIONS[node.stage](node, parent_files(node), str(out))
    collect(plan.rows, "results", cfg["collect"]["accuracy_mha"], plan.exports, study=plan.study)
    return cfg, plan


@pytest.fixture(scope="module")
def two_sweeps(tmp_path_factory):
    """Sweep A (r = 0.74), then sweep B (r = 1.0) in the same folder: B's tables are last."""
    work = tmp_path_factory.mktemp("sweeps")
    cwd = Path.cwd()
    import os

    os.chdir(work)
    try:
        (work / "a.yaml").write_text(yaml.safe_dump(BASE))
        b = {**BASE, "molecules": [{**BASE["molecules"][0], "scan": {"r": [1.0]}}]}
        (work / "b.yaml").write_text(yaml.safe_dump(b))
        cfg_a, plan_a = _run(work / "a.yaml")
        cfg_b, plan_b = _run(work / "b.yaml")
        out = work / "a.tar.gz"
        make_archive(
            plan_a,
            cfg_a,
            work / "a.yaml",
            out,
            title="H2 test",
            authors=["Josiah Carberry <0000-0002-1825-0097>", "Ann Other"],
            license="CC-BY-4.0",
        )
    finally:
        os.chdir(cwd)
    return work, out, plan_a, plan_b


def _names(archive: Path) -> list[str]:
    with tarfile.open(archive) as tar:
        return tar.getnames()


def test_archive_holds_only_the_named_sweep(two_sweeps):
    work, out, plan_a, plan_b = two_sweeps
    names = set(_names(out))
    for node in plan_a.nodes.values():
        assert f"{ARCHIVE_ROOT}/results/{node.stage}/{node.key}.h5" in names
    only_b = set(plan_b.nodes) - set(plan_a.nodes)
    assert only_b  # the two sweeps differ in their integrals and everything below
    assert not [n for n in names if any(k in n for k in only_b)]
    # the archived summary names sweep A's point only (the archived config/config.yaml without
    # `study:` names the study "default")
    with tarfile.open(out) as tar:
        text = tar.extractfile(f"{ARCHIVE_ROOT}/results/default/summary.csv").read().decode()
    assert plan_a.rows[0]["key"] in text and plan_b.rows[0]["key"] not in text
    assert plan_b.rows[0]["key"] in (work / "results" / "b" / "summary.csv").read_text()


def test_archive_carries_workflow_config_and_environment(two_sweeps):
    _, out, _, _ = two_sweeps
    names = set(_names(out))
    for rel in (
        "Snakefile",
        "workflow/rules/common.smk",
        "workflow/rules/optimize.smk",
        "workflow/schemas/config.schema.yaml",
        "profiles/default/config.yaml",
        "envs/eigensweep.yaml",
        "config/config.yaml",
        "environment.lock",
        "plan.json",
        "MANIFEST.sha256",
        "ro-crate-metadata.json",
    ):
        assert f"{ARCHIVE_ROOT}/{rel}" in names, rel
    with tarfile.open(out) as tar:
        lock = tar.extractfile(f"{ARCHIVE_ROOT}/environment.lock").read().decode()
    assert "numpy==" in lock and "h5py==" in lock


def test_ro_crate_metadata_names_title_authors_licence(two_sweeps, tmp_path):
    # reference: the rocrate library reads the crate back (RO-Crate 1.1+ open standard)
    from rocrate.rocrate import ROCrate

    _, out, _, _ = two_sweeps
    root = safe_extract(out, tmp_path)
    crate = ROCrate(root)
    assert crate.name == "H2 test"
    assert crate.root_dataset["license"] == "CC-BY-4.0"
    authors = crate.root_dataset["author"]
    ids = {a.id for a in authors}
    assert "https://orcid.org/0000-0002-1825-0097" in ids
    assert crate.mainEntity.id == "Snakefile"


def test_verify_passes_and_reruns_a_stage(two_sweeps):
    _, out, _, _ = two_sweeps
    rep = verify_archive(out, stage="hamiltonian")
    assert rep.rerun_keys and rep.max_abs_diff <= 1e-8
    assert "results/default/summary.csv" in rep.tables


def _repack(root: Path, dest: Path, *, rehash: bool = True) -> Path:
    """Pack an edited extracted archive again, updating MANIFEST.sha256 (a careful forger)."""
    if rehash:
        lines = []
        for p in sorted(root.rglob("*")):
            rel = str(p.relative_to(root))
            if p.is_file() and rel not in ("MANIFEST.sha256", "ro-crate-metadata.json"):
                lines.append(f"{hashlib.sha256(p.read_bytes()).hexdigest()}  {rel}\n")
        (root / "MANIFEST.sha256").write_text("".join(lines))
    with tarfile.open(dest, "w:gz") as tar:
        tar.add(root, arcname=ARCHIVE_ROOT)
    return dest


def test_verify_fails_on_inserted_stale_table(two_sweeps, tmp_path):
    work, out, _, _ = two_sweeps
    root = safe_extract(out, tmp_path / "x")
    # B's summary slipped into A's archive, manifest re-hashed
    (root / "results" / "default" / "summary.csv").write_bytes(
        (work / "results" / "b" / "summary.csv").read_bytes()
    )
    bad = _repack(root, tmp_path / "bad.tar.gz")
    with pytest.raises(EigensweepError, match="summary.csv differs.*stale"):
        verify_archive(bad, stage=None)


def test_verify_fails_on_extra_stage_file(two_sweeps, tmp_path):
    work, out, _, plan_b = two_sweeps
    root = safe_extract(out, tmp_path / "x")
    node = plan_b.by_stage("integrals")[0]
    dst = stage_path(node.stage, node.key, root / "results")
    dst.write_bytes(stage_path(node.stage, node.key, work / "results").read_bytes())
    bad = _repack(root, tmp_path / "bad.tar.gz")
    with pytest.raises(EigensweepError, match="not part of the archived sweep's plan"):
        verify_archive(bad, stage=None)


def test_verify_fails_on_changed_byte(two_sweeps, tmp_path):
    _, out, _, _ = two_sweeps
    root = safe_extract(out, tmp_path / "x")
    victim = sorted((root / "results" / "integrals").glob("*.h5"))[0]
    data = bytearray(victim.read_bytes())
    data[len(data) // 2] ^= 0x01
    victim.write_bytes(bytes(data))
    bad = _repack(root, tmp_path / "bad.tar.gz", rehash=False)
    with pytest.raises(EigensweepError, match="does not match its SHA-256"):
        verify_archive(bad, stage=None)


@pytest.mark.parametrize(
    "line, match",
    [
        (f"{'0' * 64}  ../../etc/hostname", "outside the archive"),
        (f"{'0' * 64}  /etc/shadow", "outside the archive"),
        ("not a manifest line", "line 1 is not"),
    ],
)
def test_manifest_names_are_confined(two_sweeps, tmp_path, line, match):
    # issue 19: verify used to read and hash any path the manifest named
    _, out, _, _ = two_sweeps
    root = safe_extract(out, tmp_path / "x")
    (root / "MANIFEST.sha256").write_text(line + "\n")
    bad = _repack(root, tmp_path / "bad.tar.gz", rehash=False)
    with pytest.raises(EigensweepError, match=match) as ei:
        verify_archive(bad, stage=None)
    assert "\n" not in str(ei.value)


def test_total_size_and_member_count_are_bounded(tmp_path, monkeypatch):
    import eigensweep.archive as arc

    path = tmp_path / "big.tar.gz"
    with tarfile.open(path, "w:gz") as tar:
        for i in range(3):
            info = tarfile.TarInfo(f"{ARCHIVE_ROOT}/f{i}")
            info.size = 1000
            tar.addfile(info, io.BytesIO(b"\0" * 1000))
    monkeypatch.setattr(arc, "MAX_TOTAL_BYTES", 2500)
    with pytest.raises(EigensweepError, match="unpacks to more than 2500 bytes"):
        safe_extract(path, tmp_path / "out")
    monkeypatch.setattr(arc, "MAX_TOTAL_BYTES", 10**9)
    monkeypatch.setattr(arc, "MAX_MEMBERS", 2)
    with pytest.raises(EigensweepError, match="more than 2 members"):
        safe_extract(path, tmp_path / "out2")


def test_archive_refuses_to_overwrite(two_sweeps):
    work, out, plan_a, _ = two_sweeps
    with pytest.raises(EigensweepError, match="already exists"):
        make_archive(plan_a, load_config(work / "a.yaml"), work / "a.yaml", out)


@pytest.mark.slow
def test_extracted_archive_reruns_with_snakemake_alone(two_sweeps, tmp_path):
    # the design's promise: an extracted archive re-runs its sweep with plain snakemake and
    # reproduces summary.csv byte for byte (Snakemake regenerates the deleted tables)
    import subprocess
    import sys

    _, out, _, _ = two_sweeps
    root = safe_extract(out, tmp_path)
    study = root / "results" / "default"
    want = (study / "summary.csv").read_bytes()
    for name in ("summary.csv", "device_summary.csv", "analysis.csv", "README.md"):
        (study / name).unlink()
    for plot in (study / "plots").glob("*.*"):
        plot.unlink()
    proc = subprocess.run(
        [sys.executable, "-m", "snakemake", "--cores", "1"],
        cwd=root,
        capture_output=True,
        text=True,
        timeout=900,
    )
    assert proc.returncode == 0, proc.stderr[-3000:]
    assert (study / "summary.csv").read_bytes() == want


def test_file_where_a_folder_belongs_is_one_line(tmp_path):
    # issue 19: verify crashed on a member file standing where a folder is expected
    path = tmp_path / "odd.tar.gz"
    with tarfile.open(path, "w:gz") as tar:
        for name in (f"{ARCHIVE_ROOT}/results", f"{ARCHIVE_ROOT}/results/summary.csv"):
            info = tarfile.TarInfo(name)
            info.size = 1
            tar.addfile(info, io.BytesIO(b"x"))
    with pytest.raises(EigensweepError, match="cannot be unpacked") as ei:
        verify_archive(path, stage=None)
    assert "\n" not in str(ei.value)
