"""Stage-file I/O: atomic writes, self-describing layout, provenance, verified reads.

Files are inspected with h5py directly (the HDF5 reference library), not with the store's own
reader, wherever the layout itself is what is checked.
"""

from __future__ import annotations

import errno
import hashlib
import json
import os
import stat

import h5py
import numpy as np
import pytest

from eigensweep.errors import EigensweepError, StageFileError
from eigensweep.stage_table import stage_key
from eigensweep.store import (
    FORMAT_VERSION,
    atomic_path,
    atomic_write_text,
    read_stage,
    write_stage,
)

PARAMS = {"basis": "sto-3g"}
KEY = stage_key("integrals", PARAMS, {})
META = {
    "energy": -1.1,
    "n_qubits": 4,
    "tapered": True,
    "label": "x",
    "none": None,
    "nelec": [1, 1],
    "references": {"hf": -1.0, "fci": -1.1},
    "counts": {f"{i:07b}": i for i in range(100)},  # large mapping: one JSON dataset
    "long": "y" * 1000,
}


def _write(tmp_path, params=PARAMS, key=KEY, stage="integrals", meta=META):
    path = tmp_path / stage / f"{key}.h5"
    write_stage(
        path,
        stage=stage,
        key=key,
        params=params,
        parents={},
        arrays={
            "h1e": np.arange(9.0).reshape(3, 3),
            "occ": np.array([1, 0], dtype=np.uint8),
            "hamiltonian/coeffs": np.array([0.5, -0.25]),
        },
        meta=meta,
        units={"h1e": "hartree", "hamiltonian/coeffs": "hartree"},
        wall_s=0.5,
    )
    return path


def test_round_trip_and_provenance(tmp_path):
    path = _write(tmp_path)
    sd = read_stage(path, stage="integrals", key=KEY)
    assert sd.meta == META
    np.testing.assert_array_equal(sd.arrays["h1e"], np.arange(9.0).reshape(3, 3))
    np.testing.assert_array_equal(sd.arrays["hamiltonian/coeffs"], [0.5, -0.25])
    assert sd.arrays["occ"].dtype == np.uint8
    soft = json.loads(sd.attrs["software"])
    for pkg in ("eigensweep", "pyscf", "openfermion", "numpy", "scipy", "h5py", "python"):
        assert pkg in soft
    for attr in ("created", "host", "wall_s", "parameters", "parent_keys", "content_sha256"):
        assert attr in sd.attrs
    assert not [p for p in path.parent.iterdir() if p.name.endswith(".tmp")]


def test_layout_is_self_describing(tmp_path):
    # read with h5py alone: a group per object, units on datasets, results as attributes
    path = _write(tmp_path)
    with h5py.File(path) as f:
        assert f.attrs["format_version"] == FORMAT_VERSION
        assert isinstance(f["data/hamiltonian"], h5py.Group)
        assert f["data/hamiltonian/coeffs"].attrs["units"] == "hartree"
        assert f["data/h1e"].attrs["units"] == "hartree"
        res = f["results"]
        assert res.attrs["energy"] == -1.1 and res.attrs["n_qubits"] == 4
        assert bool(res.attrs["tapered"]) is True
        assert res["references"].attrs["fci"] == -1.1
        assert res["counts"].attrs["encoding"] == "json"
        assert json.loads(res["nelec"][()]) == [1, 1]


def test_content_hash_excludes_timings(tmp_path):
    # two writes of the same content differ only in created / wall_s (common practice:
    # a content hash identifies results, not when they were made)
    a = _write(tmp_path / "a")
    b = _write(tmp_path / "b")
    with h5py.File(a) as fa, h5py.File(b) as fb:
        assert fa.attrs["content_sha256"] == fb.attrs["content_sha256"]


def test_timings_in_results_are_outside_the_content_hash(tmp_path):
    # issue 19: identical runs differed in content_sha256 because wall_s was hashed
    a = _write(tmp_path / "a", meta={**META, "wall_s": 1.0})
    b = _write(tmp_path / "b", meta={**META, "wall_s": 2.0})
    with h5py.File(a) as fa, h5py.File(b) as fb:
        assert fa.attrs["content_sha256"] == fb.attrs["content_sha256"]
        assert fb["timing"].attrs["wall_s"] == 2.0 and "wall_s" not in fb["results"].attrs
    assert read_stage(b).meta == {**META, "wall_s": 2.0}


def test_key_must_match_file_name(tmp_path):
    path = _write(tmp_path)
    other = path.with_name("fedcba9876543210.h5")
    path.rename(other)
    with pytest.raises(StageFileError, match="does not match the file name"):
        read_stage(other)


def test_forged_key_is_refused(tmp_path):
    # a file of another point copied under this key with its key attribute edited (issue 19)
    src = _write(
        tmp_path / "src",
        params={"basis": "6-31g"},
        key=stage_key("integrals", {"basis": "6-31g"}, {}),
    )
    dst = tmp_path / "integrals" / f"{KEY}.h5"
    dst.parent.mkdir(parents=True)
    dst.write_bytes(src.read_bytes())
    with h5py.File(dst, "a") as f:
        f.attrs["key"] = KEY
    with pytest.raises(StageFileError, match="do not hash to its key") as ei:
        read_stage(dst, stage="integrals", key=KEY)
    assert "\n" not in str(ei.value)


def test_flipped_bit_in_parameters_is_one_line_damage(tmp_path):
    path = _write(tmp_path)
    with h5py.File(path, "a") as f:
        text = f.attrs["parameters"]
        f.attrs["parameters"] = text[:-1] + chr(ord(text[-1]) ^ 1)  # '}' -> '|': not JSON
    with pytest.raises(StageFileError, match="damaged") as ei:
        read_stage(path)
    assert "\n" not in str(ei.value)


def test_edited_parameters_are_refused(tmp_path):
    path = _write(tmp_path)
    with h5py.File(path, "a") as f:
        f.attrs["parameters"] = json.dumps({"basis": "6-31g"})
    with pytest.raises(StageFileError, match="do not hash to its key"):
        read_stage(path)


def test_old_format_gets_one_line_advice(tmp_path):
    path = _write(tmp_path)
    with h5py.File(path, "a") as f:
        f.attrs["format_version"] = 1
    with pytest.raises(StageFileError, match="old stage-file format 1.*eigensweep run") as ei:
        read_stage(path)
    assert "\n" not in str(ei.value)


def test_unknown_format_version_refused(tmp_path):
    path = _write(tmp_path)
    with h5py.File(path, "a") as f:
        f.attrs["format_version"] = 99
    with pytest.raises(StageFileError, match="format version 99 is unknown"):
        read_stage(path)


def test_wrong_stage_refused(tmp_path):
    path = _write(tmp_path)
    with pytest.raises(StageFileError, match="expected 'optimize'"):
        read_stage(path, stage="optimize")


def test_truncated_file_refused(tmp_path):
    path = _write(tmp_path)
    data = path.read_bytes()
    path.write_bytes(data[: len(data) // 2])
    with pytest.raises(StageFileError, match="damaged or truncated"):
        read_stage(path)


def test_flipped_byte_in_data_refused(tmp_path):
    path = _write(tmp_path)
    with h5py.File(path, "a") as f:
        f["data/h1e"][0, 0] = 42.0  # silent damage HDF5 itself cannot see
    with pytest.raises(StageFileError, match="checksum mismatch"):
        read_stage(path)


def test_edited_result_attribute_refused(tmp_path):
    path = _write(tmp_path)
    with h5py.File(path, "a") as f:
        f["results"].attrs["energy"] = -2.0
    with pytest.raises(StageFileError, match="checksum mismatch"):
        read_stage(path)


def test_non_stage_files_are_named_as_such(tmp_path):
    text = tmp_path / "README.md"
    text.write_text("# not a stage file\n")
    with pytest.raises(StageFileError, match="not an HDF5 file") as ei:
        read_stage(text)
    assert "delete" not in str(ei.value)
    with pytest.raises(StageFileError, match="not a regular file"):
        read_stage(tmp_path)
    other = tmp_path / "other.h5"
    with h5py.File(other, "w") as f:
        f["x"] = 1
    with pytest.raises(StageFileError, match="not an eigensweep stage file"):
        read_stage(other)


def test_errors_are_one_line(tmp_path):
    with pytest.raises(StageFileError) as ei:
        read_stage(tmp_path / "integrals" / f"{KEY}.h5")
    assert "\n" not in str(ei.value)


def test_name_and_key_mismatch_on_write(tmp_path):
    with pytest.raises(StageFileError, match="file name"):
        write_stage(
            tmp_path / "x.h5", stage="integrals", key=KEY, params={}, parents={}, arrays={}, meta={}
        )
    with pytest.raises(StageFileError, match="not the stage key"):
        write_stage(
            tmp_path / f"{KEY}.h5",
            stage="integrals",
            key=KEY,
            params={"basis": "other"},
            parents={},
            arrays={},
            meta={},
        )


def test_atomic_write_keeps_old_file_on_failure(tmp_path):
    target = tmp_path / "table.csv"
    target.write_text("old")
    with pytest.raises(RuntimeError), atomic_path(target) as tmp:
        tmp.write_text("half")
        raise RuntimeError("killed")
    assert target.read_text() == "old"
    assert [p.name for p in tmp_path.iterdir()] == ["table.csv"]


def test_atomic_write_uses_umask(tmp_path):
    # POSIX: a new file gets 0o666 & ~umask (common practice; mkstemp alone gives 0o600)
    old = os.umask(0o022)
    try:
        path = atomic_write_text(tmp_path / "a.txt", "x\n")
    finally:
        os.umask(old)
    assert stat.S_IMODE(path.stat().st_mode) == 0o644
    assert hashlib.sha256(path.read_bytes()).hexdigest() == hashlib.sha256(b"x\n").hexdigest()


def test_bounded_read_refuses_fifo_and_large_files(tmp_path):
    from eigensweep.inputs import read_bounded

    fifo = tmp_path / "pipe"
    os.mkfifo(fifo)
    with pytest.raises(StageFileError, match="regular file"):
        read_bounded(fifo, 100, "counts file", StageFileError)
    big = tmp_path / "big"
    big.write_bytes(b"0" * 101)
    with pytest.raises(StageFileError, match="above the 100-byte limit"):
        read_bounded(big, 100, "counts file", StageFileError)
    assert read_bounded(big, 101, "counts file") == b"0" * 101


@pytest.mark.parametrize(
    "code, words", [(errno.ENOSPC, "disk full"), (errno.EROFS, "read-only file system")]
)
def test_full_or_read_only_disk_is_one_line_naming_the_folder(tmp_path, monkeypatch, code, words):
    # errno values from POSIX (ENOSPC "No space left on device", EROFS); the old store let
    # CPython's traceback through
    import eigensweep.store as store

    def fail(src, dst):
        raise OSError(code, os.strerror(code))

    monkeypatch.setattr(store.os, "replace", fail)
    with pytest.raises(EigensweepError, match=words) as ei:
        _write(tmp_path)
    msg = str(ei.value)
    assert msg.startswith(str(tmp_path / "integrals")) and "\n" not in msg
    assert not list((tmp_path / "integrals").iterdir())  # no temporary file left behind


def test_real_full_disk_on_a_small_tmpfs(tmp_path):
    # a 256 kB tmpfs really fills up (Linux tmpfs size= option); root only, skipped elsewhere
    import subprocess

    if os.geteuid() != 0:
        pytest.skip("mounting a tmpfs needs root")
    mnt = tmp_path / "small"
    mnt.mkdir()
    if subprocess.run(["mount", "-t", "tmpfs", "-o", "size=256k", "tmpfs", str(mnt)]).returncode:
        pytest.skip("cannot mount a tmpfs here")
    try:
        key = stage_key("integrals", {}, {})
        path = mnt / "integrals" / f"{key}.h5"
        with pytest.raises(EigensweepError, match="disk full") as ei:
            write_stage(
                path,
                stage="integrals",
                key=key,
                params={},
                parents={},
                arrays={"a": np.zeros(100_000)},
                meta={},
            )
        assert "\n" not in str(ei.value)
        assert not list(path.parent.iterdir())
    finally:
        subprocess.run(["umount", str(mnt)])
