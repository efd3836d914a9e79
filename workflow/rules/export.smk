rule export:
    input:
        unpack(get_parent_files),
    output:
        stage="results/export/{key}.h5",
        jobs=directory("results/export/{key}"),
    log:
        "logs/export/{key}.log",
    benchmark:
        "logs/benchmark/export/{key}.tsv"
    params:
        node=get_node,
    threads: 1
    resources:
        mem_mb=get_mem_mb,
        runtime=get_runtime,
    conda:
        "../../envs/eigensweep.yaml"
    script:
        "../scripts/export.py"
