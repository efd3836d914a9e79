"""Archive extraction refuses members that escape the target folder, links and oversized members
(common practice for handling untrusted tar files; Python's tarfile documentation warns about it)."""

from __future__ import annotations

import io
import tarfile

import pytest

from eigensweep.archive import safe_extract
from eigensweep.errors import EigensweepError


def _tar(path, members):
    with tarfile.open(path, "w:gz") as tar:
        for info, blob in members:
            tar.addfile(info, io.BytesIO(blob) if blob is not None else None)


def _file(name: str, blob: bytes = b"x"):
    info = tarfile.TarInfo(name)
    info.size = len(blob)
    return info, blob


@pytest.mark.parametrize(
    "member, fragment",
    [
        (_file("../escape.txt"), "outside the target folder"),
        (_file("/abs/escape.txt"), "outside the target folder"),
        (_file("eigensweep-archive/../../escape.txt"), "outside the target folder"),
    ],
)
def test_escaping_members_refused(tmp_path, member, fragment):
    _tar(tmp_path / "a.tar.gz", [member])
    with pytest.raises(EigensweepError, match=fragment):
        safe_extract(tmp_path / "a.tar.gz", tmp_path / "out")
    assert not (tmp_path / "escape.txt").exists()


def test_symlink_refused(tmp_path):
    link = tarfile.TarInfo("eigensweep-archive/link")
    link.type = tarfile.SYMTYPE
    link.linkname = "/etc/passwd"
    _tar(tmp_path / "a.tar.gz", [(link, None)])
    with pytest.raises(EigensweepError, match="link or device"):
        safe_extract(tmp_path / "a.tar.gz", tmp_path / "out")


def test_not_a_tar_refused_in_one_line(tmp_path):
    (tmp_path / "a.tar.gz").write_bytes(b"not a tar")
    with pytest.raises(EigensweepError) as ei:
        safe_extract(tmp_path / "a.tar.gz", tmp_path / "out")
    assert "\n" not in str(ei.value)


def test_good_member_extracted(tmp_path):
    _tar(tmp_path / "a.tar.gz", [_file("eigensweep-archive/ok.txt", b"fine")])
    root = safe_extract(tmp_path / "a.tar.gz", tmp_path / "out")
    assert (root / "ok.txt").read_bytes() == b"fine"
