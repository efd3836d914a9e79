rule collect:
    input:
        optimize=get_optimize_files(),
        integrals=get_integrals_files(),
        reconcile=get_reconcile_files(),
    output:
        summary=report(
            "results/summary.csv", caption="../report/summary.rst", category="Summary"
        ),
        device=report(
            "results/device_summary.csv",
            caption="../report/summary.rst",
            category="Summary",
        ),
        plots=[
            report(f, caption="../report/plots.rst", category="Plots")
            for f in get_plot_files()
        ],
    log:
        "logs/collect.log",
    conda:
        "../../envs/eigensweep.yaml"
    threads: 1
    resources:
        mem_mb=2000,
        runtime=30,
    params:
        rows=get_rows(),
        accuracy_mha=get_accuracy_mha(),
        exports=get_exports(),
    script:
        "../scripts/collect.py"
