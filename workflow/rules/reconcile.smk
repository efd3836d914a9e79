rule reconcile:
    input:
        unpack(get_parent_files),
    output:
        "results/reconcile/{key}.h5",
    log:
        "logs/reconcile/{key}.log",
    benchmark:
        "logs/benchmark/reconcile/{key}.tsv"
    conda:
        "../../envs/eigensweep.yaml"
    threads: 1
    resources:
        mem_mb=get_mem_mb,
        runtime=get_runtime,
    params:
        node=get_node,
    script:
        "../scripts/reconcile.py"
