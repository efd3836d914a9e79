rule export:
    input:
        unpack(get_parent_files),
    output:
        stage="results/export/{key}.h5",
        jobs=directory("results/export/{key}"),
    log:
        "logs/export/{key}.log",
    threads: 1
    resources:
        mem_mb=get_mem_mb,
        runtime=get_runtime,
    params:
        node=get_node,
    run:
        stage_job("export", input, output, params, log, get_store())
