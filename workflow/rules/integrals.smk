rule integrals:
    input:
        unpack(get_parent_files),
    output:
        "results/integrals/{key}.h5",
    log:
        "logs/integrals/{key}.log",
    threads: 1
    resources:
        mem_mb=get_mem_mb,
        runtime=get_runtime,
    params:
        node=get_node,
    run:
        stage_job("integrals", input, output, params, log, get_store())
