rule optimize:
    input:
        unpack(get_parent_files),
    output:
        "results/optimize/{key}.h5",
    log:
        "logs/optimize/{key}.log",
    threads: 1
    resources:
        mem_mb=get_mem_mb,
        runtime=get_runtime,
    params:
        node=get_node,
    run:
        stage_job("optimize", input, output, params, log, get_store())
