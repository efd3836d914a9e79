rule collect:
    input:
        optimize=get_optimize_files(),
        integrals=get_integrals_files(),
        reconcile=get_reconcile_files(),
    output:
        summary=report(
            get_study_file("summary.csv"),
            caption="../report/summary.rst",
            category="Summary",
        ),
        device=report(
            get_study_file("device_summary.csv"),
            caption="../report/summary.rst",
            category="Summary",
        ),
        analysis=get_study_file("analysis.csv"),
        seeds=report(
            get_study_file("seeds.csv"),
            caption="../report/summary.rst",
            category="Summary",
        ),
        states=report(
            get_study_file("states.csv"),
            caption="../report/summary.rst",
            category="Summary",
        ),
        readme=get_study_file("README.md"),
        plots=[
            report(f, caption="../report/plots.rst", category="Plots")
            for f in get_plot_files()
        ],
        pdfs=get_plot_files("pdf"),
        histograms=[
            report(
                directory(d),
                patterns=["{name}.png"],
                caption="../report/plots.rst",
                category="Device histograms",
            )
            for d in get_device_histogram_dirs()
        ],
    log:
        f"logs/collect/{get_study()}.log",
    threads: 1
    resources:
        mem_mb=2000,
        runtime=30,
    params:
        rows=get_rows(),
        accuracy_mha=get_accuracy_mha(),
        spectrum_point=get_spectrum_point(),
        exports=get_exports(),
        study=get_study(),
    run:
        collect_job(params, log)
