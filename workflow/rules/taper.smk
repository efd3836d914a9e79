rule taper:
    input:
        unpack(get_parent_files),
    output:
        "results/taper/{key}.h5",
    log:
        "logs/taper/{key}.log",
    benchmark:
        "logs/benchmark/taper/{key}.tsv"
    params:
        node=get_node,
    threads: 1
    resources:
        mem_mb=get_mem_mb,
        runtime=get_runtime,
    conda:
        "../../envs/eigensweep.yaml"
    script:
        "../scripts/taper.py"
