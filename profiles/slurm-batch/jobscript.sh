#!/bin/bash
# properties = {properties}
# Job script of profiles/slurm-batch (Snakemake's --jobscript template; `eigensweep run
# --profile slurm-batch` passes it). Snakemake fills in {exec_job}: the command that runs one
# job group in a Snakemake process of its own inside this Slurm job. Inside a cluster job
# Snakemake ignores profiles and does not pass --force-use-threads on, so its local executor
# would start one more Snakemake process per `run:` job of the group; the one edit below adds
# --force-use-threads, so every stage job of the group runs in worker threads of that one
# process (one interpreter, imports paid once per Slurm job). Nothing else is changed.
cmd=$(cat <<'EIGENSWEEP_EXEC_JOB'
{exec_job}
EIGENSWEEP_EXEC_JOB
)
exec bash -c "${{cmd/ -m snakemake / -m snakemake --force-use-threads }}"
