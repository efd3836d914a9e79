"""Snakemake action of the export stage: unpack the job, call the library, write the stage file."""

from eigensweep.workflow_entry import run_stage_job

run_stage_job(snakemake, "export")  # noqa: F821 (injected by Snakemake)
