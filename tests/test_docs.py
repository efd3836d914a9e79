"""Every configuration key and method option is documented (common practice: docs that can
drift get a test), and every schema property carries a description."""

from __future__ import annotations

from pathlib import Path

from eigensweep.config import load_schema
from eigensweep.vqe import ANSATZ_DEFAULTS, ESTIMATOR_DEFAULTS, OPTIMIZER_DEFAULTS

README = (Path(__file__).resolve().parents[1] / "config" / "README.md").read_text()


def _walk(schema: dict, path: str = ""):
    for name, sub in schema.get("properties", {}).items():
        yield f"{path}{name}", name, sub
        yield from _walk(sub, f"{path}{name}.")
        if isinstance(sub.get("items"), dict):
            yield from _walk(sub["items"], f"{path}{name}[].")


def test_every_schema_key_is_documented_and_described():
    for dotted, name, sub in _walk(load_schema()):
        assert f"`{name}`" in README or f"`{dotted}`" in README, (
            f"{dotted} missing from config/README.md"
        )
        assert sub.get("description"), f"{dotted} has no description in the schema"


def test_every_method_and_option_is_documented():
    for table in (ANSATZ_DEFAULTS, OPTIMIZER_DEFAULTS, ESTIMATOR_DEFAULTS):
        for name, opts in table.items():
            assert f"`{name}`" in README, name
            for opt in opts:
                assert f"`{opt}`" in README, f"{name}.{opt}"
