rule reconcile:
    input:
        unpack(get_parent_files),
    output:
        "results/reconcile/{key}.h5",
    log:
        "logs/reconcile/{key}.log",
    benchmark:
        "logs/benchmark/reconcile/{key}.tsv"
    params:
        node=get_node,
    threads: 1
    resources:
        mem_mb=get_mem_mb,
        runtime=get_runtime,
    conda:
        "../../envs/eigensweep.yaml"
    script:
        "../scripts/reconcile.py"
