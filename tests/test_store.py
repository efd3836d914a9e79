"""The stage-file helper: atomic writes, provenance, verified reads."""

from __future__ import annotations

import json

import h5py
import numpy as np
import pytest

from eigensweep.errors import StageFileError
from eigensweep.store import read_stage, write_stage

KEY = "0123456789abcdef"


def _write(tmp_path, key=KEY, stage="integrals"):
    path = tmp_path / stage / f"{key}.h5"
    write_stage(
        path,
        stage=stage,
        key=key,
        params={"basis": "sto-3g"},
        parents={},
        arrays={"h1e": np.arange(9.0).reshape(3, 3), "occ": np.array([1, 0], dtype=np.uint8)},
        meta={"energy": -1.1, "label": "x"},
        units={"h1e": "hartree"},
        wall_s=0.5,
    )
    return path


def test_round_trip_and_provenance(tmp_path):
    path = _write(tmp_path)
    sd = read_stage(path, stage="integrals", key=KEY)
    assert sd.meta == {"energy": -1.1, "label": "x"}
    np.testing.assert_array_equal(sd.arrays["h1e"], np.arange(9.0).reshape(3, 3))
    assert sd.arrays["occ"].dtype == np.uint8
    soft = json.loads(sd.attrs["software"])
    for pkg in ("eigensweep", "pyscf", "openfermion", "numpy", "scipy", "h5py", "python"):
        assert pkg in soft
    for attr in ("created", "host", "wall_s", "parameters", "parent_keys", "content_sha256"):
        assert attr in sd.attrs
    with h5py.File(path) as f:
        assert f["data/h1e"].attrs["units"] == "hartree"
    assert not [p for p in path.parent.iterdir() if p.name.endswith(".tmp")]


def test_key_must_match_file_name(tmp_path):
    path = _write(tmp_path)
    other = path.with_name("fedcba9876543210.h5")
    path.rename(other)
    with pytest.raises(StageFileError, match="does not match the file name"):
        read_stage(other)


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


def test_errors_are_one_line(tmp_path):
    with pytest.raises(StageFileError) as ei:
        read_stage(tmp_path / "integrals" / f"{KEY}.h5")
    assert "\n" not in str(ei.value)


def test_name_key_mismatch_on_write(tmp_path):
    with pytest.raises(StageFileError):
        write_stage(
            tmp_path / "x.h5", stage="integrals", key=KEY, params={}, parents={}, arrays={}, meta={}
        )
