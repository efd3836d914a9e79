"""Device figures of a study: every circuit's histogram page and the noise-scaling plot are the
files the collect rule declares (``study.figure_stems`` and the histogram folder), and an
archive of the study re-derives and verifies them."""

from __future__ import annotations

import math

import pytest
from fixtures import run_plan

from eigensweep.archive import make_archive, verify_archive
from eigensweep.collect import collect
from eigensweep.config import validate_config
from eigensweep.figures import DEVICE_HISTOGRAM_FOLDER, figure_stems
from eigensweep.store import read_stage

RAW = {
    "study": "dev",
    "molecules": [{"name": "h2", "atoms": "H 0 0 0; H 0 0 {r}", "scan": {"r": [0.75]}}],
    "methods": {"taper": [False]},
    "export": {"select": [{"molecule": "h2"}], "shots": 20000, "scale_factors": [1, 3, 5]},
    "device": {"kind": "synthetic"},
}


@pytest.fixture(scope="module")
def study(tmp_path_factory):
    work = tmp_path_factory.mktemp("devfig")
    results = work / "results"
    cfg, plan = run_plan(RAW, results)
    files = collect(plan.rows, results, 1.6, plan.exports, study="dev")
    return work, results, cfg, plan, files


def test_written_figures_are_the_declared_ones(study):
    _, results, _, plan, files = study
    plots = results / "dev" / "plots"
    (ex,) = plan.exports
    declared = {f"{s}.{ext}" for s in figure_stems(["h2"], plan.exports) for ext in ("png", "pdf")}
    assert f"zne_{ex['key_export']}.png" in declared
    top = {f.name for f in files if f.parent == plots}
    assert top == declared
    # every circuit of the job on some page: 12 panels a page (ceil; closed form)
    n = len(read_stage(results / "export" / f"{ex['key_export']}.h5").meta["manifest"]["circuits"])
    pages = sorted(f.name for f in files if f.parent == plots / DEVICE_HISTOGRAM_FOLDER)
    n_pages = math.ceil(n / 12)
    assert n > 12 and len(pages) == 2 * n_pages  # PDF and PNG of each page
    assert pages == sorted(
        f"device_{ex['key_export']}_p{i + 1}.{ext}"
        for i in range(n_pages)
        for ext in ("pdf", "png")
    )


def test_archive_verifies_the_histogram_folder(study, tmp_path):
    import yaml

    work, results, _, plan, _ = study
    (work / "dev.yaml").write_text(yaml.safe_dump(RAW))
    out = make_archive(
        plan, validate_config(RAW), work / "dev.yaml", tmp_path / "a.tar.gz", results=results
    )
    report = verify_archive(out)
    assert "results/dev/summary.csv" in report.tables
