rule reconcile:
    input:
        unpack(get_parent_files),
    output:
        "results/reconcile/{key}.h5",
    log:
        "logs/reconcile/{key}.log",
    threads: 1
    resources:
        mem_mb=get_mem_mb,
        runtime=get_runtime,
    params:
        node=get_node,
    run:
        stage_job("reconcile", input, output, params, log, get_store())
