"""Command-line traps of issue 18 around configs, show and archive: each fails on the old main."""

from __future__ import annotations

import pytest

from eigensweep.cli import main
from eigensweep.errors import EigensweepError


@pytest.mark.parametrize("command", ["plan", "run", "archive"])
def test_no_silent_fallback_to_the_demo_config(tmp_path, monkeypatch, capsys, command):
    # outside a sweep folder the old main planned the repository's demo sweep
    monkeypatch.chdir(tmp_path)
    assert main([command]) == 2
    err = capsys.readouterr().err.strip()
    assert "config/config.yaml" in err and "--config" in err and "\n" not in err
    assert not (tmp_path / "results").exists()


def test_show_on_a_text_file_says_it_is_not_a_stage_file(tmp_path, capsys):
    readme = tmp_path / "README.md"
    readme.write_text("# notes\n")
    assert main(["show", str(readme)]) == 2
    err = capsys.readouterr().err.strip()
    assert "not an eigensweep stage file" in err and "delete" not in err


def test_archive_author_needs_a_valid_orcid():
    # ORCID iDs are 16 digits in four groups, the last may be X (orcid.org; from memory)
    from rocrate.rocrate import ROCrate

    from eigensweep.archive import _person

    with pytest.raises(EigensweepError, match="is not an ORCID"):
        _person(ROCrate(), "A. Person <1234>")
    p = _person(ROCrate(), "A. Person <https://orcid.org/0000-0002-1825-009X>")
    assert p.id == "https://orcid.org/0000-0002-1825-009X" and p["name"] == "A. Person"
