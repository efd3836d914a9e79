"""The planner: a validated configuration -> the stage jobs of a sweep, keyed by content.

Each stage job (a :class:`Node`) has a key: the first 16 hex digits of SHA-256 over the canonical
JSON of ``{stage, stage format version, fully resolved parameters, parent keys}``. Keys therefore
form a Merkle chain: changing the optimizer changes the ``optimize`` key and nothing upstream, so
integrals and Hamiltonians are reused, also across sweeps that share them.

:func:`build_plan` is a pure function of the configuration (it reads only molecule XYZ files named
by the configuration); Snakemake rules look nodes up by key.
"""

from __future__ import annotations

import hashlib
import itertools
from dataclasses import dataclass, field
from pathlib import Path

import numpy as np

from .errors import ConfigError
from .stage_table import (  # noqa: F401 (STAGE_VERSIONS, canonical_json re-exported)
    STAGE_VERSIONS,
    canonical_json,
    parent_paths,
    returned_path,
    stage_key,
)

#: Integrals-node parameters that define the molecule itself (what chemistry checks need).
MOLECULE_KEYS = ("atoms", "basis", "charge", "multiplicity", "unit", "frozen_core", "active")


def molecule_kwargs(params: dict) -> dict:
    """The molecule-defining subset of an integrals node's parameters, as keyword arguments."""
    return {k: params[k] for k in MOLECULE_KEYS}


@dataclass(frozen=True)
class Node:
    """One stage job: ``results/<stage>/<key>.h5``."""

    stage: str
    key: str
    params: dict
    parents: dict[str, str] = field(default_factory=dict)

    def as_dict(self) -> dict:
        return {
            "stage": self.stage,
            "key": self.key,
            "params": self.params,
            "parents": self.parents,
        }


@dataclass
class Plan:
    """All stage jobs of a sweep plus one row of labels per optimize job."""

    nodes: dict[str, Node]
    rows: list[dict]
    exports: list[dict] = field(default_factory=list)
    study: str = "main"
    skipped: list[str] = field(default_factory=list)

    def by_stage(self, stage: str) -> list[Node]:
        return [n for n in self.nodes.values() if n.stage == stage]

    def node(self, key: str) -> Node:
        try:
            return self.nodes[key]
        except KeyError:
            raise ConfigError(f"stage key {key} is not part of this sweep's plan") from None


def _format_value(v: float) -> str:
    return format(float(v), ".10g")


def scan_points(mol: dict, where: str) -> list[dict[str, float]]:
    """Expand a molecule's ``scan`` into a list of {variable: value} points (config order)."""
    scan = mol.get("scan") or {}
    axes: dict[str, list[float]] = {}
    for var, spec in scan.items():
        if isinstance(spec, dict) and "values" in spec:
            vals = [float(v) for v in spec["values"]]
        elif isinstance(spec, dict):
            vals = np.linspace(spec["start"], spec["stop"], spec["num"]).tolist()
        else:
            vals = [float(v) for v in spec]
        axes[var] = [round(v, 12) for v in vals]
    if not axes:
        return [{}]
    names = list(axes)
    if mol.get("scan_mode", "product") == "zip":
        lengths = {len(v) for v in axes.values()}
        if len(lengths) > 1:
            raise ConfigError(
                f"{where}: scan_mode zip needs equally long scans, got "
                + ", ".join(f"{k}: {len(v)}" for k, v in axes.items())
                + "; give each variable the same number of values or use scan_mode: product"
            )
        combos = list(zip(*axes.values(), strict=True))
    else:
        combos = list(itertools.product(*axes.values()))
    return [dict(zip(names, c, strict=True)) for c in combos]


def point_label(point: dict[str, float]) -> str:
    return ",".join(f"{k}={_format_value(v)}" for k, v in point.items()) or "single"


def molecule_geometry(mol: dict, where: str, base_dir: Path) -> str:
    """The molecule's atom string template (from ``atoms`` or an XYZ file)."""
    has_atoms, has_xyz = "atoms" in mol, "xyz" in mol
    if has_atoms == has_xyz:
        raise ConfigError(f"{where}: give exactly one of 'atoms' or 'xyz'")
    if has_atoms:
        return mol["atoms"]
    from .chem.geometry import read_xyz  # reads a file; no PySCF needed

    path = Path(mol["xyz"])
    if not path.is_absolute():
        path = base_dir / path
    try:
        return read_xyz(path)
    except ConfigError as exc:
        raise ConfigError(f"{where}: xyz: {exc}") from None


def fill_geometry(template: str, point: dict[str, float], where: str) -> str:
    """Cartesian atom string of one scan point (placeholders evaluated, Z-matrix converted)."""
    from .chem.geometry import fill_template  # no PySCF needed

    return fill_template(template, point, where)


def scan_units(mol: dict, template: str, where: str) -> dict[str, str]:
    """Unit of each scan variable: the scan entry's own ``unit``, else inferred from its place."""
    from .chem.geometry import infer_scan_units, normalise_unit

    out = infer_scan_units(template, mol.get("unit", "angstrom"), where)
    for var, spec in (mol.get("scan") or {}).items():
        unit = spec.get("unit") if isinstance(spec, dict) else None
        if unit in ("angstrom", "bohr"):
            out[var] = normalise_unit(unit, where)
        elif unit is not None:
            out[var] = unit
    return out


def method_label(kind: str, entry: dict) -> str:
    """Short readable label: name plus options that differ from defaults, e.g. ``kupccgsd(k=3)``."""
    from .config import method_defaults

    defaults = method_defaults(kind, entry["name"])
    opts = {k: v for k, v in entry.items() if k != "name" and defaults.get(k) != v}
    if not opts:
        return entry["name"]
    return entry["name"] + "(" + ",".join(f"{k}={v}" for k, v in sorted(opts.items())) + ")"


def _sweep_molecules(cfg: dict, sweeps: list):
    """(sweep, index, molecule) for every molecule of every sweep, in config order."""
    for sweep in sweeps:
        for im, mol in enumerate(cfg["molecules"]):
            if mol["name"] in sweep.molecules:
                yield sweep, im, mol


def build_plan(
    cfg: dict,
    base_dir: str | Path = ".",
    results_dir: str | Path = "results",
    config_path: str | Path | None = None,
) -> Plan:
    """Expand a validated configuration into stage nodes with Merkle keys.

    Args:
        cfg: output of :func:`eigensweep.config.validate_config` (defaults filled).
        base_dir: folder against which relative XYZ paths are resolved.
        results_dir: where imported device results are looked for (external device only).
        config_path: the configuration file, whose stem names the study when ``study`` is unset.

    Returns:
        The :class:`Plan`; ``rows`` are ordered sweep, molecule, point, then methods.
    """
    from .config import check_combination
    from .study import expand_sweeps, study_name

    base_dir = Path(base_dir)
    nodes: dict[str, Node] = {}

    def add(stage: str, params: dict, parents: dict[str, str]) -> str:
        key = stage_key(stage, params, parents)
        nodes.setdefault(key, Node(stage, key, params, dict(parents)))
        return key

    refs = cfg["references"]
    targets_read: dict[str, dict] = {}  # estimator target path -> its content
    sweeps = expand_sweeps(cfg, check_combination)
    rows: list[dict] = []
    for sweep, im, mol in _sweep_molecules(cfg, sweeps):
        combos = sweep.combos
        where = f"molecules[{im}] ({mol['name']})"
        template = molecule_geometry(mol, where, base_dir)
        points = scan_points(mol, where)
        units = scan_units(mol, template, where)
        prev_int: str | None = None
        prev_opt: dict[tuple[int, int], str] = {}
        for point in points:
            atoms = fill_geometry(template, point, f"{where} point {point_label(point)}")
            int_params = {
                "atoms": atoms,
                "unit": mol["unit"],
                "charge": mol["charge"],
                "multiplicity": mol["multiplicity"],
                "basis": mol["basis"].lower(),
                "symmetry": mol["symmetry"],
                "frozen_core": mol["frozen_core"],
                "active": mol["active"],
                "fci_max_determinants": refs["fci_max_determinants"],
                "nroots": refs["nroots"],
                "stability": refs["stability"],
                "neighbour_start": mol["neighbour_start"] and prev_int is not None,
            }
            int_parents = {"guess": prev_int} if int_params["neighbour_start"] else {}
            k_int = add("integrals", int_params, int_parents)
            prev_int = k_int
            for ic, seed, (mapping, taper, ansatz, optimizer, estimator, states) in (
                (ic, seed, combo) for ic, combo in enumerate(combos) for seed in sweep.seeds
            ):
                k_ham = add("hamiltonian", {"mapping": mapping}, {"integrals": k_int})
                k_tap = add("taper", {"taper": taper}, {"hamiltonian": k_ham, "integrals": k_int})
                opt_params = {
                    "ansatz": ansatz,
                    "optimizer": optimizer,
                    "estimator": estimator_with_target(estimator, base_dir, targets_read),
                    "seed": seed,
                    "warm_start": bool(sweep.warm_start and (ic, seed) in prev_opt),
                    "states": states,
                }
                opt_parents = {"taper": k_tap, "integrals": k_int}
                if states["name"] != "ground":
                    _check_nroots(states, refs, where)
                    # excited states build on the ground-state job of the same methods
                    ground = {**opt_params, "warm_start": False, "states": {"name": "ground"}}
                    opt_parents["ground"] = add("optimize", ground, dict(opt_parents))
                    opt_params["warm_start"] = False
                if opt_params["warm_start"]:
                    opt_parents["warm"] = prev_opt[(ic, seed)]
                k_opt = add("optimize", opt_params, opt_parents)
                prev_opt[(ic, seed)] = k_opt
                rows.append(
                    {
                        "molecule": mol["name"],
                        "sweep": sweep.name,
                        "point": point_label(point),
                        **{f"scan_{k}": v for k, v in point.items()},
                        "axis_units": {k: units.get(k, "none") for k in point},
                        "basis": mol["basis"].lower(),
                        "unit": mol["unit"],
                        "charge": mol["charge"],
                        "multiplicity": mol["multiplicity"],
                        "mapping": mapping,
                        "tapered": taper,
                        "ansatz": method_label("ansatz", ansatz),
                        "optimizer": method_label("optimizer", optimizer),
                        "estimator": estimator_label(estimator, base_dir, targets_read),
                        "states": method_label("states", states),
                        "seed": seed,
                        "key": k_opt,
                        "key_integrals": k_int,
                        "key_hamiltonian": k_ham,
                        "key_taper": k_tap,
                    }
                )
    exports = _plan_device(cfg, rows, add, Path(results_dir), base_dir)
    return Plan(
        nodes=nodes,
        rows=rows,
        exports=exports,
        study=study_name(cfg, config_path),
        skipped=[line for sw in sweeps for line in sw.skipped],
    )


def _estimator_target(path: str, base_dir: Path, cache: dict[str, dict]) -> dict:
    """Canonical content of an estimator's target file (read once per plan)."""
    from .target import GENERIC, resolve_target

    if path not in cache:
        try:
            target = resolve_target(path, base_dir) if path != GENERIC else None
        except ConfigError as exc:
            raise ConfigError(f"methods.estimator target: {exc}") from None
        if target is None:
            raise ConfigError(
                "methods.estimator target: 'generic' is not a file; leave target null for the "
                "noise keys or name a target YAML file"
            )
        cache[path] = target.to_dict()
    return cache[path]


def estimator_with_target(estimator: dict, base_dir: Path, cache: dict[str, dict]) -> dict:
    """The estimator entry with a ``target`` path replaced by the file's canonical content
    (:meth:`eigensweep.target.Target.to_dict`): the optimize key covers what the target says,
    not where the file lies, as for ``export.targets``."""
    path = estimator.get("target")
    if not isinstance(path, str):
        return estimator
    return {**estimator, "target": _estimator_target(path, base_dir, cache)}


def estimator_label(estimator: dict, base_dir: Path, cache: dict[str, dict]) -> str:
    """:func:`method_label` of an estimator, its target named by the target's name."""
    path = estimator.get("target")
    if not isinstance(path, str):
        return method_label("estimator", estimator)
    name = _estimator_target(path, base_dir, cache)["name"]
    return method_label("estimator", {**estimator, "target": name})


def _check_nroots(states: dict, refs: dict, where: str) -> None:
    """Excited-state methods compare with stored exact roots: enough must be stored."""
    if states["n_states"] > refs["nroots"]:
        raise ConfigError(
            f"{where}: references.nroots: {refs['nroots']} exact roots are stored but "
            f"states {states['name']} seeks {states['n_states']}; set references.nroots to at "
            f"least {states['n_states']}"
        )


def _row_matches(sel: dict, row: dict) -> bool:
    return all(str(row.get(k)) == str(v) for k, v in sel.items())


def export_targets(cfg: dict, base_dir: str | Path = ".") -> list[tuple[str, dict | str]]:
    """``(name, export parameter)`` of every ``export.targets`` entry, in config order.

    The parameter is ``"generic"`` for the built-in all-to-all target, else the target file's
    canonical content (:meth:`eigensweep.target.Target.to_dict`): the export key covers what
    the target says, not where the file lies, so editing a target re-runs only its exports.
    """
    from .target import GENERIC, resolve_target

    out: list[tuple[str, dict | str]] = []
    names: dict[str, str] = {}
    for i, entry in enumerate(cfg["export"].get("targets", [GENERIC])):
        try:
            target = resolve_target(entry, base_dir)
        except ConfigError as exc:
            raise ConfigError(f"export.targets[{i}]: {exc}") from None
        name = GENERIC if target is None else target.name
        if name in names:
            raise ConfigError(
                f"export.targets[{i}]: target name {name!r} is used by {names[name]!r} too; "
                "give each target its own name"
            )
        names[name] = entry
        out.append((name, GENERIC if target is None else target.to_dict()))
    return out


def _plan_device(
    cfg: dict, rows: list[dict], add, results_dir: Path, base_dir: str | Path = "."
) -> list[dict]:
    """Export and reconcile nodes for the optimize rows chosen by ``export.select``.

    Targets (``export.targets``) are a planning axis: each selected row gets one export node
    (and folder) per target. With ``device.kind: synthetic`` the reconcile stage samples the
    built-in noisy device itself, with the target's noise for a target file's export and the
    ``device`` keys' noise for ``generic``; with ``external`` a reconcile node exists only once returned
    counts were imported to ``results/returned/<export key>.json``, and the file's SHA-256 is
    part of its key.
    """
    exp, dev = cfg["export"], cfg["device"]
    out: list[dict] = []
    seen: set[tuple[str, str]] = set()
    targets = export_targets(cfg, base_dir) if exp["select"] else []
    for i, entry in enumerate(exp["select"]):
        sel = {k: v for k, v in entry.items() if k != "targets"}
        wanted = _selected_targets(entry, targets, i)
        matched = [row for row in rows if _row_matches(sel, row)]
        if not matched:
            raise ConfigError(
                f"export.select[{i}] {canonical_json(sel)[:60]} matches no optimize job of this "
                "sweep; check its values against the summary columns (molecule, point, mapping, "
                "tapered, ansatz, optimizer, estimator)"
            )
        for row, (target_name, target) in itertools.product(matched, wanted):
            if (row["key"], target_name) in seen:
                continue
            seen.add((row["key"], target_name))
            k_exp = add(
                "export",
                {
                    **{k: exp[k] for k in ("shots", "scale_factors", "calibration", "target_mha")},
                    "target": target,
                },
                {
                    "optimize": row["key"],
                    "taper": row["key_taper"],
                    "integrals": row["key_integrals"],
                },
            )
            rec_params = {
                "bootstrap": cfg["reconcile"]["bootstrap"],
                "seed": cfg["seed"],
                "device": dev["kind"],
            }
            parents = {
                "export": k_exp,
                "taper": row["key_taper"],
                "integrals": row["key_integrals"],
            }
            if dev["kind"] == "synthetic" and isinstance(target, dict):
                # a device target's export: its noise comes from the target (in the export key)
                rec_params["noise"] = "target"
            elif dev["kind"] == "synthetic":
                rec_params.update(
                    {k: dev[k] for k in ("readout_error", "depolarizing_1q", "depolarizing_2q")}
                )
            else:
                counts = returned_path(k_exp, results_dir)
                if not counts.is_file():
                    out.append(
                        {**row, "target": target_name, "key_export": k_exp, "key_reconcile": None}
                    )
                    continue
                rec_params["counts_sha256"] = hashlib.sha256(counts.read_bytes()).hexdigest()
                parents["counts"] = k_exp
            k_rec = add("reconcile", rec_params, parents)
            out.append({**row, "target": target_name, "key_export": k_exp, "key_reconcile": k_rec})
    return out


def _selected_targets(entry: dict, targets: list, i: int) -> list:
    """The ``(name, parameter)`` pairs of ``export.targets`` an ``export.select`` entry asks for."""
    names = entry.get("targets")
    if names is None:
        return targets
    known = [name for name, _ in targets]
    for name in names:
        if name not in known:
            raise ConfigError(
                f"export.select[{i}].targets: {name!r} is not a target of export.targets "
                f"({', '.join(known)}); name one of them"
            )
    return [(name, t) for name, t in targets if name in names]


def parent_files(node: Node, results: str = "results") -> dict[str, str]:
    """Input files of a node by role (``guess`` and ``warm`` point at sibling stage files;
    ``counts`` at imported device results); roles and their stages come from the stage table."""
    return parent_paths(node.stage, node.parents, results)
