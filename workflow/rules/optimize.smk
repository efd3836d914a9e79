rule optimize:
    input:
        unpack(get_parent_files),
    output:
        "results/optimize/{key}.h5",
    log:
        "logs/optimize/{key}.log",
    benchmark:
        "logs/benchmark/optimize/{key}.tsv"
    conda:
        "../../envs/eigensweep.yaml"
    threads: 1
    resources:
        mem_mb=get_mem_mb,
        runtime=get_runtime,
    params:
        node=get_node,
    script:
        "../scripts/optimize.py"
