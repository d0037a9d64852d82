# Stage 4: figures from the gathered sweep only.  Figure settings (section
# `figures`) are params of this rule alone, so changing them redraws figures and
# runs no solver job.


rule plot:
    input:
        PLAN.sweep_file,
    output:
        PLAN.figure_files(),
    log:
        f"logs/{PLAN.name}/plot.log",
    params:
        study=tracked("figures"),
        gas_data=GAS_DATA,
        outdir=f"{PLAN.study_dir}/figures",
    threads: max(1, min(len(PLAN.families), workflow.cores or 1))  # one core per family's figures
    localrule: True
    script:
        "../scripts/plot.py"


rule figures:
    # `snakemake --cores 2 figures`: draw the figures (with --forcerun plot to redraw).
    input:
        PLAN.figure_files(),
    localrule: True
