# eigensweep: a variational-eigensolver sweep as a cached stage chain.
#   integrals -> hamiltonian -> taper -> optimize -> export -> reconcile -> collect
# Every stage file is results/<stage>/<key>.h5, key = hash of the stage's resolved
# parameters and its parents' keys (see src/eigensweep/plan.py).

from snakemake.utils import min_version

min_version("8.20")

# The sweep file: `--config sweep=FILE` (what `eigensweep run` passes), else config/config.yaml;
# workflow/rules/common.smk reads it with eigensweep's loader (see config/README.md).


report: "workflow/report/workflow.rst"


include: "workflow/rules/common.smk"


# stage keys are 16 hex digits (src/eigensweep/plan.py)
wildcard_constraints:
    key="[0-9a-f]{16}",


include: "workflow/rules/integrals.smk"
include: "workflow/rules/hamiltonian.smk"
include: "workflow/rules/taper.smk"
include: "workflow/rules/optimize.smk"
include: "workflow/rules/export.smk"
include: "workflow/rules/reconcile.smk"
include: "workflow/rules/collect.smk"


# On a cluster, collect (tables and plots from small files) runs in the submitting Snakemake.
localrules:
    collect,


rule all:
    default_target: True
    input:
        get_final_outputs(),
