"""Snakemake action of the collect stage: summary.csv and plots."""

from eigensweep.workflow_entry import run_collect_job

run_collect_job(snakemake)  # noqa: F821 (injected by Snakemake)
