rule integrals:
    input:
        unpack(get_parent_files),
    output:
        "results/integrals/{key}.h5",
    log:
        "logs/integrals/{key}.log",
    benchmark:
        "logs/benchmark/integrals/{key}.tsv"
    params:
        node=get_node,
    threads: 1
    resources:
        mem_mb=get_mem_mb,
        runtime=get_runtime,
    conda:
        "../../envs/eigensweep.yaml"
    script:
        "../scripts/integrals.py"
