rule optimize:
    input:
        unpack(get_parent_files),
    output:
        "results/optimize/{key}.h5",
    log:
        "logs/optimize/{key}.log",
    benchmark:
        "logs/benchmark/optimize/{key}.tsv"
    params:
        node=get_node,
    threads: 1
    resources:
        mem_mb=get_mem_mb,
        runtime=get_runtime,
    conda:
        "../../envs/eigensweep.yaml"
    script:
        "../scripts/optimize.py"
