"""The shared stage store: one content-addressed folder of stage files used by many studies.

Unit checks run in this process; the concurrency check starts two real processes that write
the same key at the same time. Files are checked with h5py and os.stat directly where the
layout itself is what is checked.
"""

from __future__ import annotations

import json
import os
import subprocess
import sys
import textwrap

import h5py
import numpy as np
import pytest

from eigensweep.cli import main
from eigensweep.errors import EigensweepError
from eigensweep.stage_table import stage_key
from eigensweep.store import (
    link_stored,
    produce_stage,
    prune_store,
    read_stage,
    store_in_use,
    store_usage,
    stored_valid,
    write_stage,
)

PARAMS = {"basis": "sto-3g", "atoms": "H 0 0 0; H 0 0 0.74"}
KEY = stage_key("integrals", PARAMS, {})


def _compute(out: str, params=PARAMS, key=KEY) -> None:
    write_stage(
        out,
        stage="integrals",
        key=key,
        params=params,
        parents={},
        arrays={"h1e": np.arange(4.0).reshape(2, 2)},
        meta={"energy": -1.1},
    )


def test_store_keeps_the_file_and_the_study_links_to_it(tmp_path):
    store, study = tmp_path / "store", tmp_path / "a" / "results"
    out = study / "integrals" / f"{KEY}.h5"
    assert produce_stage(out, "integrals", KEY, store, _compute) is True
    target = store / "integrals" / f"{KEY}.h5"
    assert out.is_symlink() and os.path.realpath(out) == str(target)
    assert read_stage(out, stage="integrals", key=KEY).meta["energy"] == -1.1
    assert json.loads((study / "store.json").read_text()) == {"store": str(store)}
    # a second study: nothing computed, one more link to the same file
    calls = []
    other = tmp_path / "b" / "results" / "integrals" / f"{KEY}.h5"
    assert produce_stage(other, "integrals", KEY, store, calls.append) is False
    assert calls == [] and os.path.samefile(other, target)
    assert [e.studies for e in store_usage(store).entries] == [2]


def test_without_store_the_file_is_written_in_place(tmp_path):
    out = tmp_path / "results" / "integrals" / f"{KEY}.h5"
    assert produce_stage(out, "integrals", KEY, None, _compute) is True
    assert out.is_file() and not out.is_symlink()


def test_damaged_store_file_is_not_trusted_and_is_recomputed(tmp_path):
    # integrity on read stays: a store file whose stored parameters were edited does not hash
    # to its key (issue 19), so the store does not count it and the next job recomputes it
    store = tmp_path / "store"
    out = tmp_path / "results" / "integrals" / f"{KEY}.h5"
    produce_stage(out, "integrals", KEY, store, _compute)
    with h5py.File(store / "integrals" / f"{KEY}.h5", "r+") as f:
        f.attrs["parameters"] = json.dumps({**PARAMS, "basis": "6-31g"})
    assert not stored_valid(store, "integrals", KEY)
    with pytest.raises(EigensweepError, match="do not hash to its key"):
        read_stage(out)
    assert produce_stage(out, "integrals", KEY, store, _compute) is True
    assert read_stage(out, stage="integrals", key=KEY).params == PARAMS


WRITER = textwrap.dedent(
    """
    import sys, time
    import numpy as np
    from eigensweep.store import produce_stage, write_stage
    store, results, key, log = sys.argv[1:5]
    params = {"basis": "sto-3g", "atoms": "H 0 0 0; H 0 0 0.74"}
    def compute(out):
        with open(log, "a") as fh:
            fh.write("computed\\n")
        time.sleep(1.0)  # long enough for the other writer to arrive meanwhile
        write_stage(out, stage="integrals", key=key, params=params, parents={},
                    arrays={"h1e": np.arange(4.0).reshape(2, 2)}, meta={"energy": -1.1})
    t0 = float(sys.argv[5])
    while time.time() < t0:
        time.sleep(0.005)
    produce_stage(f"{results}/integrals/{key}.h5", "integrals", key, store, compute)
    """
)


def test_two_studies_writing_the_same_key_at_once_compute_it_once(tmp_path):
    import time

    store, log = tmp_path / "store", tmp_path / "computed.log"
    start = f"{time.time() + 3.0}"  # both processes wait for the same instant
    procs = [
        subprocess.Popen(
            [
                sys.executable,
                "-c",
                WRITER,
                str(store),
                str(tmp_path / s / "results"),
                KEY,
                str(log),
                start,
            ],
        )
        for s in ("a", "b")
    ]
    assert [p.wait(timeout=120) for p in procs] == [0, 0]
    assert log.read_text().count("computed") == 1  # not duplicated
    files = sorted(p.name for p in (store / "integrals").iterdir())
    assert files == [f"{KEY}.h5"]  # one file, no temporary left over
    for s in ("a", "b"):
        link = tmp_path / s / "results" / "integrals" / f"{KEY}.h5"
        assert read_stage(link, stage="integrals", key=KEY).meta["energy"] == -1.1  # not corrupt


def test_prune_is_a_dry_run_unless_told(tmp_path, capsys):
    store = tmp_path / "store"
    kept = tmp_path / "a" / "results" / "integrals" / f"{KEY}.h5"
    produce_stage(kept, "integrals", KEY, store, _compute)
    params2 = {**PARAMS, "atoms": "H 0 0 0; H 0 0 1.0"}
    key2 = stage_key("integrals", params2, {})
    gone_study = tmp_path / "b" / "results"
    produce_stage(
        gone_study / "integrals" / f"{key2}.h5",
        "integrals",
        key2,
        store,
        lambda out: _compute(out, params2, key2),
    )
    import shutil

    shutil.rmtree(tmp_path / "b")  # study b deleted: its file is no longer referenced
    assert main(["store", "prune", "--store", str(store)]) == 0
    out = capsys.readouterr().out
    assert f"would remove: integrals/{key2}" in out and "dry run" in out
    assert (store / "integrals" / f"{key2}.h5").is_file()
    assert main(["store", "prune", "--store", str(store), "--yes"]) == 0
    assert not (store / "integrals" / f"{key2}.h5").exists()
    assert (store / "integrals" / f"{KEY}.h5").is_file() and read_stage(kept).key == KEY
    assert main(["store", "list", "--store", str(store)]) == 0
    assert "1 stage jobs" in capsys.readouterr().out


def test_prune_refuses_while_a_sweep_uses_the_store(tmp_path, capsys):
    store = tmp_path / "store"
    produce_stage(tmp_path / "r" / "integrals" / f"{KEY}.h5", "integrals", KEY, store, _compute)
    held = store_in_use(store)
    try:
        assert main(["store", "prune", "--store", str(store), "--yes"]) == 2
        assert "a sweep using it is running" in capsys.readouterr().err
    finally:
        held.close()
    assert prune_store(store, delete=False).entries


def test_relinking_replaces_a_folder_left_by_a_run_without_store(tmp_path):
    store, results = tmp_path / "store", tmp_path / "results"
    (store / "export" / KEY).mkdir(parents=True)
    (store / "export" / KEY / "manifest.json").write_text("{}")
    (results / "export" / KEY).mkdir(parents=True)
    link_stored(store, "export", KEY, results)
    assert (results / "export" / KEY).is_symlink()
    assert (results / "export" / KEY / "manifest.json").read_text() == "{}"


def test_version_comes_from_package_metadata(capsys):
    from importlib import metadata

    with pytest.raises(SystemExit) as exc:
        main(["--version"])
    assert exc.value.code == 0
    assert capsys.readouterr().out.strip() == f"eigensweep {metadata.version('eigensweep')}"
