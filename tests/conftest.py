"""Shared fixtures."""

from __future__ import annotations

import copy

import pytest

TINY = {
    "molecules": [
        {
            "name": "h2",
            "atoms": "H 0 0 0; H 0 0 {r}",
            "scan": {"r": [0.7, 0.74]},
            "basis": "sto-3g",
        },
        {"name": "lih", "atoms": "Li 0 0 0; H 0 0 {r}", "scan": {"r": [1.6]}, "basis": "sto-3g"},
    ],
    "methods": {"optimizer": [{"name": "lbfgs"}]},
}


@pytest.fixture
def tiny_raw() -> dict:
    return copy.deepcopy(TINY)
