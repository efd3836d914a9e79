"""Snakemake action of the integrals stage: unpack the job, call the library, write the stage file."""

from eigensweep.workflow_entry import run_stage_job

run_stage_job(snakemake, "integrals")  # noqa: F821 (injected by Snakemake)
