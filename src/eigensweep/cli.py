"""The ``eigensweep`` command: run, plan, show (more subcommands join as stages land).

Errors for bad input are printed as one line (``eigensweep: <what>; <what to do>``) with exit
status 2; ``--debug`` shows the traceback.
"""

from __future__ import annotations

import argparse
import json
import os
import subprocess
import sys
import time
from pathlib import Path

from .errors import EigensweepError
from .stage_table import STAGE_NAMES

DEFAULT_CONFIG = "config/config.yaml"
EXIT_CODES = """exit status:
  0    success
  1    the sweep stopped with errors (see the lines above and logs/<stage>/<key>.log)
  2    bad input: a one-line message names the file or key and what to do
  130  interrupted (Ctrl-C or SIGTERM); finished stages are kept, rerun to resume
  141  the output pipe was closed (e.g. eigensweep plan | head)
"""


STORE_HELP = (
    "shared stage store: keep stage files by key in DIR for many study folders "
    "(default: the config's store key; none = results/)"
)


def _version() -> str:
    """The installed distribution's version (package metadata)."""
    from importlib import metadata

    try:
        return metadata.version("eigensweep")
    except metadata.PackageNotFoundError:  # pragma: no cover (running from a bare checkout)
        from . import __version__

        return __version__


def _default_config() -> Path:
    """``./config/config.yaml`` of the current folder; no other fallback."""
    local = Path(DEFAULT_CONFIG)
    if not local.is_file():
        raise EigensweepError(
            f"no --config given and no {DEFAULT_CONFIG} in {Path.cwd()}; give --config FILE "
            "or run in a sweep folder that has config/config.yaml"
        )
    return local


def _load_plan(config: str | None, force: bool | None = None):
    """Config, plan and pre-flight; ``force`` not None applies the size gate first."""
    from .config import load_config
    from .plan import build_plan
    from .preflight import check_plan_chemistry

    path = Path(config) if config else _default_config()
    cfg = load_config(path)
    plan = build_plan(cfg, base_dir=Path.cwd(), config_path=path)
    if force is not None:
        _gate(plan, cfg, path, force)
    check_plan_chemistry(plan, Path("results"))
    return path, cfg, plan


def _gate(plan, cfg: dict, path: Path, force: bool) -> None:
    """The size and cost gate: refuse problems above the config's ``limits`` unless forced."""
    from .resources import check_limits

    problems = check_limits(plan, cfg["limits"])
    if not problems:
        return
    if not force:
        more = f" (and {len(problems) - 1} more)" if len(problems) > 1 else ""
        raise EigensweepError(
            f"{path}: {problems[0]}{more}; pass --force to go ahead anyway, or raise "
            "limits.* in the config"
        )
    for line in problems:
        print(f"eigensweep: warning (--force): {line}", file=sys.stderr)


def _print_sizes(plan) -> None:
    """Qubits, determinants, simulator, memory and time per problem, estimated before work."""
    from .resources import approx, optimize_size

    print("\nsize per problem (estimated from the plan, before any chemistry):")
    print(
        f"{'molecule':<10} {'point':<14} {'taper':<6} {'simulator':<18} {'qubits':>6} "
        f"{'determinants':>13} {'memory MB':>10} {'minutes':>8}"
    )
    seen = set()
    for row in plan.rows:
        size = optimize_size(plan.nodes[row["key"]], plan)
        tag = (row["key_integrals"], row["tapered"], size["simulator"])
        if tag in seen:
            continue
        seen.add(tag)
        qubits = size["statevector_qubits"] or size["n_qubits"]
        print(
            f"{row['molecule']:<10} {row['point']:<14} {str(row['tapered']):<6} "
            f"{size['simulator']:<18} {qubits:>6} {approx(size['determinants']):>13} "
            f"{approx(size['mem_mb']):>10} {approx(size['runtime_min']):>8}"
        )


def _status(node, results: Path, store: Path | None = None) -> str:
    """cached (in the study), stored (in the shared store, not yet linked), pending or
    damaged (a file that fails its integrity check, in the study or the store)."""
    from .stage_table import stage_path
    from .store import read_stage, stored_valid

    f = stage_path(node.stage, node.key, results)
    if f.exists():
        try:
            read_stage(f, stage=node.stage, key=node.key)
        except EigensweepError:
            return "damaged (will be recomputed)"
        return "cached"
    if store is None:
        return "pending"
    if stored_valid(store, node.stage, node.key):
        return "stored"
    if stage_path(node.stage, node.key, store).exists():
        return "damaged (will be recomputed)"
    return "pending"


def _store_of(args, cfg: dict | None) -> Path | None:
    """The sweep's shared stage store (``--store`` or the config's ``store``), or None."""
    from .paths import sweep_store

    return sweep_store(getattr(args, "store", None), cfg)


def cmd_plan(args) -> int:
    path, cfg, plan = _load_plan(args.config, force=args.force)
    results = Path("results")
    store = _store_of(args, cfg)
    counts: dict[str, dict[str, int]] = {}
    lines = []
    for node in plan.nodes.values():
        st = _status(node, results, store)
        counts.setdefault(node.stage, {}).setdefault(st.split()[0], 0)
        counts[node.stage][st.split()[0]] += 1
        if args.verbose:
            lines.append(f"{node.stage:<12} {node.key}  {st}")
    if args.json:
        print(json.dumps(_plan_json(path, plan, results, store), indent=1))
        return 0
    print(
        f"plan for {path}: study {plan.study} (tables in results/{plan.study}/): "
        f"{len(plan.rows)} optimize jobs, {len(plan.nodes)} stage jobs"
    )
    if store is not None:
        print(f"stage store {store}: 'stored' jobs are taken from it without computing")
    for line in plan.skipped:
        print(line)
    cols = ("cached", "stored", "pending", "damaged") if store else ("cached", "pending", "damaged")
    print(f"{'stage':<12} {'total':>6}" + "".join(f" {c:>8}" for c in cols))
    for stage in STAGE_NAMES:
        c = counts.get(stage, {})
        total = sum(c.values())
        if not total:
            continue
        print(f"{stage:<12} {total:>6}" + "".join(f" {c.get(k, 0):>8}" for k in cols))
    _print_sizes(plan)
    _print_costs(plan, results)
    _print_target_costs(plan, results)
    _print_waiting(plan)
    if args.profile and _profile_groups(_profile_dir(args.profile)):
        pending = {
            n.key
            for n in plan.nodes.values()
            if _status(n, results, store) not in ("cached", "stored")
        }
        _print_batches(plan, args.batch_minutes, pending, args.cores or os.cpu_count() or 1)
    if args.verbose:
        print("\n".join(lines))
    return 0


def _print_batches(plan, target_minutes: float, pending: set[str], cores: int) -> None:
    """Scheduler jobs of a grouped (cluster) run, with the estimates of each batch."""
    from .resources import batch_plan

    bp = batch_plan(plan, target_minutes, pending, cores=cores)
    batches = bp["batches"]
    print(
        f"\nscheduler jobs (job groups, target {target_minutes:g} min each): {len(batches)} "
        f"for {len(pending)} stage jobs ({bp['per_batch']} point chain(s) per job), "
        "plus collect on the submitting host"
    )
    if batches:
        print(
            f"{'batch':>5} {'stage jobs':>10} {'est. minutes':>12} {'request: MB':>12} "
            f"{'minutes':>8} {'cores':>6}"
        )
    for i, b in enumerate(batches, 1):
        print(
            f"{i:>5} {b['jobs']:>10} {b['expected_min']:>12.1f} {b['mem_mb']:>12} "
            f"{b['runtime_min']:>8} {b['threads']:>6}"
        )


def _print_target_costs(plan, results: Path) -> None:
    """Per exported point and device target: native cost estimate (known once exported)."""
    from .store import read_stage

    if not plan.exports:
        return
    print(
        "\ndevice cost per exported point and target (estimates from a simple model, not "
        "guarantees; known once the export stage ran):"
    )
    print(
        f"{'molecule':<10} {'point':<14} {'target':<16} {'2q gates':>8} {'depth':>6} "
        f"{'time (us)':>10} {'fidelity':>9} {'shots':>11} {'shots/F^2':>11}"
    )
    unknown = 0
    for ex in plan.exports:
        f = results / "export" / f"{ex['key_export']}.h5"
        try:
            cost = read_stage(f, stage="export", key=ex["key_export"]).meta["manifest"]["cost"]
        except (EigensweepError, KeyError):
            unknown += 1
            continue

        def shots(v) -> str:
            return f"{v:.3e}" if v is not None else "-"

        print(
            f"{ex['molecule']:<10} {ex['point']:<14} {ex.get('target', ''):<16} "
            f"{cost['two_qubit_count']:>8} {cost['depth']:>6} "
            f"{cost['duration_ns'] / 1000.0:>10.4g} {cost['fidelity']:>9.3g} "
            f"{shots(cost['shots_for_target']):>11} {shots(cost['shots_for_target_noisy']):>11}"
        )
    if unknown:
        print(f"({unknown} export job(s) not yet run: their costs appear once exported)")


def _print_waiting(plan) -> None:
    """Device jobs exported for an external device that still wait for returned counts."""
    from .stage_table import job_folder

    waiting = [ex for ex in plan.exports if not ex.get("key_reconcile")]
    if not waiting:
        return
    print(
        f"\n{len(waiting)} device job(s) await returned counts "
        "(eigensweep counts-template <key> writes an answer skeleton):"
    )
    for ex in waiting:
        print(
            f"  {ex['molecule']} {ex['point']} {ex['mapping']} tapered={ex['tapered']} "
            f"{ex['ansatz']} {ex['optimizer']} target={ex.get('target', 'generic')}: "
            f"{job_folder(ex['key_export'])}/"
        )


def _plan_json(path: Path, plan, results: Path, store: Path | None = None) -> dict:
    """Machine-readable plan: study, skipped combinations, every stage job with its status."""
    return {
        "config": str(path),
        "study": plan.study,
        "store": str(store) if store else None,
        "skipped": plan.skipped,
        "rows": [
            {k: v for k, v in r.items() if not k.startswith("key_")} | {"key": r["key"]}
            for r in plan.rows
        ],
        "jobs": [
            {**node.as_dict(), "status": _status(node, results, store).split()[0]}
            for node in plan.nodes.values()
        ],
    }


def _print_costs(plan, results: Path) -> None:
    """Qubits, terms, measurement groups and shots per problem (known once its taper stage ran)."""
    from .store import read_stage

    seen: dict[str, dict] = {}
    for row in plan.rows:
        seen.setdefault(row["key_taper"], row)
    print("\nmeasurement cost per qubit problem (shots for a 1.6 mHa standard error):")
    print(
        f"{'molecule':<10} {'point':<14} {'mapping':<14} {'taper':<6} {'qubits':>6} {'terms':>6} "
        f"{'groups':>6} {'shots (1-norm bound)':>21} {'shots (variance at HF)':>23}"
    )
    unknown = 0
    for key, row in seen.items():
        f = results / "taper" / f"{key}.h5"
        try:
            m = read_stage(f, stage="taper", key=key).meta
        except EigensweepError:
            unknown += 1
            continue
        var = m.get("shots_variance_at_reference")
        print(
            f"{row['molecule']:<10} {row['point']:<14} {row['mapping']:<14} {str(row['tapered']):<6} "
            f"{m['n_qubits']:>6} {m['n_terms']:>6} {m['n_qwc_groups']:>6} "
            f"{m['shots_one_norm_bound']:>21.3e} {(f'{var:.3e}' if var else '-'):>23}"
        )
    if unknown:
        print(f"({unknown} problem(s) not yet mapped: costs appear once their taper stage has run)")


PROFILE_ALIASES = {"local": "default"}  # the local profile's name before Snakemake's own
#: The job group of every stage rule in a grouped profile (profiles/slurm/config.yaml).
GROUP = "point"


def _profile_dir(profile: str | None) -> Path:
    from .paths import repo_root

    profile = PROFILE_ALIASES.get(profile or "default", profile or "default")
    prof_dir = Path(profile) if Path(profile).is_dir() else repo_root() / "profiles" / profile
    if not (prof_dir / "config.yaml").is_file():
        raise EigensweepError(
            f"--profile {profile}: no such profile; use default, slurm, slurm-batch or a folder with config.yaml"
        )
    return prof_dir


def _profile_groups(prof_dir: Path) -> bool:
    """True when the profile puts stage rules into job groups (a cluster profile)."""
    import yaml

    doc = yaml.safe_load((prof_dir / "config.yaml").read_text()) or {}
    return bool(doc.get("groups"))


def _snakemake_cmd(
    args, config: Path, store: Path | None = None, unlock: bool = False, extra=()
) -> list[str]:
    from .paths import repo_root

    root = repo_root()
    cmd = [
        sys.executable,
        "-m",
        "snakemake",
        "--snakefile",
        str(root / "Snakefile"),
        "--config",
        f"sweep={config.resolve()}",
        *([f"store={store}"] if store is not None else []),
        "--directory",
        str(Path.cwd()),
    ]
    prof_dir = _profile_dir(args.profile)
    cmd += ["--workflow-profile", str(prof_dir)]
    if (prof_dir / "jobscript.sh").is_file():  # a cluster profile's job script template
        cmd += ["--jobscript", str(prof_dir / "jobscript.sh")]
    if unlock:
        return [*cmd, "--unlock"]
    cmd += ["--cores", str(args.cores or os.cpu_count() or 1)]
    if args.dry_run:
        cmd.append("--dry-run")
    return cmd + list(extra) + list(args.snakemake_args or [])


def cmd_run(args) -> int:
    from . import runguard
    from .store import store_in_use, store_root

    path, cfg, plan = _load_plan(args.config, force=args.force)
    store = _store_of(args, cfg)
    if store is not None:
        store = store_root(store)
    if args.dry_run:
        return _run_snakemake(args, path, plan, None, store)
    # The folder lock (src/eigensweep/runguard.py), held from here until Snakemake has ended;
    # a second run waits for the first.
    lock = runguard.acquire(say=lambda m: print(m, flush=True))
    in_use = store_in_use(store) if store is not None else None
    try:
        return _run_snakemake(args, path, plan, lock, store)
    finally:
        if in_use is not None:
            in_use.close()
        runguard.release(lock)


def _run_snakemake(args, path: Path, plan, lock, store: Path | None = None) -> int:
    from . import runguard
    from .stage_table import stage_path
    from .store import link_stored, register_study

    results = Path("results")
    if lock is not None:
        runguard.clean_tmp(results)
    status = {key: _status(node, results, store) for key, node in plan.nodes.items()}
    stored = [plan.nodes[k] for k, st in status.items() if st == "stored"]
    pending = [plan.nodes[k] for k, st in status.items() if st not in ("cached", "stored")]
    damaged = [plan.nodes[k] for k, st in status.items() if st.startswith("damaged")]
    from_store = f", {len(stored)} from the store {store}" if store is not None else ""
    print(
        f"eigensweep: {path}: {len(plan.rows)} optimize jobs in {len(plan.nodes)} stage jobs; "
        f"{len(plan.nodes) - len(pending) - len(stored)} cached{from_store}, "
        f"{len(pending)} to run",
        flush=True,
    )
    if store is not None and lock is not None:
        for node in stored:
            link_stored(store, node.stage, node.key, results)
        for node in pending:  # a link into a store that no longer holds the key
            f = stage_path(node.stage, node.key, results)
            if f.is_symlink() and not f.exists():
                f.unlink()
        register_study(store, results)
    if damaged and lock is not None:
        moved = runguard.quarantine(damaged, results, store)
        print(
            f"eigensweep: {len(damaged)} damaged stage file(s) moved to {moved} and will be "
            "recomputed",
            flush=True,
        )
    env = dict(os.environ)
    # one BLAS/OpenMP thread per stage job (jobs run in threads of one Snakemake process)
    for var in ("OPENBLAS_NUM_THREADS", "OMP_NUM_THREADS", "MKL_NUM_THREADS"):
        env.setdefault(var, "1")
    if lock is None:
        env[runguard.DRY_RUN_ENV] = "1"
    else:
        env[runguard.LOCK_FD_ENV] = str(lock.fileno())
        env[runguard.VERIFIED_ENV] = "1"
        if runguard.stale_snakemake_lock():
            # Under the folder lock no Snakemake can be running here: the lock is a leftover
            # of a killed run. Snakemake's own --unlock removes it.
            print("eigensweep: removing the stale Snakemake lock of a killed run", flush=True)
            subprocess.run(
                _snakemake_cmd(args, path, store, unlock=True),
                env=env,
                pass_fds=(lock.fileno(),),
                capture_output=True,
            )
    extra: list[str] = []
    if _profile_groups(_profile_dir(args.profile)):
        from .resources import batch_plan

        todo = {n.key for n in pending}
        bp = batch_plan(plan, args.batch_minutes, todo, cores=args.cores or os.cpu_count() or 1)
        print(
            f"eigensweep: {len(bp['batches'])} scheduler job(s) for {len(todo)} stage jobs "
            f"({bp['per_batch']} point chain(s) each, target {args.batch_minutes:g} min)",
            flush=True,
        )
        extra = ["--group-components", f"{GROUP}={bp['per_batch']}"]
    cmd = _snakemake_cmd(args, path, store, extra=extra)
    t0 = time.perf_counter()
    if args.dry_run:
        # the dry run's listing is the point: shown as is
        return subprocess.run(cmd, env=env).returncode
    from .display import RunDisplay, run_log_path

    display = RunDisplay(plan, pending, results, run_log_path(), verbose=args.verbose)
    rc, interrupted = _supervise(cmd, env, lock, display)
    dt = time.perf_counter() - t0
    if interrupted:
        if lock is not None and runguard.stale_snakemake_lock():
            # a Snakemake killed after the grace period leaves its lock; we still hold the
            # folder lock, so it is stale: Snakemake's own --unlock removes it
            subprocess.run(
                _snakemake_cmd(args, path, store, unlock=True),
                env=env,
                pass_fds=(lock.fileno(),),
                capture_output=True,
            )
        raise KeyboardInterrupt
    if rc != 0:
        print(
            f"eigensweep: the sweep stopped with errors after {dt:.1f} s; finished stages are "
            "kept, rerun to resume",
            file=sys.stderr,
        )
        return rc
    print(
        f"eigensweep: done in {dt:.1f} s; summary: results/{plan.study}/summary.csv, "
        f"plots: results/{plan.study}/plots/"
    )
    _print_waiting(plan)
    return 0


def _die_with_parent(parent: int) -> None:
    """preexec_fn of the Snakemake child: the kernel kills it when this process dies (Linux
    PR_SET_PDEATHSIG), so a SIGKILL of ``eigensweep run`` leaves no Snakemake behind."""
    import ctypes
    import signal

    try:
        libc = ctypes.CDLL(None, use_errno=True)
        libc.prctl(1, signal.SIGKILL)  # PR_SET_PDEATHSIG = 1
    except (OSError, AttributeError):  # not Linux: no parent-death signal
        return
    if os.getppid() != parent:  # the parent died before prctl took effect
        os._exit(1)


#: seconds Snakemake gets to stop after a forwarded SIGINT/SIGTERM before it is killed
STOP_GRACE_S = 60


def _supervise(cmd: list[str], env: dict, lock, display) -> tuple[int, bool]:
    """Run Snakemake as a child that dies with this process, its output through the run
    display; SIGINT and SIGTERM are forwarded to it and waited for. Returns (exit status,
    interrupted)."""
    import signal
    import threading

    from .display import run_engine

    parent = os.getpid()
    procs: list[subprocess.Popen] = []
    got: list[int] = []

    def start(args, **kw):
        proc = subprocess.Popen(
            args,
            env=env,
            pass_fds=() if lock is None else (lock.fileno(),),
            # its own session: a terminal's Ctrl-C reaches it once, forwarded from here
            start_new_session=True,
            preexec_fn=lambda: _die_with_parent(parent),
            **kw,
        )
        procs.append(proc)
        return proc

    def kill_after_grace():
        # Snakemake normally stops within seconds of a forwarded signal; if it does not,
        # its whole session is killed (stage writes are atomic, so nothing partial is kept)
        for proc in procs:
            if proc.poll() is None:
                try:
                    os.killpg(proc.pid, signal.SIGKILL)
                except ProcessLookupError:
                    pass

    def forward(signum, frame):
        got.append(signum)
        for proc in procs:
            proc.send_signal(signum)
        if len(got) == 1:
            timer = threading.Timer(STOP_GRACE_S, kill_after_grace)
            timer.daemon = True
            timer.start()

    old = {s: signal.signal(s, forward) for s in (signal.SIGINT, signal.SIGTERM)}
    try:
        rc = run_engine(cmd, display, start=start)
    finally:
        for s, h in old.items():
            signal.signal(s, h)
    return rc, bool(got)


def cmd_show(args) -> int:
    from .store import read_stage

    sd = read_stage(args.file)
    if args.json:
        doc = {
            "file": str(args.file),
            "stage": sd.stage,
            "key": sd.key,
            "attributes": {
                k: sd.attrs.get(k)
                for k in ("format_version", "stage_version", "created", "host", "wall_s")
            },
            "parents": sd.parents,
            "software": json.loads(sd.attrs.get("software") or "{}"),
            "parameters": sd.params,
            "arrays": {
                n: {"dtype": str(a.dtype), "shape": list(a.shape)}
                for n, a in sorted(sd.arrays.items())
            },
            "results": sd.meta,
        }
        print(json.dumps(doc, indent=1, default=_json_scalar))
        return 0
    print(f"{args.file}: eigensweep stage file, stage {sd.stage}, key {sd.key}")
    for k in ("format_version", "stage_version", "created", "host", "wall_s"):
        print(f"  {k}: {sd.attrs.get(k)}")
    print(f"  parents: {json.dumps(sd.parents)}")
    print(f"  software: {sd.attrs.get('software')}")
    print(f"  parameters: {json.dumps(sd.params, sort_keys=True)}")
    print("  arrays:")
    for name, a in sorted(sd.arrays.items()):
        print(f"    {name:<24} {str(a.dtype):<8} {a.shape}")
    print("  results:")
    for k, v in sd.meta.items():
        text = json.dumps(v)
        print(f"    {k}: {text if len(text) < 200 else text[:197] + '...'}")
    return 0


def _json_scalar(v):
    """numpy scalars (HDF5 attributes) as plain JSON numbers."""
    return v.item() if hasattr(v, "item") else str(v)


def cmd_report(args) -> int:
    path, cfg, plan = _load_plan(args.config)
    print(f"eigensweep: report of the sweep of {path}", flush=True)
    args.output = args.output or f"results/{plan.study}/report.html"
    args.profile, args.cores, args.dry_run, args.snakemake_args = (
        "default",
        1,
        False,
        ["--report", args.output],
    )
    proc = subprocess.run(_snakemake_cmd(args, path))
    if proc.returncode == 0:
        print(f"eigensweep: report written to {args.output}")
    return proc.returncode


def cmd_archive(args) -> int:
    from .archive import ARCHIVE_PATTERN, make_archive

    path, cfg, plan = _load_plan(args.config)
    print(f"eigensweep: archiving the sweep of {path}", flush=True)
    out = Path(args.output or ARCHIVE_PATTERN.format(stamp=time.strftime("%Y%m%d-%H%M%S")))
    make_archive(
        plan,
        cfg,
        path,
        out,
        results="results",
        title=args.title,
        authors=args.author or (),
        license=args.license,
    )
    print(
        f"eigensweep: wrote {out} ({out.stat().st_size / 1e6:.1f} MB); check it with: eigensweep verify {out}"
    )
    return 0


def cmd_verify(args) -> int:
    from .archive import verify_archive

    rep = verify_archive(
        args.archive,
        stage=None if args.stage == "none" else args.stage,
        key=args.key,
        all_stages=args.all,
    )
    print(f"eigensweep: {args.archive}: {rep.n_files} files match their SHA-256")
    print(
        f"eigensweep: exactly the {rep.n_stage_files} stage files of the archived config's plan; "
        f"{', '.join(rep.tables)} re-derived from them and identical"
    )
    if rep.rerun_keys:
        print(
            f"eigensweep: re-ran {len(rep.rerun_keys)} stage job(s) from archived inputs "
            f"({', '.join(rep.rerun_keys[:3])}{', ...' if len(rep.rerun_keys) > 3 else ''}): "
            f"largest difference {rep.max_abs_diff:.3g}"
        )
    print("eigensweep: archive verified")
    return 0


def _job_folder(job: str) -> Path:
    """The exported job folder named by ``job``: a folder, its ``.h5`` or an export key;
    its export stage file is verified."""
    from .stage_table import job_folder
    from .store import read_stage

    folder = Path(job)
    if folder.suffix == ".h5":
        folder = folder.with_suffix("")
    if not (folder / "manifest.json").is_file():
        candidate = job_folder(job)
        if not (candidate / "manifest.json").is_file():
            raise EigensweepError(
                f"{job[:60]}: no exported job there (manifest.json missing); give results/export/<key> "
                "or the export key from results/device_summary.csv or 'eigensweep plan'"
            )
        folder = candidate
    read_stage(folder.with_suffix(".h5"), stage="export", key=folder.name)
    return folder


def cmd_import_counts(args) -> int:
    from .device import import_results
    from .stage_table import returned_path

    folder = _job_folder(args.job)
    dest = returned_path(folder.name)
    import_results(args.file, folder, dest, qubit0=args.qubit0)
    print(
        f"eigensweep: imported {args.file} -> {dest}; the next 'eigensweep run' reconciles this point "
        "(config device.kind must be external)"
    )
    return 0


def cmd_counts_template(args) -> int:
    from .device import normalise_results
    from .device.manifest import load_manifest
    from .store import atomic_write_text

    folder = _job_folder(args.job)
    manifest = load_manifest(folder)
    out = Path(args.output or f"{folder.name}-counts.json")
    if out.exists():
        raise EigensweepError(f"{out}: already exists; choose another --output or move it away")
    empty = {rec["circuit_id"]: {} for rec in manifest["circuits"]}
    template = normalise_results(empty, manifest, device="")
    atomic_write_text(out, json.dumps(template, indent=1) + "\n")
    print(
        f"eigensweep: wrote {out} for job {folder} ({len(empty)} circuits, ids and SHA-256 filled "
        "in); fill each 'counts' with the measured bitstrings (qubit 0 first, docs/counts-format.md) "
        f"and 'device', then: eigensweep import-counts {out} --job {folder.name}"
    )
    return 0


def _store_for_command(args) -> Path:
    """``--store``, else the ``store`` of ``--config``, else the current study's pointer."""
    from .store import read_pointer

    if args.store:
        return Path(args.store).expanduser().resolve()
    if args.config:
        from .config import load_config

        store = _store_of(args, load_config(args.config))
        if store is None:
            raise EigensweepError(f"{args.config}: names no store; give --store DIR")
        return store
    store = read_pointer("results")
    if store is None:
        raise EigensweepError(
            "no --store given and no results/store.json in this folder; give --store DIR"
        )
    return store


def _mb(n: int) -> str:
    return f"{n / 1e6:.1f} MB"


def cmd_store(args) -> int:
    from .store import prune_store, store_usage

    root = _store_for_command(args)
    if not root.is_dir():
        raise EigensweepError(f"store {root}: no such folder; check --store")
    if args.action == "list":
        usage = store_usage(root)
        print(
            f"store {root}: {len(usage.entries)} stage jobs, {_mb(sum(e.size for e in usage.entries))}, "
            f"used by {len(usage.studies)} study folder(s)"
        )
        print(f"{'stage':<12} {'files':>6} {'MB':>9} {'unreferenced':>13}")
        for stage in STAGE_NAMES:
            es = [e for e in usage.entries if e.stage == stage]
            if es:
                print(
                    f"{stage:<12} {len(es):>6} {sum(e.size for e in es) / 1e6:>9.1f} "
                    f"{sum(1 for e in es if not e.studies):>13}"
                )
        for folder in usage.studies:
            print(f"  study folder: {folder}")
        if args.verbose:
            for e in usage.entries:
                print(f"{e.stage:<12} {e.key}  {e.size:>10} B  studies: {e.studies}")
        return 0
    usage = prune_store(root, delete=args.yes)
    gone = usage.unreferenced
    size = sum(e.size for e in gone)
    for e in gone:
        print(f"{'removed' if args.yes else 'would remove'}: {e.stage}/{e.key} ({e.size} B)")
    verb = "removed" if args.yes else "would remove"
    print(
        f"store {root}: {verb} {len(gone)} stage job(s) no study refers to ({_mb(size)}), "
        f"{len(usage.litter)} leftover temporary/lock file(s), {len(usage.gone)} registration(s) "
        f"of removed study folders; {len(usage.entries) - len(gone)} kept, used by "
        f"{len(usage.studies)} study folder(s)"
    )
    if not args.yes and (gone or usage.litter or usage.gone):
        print("eigensweep: dry run; nothing deleted. Run again with --yes to delete")
    return 0


def build_parser() -> argparse.ArgumentParser:
    ap = argparse.ArgumentParser(
        prog="eigensweep",
        description="Cached variational-eigensolver sweeps for molecules.",
        epilog=EXIT_CODES,
        formatter_class=argparse.RawDescriptionHelpFormatter,
    )
    ap.add_argument("--debug", action="store_true", help="show tracebacks for errors")
    ap.add_argument("--version", action="version", version=f"eigensweep {_version()}")
    # --debug is accepted after the subcommand too (SUPPRESS keeps the top-level value)
    common = argparse.ArgumentParser(add_help=False)
    common.add_argument(
        "--debug", action="store_true", default=argparse.SUPPRESS, help="show tracebacks"
    )
    sub = ap.add_subparsers(dest="command", required=True)

    def add(name: str, **kw) -> argparse.ArgumentParser:
        return sub.add_parser(name, parents=[common], **kw)

    p = add("run", help="run the sweep (Snakemake), computing only what is not cached")
    p.add_argument("--config", help=f"sweep configuration (YAML); default {DEFAULT_CONFIG}")
    p.add_argument("--cores", type=int, help="cores to use (default: all)")
    p.add_argument(
        "--profile",
        help="Snakemake profile: default (local machine), slurm (Slurm executor plugin), "
        "slurm-batch (one interpreter per Slurm job), or a folder",
    )
    p.add_argument("-n", "--dry-run", action="store_true", help="show what would run")
    p.add_argument("--force", action="store_true", help="run problems above the config's limits")
    p.add_argument("--store", help=STORE_HELP)
    p.add_argument(
        "-v",
        "--verbose",
        action="store_true",
        help="show Snakemake's full log live (default: one progress line; the log goes to "
        "logs/run-<time>.log)",
    )
    p.add_argument(
        "--batch-minutes",
        type=float,
        default=30.0,
        help="grouped (cluster) profiles: target run time of one scheduler job (default 30)",
    )
    p.add_argument("snakemake_args", nargs=argparse.REMAINDER, help="after --: passed to Snakemake")
    p.set_defaults(func=cmd_run)

    p = add("plan", help="list the stage jobs of a sweep: cached or pending")
    p.add_argument("--config", help=f"sweep configuration (YAML); default {DEFAULT_CONFIG}")
    p.add_argument("-v", "--verbose", action="store_true", help="one line per stage job")
    p.add_argument("--force", action="store_true", help="accept problems above the limits")
    p.add_argument("--json", action="store_true", help="print the plan as JSON")
    p.add_argument("--store", help=STORE_HELP)
    p.add_argument(
        "--profile", help="with a grouped profile (slurm): the scheduler jobs it would submit"
    )
    p.add_argument("--cores", type=int, help="cores per scheduler job (default: this host's)")
    p.add_argument(
        "--batch-minutes",
        type=float,
        default=30.0,
        help="target run time of one scheduler job (default 30)",
    )
    p.set_defaults(func=cmd_plan)

    p = add(
        "store",
        help="list a shared stage store, or remove its files that no study refers to "
        "(dry run unless --yes)",
    )
    p.add_argument("action", choices=("list", "prune"))
    p.add_argument("--store", help="the store (default: the config's store, or results/store.json)")
    p.add_argument("--config", help="take the store from this sweep configuration")
    p.add_argument("--yes", action="store_true", help="prune: really delete (default: dry run)")
    p.add_argument("-v", "--verbose", action="store_true", help="list: one line per stage job")
    p.set_defaults(func=cmd_store)

    p = add("report", help="write the Snakemake HTML report of a finished sweep")
    p.add_argument("--config", help=f"sweep configuration (YAML); default {DEFAULT_CONFIG}")
    p.add_argument("--output", help="report file (default results/<study>/report.html)")
    p.set_defaults(func=cmd_report)

    p = add(
        "archive",
        help="pack exactly this sweep (plan's stage files, regenerated tables and plots, "
        "workflow, environment) into a runnable tar.gz",
    )
    p.add_argument("--config", help=f"sweep configuration (YAML); default ./{DEFAULT_CONFIG}")
    p.add_argument("--output", help="archive file (default eigensweep-archive-<time>.tar.gz)")
    p.add_argument("--title", help="title of the archive (RO-Crate name)")
    p.add_argument(
        "--author",
        action="append",
        help="author, 'Name' or 'Name <ORCID>' (repeat for several)",
    )
    p.add_argument("--license", help="licence of the archived data, e.g. CC-BY-4.0")
    p.set_defaults(func=cmd_archive)

    p = add(
        "verify",
        help="check an archive: hashes, plan, re-derived tables; re-run stage jobs from it",
    )
    p.add_argument("archive")
    p.add_argument(
        "--stage",
        default="hamiltonian",
        choices=[*STAGE_NAMES, "none"],
        help="re-run the first job of this stage (default hamiltonian; none = no re-run)",
    )
    p.add_argument("--key", help="re-run this stage job (a key from the archive's plan.json)")
    p.add_argument("--all", action="store_true", help="re-run every stage job (slow)")
    p.set_defaults(func=cmd_verify)

    p = add(
        "import-counts", help="check returned device counts against an exported job and import them"
    )
    p.add_argument(
        "file", help="returned results in eigensweep's JSON format (docs/counts-format.md)"
    )
    p.add_argument("--job", required=True, help="export key or folder results/export/<key>")
    p.add_argument(
        "--qubit0",
        choices=("left", "right"),
        default="left",
        help="which end of each returned bitstring is qubit 0: left (eigensweep's order, the "
        "default) or right (tools that print a register highest bit first); right is "
        "reversed on import",
    )
    p.set_defaults(func=cmd_import_counts)

    p = add(
        "counts-template",
        help="write an answer skeleton for an exported device job (ids and hashes filled in)",
    )
    p.add_argument("job", help="export key or folder results/export/<key>")
    p.add_argument("--output", help="file to write (default <export key>-counts.json)")
    p.set_defaults(func=cmd_counts_template)

    p = add("show", help="provenance and contents of a stage file")
    p.add_argument("file")
    p.add_argument("--json", action="store_true", help="print everything as JSON")
    p.set_defaults(func=cmd_show)
    return ap


def main(argv: list[str] | None = None) -> int:
    args = build_parser().parse_args(argv)
    if getattr(args, "snakemake_args", None) and args.snakemake_args[:1] == ["--"]:
        args.snakemake_args = args.snakemake_args[1:]
    if args.debug:
        os.environ["EIGENSWEEP_DEBUG"] = "1"
    try:
        return args.func(args)
    except EigensweepError as exc:
        if args.debug:
            raise
        print(f"eigensweep: {exc}", file=sys.stderr)
        return 2
    except KeyboardInterrupt:
        print("eigensweep: interrupted; finished stages are kept, rerun to resume", file=sys.stderr)
        return 130
    except BrokenPipeError:
        # the reader went away (eigensweep plan | head): stop quietly; send what is still
        # buffered to /dev/null so the interpreter's final flush does not fail again
        devnull = os.open(os.devnull, os.O_WRONLY)
        os.dup2(devnull, sys.stdout.fileno())
        return 141


if __name__ == "__main__":  # pragma: no cover
    sys.exit(main())
