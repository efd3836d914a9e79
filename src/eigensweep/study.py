"""Studies: named sub-sweeps of one configuration, each its own molecules x methods product.

A configuration is one *study* (``study:``, default the config file's stem).  Without
``sweeps:`` the top-level ``methods`` form one sweep named ``main`` over every molecule.  With
``sweeps:``, each entry ``{name, molecules, methods, zip, exclude}`` is a product of its own:
its ``methods`` override the top-level ones axis by axis (the top level supplies defaults),
``molecules`` names top-level molecules (default: all), ``zip`` pairs the listed axes
index-wise instead of crossing them, and ``exclude`` drops combinations matching any partial
method dict.  Combinations the optimize stage cannot run are skipped with one line each
(:attr:`Sweep.skipped`, listed by ``eigensweep plan``), or refused when ``strict: true``.

Studies change only how the plan is expanded and where tables go (``results/<study>/``),
never a stage key: a stage shared by two sweeps or two studies is one stage file.
"""

from __future__ import annotations

import itertools
from collections.abc import Callable
from dataclasses import dataclass, field
from pathlib import Path
from typing import Any

from .errors import ConfigError

#: Method axes in the order they form a combination.
AXES = ("mapping", "taper", "ansatz", "optimizer", "estimator", "states")

#: Sweep name used when the configuration has no ``sweeps:``.
DEFAULT_SWEEP = "main"


@dataclass
class Sweep:
    """One sub-sweep: which molecules, which method combinations, what was left out."""

    name: str
    molecules: list[str]
    combos: list[tuple] = field(default_factory=list)
    warm_start: bool = False
    skipped: list[str] = field(default_factory=list)
    seeds: list[int] = field(default_factory=lambda: [0])


#: Study name of a config file called ``config.yaml`` without ``study:`` (the default sweep's
#: file, and the name every archived config gets).
DEFAULT_STUDY = "default"


def study_name(cfg: dict, config_path: str | Path | None = None) -> str:
    """The study's name: ``study:`` from the config, else the config file's stem
    (``default`` for a file named ``config.yaml``)."""
    if cfg.get("study"):
        return str(cfg["study"])
    if config_path and Path(config_path).stem != "config":
        return Path(config_path).stem
    return DEFAULT_STUDY


def _combo_text(combo: tuple) -> str:
    mapping, taper, ansatz, optimizer, estimator, states = combo
    opts = lambda e: e["name"]  # noqa: E731
    return (
        f"{opts(ansatz)}, {opts(optimizer)}, {opts(estimator)}, {mapping}, "
        f"taper {str(taper).lower()}"
        + ("" if states["name"] == "ground" else f", states {states['name']}")
    )


def _value_matches(want: Any, have: Any) -> bool:
    if isinstance(have, dict):
        if isinstance(want, str):
            return have.get("name") == want
        return isinstance(want, dict) and all(have.get(k) == v for k, v in want.items())
    return want == have


def excluded(combo: tuple, exclude: list[dict]) -> bool:
    """True when the combination matches every key of one ``exclude`` entry."""
    values = dict(zip(AXES, combo, strict=True))
    return any(all(_value_matches(v, values[k]) for k, v in ex.items()) for ex in exclude)


def _product(methods: dict, zipped: list[str], where: str) -> list[tuple]:
    """Cartesian product of the axes, with the ``zipped`` axes paired index-wise."""
    unknown = [a for a in zipped if a not in AXES]
    if unknown:
        raise ConfigError(f"{where}.zip: {unknown[0]!r} is no method axis; use {', '.join(AXES)}")
    lengths = {a: len(methods[a]) for a in zipped}
    if len(set(lengths.values())) > 1:
        raise ConfigError(
            f"{where}.zip: zipped axes need equally long lists, got "
            + ", ".join(f"{a}: {n}" for a, n in lengths.items())
        )
    free = [a for a in AXES if a not in zipped]
    pairs = list(zip(*(methods[a] for a in zipped), strict=True)) if zipped else [()]
    out = []
    for pair in pairs:
        for rest in itertools.product(*(methods[a] for a in free)):
            values = dict(zip(zipped, pair, strict=True)) | dict(zip(free, rest, strict=True))
            out.append(tuple(values[a] for a in AXES))
    return out


def expand_sweeps(cfg: dict, check: Callable[..., None], source: str = "config") -> list[Sweep]:
    """The sweeps of a validated configuration with their method combinations.

    Args:
        cfg: output of :func:`eigensweep.config.validate_config` (method entries filled).
        check: the combination rule, :func:`eigensweep.config.check_combination` (passed in so
            this module does not import the config module that calls it).
        source: name used in error messages.

    Returns:
        One :class:`Sweep` per ``sweeps`` entry (or one ``main`` sweep).

    Raises:
        ConfigError: unknown molecule names, duplicate sweep names, bad ``zip``; an unsupported
            combination when ``strict`` is on; a sweep left with nothing to run.
    """
    top = cfg["methods"]
    names = [m["name"] for m in cfg["molecules"]]
    entries = cfg.get("sweeps") or [{"name": DEFAULT_SWEEP}]
    seen: set[str] = set()
    out = []
    for i, entry in enumerate(entries):
        where = f"{source}: sweeps[{i}] ({entry['name']})" if cfg.get("sweeps") else source
        if entry["name"] in seen:
            raise ConfigError(f"{where}: name is used twice; give each sweep its own name")
        seen.add(entry["name"])
        mols = entry.get("molecules") or names
        missing = [m for m in mols if m not in names]
        if missing:
            raise ConfigError(
                f"{where}.molecules: {missing[0]!r} is not a top-level molecule; use one of "
                + ", ".join(names)
            )
        methods = {**top, **(entry.get("methods") or {})}
        seeds = entry.get("seeds") or cfg.get("seeds") or [cfg.get("seed", 0)]
        if len(set(seeds)) != len(seeds):
            raise ConfigError(f"{where}: seeds repeat a value; list each seed once")
        sweep = Sweep(
            entry["name"],
            list(mols),
            warm_start=bool(methods.get("warm_start")),
            seeds=[int(x) for x in seeds],
        )
        for combo in _product(methods, list(entry.get("zip") or []), where):
            if excluded(combo, entry.get("exclude") or []):
                continue
            mapping, taper, ansatz, optimizer, estimator, states = combo
            try:
                check(
                    ansatz, taper, mapping, optimizer=optimizer, estimator=estimator, states=states
                )
            except ConfigError as exc:
                line = f"{_combo_text(combo)}: {exc}"
                if cfg.get("strict"):
                    raise ConfigError(f"{where}: {line} (strict: true)") from None
                sweep.skipped.append(f"sweep {sweep.name}: skipped {line}")
                continue
            sweep.combos.append(combo)
        if not sweep.combos:
            raise ConfigError(
                f"{where}: no method combination is left to run"
                + (f" ({sweep.skipped[0]})" if sweep.skipped else "")
                + "; change the methods or exclude list"
            )
        out.append(sweep)
    return out


def figure_stems(molecules: list[str], exports: list[dict] | None = None) -> list[str]:
    """Figures a study writes (PNG and PDF), relative to ``plots/``.

    Besides the per-molecule figures (energy, error, convergence, every state's curve with
    the exact roots, and the stick spectrum) and the resource plot, one energy-vs-noise-scale plot
    (``zne_<export key>``) per reconciled device job in ``exports``; the paged histograms of
    those jobs go to :data:`DEVICE_HISTOGRAM_FOLDER` (their number is known only after export).
    """
    kinds = ("energy", "error", "convergence", "states", "spectrum")
    out = [f"{m}_{kind}" for m in molecules for kind in kinds]
    out += ["resources", "shots_error"]
    return out + [f"zne_{ex['key_export']}" for ex in reconciled_exports(exports or [])]


#: Folder under ``plots/`` holding every device circuit's returned-vs-ideal histogram pages.
DEVICE_HISTOGRAM_FOLDER = "device_histograms"


def reconciled_exports(exports: list[dict]) -> list[dict]:
    """The device jobs of a plan that have counts to reconcile (and so have figures)."""
    return [ex for ex in exports if ex.get("key_reconcile")]
