"""Provenance bundle: pack exactly one planned sweep into a runnable tar.gz, and verify one.

An archive is built from the plan of the named configuration, never from what happens to lie in
the results folder: it holds exactly the stage files that plan references (every optimize job
and its ancestors, the export and reconcile jobs, the device-job folders and imported counts),
tables and plots regenerated from those files inside the archive, the full workflow (Snakefile,
rules, schema, report captions, profiles, conda environments) and the configuration as
``config/config.yaml``, so that the extracted folder re-runs with ``snakemake`` alone. It also
holds the environment as the installer reports it (``pip freeze``), the source revision,
``plan.json``, ``MANIFEST.sha256`` (SHA-256 of every file) and RO-Crate metadata
(``ro-crate-metadata.json``, written with the ``rocrate`` library; RO-Crate is an open standard
for packaging research objects, https://w3id.org/ro/crate).

:func:`verify_archive` checks every hash and that no file is missing or extra, re-plans the
archived configuration and requires exactly its stage files, re-derives every table from the
archived stage files and compares it byte for byte, and re-runs any or all stage jobs from the
archived inputs. Extraction is bounded (member count, member and total size) and confined to
the extraction folder.
"""

from __future__ import annotations

import copy
import hashlib
import json
import platform
import re
import shutil
import subprocess
import sys
import tarfile
import tempfile
from collections.abc import Sequence
from dataclasses import dataclass
from datetime import UTC, datetime
from importlib import metadata
from pathlib import Path, PurePosixPath

import numpy as np

from . import __version__
from .errors import EigensweepError, StageFileError
from .plan import Node, Plan, parent_files
from .stage_table import job_folder, returned_path, stage_path
from .store import atomic_path, read_stage

ARCHIVE_ROOT = "eigensweep-archive"
#: Default archive name; ``.gitignore`` covers the pattern ``eigensweep-archive-*.tar.gz``.
ARCHIVE_PATTERN = "eigensweep-archive-{stamp}.tar.gz"
MAX_MEMBER_BYTES = 2 * 2**30
MAX_TOTAL_BYTES = 16 * 2**30
MAX_MEMBERS = 200_000
#: Files of the workflow that the archive carries (relative to the workflow's root).
WORKFLOW_GLOBS = (
    "Snakefile",
    "workflow/rules/*.smk",
    "workflow/schemas/*.yaml",
    "workflow/report/*.rst",
    "profiles/*/config.yaml",
    "envs/*.yaml",
)
#: Files the archive regenerates from its stage files (tables and plots).
#: (inside the study's folder ``results/<study>/``)
GENERATED_TABLES = (
    "summary.csv",
    "device_summary.csv",
    "analysis.csv",
    "seeds.csv",
    "states.csv",
    "README.md",
)
_ORCID = re.compile(r"\A\d{4}-\d{4}-\d{4}-\d{3}[\dX]\Z")
_MANIFEST_LINE = re.compile(r"\A([0-9a-f]{64})  (\S(?:.*\S)?)\Z")


def _sha256(path: Path) -> str:
    h = hashlib.sha256()
    with open(path, "rb") as fh:
        for chunk in iter(lambda: fh.read(1 << 20), b""):
            h.update(chunk)
    return h.hexdigest()


def _git(args: list[str], cwd: Path) -> str | None:
    try:
        out = subprocess.run(["git", *args], cwd=cwd, capture_output=True, text=True, timeout=20)
    except (OSError, subprocess.TimeoutExpired):
        return None
    return out.stdout.strip() if out.returncode == 0 else None


def source_revision() -> dict:
    """Commit of the eigensweep source and whether tracked files had uncommitted changes
    (untracked files do not make a revision dirty)."""
    from .paths import repo_root

    root = repo_root()
    commit = _git(["rev-parse", "HEAD"], root)
    status = _git(["status", "--porcelain", "--untracked-files=no"], root)
    return {
        "commit": commit or "unknown",
        "dirty": bool(status) if status is not None else None,
        "eigensweep_version": __version__,
    }


def environment_lock() -> str:
    """The environment as the installer reports it (``pip freeze --all``).

    Where pip is not installed in the environment, the list comes from the installed
    distributions' metadata, and the file's first line says so.
    """
    head = f"# python {platform.python_version()} on {platform.platform()}\n"
    try:
        out = subprocess.run(
            [sys.executable, "-m", "pip", "freeze", "--all"],
            capture_output=True,
            text=True,
            timeout=120,
        )
    except (OSError, subprocess.TimeoutExpired):
        out = None
    if out is not None and out.returncode == 0 and out.stdout.strip():
        return head + "# source: pip freeze --all\n" + out.stdout
    seen = {}
    for dist in metadata.distributions():
        name = dist.metadata["Name"]
        if name:
            seen[name.lower()] = f"{name}=={dist.version}"
    return (
        head
        + "# source: installed distribution metadata (pip is not available here)\n"
        + "\n".join(seen[k] for k in sorted(seen))
        + "\n"
    )


def stage_closure(plan: Plan) -> list[Node]:
    """Every stage node the sweep's tables depend on: optimize, export and reconcile jobs and
    all their ancestors."""
    todo = [row["key"] for row in plan.rows]
    for ex in plan.exports:
        todo += [k for k in (ex.get("key_export"), ex.get("key_reconcile")) if k]
    seen: dict[str, Node] = {}
    while todo:
        key = todo.pop()
        if key in seen:
            continue
        node = plan.node(key)
        seen[key] = node
        todo.extend(k for role, k in node.parents.items() if role != "counts")
    return sorted(seen.values(), key=lambda n: (n.stage, n.key))


def _plan_members(plan: Plan, results: Path) -> dict[str, Path]:
    """Archive name -> source file of every stage file, job folder file and imported counts."""
    members: dict[str, Path] = {}
    for node in stage_closure(plan):
        f = stage_path(node.stage, node.key, results)
        read_stage(f, stage=node.stage, key=node.key)  # refuse to pack a missing or damaged file
        members[str(stage_path(node.stage, node.key, "results"))] = f
    for ex in plan.exports:
        key = ex["key_export"]
        folder = job_folder(key, results)
        if not folder.is_dir():
            raise EigensweepError(f"{folder}: device-job folder missing; run the sweep first")
        for f in sorted(folder.iterdir()):
            if not f.is_file():
                raise EigensweepError(f"{f}: not a regular file inside a device-job folder")
            members[f"{job_folder(key, 'results')}/{f.name}"] = f
        if ex.get("key_reconcile") and returned_path(key, results).is_file():
            members[str(returned_path(key, "results"))] = returned_path(key, results)
    return members


def _workflow_members() -> dict[str, Path]:
    from .paths import repo_root

    root = repo_root()
    out = {}
    for pattern in WORKFLOW_GLOBS:
        for f in sorted(root.glob(pattern)):
            out[str(f.relative_to(root))] = f
    return out


def _config_members(cfg_path: Path, cfg: dict) -> dict[str, Path]:
    """The configuration (as ``config/config.yaml``) and the XYZ and target files it names."""
    out = {"config/config.yaml": cfg_path}
    for mol in cfg["molecules"]:
        if "xyz" in mol:
            rel = PurePosixPath(mol["xyz"])
            if rel.is_absolute() or ".." in rel.parts:
                raise EigensweepError(
                    f"molecule {mol['name']}: xyz {mol['xyz']} is outside the sweep folder; "
                    "give a path relative to the sweep folder so the archive can carry it"
                )
            out[str(rel)] = Path(mol["xyz"])
    for i, entry in enumerate(cfg.get("export", {}).get("targets", [])):
        if entry == "generic" or not cfg["export"].get("select"):
            continue
        rel = PurePosixPath(entry)
        if rel.is_absolute() or ".." in rel.parts:
            raise EigensweepError(
                f"export.targets[{i}]: {entry} is outside the sweep folder; give a path "
                "relative to the sweep folder so the archive can carry the target file"
            )
        out[str(rel)] = Path(entry)
    return out


def _person(crate, author: str):
    """An RO-Crate Person from ``"Name"`` or ``"Name <ORCID>"``."""
    from rocrate.model.person import Person

    m = re.fullmatch(r"\s*(.*?)\s*(?:<\s*(?:https://orcid\.org/)?([^>\s]+)\s*>)?\s*", author)
    name, orcid = (m.group(1), m.group(2)) if m else (author, None)
    if not name:
        raise EigensweepError(f"--author {author[:60]!r}: give a name, optionally 'Name <ORCID>'")
    if orcid is None:
        return crate.add(Person(crate, f"#{re.sub(r'[^A-Za-z0-9]+', '-', name)}", {"name": name}))
    if not _ORCID.match(orcid):
        raise EigensweepError(
            f"--author {author[:60]!r}: {orcid[:30]!r} is not an ORCID (0000-0000-0000-0000)"
        )
    return crate.add(Person(crate, f"https://orcid.org/{orcid}", {"name": name}))


def _write_crate(
    folder: Path,
    files: list[tuple[str, int, str]],
    revision: dict,
    *,
    title: str | None,
    authors: Sequence[str],
    license: str | None,
) -> None:
    """``ro-crate-metadata.json`` through the ``rocrate`` library."""
    from rocrate.rocrate import ROCrate

    crate = ROCrate()
    crate.name = title or "eigensweep sweep results"
    crate.description = (
        "Variational-eigensolver sweep: configuration, stage files, tables, plots, workflow "
        "and environment, as packed by eigensweep archive."
    )
    crate.datePublished = datetime.now(UTC).isoformat(timespec="seconds")
    if license:
        crate.license = license
    if authors:
        crate.root_dataset["author"] = [_person(crate, a) for a in authors]
    fmt = {
        ".h5": "application/x-hdf5",
        ".csv": "text/csv",
        ".png": "image/png",
        ".yaml": "application/yaml",
        ".json": "application/json",
        ".qasm": "text/plain",
    }
    for name, size, digest in files:
        props = {"contentSize": str(size), "sha256": digest}
        if name == "Snakefile":
            wf = crate.add_workflow(
                folder / name, dest_path=name, main=True, lang="snakemake", properties=props
            )
            wf["version"] = revision.get("commit")
            continue
        props["encodingFormat"] = fmt.get(Path(name).suffix, "text/plain")
        crate.add_file(folder / name, dest_path=name, properties=props)
    crate.metadata.write(folder)


def _copy(src: Path, dst: Path) -> None:
    dst.parent.mkdir(parents=True, exist_ok=True)
    shutil.copy2(src, dst)


def make_archive(
    plan: Plan,
    cfg: dict,
    config_path: str | Path,
    output: str | Path,
    results: str | Path = "results",
    *,
    title: str | None = None,
    authors: Sequence[str] = (),
    license: str | None = None,
) -> Path:
    """Write the provenance bundle of the sweep ``plan`` (of ``cfg`` read from ``config_path``).

    Tables and plots are regenerated inside the archive from the archived stage files, so the
    archive can hold nothing of another sweep that ran in the same folder. Refuses to overwrite.

    Raises:
        EigensweepError: a planned file is missing or damaged (run the sweep first), or
            ``output`` exists.
    """
    from .collect import collect
    from .study import study_name

    results, output = Path(results), Path(output)
    if output.exists():
        raise EigensweepError(f"{output}: already exists; choose another --output or move it away")
    members = {
        **_workflow_members(),
        **_config_members(Path(config_path), cfg),
        **_plan_members(plan, results),
    }
    revision = source_revision()
    # the config is archived as config/config.yaml: its tables go where that file names them
    plan = copy.copy(plan)
    plan.study = study_name(cfg, "config/config.yaml")
    output.parent.mkdir(parents=True, exist_ok=True)
    with tempfile.TemporaryDirectory(prefix=".archive-", dir=output.parent) as tmp:
        folder = Path(tmp) / ARCHIVE_ROOT
        for name, src in members.items():
            _copy(src, folder / name)
        collect(
            plan.rows,
            folder / "results",
            cfg["collect"]["accuracy_mha"],
            plan.exports,
            study=plan.study,
            spectrum_point=cfg["collect"]["spectrum_point"],
        )
        generated = {
            "environment.lock": environment_lock(),
            "source-revision.json": json.dumps(revision, indent=2) + "\n",
            "plan.json": json.dumps(
                {
                    "config": str(config_path),
                    "study": plan.study,
                    "rows": plan.rows,
                    "exports": plan.exports,
                    "nodes": [n.as_dict() for n in stage_closure(plan)],
                },
                indent=1,
                sort_keys=True,
            )
            + "\n",
        }
        for name, text in generated.items():
            (folder / name).write_text(text)
        files = sorted(p for p in folder.rglob("*") if p.is_file())
        listing = [(str(p.relative_to(folder)), p.stat().st_size, _sha256(p)) for p in files]
        (folder / "MANIFEST.sha256").write_text("".join(f"{d}  {n}\n" for n, _, d in listing))
        _write_crate(folder, listing, revision, title=title, authors=authors, license=license)
        with atomic_path(output, prefix=".archive.") as part, tarfile.open(part, "w:gz") as tar:
            tar.add(folder, arcname=ARCHIVE_ROOT)
    return output


def safe_extract(archive: str | Path, dest: str | Path) -> Path:
    """Extract a tar archive, refusing members that escape ``dest``, links and special files,
    and archives above :data:`MAX_MEMBERS` members or :data:`MAX_TOTAL_BYTES` in total."""
    archive, dest = Path(archive), Path(dest).resolve()
    if not archive.is_file():
        raise EigensweepError(f"{archive}: not found or not a regular file; check the path")
    try:
        tar = tarfile.open(archive, "r:*")
    except (tarfile.TarError, OSError) as exc:
        reason = str(exc).splitlines()[0].rstrip(":") if str(exc) else type(exc).__name__
        raise EigensweepError(
            f"{archive}: not a readable tar.gz archive ({reason[:60]}); check the file"
        ) from None
    with tar:
        total, members = 0, []
        try:
            for m in tar:
                members.append(m)
                if len(members) > MAX_MEMBERS:
                    raise EigensweepError(
                        f"{archive}: more than {MAX_MEMBERS} members; not an eigensweep archive"
                    )
                total += m.size
                if total > MAX_TOTAL_BYTES:
                    raise EigensweepError(
                        f"{archive}: unpacks to more than {MAX_TOTAL_BYTES} bytes; refusing"
                    )
        except (tarfile.TarError, OSError, EOFError) as exc:
            if isinstance(exc, EigensweepError):
                raise
            raise EigensweepError(
                f"{archive}: damaged tar.gz archive ({type(exc).__name__}); check the file"
            ) from None
        for m in members:
            target = (dest / m.name).resolve()
            if not str(target).startswith(str(dest) + "/"):
                raise EigensweepError(
                    f"{archive}: member {m.name[:60]!r} would land outside the target folder; refusing"
                )
            if not (m.isfile() or m.isdir()):
                raise EigensweepError(
                    f"{archive}: member {m.name[:60]!r} is a link or device; refusing"
                )
            if m.size > MAX_MEMBER_BYTES:
                raise EigensweepError(
                    f"{archive}: member {m.name[:60]!r} is larger than {MAX_MEMBER_BYTES} bytes; refusing"
                )
        try:
            tar.extractall(dest, members=members, filter="data")
        except (tarfile.TarError, OSError, EOFError) as exc:
            raise EigensweepError(
                f"{archive}: cannot be unpacked ({type(exc).__name__}: a file where a folder "
                "belongs, or a damaged member); not an eigensweep archive"
            ) from None
    root = dest / ARCHIVE_ROOT
    if not root.is_dir():
        raise EigensweepError(
            f"{archive}: no {ARCHIVE_ROOT}/ folder inside; not an eigensweep archive"
        )
    return root


@dataclass
class VerifyReport:
    n_files: int
    n_stage_files: int
    tables: list[str]
    rerun_keys: list[str]
    max_abs_diff: float


def _check_manifest(archive: Path, root: Path) -> set[str]:
    """Every manifest line well formed and confined to the archive; hashes match; nothing extra."""
    manifest = root / "MANIFEST.sha256"
    if not manifest.is_file():
        raise EigensweepError(f"{archive}: no MANIFEST.sha256 inside; not an eigensweep archive")
    listed: set[str] = set()
    for i, line in enumerate(manifest.read_text(errors="replace").splitlines(), 1):
        m = _MANIFEST_LINE.match(line)
        if not m:
            raise EigensweepError(
                f"{archive}: MANIFEST.sha256 line {i} is not '<sha256>  <file>'; archive damaged"
            )
        digest, name = m.groups()
        rel = PurePosixPath(name)
        if rel.is_absolute() or ".." in rel.parts or "\\" in name:
            raise EigensweepError(
                f"{archive}: MANIFEST.sha256 line {i} names a file outside the archive; refusing"
            )
        f = root / rel
        if not f.is_file() or f.is_symlink():
            raise EigensweepError(
                f"{archive}: {name[:60]} is listed in the manifest but missing or not a file"
            )
        if _sha256(f) != digest:
            raise EigensweepError(
                f"{archive}: {name[:60]} does not match its SHA-256 in the manifest (changed or damaged)"
            )
        listed.add(name)
    present = {str(p.relative_to(root)) for p in root.rglob("*") if not p.is_dir()}
    extra = present - listed - {"MANIFEST.sha256", "ro-crate-metadata.json"}
    if extra:
        raise EigensweepError(f"{archive}: {sorted(extra)[0][:60]} is not listed in the manifest")
    return listed


def _check_plan(archive: Path, root: Path) -> tuple[Plan, dict]:
    """Re-plan the archived configuration; the archive must hold exactly its stage files."""
    from .config import load_config
    from .plan import build_plan

    cfg = load_config(root / "config" / "config.yaml")
    plan = build_plan(cfg, base_dir=root, results_dir=root / "results")
    try:
        recorded = json.loads((root / "plan.json").read_text())
        recorded_keys = {n["key"] for n in recorded["nodes"]}
    except (OSError, ValueError, KeyError, TypeError):
        raise EigensweepError(f"{archive}: plan.json missing or damaged") from None
    expected = {n.key: n for n in stage_closure(plan)}
    if recorded_keys != set(expected):
        raise EigensweepError(
            f"{archive}: plan.json does not match the plan of the archived config/config.yaml"
        )
    present = {p.stem: p for p in (root / "results").glob("*/*.h5")}
    for key, node in expected.items():
        f = stage_path(node.stage, key, root / "results")
        if not f.is_file():
            raise EigensweepError(f"{archive}: planned stage file {node.stage}/{key}.h5 missing")
        read_stage(f, stage=node.stage, key=key)
    extra = sorted(set(present) - set(expected))
    if extra:
        p = present[extra[0]]
        raise EigensweepError(
            f"{archive}: results/{p.parent.name}/{p.name} is not part of the archived sweep's plan"
        )
    return plan, cfg


def _check_tables(archive: Path, root: Path, plan: Plan, cfg: dict, listed: set[str]) -> list[str]:
    """Regenerate tables and plots from the archived stage files; tables must match byte for
    byte and the set of plots must be the same."""
    from .collect import collect

    results = root / "results"
    tables = [f"results/{plan.study}/{name}" for name in GENERATED_TABLES]
    archived = {}
    for name in tables:
        if name not in listed:
            raise EigensweepError(f"{archive}: {name} missing")
        archived[name] = (root / name).read_bytes()
    plots_dir = results / plan.study / "plots"
    plots_before = {
        p.relative_to(plots_dir).as_posix() for p in plots_dir.rglob("*") if p.is_file()
    }
    with tempfile.TemporaryDirectory(prefix="eigensweep-tables-") as tmp:
        scratch = Path(tmp) / "results"
        for node in stage_closure(plan):
            _copy(
                stage_path(node.stage, node.key, results), stage_path(node.stage, node.key, scratch)
            )
        files = collect(
            plan.rows,
            scratch,
            cfg["collect"]["accuracy_mha"],
            plan.exports,
            study=plan.study,
            spectrum_point=cfg["collect"]["spectrum_point"],
        )
        for name in tables:
            new = (Path(tmp) / name).read_bytes()
            if new != archived[name]:
                raise EigensweepError(
                    f"{archive}: {name} differs from the table re-derived from its stage files (stale)"
                )
        scratch_plots = scratch / plan.study / "plots"
        plots_now = {
            Path(f).relative_to(scratch_plots).as_posix()
            for f in files
            if Path(f).is_relative_to(scratch_plots)
        }
    if plots_before != plots_now:
        odd = sorted(plots_before ^ plots_now)[0]
        raise EigensweepError(f"{archive}: plot {odd} is stale or missing")
    return tables


def _rerun(archive: Path, root: Path, node: Node, workdir: Path, atol: float) -> float:
    """Re-run one stage job from the archived inputs; largest difference of its arrays."""
    from .stages import STAGE_ACTIONS

    src = stage_path(node.stage, node.key, root / "results")
    old = read_stage(src, stage=node.stage, key=node.key)
    inputs = {role: str(root / p) for role, p in parent_files(node).items()}
    out = stage_path(node.stage, node.key, workdir)
    STAGE_ACTIONS[node.stage](node, inputs, str(out))
    new = read_stage(out, stage=node.stage, key=node.key)
    worst = 0.0
    for name, arr in old.arrays.items():
        other = new.arrays.get(name)
        if other is None or np.shape(other) != np.shape(arr):
            raise StageFileError(
                f"{archive}: re-running {node.stage} {node.key} gives a different array {name!r}"
            )
        if arr.dtype.kind in "fc":
            diff = float(np.max(np.abs(np.asarray(arr) - np.asarray(other)))) if arr.size else 0.0
        else:
            diff = 0.0 if np.array_equal(arr, other) else float("inf")
        worst = max(worst, diff)
    if worst > atol:
        raise EigensweepError(
            f"{archive}: re-running {node.stage} {node.key} differs from the archive by "
            f"{worst:.3g} (> {atol})"
        )
    return worst


def verify_archive(
    archive: str | Path,
    stage: str | None = "hamiltonian",
    *,
    key: str | None = None,
    all_stages: bool = False,
    atol: float = 1e-8,
) -> VerifyReport:
    """Check an archive made by :func:`make_archive`.

    Args:
        archive: the tar.gz.
        stage: re-run the first job (by key) of this stage; None for none.
        key: re-run this stage job instead.
        all_stages: re-run every stage job of the archived sweep (slow: the whole sweep).
        atol: largest allowed absolute difference between recomputed and archived arrays.

    Raises:
        EigensweepError: one line naming the first file or check that fails.
    """
    archive = Path(archive)
    with tempfile.TemporaryDirectory(prefix="eigensweep-verify-") as tmp:
        root = safe_extract(archive, Path(tmp) / "x")
        listed = _check_manifest(archive, root)
        plan, cfg = _check_plan(archive, root)
        tables = _check_tables(archive, root, plan, cfg, listed)
        closure = stage_closure(plan)
        if all_stages:
            todo = closure
        elif key is not None:
            todo = [n for n in closure if n.key == key]
            if not todo:
                raise EigensweepError(f"--key {key[:20]}: no such stage job in {archive}")
        elif stage is not None:
            todo = [n for n in closure if n.stage == stage][:1]
            if not todo:
                raise EigensweepError(f"{archive}: holds no {stage} stage file to re-run")
        else:
            todo = []
        worst = 0.0
        for node in todo:
            worst = max(worst, _rerun(archive, root, node, Path(tmp) / "rerun", atol))
        n_stage = sum(1 for n in listed if n.startswith("results/") and n.endswith(".h5"))
        return VerifyReport(len(listed), n_stage, tables, [n.key for n in todo], worst)
