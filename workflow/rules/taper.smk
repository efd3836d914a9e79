rule taper:
    input:
        unpack(get_parent_files),
    output:
        "results/taper/{key}.h5",
    log:
        "logs/taper/{key}.log",
    benchmark:
        "logs/benchmark/taper/{key}.tsv"
    conda:
        "../../envs/eigensweep.yaml"
    threads: 1
    resources:
        mem_mb=get_mem_mb,
        runtime=get_runtime,
    params:
        node=get_node,
    script:
        "../scripts/taper.py"
