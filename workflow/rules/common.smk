# Helpers shared by all stages: validate the config, build the plan, look nodes up by key.
# The parse stays light: config, plan and resource estimates only (no PySCF, no OpenFermion);
# the chemistry pre-flight runs once in `eigensweep run`/`plan`, not at every parse.
import os
import sys
from pathlib import Path

# Stage jobs request one thread each; keep BLAS/OpenMP pools to that so parallel jobs do not
# oversubscribe cores (measured: L-BFGS on LiH about 4x faster on 2 cores with one thread).
# Set before NumPy is first imported by anything below.
for _var in ("OPENBLAS_NUM_THREADS", "OMP_NUM_THREADS", "MKL_NUM_THREADS"):
    os.environ.setdefault(_var, "1")

from eigensweep import runguard
from eigensweep.config import DEFAULT_CONFIG, SWEEP_KEY, workflow_config
from eigensweep.errors import EigensweepError
from eigensweep.paths import STORE_KEY, sweep_store
from eigensweep.plan import build_plan, parent_files
from eigensweep.resources import stage_resources
from eigensweep.store import store_in_use, store_root
from eigensweep.study import DEVICE_HISTOGRAM_FOLDER, figure_stems, reconciled_exports
from eigensweep.workflow_entry import collect_job, stage_job

# the config file names the study when `study:` is unset (results/<study>/)
CONFIG_PATH = config.get(SWEEP_KEY) or (
    workflow.overwrite_configfiles[0]
    if workflow.overwrite_configfiles
    else DEFAULT_CONFIG
)

try:
    # the sweep is read by eigensweep's own loader (plain data, nothing evaluated)
    CFG = workflow_config(config, workflow.overwrite_configfiles)
    PLAN = build_plan(CFG, base_dir=Path.cwd(), config_path=CONFIG_PATH)
    # the shared stage store (--config store=DIR or the sweep's `store:`), held shared while
    # this Snakemake runs (prune refuses meanwhile); jobs read it from config[STORE_KEY]
    STORE = sweep_store(config.get(STORE_KEY), CFG)
    if STORE is not None:
        config[STORE_KEY] = str(store_root(STORE))
        STORE_IN_USE = store_in_use(STORE)
    if workflow.is_main_process and not os.environ.get(runguard.DRY_RUN_ENV):
        # One sweep per folder (src/eigensweep/runguard.py): `eigensweep run` passes its lock
        # down; a plain `snakemake` takes it here, or refuses in one line while another runs.
        runguard.workflow_lock()
        if not os.environ.get(runguard.VERIFIED_ENV):
            # Plain `snakemake`: check every stage file before the DAG is built and move
            # damaged ones aside, so Snakemake rebuilds exactly those.
            runguard.clean_tmp()
            runguard.verify_and_quarantine(
                PLAN, say=lambda m: print(m, file=sys.stderr), store=STORE
            )
except EigensweepError as exc:
    sys.stderr.write(f"eigensweep: {exc}\n")
    sys.exit(1)

# Stage files present now are verified (above, or by `eigensweep run` just before): their
# keys are the hash of everything that defines them, so nothing upstream can make them stale.
DONE = {
    key
    for key, node in PLAN.nodes.items()
    if Path(f"results/{node.stage}/{key}.h5").is_file()
}


def get_store():
    """The shared stage store's folder (str) for the rules' `run:` blocks, or None."""
    return config.get(STORE_KEY) if STORE is not None else None


def get_node(wildcards):
    """Parameters of one stage job (the plan node, as a plain dict)."""
    return PLAN.node(wildcards.key).as_dict()


def get_parent_files(wildcards):
    """Parent stage files of one stage job, by role; none for a verified stage file.

    Reruns are decided by content keys, not by Snakemake's view of the files: a stage file
    that exists (and was verified) is done whatever its parents' state, so it names no inputs
    and a rebuilt parent (a damaged file, a restore from backup) never reruns its valid
    descendants. Only missing stage files depend on their parents."""
    node = PLAN.node(wildcards.key)
    if node.key in DONE:
        return {}
    return parent_files(node)


def get_mem_mb(wildcards, attempt):
    """Memory request (MB) grown from the problem size; doubled on each retry."""
    return stage_resources(PLAN.node(wildcards.key), PLAN)["mem_mb"] * attempt


def get_runtime(wildcards, attempt):
    """Runtime request (minutes) grown from the problem size; doubled on each retry."""
    return stage_resources(PLAN.node(wildcards.key), PLAN)["runtime"] * attempt


def get_optimize_files(wildcards=None):
    return [f"results/optimize/{row['key']}.h5" for row in PLAN.rows]


def get_integrals_files(wildcards=None):
    return sorted({f"results/integrals/{row['key_integrals']}.h5" for row in PLAN.rows})


def get_reconcile_files(wildcards=None):
    return [
        f"results/reconcile/{ex['key_reconcile']}.h5"
        for ex in PLAN.exports
        if ex["key_reconcile"]
    ]


def get_export_files(wildcards=None):
    return [f"results/export/{ex['key_export']}.h5" for ex in PLAN.exports]


def get_exports(wildcards=None):
    return PLAN.exports


def get_rows(wildcards=None):
    return PLAN.rows


def get_accuracy_mha(wildcards=None):
    return CFG["collect"]["accuracy_mha"]


def get_spectrum_point(wildcards=None):
    return CFG["collect"]["spectrum_point"]


def get_study(wildcards=None):
    return PLAN.study


def get_study_file(name):
    """A file of this study's folder: results/<study>/<name>."""
    return f"results/{PLAN.study}/{name}"


def get_plot_files(ext="png"):
    """The study's figures in one format (every figure is written as PNG and PDF)."""
    mols = list(dict.fromkeys(row["molecule"] for row in PLAN.rows))
    stems = figure_stems(mols, PLAN.exports)
    return [get_study_file(f"plots/{stem}.{ext}") for stem in stems]


def get_device_histogram_dirs():
    """The histogram folder of the study, when it has reconciled device jobs (else none)."""
    if not reconciled_exports(PLAN.exports):
        return []
    return [get_study_file(f"plots/{DEVICE_HISTOGRAM_FOLDER}")]


def get_stage_files():
    """Every stage file of the plan: a missing one is rebuilt even when its children exist
    (Snakemake rebuilds a missing intermediate file only if it is a target)."""
    return [f"results/{node.stage}/{key}.h5" for key, node in PLAN.nodes.items()]


def get_final_outputs():
    return (
        [
            get_study_file(name)
            for name in (
                "summary.csv",
                "device_summary.csv",
                "analysis.csv",
                "README.md",
            )
        ]
        + get_plot_files()
        + get_device_histogram_dirs()
        + get_export_files()
        + get_stage_files()
    )
