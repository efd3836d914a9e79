"""The stick spectrum figure: the chosen scan point (config ``collect.spectrum_point``) and a
figure that says in words when a molecule has no excited states."""

from __future__ import annotations

from pathlib import Path

import pytest

from eigensweep import figures
from eigensweep.config import ConfigError, validate_config

BASE = {
    "molecule": "h2",
    "basis": "6-31g",
    "spin": "requested",
    "mapping": "jordan_wigner",
    "tapered": False,
    "ansatz": "uccsd",
    "optimizer": "lbfgs",
    "estimator": "exact",
    "states": "vqd",
}


def _rows(points: dict[str, float]) -> list[dict]:
    """Ground and one excited row per point; the excitation energy marks the point."""
    out = []
    for point, de in points.items():
        for k in (0, 1):
            out.append(
                {
                    **BASE,
                    "point": point,
                    "state": k,
                    "excitation_energy_eh": de * k,
                    "oscillator_strength": 0.5 * k,
                    "energy_exact_eh": -1.0 + de * k,
                    "oscillator_strength_exact": 0.5 * k,
                }
            )
    return out


@pytest.fixture
def drawn(monkeypatch):
    """The figures plot_spectrum hands to save (instead of writing files)."""
    figs = []
    monkeypatch.setattr(figures, "save", lambda fig, stem: figs.append(fig) or [])
    return figs


def test_spectrum_point_by_position_and_label():
    rows = _rows({"r=0.74": 0.5, "r=1.2": 0.4, "r=2": 0.3})
    # position semantics of Python sequences (0 first, -1 last; common practice)
    assert figures.spectrum_point(rows, 0) == ("r=0.74", "")
    assert figures.spectrum_point(rows, -1) == ("r=2", "")
    assert figures.spectrum_point(rows, "r=1.2") == ("r=1.2", "")
    point, note = figures.spectrum_point(rows, 5)
    assert point == "r=0.74" and "outside this scan's 3 points" in note
    point, note = figures.spectrum_point(rows, "r=9")
    assert point == "r=0.74" and "not a point of this scan" in note


def test_spectrum_draws_the_chosen_point(drawn):
    rows = _rows({"r=0.74": 0.5, "r=1.2": 0.4})
    figures.plot_spectrum(rows, Path("unused"), "r=1.2")
    ax = drawn[-1].axes[0]
    sticks = ax.collections[0].get_segments()  # the method's stick at its excitation energy
    assert sticks[0][0][0] == pytest.approx(0.4 * figures.HARTREE_EV)
    assert "r=1.2" in ax.get_title()


def test_no_excited_states_says_so_without_empty_axes(drawn):
    rows = [r for r in _rows({"r=0.74": 0.5}) if r["state"] == 0]
    figures.plot_spectrum(rows, Path("unused"))
    ax = drawn[-1].axes[0]
    texts = " ".join(t.get_text() for t in ax.texts)
    assert not ax.axison and "No excited states" in texts and "vqd" in texts


def test_spectrum_point_config_key():
    mol = {"name": "h2", "atoms": "H 0 0 0; H 0 0 {r}", "scan": {"r": [0.74, 1.2]}}
    cfg = validate_config({"molecules": [mol]})
    assert cfg["collect"]["spectrum_point"] == 0  # the default: the first point
    for value in (-1, "r=1.2"):
        raw = {"molecules": [mol], "collect": {"spectrum_point": value}}
        assert validate_config(raw)["collect"]["spectrum_point"] == value
    with pytest.raises(ConfigError, match="spectrum_point"):
        validate_config({"molecules": [mol], "collect": {"spectrum_point": 1.5}})
