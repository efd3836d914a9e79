rule taper:
    input:
        unpack(get_parent_files),
    output:
        "results/taper/{key}.h5",
    log:
        "logs/taper/{key}.log",
    threads: 1
    resources:
        mem_mb=get_mem_mb,
        runtime=get_runtime,
    params:
        node=get_node,
    run:
        stage_job("taper", input, output, params, log, get_store())
