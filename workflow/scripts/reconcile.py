"""Snakemake action of the reconcile stage: unpack the job, call the library, write the stage file."""

from eigensweep.workflow_entry import run_stage_job

run_stage_job(snakemake, "reconcile")  # noqa: F821 (injected by Snakemake)
