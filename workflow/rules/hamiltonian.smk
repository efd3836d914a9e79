rule hamiltonian:
    input:
        unpack(get_parent_files),
    output:
        "results/hamiltonian/{key}.h5",
    log:
        "logs/hamiltonian/{key}.log",
    threads: 1
    resources:
        mem_mb=get_mem_mb,
        runtime=get_runtime,
    params:
        node=get_node,
    run:
        stage_job("hamiltonian", input, output, params, log, get_store())
