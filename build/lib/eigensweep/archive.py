"""Provenance bundle: pack a finished sweep into one verifiable tar.gz, and verify one.

The archive holds the configuration(s), every stage file the summary depends on (optimize jobs
and all their ancestors), ``summary.csv``, plots, the Snakemake report when present, an
environment lock (exact versions of every installed distribution), the source revision and
whether the work tree was dirty, ``MANIFEST.sha256`` (SHA-256 of every file) and
``ro-crate-metadata.json`` (RO-Crate 1.1, an open standard for packaging research objects).

``verify_archive`` re-checks every hash and re-runs one stage job from the archived inputs,
comparing its arrays with the archived result.
"""

from __future__ import annotations

import hashlib
import io
import json
import os
import platform
import shutil
import subprocess
import tarfile
import tempfile
import time
from dataclasses import dataclass
from datetime import UTC, datetime
from importlib import metadata
from pathlib import Path

import numpy as np

from . import __version__
from .errors import EigensweepError, StageFileError
from .plan import Node, Plan, parent_files
from .store import read_stage

ARCHIVE_ROOT = "eigensweep-archive"
MAX_MEMBER_BYTES = 2 * 2**30


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
    """Commit of the eigensweep source and whether it had uncommitted changes."""
    from .paths import repo_root

    root = repo_root()
    commit = _git(["rev-parse", "HEAD"], root)
    status = _git(["status", "--porcelain"], root)
    return {
        "commit": commit or "unknown",
        "dirty": bool(status) if status is not None else None,
        "eigensweep_version": __version__,
    }


def environment_lock() -> str:
    """``name==version`` of every installed distribution, sorted (a pip-style lock)."""
    seen = {}
    for dist in metadata.distributions():
        name = dist.metadata["Name"]
        if name:
            seen[name.lower()] = f"{name}=={dist.version}"
    head = f"# python {platform.python_version()} on {platform.platform()}\n"
    return head + "\n".join(seen[k] for k in sorted(seen)) + "\n"


def stage_closure(plan: Plan) -> list[Node]:
    """Every stage node the summary depends on: optimize jobs and all ancestors."""
    todo = [row["key"] for row in plan.rows]
    for ex in plan.exports:
        todo += [k for k in (ex.get("key_export"), ex.get("key_reconcile")) if k]
    seen: dict[str, Node] = {}
    while todo:
        key = todo.pop()
        if key in seen:
            continue
        node = plan.nodes[key]
        seen[key] = node
        todo.extend(node.parents.values())
    return sorted(seen.values(), key=lambda n: (n.stage, n.key))


def _crate(files: list[tuple[str, int, str]], revision: dict, created: str) -> dict:
    graph = [
        {
            "@id": "ro-crate-metadata.json",
            "@type": "CreativeWork",
            "conformsTo": {"@id": "https://w3id.org/ro/crate/1.1"},
            "about": {"@id": "./"},
        },
        {
            "@id": "./",
            "@type": "Dataset",
            "name": "eigensweep sweep results",
            "description": "Variational-eigensolver sweep: configuration, stage files, summary, plots and environment.",
            "datePublished": created,
            "hasPart": [{"@id": f[0]} for f in files],
            "mainEntity": {"@id": "workflow/Snakefile"},
        },
        {
            "@id": "workflow/Snakefile",
            "@type": ["File", "SoftwareSourceCode", "ComputationalWorkflow"],
            "name": "eigensweep workflow",
            "programmingLanguage": {"@id": "#snakemake"},
            "version": revision.get("commit"),
        },
        {
            "@id": "#snakemake",
            "@type": "ComputerLanguage",
            "name": "Snakemake",
            "url": {"@id": "https://snakemake.github.io"},
        },
    ]
    for name in ("eigensweep", "pyscf", "openfermion", "numpy", "scipy", "h5py", "snakemake"):
        try:
            version = __version__ if name == "eigensweep" else metadata.version(name)
        except metadata.PackageNotFoundError:
            continue
        graph.append(
            {
                "@id": f"#software-{name}",
                "@type": "SoftwareApplication",
                "name": name,
                "version": version,
            }
        )
    for path, size, digest in files:
        if path == "workflow/Snakefile":
            graph[2].update({"contentSize": str(size), "sha256": digest})
            continue
        fmt = {
            ".h5": "application/x-hdf5",
            ".csv": "text/csv",
            ".png": "image/png",
            ".yaml": "application/yaml",
            ".json": "application/json",
            ".html": "text/html",
        }.get(Path(path).suffix, "text/plain")
        graph.append(
            {
                "@id": path,
                "@type": "File",
                "contentSize": str(size),
                "sha256": digest,
                "encodingFormat": fmt,
            }
        )
    return {"@context": "https://w3id.org/ro/crate/1.1/context", "@graph": graph}


def make_archive(
    plan: Plan,
    config_paths: list[Path],
    output: str | Path,
    results: str | Path = "results",
    report: str | Path | None = None,
) -> Path:
    """Write the provenance bundle; refuses to overwrite an existing file.

    Raises:
        EigensweepError: a needed file is missing (run the sweep first) or output exists.
    """
    from .paths import repo_root

    results = Path(results)
    output = Path(output)
    if output.exists():
        raise EigensweepError(f"{output}: already exists; choose another --output or move it away")
    members: dict[str, Path] = {}
    for cfg in config_paths:
        members[f"config/{Path(cfg).name}"] = Path(cfg)
    for node in stage_closure(plan):
        f = results / node.stage / f"{node.key}.h5"
        read_stage(f, stage=node.stage, key=node.key)  # refuse to pack a damaged file
        members[f"results/{node.stage}/{node.key}.h5"] = f
    for ex in plan.exports:
        job = results / "export" / str(ex.get("key_export"))
        for f in sorted(job.glob("*")) if job.is_dir() else []:
            members[f"results/export/{job.name}/{f.name}"] = f
        counts = results / "returned" / f"{ex.get('key_export')}.json"
        if counts.is_file():
            members[f"results/returned/{counts.name}"] = counts
    if (results / "device_summary.csv").is_file():
        members["results/device_summary.csv"] = results / "device_summary.csv"
    summary = results / "summary.csv"
    if not summary.is_file():
        raise EigensweepError(
            f"{summary}: missing; run the sweep (eigensweep run) before archiving"
        )
    members["results/summary.csv"] = summary
    for png in sorted((results / "plots").glob("*.png")):
        members[f"results/plots/{png.name}"] = png
    if report and Path(report).is_file():
        members[f"results/{Path(report).name}"] = Path(report)
    root = repo_root()
    for rel in ("Snakefile", "workflow/schemas/config.schema.yaml"):
        members[f"workflow/{Path(rel).name}" if rel == "Snakefile" else rel] = root / rel
    revision = source_revision()
    created = datetime.now(UTC).isoformat(timespec="seconds")
    generated = {
        "environment.lock": environment_lock().encode(),
        "source-revision.json": json.dumps(revision, indent=2).encode(),
        "plan.json": json.dumps(
            {"rows": plan.rows, "nodes": [n.as_dict() for n in stage_closure(plan)]},
            indent=1,
            sort_keys=True,
        ).encode(),
    }
    listing: list[tuple[str, int, str]] = []
    for name, path in sorted(members.items()):
        listing.append((name, path.stat().st_size, _sha256(path)))
    for name, blob in sorted(generated.items()):
        listing.append((name, len(blob), hashlib.sha256(blob).hexdigest()))
    manifest = "".join(f"{d}  {n}\n" for n, _, d in listing).encode()
    crate = json.dumps(_crate(listing, revision, created), indent=1).encode()
    output.parent.mkdir(parents=True, exist_ok=True)
    fd, tmp = tempfile.mkstemp(dir=output.parent, prefix=".archive.", suffix=".tmp")
    os.close(fd)
    try:
        with tarfile.open(tmp, "w:gz") as tar:
            for name, path in sorted(members.items()):
                tar.add(path, arcname=f"{ARCHIVE_ROOT}/{name}", recursive=False)
            for name, blob in [
                *sorted(generated.items()),
                ("MANIFEST.sha256", manifest),
                ("ro-crate-metadata.json", crate),
            ]:
                info = tarfile.TarInfo(f"{ARCHIVE_ROOT}/{name}")
                info.size = len(blob)
                info.mtime = int(time.time())
                tar.addfile(info, io.BytesIO(blob))
        os.replace(tmp, output)
    except BaseException:
        Path(tmp).unlink(missing_ok=True)
        raise
    return output


def safe_extract(archive: str | Path, dest: str | Path) -> Path:
    """Extract a tar archive, refusing members that escape ``dest``, links and special files."""
    archive, dest = Path(archive), Path(dest).resolve()
    try:
        tar = tarfile.open(archive, "r:*")
    except (tarfile.TarError, OSError) as exc:
        reason = str(exc).splitlines()[0].rstrip(":") if str(exc) else type(exc).__name__
        raise EigensweepError(
            f"{archive}: not a readable tar.gz archive ({reason}); check the file"
        ) from None
    with tar:
        for m in tar.getmembers():
            target = (dest / m.name).resolve()
            if not str(target).startswith(str(dest) + os.sep):
                raise EigensweepError(
                    f"{archive}: member {m.name!r} would land outside the target folder; refusing"
                )
            if not (m.isfile() or m.isdir()):
                raise EigensweepError(f"{archive}: member {m.name!r} is a link or device; refusing")
            if m.size > MAX_MEMBER_BYTES:
                raise EigensweepError(
                    f"{archive}: member {m.name!r} is larger than {MAX_MEMBER_BYTES} bytes; refusing"
                )
        tar.extractall(dest, filter="data")
    return dest / ARCHIVE_ROOT


@dataclass
class VerifyReport:
    n_files: int
    rerun_stage: str | None
    rerun_key: str | None
    max_abs_diff: float


def verify_archive(
    archive: str | Path, stage: str | None = "hamiltonian", atol: float = 1e-8
) -> VerifyReport:
    """Check every SHA-256 in the archive's manifest, then recompute one stage job and compare.

    Args:
        archive: the tar.gz made by :func:`make_archive`.
        stage: which stage to re-run from archived inputs (first job of that stage, by key);
            None to check hashes only.
        atol: largest allowed absolute difference between recomputed and archived arrays.

    Raises:
        EigensweepError: one line naming the first file that fails.
    """
    from .stages import STAGE_ACTIONS

    with tempfile.TemporaryDirectory(prefix="eigensweep-verify-") as tmp:
        root = safe_extract(archive, tmp)
        manifest = root / "MANIFEST.sha256"
        if not manifest.is_file():
            raise EigensweepError(
                f"{archive}: no MANIFEST.sha256 inside; not an eigensweep archive"
            )
        lines = manifest.read_text().splitlines()
        listed = set()
        for line in lines:
            digest, name = line.split("  ", 1)
            listed.add(name)
            f = root / name
            if not f.is_file():
                raise EigensweepError(f"{archive}: {name} is listed in the manifest but missing")
            if _sha256(f) != digest:
                raise EigensweepError(
                    f"{archive}: {name} does not match its SHA-256 in the manifest (changed or damaged)"
                )
        present = {str(p.relative_to(root)) for p in root.rglob("*") if p.is_file()}
        extra = present - listed - {"MANIFEST.sha256", "ro-crate-metadata.json"}
        if extra:
            raise EigensweepError(f"{archive}: {sorted(extra)[0]} is not listed in the manifest")
        if stage is None:
            return VerifyReport(len(listed), None, None, 0.0)
        candidates = sorted((root / "results" / stage).glob("*.h5"))
        if not candidates:
            raise EigensweepError(f"{archive}: holds no {stage} stage file to re-run")
        src = candidates[0]
        sd = read_stage(src, stage=stage)
        node = Node(stage, sd.key, sd.params, sd.parents)
        inputs = {role: str(root / p) for role, p in parent_files(node).items()}
        out_dir = Path(tmp) / "rerun" / stage
        out = out_dir / f"{sd.key}.h5"
        STAGE_ACTIONS[stage](node, inputs, str(out))
        new = read_stage(out, stage=stage, key=sd.key)
        worst = 0.0
        for name, arr in sd.arrays.items():
            other = new.arrays.get(name)
            if other is None or np.shape(other) != np.shape(arr):
                raise StageFileError(
                    f"{archive}: re-running {stage} {sd.key} gives a different array {name!r}"
                )
            if arr.dtype.kind in "fc":
                diff = (
                    float(np.max(np.abs(np.asarray(arr) - np.asarray(other)))) if arr.size else 0.0
                )
            else:
                diff = 0.0 if np.array_equal(arr, other) else float("inf")
            worst = max(worst, diff)
        if worst > atol:
            raise EigensweepError(
                f"{archive}: re-running {stage} {sd.key} differs from the archive by {worst:.3g} (> {atol})"
            )
        shutil.rmtree(out_dir, ignore_errors=True)
        return VerifyReport(len(listed), stage, sd.key, worst)
