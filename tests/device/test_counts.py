"""Returned-results files: validation against the manifest and atomic import."""

from __future__ import annotations

import copy
import json
import os
from pathlib import Path

import jsonschema
import pytest
from fixtures import two_qubit_problem

from eigensweep.device.counts import (
    RESULTS_SCHEMA,
    import_results,
    load_results,
    validate_results,
)
from eigensweep.device.manifest import build_job, load_manifest, write_job
from eigensweep.device.synthetic import run_synthetic_device, write_results
from eigensweep.errors import ResultsFileError


@pytest.fixture(scope="module")
def job_folder(tmp_path_factory):
    ham, circ, *_ = two_qubit_problem()
    job = build_job(circ, ham, shots_total=3000, job_name="counts-test", meta={})
    folder = tmp_path_factory.mktemp("job")
    write_job(job, folder)
    good = run_synthetic_device(folder, seed=4, readout_error=(0.02, 0.03))
    return folder, good


def _first(d):
    return next(iter(d["results"]))


def _mutate(fn):
    def apply(good):
        d = copy.deepcopy(good)
        fn(d)
        return json.dumps(d)

    return apply


def _set_count(value):
    def fn(d):
        counts = d["results"][_first(d)]["counts"]
        counts[next(iter(counts))] = value

    return fn


def _dup_key(good):
    text = json.dumps(good)
    cid = _first(good)
    bits = next(iter(good["results"][cid]["counts"]))
    return text.replace(f'"{bits}": ', f'"{bits}": 1, "{bits}": ', 1)


BAD = [
    ("not-json", lambda g: json.dumps(g)[:-20], "not valid JSON"),
    ("empty-file", lambda g: "", "not valid JSON"),
    ("top-level-list", lambda g: "[1, 2]", "top level is not a JSON object"),
    ("wrong-format", _mutate(lambda d: d.update(format="other-results")), "format is"),
    ("wrong-version", _mutate(lambda d: d.update(format_version=2)), "format_version 2"),
    ("version-as-string", _mutate(lambda d: d.update(format_version="1")), "format_version"),
    ("job-id-mismatch", _mutate(lambda d: d.update(job_id="0" * 64)), "job_id"),
    ("job-id-missing", _mutate(lambda d: d.pop("job_id")), "'job_id' is missing"),
    ("results-missing", _mutate(lambda d: d.pop("results")), "'results' is missing"),
    (
        "unknown-circuit",
        _mutate(lambda d: d["results"].update(bogus=d["results"][_first(d)])),
        "unknown circuit id 'bogus'",
    ),
    ("missing-circuit", _mutate(lambda d: d["results"].pop(_first(d))), "has no results"),
    (
        "sha256-mismatch",
        _mutate(lambda d: d["results"][_first(d)].update(sha256="f" * 64)),
        "sha256 differs",
    ),
    (
        "bitstring-too-long",
        _mutate(lambda d: d["results"][_first(d)]["counts"].update({"010": 3})),
        "has length 3, expected 2",
    ),
    (
        "bitstring-bad-chars",
        _mutate(lambda d: d["results"][_first(d)]["counts"].update({"0x": 3})),
        "characters other than 0 and 1",
    ),
    ("negative-count", _mutate(_set_count(-4)), "is negative"),
    ("fractional-count", _mutate(_set_count(2.5)), "not a whole number"),
    ("float-count", _mutate(_set_count(3.0)), "not a whole number"),
    ("boolean-count", _mutate(_set_count(True)), "not a whole number"),
    ("string-count", _mutate(_set_count("12")), "not a whole number"),
    (
        "zero-shots",
        _mutate(lambda d: d["results"][_first(d)].update(counts={"00": 0, "11": 0})),
        "zero shots",
    ),
    (
        "counts-not-object",
        _mutate(lambda d: d["results"][_first(d)].update(counts=[1, 2])),
        "should be of type object",
    ),
    (
        "sha256-missing",
        _mutate(lambda d: d["results"][_first(d)].pop("sha256")),
        "'sha256' is missing",
    ),
    ("duplicate-key", _dup_key, "appears twice"),
    ("nan-count", lambda g: json.dumps(g).replace(": 1,", ": NaN,", 1), "NaN"),
]


@pytest.mark.parametrize("name, make, reason", BAD, ids=[b[0] for b in BAD])
def test_bad_results_files_are_refused_and_nothing_is_imported(
    job_folder, tmp_path, name, make, reason
):
    # common practice: validate everything before importing; one-line errors
    folder, good = job_folder
    text = make(good)
    assert text != json.dumps(good)
    src = tmp_path / f"{name}.json"
    src.write_text(text)
    dest_dir = tmp_path / "imported"
    dest_dir.mkdir()
    dest = dest_dir / "results.json"
    with pytest.raises(ResultsFileError, match=reason) as err:
        load_results(src, folder)
    msg = str(err.value)
    assert "\n" not in msg and msg.startswith(str(src))
    with pytest.raises(ResultsFileError):
        import_results(src, folder, dest)
    assert list(dest_dir.iterdir()) == []


def test_too_large_file_is_refused(job_folder, tmp_path):
    folder, good = job_folder
    src = tmp_path / "big.json"
    write_results(good, src)
    with pytest.raises(ResultsFileError, match="byte limit") as err:
        load_results(src, folder, max_bytes=100)
    assert "\n" not in str(err.value)
    with pytest.raises(ResultsFileError):
        import_results(src, folder, tmp_path / "dest.json", max_bytes=100)
    assert not (tmp_path / "dest.json").exists()


def test_binary_and_missing_files(job_folder, tmp_path):
    folder, _ = job_folder
    src = tmp_path / "bin.json"
    src.write_bytes(b"\xff\xfe\x00garbage")
    with pytest.raises(ResultsFileError, match="UTF-8"):
        load_results(src, folder)
    with pytest.raises(ResultsFileError, match="not found"):
        load_results(tmp_path / "nope.json", folder)


def test_good_file_loads_and_matches_schema(job_folder, tmp_path):
    # reference: jsonschema (JSON Schema 2020-12, open standard)
    folder, good = job_folder
    jsonschema.Draft202012Validator.check_schema(RESULTS_SCHEMA)
    jsonschema.validate(good, RESULTS_SCHEMA)
    src = write_results(good, tmp_path / "good.json")
    counts = load_results(src, folder)
    manifest = load_manifest(folder)
    assert list(counts) == [r["circuit_id"] for r in manifest["circuits"]]
    for rec in manifest["circuits"]:
        assert sum(counts[rec["circuit_id"]].values()) == rec["shots"]
    assert validate_results(good, manifest) == counts


def test_import_writes_normalised_copy_and_protects_existing(job_folder, tmp_path):
    folder, good = job_folder
    messy = copy.deepcopy(good)
    cid = _first(messy)
    messy["results"][cid]["counts"]["01"] = messy["results"][cid]["counts"].get("01", 0)
    messy["results"][cid]["counts"]["00"] = 0  # zero entries are dropped
    messy["results"] = dict(reversed(list(messy["results"].items())))
    messy["device"] = "bench\nline two"
    src = tmp_path / "src.json"
    src.write_text(json.dumps(messy))
    dest = tmp_path / "out" / "results.json"
    out = import_results(src, folder, dest)
    data = json.loads(out.read_text())
    manifest = load_manifest(folder)
    assert list(data["results"]) == [r["circuit_id"] for r in manifest["circuits"]]
    assert data["device"] == "bench line two"
    assert "00" not in data["results"][cid]["counts"]
    assert load_results(dest, folder) == load_results(src, folder)
    before = dest.read_text()
    assert import_results(src, folder, dest) == dest  # identical: accepted, untouched
    other = copy.deepcopy(good)
    other["device"] = "another run"
    src2 = tmp_path / "src2.json"
    src2.write_text(json.dumps(other))
    with pytest.raises(ResultsFileError, match="already exists") as err:
        import_results(src2, folder, dest)
    assert "\n" not in str(err.value)
    assert dest.read_text() == before


def test_import_without_manifest_is_refused(job_folder, tmp_path):
    _, good = job_folder
    src = write_results(good, tmp_path / "r.json")
    with pytest.raises(ResultsFileError, match="manifest"):
        import_results(src, tmp_path / "no-job", tmp_path / "dest.json")
    assert not (tmp_path / "dest.json").exists()


def test_fifo_and_device_are_refused_without_hanging(job_folder, tmp_path):
    # reading /dev/zero or a FIFO would never end (POSIX special files; common practice)
    folder, _ = job_folder
    fifo = tmp_path / "pipe.json"
    os.mkfifo(fifo)
    for path in (fifo, Path("/dev/zero")):
        with pytest.raises(ResultsFileError, match="regular file") as err:
            load_results(path, folder)
        assert "\n" not in str(err.value)


@pytest.mark.parametrize("count", ["1" + "0" * 5000, str(10**20), str(2**53)])
def test_huge_counts_are_refused(job_folder, tmp_path, count):
    # 2**53: largest range of exactly representable integers in IEEE-754 double precision
    folder, good = job_folder
    src = tmp_path / "huge.json"
    write_results(good, src)
    text = src.read_text()
    cid = next(iter(good["results"]))
    bits, old = next(iter(good["results"][cid]["counts"].items()))
    data = json.loads(text)
    data["results"][cid]["counts"][bits] = 0
    text = json.dumps(data).replace(f'"{bits}": 0', f'"{bits}": {count}', 1)
    src.write_text(text)
    with pytest.raises(ResultsFileError, match="2\\*\\*53") as err:
        load_results(src, folder)
    assert "\n" not in str(err.value) and len(str(err.value)) < 300


def test_qubit0_right_imports_reversed_bitstrings(job_folder, tmp_path):
    # reference: docs/counts-format.md (character k = qubit k); many tools print a register
    # highest bit first (common practice), i.e. the same counts with every bitstring reversed
    folder, good = job_folder
    flipped = copy.deepcopy(good)
    for rec in flipped["results"].values():
        rec["counts"] = {b[::-1]: c for b, c in rec["counts"].items()}
    src = tmp_path / "flipped.json"
    src.write_text(json.dumps(flipped))
    assert load_results(src, folder, qubit0="right") == validate_results(
        good, load_manifest(folder)
    )
    assert load_results(src, folder) != load_results(src, folder, qubit0="right")
    ours = import_results(write_results(good, tmp_path / "good.json"), folder, tmp_path / "a.json")
    theirs = import_results(src, folder, tmp_path / "b.json", qubit0="right")
    assert ours.read_text() == theirs.read_text()
    with pytest.raises(ResultsFileError, match="qubit0"):
        load_results(src, folder, qubit0="middle")
