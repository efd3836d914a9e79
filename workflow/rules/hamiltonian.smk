rule hamiltonian:
    input:
        unpack(get_parent_files),
    output:
        "results/hamiltonian/{key}.h5",
    log:
        "logs/hamiltonian/{key}.log",
    benchmark:
        "logs/benchmark/hamiltonian/{key}.tsv"
    conda:
        "../../envs/eigensweep.yaml"
    threads: 1
    resources:
        mem_mb=get_mem_mb,
        runtime=get_runtime,
    params:
        node=get_node,
    script:
        "../scripts/hamiltonian.py"
