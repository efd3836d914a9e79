rule collect:
    input:
        optimize=get_optimize_files(),
        integrals=get_integrals_files(),
    output:
        summary="results/summary.csv",
        plots=get_plot_files(),
    log:
        "logs/collect.log",
    params:
        rows=get_rows(),
        accuracy_mha=get_accuracy_mha(),
    threads: 1
    resources:
        mem_mb=2000,
        runtime=30,
    conda:
        "../../envs/eigensweep.yaml"
    script:
        "../scripts/collect.py"
